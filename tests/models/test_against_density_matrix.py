"""The exact Bell-diagonal model against the independent density-matrix reference.

Every expected value in this file comes from ``tests/reference/density_matrix.py``:
full 4-qubit / 6-qubit density matrices built with qutip from explicit unitaries,
partial-trace channels, Kraus operators and projectors, with no Bell-diagonal
shortcut. The reference is given the model's rotations only as label
permutations and finds a Clifford realising each one itself.

Textbook facts used to check the reference itself are marked "common practice,
no source".
"""

from __future__ import annotations

import itertools
import math
import sys
from pathlib import Path

import numpy as np
import pytest
import qutip
from numpy.testing import assert_allclose

import models

try:
    from tests.reference import density_matrix as ref
except ModuleNotFoundError:  # plain `pytest` puts only this folder on sys.path
    sys.path.append(str(Path(__file__).resolve().parents[2]))  # the repository root
    from tests.reference import density_matrix as ref

TOL = 1e-10
Z_LABEL = 3


def _perm(r) -> tuple[int, ...]:
    return tuple(int(k) for k in models.PERMUTATIONS[int(r)])


def _random_cases(seed: int, n_pairs: int) -> dict:
    """216 random cases; the rotation tuples cover every rotation on every input.

    Two pairs: all 36 rotation pairs, six times each. Three pairs: all 216 triples.
    Bell vectors from a seeded Dirichlet whose concentration varies, and whose
    Phi+ weight is boosted in about half the pairs, so that nearly pure, high
    fidelity and very mixed pairs all occur.
    """
    rng = np.random.default_rng(seed)
    combos = list(itertools.product(range(6), repeat=n_pairs))
    combos = (combos * (216 // len(combos)))[:216]
    n = len(combos)
    alpha = np.exp(rng.uniform(np.log(0.2), np.log(5.0), size=(n, n_pairs, 1))) * np.ones(4)
    alpha[..., 0] *= np.where(rng.random((n, n_pairs)) < 0.5, 20.0, 1.0)
    pairs = np.array([[rng.dirichlet(a) for a in row] for row in alpha])  # (n, n_pairs, 4)
    return {
        "pairs": pairs,
        "rotations": np.array(combos, dtype=np.intp),  # (n, n_pairs)
        "two_qubit": rng.uniform(0.8, 1.0, size=n),
        "single_qubit": rng.uniform(0.8, 1.0, size=n),
        "measurement": rng.uniform(0.9, 1.0, size=n),
    }


def _model(step, cases):
    n_pairs = cases["pairs"].shape[1]
    return step(
        *(cases["pairs"][:, i] for i in range(n_pairs)),
        rotations=tuple(cases["rotations"][:, i] for i in range(n_pairs)),
        two_qubit=cases["two_qubit"],
        single_qubit=cases["single_qubit"],
        measurement=cases["measurement"],
    )


def _reference(step, cases):
    results = []
    for i in range(len(cases["pairs"])):
        results.append(
            step(
                *cases["pairs"][i],
                rotations=tuple(_perm(r) for r in cases["rotations"][i]),
                two_qubit=float(cases["two_qubit"][i]),
                single_qubit=float(cases["single_qubit"][i]),
                measurement=float(cases["measurement"][i]),
            )
        )
    return (
        np.array([r.success for r in results]),
        np.array([r.bell for r in results]),
        np.array([r.off_diagonal for r in results]),
    )


@pytest.fixture(scope="module")
def two_to_one_cases():
    cases = _random_cases(seed=20240601, n_pairs=2)
    return cases, _model(models.two_to_one, cases), _reference(ref.two_to_one, cases)


@pytest.fixture(scope="module")
def double_selection_cases():
    cases = _random_cases(seed=20240602, n_pairs=3)
    return cases, _model(models.double_selection, cases), _reference(ref.double_selection, cases)


# ------------------------------------------------------------ the reference itself
def test_reference_clifford_group_has_24_elements_and_six_label_permutations():
    # 24 single-qubit Cliffords mod phase, 6 permutations of X, Y, Z each realised
    # by the 4 Cliffords differing by a Pauli: common practice, no source.
    group = ref.clifford_group()
    assert len(group) == 24
    perms = [ref.label_permutation(u) for _, u in group]
    counts = {p: perms.count(p) for p in set(perms)}
    assert len(counts) == 6
    assert set(counts.values()) == {4}
    assert all(p[0] == 0 for p in counts)  # U ⊗ U* fixes Phi+
    assert {tuple(sorted(p)) for p in counts} == {(0, 1, 2, 3)}


def test_model_rotation_table_is_what_bilateral_cliffords_do():
    # The model's six rows, measured on density matrices by the reference search.
    found = {ref.label_permutation(u) for _, u in ref.clifford_group()}
    rows = [_perm(r) for r in range(6)]
    assert len(set(rows)) == 6
    assert set(rows) == found
    for row in rows:
        assert ref.label_permutation(ref.rotation_unitary(row)) == row


def test_dejmps_rotation_exchanges_y_and_z():
    # Rx(pi/2) at A, Rx(-pi/2) at B (Deutsch et al., PRL 77, 2818 (1996)); the
    # label permutation is measured by the reference, then compared with the
    # model's rotation "Y".
    def rx(theta):
        return (-1j * theta / 2 * qutip.sigmax()).expm().full()

    assert_allclose(rx(math.pi / 2).conj(), rx(-math.pi / 2), atol=1e-14)
    assert ref.label_permutation(rx(math.pi / 2)) == (0, 1, 3, 2)
    assert _perm(models.rotation_index("Y")) == (0, 1, 3, 2)


def test_u_tensor_u_with_complex_u_turns_phi_plus_into_phi_minus():
    # The classic mistake (common practice, no source): S ⊗ S instead of S ⊗ S*.
    s = qutip.Qobj(np.diag([1, 1j]))
    phi_plus, _, _, phi_minus = ref.bell_kets()
    wrong = qutip.tensor(s, s) * phi_plus
    right = ref.bilateral_operator(np.diag([1, 1j])) * phi_plus
    assert abs(abs(complex(phi_minus.dag() * wrong)) - 1) < 1e-12
    assert abs(abs(complex(phi_plus.dag() * right)) - 1) < 1e-12


def test_reference_partial_trace_depolarising_equals_pauli_kraus_form():
    # (1/4**m) sum over m-qubit Paulis P rho P = 1/2**m ⊗ Tr(rho): common practice,
    # no source. Checks the reference's partial-trace channel (and its qubit order).
    rho = qutip.rand_dm([2, 2, 2, 2], seed=3)
    paulis = [qutip.qeye(2), qutip.sigmax(), qutip.sigmay(), qutip.sigmaz()]
    for qubits in ([1], [0, 2], [3, 1]):
        average = 0 * rho
        for ps in itertools.product(paulis, repeat=len(qubits)):
            op = ref.operator_on(dict(zip(qubits, ps, strict=True)), 4)
            average = average + op * rho * op.dag()
        average = average / 4 ** len(qubits)
        assert_allclose(ref.replace_by_mixed(rho, qubits).full(), average.full(), atol=1e-13)


def test_reference_memory_kraus_has_the_stated_t1_and_t2():
    # Textbook amplitude damping + dephasing (common practice, no source): the
    # excited population decays as exp(-t/T1), the coherence as exp(-t/T2).
    t, t1, t2 = 0.3, 1.0, 0.7
    kraus = ref.memory_kraus(t, t1, t2)
    assert_allclose(sum(k.conj().T @ k for k in kraus), np.eye(2), atol=1e-14)
    plus = np.full((2, 2), 0.5)
    one = np.diag([0.0, 1.0])
    out_plus = sum(k @ plus @ k.conj().T for k in kraus)
    out_one = sum(k @ one @ k.conj().T for k in kraus)
    assert_allclose(out_plus[0, 1], 0.5 * math.exp(-t / t2), atol=1e-14)
    assert_allclose(out_one[1, 1], math.exp(-t / t1), atol=1e-14)


# ------------------------------------------------------------ steps
@pytest.mark.parametrize("fixture", ["two_to_one_cases", "double_selection_cases"])
def test_success_probability_matches_reference(fixture, request):
    _, (success, _), (ref_success, _, _) = request.getfixturevalue(fixture)
    assert success.shape == ref_success.shape == (216,)
    assert_allclose(success, ref_success, atol=TOL, rtol=0)


@pytest.mark.parametrize("fixture", ["two_to_one_cases", "double_selection_cases"])
def test_kept_pair_matches_reference(fixture, request):
    _, (_, kept), (_, ref_bell, _) = request.getfixturevalue(fixture)
    assert kept.shape == ref_bell.shape == (216, 4)
    assert_allclose(kept, ref_bell, atol=TOL, rtol=0)


@pytest.mark.parametrize("fixture", ["two_to_one_cases", "double_selection_cases"])
def test_kept_pair_stays_bell_diagonal_in_reference(fixture, request):
    _, _, (_, _, off_diagonal) = request.getfixturevalue(fixture)
    assert off_diagonal.max() < TOL


@pytest.mark.parametrize("fixture", ["two_to_one_cases", "double_selection_cases"])
def test_random_cases_cover_every_rotation_and_real_noise(fixture, request):
    # Guards the comparison above against a generator that silently stops covering.
    cases, _, (ref_success, _, _) = request.getfixturevalue(fixture)
    for column in cases["rotations"].T:
        assert set(column.tolist()) == set(range(6))
    assert cases["two_qubit"].min() < 0.85 and cases["measurement"].min() < 0.92
    assert ref_success.max() - ref_success.min() > 0.4


def _coherent(pair, rng):
    return ref.coherent_pair_state(pair, rng.uniform(0, 2 * math.pi, 4), rng.uniform(0.5, 1.0))


@pytest.mark.parametrize(("step", "n_pairs"), [(ref.two_to_one, 2), (ref.double_selection, 3)])
def test_step_depends_only_on_bell_diagonal_of_inputs(step, n_pairs):
    # Non-Bell-diagonal inputs with the same Bell diagonals as Bell-diagonal ones
    # give the same success probability and the same Bell diagonal of the kept
    # pair (the kept state itself may then carry off-diagonal terms).
    rng = np.random.default_rng(11 + n_pairs)
    largest_input_coherence = 0.0
    for _ in range(24):
        pairs = rng.dirichlet(np.ones(4), size=n_pairs)
        rotations = tuple(_perm(r) for r in rng.integers(0, 6, size=n_pairs))
        noise = {
            "two_qubit": rng.uniform(0.8, 1.0),
            "single_qubit": rng.uniform(0.8, 1.0),
            "measurement": rng.uniform(0.9, 1.0),
        }
        coherent = [_coherent(p, rng) for p in pairs]
        for p, c in zip(pairs, coherent, strict=True):
            bell, off = ref.bell_diagonal(c)
            assert_allclose(bell, p, atol=1e-13)
            largest_input_coherence = max(largest_input_coherence, off)
        plain = step(*pairs, rotations=rotations, **noise)
        mixed = step(*coherent, rotations=rotations, **noise)
        assert_allclose(mixed.success, plain.success, atol=TOL, rtol=0)
        assert_allclose(mixed.bell, plain.bell, atol=TOL, rtol=0)
    assert largest_input_coherence > 0.3


# ------------------------------------------------------------ named consequences
@pytest.mark.parametrize("rotation", range(6))
def test_undetected_label_is_what_the_reference_lets_through(rotation):
    # Kept Phi+, sacrificed a pure error label, perfect operations: the rotated
    # check passes only the label models.undetected_label names, and copies it
    # (as a phase error) onto the kept pair.
    undetected = models.undetected_label(rotation)
    phi_plus = np.eye(4)[0]
    for label in (1, 2, 3):
        result = ref.two_to_one(
            phi_plus, np.eye(4)[label], rotations=(_perm(rotation), _perm(rotation))
        )
        if label == undetected:
            assert_allclose(result.success, 1.0, atol=TOL)
            assert_allclose(result.bell, np.eye(4)[Z_LABEL], atol=TOL)
        else:
            assert_allclose(result.success, 0.0, atol=TOL)


def test_reversed_circuit_equals_x_rotated_step_after_unrotating():
    # Derivation (ours): H ⊗ H on the four qubits turns CNOT(kept -> sacrificed)
    # into CNOT(sacrificed -> kept), and a Z-basis measurement after H into an
    # X-basis one; node-local depolarising and outcome flips commute with it. So
    # the model's step with rotation "X" (X <-> Z) on both inputs and perfect
    # single-qubit gates equals the reversed circuit followed by a bilateral H on
    # the kept pair: same success, kept_model = rotate(kept_reversed, X), i.e.
    # kept_reversed = rotate(kept_model, inverse(X)) with inverse(X) = X.
    x = models.rotation_index("X")
    assert models.inverse(x) == x
    rng = np.random.default_rng(5)
    n = 40
    kept_in = rng.dirichlet(np.ones(4), size=n)
    sacrificed = rng.dirichlet(np.ones(4), size=n)
    two_qubit = rng.uniform(0.8, 1.0, size=n)
    measurement = rng.uniform(0.9, 1.0, size=n)
    success, kept = models.two_to_one(
        kept_in, sacrificed, rotations=(x, x), two_qubit=two_qubit, measurement=measurement
    )
    reversed_results = [
        ref.reversed_two_to_one(a, b, two_qubit=float(p), measurement=float(e))
        for a, b, p, e in zip(kept_in, sacrificed, two_qubit, measurement, strict=True)
    ]
    assert_allclose(success, [r.success for r in reversed_results], atol=TOL, rtol=0)
    unrotated = models.rotate(kept, models.inverse(x))
    assert_allclose(unrotated, [r.bell for r in reversed_results], atol=TOL, rtol=0)
    assert max(r.off_diagonal for r in reversed_results) < TOL
    # the relabelling matters: without un-rotating the outputs differ
    assert np.abs(kept - np.array([r.bell for r in reversed_results])).max() > 0.01


def test_reversed_circuit_rejects_a_phase_flip_on_the_sacrificed_pair():
    # The conventions' statement: the reversed circuit rejects a Phi- on the
    # sacrificed pair, which the plain step copies onto the kept pair.
    phi_plus, phi_minus = np.eye(4)[0], np.eye(4)[Z_LABEL]
    assert_allclose(ref.reversed_two_to_one(phi_plus, phi_minus).success, 0.0, atol=TOL)
    plain = ref.two_to_one(phi_plus, phi_minus)
    assert_allclose(plain.success, 1.0, atol=TOL)
    assert_allclose(plain.bell, phi_minus, atol=TOL)


# ------------------------------------------------------------ memory
MEMORY_CASES = [
    # (wait_s, t1_s, t2_s)
    (0.1, 1.0, 1.0),
    (0.3, 1.0, 2.0),  # T2 = 2 T1: amplitude damping only
    (0.05, 1.0, 0.3),
    (0.2, math.inf, 1.0),  # dephasing only
    (2.0, 1.5, 0.4),
]


@pytest.mark.parametrize(("wait_s", "t1_s", "t2_s"), MEMORY_CASES)
def test_memory_pair_level_projection_matches_reference(wait_s, t1_s, t2_s):
    rng = np.random.default_rng(int(wait_s * 1000) + 7)
    pairs = rng.dirichlet(np.ones(4), size=6)
    pairs[0] = [1.0, 0.0, 0.0, 0.0]
    expected = np.array([ref.store(p, wait_s=wait_s, t1_s=t1_s, t2_s=t2_s)[0] for p in pairs])
    got = models.store(pairs, wait_s=wait_s, t1_s=t1_s, t2_s=t2_s)
    assert_allclose(got, expected, atol=TOL, rtol=0)


@pytest.mark.parametrize(("wait_s", "t1_s", "t2_s"), MEMORY_CASES)
def test_per_qubit_pauli_twirl_misses_gamma_squared_over_four(wait_s, t1_s, t2_s):
    # The exact pair-level projection (reference) against the per-qubit Pauli twirl
    # (Tomita and Svore, PRA 90, 062320 (2014)) on a stored Phi+: the twirl's
    # fidelity is lower by exactly gamma**2 / 4 (conventions, derived by us).
    phi_plus = np.array([1.0, 0.0, 0.0, 0.0])
    exact = ref.store(phi_plus, wait_s=wait_s, t1_s=t1_s, t2_s=t2_s)[0]
    q = models.memory_qubit_twirl_probabilities(wait_s, t1_s, t2_s)
    twirled = models.pauli_channel(phi_plus, q)
    gamma = 1.0 - math.exp(-wait_s / t1_s)
    assert_allclose(exact[0] - twirled[0], gamma**2 / 4, atol=1e-13, rtol=0)


def test_stored_pair_is_not_bell_diagonal_before_projection():
    # Amplitude damping adds ZI + IZ terms, so the projection really discards
    # something (otherwise the tests above would not test the projection).
    _, off, _ = ref.store([1.0, 0.0, 0.0, 0.0], wait_s=0.3, t1_s=1.0, t2_s=1.0)
    assert off > 0.1


def test_from_density_matrix_matches_reference_bell_diagonal():
    rng = np.random.default_rng(2)
    for _ in range(10):
        rho = _coherent(rng.dirichlet(np.ones(4)), rng)
        pair, discarded = models.from_density_matrix(rho.full())
        bell, off = ref.bell_diagonal(rho)
        assert_allclose(pair, bell, atol=1e-12)
        assert_allclose(discarded, off, atol=1e-12)
