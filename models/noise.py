"""Noise of the nodes, as exact maps on Bell-diagonal labels.

Parameters follow the Duer-Briegel convention: a parameter of 1 is a perfect
operation. All functions broadcast over leading axes and are pure.

References
----------
1. W. Duer, H.-J. Briegel, J. I. Cirac and P. Zoller, Phys. Rev. A 59, 169 (1999)
   (two-qubit gate and measurement noise parameters).
2. Y. Tomita and K. M. Svore, Phys. Rev. A 90, 062320 (2014) (Pauli twirl of
   amplitude and phase damping, used here only for contrast).
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass

import numpy as np

from .states import X_BIT, Z_BIT, label_from_bits


@dataclass(frozen=True)
class NodeNoise:
    """Imperfections of the nodes' operations and memories (the same at both nodes).

    Attributes
    ----------
    two_qubit : float in [0, 1]
        Probability that a CNOT is perfect; otherwise its two qubits are replaced
        by the maximally mixed state (Duer-Briegel convention).
    single_qubit : float in [0, 1]
        Same for a single-qubit rotation (depolarising on one qubit).
    measurement : float in [0.5, 1]
        Probability that a single-qubit measurement outcome is reported correctly.
    t1_s, t2_s : float > 0, seconds
        Memory amplitude-damping time and coherence time (T2 <= 2 T1); ``inf``
        for a perfect memory.
    """

    two_qubit: float = 1.0
    single_qubit: float = 1.0
    measurement: float = 1.0
    t1_s: float = math.inf
    t2_s: float = math.inf

    def __post_init__(self):
        _check_range(
            "two_qubit", self.two_qubit, 0.0, 1.0, "the probability that a CNOT is perfect"
        )
        _check_range(
            "single_qubit",
            self.single_qubit,
            0.0,
            1.0,
            "the probability that a rotation is perfect",
        )
        _check_range(
            "measurement",
            self.measurement,
            0.5,
            1.0,
            "the probability that a measurement outcome is reported correctly",
        )
        for name in ("t1_s", "t2_s"):
            value = getattr(self, name)
            if not (_is_number(value) and value > 0) or math.isnan(value):
                raise ValueError(
                    f"{name} = {value!r} must be a time in seconds > 0 (inf: no decay)"
                )
        for name in ("two_qubit", "single_qubit", "measurement", "t1_s", "t2_s"):
            object.__setattr__(self, name, float(getattr(self, name)))
        if self.t2_s > 2 * self.t1_s:
            raise ValueError(
                f"t2_s = {self.t2_s!r} exceeds 2 * t1_s = {2 * self.t1_s!r}; "
                "amplitude damping alone already limits T2 to 2 T1"
            )


def _is_number(value) -> bool:
    # numpy scalars count as numbers; True and False do not
    return isinstance(value, numbers.Real) and not isinstance(value, (bool, np.bool_))


def _check_range(name, value, low, high, meaning):
    if not _is_number(value):
        raise ValueError(
            f"{name} = {value!r} is not a number; it is {meaning}, in [{low:g}, {high:g}]"
        )
    if math.isnan(value) or not low <= value <= high:
        raise ValueError(f"{name} = {value!r} is outside [{low:g}, {high:g}]; it is {meaning}")


def depolarize(pair, survival) -> np.ndarray:
    """Depolarising noise on both qubits of each pair, as after a bilateral rotation.

    Each node's qubit keeps its state with probability ``survival`` (p1) and is
    otherwise maximally mixed, so the pair keeps its label with probability p1**2
    and is otherwise uniform over the four labels.

    Parameters
    ----------
    pair : array_like, shape (..., 4)
    survival : float or array broadcastable to ``pair.shape[:-1]``
    """
    p = np.asarray(pair, dtype=float)
    s2 = np.asarray(survival, dtype=float)[..., None] ** 2
    return s2 * p + (1.0 - s2) * 0.25


def check_error(measurement) -> np.ndarray:
    """Probability that a bilateral parity comparison is reported wrongly: 2 eta (1 - eta)."""
    eta = np.asarray(measurement, dtype=float)
    return 2.0 * eta * (1.0 - eta)


# Bell weights -> correlations (1, <XX>, <YY>, <ZZ>); rows are orthogonal with norm^2 4
CORRELATIONS = np.array([[1, 1, 1, 1], [1, 1, -1, -1], [-1, 1, -1, 1], [1, -1, -1, 1]], dtype=float)


def memory_decays(wait_s, t1_s, t2_s) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The three exponentials a stored pair's decay depends on, for a fixed wait.

    Returns ``(exp(-2 t / T2), exp(-t / T1), exp(-2 t / T1))``. For a random wait,
    replace each by its expectation (the Laplace transform of the waiting-time
    distribution at 2/T2, 1/T1 and 2/T1): the stored state is linear in them, so
    the average state is exact.
    """
    t = np.asarray(wait_s, dtype=float)
    return np.exp(-2.0 * t / t2_s), np.exp(-t / t1_s), np.exp(-2.0 * t / t1_s)


def store_with_decays(pair, dephasing2, damping1, damping2) -> np.ndarray:
    """Pair-level Bell projection of amplitude damping and dephasing on both qubits.

    With the pair written as (1/4)(II + c_x XX + c_y YY + c_z ZZ), damping each qubit
    towards |0> by gamma = 1 - exp(-t/T1) and shrinking coherences by exp(-t/T2)
    gives, after dropping the non-Bell-diagonal terms (ZI, IZ):
    c_x -> exp(-2t/T2) c_x, c_y -> exp(-2t/T2) c_y,
    c_z -> exp(-2t/T1) c_z + gamma**2.
    Arguments are the outputs of :func:`memory_decays` (or their averages over a
    random wait); ``gamma**2 = 1 - 2 exp(-t/T1) + exp(-2t/T1)``.

    Parameters
    ----------
    pair : array_like, shape (..., 4)
    dephasing2, damping1, damping2 : arrays broadcastable to ``pair.shape[:-1]``
    """
    # einsum copes with the strided (N, 4) views the steps return; matmul does not
    c = np.einsum("...i,ji->...j", np.asarray(pair, dtype=float), CORRELATIONS)
    dephasing2 = np.asarray(dephasing2, dtype=float)
    damping1 = np.asarray(damping1, dtype=float)
    damping2 = np.asarray(damping2, dtype=float)
    c_new = np.stack(
        [
            c[..., 0],
            dephasing2 * c[..., 1],
            dephasing2 * c[..., 2],
            damping2 * c[..., 3] + (1.0 - 2.0 * damping1 + damping2),
        ],
        axis=-1,
    )
    return np.einsum("...j,jk->...k", c_new, CORRELATIONS) / 4.0


def store(pair, *, wait_s, t1_s, t2_s) -> np.ndarray:
    """A pair after both its qubits waited ``wait_s`` seconds in memory (exact Bell projection).

    Examples
    --------
    >>> out = store([1.0, 0, 0, 0], wait_s=0.1, t1_s=1.0, t2_s=1.0)
    >>> g = 1 - np.exp(-0.1)
    >>> bool(np.isclose(out[0], (1 + 2 * np.exp(-0.2) + (1 - g) ** 2 + g**2) / 4))
    True
    """
    return store_with_decays(pair, *memory_decays(wait_s, t1_s, t2_s))


def _xor_table() -> np.ndarray:
    k = np.arange(4)
    return label_from_bits(
        X_BIT[k][:, None] ^ X_BIT[k][None, :], Z_BIT[k][:, None] ^ Z_BIT[k][None, :]
    )


# label of the product of two Paulis (up to phase)
PAULI_PRODUCT = _xor_table()


def pauli_channel(pair, probabilities, *, both_nodes: bool = True) -> np.ndarray:
    """Apply a single-qubit Pauli channel to a pair's qubits.

    Parameters
    ----------
    pair : array_like, shape (..., 4)
    probabilities : array_like, shape (4,) or (..., 4)
        Probabilities of applying I, X, Y, Z to a qubit (must sum to 1).
    both_nodes : bool
        Apply the channel to both qubits (default) or to one of them.

    A Pauli at node A moves the label exactly as the same Pauli at node B does.
    """
    p = np.asarray(pair, dtype=float)
    q = np.asarray(probabilities, dtype=float)
    for _ in range(2 if both_nodes else 1):
        out = np.zeros(np.broadcast_shapes(p.shape, q.shape))
        for k in range(4):
            for j in range(4):
                out[..., PAULI_PRODUCT[k, j]] += p[..., k] * q[..., j]
        p = out
    return p


def memory_qubit_twirl_probabilities(wait_s, t1_s, t2_s) -> np.ndarray:
    """Per-qubit Pauli twirl of amplitude and phase damping (for contrast only).

    p_x = p_y = (1 - e^{-t/T1})/4, p_z = (1 + e^{-t/T1} - 2 e^{-t/T2})/4 (Tomita and
    Svore, Phys. Rev. A 90, 062320 (2014)). Applying this to each qubit misses
    gamma**2/4 of fidelity against the exact pair-level projection :func:`store`.
    Returns shape ``(..., 4)`` in the order (I, X, Y, Z).
    """
    t = np.asarray(wait_s, dtype=float)
    e1 = np.exp(-t / t1_s)
    e2 = np.exp(-t / t2_s)
    px = (1.0 - e1) / 4.0
    pz = (1.0 + e1 - 2.0 * e2) / 4.0
    return np.stack([1.0 - 2 * px - pz, px, px, pz], axis=-1)
