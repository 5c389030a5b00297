"""The waiting module (models/waiting.py) against quadrature, closed forms and deep recursion.

- Joint waits of two and three inputs made one after another, each arriving
  after an exponential time, against Gauss-Laguerre quadrature over the waiting
  times of the exact pair-level memory map (models.noise.store).
- Retries against the generating function of the geometric distribution: with
  an instant link every attempt takes exactly the classical delay D, so the
  production time is D times a geometric number of attempts, whose transform is
  ``P e^{-sD} / (1 - (1 - P) e^{-sD})`` (common practice, no source).
- Deep recipes: at rate 0 every deficit is exactly 0 whatever the depth, and the
  example of a deep double-selection recipe agrees with the density-matrix chain
  of tests/reference, round by round.
- The sizes of the rate lattice that the module docstring states.
"""

from __future__ import annotations

import math
import sys
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

from models import NodeNoise, Profile, evaluate, werner
from models.chain import advance, round_code, start_chains
from models.kinds import STEP_KINDS
from models.noise import store
from models.recipes import Round
from models.waiting import Weighted, joint_waits, rate_lattice

sys.path.insert(0, str(Path(__file__).resolve().parent))
from recipe_support import random_profile  # noqa: E402

# waits of about a tenth of T1, T2 < 2 T1 (two generators)
PROFILE = Profile(
    (0.85, 0.07, 0.03, 0.05),
    NodeNoise(two_qubit=0.98, single_qubit=0.99, measurement=0.98, t1_s=0.02, t2_s=0.012),
    length_km=100.0,
    pair_rate_hz=1000.0,
)
PAIRS = np.array([[0.8, 0.1, 0.06, 0.04], [0.7, 0.1, 0.1, 0.1], [0.9, 0.02, 0.03, 0.05]])


def _arrivals(pair, lattice, level, separable):
    """A pair made after an exponential time of rate R: H(s) = pair R / (R + s)."""
    r = PROFILE.pair_rate_hz
    s = lattice.rates[: lattice.size(level)]
    scale = r / (r + s)
    state = pair[None, None, :] * scale[None, :, None]
    return Weighted(state, (s / (r + s))[None], scale if separable else None)


def _dense(joint):
    if joint.dense is not None:
        return joint.dense[0]
    out = joint.factors[0][0]
    for f in joint.factors[1:]:
        f = np.broadcast_to(f[0], (out.shape[0], 4))
        out = (out[:, :, None] * f[:, None, :]).reshape(out.shape[0], -1)
    return out


def _stored(pair, waits):
    n = PROFILE.noise
    return np.stack([store(pair, wait_s=t, t1_s=n.t1_s, t2_s=n.t2_s) for t in waits])


@pytest.mark.parametrize("separable", [False, True])
def test_two_inputs_against_quadrature(separable):
    # input 1 waits while input 2 is made: E[e^{-s(T1 + T2)} M(T2) rho1 (x) rho2]
    lattice = rate_lattice(PROFILE.noise, 2)
    made = [_arrivals(PAIRS[0], lattice, 2, False), _arrivals(PAIRS[1], lattice, 2, separable)]
    k = lattice.size(1)
    got = _dense(joint_waits(made, lattice, k))
    r = PROFILE.pair_rate_hz
    nodes, weights = np.polynomial.laguerre.laggauss(80)
    t = nodes / r
    first = _stored(PAIRS[0], t)  # (Q, 4)
    for i, s in enumerate(lattice.rates[:k]):
        w = weights * np.exp(-s * t)
        expected = r / (r + s) * np.outer(w @ first, PAIRS[1])
        assert_allclose(got[i].reshape(4, 4), expected, atol=1e-13)


@pytest.mark.parametrize("separable", [False, True])
def test_three_inputs_against_quadrature(separable):
    # input 1 waits T2 + T3, input 2 waits T3: the shared wait correlates their decays
    lattice = rate_lattice(PROFILE.noise, 3)
    made = [
        _arrivals(PAIRS[0], lattice, 3, False),
        _arrivals(PAIRS[1], lattice, 3, False),
        _arrivals(PAIRS[2], lattice, 3, separable),
    ]
    k = lattice.size(1)
    got = _dense(joint_waits(made, lattice, k))
    r = PROFILE.pair_rate_hz
    nodes, weights = np.polynomial.laguerre.laggauss(60)
    t = nodes / r
    t2, t3 = np.meshgrid(t, t, indexing="ij")
    w2, w3 = np.meshgrid(weights, weights, indexing="ij")
    first = _stored(PAIRS[0], (t2 + t3).ravel())
    second = _stored(PAIRS[1], t3.ravel())
    for i, s in enumerate(lattice.rates[:k]):
        w = (w2 * w3).ravel() * np.exp(-s * (t2 + t3).ravel())
        pair = np.einsum("q,qa,qb->ab", w, first, second)
        expected = r / (r + s) * pair[:, :, None] * PAIRS[2][None, None, :]
        assert_allclose(got[i].reshape(4, 4, 4), expected, atol=1e-13)


def test_retries_follow_the_geometric_generating_function():
    profile = Profile(PROFILE.raw_pair, PROFILE.noise, length_km=300.0, pair_rate_hz=math.inf)
    chains = start_chains(profile, 1, rounds_ahead=2)
    out, p = advance(chains, [round_code(Round("single", "raw", "Y"))], profile)
    bound = profile.bound()
    s = bound.lattice(2).rates[: out.weighted.shape[1]]
    assert s.size > 1
    late = np.exp(-s * bound.delay_s)
    transform = p[0] * late / (1.0 - (1.0 - p[0]) * late)
    assert_allclose(out.weighted[0], transform[:, None] * out.bell[0], rtol=1e-13)
    assert_allclose(out.deficit[0], 1.0 - transform, rtol=1e-12, atol=1e-16)


def test_rate_zero_stays_exact_in_deep_recipes():
    # the example of a deep recipe that used to drift, with a perfect memory
    lab = Profile(tuple(werner(0.6)), NodeNoise(two_qubit=0.97))
    deep = evaluate("dsZYZ^25", lab)
    assert 0.0 <= min(deep.success_probabilities) and max(deep.success_probabilities) <= 1.0
    assert abs(sum(deep.bell) - 1.0) < 1e-12
    # and with every noise on, in the chain: deficits at rate 0 are exactly zero
    rng = np.random.default_rng(11)
    profile = random_profile(rng)
    code = round_code(Round("double", "same", (5, 2, 3)))
    chains = start_chains(profile, 1, rounds_ahead=12)
    for _ in range(12):
        chains, p = advance(chains, [code], profile)
        assert chains.deficit[0, 0] == 0.0
        assert 0.0 <= p[0] <= 1.0
        assert abs(chains.bell[0].sum() - 1.0) < 1e-12
        assert np.all(chains.weighted >= -1e-15) and np.all(chains.deficit >= 0.0)


def test_deep_double_selection_agrees_with_the_density_matrix_chain():
    from test_recipe_reference import reference_chain

    lab = Profile(tuple(werner(0.6)), NodeNoise(two_qubit=0.97))
    expected_p, expected_bell = reference_chain("dsZYZ^18", lab)
    result = evaluate("dsZYZ^18", lab, canonicalise=False)
    assert_allclose(result.success_probabilities, expected_p, atol=1e-10)
    assert_allclose(result.bell, expected_bell, atol=1e-10)
    assert round(result.success_probabilities[-1], 6) == 0.253284


@pytest.mark.parametrize(
    "t1_s, t2_s, size",
    [
        # 2/T2 and 1/T1 without a small common multiple (with T2 = 0.012, 3 x 2/T2 =
        # 5 x 2/T1, levels 3 and 5, would be kept as two points: correct, a little slower)
        (0.02, 0.013, lambda k: (k + 1) ** 2),
        (0.02, 0.04, lambda k: 2 * k + 1),  # T2 = 2 T1: multiples of 1/T1
        (math.inf, 0.01, lambda k: k + 1),  # dephasing only
        (math.inf, math.inf, lambda k: 1),  # perfect memories
    ],
)
def test_lattice_sizes(t1_s, t2_s, size):
    noise = NodeNoise(t1_s=t1_s, t2_s=t2_s)
    for k in range(6):
        lattice = rate_lattice(noise, k)
        assert len(lattice.rates) == size(k)
        assert lattice.rates[0] == 0.0
        assert len(set(lattice.rates.tolist())) == len(lattice.rates)


def test_every_kind_goes_through_one_waiting_path():
    # each registered kind, pumped and symmetric, evaluates with memory noise
    for kind in STEP_KINDS.values():
        for text in (kind.pump_token + "Y", kind.same_token + "Y^2"):
            r = evaluate(text, PROFILE)
            assert 0.0 < r.fidelity < 1.0 and math.isfinite(r.time_per_output_s)
