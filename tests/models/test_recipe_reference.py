"""Whole recipes against the independent density-matrix reference, round by round.

The reference (tests/reference/density_matrix.py) simulates each step on the
full 4- or 6-qubit density matrix with explicit unitaries, Kraus operators and
projectors (qutip); tests/reference/chain.py chains its steps by hand: the kept
pair's state is passed on, copies for symmetric rounds are copies of it, memory
acts through the reference's Kraus operators for the classical delay, and the
re-twirl is built from the three cyclic bilateral Cliffords, each applied as a
gate with depolarising noise (the model's choice: a twirl costs the noise of one
rotation). With an instant link the only waits are the deterministic exchanges,
so the model should agree to rounding.
"""

from __future__ import annotations

import math
import sys
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

from models import NodeNoise, Profile, evaluate, parse_recipe
from models.evaluate import twirl

try:
    from tests.reference.chain import reference_chain, reference_twirl
except ModuleNotFoundError:  # plain `pytest` puts only this folder on sys.path
    sys.path.append(str(Path(__file__).resolve().parents[2]))  # the repository root
    from tests.reference.chain import reference_chain, reference_twirl

TOL = 1e-10


@pytest.mark.parametrize(
    "text, profile",
    [
        # pumping rounds with memory decay during every classical exchange
        (
            "pY.pXz~.dpZYx.pz",
            Profile(
                (0.82, 0.08, 0.06, 0.04),
                NodeNoise(0.97, 0.95, 0.96, t1_s=0.004, t2_s=0.003),
                length_km=150.0,
            ),
        ),
        # symmetric rounds (copies of the pair so far) with gate and measurement noise
        ("sY.sXz~.dsYZx", Profile((0.85, 0.05, 0.04, 0.06), NodeNoise(0.98, 0.96, 0.97))),
    ],
)
def test_recipe_agrees_with_the_density_matrix_chain(text, profile):
    assert parse_recipe(text).depth >= 3
    expected_p, expected_bell = reference_chain(text, profile)
    result = evaluate(text, profile, canonicalise=False)
    assert_allclose(result.success_probabilities, expected_p, atol=TOL)
    assert_allclose(result.bell, expected_bell, atol=TOL)


def test_twirl_model_against_explicit_cliffords():
    rng = np.random.default_rng(3)
    for _ in range(3):
        bell = rng.dirichlet(np.ones(4))
        p1 = rng.uniform(0.8, 1.0)
        assert_allclose(twirl(bell, p1), reference_twirl(bell, p1), atol=TOL)
    # a perfect twirl keeps the fidelity and spreads the rest (Bennett et al., PRL 76, 722 (1996))
    assert_allclose(twirl([0.7, 0.3, 0.0, 0.0], 1.0), [0.7, 0.1, 0.1, 0.1], atol=1e-15)


def test_reference_memory_is_what_the_model_uses():
    # the chain above relies on the reference's Kraus memory; a direct check that
    # a long exchange really moves the answer, so the comparison is not vacuous
    profile = Profile(
        (0.82, 0.08, 0.06, 0.04), NodeNoise(0.97, 0.95, 0.96, t1_s=0.004, t2_s=0.003), length_km=150
    )
    no_memory = Profile(profile.raw_pair, NodeNoise(0.97, 0.95, 0.96), length_km=150)
    a = evaluate("pY.pXz~.dpZYx.pz", profile).fidelity
    b = evaluate("pY.pXz~.dpZYx.pz", no_memory).fidelity
    assert abs(a - b) > 1e-3
    assert math.isfinite(a)
