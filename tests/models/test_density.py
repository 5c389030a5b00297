"""The package's density-matrix engine (models/density.py) against the qutip reference.

Every expected value here comes from ``tests/reference/density_matrix.py`` (full
density matrices built with qutip from explicit unitaries, partial-trace
channels, Kraus operators and projectors; it finds a Clifford for each rotation
itself) or is a textbook fact marked "common practice, no source". The engine
is compared matrix element by matrix element, not only on Bell weights, with
every noise source on at once and with inputs that are not Bell-diagonal.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest
import qutip
from numpy.testing import assert_allclose

from models import PERMUTATIONS, density
from models.steps import DOUBLE_SELECTION, TWO_TO_ONE

try:
    from tests.reference import density_matrix as ref
except ModuleNotFoundError:  # plain `pytest` puts only this folder on sys.path
    sys.path.append(str(Path(__file__).resolve().parents[2]))
    from tests.reference import density_matrix as ref

TOL = 1e-10
CASES = 24


def _random_pair(rng) -> qutip.Qobj:
    """A pair with a Bell diagonal near Phi+ and, mostly, off-diagonal coherence too."""
    weights = rng.dirichlet(rng.uniform(0.3, 3.0, 4) + np.array([6.0, 0, 0, 0]))
    if rng.random() < 0.25:
        return ref.pair_state(weights)
    return ref.coherent_pair_state(weights, rng.uniform(0, 2 * np.pi, 4), rng.uniform(0.2, 1.0))


def _rotated(pair: qutip.Qobj, rotation: int, single_qubit: float) -> qutip.Qobj:
    if rotation == 0:  # no gate, no noise
        return pair
    u = density.ROTATION_UNITARIES[rotation]
    rho = ref.apply_unitary(ref.apply_unitary(pair, u, 0), u.conj(), 1)
    return ref.depolarize(ref.depolarize(rho, [0], single_qubit), [1], single_qubit)


def _cases(seed: int, n_pairs: int):
    rng = np.random.default_rng(seed)
    # six-qubit reference runs are slow: fewer cases for double selection
    for _ in range(CASES if n_pairs == 2 else CASES // 2):
        yield (
            [_random_pair(rng) for _ in range(n_pairs)],
            [int(r) for r in rng.integers(0, 6, n_pairs)],
            dict(
                two_qubit=float(rng.uniform(0.8, 1.0)),
                single_qubit=float(rng.uniform(0.8, 1.0)),
                measurement=float(rng.uniform(0.85, 1.0)),
            ),
        )


@pytest.mark.parametrize(
    ("circuit", "seed"), [(TWO_TO_ONE, 11), (DOUBLE_SELECTION, 12)], ids=["2->1", "double"]
)
def test_steps_match_the_reference_on_coherent_inputs_with_every_noise_on(circuit, seed):
    for pairs, rotations, noise in _cases(seed, circuit.n_pairs):
        # Cliffords realising one label permutation differ by a Pauli, which acts on
        # coherent pairs: the reference rotates with the engine's U (checked against
        # the permutations below), its own gate noise following each rotation
        rotated = [_rotated(p, r, noise["single_qubit"]) for p, r in zip(pairs, rotations)]
        expected = ref.run_circuit(
            rotated, [None] * len(pairs), circuit.cnots, circuit.checks, **noise
        )
        states = [p.full() for p in pairs]
        effects = density.step_effects(circuit, rotations, **noise)
        success, kept = density.run_on_pairs(effects, states)
        assert_allclose(success, expected.success, rtol=0, atol=TOL)
        assert_allclose(kept, expected.rho.full(), rtol=0, atol=TOL)
        # the same step on the joint state, as a correlated input would be given
        joint_success, joint_kept = density.run_circuit(
            circuit, density.product_state(*states), rotations, **noise
        )
        assert_allclose(joint_success, expected.success, rtol=0, atol=TOL)
        assert_allclose(joint_kept, expected.rho.full(), rtol=0, atol=TOL)


def test_rotation_unitaries_realise_the_models_label_permutations():
    # the reference measures U ⊗ U* on its own Bell states
    for r, u in enumerate(density.ROTATION_UNITARIES):
        assert ref.label_permutation(u) == tuple(int(k) for k in PERMUTATIONS[r])


def test_bell_weights_and_coherence_match_the_reference():
    rng = np.random.default_rng(3)
    for _ in range(10):
        pair = _random_pair(rng)
        weights, off = ref.bell_diagonal(pair)
        assert_allclose(density.bell_weights(pair.full()), weights, atol=TOL)
        assert_allclose(density.bell_coherence(pair.full()), off, atol=TOL)
        assert_allclose(
            density.pair_density(weights), ref.pair_state(weights).full(), atol=TOL
        )


@pytest.mark.parametrize("wait_s", [0.0, 0.013, 0.2, 1.7])
def test_memory_matches_the_reference_without_any_projection(wait_s):
    rng = np.random.default_rng(4)
    for t1_s, t2_s in [(1.0, 0.7), (0.5, 1.0), (2.0, 0.05)]:
        pair = _random_pair(rng)
        *_, expected = ref.store(pair, wait_s=wait_s, t1_s=t1_s, t2_s=t2_s)
        got = density.store_pair(pair.full(), wait_s, t1_s=t1_s, t2_s=t2_s)
        assert_allclose(got, expected.full(), rtol=0, atol=TOL)


def test_memory_waits_broadcast_over_a_batch():
    rng = np.random.default_rng(5)
    pairs = [_random_pair(rng) for _ in range(3)]
    waits = np.array([0.01, 0.3, 0.0])
    got = density.store_pair(np.stack([p.full() for p in pairs]), waits, t1_s=1.0, t2_s=0.8)
    for p, w, g in zip(pairs, waits, got, strict=True):
        assert_allclose(g, ref.store(p, wait_s=w, t1_s=1.0, t2_s=0.8)[2].full(), atol=TOL)


def test_memory_kraus_operators_are_complete():
    # sum_j K_j^dagger K_j = 1 for a channel: common practice, no source
    k = density.memory_kraus(np.array([0.0, 0.1, 3.0]), t1_s=1.0, t2_s=1.5)
    total = np.einsum("...jai,...jak->...ik", k.conj(), k)
    assert_allclose(total, np.broadcast_to(np.eye(2), total.shape), atol=1e-14)


@pytest.mark.parametrize("single_qubit", [1.0, 0.93])
def test_werner_twirl_of_any_pair(single_qubit):
    # A random bilateral rotation (U ⊗ U*) turns any pair into the Werner state of
    # the same fidelity (Bennett, DiVincenzo, Smolin and Wootters, PRA 54, 3824
    # (1996)); the single-qubit noise then acts as the reference's depolarisation.
    rng = np.random.default_rng(6)
    for _ in range(5):
        pair = _random_pair(rng)
        f = ref.bell_diagonal(pair)[0][0]
        werner = ref.pair_state([f] + [(1 - f) / 3] * 3)
        expected = ref.depolarize(ref.depolarize(werner, [0], single_qubit), [1], single_qubit)
        got = density.twirl_to_werner(pair.full(), single_qubit=single_qubit)
        assert_allclose(got, expected.full(), rtol=0, atol=TOL)


def test_bell_projection_removes_all_coherence_and_keeps_the_diagonal():
    rng = np.random.default_rng(7)
    pair = _random_pair(rng)
    projected = density.bell_project(pair.full())
    weights, _ = ref.bell_diagonal(pair)
    assert_allclose(projected, ref.pair_state(weights).full(), atol=TOL)


def test_a_step_rejects_a_state_of_the_wrong_size():
    with pytest.raises(ValueError, match="3 pairs"):
        density.run_circuit(
            DOUBLE_SELECTION,
            np.eye(16) / 16,
            [0, 0, 0],
            two_qubit=1.0,
            single_qubit=1.0,
            measurement=1.0,
        )
