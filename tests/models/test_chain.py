"""The vectorised chain evaluator against the one-recipe evaluator.

Both implement the same model (models/evaluate.py); these tests check the
batch machinery (round codes, prefix sharing, grouping by code, padding) by
demanding agreement to rounding on random recipes and profiles. The physics of
the model is checked against outside references in test_costs.py,
test_waiting.py and test_recipe_reference.py.
"""

from __future__ import annotations

import math
import sys
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

from models import (
    LINEAR_ROUNDS,
    ChainBatch,
    Round,
    advance,
    advance_every,
    canonical,
    evaluate,
    evaluate_linear,
    linear_codes,
    parse_recipe,
    recipe_from_codes,
    round_code,
    start_chains,
)

sys.path.insert(0, str(Path(__file__).resolve().parent))
from recipe_support import random_profile  # noqa: E402


def test_linear_rounds_are_every_round_without_a_source_once():
    assert len(LINEAR_ROUNDS) == 2 * 2 * 36 + 2 * 2 * 216 == 1008
    assert len(set(LINEAR_ROUNDS)) == 1008
    assert all(r.source is None for r in LINEAR_ROUNDS)
    for code, r in enumerate(LINEAR_ROUNDS):
        assert round_code(r) == code


def test_documented_code_order():
    for c in range(144):
        r = LINEAR_ROUNDS[c]
        kept, sac = divmod(c % 36, 6)
        assert r.selection == "single"
        assert (r.twirl, r.sacrificed, r.rotations) == (
            bool(c // 72),
            ("raw", "same")[(c // 36) % 2],
            (kept, sac),
        )
    assert LINEAR_ROUNDS[144] == Round("double", "raw", (0, 0, 0))
    assert LINEAR_ROUNDS[1007] == Round("double", "same", (5, 5, 5), twirl=True)


def test_round_code_rejects_sources():
    with pytest.raises(ValueError, match="has a source"):
        round_code(parse_recipe("pY(sY)").rounds[0])


def test_linear_codes_reject_a_twirled_raw_pair():
    # a leading '~' changes the raw pair the chain starts from (models.notation),
    # which no round code says: dropping it silently would evaluate another recipe
    with pytest.raises(ValueError, match="twirls its raw pairs"):
        linear_codes("~sZ~^2")


def test_codes_round_trip():
    r = parse_recipe("sY.pZX~.dsYZx")
    assert recipe_from_codes(linear_codes(r)) == r
    assert recipe_from_codes(list(linear_codes(r)) + [-1, -1]) == r
    with pytest.raises(ValueError, match="-1 may only pad"):
        recipe_from_codes([3, -1, 4])


def _random_codes(rng, n, depth):
    codes = rng.integers(0, 1008, size=(n, depth))
    # repeat some prefixes so that prefix sharing is exercised
    codes[n // 2 :, :2] = codes[: n - n // 2, :2]
    lengths = rng.integers(0, depth + 1, size=n)
    codes[np.arange(depth)[None, :] >= lengths[:, None]] = -1
    return codes


@pytest.mark.parametrize(
    "seed, instant, n, depth",
    # the last: long recipes, whose prefixes carry many rates of waiting data
    [(1, False, 120, 4), (2, False, 120, 4), (3, True, 120, 4), (21, False, 6, 8)],
)
def test_batch_agrees_with_single_evaluation(seed, instant, n, depth):
    rng = np.random.default_rng(seed)
    profile = random_profile(rng, instant=instant)
    codes = _random_codes(rng, n, depth)
    out = evaluate_linear(codes, profile)
    for i, row in enumerate(codes):
        res = evaluate(recipe_from_codes(row), profile, canonicalise=False)
        assert_allclose(out["bell"][i], res.bell, rtol=1e-12, atol=1e-14)
        assert_allclose(out["fidelity"][i], res.fidelity, rtol=1e-12)
        assert_allclose(out["raw_pairs_per_output"][i], res.raw_pairs_per_output, rtol=1e-12)
        assert_allclose(out["yield"][i], res.pair_yield, rtol=1e-12)
        assert_allclose(out["time_per_output_s"][i], res.time_per_output_s, rtol=1e-12)
        assert out["memory_per_node"][i] == res.memory_per_node
        assert out["rounds"][i] == res.rounds
        n = len(res.success_probabilities)
        assert_allclose(out["success_probabilities"][i, :n], res.success_probabilities, rtol=1e-12)
        assert np.all(np.isnan(out["success_probabilities"][i, n:]))


def test_canonical_recipes_agree_with_the_default_evaluation():
    rng = np.random.default_rng(4)
    profile = random_profile(rng)
    codes = _random_codes(rng, 40, 3)
    rows = []
    for row in codes:
        c = linear_codes(canonical(recipe_from_codes(row)))
        rows.append(list(c) + [-1] * (3 - len(c)))
    out = evaluate_linear(np.array(rows), profile)
    for i, row in enumerate(codes):
        res = evaluate(recipe_from_codes(row), profile)  # canonicalises
        assert_allclose(out["bell"][i], res.bell, rtol=1e-12, atol=1e-14)


def test_advance_equals_evaluate_linear_row_by_row():
    rng = np.random.default_rng(5)
    profile = random_profile(rng)
    codes = rng.integers(0, 1008, size=(50, 2))
    chains = start_chains(profile, 50, rounds_ahead=2)
    for d in range(2):
        chains, p = advance(chains, codes[:, d], profile)
    out = evaluate_linear(codes, profile)
    assert_allclose(chains.bell, out["bell"], rtol=1e-12)
    assert_allclose(chains.raw_pairs, out["raw_pairs_per_output"], rtol=1e-12)
    assert_allclose(p, out["success_probabilities"][:, 1], rtol=1e-12)


def test_a_step_that_never_succeeds_costs_infinity():
    from models import NodeNoise, Profile

    # a pure Psi+ kept pair against a Phi+ sacrificed pair: with perfect
    # operations the Z-basis parities always disagree (common practice, no source)
    chains = ChainBatch(
        np.array([[0.0, 1.0, 0.0, 0.0]]),
        np.ones(1),
        np.ones(1, dtype=np.int64),
        np.zeros(1, dtype=np.int64),
        np.zeros(1),
        np.array([[[0.0, 1.0, 0.0, 0.0]]]),
        np.zeros((1, 1)),
    )
    profile = Profile((1.0, 0.0, 0.0, 0.0), NodeNoise())
    out, p = advance(chains, [round_code(Round("single", "raw", (0, 0)))], profile)
    assert p[0] == 0.0 and math.isinf(out.raw_pairs[0]) and math.isinf(out.time_s[0])


def test_raw_rows_and_validation():
    profile = random_profile(np.random.default_rng(6))
    out = evaluate_linear(np.full((2, 3), -1), profile)
    assert_allclose(out["bell"], np.tile(profile.raw, (2, 1)))
    assert out["memory_per_node"].tolist() == [1, 1]
    with pytest.raises(ValueError, match="-1 may only pad"):
        evaluate_linear([[3, -1, 4]], profile)
    with pytest.raises(ValueError, match="outside"):
        evaluate_linear([[1008]], profile)
    with pytest.raises(ValueError, match="one per chain"):
        advance(start_chains(profile, 2, rounds_ahead=1), [1], profile)
    with pytest.raises(ValueError, match="weighted has shape"):
        ChainBatch(
            np.zeros((1, 4)), np.ones(1), np.ones(1), np.zeros(1), np.zeros(1), np.ones((1, 3)),
            np.ones((1, 3)),
        )
    # a chain started for no rounds carries no waiting data for one more
    with pytest.raises(ValueError, match="rounds_ahead"):
        advance(start_chains(profile, 1), [1], profile)


def test_advance_every_equals_advance_on_the_grid():
    rng = np.random.default_rng(8)
    profile = random_profile(rng)
    start = start_chains(profile, 3, rounds_ahead=3)
    chains, _ = advance(start, rng.integers(0, 1008, size=3), profile)
    codes = np.array([0, 50, 100, 143, 144, 500, 1007])
    every, p_every = advance_every(chains, codes, profile)
    rows = chains.take(np.repeat(np.arange(3), codes.size))
    single, p_single = advance(rows, np.tile(codes, 3), profile)
    assert_allclose(p_every, p_single, rtol=1e-13)
    for name in ("bell", "raw_pairs", "time_s", "weighted", "deficit"):
        assert_allclose(getattr(every, name), getattr(single, name), rtol=1e-13)
    assert np.array_equal(every.memory, single.memory)
