"""One breadth-first level of the exhaustive search: every round on every distinct state.

The exhaustive layer (:mod:`optimise.exhaustive`) calls :func:`expand_chunk` on
chunks of the distinct states of one depth, in worker processes. A chunk's
children are evaluated with :func:`models.chain.advance` in batches and merged
where they reach the same state (:func:`merge_identical`).

Exact shortcuts used here, each proved where it is defined:

- *Identical inputs* (:func:`canonical_rotations`): two rotation choices that hand
  the step bit-identical inputs give identical children, so only one is evaluated.
- *Re-twirl* (:func:`add_twirled`): a round with the re-twirl differs from the same
  round without it only by :func:`models.evaluate.twirl` applied to the output
  pair and to its time-weighted states (the twirl is linear), after the classical
  exchange; success probability, cost, memory, rounds, time and the deficits of the
  time-weighted states are those of the untwirled round (this is how
  :func:`models.chain.advance` computes it; ``tests/optimise/test_exhaustive.py``
  checks the two agree).
- *Relabelled states* (:func:`state_keys` with a symmetry): see the proof there.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import replace

import numpy as np

from models.chain import (
    CODE_N_INPUTS,
    CODE_ROTATIONS,
    CODE_SAME,
    LINEAR_ROUNDS,
    N_CODES,
    ChainBatch,
    advance,
    round_code,
)
from models.evaluate import twirl
from models.rotations import rotate

from .pareto import pareto_mask, quantise

KEY_SCALE = 1e12  # states are merged when every weight agrees to ~1e-12
BATCH = 16384  # rows per advance call (measured fastest on this machine: 8192-65536 within 10%)
FIELDS = ("bell", "raw_pairs", "memory", "rounds", "time_s", "weighted", "deficit")
TWIRL_PARTNER = np.array([round_code(replace(r, twirl=True)) for r in LINEAR_ROUNDS])
UNTWIRLED = np.array([round_code(replace(r, twirl=False)) for r in LINEAR_ROUNDS])


def symmetry_of(profile) -> str:
    """Which relabellings of a state leave every future unchanged for this profile.

    ``"xyz"``: any permutation of X, Y, Z; ``"xy"``: exchanging X and Y; ``"none"``.

    Proof. Let g be a permutation of the X, Y, Z labels realised by a bilateral
    rotation, and let two partial recipes reach the states s and g(s). Every round
    applied to s has a counterpart on g(s) that hands its step identical inputs:
    compose each rotation of an input that is the current pair (the kept pair, and
    the sacrificed copies of a symmetric round) with g^-1, and keep the rotations of
    fresh raw pairs, which are not relabelled. This needs two things. (1) The
    rotation noise is the same for r and r g^-1: true for every pair of rotations
    when single-qubit gates are perfect (p1 = 1); when p1 < 1 the identity is no
    gate while r g^-1 may be one, so the states are *not* equivalent (and are not
    merged). (2) The memory wait before the step commutes with g: always true
    without memory decay; the pair-level projection treats X and Y alike but Z
    apart, so with decay only the X <-> Y exchange commutes. After that round both
    recipes hold the identical pair, and the counterpart round has the same
    success probability, so costs, memory, rounds and times go on equally.
    """
    if profile.noise.single_qubit != 1.0:
        return "none"
    if math.isinf(profile.noise.t1_s) and math.isinf(profile.noise.t2_s):
        return "xyz"
    return "xy"


# the relabellings of X, Y, Z each symmetry allows, as column orders of (I, X, Y, Z)
RELABELLINGS = {
    "none": [(0, 1, 2, 3)],
    "xy": [(0, 1, 2, 3), (0, 2, 1, 3)],
    "xyz": [(0,) + p for p in itertools.permutations((1, 2, 3))],
}


def state_keys(bell, weighted, symmetry: str = "none") -> np.ndarray:
    """Integer keys, shape (N, 4 K): equal keys mean states to merge.

    A state is its Bell weights (N, 4) and its time-weighted states at the K
    rates it carries (N, K, 4; entry 0 is the Bell weights again), which decide
    how much the pairs waiting for it decay. With a symmetry (:func:`symmetry_of`)
    the key is the smallest, in lexicographic order, over the relabellings it
    allows, applied to the Bell weights and every time-weighted state alike.
    """
    b = np.asarray(bell, dtype=float)
    w = np.asarray(weighted, dtype=float)
    state = np.concatenate([b[:, None, :], w[:, 1:, :]], axis=1)
    best = None
    for columns in RELABELLINGS[symmetry]:
        keys = np.round(state[:, :, columns] * KEY_SCALE).astype(np.int64).reshape(len(b), -1)
        if best is None:
            best = keys
            continue
        differ = keys != best
        first = differ.argmax(axis=1)
        rows = np.arange(len(b))
        smaller = differ.any(axis=1) & (keys[rows, first] < best[rows, first])
        best[smaller] = keys[smaller]
    return best


def _mix(x: np.ndarray) -> np.ndarray:
    """The splitmix64 finaliser: a bijection of uint64 that spreads every input bit."""
    x = x ^ (x >> np.uint64(30))
    x = x * np.uint64(0xBF58476D1CE4E5B9)
    x = x ^ (x >> np.uint64(27))
    x = x * np.uint64(0x94D049BB133111EB)
    return x ^ (x >> np.uint64(31))


def key_hashes(keys) -> np.ndarray:
    """64-bit hashes of key rows, for counting states (merges compare the keys themselves).

    With N states the expected number of colliding pairs is about N**2 / 2**65
    (3e-4 for 1e8 states), so counts are exact in practice.
    """
    k = np.ascontiguousarray(keys).view(np.uint64)
    h = np.full(len(k), 0x9E3779B97F4A7C15, dtype=np.uint64)
    with np.errstate(over="ignore"):
        for j in range(k.shape[1]):
            h = _mix(h ^ _mix(k[:, j] + np.uint64(j + 1)))
    return h


def canonical_rotations(pairs, single_qubit) -> np.ndarray:
    """(N, 6) bool: rotation r is the smallest one giving its prepared input.

    Rotations r and r' prepare the same input from a pair when they permute its
    weights to the same vector and add the same noise (both gates, or p1 = 1).
    Valid for inputs that reach the step unchanged, i.e. without memory decay.
    """
    p = np.asarray(pairs, dtype=float)
    rotated = np.stack([rotate(p, r) for r in range(6)], axis=1)  # (N, 6, 4)
    equal = (rotated[:, :, None, :] == rotated[:, None, :, :]).all(axis=-1)  # (N, 6, 6)
    if single_qubit != 1.0:
        gate = np.arange(6) != 0
        equal &= gate[:, None] == gate[None, :]
    earlier = np.tril(np.ones((6, 6), dtype=bool), k=-1)  # [r, r'] with r' < r
    return ~(equal & earlier[None]).any(axis=2)


def base_codes(codes) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Untwirled codes to evaluate, and for each whether it and its twirl are wanted."""
    wanted = np.zeros(N_CODES, dtype=bool)
    wanted[np.asarray(codes, dtype=np.intp)] = True
    base = np.unique(UNTWIRLED[np.asarray(codes, dtype=np.intp)])
    return base, wanted[base], wanted[TWIRL_PARTNER[base]]


def valid_pairs(chains: ChainBatch, profile, base: np.ndarray, dedupe: bool):
    """(parent, code) of the rounds to evaluate on a chunk of states."""
    n = len(chains)
    if not dedupe:
        parent = np.repeat(np.arange(n), len(base))
        return parent, np.tile(base, n)
    kept_ok = canonical_rotations(chains.bell, profile.noise.single_qubit)  # (N, 6)
    raw_ok = canonical_rotations(profile.raw[None, :], profile.noise.single_qubit)[0]  # (6,)
    rot = CODE_ROTATIONS[base]  # (B, 3); unused third entry is 0, always canonical
    valid = kept_ok[:, rot[:, 0]]
    same = CODE_SAME[base]
    for j in (1, 2):
        used = CODE_N_INPUTS[base] > j
        from_state = kept_ok[:, rot[:, j]]
        from_raw = np.broadcast_to(raw_ok[rot[:, j]], from_state.shape)
        ok = np.where(same[None, :], from_state, from_raw)
        valid &= ok | ~used[None, :]
    parent, column = np.nonzero(valid)
    return parent, base[column]


def count_rounds(chains: ChainBatch, profile, codes, dedupe: bool, stop_at=None) -> int:
    """How many rounds :func:`expand_chunk` would evaluate on these states.

    Counting stops early once it passes ``stop_at``.
    """
    base, _, _ = base_codes(codes)
    if not dedupe:
        return len(chains) * len(base)
    total = 0
    for lo in range(0, len(chains), 20_000):
        part = chains.take(np.arange(lo, min(lo + 20_000, len(chains))))
        total += len(valid_pairs(part, profile, base, True)[0])
        if stop_at is not None and total > stop_at:
            break
    return total


def add_twirled(out: ChainBatch, codes, want_base, want_twirl, single_qubit, partner=None):
    """Rows for the wanted untwirled codes and for the twirled partners (see module doc).

    ``partner``: the twirled partner of each code (default :data:`TWIRL_PARTNER`
    of the code; codes outside :data:`models.chain.LINEAR_ROUNDS` name theirs).
    """
    keep = np.flatnonzero(want_base)
    tw = np.flatnonzero(want_twirl)
    twirled = out.take(tw)
    twirled = replace(
        twirled,
        bell=twirl(twirled.bell, single_qubit),
        weighted=twirl(twirled.weighted, single_qubit),
    )
    batch = concat([out.take(keep), twirled])
    return (
        batch,
        np.concatenate([codes[keep], TWIRL_PARTNER[codes[tw]] if partner is None else partner[tw]]),
        np.concatenate([keep, tw]),
    )


def concat(batches) -> ChainBatch:
    return ChainBatch(*[np.concatenate([getattr(b, f) for b in batches]) for f in FIELDS])


def merge_identical(keys, labels) -> np.ndarray:
    """Rows to keep among rows with equal keys: those no equal-key row beats.

    Parameters
    ----------
    keys : int array (N, m)
    labels : float array (N, L)
        Costs to minimise (raw pairs first, then memory and/or time when those are
        objectives). For one label the cheapest row of each key is kept.

    Merging is exact because the future of a partial recipe depends only on its
    state (the key), and every figure it ends with is a non-decreasing function of
    the prefix's figures: raw pairs (c + n c_s) / P, time (t + n t_s + D) / P and
    memory max(m, m_s + n), with P, c_s, t_s, m_s fixed by the state and the round.
    Different states are never merged or pruned against each other: a cheaper
    state of lower fidelity may have better continuations, so cost alone says
    nothing across states.
    """
    keys = np.asarray(keys)
    labels = np.asarray(labels, dtype=float)
    if len(keys) == 0:
        return np.zeros(0, dtype=np.intp)
    order = np.lexsort((labels[:, 0],) + tuple(keys[:, j] for j in reversed(range(keys.shape[1]))))
    k = keys[order]
    start = np.r_[True, (k[1:] != k[:-1]).any(axis=1)]
    if labels.shape[1] == 1:
        return order[start]
    keep = []
    groups = np.flatnonzero(start)
    ends = np.r_[groups[1:], len(order)]
    for a, b in zip(groups, ends, strict=True):
        if b - a == 1:
            keep.append(order[a])
            continue
        kept_rows = []
        for i in order[a:b]:  # by increasing raw pairs: dominated only by earlier rows
            if not any((labels[j, 1:] <= labels[i, 1:]).all() for j in kept_rows):
                kept_rows.append(i)
        keep.extend(kept_rows)
    return np.sort(np.array(keep, dtype=np.intp))


def labels_of(batch: ChainBatch, extra) -> np.ndarray:
    """Cost labels (N, 1 + len(extra)): raw pairs, then memory / time as asked."""
    cols = [batch.raw_pairs]
    for name in extra:
        cols.append(batch.memory.astype(float) if name == "memory" else batch.time_s)
    return np.stack(cols, axis=1)


def objective_values(batch: ChainBatch, objectives) -> tuple[np.ndarray, tuple[bool, ...]]:
    """Values (N, k) in objective order and which to maximise, for Pareto filtering."""
    cols, maximise = [], []
    for name in objectives:
        if name == "fidelity":
            cols.append(batch.bell[:, 0])
        elif name == "yield":
            with np.errstate(divide="ignore"):
                cols.append(np.where(np.isfinite(batch.raw_pairs), 1.0 / batch.raw_pairs, 0.0))
        elif name == "memory":
            cols.append(batch.memory.astype(float))
        else:
            cols.append(batch.time_s)
        maximise.append(name in ("fidelity", "yield"))
    return np.stack(cols, axis=1), tuple(maximise)


def _front_rows(batch: ChainBatch, objectives) -> np.ndarray:
    values, maximise = objective_values(batch, objectives)
    return np.flatnonzero(pareto_mask(quantise(values), maximise))


def expand_chunk(arrays: dict, profile, codes, options: dict) -> dict:
    """Children of a chunk of states, merged within the chunk.

    Parameters
    ----------
    arrays : the fields of a :class:`models.chain.ChainBatch` (the chunk's states)
    profile : models.Profile
    codes : int array of the round codes of the space
    options : dict with ``symmetry``, ``dedupe``, ``extra`` (``"memory"``/``"time"``
        labels), ``max_memory``, ``max_time`` (None: no limit), ``final`` (the last
        depth: return only the chunk's Pareto candidates, and hashes of the states
        for counting them) and ``objectives``.

    Returns
    -------
    dict with ``parent`` (index in the chunk), ``code``, the ChainBatch fields,
    ``keys``, ``evaluations`` (rounds evaluated with advance) and, at the last
    depth, ``hashes`` (distinct 64-bit hashes of the chunk's states).
    """
    chains = ChainBatch(**arrays)
    base, want_base, want_twirl = base_codes(codes)
    position = np.full(N_CODES, -1)
    position[base] = np.arange(len(base))
    parent, code = valid_pairs(chains, profile, base, options["dedupe"])
    final = options["final"]
    pieces, hashes = [], []
    p1 = profile.noise.single_qubit
    held = 0

    def squeeze(parts):
        batch = concat([q[2] for q in parts])
        keys = np.concatenate([q[3] for q in parts])
        if final:  # only Pareto candidates are kept; equal-key duplicates go at the end
            keep = _front_rows(batch, options["objectives"])
        else:
            keep = merge_identical(keys, labels_of(batch, options["extra"]))
        return [
            (
                np.concatenate([q[0] for q in parts])[keep],
                np.concatenate([q[1] for q in parts])[keep],
                batch.take(keep),
                keys[keep],
            )
        ]

    for lo in range(0, len(parent), BATCH):
        par = parent[lo : lo + BATCH]
        cod = code[lo : lo + BATCH]
        out, success = advance(chains, cod, profile, parent=par)
        pos = position[cod]
        batch, new_codes, rows = add_twirled(out, cod, want_base[pos], want_twirl[pos], p1)
        ok = success[rows] > 0
        if options["max_memory"] is not None:
            ok &= batch.memory <= options["max_memory"]
        if options["max_time"] is not None:
            ok &= batch.time_s <= options["max_time"]
        batch = batch.take(ok)
        keys = state_keys(batch.bell, batch.weighted, options["symmetry"])
        if final and options.get("count", True):
            hashes.append(np.unique(key_hashes(keys)))
        piece = squeeze([(par[rows][ok], new_codes[ok], batch, keys)])
        pieces += piece
        held += len(piece[0][0])
        if final and held > 100_000:
            pieces = squeeze(pieces)
            held = len(pieces[0][0])
    if not pieces:
        none = np.zeros(0, dtype=np.intp)
        empty, _ = advance(chains.take(none), none, profile)  # no children, shaped as children
        keys = state_keys(empty.bell, empty.weighted)
        pieces = [(none, none, empty, keys)]
    ((parent_out, code_out, batch, keys),) = squeeze(pieces)
    if final:
        keep = merge_identical(keys, labels_of(batch, options["extra"]))
        parent_out, code_out, batch, keys = (
            parent_out[keep],
            code_out[keep],
            batch.take(keep),
            keys[keep],
        )
    result = {f: getattr(batch, f) for f in FIELDS}
    result.update(parent=parent_out, code=code_out, keys=keys, evaluations=int(len(parent)))
    if final and options.get("count", True):
        result["hashes"] = np.unique(np.concatenate(hashes)) if hashes else np.zeros(0, np.uint64)
    return result
