"""The exhaustive layer against a brute force without any merging, and against the baselines.

External references:
- brute force: every code sequence evaluated with ``models.chain.evaluate_linear``
  (which shares prefixes but merges nothing) and the Pareto front taken from the
  definition of dominance (common practice, no source);
- the textbook baselines of ``models.baselines`` (BBPSSW, Bennett et al., PRL 76,
  722 (1996); DEJMPS, Deutsch et al., PRL 77, 2818 (1996); pumping, Duer et al.,
  PRA 59, 169 (1999); double selection, Fujii and Yamamoto, PRA 80, 042308 (2009)),
  evaluated with ``models.evaluate.evaluate``;
- ``models.chain.advance`` itself for the re-twirl shortcut.
"""

import itertools
import math
import sys
from pathlib import Path

import numpy as np
import pytest

from models.baselines import BASELINES, baseline
from models.chain import LINEAR_ROUNDS, N_CODES, advance, evaluate_linear, round_code, start_chains
from models.evaluate import evaluate
from models.noise import NodeNoise
from models.profile import Profile
from models.recipes import Round
from models.states import werner
from optimise import exhaustive
from optimise.exhaustive import exhaustive_front
from optimise.levels import TWIRL_PARTNER, UNTWIRLED, add_twirled, state_keys, symmetry_of
from optimise.limits import Limits
from optimise.pareto import pareto_mask, quantise

sys.path.insert(0, str(Path(__file__).parent))

from layer_support import CountingParallel, exhaustive_bytes, split_small  # noqa: E402

PROFILES = {
    # noisy rotations: no relabelling merge, identical-input shortcut on
    "noisy-rotations": Profile(
        tuple(werner(0.75)), NodeNoise(two_qubit=0.97, single_qubit=0.98, measurement=0.98)
    ),
    # perfect rotations and memory: states merged up to any relabelling of X, Y, Z
    "perfect-rotations": Profile(
        tuple(werner(0.8)), NodeNoise(two_qubit=0.99, single_qubit=1.0, measurement=0.99)
    ),
    # a non-Werner raw pair, memory decay, a finite link: X <-> Y merge, no input shortcut
    "memory": Profile(
        (0.85, 0.08, 0.02, 0.05),
        NodeNoise(two_qubit=0.98, single_qubit=1.0, measurement=0.97, t1_s=1.0, t2_s=0.5),
        length_km=20.0,
        pair_rate_hz=1e4,
    ),
    "memory-noisy-rotations": Profile(
        (0.85, 0.08, 0.02, 0.05),
        NodeNoise(two_qubit=0.98, single_qubit=0.99, measurement=0.97, t1_s=1.0, t2_s=0.5),
        length_km=20.0,
        pair_rate_hz=1e4,
    ),
}

# a small space that still has every kind of round: pumping and symmetric, 2->1 and
# double selection, identity and real rotations, with and without re-twirl
SMALL = sorted(
    {
        round_code(Round("single", "raw", "ZZ")),
        round_code(Round("single", "raw", "YY")),
        round_code(Round("single", "raw", "XZ")),
        round_code(Round("single", "raw", "zY")),
        round_code(Round("single", "same", "ZZ")),
        round_code(Round("single", "same", "YY")),
        round_code(Round("single", "same", "Xx")),
        round_code(Round("single", "same", "YZ")),
        round_code(Round("double", "same", "ZZZ")),
        round_code(Round("double", "same", "YYX")),
        round_code(Round("double", "raw", "XZy")),
        round_code(Round("single", "same", "ZZ", twirl=True)),
        round_code(Round("single", "raw", "YY", twirl=True)),
        round_code(Round("double", "same", "YZZ", twirl=True)),
    }
)

OBJECTIVE_COLUMNS = {
    "fidelity": "fidelity",
    "yield": "yield",
    "memory": "memory_per_node",
    "time": "time_per_output_s",
}


def all_sequences(codes, depth):
    rows = []
    for d in range(0, depth + 1):  # depth 0 is the raw pair, itself a candidate
        for seq in itertools.product(codes, repeat=d):
            rows.append(list(seq) + [-1] * (depth - d))
    return np.array(rows, dtype=np.intp)


def brute_force_points(profile, codes, depth, objectives=("fidelity", "yield"), limits=None):
    """Distinct objective points of the front, from every sequence, no merging."""
    rows = all_sequences(codes, depth)
    out = evaluate_linear(rows, profile)
    values = np.stack([np.asarray(out[OBJECTIVE_COLUMNS[o]], float) for o in objectives], axis=1)
    keep = np.ones(len(rows), dtype=bool)
    if limits is not None:
        if limits.max_memory_per_node is not None:
            keep &= out["memory_per_node"] <= limits.max_memory_per_node
        if limits.max_time_per_output_s is not None:
            keep &= out["time_per_output_s"] <= limits.max_time_per_output_s
    return _rounded(values[keep], objectives)


def _rounded(values, objectives=None):
    """Points of the front of ``values``, compared to 1e-12 (both sides alike).

    Figures that are equal in exact arithmetic come out of different evaluation
    paths a few ulps apart, which would let an equal-yield point of lower fidelity
    look non-dominated; both fronts are therefore taken on values rounded to 1e-12.
    """
    v = quantise(np.asarray(values, float))
    k = v.shape[1]
    maximise = (
        (True, True) + tuple(False for _ in range(k - 2))
        if objectives is None
        else tuple(o in ("fidelity", "yield") for o in objectives)
    )
    v = v[pareto_mask(v, maximise)]
    return {tuple(float(f"{x:.10g}") for x in row) for row in v}


def front_points(front, objectives=("fidelity", "yield")):
    attr = {
        "fidelity": "fidelity",
        "yield": "pair_yield",
        "memory": "memory_per_node",
        "time": "time_per_output_s",
    }
    return _rounded(
        np.array([[getattr(r, attr[o]) for o in objectives] for r in front.results]), objectives
    )


@pytest.mark.parametrize("name", list(PROFILES))
def test_front_equals_brute_force_on_a_small_space(name):
    profile = PROFILES[name]
    front = exhaustive_front(profile, max_depth=3, codes=SMALL)
    assert front.complete and front.complete_depth == 3
    assert front_points(front) == brute_force_points(profile, SMALL, 3)


SINGLE = [c for c in range(N_CODES) if LINEAR_ROUNDS[c].selection == "single"]


@pytest.mark.parametrize("name", ["noisy-rotations", "perfect-rotations"])
def test_front_equals_brute_force_for_every_2_to_1_round(name):
    # a space holding every rotation of its rounds: the identical-input shortcut is on
    profile = PROFILES[name]
    front = exhaustive_front(profile, max_depth=2, include_double=False)
    assert front_points(front) == brute_force_points(profile, SINGLE, 2)


def test_front_equals_brute_force_with_memory_and_time_objectives():
    profile = PROFILES["memory"]
    objectives = ("fidelity", "yield", "memory", "time")
    front = exhaustive_front(profile, max_depth=3, codes=SMALL, objectives=objectives)
    assert front_points(front, objectives) == brute_force_points(profile, SMALL, 3, objectives)


@pytest.mark.parametrize(
    "limits", [Limits(max_memory_per_node=3), Limits(max_time_per_output_s=2e-3)]
)
def test_front_under_limits_equals_filtered_brute_force(limits):
    profile = PROFILES["memory"]
    front = exhaustive_front(profile, max_depth=3, codes=SMALL, limits=limits)
    assert front_points(front) == brute_force_points(profile, SMALL, 3, limits=limits)
    assert all(limits.allows(r) for r in front.results)


@pytest.mark.slow
@pytest.mark.parametrize("name", ["noisy-rotations", "perfect-rotations"])
def test_front_equals_brute_force_for_every_round_at_depth_two(name):
    profile = PROFILES[name]
    front = exhaustive_front(profile, max_depth=2)
    assert front_points(front) == brute_force_points(profile, np.arange(N_CODES), 2)


@pytest.mark.parametrize("name", ["noisy-rotations", "memory"])
def test_distinct_states_counted_as_brute_force_finds_them(name):
    # without the relabelling merge, the states of depth d are the distinct keys of
    # all sequences of length d (keys: weights and time-weighted states to 1e-12)
    profile = PROFILES[name]
    front = exhaustive_front(profile, max_depth=2, codes=SMALL, symmetry=False)
    counts = []
    for d in (1, 2):
        chains = start_chains(profile, len(SMALL) ** d, rounds_ahead=2)
        for seq in zip(*itertools.product(SMALL, repeat=d), strict=True):
            chains, _ = advance(chains, np.array(seq), profile)
        counts.append(len(np.unique(state_keys(chains.bell, chains.weighted), axis=0)))
    assert front.states_per_depth == tuple(counts)


@pytest.mark.parametrize(
    "name, depth",
    [(n, d) for n in ("noisy-rotations", "perfect-rotations") for d in (1, 2, 3)]
    + [("memory", 1), ("memory", 2)],  # memory decay turns the input shortcut off: slower
)
def test_front_contains_or_dominates_every_baseline(name, depth):
    profile = PROFILES[name]
    front = exhaustive_front(profile, max_depth=depth)
    for key in BASELINES:
        b = evaluate(baseline(key, depth), profile)
        assert any(
            r.fidelity >= b.fidelity - 1e-12 and r.pair_yield >= b.pair_yield * (1 - 1e-12)
            for r in front.results
        ), f"{key} at depth {depth} ({b.notation}) is neither on nor under the front"


def test_recipes_rebuilt_from_back_pointers_evaluate_to_their_points():
    profile = PROFILES["noisy-rotations"]
    front = exhaustive_front(profile, max_depth=3)
    for r in front.results:
        again = evaluate(r.notation, profile)
        assert again.fidelity == pytest.approx(r.fidelity, rel=1e-12)
        assert again.pair_yield == pytest.approx(r.pair_yield, rel=1e-12)
    fids = [r.fidelity for r in front.results]
    assert fids == sorted(fids, reverse=True)
    ids = [r.recipe_id for r in front.results]
    assert len(ids) == len(set(ids))


def test_retwirl_shortcut_agrees_with_advance():
    # the twirled variant of a round is models.evaluate.twirl of its untwirled output
    profile = PROFILES["memory-noisy-rotations"]
    rng = np.random.default_rng(3)
    chains = start_chains(profile, 300, rounds_ahead=3)
    for _ in range(2):
        chains, _ = advance(chains, rng.integers(0, N_CODES, 300), profile)
    codes = np.unique(UNTWIRLED[rng.integers(0, N_CODES, 300)])[:200]
    chains = chains.take(np.arange(len(codes)))
    untwirled, _ = advance(chains, codes, profile)
    twirled, _ = advance(chains, TWIRL_PARTNER[codes], profile)
    want = np.ones(len(codes), dtype=bool)
    batch, new_codes, _ = add_twirled(untwirled, codes, ~want, want, profile.noise.single_qubit)
    np.testing.assert_array_equal(new_codes, TWIRL_PARTNER[codes])
    for field in ("bell", "raw_pairs", "memory", "rounds", "time_s", "weighted", "deficit"):
        np.testing.assert_allclose(
            getattr(batch, field), getattr(twirled, field), rtol=1e-13, atol=1e-15
        )


def test_relabelling_merge_only_where_proved():
    assert symmetry_of(PROFILES["noisy-rotations"]) == "none"
    assert symmetry_of(PROFILES["perfect-rotations"]) == "xyz"
    assert symmetry_of(PROFILES["memory"]) == "xy"
    assert symmetry_of(PROFILES["memory-noisy-rotations"]) == "none"
    # the merge changes the count of states, never the front
    for name in ("perfect-rotations", "memory"):
        profile = PROFILES[name]
        merged = exhaustive_front(profile, max_depth=2, include_double=False)
        plain = exhaustive_front(profile, max_depth=2, include_double=False, symmetry=False)
        assert merged.symmetry != "none" and plain.symmetry == "none"
        assert merged.states_per_depth[-1] < plain.states_per_depth[-1]
        assert front_points(merged) == front_points(plain)
    # a space without every rotation variant cannot use it (the proof swaps rotations)
    assert (
        exhaustive_front(PROFILES["perfect-rotations"], max_depth=1, codes=SMALL).symmetry == "none"
    )


def test_without_double_selection_and_with_a_state_cap():
    profile = PROFILES["noisy-rotations"]
    single = exhaustive_front(profile, max_depth=2, include_double=False)
    assert all("d" not in r.notation.replace("raw", "") for r in single.results)
    capped = exhaustive_front(profile, max_depth=4, max_states=100)
    assert not capped.complete and capped.complete_depth == 2  # depth 2 has > 100 states
    budget = exhaustive_front(profile, max_depth=4, max_evaluations=10_000)
    assert budget.complete_depth == 2 and budget.evaluations_per_depth[-1] <= 10_000
    assert "1 to 2 rounds" in capped.space
    with pytest.raises(ValueError, match="max_depth"):
        exhaustive_front(profile, max_depth=0)
    assert math.isfinite(capped.seconds)
    assert len(LINEAR_ROUNDS) == N_CODES


def test_an_evaluation_bound_with_decaying_memories_carries_only_the_waits_it_needs():
    """The bound stops at some depth; the front there is the unbounded front of that depth.

    With decaying memories a call under an evaluation bound deepens pass by pass,
    each carrying the waiting data of one more round; what it returns must be the
    exact front of the depth it reached, figure for figure (checked against the
    single-recipe evaluator inside exhaustive_front as well).
    """
    profile = PROFILES["memory-noisy-rotations"]
    depths = []
    bounded = exhaustive_front(
        profile, max_depth=5, max_evaluations=30_000, on_depth=lambda d, *_: depths.append(d)
    )
    reached = bounded.complete_depth
    assert 1 <= reached < 5 and not bounded.complete
    assert depths == list(range(1, reached + 1))  # each depth reported once
    plain = exhaustive_front(profile, max_depth=reached)
    assert front_points(bounded) == front_points(plain)
    assert bounded.states_per_depth == plain.states_per_depth


def test_the_front_is_byte_identical_for_any_workers(monkeypatch):
    # a level cut into chunks run by two local processes, their results taken in
    # the chunks' order: the same front and counts, byte for byte, as one process
    split_small(monkeypatch)
    monkeypatch.setattr(exhaustive, "Parallel", CountingParallel)
    monkeypatch.setattr(CountingParallel, "calls", 0)
    profile = PROFILES["memory"]
    serial = exhaustive_front(profile, max_depth=2, objectives=("fidelity", "yield", "memory"))
    shared = exhaustive_front(
        profile, max_depth=2, objectives=("fidelity", "yield", "memory"), n_jobs=2
    )
    assert CountingParallel.calls == 1  # depth 1 is one state: depth 2 was shared out
    assert exhaustive_bytes(shared) == exhaustive_bytes(serial)
