"""Long recipes: probabilities stay probabilities, and deep chains stay exact.

Short recipes hide errors that grow round by round (a rounding error multiplied
by about inputs / P at each round), so these tests run long ones:

- 50 rounds of random recipes (every step kind, pumping and symmetric rounds,
  random rotations, re-twirls, occasional sub-recipes) with every noise on:
  gates, single-qubit rotations, measurements, T1/T2 memories, a link with a
  finite pair rate and a classical delay. Source of the checks: probability
  axioms (Bell weights are a probability vector, success probabilities lie in
  [0, 1]; common practice, no source).
- Long recipes against the independent density-matrix reference
  (tests/reference/chain.py over tests/reference/density_matrix.py), where it can
  run: perfect memories, or an instant link whose only waits are the exchanges.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

from models import (
    NodeNoise,
    Profile,
    Recipe,
    Round,
    evaluate,
    evaluate_linear,
    linear_codes,
    parse_recipe,
    werner,
)
from models.kinds import STEP_KINDS

try:
    from tests.reference.chain import reference_chain
except ModuleNotFoundError:  # plain `pytest` puts only this folder on sys.path
    sys.path.append(str(Path(__file__).resolve().parents[2]))  # the repository root
    from tests.reference.chain import reference_chain

# a Bell vector's weights sum to 1 and lie in [0, 1] up to this rounding
ROUNDING = 1e-12
# agreement with the density-matrix reference
TOL = 1e-10

# every noise on: gates, rotations, measurements, memories, a finite pair rate, a delay
NOISY = [
    Profile(
        (0.9, 0.04, 0.03, 0.03),
        NodeNoise(0.99, 0.995, 0.99, t1_s=0.05, t2_s=0.03),
        length_km=50.0,
        pair_rate_hz=2000.0,
    ),
    Profile(
        (0.7, 0.15, 0.05, 0.1),
        NodeNoise(0.96, 0.97, 0.97, t1_s=0.01, t2_s=0.015),
        length_km=200.0,
        pair_rate_hz=500.0,
    ),
    Profile(
        tuple(werner(0.6)),
        NodeNoise(0.97, 0.99, 0.98, t1_s=1.0, t2_s=0.5),
        length_km=10.0,
        pair_rate_hz=10000.0,
    ),
]
# the case: double selection from Werner 0.6 with 2 % gate errors; P < 1/2
LAB = Profile(tuple(werner(0.6)), NodeNoise(two_qubit=0.97))
# gate, rotation and measurement noise, perfect memories: no wait matters
GATES = Profile((0.8, 0.07, 0.05, 0.08), NodeNoise(0.97, 0.98, 0.98))
# memories and an instant link: in recipes that pump raw pairs, the only waits are
# the deterministic exchanges
EXCHANGES = Profile(
    (0.85, 0.06, 0.04, 0.05), NodeNoise(0.98, 0.99, 0.98, t1_s=0.02, t2_s=0.01), length_km=100.0
)


def random_round(rng: np.random.Generator, *, sources: bool, pumping: bool = False) -> Round:
    """One random round: any step kind, raw or copies (or, rarely, a sub-recipe).

    ``pumping``: the sacrificed pairs are always raw pairs.
    """
    selection = str(rng.choice(list(STEP_KINDS)))
    n = STEP_KINDS[selection].n_inputs
    rotations = tuple(int(k) for k in rng.integers(0, 6, size=n))
    twirl = bool(rng.random() < 0.2)
    if pumping:
        return Round(selection, "raw", rotations, twirl=twirl)
    if sources and rng.random() < 0.1:
        source = random_recipe(rng, int(rng.integers(1, 4)), sources=False)
        return Round(selection, "sub", rotations, source=source, twirl=twirl)
    sacrificed = "same" if rng.random() < 0.5 else "raw"
    return Round(selection, sacrificed, rotations, twirl=twirl)


def random_recipe(
    rng: np.random.Generator, depth: int, *, sources: bool = True, pumping: bool = False
) -> Recipe:
    """A random recipe of ``depth`` rounds (sub-recipes, when drawn, are linear)."""
    rounds = (random_round(rng, sources=sources, pumping=pumping) for _ in range(depth))
    return Recipe(tuple(rounds))


def assert_probability_vector(bell, where: str):
    bell = np.asarray(bell, dtype=float)
    assert abs(bell.sum() - 1.0) <= ROUNDING, f"weights {bell} sum to {bell.sum()!r} ({where})"
    inside = np.all(bell >= -ROUNDING) and np.all(bell <= 1 + ROUNDING)
    assert inside, f"weights {bell} outside [0, 1] ({where})"


def assert_probabilities(values, where: str):
    values = np.asarray(values, dtype=float)
    bad = ~((values >= -ROUNDING) & (values <= 1 + ROUNDING))
    assert not bad.any(), (
        f"success probabilities {values[bad]} of steps {np.flatnonzero(bad) + 1} "
        f"outside [0, 1] ({where})"
    )


def assert_result_is_probabilities(result, where: str):
    """Output and every trace entry are probability vectors; every P lies in [0, 1]."""
    assert_probability_vector(result.bell, where)
    assert_probabilities(result.success_probabilities, where)
    for d, figures in enumerate(result.trace):
        assert_probability_vector(figures.bell, f"{where}, round {d + 1}")
        assert_probabilities([figures.success_probability], f"{where}, round {d + 1}")


# Source of the checks below: probability axioms (common practice, no source).
@pytest.mark.parametrize("seed", range(6))
def test_fifty_random_rounds_with_every_noise_keep_probabilities(seed):
    rng = np.random.default_rng(seed)
    profile = NOISY[seed % len(NOISY)]
    recipe = random_recipe(rng, 50)
    where = f"seed {seed}: {recipe.notation}"
    assert_result_is_probabilities(evaluate(recipe, profile), where)
    assert_result_is_probabilities(evaluate(recipe, profile, canonicalise=False), where)


@pytest.mark.parametrize("seed", range(3))
def test_fifty_random_linear_rounds_in_the_batched_chain_keep_probabilities(seed):
    # the batched chain on the same kind of recipes, several at once
    rng = np.random.default_rng(100 + seed)
    profile = NOISY[seed % len(NOISY)]
    recipes = [random_recipe(rng, 50, sources=False) for _ in range(4)]
    out = evaluate_linear(np.array([linear_codes(r) for r in recipes]), profile)
    for i, recipe in enumerate(recipes):
        where = f"seed {seed}: {recipe.notation}"
        assert_probability_vector(out["bell"][i], where)
        assert_probabilities(out["success_probabilities"][i], where)


@pytest.mark.parametrize("depth", [12, 18, 20, 25])
def test_deep_double_selection_keeps_probabilities(depth):
    # double selection whose success probability is below 1/2 in every round
    result = evaluate(f"dsZYZ^{depth}", LAB)
    assert_result_is_probabilities(result, f"dsZYZ^{depth}")
    assert max(result.success_probabilities) < 0.5


# Source of the expected values below: the density-matrix reference, chained.
@pytest.mark.parametrize("profile", [LAB, GATES], ids=["lab", "gates"])
def test_eighteen_double_selection_rounds_against_the_density_matrix_chain(profile):
    recipe = parse_recipe("dsZYZ^18")
    expected_p, expected_bell = reference_chain(recipe, profile)
    result = evaluate(recipe, profile, canonicalise=False)
    assert_allclose(result.success_probabilities, expected_p, atol=TOL)
    assert_allclose(result.bell, expected_bell, atol=TOL)
    out = evaluate_linear(np.array([linear_codes(recipe)]), profile)
    assert_allclose(out["success_probabilities"][0], expected_p, atol=TOL)
    assert_allclose(out["bell"][0], expected_bell, atol=TOL)


@pytest.mark.parametrize("seed", range(4))
def test_random_long_recipes_against_the_density_matrix_chain(seed):
    # 20 to 24 random rounds, every gate and measurement noise on: two linear
    # recipes and one tree with perfect memories, and a pumping recipe whose
    # kept pair decays during every exchange
    rng = np.random.default_rng(200 + seed)
    depth = int(rng.integers(20, 25))
    if seed == 3:
        profile, recipe = EXCHANGES, random_recipe(rng, depth, pumping=True)
    else:
        profile, recipe = GATES, random_recipe(rng, depth, sources=seed == 2)
    expected_p, expected_bell = reference_chain(recipe, profile)
    result = evaluate(recipe, profile, canonicalise=False)
    assert_allclose(result.success_probabilities, expected_p, atol=TOL)
    assert_allclose(result.bell, expected_bell, atol=TOL)
    if recipe.is_linear:
        out = evaluate_linear(np.array([linear_codes(recipe)]), profile)
        assert_allclose(out["success_probabilities"][0], expected_p, atol=TOL)
        assert_allclose(out["bell"][0], expected_bell, atol=TOL)
