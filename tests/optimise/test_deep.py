"""The deep layer against the exhaustive layer and the single-recipe evaluator.

External references:
- the exhaustive layer (itself checked against a brute force without merging in
  ``test_exhaustive.py``): with every Pareto layer kept and no width cap, the deep
  layer over linear rounds must find the same front, point for point;
- ``models.evaluate.evaluate``, which evaluates any tree recipe from its string
  (sources evaluated recursively, waits from the written-out rule of the
  conventions), for the pairs made with sacrificed made pairs;
- the definition of dominance (common practice, no source).
"""

import json
import sys
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

from models.chain import (
    LINEAR_ROUNDS,
    WIDEST,
    advance,
    advance_sourced,
    round_code,
    start_chains,
)
from models.evaluate import evaluate
from models.noise import NodeNoise
from models.notation import parse_recipe
from models.profile import Profile
from models.recipes import Recipe, Round
from models.states import werner
from optimise.deep import deep_front, pareto_layers
from optimise.exhaustive import exhaustive_front

sys.path.insert(0, str(Path(__file__).parent))

from layer_support import CountingParallel, deep_bytes, split_small  # noqa: E402
from test_exhaustive import PROFILES, SMALL, front_points  # noqa: E402

RAW_CODES = [c for c, r in enumerate(LINEAR_ROUNDS) if r.sacrificed == "raw"]


def _sub(r: Round, source: Recipe) -> Round:
    return Round(r.selection, "sub", r.rotations, source=source, twirl=r.twirl)


@pytest.mark.parametrize("name", ["memory", "memory-noisy-rotations", "noisy-rotations"])
def test_advance_sourced_equals_evaluate_on_trees(name):
    # kept pairs and sources of different depths and memory needs, so that the
    # source is made first in some rows (models.making) and waits differ
    profile = PROFILES[name]
    depth = 3
    s_y = round_code(Round("single", "same", "Y"))
    raw = start_chains(profile, 1, rounds_ahead=depth)
    grows = profile.bound().lattice(0).grows

    def level(d):
        return (depth - d) * (WIDEST - 1) if grows else 0

    one, _ = advance(raw, [s_y], profile, level=level(1))
    two, _ = advance(one, [s_y], profile, level=level(2))
    rec = {0: Recipe(()), 1: parse_recipe("sY"), 2: parse_recipe("sY^2")}
    made = {0: raw, 1: one, 2: two}
    rng = np.random.default_rng(7)
    for kept, source in [(0, 2), (2, 1), (1, 2), (2, 2)]:
        codes = rng.choice(RAW_CODES, 8)
        out, p = advance_sourced(
            made[kept],
            made[source],
            codes,
            profile,
            kept_index=np.zeros(8, int),
            source_index=np.zeros(8, int),
            level=level(3),
        )
        for i, c in enumerate(codes):
            recipe = Recipe(rec[kept].rounds + (_sub(LINEAR_ROUNDS[c], rec[source]),))
            want = evaluate(recipe, profile)
            assert_allclose(out.bell[i, 0], want.fidelity, rtol=1e-12, atol=1e-14)
            assert_allclose(out.raw_pairs[i], want.raw_pairs_per_output, rtol=1e-12)
            assert_allclose(out.time_s[i], want.time_per_output_s, rtol=1e-12)
            assert out.memory[i] == want.memory_per_node
            assert out.rounds[i] == want.rounds


def test_advance_sourced_refuses_symmetric_codes():
    profile = PROFILES["noisy-rotations"]
    raw = start_chains(profile, 1)
    with pytest.raises(ValueError, match="sacrificed 'raw'"):
        advance_sourced(
            raw,
            raw,
            [round_code(Round("single", "same", "Y"))],
            profile,
            kept_index=[0],
            source_index=[0],
        )


@pytest.mark.parametrize("name", list(PROFILES))
def test_unlimited_deep_layer_over_linear_rounds_equals_the_exhaustive_front(name):
    profile = PROFILES[name]
    exhaustive = exhaustive_front(profile, max_depth=3, codes=SMALL)
    deep = deep_front(profile, max_depth=3, codes=SMALL, layers=0, width=0, trees=False)
    assert front_points(deep) == front_points(exhaustive)
    costs = {r.notation: r.raw_pairs_per_output for r in exhaustive.results}
    for r in deep.results:
        if r.notation in costs:
            assert_allclose(r.raw_pairs_per_output, costs[r.notation], rtol=1e-12)


@pytest.mark.parametrize("name", ["perfect-rotations", "memory"])
def test_seeded_with_the_exhaustive_front_the_deep_front_dominates_or_equals_it(name):
    # narrow on purpose: the seeds survive any pruning, with all their prefixes
    profile = PROFILES[name]
    exhaustive = exhaustive_front(profile, max_depth=3, codes=SMALL)
    seeds = [r.notation for r in exhaustive.results]
    deep = deep_front(profile, max_depth=4, codes=SMALL, layers=1, width=2, seeds=seeds)
    found = np.array([[r.fidelity, r.pair_yield] for r in deep.results])
    for r in exhaustive.results:
        assert np.any(
            (found[:, 0] >= r.fidelity * (1 - 1e-12)) & (found[:, 1] >= r.pair_yield * (1 - 1e-12))
        ), r.notation


def test_mixed_level_trees_and_nested_pumping_evaluate_the_same():
    # noisy rotations and decaying memories: every input's wait and rotation noise counts
    profile = PROFILES["memory-noisy-rotations"]
    deep = deep_front(profile, max_depth=4, layers=2, width=6)
    trees = [r for r in deep.results if "(" in r.notation]
    assert trees, "the deep layer found no tree recipe on this profile"
    nested = mixed = 0
    for r in deep.results:
        recipe = parse_recipe(r.notation)
        again = evaluate(r.notation, profile)
        assert_allclose(again.fidelity, r.fidelity, rtol=1e-12)
        assert_allclose(again.raw_pairs_per_output, r.raw_pairs_per_output, rtol=1e-12)
        for i, step in enumerate(recipe.rounds):
            if step.source is not None:
                # the kept pair has i rounds; a source of another depth mixes levels
                mixed += step.source.depth != i
                nested += any(s.source is not None for s in step.source.rounds)
    assert mixed > 0
    # nested pumping (a source that itself pumps with made pairs), evaluated by hand
    for text in ("sY.pY(sY.pZ(sY))", "pY(sY^2).dpYZZ(sY)"):
        recipe = parse_recipe(text)
        made = _made_by_hand(recipe, profile)
        want = evaluate(recipe, profile)
        assert_allclose(made.bell[0, 0], want.fidelity, rtol=1e-12)
        assert_allclose(made.raw_pairs[0], want.raw_pairs_per_output, rtol=1e-12)


def _made_by_hand(recipe, profile):
    """The pair of a recipe built with advance / advance_sourced, round by round."""
    w = WIDEST - 1 if profile.bound().lattice(0).grows else 0

    def build(rec, carry):
        # a pair carrying `carry` lattice levels: each round before uses up WIDEST - 1
        n = len(rec.rounds)
        chains = start_chains(profile, 1, rounds_ahead=n + (carry // w if w else 0))
        for i, step in enumerate(rec.rounds):
            level = carry + (n - i - 1) * w
            if step.source is None:
                chains, _ = advance(chains, [round_code(step)], profile, level=level)
            else:
                source = build(step.source, level + w)
                code = round_code(Round(step.selection, "raw", step.rotations, twirl=step.twirl))
                chains, _ = advance_sourced(
                    chains, source, [code], profile, kept_index=[0], source_index=[0], level=level
                )
        return chains

    return build(recipe, 0)


def test_two_runs_give_identical_front_files(tmp_path):
    profile = PROFILES["memory"]
    texts = []
    for run in range(2):
        deep = deep_front(profile, max_depth=4, layers=2, width=8)
        data = {
            "results": [r.to_dict() for r in deep.results],
            "equivalents": deep.equivalents,
            "pairs_per_level": deep.pairs_per_level,
        }
        path = tmp_path / f"front{run}.json"
        path.write_text(json.dumps(data, indent=1))
        texts.append(path.read_bytes())
    assert texts[0] == texts[1]


def test_pareto_layers_and_width():
    values = np.array([[0.9, 0.1], [0.8, 0.5], [0.7, 0.4], [0.6, 0.3], [0.85, 0.2], [0.5, 0.05]])
    maximise = (True, True)
    # layer 1: rows 0, 4, 1; layer 2: row 2; layer 3: row 3; layer 4: row 5
    assert pareto_layers(values, maximise, 1, 0).tolist() == [0, 1, 4]
    assert pareto_layers(values, maximise, 2, 0).tolist() == [0, 1, 2, 4]
    # a cap inside layer 1 keeps its ends and spreads the rest by the first objective
    assert pareto_layers(values, maximise, 2, 2).tolist() == [0, 1]
    assert pareto_layers(values, maximise, 0, 0).tolist() == list(range(6))


def test_equivalent_recipes_listed_and_representative_fixed():
    # Werner input and perfect rotations: the re-twirl of a Werner output changes
    # nothing, so 'sZ' and 'sZ~' have identical figures (one point, two names)
    profile = Profile(tuple(werner(0.8)), NodeNoise(two_qubit=0.99, measurement=0.99))
    deep = deep_front(profile, max_depth=2, layers=1, width=4)
    names = [r.notation for r in deep.results]
    for rep, others in deep.equivalents.items():
        assert rep in names
        for other in others:
            assert (len(rep), rep) < (len(other), other)
            a, b = evaluate(rep, profile), evaluate(other, profile)
            assert_allclose(a.fidelity, b.fidelity, rtol=1e-12)
            assert_allclose(a.raw_pairs_per_output, b.raw_pairs_per_output, rtol=1e-12)


@pytest.mark.parametrize(
    "backend, objectives",
    [
        ("loky", ("fidelity", "yield")),
        ("threading", ("fidelity", "yield", "memory", "time")),
    ],
)
def test_the_front_is_byte_identical_for_any_workers_and_backend(monkeypatch, backend, objectives):
    # each level's units shared out over two workers of a joblib backend, their
    # candidates merged and thinned there: the same front, byte for byte, as one
    # process (the merges keep what the whole level keeps; results taken in order)
    from joblib import parallel_config

    from optimise import deep as deep_module

    split_small(monkeypatch)
    monkeypatch.setattr(deep_module, "Parallel", CountingParallel)
    monkeypatch.setattr(CountingParallel, "calls", 0)
    profile = PROFILES["memory"]
    seeds = [r.notation for r in exhaustive_front(profile, max_depth=2).results]
    settings = dict(max_depth=4, width=6, objectives=objectives, seeds=seeds)
    serial = deep_front(profile, n_jobs=1, **settings)
    assert CountingParallel.calls == 0
    with parallel_config(backend=backend):
        shared = deep_front(profile, n_jobs=2, **settings)
    assert CountingParallel.calls == 4  # every level shared out
    assert deep_bytes(shared) == deep_bytes(serial)
    assert len(serial.results) > 3 and any(
        not parse_recipe(r.notation).is_linear for r in serial.results
    )
