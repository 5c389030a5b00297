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
from functools import cached_property, lru_cache
from itertools import product

import numpy as np

from .noise import check_error, depolarize
from .rotations import IDENTITY, PERMUTATIONS, SOURCES, rotate
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
        Bilateral CNOTs (one at each node) in the order applied; any pair may
        be control or target.
    checks : tuple of (pair, basis)
        Bilateral measurements of sacrificed pairs; basis ``"Z"`` reads the
        pair's x bit, ``"X"`` reads its z bit. Each check reports one parity
        bit: 1 when the two nodes' outcomes differ.
    rotations : tuple of (position, pair, rotation), default ()
        Bilateral rotations placed inside the circuit: rotation ``rotation``
        (an index into :data:`models.rotations.ROTATION_NAMES`) on ``pair``
        after the first ``position`` CNOTs, in the order listed. Each
        non-identity one adds single-qubit noise at both nodes. (The rotations
        a round applies to its inputs are passed to :func:`run_step` instead.)
    accepted : tuple of int, default (0,)
        Reported parity patterns on which the kept pair is kept; a pattern
        holds one bit per check, the first check most significant. ``(0,)``
        is "every check agrees".
    """

    name: str
    n_pairs: int
    cnots: tuple[tuple[int, int], ...]
    checks: tuple[tuple[int, str], ...]
    rotations: tuple[tuple[int, int, int], ...] = ()
    accepted: tuple[int, ...] = (0,)

    def __post_init__(self):
        for control, target in self.cnots:
            if control == target or not (
                0 <= control < self.n_pairs and 0 <= target < self.n_pairs
            ):
                raise ValueError(
                    f"cnot ({control}, {target}) must join two of the {self.n_pairs} pairs"
                )
        for pair, basis in self.checks:
            if not 1 <= pair < self.n_pairs or basis not in ("X", "Z"):
                raise ValueError(
                    f"check ({pair}, {basis!r}) must measure a sacrificed pair in X or Z"
                )
        if len({pair for pair, _ in self.checks}) != len(self.checks):
            raise ValueError(f"checks = {self.checks!r} measure a pair twice")
        for position, pair, rotation in self.rotations:
            if not (0 <= position <= len(self.cnots) and 0 <= pair < self.n_pairs):
                raise ValueError(
                    f"rotation ({position}, {pair}, {rotation}) must sit after 0 to "
                    f"{len(self.cnots)} CNOTs on one of the {self.n_pairs} pairs"
                )
            if not 0 <= rotation < 6:
                raise ValueError(f"rotation index {rotation!r} is not in [0, 5]")
        n_patterns = 2 ** len(self.checks)
        accepted = tuple(sorted(set(self.accepted)))
        if not accepted or not all(0 <= a < n_patterns for a in accepted):
            raise ValueError(
                f"accepted = {self.accepted!r} must list one or more parity patterns "
                f"in [0, {n_patterns - 1}]"
            )
        object.__setattr__(self, "accepted", accepted)

    @cached_property
    def operations(self) -> tuple[tuple, ...]:
        """Gates in the order applied: ``("cnot", control, target)`` or ``("rot", pair, r)``."""
        placed = sorted(
            (position, i, pair, r) for i, (position, pair, r) in enumerate(self.rotations)
        )
        out = []
        for k in range(len(self.cnots) + 1):
            out += [("rot", pair, r) for position, _, pair, r in placed if position == k and r]
            if k < len(self.cnots):
                out.append(("cnot",) + tuple(self.cnots[k]))
        return tuple(out)

    @cached_property
    def term_powers(self) -> tuple[tuple[int, int], ...]:
        """Per term of :attr:`terms`: (failed CNOTs k, failed in-circuit rotations j)."""
        return _compile(self)[0]

    @cached_property
    def terms(self) -> np.ndarray:
        """Compiled map, shape ``(n_terms, 4**n_pairs, 4 * 2**n_checks)``.

        ``terms[t]`` takes the joint input weights to the joint weights of (kept
        label, true parity pattern) for the part of the evolution in which
        exactly ``k`` CNOTs and ``j`` in-circuit rotations failed
        (``term_powers[t] == (k, j)``); its coefficient is
        ``s**(n_cnots - k) * (1 - s)**k * u**(n_rot - j) * (1 - u)**j`` with
        ``s = two_qubit**2`` and ``u = single_qubit**2`` (both nodes' gates
        perfect). Without in-circuit rotations term ``t`` has ``k = t``.
        """
        return _compile(self)[1]

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


def _relabelled(n, operation):
    """Joint label each joint label becomes under an ideal gate, shape (4**n,)."""
    x, z = _joint_bits(n)
    x, z = x.copy(), z.copy()
    if operation[0] == "cnot":
        _, control, target = operation
        x[:, target] ^= x[:, control]
        z[:, control] ^= z[:, target]
        return _joint_index(x, z)
    _, pair, r = operation
    labels = label_from_bits(x[:, pair], z[:, pair])
    x[:, pair], z[:, pair] = X_BIT[PERMUTATIONS[r, labels]], Z_BIT[PERMUTATIONS[r, labels]]
    return _joint_index(x, z)


def _forget(rows, n, pairs):
    """Heisenberg form of gate failure: average rows over the labels of ``pairs``.

    A failed gate replaces the joint marginal of its pairs by uniform; acting on
    a readout matrix (one row per joint label) that is this average.
    """
    shaped = rows.reshape((4,) * n + rows.shape[1:])
    mean = shaped.mean(axis=tuple(pairs), keepdims=True)
    return np.broadcast_to(mean, shaped.shape).reshape(rows.shape)


@lru_cache(maxsize=64)
def _compile_cached(n, operations, checks):
    size = 4**n
    x, z = _joint_bits(n)
    pattern = np.zeros(size, dtype=np.intp)
    for pair, basis in checks:
        pattern = 2 * pattern + (x[:, pair] if basis == "Z" else z[:, pair])
    kept = label_from_bits(x[:, 0], z[:, 0])
    n_patterns = 2 ** len(checks)
    readout = np.zeros((size, 4 * n_patterns))
    readout[np.arange(size), kept * n_patterns + pattern] = 1.0
    # Heisenberg picture, last gate first: each gate maps a readout R to C^T R
    # (a gather) when it works and C^T D R when it fails; a polynomial in the
    # failures, keyed by (failed CNOTs, failed rotations)
    polys = {(0, 0): readout}
    for operation in reversed(operations):
        new_label = _relabelled(n, operation)
        pairs = operation[1:] if operation[0] == "cnot" else operation[1:2]
        failed_key = (1, 0) if operation[0] == "cnot" else (0, 1)
        new = {}
        for (k, j), rows in polys.items():
            for key, r in (((k, j), rows), ((k + failed_key[0], j + failed_key[1]), None)):
                value = rows[new_label] if r is not None else _forget(rows, n, pairs)[new_label]
                new[key] = new[key] + value if key in new else value
        polys = new
    keys = tuple(sorted(polys))
    return keys, np.stack([polys[key] for key in keys])


def _compile(circuit: StepCircuit):
    return _compile_cached(circuit.n_pairs, circuit.operations, tuple(circuit.checks))


def _joint_weights(columns, n):
    """Joint weights of all inputs, shape (4**n_pairs, N), pair 0 most significant."""
    joint = np.stack(columns[0])
    for c in columns[1:]:
        joint = (joint[:, None, :] * np.stack(c)[None, :, :]).reshape(-1, n)
    return joint


def _sum_products(columns, groups):
    """Grouped sums of input products for a term that sends each joint label to one outcome.

    ``groups[o][m]`` lists the joint labels (as per-pair label tuples) that end as
    kept label ``o`` with parity pattern ``m``; summing their products directly
    avoids forming all 4**n_pairs joint weights.
    """
    out = [[0.0] * len(groups[0]) for _ in range(4)]
    for o, per_pattern in enumerate(groups):
        for m, labels in enumerate(per_pattern):
            for label in labels:
                product_ = columns[0][label[0]]
                for c, k in zip(columns[1:], label[1:], strict=True):
                    product_ = product_ * c[k]
                out[o][m] = out[o][m] + product_
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
DOUBLE_SELECTION = StepCircuit(
    "double_selection", 3, cnots=((0, 1), (2, 1)), checks=((1, "Z"), (2, "X"))
)


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


_SLOT_SOURCES = [np.ascontiguousarray(SOURCES[:, slot]) for slot in range(4)]
# rows per chunk: small enough that a chunk's columns stay in cache
CHUNK_ROWS = 16384


def _prepare_columns(pair, rotation, single_qubit, n):
    """As :func:`prepare`, on the transposed layout: returns 4 columns of length n.

    Working on four contiguous columns of length N (rather than N rows of 4)
    keeps every elementwise product a long vector operation.
    """
    rows = np.broadcast_to(np.asarray(pair, dtype=float).reshape(-1, 4), (n, 4))
    r = np.asarray(rotation, dtype=np.intp)
    if r.ndim == 0:
        columns = [rows[:, SOURCES[r, slot]] for slot in range(4)]
        if r == IDENTITY:
            return columns
    else:
        # slot j of row i is flat element 4 i + SOURCES[r_i, j]; I never moves
        flat = np.ascontiguousarray(rows).ravel()
        base = 4 * np.arange(n)
        columns = [rows[:, 0]] + [flat.take(base + _SLOT_SOURCES[j].take(r)) for j in (1, 2, 3)]
    survival = np.where(r == IDENTITY, 1.0, np.asarray(single_qubit, dtype=float)) ** 2
    floor = (1.0 - survival) * 0.25
    return [survival * c + floor for c in columns]


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
    s = np.asarray(two_qubit, dtype=float) ** 2
    q = np.asarray(check_error(measurement), dtype=float)
    p1 = np.asarray(single_qubit, dtype=float)
    success = np.empty(n)
    # filled label by label as contiguous columns; returned as an (N, 4) view
    kept = np.empty((4, n))
    for lo in range(0, n, CHUNK_ROWS):
        hi = min(lo + CHUNK_ROWS, n)
        part = [_rows(p, lo, hi, n, pair=True) for p in inputs]
        _evaluate_chunk(
            circuit,
            part,
            [_rows(r, lo, hi, n) for r in rotations],
            s=_rows(s, lo, hi, n),
            q=_rows(q, lo, hi, n),
            p1=_rows(p1, lo, hi, n),
            success=success[lo:hi],
            kept=kept[:, lo:hi],
        )
    return success, kept.T


def _rows(x, lo, hi, n, pair=False):
    """Rows lo:hi of a per-row argument; a shared (broadcast) argument as it is."""
    x = np.asarray(x)
    per_row = x.ndim == (2 if pair else 1) and x.shape[0] == n
    return x[lo:hi] if per_row else x


def _power(x, k: int):
    result = 1.0
    for _ in range(k):
        result = result * x
    return result


def _term_weights(circuit: StepCircuit, s, q, u=1.0):
    """``weights[t][m]``: probability of term t's gate failures (:attr:`StepCircuit.term_powers`;
    both nodes' CNOTs perfect with probability ``s``, both nodes' rotations with
    ``u``) times the probability that the reported parities fall in the accepted
    set when the true pattern is m (each check wrong with probability ``q``)."""
    n_cnots = len(circuit.cnots)
    n_rotations = sum(op[0] == "rot" for op in circuit.operations)
    n_checks = len(circuit.checks)
    # integer powers by repeated products: np.power on arrays is far slower
    flips = [
        _power(q, bin(f).count("1")) * _power(1.0 - q, n_checks - bin(f).count("1"))
        for f in range(2**n_checks)
    ]
    check_weights = [sum(flips[m ^ a] for a in circuit.accepted) for m in range(2**n_checks)]
    return [
        [
            _power(s, n_cnots - k)
            * _power(1.0 - s, k)
            * _power(u, n_rotations - j)
            * _power(1.0 - u, j)
            * w
            for w in check_weights
        ]
        for k, j in circuit.term_powers
    ]


def _normalise(unnormalised, success, kept):
    """Success probability (n,) and kept pair (4, n) from the four unnormalised kept weights."""
    success[:] = unnormalised[0] + unnormalised[1] + unnormalised[2] + unnormalised[3]
    safe = success > 0
    scale = 1.0 / np.where(safe, success, 1.0)
    for o in range(4):
        np.multiply(unnormalised[o], scale, out=kept[o])
    if not safe.all():
        kept[:, ~safe] = 0.25


def run_joint(circuit: StepCircuit, joint, rotations, *, two_qubit, single_qubit, measurement):
    """A step on correlated inputs, given their joint Bell weights.

    :func:`run_step` takes independent inputs; memory waits shared by two
    stored pairs correlate them, so this takes the joint weights instead.

    Parameters
    ----------
    circuit : StepCircuit
    joint : ndarray, shape (N, 4, ..., 4), one axis per pair (kept pair first)
        Joint weights of the inputs, each row summing to 1.
    rotations : sequence of ``circuit.n_pairs`` ints or (N,) int arrays
        Bilateral rotation of each input (the identity adds no noise).
    two_qubit, single_qubit, measurement : float
        Noise parameters (1 is perfect).

    Returns
    -------
    success : (N,), kept : (N, 4), as :func:`run_step`.
    """
    n_pairs = circuit.n_pairs
    j = np.asarray(joint, dtype=float)
    n = j.shape[0]
    survival = single_qubit**2
    rotations = [np.asarray(r, dtype=np.intp) for r in rotations]
    per_row = any(r.ndim for r in rotations)
    if per_row:
        # every pair's rotation in one gather over a row's joint labels (a rotation
        # of one pair commutes with the noise on another, so all can come first)
        j = _rotated_rows(j, rotations)
    for axis, r in enumerate(rotations, start=1):
        if r.ndim == 0:
            if r == IDENTITY:
                continue
            if not per_row:
                j = np.take(j, SOURCES[r], axis=axis)
            s2 = survival
        else:
            s2 = np.where(r == IDENTITY, 1.0, survival).reshape([n] + [1] * n_pairs)
        # depolarising one pair of a joint distribution: its label becomes uniform
        marginal = j.sum(axis=axis, keepdims=True)
        j = s2 * j + (1.0 - s2) * 0.25 * marginal
    flat = j.reshape(n, 4**n_pairs)
    # the four kept labels at once: each is the same sum, term by term, as one at a time
    unnormalised = 0.0
    for term, weights in zip(
        circuit.terms,
        _scalar_term_weights(circuit, two_qubit, single_qubit, measurement),
        strict=True,
    ):
        grouped = (flat @ term).reshape(n, 4, -1)
        for m, w in enumerate(weights):
            unnormalised = unnormalised + w * grouped[:, :, m]
    success = np.empty(n)
    kept = np.empty((4, n))
    _normalise(np.transpose(unnormalised), success, kept)
    return success, kept.T


def _rotated_rows(joint, rotations) -> np.ndarray:
    """Joint weights (N, 4, ..., 4) with pair a rotated by ``rotations[a]`` (an int or (N,))."""
    n, n_pairs = joint.shape[0], joint.ndim - 1
    index = np.zeros((n,) + (1,) * n_pairs, dtype=np.intp)
    for a, r in enumerate(rotations):
        shape = [n] + [1] * n_pairs
        shape[a + 1] = 4
        sources = SOURCES[np.broadcast_to(r, (n,))].reshape(shape)
        index = index + sources * 4 ** (n_pairs - 1 - a)
    index = np.broadcast_to(index, joint.shape).reshape(n, -1)
    return np.take_along_axis(joint.reshape(n, -1), index, axis=1).reshape(joint.shape)


@lru_cache(maxsize=256)
def _scalar_term_weights(
    circuit: StepCircuit, two_qubit: float, single_qubit: float, measurement: float
):
    """:func:`_term_weights` for scalar noise, worked out once per circuit and noise.

    A search runs the same circuits under the same noise tens of thousands of times.
    """
    return _term_weights(circuit, two_qubit**2, float(check_error(measurement)), single_qubit**2)


def _evaluate_chunk(circuit, inputs, rotations, *, s, q, p1, success, kept):
    """One chunk of :func:`run_step`, written into ``success`` (n,) and ``kept`` (4, n)."""
    n = success.shape[0]
    columns = [_prepare_columns(p, r, p1, n) for p, r in zip(inputs, rotations, strict=True)]
    plan = circuit.plan
    term_weights = _term_weights(circuit, s, q, p1 * p1)
    joint = None
    unnormalised = [0.0] * 4
    for (kind, data), weights in zip(plan, term_weights, strict=True):
        if kind == "constant":
            # inputs are normalised, so a term that forgets its input is a constant
            for o in range(4):
                unnormalised[o] = unnormalised[o] + sum(
                    w * data[o, m] for m, w in enumerate(weights)
                )
            continue
        if kind == "one_hot":
            grouped = _sum_products(columns, data)
        else:
            if joint is None:
                joint = _joint_weights(columns, n)
            grouped = (data @ joint).reshape(4, -1, n)
        for o in range(4):
            for m, w in enumerate(weights):
                unnormalised[o] = unnormalised[o] + w * grouped[o][m]
    _normalise(unnormalised, success, kept)


def two_to_one(
    kept,
    sacrificed,
    *,
    rotations=(IDENTITY, IDENTITY),
    two_qubit=1.0,
    single_qubit=1.0,
    measurement=1.0,
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
