"""Purification steps, exact on Bell-diagonal inputs under Pauli-type node noise.

A step's success probability and the Bell diagonal of its kept pair depend only
on the Bell diagonals of its inputs, and with the depolarising gate noise and
classical measurement flips used here the output stays Bell-diagonal. So a step
is a fixed multilinear map on the inputs' weight vectors: we compile each circuit
once into small matrices over the joint labels of its pairs, then evaluate whole
batches with one matrix product.

Order inside a step: rotations (each non-identity one followed by single-qubit
noise at both nodes), the bilateral CNOTs in circuit order (each followed by
two-qubit gate noise at both nodes), measurements (each outcome flipped with
probability 1 - eta), then keep or discard. Memory waits are applied by the
caller (see :mod:`models.noise`), before a step and to its output during the
classical exchange.

References
----------
1. C. H. Bennett et al., Phys. Rev. Lett. 76, 722 (1996) (BBPSSW).
2. D. Deutsch et al., Phys. Rev. Lett. 77, 2818 (1996) (DEJMPS).
3. W. Duer, H.-J. Briegel, J. I. Cirac and P. Zoller, Phys. Rev. A 59, 169 (1999).
4. K. Fujii and K. Yamamoto, Phys. Rev. A 80, 042308 (2009) (double selection).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property
from itertools import product

import numpy as np

from .noise import check_error, depolarize
from .rotations import IDENTITY, SOURCES, rotate
from .states import X_BIT, Z_BIT, label_from_bits


@dataclass(frozen=True)
class StepCircuit:
    """A purification circuit on ``n_pairs`` Bell pairs.

    Attributes
    ----------
    name : str
    n_pairs : int
        Pair 0 is the one kept; the others are measured and sacrificed.
    cnots : tuple of (control, target)
        Bilateral CNOTs (one at each node) in the order applied.
    checks : tuple of (pair, basis)
        Bilateral measurements whose parities must agree; basis ``"Z"`` reads the
        pair's x bit, ``"X"`` reads its z bit.
    """

    name: str
    n_pairs: int
    cnots: tuple[tuple[int, int], ...]
    checks: tuple[tuple[int, str], ...]

    def __post_init__(self):
        for control, target in self.cnots:
            if control == target or not (0 <= control < self.n_pairs and 0 <= target < self.n_pairs):
                raise ValueError(f"cnot ({control}, {target}) must join two of the {self.n_pairs} pairs")
        for pair, basis in self.checks:
            if not 1 <= pair < self.n_pairs or basis not in ("X", "Z"):
                raise ValueError(f"check ({pair}, {basis!r}) must measure a sacrificed pair in X or Z")

    @cached_property
    def terms(self) -> np.ndarray:
        """Compiled map, shape ``(n_cnots + 1, 4**n_pairs, 4 * 2**n_checks)``.

        ``terms[k]`` takes the joint input weights to the joint weights of (kept
        label, reported-parity pattern) for the part of the evolution in which
        exactly ``k`` CNOTs failed; its coefficient is ``s**(n - k) * (1 - s)**k``
        with ``s = two_qubit**2`` (both nodes' gates perfect).
        """
        return _compile(self)

    @cached_property
    def plan(self):
        """Per term of :attr:`terms`, the fastest exact way to evaluate it (see ``_plan``)."""
        return _plan(self.terms, self.n_pairs)


def _joint_bits(n_pairs):
    """Per joint label (pair 0 most significant): x and z bits, shape (4**n, n)."""
    labels = np.array(list(product(range(4), repeat=n_pairs)), dtype=np.intp).reshape(-1, n_pairs)
    return X_BIT[labels], Z_BIT[labels]


def _joint_index(x, z):
    n = x.shape[1]
    labels = label_from_bits(x, z)
    return (labels * 4 ** np.arange(n - 1, -1, -1)).sum(axis=1)


def _cnot_matrix(n, control, target):
    x, z = _joint_bits(n)
    x, z = x.copy(), z.copy()
    x[:, target] ^= x[:, control]
    z[:, control] ^= z[:, target]
    new = _joint_index(x, z)
    m = np.zeros((4**n, 4**n))
    m[new, np.arange(4**n)] = 1.0
    return m


def _depolarize_matrix(n, pairs):
    """Replace the joint marginal of ``pairs`` by uniform: both nodes' gate failed."""
    x, z = _joint_bits(n)
    others = [i for i in range(n) if i not in pairs]
    key = _joint_index(x[:, others], z[:, others]) if others else np.zeros(4**n, dtype=np.intp)
    same = key[:, None] == key[None, :]
    return same / 16.0 ** len(pairs)


def _compile(circuit: StepCircuit) -> np.ndarray:
    n = circuit.n_pairs
    size = 4**n
    # polynomial in s: polys[k] is the map with k failed gates
    polys = [np.eye(size)]
    for control, target in circuit.cnots:
        cnot = _cnot_matrix(n, control, target)
        failed = _depolarize_matrix(n, (control, target)) @ cnot
        new = [np.zeros((size, size)) for _ in range(len(polys) + 1)]
        for k, m in enumerate(polys):
            new[k] += cnot @ m
            new[k + 1] += failed @ m
        polys = new
    x, z = _joint_bits(n)
    bits = [x[:, pair] if basis == "Z" else z[:, pair] for pair, basis in circuit.checks]
    pattern = np.zeros(size, dtype=np.intp)
    for b in bits:
        pattern = 2 * pattern + b
    kept = label_from_bits(x[:, 0], z[:, 0])
    n_patterns = 2 ** len(circuit.checks)
    readout = np.zeros((size, 4 * n_patterns))
    readout[np.arange(size), kept * n_patterns + pattern] = 1.0
    return np.stack([m.T @ readout for m in polys])


def _joint_weights(columns, n):
    """Joint weights of all inputs, shape (4**n_pairs, N), pair 0 most significant."""
    joint = columns[0]
    for c in columns[1:]:
        joint = (joint[:, None, :] * c[None, :, :]).reshape(-1, n)
    return joint


def _sum_products(columns, groups, n):
    """Grouped sums of input products for a term that sends each joint label to one outcome.

    ``groups[o][m]`` lists the joint labels (as per-pair label tuples) that end as
    kept label ``o`` with parity pattern ``m``; summing their products directly
    avoids forming all 4**n_pairs joint weights.
    """
    out = np.zeros((4, len(groups[0]), n))
    for o, per_pattern in enumerate(groups):
        for m, labels in enumerate(per_pattern):
            for label in labels:
                product_ = columns[0][label[0]]
                for c, k in zip(columns[1:], label[1:]):
                    product_ = product_ * c[k]
                out[o, m] += product_
    return out


def _plan(terms: np.ndarray, n_pairs: int):
    """How to evaluate each term fastest: constant, one-hot (a relabelling), or dense."""
    plan = []
    labels = list(product(range(4), repeat=n_pairs))
    n_patterns = terms.shape[2] // 4
    for term in terms:
        if np.allclose(term, term[0]):
            plan.append(("constant", term[0].reshape(4, n_patterns)))
        elif np.all((term == 0) | (term == 1)) and np.all(term.sum(axis=1) == 1):
            groups = [[[] for _ in range(n_patterns)] for _ in range(4)]
            for j, col in enumerate(term.argmax(axis=1)):
                groups[col // n_patterns][col % n_patterns].append(labels[j])
            plan.append(("one_hot", groups))
        else:
            plan.append(("dense", term.T))
    return tuple(plan)


TWO_TO_ONE = StepCircuit("two_to_one", 2, cnots=((0, 1),), checks=((1, "Z"),))
DOUBLE_SELECTION = StepCircuit("double_selection", 3, cnots=((0, 1), (2, 1)), checks=((1, "Z"), (2, "X")))


def prepare(pair, rotation, single_qubit) -> np.ndarray:
    """Rotate pairs and add single-qubit noise where the rotation is a real gate.

    Parameters
    ----------
    pair : array_like, shape (..., 4)
    rotation : int or int array broadcastable to ``pair.shape[:-1]``
    single_qubit : float or array broadcastable to ``pair.shape[:-1]``
    """
    rotated = rotate(pair, rotation)
    survival = np.where(np.asarray(rotation) == IDENTITY, 1.0, single_qubit)
    return depolarize(rotated, survival)


def _prepare_columns(pair, rotation, single_qubit, n):
    """As :func:`prepare`, on the transposed layout: returns shape (4, n).

    Working on four contiguous columns of length N (rather than N rows of 4)
    keeps every elementwise product a long vector operation.
    """
    columns = np.asarray(pair, dtype=float).reshape(-1, 4).T
    r = np.asarray(rotation, dtype=np.intp)
    if r.ndim == 0:
        rotated = columns[SOURCES[r]]
        if r == IDENTITY:
            return np.broadcast_to(rotated, (4, n))
    else:
        index = np.broadcast_to(SOURCES[r].T, (4, n))
        rotated = np.take_along_axis(np.broadcast_to(columns, (4, n)), index, axis=0)
    survival = np.where(r == IDENTITY, 1.0, np.asarray(single_qubit, dtype=float)) ** 2
    return survival * rotated + (1.0 - survival) * 0.25


def _batch_size(inputs, *parameters) -> int:
    shapes = [np.shape(p)[:-1] for p in inputs] + [np.shape(p) for p in parameters]
    shape = np.broadcast_shapes(*shapes)
    if len(shape) > 1:
        raise ValueError(f"a step takes batches of shape (N, 4); got leading shape {shape}")
    return shape[0] if shape else 1


def run_step(circuit: StepCircuit, inputs, rotations, *, two_qubit, single_qubit, measurement):
    """Evaluate a compiled step on a batch.

    Parameters
    ----------
    circuit : StepCircuit
    inputs : sequence of ``circuit.n_pairs`` arrays, each shape (N, 4) or (4,)
        Normalised Bell weights in the order (I, X, Y, Z); input 0 is kept. They
        are not validated here (this is the hot loop): validate at the boundary
        with :func:`models.states.validate_bell`.
    rotations : sequence of ints or int arrays of shape (N,)
        Bilateral rotation applied to each input before the CNOTs. A scalar
        rotation per call is several times faster than per-row rotations, so
        batch callers should group rows by rotation.
    two_qubit, single_qubit, measurement : float or array of shape (N,)
        Noise parameters (1 is perfect), per row where arrays.

    Returns
    -------
    success : ndarray, shape (N,)
        Probability that every check agrees.
    kept : ndarray, shape (N, 4)
        Bell weights of the kept pair given success. Rows with zero success
        probability return the maximally mixed pair (their cost is infinite).
    """
    rotations = tuple(rotations)
    if len(inputs) != circuit.n_pairs or len(rotations) != circuit.n_pairs:
        raise ValueError(
            f"{circuit.name} takes {circuit.n_pairs} inputs and {circuit.n_pairs} rotations, "
            f"got {len(inputs)} and {len(rotations)}"
        )
    n = _batch_size(inputs, *rotations, two_qubit, single_qubit, measurement)
    columns = [
        _prepare_columns(p, r, single_qubit, n) for p, r in zip(inputs, rotations, strict=True)
    ]
    plan = circuit.plan
    s = np.asarray(two_qubit, dtype=float) ** 2
    q = np.asarray(check_error(measurement), dtype=float)
    n_failed = len(plan) - 1
    n_checks = len(circuit.checks)
    check_weights = [
        q ** bin(m).count("1") * (1.0 - q) ** (n_checks - bin(m).count("1"))
        for m in range(2**n_checks)
    ]
    joint = None
    unnormalised = 0.0
    for k, (kind, data) in enumerate(plan):
        if kind == "constant":
            # inputs are normalised, so a term that forgets its input is a constant
            grouped = data[:, :, None]
        elif kind == "one_hot":
            grouped = _sum_products(columns, data, n)
        else:
            if joint is None:
                joint = _joint_weights(columns, n)
            grouped = (data @ joint).reshape(4, -1, n)
        gate_weight = s ** (n_failed - k) * (1.0 - s) ** k
        for pattern, check_weight in enumerate(check_weights):
            unnormalised = unnormalised + (gate_weight * check_weight) * grouped[:, pattern]
    unnormalised = np.broadcast_to(unnormalised, (4, n))
    success = unnormalised.sum(axis=0)
    safe = success > 0
    kept = unnormalised / np.where(safe, success, 1.0)
    if not safe.all():
        kept[:, ~safe] = 0.25
    return success, kept.T


def two_to_one(
    kept, sacrificed, *, rotations=(IDENTITY, IDENTITY), two_qubit=1.0, single_qubit=1.0, measurement=1.0
):
    """The 2->1 step: bilateral CNOT kept -> sacrificed, Z-basis comparison of the sacrificed pair.

    Parameters
    ----------
    kept, sacrificed : array_like, shape (N, 4) or (4,)
        Bell weights (I, X, Y, Z).
    rotations : (int or int array, int or int array)
        Bilateral rotation of each input (see :mod:`models.rotations`).
    two_qubit, single_qubit, measurement : float or array of shape (N,)

    Returns
    -------
    success : ndarray, shape (N,)
    kept : ndarray, shape (N, 4)

    Examples
    --------
    DEJMPS from a Werner pair of F = 0.7 (Deutsch et al., PRL 77, 2818 (1996)):

    >>> from models.states import werner
    >>> p, out = two_to_one(werner(0.7), werner(0.7), rotations=(2, 2))
    >>> round(float(p[0]), 6), round(float(out[0, 0]), 6)
    (0.68, 0.735294)
    """
    return run_step(
        TWO_TO_ONE,
        (kept, sacrificed),
        rotations,
        two_qubit=two_qubit,
        single_qubit=single_qubit,
        measurement=measurement,
    )


def double_selection(
    kept,
    first,
    second,
    *,
    rotations=(IDENTITY, IDENTITY, IDENTITY),
    two_qubit=1.0,
    single_qubit=1.0,
    measurement=1.0,
):
    """Double selection (Fujii and Yamamoto, Phys. Rev. A 80, 042308 (2009)).

    Bilateral CNOT kept -> first, then second -> first; ``first`` is compared in
    the Z basis (its parity reads x_kept + x_first + x_second), ``second`` in the X
    basis (z_first + z_second); the kept pair survives when both agree.
    Shapes as in :func:`two_to_one`.
    """
    return run_step(
        DOUBLE_SELECTION,
        (kept, first, second),
        rotations,
        two_qubit=two_qubit,
        single_qubit=single_qubit,
        measurement=measurement,
    )
