"""The model against published formulas and worked values, row by row.

Each row names its source. Published papers use their own Bell-state orders;
they are converted here, at the test's boundary, never inside the model.
"""

from __future__ import annotations

import math
import sys
from pathlib import Path

import numpy as np
import pytest
import qutip
import scipy.optimize
import scipy.stats
from numpy.testing import assert_allclose

import models

try:
    from tests.reference import density_matrix as ref
except ModuleNotFoundError:  # plain `pytest` puts only this folder on sys.path
    sys.path.append(str(Path(__file__).resolve().parents[2]))  # the repository root
    from tests.reference import density_matrix as ref

# six-decimal worked values are compared to half a unit in their last place
SIX_DECIMALS = 5e-7
TOL = 1e-12
PHI_PLUS, PSI_PLUS, PSI_MINUS, PHI_MINUS = np.eye(4)
Y_ROT = models.rotation_index("Y")  # DEJMPS: Y <-> Z, i.e. Psi- <-> Phi-
X_ROT = models.rotation_index("X")  # X <-> Z: the reversed (phase-flip) check


# ------------------------------------------------------------------ DEJMPS
# DEJMPS writes (A, B, C, D) = (Phi+, Psi-, Psi+, Phi-); ours is (Phi+, Psi+, Psi-, Phi-).
OURS_FROM_DEJMPS = np.array([0, 2, 1, 3])  # ours[k] = dejmps[OURS_FROM_DEJMPS[k]]


def to_dejmps(pair):
    return np.asarray(pair)[..., OURS_FROM_DEJMPS]  # the exchange is its own inverse


def from_dejmps(abcd):
    return np.asarray(abcd)[..., OURS_FROM_DEJMPS]


def dejmps_map(abcd):
    """Deutsch et al., PRL 77, 2818 (1996), in their order: (A', B', C', D'), N."""
    a, b, c, d = np.moveaxis(np.asarray(abcd, dtype=float), -1, 0)
    n = (a + b) ** 2 + (c + d) ** 2
    out = np.stack([a**2 + b**2, 2 * c * d, c**2 + d**2, 2 * a * b], axis=-1) / n[..., None]
    return out, n


DEJMPS_FROM_WERNER_07 = [
    # (round, fidelity, success probability): Deutsch et al., PRL 77, 2818 (1996),
    # their recurrence iterated from a Werner pair of F = 0.7 (values as listed in
    # the project's conventions, computed from that formula, not read off the paper)
    (1, 0.735294, 0.68),
    (2, 0.845946, 0.640138),
    (3, 0.934395, 0.766253),
    (4, 0.972004, 0.898387),
    (5, 0.996964, 0.947670),
]


def test_dejmps_iterates_from_werner_07():
    expected_f = [row[1] for row in DEJMPS_FROM_WERNER_07]
    expected_n = [row[2] for row in DEJMPS_FROM_WERNER_07]
    pair = models.werner(0.7)
    fidelities, successes = [], []
    for _ in DEJMPS_FROM_WERNER_07:
        success, out = models.two_to_one(pair, pair, rotations=(Y_ROT, Y_ROT))
        pair = out[0]
        fidelities.append(pair[0])
        successes.append(success[0])
    assert_allclose(fidelities, expected_f, atol=SIX_DECIMALS, rtol=0)
    assert_allclose(successes, expected_n, atol=SIX_DECIMALS, rtol=0)


def test_dejmps_table_is_the_paper_formula_iterated():
    # The table itself, recomputed in the paper's own order: guards the table.
    abcd = to_dejmps(models.werner(0.7))
    for _, fidelity, success in DEJMPS_FROM_WERNER_07:
        abcd, n = dejmps_map(abcd)
        assert_allclose([abcd[0], n], [fidelity, success], atol=SIX_DECIMALS, rtol=0)


def test_dejmps_map_on_random_bell_diagonal_states():
    # Deutsch et al., PRL 77, 2818 (1996): A' = (A^2 + B^2)/N, B' = 2CD/N,
    # C' = (C^2 + D^2)/N, D' = 2AB/N, N = (A + B)^2 + (C + D)^2.
    rng = np.random.default_rng(1996)
    pairs = rng.dirichlet(np.ones(4), size=500)
    success, kept = models.two_to_one(pairs, pairs, rotations=(Y_ROT, Y_ROT))
    expected, n = dejmps_map(to_dejmps(pairs))
    assert_allclose(success, n, atol=TOL, rtol=0)
    assert_allclose(kept, from_dejmps(expected), atol=TOL, rtol=0)


def test_order_conversion_is_the_psi_exchange():
    # DEJMPS B is Psi- (our Y), C is Psi+ (our X): a round trip and one explicit row.
    assert_allclose(to_dejmps([0.1, 0.2, 0.3, 0.4]), [0.1, 0.3, 0.2, 0.4])
    assert_allclose(from_dejmps(to_dejmps([0.1, 0.2, 0.3, 0.4])), [0.1, 0.2, 0.3, 0.4])


# ------------------------------------------------------------------ BBPSSW
BBPSSW_WORKED = [
    # (F, F', N): Bennett et al., PRL 76, 722 (1996), Werner input, output
    # re-twirled; worked values of their formula as listed in the conventions
    (0.7, 0.735294, 0.68),
    (0.8, 0.838150, 0.768889),
    (0.9, 0.926396, 0.875556),
]


def bbpssw(f):
    """Bennett et al., PRL 76, 722 (1996): F' and N for a Werner input."""
    r = (1 - f) / 3
    n = f**2 + 2 * f * (1 - f) / 3 + 5 * r**2
    return (f**2 + r**2) / n, n


@pytest.mark.parametrize(("f", "f_out", "n"), BBPSSW_WORKED)
def test_bbpssw_worked_values(f, f_out, n):
    success, kept = models.two_to_one(models.werner(f), models.werner(f))
    twirled = models.twirl_to_werner(kept[0])
    assert_allclose([twirled[0], success[0]], [f_out, n], atol=SIX_DECIMALS, rtol=0)
    assert_allclose(twirled[1:], (1 - f_out) / 3, atol=SIX_DECIMALS, rtol=0)
    assert_allclose(bbpssw(f), (f_out, n), atol=SIX_DECIMALS, rtol=0)  # guards the table


@pytest.mark.parametrize(("f", "f_out", "n"), BBPSSW_WORKED)
def test_bbpssw_baseline_gives_the_worked_values(f, f_out, n):
    # The baseline twirls the raw pair first: with perfect single-qubit gates that
    # leaves a Werner pair unchanged, so the published values stand
    # (Bennett et al., PRL 76, 722 (1996)).
    result = models.evaluate(models.baseline("bbpssw", 1), models.Profile(tuple(models.werner(f))))
    assert_allclose(
        [result.fidelity, result.success_probabilities[0]], [f_out, n], atol=SIX_DECIMALS, rtol=0
    )


def test_bbpssw_baseline_is_the_published_map_iterated():
    # Bennett et al., PRL 76, 722 (1996): F' and N of a Werner input, iterated
    f = 0.7
    result = models.evaluate(models.baseline("bbpssw", 4), models.Profile(tuple(models.werner(f))))
    for t in result.trace:
        f, n = bbpssw(f)
        assert_allclose([t.fidelity, t.success_probability], [f, n], atol=TOL, rtol=0)


def test_bbpssw_formula_on_random_fidelities_and_any_common_rotation():
    # A Werner pair is unchanged by every rotation, so the rotation cannot matter.
    rng = np.random.default_rng(722)
    f = rng.uniform(0.25, 1.0, size=300)
    expected_f, expected_n = bbpssw(f)
    for r in range(6):
        success, kept = models.two_to_one(models.werner(f), models.werner(f), rotations=(r, r))
        assert_allclose(success, expected_n, atol=TOL, rtol=0)
        assert_allclose(models.twirl_to_werner(kept)[:, 0], expected_f, atol=TOL, rtol=0)


# ------------------------------------------------------------------ bit and phase flips
BIT_FLIP_FIDELITIES = [0.05, 0.3, 0.49, 0.5, 0.51, 0.6, 0.75, 0.9, 0.99, 1.0]


def test_bit_flip_only_recurrence():
    # F' = F^2 / (F^2 + (1 - F)^2) (textbook; common practice, no source)
    f = np.array(BIT_FLIP_FIDELITIES)
    success, kept = models.two_to_one(models.bit_flip_pair(f), models.bit_flip_pair(f))
    assert_allclose(success, f**2 + (1 - f) ** 2, atol=TOL, rtol=0)
    assert_allclose(kept[:, 0], f**2 / (f**2 + (1 - f) ** 2), atol=TOL, rtol=0)
    assert_allclose(kept[:, 2:], 0.0, atol=TOL)  # no Y or Z appears


def test_bit_flip_recurrence_threshold_at_one_half():
    # raises F exactly when F > 1/2 (textbook; common practice, no source)
    f = np.linspace(0.01, 0.99, 99)
    _, kept = models.two_to_one(models.bit_flip_pair(f), models.bit_flip_pair(f))
    gain = kept[:, 0] - f
    assert np.all(np.sign(np.round(gain, 14)) == np.sign(np.round(f - 0.5, 14)))

    def step_gain(x):
        return models.two_to_one(models.bit_flip_pair(x), models.bit_flip_pair(x))[1][0, 0] - x

    assert_allclose(scipy.optimize.brentq(step_gain, 0.2, 0.8, xtol=1e-14), 0.5, atol=1e-12)


def test_plain_step_never_rejects_a_phase_flip():
    # Conventions (textbook; common practice, no source): with only Phi+ and Phi-
    # the plain step always succeeds, and F' = F^2 + (1 - F)^2.
    f = np.array([0.0, 0.2, 0.5, 0.7, 0.9, 1.0])
    success, kept = models.two_to_one(models.phase_flip_pair(f), models.phase_flip_pair(f))
    assert_allclose(success, 1.0, atol=TOL)
    assert_allclose(kept[:, 0], f**2 + (1 - f) ** 2, atol=TOL, rtol=0)
    assert_allclose(kept[:, 1:3], 0.0, atol=TOL)


def test_phase_flip_on_sacrificed_pair_is_copied_onto_kept_pair():
    success, kept = models.two_to_one(PHI_PLUS, PHI_MINUS)
    assert_allclose(success, [1.0], atol=TOL)
    assert_allclose(kept[0], PHI_MINUS, atol=TOL)


def test_reversed_step_rejects_a_phase_flip():
    # The X-rotated (reversed) step detects Z: Phi- on the sacrificed pair is rejected,
    # and the phase-flip family is then purified like the bit-flip family.
    success, _ = models.two_to_one(PHI_PLUS, PHI_MINUS, rotations=(X_ROT, X_ROT))
    assert_allclose(success, [0.0], atol=TOL)
    f = np.array([0.6, 0.8, 0.95])
    success, kept = models.two_to_one(
        models.phase_flip_pair(f), models.phase_flip_pair(f), rotations=(X_ROT, X_ROT)
    )
    assert_allclose(success, f**2 + (1 - f) ** 2, atol=TOL, rtol=0)
    assert_allclose(kept[:, 0], f**2 / (f**2 + (1 - f) ** 2), atol=TOL, rtol=0)


# ------------------------------------------------------------------ hashing
HASHING_WORKED = [
    # (Werner F, 1 - S(p)): Bennett, DiVincenzo, Smolin and Wootters, PRA 54, 3824
    # (1996), their formula; worked values as listed in the conventions
    (0.9, 0.372508),
    (0.95, 0.634355),
]


@pytest.mark.parametrize(("f", "expected"), HASHING_WORKED)
def test_hashing_yield_worked_values(f, expected):
    pair = models.werner(f)
    assert_allclose(models.hashing_yield(pair), expected, atol=SIX_DECIMALS, rtol=0)
    # the same formula through scipy's entropy, as a second implementation
    assert_allclose(1 - scipy.stats.entropy(pair, base=2), expected, atol=SIX_DECIMALS)


def test_hashing_yield_of_werner_pairs_crosses_zero_at_0_810710():
    # Bennett, DiVincenzo, Smolin and Wootters, PRA 54, 3824 (1996); crossing as listed
    # in the conventions
    root = scipy.optimize.brentq(
        lambda f: float(models.hashing_yield(models.werner(f))), 0.5, 0.99, xtol=1e-12
    )
    assert_allclose(root, 0.810710, atol=SIX_DECIMALS, rtol=0)


def test_hashing_yield_limits():
    # A pure pair gives 1; the fully mixed pair gives 1 - 2 = -1 (from the formula).
    assert_allclose(models.hashing_yield(PHI_PLUS), 1.0, atol=TOL)
    assert_allclose(models.hashing_yield(np.full(4, 0.25)), -1.0, atol=TOL)


# ------------------------------------------------------------------ gate noise
@pytest.mark.parametrize("p", [1.0, 0.95, 0.8, 0.5])
def test_duer_briegel_identity_through_the_reference(p):
    # Noise model: Duer, Briegel, Cirac and Zoller, PRA 59, 169 (1999). Identity
    # (derived by us, conventions): the same noise after each node's CNOT acts on
    # the 16 joint labels of the two pairs as p^2 (ideal) + (1 - p^2) (uniform).
    rng = np.random.default_rng(169)
    a, b = rng.dirichlet(np.ones(4), size=2)

    def joint_after_bilateral_cnot(noise):
        rho = qutip.tensor(ref.pair_state(a), ref.pair_state(b))
        for node in (0, 1):  # qubits A0 B0 A1 B1
            gate = ref.cnot_operator(4, node, 2 + node)
            rho = ref.depolarize(gate * rho * gate.dag(), [node, 2 + node], noise)
        return ref.joint_bell_diagonal(rho, 2)

    ideal = joint_after_bilateral_cnot(1.0)
    assert_allclose(joint_after_bilateral_cnot(p), p**2 * ideal + (1 - p**2) / 16, atol=TOL)


def test_duer_briegel_identity_in_the_model_step():
    # Consequence for the 2->1 step: success(p) = p^2 success(1) + (1 - p^2) / 2 and the
    # unnormalised kept weights mix with (1 - p^2) / 8 each (a uniform joint label
    # passes the parity half the time, for any eta).
    rng = np.random.default_rng(59)
    a, b = rng.dirichlet(np.ones(4), size=(2, 100))
    eta = rng.uniform(0.7, 1.0, size=100)
    p = rng.uniform(0.3, 1.0, size=100)
    s1, k1 = models.two_to_one(a, b, measurement=eta)
    sp, kp = models.two_to_one(a, b, two_qubit=p, measurement=eta)
    assert_allclose(sp, p**2 * s1 + (1 - p**2) / 2, atol=TOL, rtol=0)
    assert_allclose(
        sp[:, None] * kp,
        (p**2 * s1)[:, None] * k1 + ((1 - p**2) / 8)[:, None],
        atol=TOL,
        rtol=0,
    )


def test_check_error_is_two_eta_one_minus_eta():
    # Duer, Briegel, Cirac and Zoller, PRA 59, 169 (1999) measurement model:
    # two outcomes each right with probability eta disagree spuriously with 2 eta (1 - eta).
    eta = np.array([0.5, 0.9, 0.99, 1.0])
    assert_allclose(models.check_error(eta), 2 * eta * (1 - eta), atol=TOL)
    # and through the reference: Phi+ pairs, perfect gates, each check wrong with that
    for e in eta:
        result = ref.two_to_one(PHI_PLUS, PHI_PLUS, measurement=float(e))
        assert_allclose(result.success, 1 - 2 * e * (1 - e), atol=TOL)


# ------------------------------------------------------------------ double selection
# Circuit: Fujii and Yamamoto, PRA 80, 042308 (2009) -- FROM MEMORY, not checked
# against the paper: CNOT kept -> first, CNOT second -> first; first compared in Z
# (reads x_kept + x_first + x_second), second in X (reads z_first + z_second).
BITS = {0: (0, 0), 1: (1, 0), 2: (1, 1), 3: (0, 1)}  # I, X, Y, Z as (x, z), conventions
LABEL = {bits: k for k, bits in BITS.items()}


def _double_selection_truth_table():
    rows = []
    for s in range(4):
        for a in range(4):
            for b in range(4):
                (xs, zs), (xa, za), (xb, zb) = BITS[s], BITS[a], BITS[b]
                passes = (xs ^ xa ^ xb) == 0 and (za ^ zb) == 0
                rows.append((s, a, b, passes, LABEL[(xs, zs ^ za)]))
    return rows


DS_TRUTH = _double_selection_truth_table()


def test_double_selection_parities_as_stated_model():
    # the conventions' statement of what each check reads, on all 64 pure inputs
    eye = np.eye(4)
    s, a, b, passes, out = (np.array(col) for col in zip(*DS_TRUTH, strict=True))
    success, kept = models.double_selection(eye[s], eye[a], eye[b])
    assert_allclose(success, passes.astype(float), atol=TOL)
    assert_allclose(kept[passes], eye[out[passes]], atol=TOL)


def test_double_selection_parities_as_stated_reference():
    eye = np.eye(4)
    for s, a, b, passes, out in DS_TRUTH[::3]:  # every third row keeps this quick
        result = ref.double_selection(eye[s], eye[a], eye[b])
        assert_allclose(result.success, float(passes), atol=TOL)
        if passes:
            assert_allclose(result.bell, eye[out], atol=TOL)


def test_double_selection_rejects_a_phase_error_on_the_first_sacrificed_pair():
    # The point of the second sacrificed pair: the first CNOT copies a phase error
    # of the first sacrificed pair onto the kept pair, the X check on the second catches it.
    success, _ = models.double_selection(PHI_PLUS, PHI_MINUS, PHI_PLUS)
    assert_allclose(success, [0.0], atol=TOL)
    assert_allclose(ref.double_selection(PHI_PLUS, PHI_MINUS, PHI_PLUS).success, 0.0, atol=TOL)
    # the 2->1 step alone lets the same error through onto the kept pair
    success, kept = models.two_to_one(PHI_PLUS, PHI_MINUS)
    assert_allclose([success[0], kept[0, 3]], [1.0, 1.0], atol=TOL)


@pytest.mark.parametrize("error", [1, 2, 3])
def test_double_selection_rejects_any_single_error_on_a_sacrificed_pair(error):
    e = np.eye(4)[error]
    for inputs in [(PHI_PLUS, e, PHI_PLUS), (PHI_PLUS, PHI_PLUS, e)]:
        success, _ = models.double_selection(*inputs)
        assert_allclose(success, [0.0], atol=TOL)


def test_double_selection_passes_only_a_phase_error_on_the_kept_pair():
    success, kept = models.double_selection(np.eye(4), PHI_PLUS, PHI_PLUS)
    assert_allclose(success, [1.0, 0.0, 0.0, 1.0], atol=TOL)
    assert_allclose(kept[[0, 3]], np.eye(4)[[0, 3]], atol=TOL)


def test_double_selection_with_perfect_sacrificed_pairs_is_a_bit_flip_filter():
    # Worked consequence: perfect sacrificed pairs, perfect operations: the kept
    # pair's X and Y weights are removed, success = F + p_Z.
    rng = np.random.default_rng(42308)
    kept_in = rng.dirichlet(np.ones(4), size=50)
    success, kept = models.double_selection(kept_in, PHI_PLUS, PHI_PLUS)
    keep = kept_in[:, 0] + kept_in[:, 3]
    assert_allclose(success, keep, atol=TOL)
    assert_allclose(kept[:, 0], kept_in[:, 0] / keep, atol=TOL)
    assert math.isclose(float(kept[:, 1:3].max()), 0.0, abs_tol=TOL)
