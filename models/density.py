"""A small full density-matrix engine for re-simulating recipes independently.

Everything here acts on full density matrices of at most five pairs (ten
qubits) with explicit unitaries and Kraus operators; Bell weights are read off
only where a caller asks for them (:func:`bell_weights`). Nothing uses the
Bell-diagonal label algebra of :mod:`models.steps` or :mod:`models.noise`:
this module is the independent check of that model
(:mod:`optimise.verify`), and it is itself checked against the qutip
reference of the tests.

Layout: pair ``i`` owns qubits ``2 i`` (node A) and ``2 i + 1`` (node B), so a
state of ``n`` pairs has qubits A0, B0, A1, B1, ...; the first qubit is the most
significant in the matrix index. States are complex arrays of shape
``(..., 2**q, 2**q)`` with any leading batch axes (one state per sample).

Noise sources, each a Kraus map:

- two-qubit gate: after each node's CNOT, ``rho -> p rho + (1 - p) 1/4 ⊗
  Tr_{two qubits}(rho)`` (Duer-Briegel), written as the product of two complete
  single-qubit depolarisations (Kraus ``sigma_k / 2``) mixed with the identity;
- single-qubit gate: ``p1 rho + (1 - p1) 1/2 ⊗ Tr_q(rho)`` on each qubit after a
  non-identity rotation (the identity rotation is no gate);
- measurement: the reported outcome is wrong with probability ``1 - eta``, a bit
  flip (Z basis) or phase flip (X basis) before an ideal measurement;
- memory: amplitude damping towards |0> (T1) then pure dephasing, so that
  coherences decay as ``exp(-t/T2)``, on each stored qubit.

A bilateral rotation is a single-qubit Clifford U at node A and its complex
conjugate U* at node B (which fixes Phi+); :data:`ROTATION_UNITARIES` holds one U
per rotation of :data:`models.rotations.ROTATION_NAMES`.

References
----------
1. W. Duer, H.-J. Briegel, J. I. Cirac and P. Zoller, Phys. Rev. A 59, 169 (1999)
   (gate and measurement noise).
2. D. Deutsch et al., Phys. Rev. Lett. 77, 2818 (1996) (the Rx(pi/2) rotation).
3. C. H. Bennett, D. P. DiVincenzo, J. A. Smolin and W. K. Wootters,
   Phys. Rev. A 54, 3824 (1996) (bilateral twirls to Werner form).
4. M. A. Nielsen and I. L. Chuang, Quantum Computation and Quantum Information
   (Cambridge, 2000), section 8.3 (amplitude and phase damping Kraus operators).
"""

from __future__ import annotations

import numpy as np

PAULIS = np.array([[[1, 0], [0, 1]], [[0, 1], [1, 0]], [[0, -1j], [1j, 0]], [[1, 0], [0, -1]]])
_S = np.diag([1, 1j])
_H = np.array([[1, 1], [1, -1]]) / np.sqrt(2)
_RX = (PAULIS[0] - 1j * PAULIS[1]) / np.sqrt(2)  # Rx(pi/2)
# U per rotation (Z, z, Y, y, X, x): no gate, S, Rx(pi/2), Rx then S, H, H then S;
# conjugation by U moves the Paulis as models.rotations.PERMUTATIONS says
ROTATION_UNITARIES = np.array([PAULIS[0], _S, _RX, _S @ _RX, _H, _S @ _H], dtype=complex)
IDENTITY_ROTATION = 0
# the kets (1 ⊗ sigma_k)|Phi+>, k in (I, X, Y, Z), as columns; qubit A most significant
BELL_KETS = np.stack(
    [np.kron(PAULIS[0], p) @ (np.array([1, 0, 0, 1]) / np.sqrt(2)) for p in PAULIS], axis=1
)
_CNOT = np.array([[1, 0, 0, 0], [0, 1, 0, 0], [0, 0, 0, 1], [0, 0, 1, 0]], dtype=complex)
# outcomes of both qubits agree: Z basis |00><00| + |11><11|, X basis |++><++| + |--><--|
_AGREE = {"Z": np.diag([1.0, 0, 0, 1]).astype(complex)}
_AGREE["X"] = np.kron(_H, _H) @ _AGREE["Z"] @ np.kron(_H, _H)
_FLIP = {"Z": PAULIS[1], "X": PAULIS[3]}  # the error that flips an outcome in that basis


def n_qubits(rho) -> int:
    """Number of qubits of a state of shape (..., 2**q, 2**q)."""
    return int(np.log2(rho.shape[-1]))


def pair_density(bell) -> np.ndarray:
    """Density matrices ``sum_k w_k |B_k><B_k|`` from Bell weights.

    Parameters
    ----------
    bell : array_like, shape (..., 4)
        Weights in the Pauli-frame order (I, X, Y, Z) = (Phi+, Psi+, Psi-, Phi-).

    Returns
    -------
    ndarray, complex, shape (..., 4, 4)

    Examples
    --------
    >>> weights = [0.7, 0.1, 0.15, 0.05]
    >>> bool(np.allclose(bell_weights(pair_density(weights)), weights))
    True
    """
    w = np.asarray(bell, dtype=float)
    return np.einsum("ik,...k,jk->...ij", BELL_KETS, w, BELL_KETS.conj()).astype(complex)


def bell_matrix(rho) -> np.ndarray:
    """A pair's density matrix in the Bell basis ``<B_j|rho|B_k>``, shape (..., 4, 4)."""
    return np.einsum("ij,...ik,kl->...jl", BELL_KETS.conj(), rho, BELL_KETS)


def bell_weights(rho) -> np.ndarray:
    """Bell weights ``<B_k|rho|B_k>`` of pairs, shape (..., 4), real; entry 0 is the fidelity."""
    return np.real(np.einsum("...kk->...k", bell_matrix(rho)))


def bell_coherence(rho) -> np.ndarray:
    """Frobenius norm of the off-diagonal part of pairs in the Bell basis, shape (...,).

    Zero exactly for a Bell-diagonal pair: how far a state is from what a
    Bell-diagonal model can describe.
    """
    m = bell_matrix(rho)
    off = m - np.einsum("...kk,kj->...kj", m, np.eye(4))
    return np.sqrt(np.sum(np.abs(off) ** 2, axis=(-2, -1)))


def bell_project(rho) -> np.ndarray:
    """Keep only the Bell diagonal of pairs (a bilateral Pauli twirl), shape (..., 4, 4)."""
    return pair_density(bell_weights(rho))


def product_state(*pairs) -> np.ndarray:
    """The joint state of independent pairs (each (..., 4, 4)), pair 0 first."""
    rho = pairs[0]
    for p in pairs[1:]:
        rho = np.einsum("...ij,...kl->...ikjl", rho, p)
        d = rho.shape[-1] * rho.shape[-2]
        rho = rho.reshape(rho.shape[:-4] + (d, d))
    return rho


def _tensor(rho):
    q = n_qubits(rho)
    return rho.reshape(rho.shape[:-2] + (2,) * (2 * q)), q


def _matrix(t, q):
    return t.reshape(t.shape[: -2 * q] + (2**q, 2**q))


def _left(t, op, axes):
    """Contract a fixed operator (2**k, 2**k) into the ket axes ``axes`` of a state tensor."""
    k = len(axes)
    moved = np.tensordot(op.reshape((2,) * (2 * k)), t, axes=(list(range(k, 2 * k)), list(axes)))
    return np.moveaxis(moved, list(range(k)), list(axes))


def conjugate(rho, op, qubits) -> np.ndarray:
    """``O rho O^dagger`` with the operator ``op`` (2**k, 2**k) acting on ``qubits``.

    ``op`` is the same for every state of the batch.
    """
    t, q = _tensor(rho)
    batch = t.ndim - 2 * q
    kets = [batch + i for i in qubits]
    bras = [batch + q + i for i in qubits]
    t = _left(t, np.asarray(op, dtype=complex), kets)
    t = _left(t, np.asarray(op, dtype=complex).conj(), bras)
    return _matrix(t, q)


def apply_kraus(rho, kraus, qubits) -> np.ndarray:
    """``sum_j K_j rho K_j^dagger`` with fixed Kraus operators (each 2**k x 2**k) on ``qubits``."""
    return sum(conjugate(rho, k, qubits) for k in kraus)


def depolarize(rho, qubits, survival: float) -> np.ndarray:
    """Depolarising noise on ``qubits`` jointly: ``p rho + (1 - p) 1/2**m ⊗ Tr_qubits(rho)``.

    The fully depolarised part is the product of each qubit's complete
    depolarisation (Kraus ``sigma_k / 2``), so the map is Kraus with
    ``sqrt(p) 1`` and ``sqrt((1 - p)) / 2**m`` times each Pauli string.
    """
    if survival == 1.0:
        return rho
    mixed = rho
    for qubit in qubits:
        mixed = apply_kraus(mixed, PAULIS / 2.0, [qubit])
    return survival * rho + (1.0 - survival) * mixed


def memory_kraus(wait_s, *, t1_s: float, t2_s: float) -> np.ndarray:
    """Kraus operators of a memory wait, one set per wait: shape (..., 4, 2, 2).

    Amplitude damping towards |0> with ``gamma = 1 - exp(-t/T1)`` (Kraus
    ``diag(1, sqrt(1 - gamma))`` and ``sqrt(gamma) |0><1|``) followed by pure
    dephasing (``sqrt((1 + lam)/2) 1``, ``sqrt((1 - lam)/2) Z``) with
    ``lam = exp(-t/T2 + t/(2 T1))``, so coherences decay as ``exp(-t/T2)``
    overall; ``lam <= 1`` needs ``T2 <= 2 T1``.

    Parameters
    ----------
    wait_s : float or array, seconds
    t1_s, t2_s : float, seconds (``inf``: no decay)
    """
    t = np.asarray(wait_s, dtype=float)
    decay = np.exp(-t / t1_s)
    lam = np.minimum(np.exp(-t / t2_s + t / (2.0 * t1_s)), 1.0)
    keep, lose = np.sqrt((1.0 + lam) / 2.0), np.sqrt((1.0 - lam) / 2.0)
    k = np.zeros(t.shape + (4, 2, 2), dtype=complex)
    # dephasing Kraus (1 or Z) after damping Kraus (no jump or jump to |0>)
    k[..., 0, 0, 0], k[..., 0, 1, 1] = keep, keep * np.sqrt(decay)
    k[..., 1, 0, 1] = keep * np.sqrt(1.0 - decay)
    k[..., 2, 0, 0], k[..., 2, 1, 1] = lose, -lose * np.sqrt(decay)
    k[..., 3, 0, 1] = lose * np.sqrt(1.0 - decay)
    return k


def store_pair(rho, wait_s, *, t1_s: float, t2_s: float) -> np.ndarray:
    """Both qubits of pairs (..., 4, 4) wait in memory; ``wait_s`` broadcasts over the batch.

    Each qubit undergoes :func:`memory_kraus`; no Bell-diagonal projection.
    """
    if np.isinf(t1_s) and np.isinf(t2_s):
        return rho
    kraus = memory_kraus(wait_s, t1_s=t1_s, t2_s=t2_s)  # (..., 4, 2, 2)
    both = np.einsum("...aij,...bkl->...abikjl", kraus, kraus)
    both = both.reshape(both.shape[:-6] + (16, 4, 4))
    return np.einsum("...nij,...jk,...nlk->...il", both, rho, both.conj())


def bilateral_rotation(rho, rotation: int, pair: int, *, single_qubit: float) -> np.ndarray:
    """U at node A and U* at node B of ``pair``, each followed by single-qubit noise.

    The identity rotation is no gate and adds no noise.
    """
    if int(rotation) == IDENTITY_ROTATION:
        return rho
    u = ROTATION_UNITARIES[int(rotation)]
    rho = conjugate(rho, u, [2 * pair])
    rho = conjugate(rho, u.conj(), [2 * pair + 1])
    rho = depolarize(rho, [2 * pair], single_qubit)
    return depolarize(rho, [2 * pair + 1], single_qubit)


def bilateral_cnot(rho, control: int, target: int, *, two_qubit: float) -> np.ndarray:
    """A CNOT at each node (control pair -> target pair), each followed by two-qubit noise."""
    for node in (0, 1):
        qubits = [2 * control + node, 2 * target + node]
        rho = conjugate(rho, _CNOT, qubits)
        rho = depolarize(rho, qubits, two_qubit)
    return rho


# the bilateral rotations whose average takes any pair to Werner form: the four
# Paulis (they remove the Bell basis' off-diagonal terms) times the three cyclic
# relabellings of X, Y, Z (they equalise the three error weights)
_WERNER_TWIRL = [p @ ROTATION_UNITARIES[r] for p in PAULIS for r in (0, 3, 5)]


def twirl_to_werner(rho, *, single_qubit: float) -> np.ndarray:
    """A random bilateral Clifford drawn from 12, averaged: pairs (..., 4, 4) to Werner form.

    Whatever is drawn, it is applied as one gate at each node, so single-qubit
    noise ``single_qubit`` follows at both nodes.
    """
    out = 0.0
    for u in _WERNER_TWIRL:
        out = out + conjugate(conjugate(rho, u, [0]), u.conj(), [1])
    out = out / len(_WERNER_TWIRL)
    return depolarize(depolarize(out, [0], single_qubit), [1], single_qubit)


def step_effects(circuit, rotations, *, two_qubit, single_qubit, measurement) -> np.ndarray:
    """The operators whose expectations are the kept pair's unnormalised matrix elements.

    A step maps the joint state of its inputs linearly to the kept pair's
    unnormalised state given success, ``K(rho)_ab = Tr[G_ab rho]``. This
    evaluates ``G_ab = Phi^dagger(|b><a| ⊗ E)`` in the Heisenberg picture: the
    acceptance effect ``E`` of the checks (an ideal measurement of both qubits
    of each sacrificed pair; the pattern of agreeing and differing outcomes in
    the circuit's accepted set) is taken back through the adjoint of every
    Kraus map and gate of the circuit, in reverse order. Sixteen operators pass
    through the circuit instead of a batch of states, and one contraction per
    input then runs the step (:func:`run_circuit`). Rounds of five pairs
    (10 qubits) take the sixteen operators one at a time, to bound memory.

    Parameters
    ----------
    circuit : models.steps.StepCircuit
        Its ``operations`` (bilateral CNOTs and rotations, in order), ``checks``
        (sacrificed pair, basis) and ``accepted`` patterns; pair 0 is kept.
    rotations : sequence of ``circuit.n_pairs`` ints
        Rotation index of each input (:data:`models.rotations.ROTATION_NAMES`).
    two_qubit, single_qubit, measurement : float
        Noise parameters (1 is perfect).

    Returns
    -------
    ndarray, complex, shape (4, 4, 4**n, 4**n)
    """
    n = circuit.n_pairs
    if len(rotations) != n:
        raise ValueError(f"{circuit.name} takes {n} rotations, got {len(rotations)}")
    effect = _acceptance(circuit)
    units = np.eye(4, dtype=complex)
    g = np.empty((4, 4, 4**n, 4**n), dtype=complex)
    noise = {"two_qubit": two_qubit, "single_qubit": single_qubit, "measurement": measurement}
    for a in range(4):
        for b in range(4):
            g[a, b] = np.kron(np.outer(units[b], units[a]), effect)
            if n >= 5:
                g[a, b] = _adjoint_circuit(g[a, b], circuit, rotations, **noise)
    return g if n >= 5 else _adjoint_circuit(g, circuit, rotations, **noise)


def _acceptance(circuit) -> np.ndarray:
    """The effect on pairs 1 .. n-1 of "the reported parity pattern is accepted"."""
    n_checks = len(circuit.checks)
    bit_of = {pair: i for i, (pair, _) in enumerate(circuit.checks)}
    basis_of = dict(circuit.checks)
    total = 0.0
    for pattern in circuit.accepted:
        effect = np.eye(1, dtype=complex)
        for pair in range(1, circuit.n_pairs):
            if pair not in bit_of:
                effect = np.kron(effect, np.eye(4))
                continue
            agree = _AGREE[basis_of[pair]]
            differ = (pattern >> (n_checks - 1 - bit_of[pair])) & 1
            effect = np.kron(effect, np.eye(4) - agree if differ else agree)
        total = total + effect
    return total


def _adjoint_circuit(g, circuit, rotations, *, two_qubit, single_qubit, measurement):
    """Operators ``g`` (..., 4**n, 4**n) taken back through the adjoint of the circuit."""
    # the adjoint of each map, last map first; Paulis and the CNOT are Hermitian,
    # so the depolarising and flip maps are their own adjoints
    for pair, basis in circuit.checks:
        flips = [np.sqrt(measurement) * PAULIS[0], np.sqrt(1.0 - measurement) * _FLIP[basis]]
        for qubit in (2 * pair, 2 * pair + 1):
            g = apply_kraus(g, flips, [qubit])
    placed = [("rot", pair, r) for pair, r in enumerate(rotations)]
    for op in reversed(placed + list(circuit.operations)):
        if op[0] == "cnot":
            _, control, target = op
            for node in (1, 0):
                qubits = [2 * control + node, 2 * target + node]
                g = conjugate(depolarize(g, qubits, two_qubit), _CNOT, qubits)
            continue
        _, pair, r = op
        if int(r) == IDENTITY_ROTATION:
            continue
        u = ROTATION_UNITARIES[int(r)]
        g = depolarize(depolarize(g, [2 * pair + 1], single_qubit), [2 * pair], single_qubit)
        g = conjugate(g, u.T, [2 * pair + 1])  # (U*)^dagger = U^T
        g = conjugate(g, u.conj().T, [2 * pair])
    return g


def _normalise(unnormalised):
    success = np.real(np.einsum("...aa->...", unnormalised))
    safe = np.where(success > 0, success, 1.0)
    kept = unnormalised / safe[..., None, None]
    return success, np.where((success > 0)[..., None, None], kept, np.eye(4) / 4)


def run_circuit(circuit, rho, rotations, *, two_qubit, single_qubit, measurement):
    """Run a purification circuit on the joint state of its pairs.

    Parameters
    ----------
    circuit : models.steps.StepCircuit
    rho : ndarray, complex, shape (..., 4**n, 4**n)
        Joint state of the ``n = circuit.n_pairs`` pairs (e.g. :func:`product_state`),
        correlated or not.
    rotations, two_qubit, single_qubit, measurement
        As :func:`step_effects`.

    Returns
    -------
    success : ndarray, shape (...,)
        Probability that every check's two reported outcomes agree.
    kept : ndarray, complex, shape (..., 4, 4)
        The kept pair's state given success (maximally mixed where success is 0).
    """
    n = circuit.n_pairs
    if rho.shape[-1] != 4**n:
        raise ValueError(f"{circuit.name} needs the state of {n} pairs, got size {rho.shape[-1]}")
    g = step_effects(
        circuit, rotations, two_qubit=two_qubit, single_qubit=single_qubit, measurement=measurement
    )
    return _normalise(np.einsum("abij,...ji->...ab", g, rho))


def run_on_pairs(effects, pairs):
    """A step on independent input pairs, from its :func:`step_effects`.

    Parameters
    ----------
    effects : ndarray, shape (4, 4, 4**n, 4**n)
    pairs : sequence of n arrays, each complex (..., 4, 4), kept pair first

    Returns
    -------
    success (...,), kept (..., 4, 4): as :func:`run_circuit` on their product state.
    """
    n = len(pairs)
    kets, bras = "ikmoq"[:n], "jlnpr"[:n]
    inputs = ",".join(f"...{j}{i}" for i, j in zip(kets, bras, strict=True))
    spec = f"ab{kets}{bras},{inputs}->...ab"
    g = effects.reshape((4, 4) + (4,) * (2 * n))
    return _normalise(np.einsum(spec, g, *pairs, optimize=True))
