"""``stillroom verify``: the Bell-diagonal model against the density-matrix re-simulation.

The re-simulation (optimise/verify.py on models/density.py, itself checked against
the qutip reference in tests/models/test_density.py) must agree with the model to
rounding where every wait is deterministic or harmless, and within statistical
error where waits are sampled and the model's waiting rule is exact (pairs that
wait only for raw pairs). The run without the twirl is checked against the qutip
reference chained step by step with full density matrices.
"""

from __future__ import annotations

import json
import math
import sys
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

from models import NodeNoise, Profile, Recipe, Round, parse_recipe
from optimise.cli import main
from optimise.verify import verify, waits_are_exact

try:
    from tests.reference import density_matrix as ref
except ModuleNotFoundError:  # plain `pytest` puts only this folder on sys.path
    sys.path.append(str(Path(__file__).resolve().parents[2]))
    from tests.reference import density_matrix as ref

from cli_support import validate

RAW = (0.85, 0.07, 0.03, 0.05)
GATES = dict(two_qubit=0.98, single_qubit=0.99, measurement=0.98)
# waits of about a tenth of T1: raw pairs every 1 ms on average, T1 = 20 ms
DECAYING = dict(t1_s=0.02, t2_s=0.012)
PROFILES = {
    # perfect memories: no wait changes a state
    "perfect memory": Profile(RAW, NodeNoise(**GATES), length_km=100.0, pair_rate_hz=1000.0),
    # an instant link and no classical delay: no time passes at all
    "no time": Profile(RAW, NodeNoise(**GATES, **DECAYING)),
    # an instant link: pairs decay only during the classical exchange
    "instant link": Profile(RAW, NodeNoise(**GATES, **DECAYING), length_km=100.0),
}
SAMPLED = Profile(RAW, NodeNoise(**GATES, **DECAYING), length_km=100.0, pair_rate_hz=1000.0)


def _random_recipe(rng, depth: int, allow_source: bool = True) -> Recipe:
    rounds = []
    for _ in range(depth):
        # few double-selection rotation triples: each costs a circuit compilation
        double = rng.random() < 0.2
        rotations = rng.choice([0, 2, 4], 3) if double else rng.integers(0, 6, 2)
        sacrificed = rng.choice(["raw", "same", "sub"] if allow_source else ["raw", "same"])
        source = None
        if sacrificed == "sub":
            source = _random_recipe(rng, int(rng.integers(1, 3)), allow_source=False)
        rounds.append(
            Round(
                "double" if double else "single",
                str(sacrificed),
                tuple(int(r) for r in rotations),
                source=source,
                twirl=bool(rng.random() < 0.2),
            )
        )
    return Recipe(tuple(rounds), raw_twirl=bool(rng.random() < 0.2))


def _assert_rows_agree(checked, rtol=1e-10):
    for row in checked.rows():
        assert row["standard_error"] == 0.0, row
        assert math.isclose(row["simulated"], row["model"], rel_tol=rtol, abs_tol=1e-12), row


@pytest.mark.parametrize("name", list(PROFILES))
def test_model_equals_exact_resimulation_on_random_recipes(name):
    profile = PROFILES[name]
    rng = np.random.default_rng(sum(map(ord, name)))
    checked_some = 0
    for _ in range(10):
        recipe = _random_recipe(rng, int(rng.integers(1, 4)))
        if not waits_are_exact(recipe, profile):
            continue  # random waits on purified pairs: sampled, tested below
        checked = verify(recipe, profile)
        assert checked.method == "exact"
        assert len(checked.step_labels) == len(checked.model.success_probabilities)
        _assert_rows_agree(checked)
        checked_some += 1
    assert checked_some >= 4


@pytest.mark.parametrize(("text", "samples"), [("pY^2", 3000), ("~pZ~.pX", 3000), ("dpZ.pY", 1500)])
def test_sampled_resimulation_agrees_within_error_where_the_model_is_exact(text, samples):
    # these pairs wait only for raw pairs, which the model averages exactly
    checked = verify(text, SAMPLED, samples=samples, seed=5)
    assert checked.method == "sampled"
    for row in checked.rows():
        assert row["standard_error"] > 0, row
        assert abs(row["difference"]) < 4.5 * row["standard_error"], row


def test_forced_sampling_without_decay_reproduces_states_exactly():
    # with perfect memories every sampled output is the same state: only the
    # costs vary from sample to sample; sources and twirls included
    profile = PROFILES["perfect memory"]
    for text in ["pY(sY).sX", "~sZ~^2"]:
        checked = verify(text, profile, samples=800, seed=3, sampled=True)
        assert checked.method == "sampled"
        for row in checked.rows():
            if row["figure"].startswith(("fidelity", "success")):
                assert row["standard_error"] < 1e-12, row
                assert abs(row["difference"]) < 1e-10, row
            else:
                assert abs(row["difference"]) < 4.5 * row["standard_error"], row


def _reference_chain(profile, *, twirled: bool) -> float:
    """pZ^2 on an instant link, step by step in the qutip reference.

    The kept pair waits the classical delay after each step (full Kraus maps);
    the twirled chain keeps only the Bell diagonal after each wait.
    """
    noise = profile.noise
    delay = profile.classical_delay_s

    def wait(rho):
        rho = ref.store(rho, wait_s=delay, t1_s=noise.t1_s, t2_s=noise.t2_s)[2]
        return ref.pair_state(ref.bell_diagonal(rho)[0]) if twirled else rho

    kept = ref.pair_state(profile.raw_pair)
    for _ in range(2):
        step = ref.two_to_one(
            kept,
            profile.raw_pair,
            two_qubit=noise.two_qubit,
            single_qubit=noise.single_qubit,
            measurement=noise.measurement,
        )
        kept = wait(step.rho)
    return ref.bell_diagonal(kept)[0][0]


def test_no_twirl_run_matches_the_reference_and_moves_when_memories_decay():
    profile = PROFILES["instant link"]
    checked = verify("pZ^2", profile)
    assert checked.method == "exact"
    assert checked.untwirled is not None
    assert_allclose(checked.twirled.fidelity, _reference_chain(profile, twirled=True), atol=1e-10)
    assert_allclose(
        checked.untwirled.fidelity, _reference_chain(profile, twirled=False), atol=1e-10
    )
    # amplitude damping leaves local Z terms that the next wait turns into
    # correlations: without the twirl the fidelity moves well beyond rounding
    # (waits of D / T1 = 0.025 here)
    assert checked.untwirled.fidelity - checked.twirled.fidelity > 1e-4
    assert checked.untwirled.coherence > 1e-3 and checked.twirled.coherence < 1e-12


@pytest.mark.parametrize("text", ["pZ^2", "sY.pX"])
def test_no_twirl_run_equals_the_twirled_one_with_perfect_memories(text):
    checked = verify(text, PROFILES["perfect memory"], untwirled=True)
    for row in checked.rows():
        assert abs(row["moved"]) < 1e-12, row


def test_sampled_no_twirl_difference_has_a_standard_error():
    checked = verify("sY^2", SAMPLED, samples=400, seed=2)
    assert checked.method == "sampled" and checked.untwirled is not None
    assert checked.fidelity_moved_se > 0


def test_verify_rejects_too_few_samples():
    with pytest.raises(ValueError, match="samples"):
        verify("sY", SAMPLED, samples=1)


# ----------------------------------------------------------------------------- command line


def test_cli_json_matches_the_python_api_and_the_schema(capsys):
    assert main(["verify", "pY^2", "--samples", "300", "--seed", "4", "--json"]) == 0
    document = json.loads(capsys.readouterr().out)
    validate(document, "verify")
    assert document["method"] == "sampled" and document["samples"] == 300
    from optimise.profiles import demo_profile

    expected = verify(parse_recipe("pY^2"), demo_profile(), samples=300, seed=4)
    assert document["twirled"]["fidelity"] == expected.twirled.fidelity
    assert document["model"]["fidelity"] == expected.model.fidelity
    assert [r["figure"] for r in document["rows"]] == [
        "fidelity F",
        "success round 1 pY",
        "success round 2 pY",
        "raw pairs / output",
        "time / output (s)",
    ]


def test_cli_prints_the_comparison_side_by_side(tmp_path, capsys):
    profile = tmp_path / "lab.toml"
    profile.write_text(
        'name = "lab"\n[raw_pair]\nwerner_fidelity = 0.8\n[operations]\ntwo_qubit = 0.99\n',
        encoding="utf-8",
    )
    assert main(["verify", "dejmps:2", str(profile)]) == 0
    out = capsys.readouterr().out
    assert "re-simulated with full density matrices, exact" in out
    assert "success round 2 sY" in out
    assert "memories are perfect" in out


def test_cli_bad_recipe_exits_2(capsys):
    assert main(["verify", "sY.q"]) == 2
    err = capsys.readouterr().err
    # one line; the caret diagram only with --verbose
    assert err.startswith("stillroom: cannot read recipe 'sY.q'") and err.count("\n") == 1
    assert main(["verify", "sY.q", "--verbose"]) == 2
    assert "^" in capsys.readouterr().err


def test_table_verify_adds_a_verified_column(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    assert main(["search", "--depth", "1", "--trials", "4", "--no-progress", "--json"]) == 0
    run_dir = json.loads(capsys.readouterr().out)["run_dir"]
    assert main(["table", run_dir, "--no-plots", "--verify", "200", "--json"]) == 0
    document = json.loads(capsys.readouterr().out)
    validate(document, "recipes")
    verified = document["verified"]
    assert [v["recipe"] for v in verified] == [e["recipe"] for e in document["front"]]
    for v in verified:
        assert v["model"] == pytest.approx(
            next(e["fidelity"] for e in document["front"] if e["recipe"] == v["recipe"])
        )
        # the demo's waits are random: sampled, within a few standard errors
        assert abs(v["difference"]) <= 4.5 * v["standard_error"] + 1e-12, v
    assert main(["table", run_dir, "--no-plots", "--verify", "50"]) == 0
    out = capsys.readouterr().out
    assert "Verified: model F against full density-matrix re-simulation" in out


def test_verify_help_has_examples(capsys):
    assert main(["verify", "--help"]) == 0
    out = capsys.readouterr().out
    assert "stillroom verify" in out.split("examples:")[1]
    assert "--samples" in out and "--seed" in out and "--json" in out


@pytest.mark.parametrize("count", ["1", "99999999999", "-3", "lots"])
def test_cli_sample_count_outside_its_range_is_one_line(count, capsys):
    # bad input: exit 2 and one line naming the option (common practice, no source)
    assert main(["verify", "sY", "--samples", count]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "--samples" in err
