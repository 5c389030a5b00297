"""A catalogue of general check rounds over n pairs, found by exact enumeration.

What the enumeration covers: every circuit of up to ``max_cnots`` bilateral
CNOTs between n pairs (any control and target, n = 2 to 5) in which every pair
takes part, every choice of Z or X basis for each sacrificed pair, and for each,
the accepted sets of reported parity patterns that can lie on the front of
(success probability, output fidelity). Each circuit is evaluated exactly (the
label model of :mod:`models.steps`, same noise: depolarising two-qubit noise
after each CNOT at each node, measurement flips) on n copies of a given input
pair (by default the profile's raw pair, used as it arrives, without rotation),
and the catalogue keeps the rounds on the front of (success, fidelity).

Reductions (what each one keeps unchanged is said beside it):

- gates on disjoint pairs commute, noise included (each gate's noise acts on
  its own two pairs), so only one order of such neighbours is kept (the
  canonical order of :func:`models.circuits.normal_order`);
- relabelling the sacrificed pairs (with their bases and parity bits) gives the
  same figures on n identical inputs that do not wait, which is what the
  catalogue scores: one circuit per class is kept. This is a reduction of the
  catalogue only: in a recipe with memory decay the inputs are made one after
  another and wait differently, so two relabellings are two rounds (their
  figures differ slightly) and the one kept is not proven the better;
- circuits whose compiled maps are identical (every term of
  :attr:`models.steps.StepCircuit.terms` equal) are merged among the rounds kept.

What it leaves out: rotations inside the circuit (the round's own rotation of
each input is chosen by the search, as for the 2->1 check); a Y-basis
measurement (a rotation followed by a Z-basis one); circuits with an idle pair
(an n-1 pair round that wastes a pair); more CNOTs than ``max_cnots``. Of the
accepted sets, it tries the nested sets that accept the patterns in decreasing
order of conditional fidelity: they include every set on the upper convex hull
of the front (a fractional-knapsack argument), but a set that lies on the front
between two hull points may be missed.

The reduced catalogue is cached as JSON per n, gate count, noise and input
pair, under ``$XDG_CACHE_HOME/stillroom/catalogue`` (``~/.cache/...`` when that is
unset) or a directory the caller gives; never inside the package.
"""

from __future__ import annotations

import hashlib
import json
import os
import time
from dataclasses import dataclass
from itertools import permutations, product
from pathlib import Path

import numpy as np

from models.circuits import canonical_circuit, read_circuit
from models.kinds import register_circuit
from models.states import X_BIT, Z_BIT, label_from_bits

from .files import write_json_atomic
from .pareto import pareto_mask, quantise

__all__ = [
    "Catalogue",
    "build_catalogue",
    "catalogue_directory",
    "load_or_build",
    "pareto_front",
    "relabelling_class",
]

FORMAT = 1


def catalogue_directory(directory=None) -> Path:
    """Where catalogues are cached: ``directory``, else the user's cache directory."""
    if directory is not None:
        return Path(directory)
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return Path(base) / "stillroom" / "catalogue"


# ---------------------------------------------------------------- enumeration
def _normal(seq):
    """Least order of CNOTs ``seq`` ((control, target) tuples) up to disjoint exchanges."""
    remaining = list(seq)
    out = []
    while remaining:
        busy = set()
        best = None
        for i, g in enumerate(remaining):
            if g[0] not in busy and g[1] not in busy and (best is None or g < remaining[best]):
                best = i
            busy.update(g)
        out.append(remaining.pop(best))
    return tuple(out)


def _canonical_sequence(seq, perms):
    """Least relabelled normal form of ``seq`` and the relabellings that reach it."""
    best, stabiliser = None, []
    for perm in perms:
        form = _normal(tuple((perm[c], perm[t]) for c, t in seq))
        if best is None or form < best:
            best, stabiliser = form, [perm]
        elif form == best:
            stabiliser.append(perm)
    return best, stabiliser


def relabelling_class(n: int, seq, bases: str) -> tuple:
    """The catalogue's representative of a CNOT sequence and bases: ``(sequence, bases)``.

    The least normal form over every relabelling of the sacrificed pairs, then
    the least bases among the relabellings that reach it: the member
    :func:`enumerate_circuits` keeps of the class.
    """
    best = None
    for rest in permutations(range(1, n)):
        perm = (0,) + rest
        key = (
            _normal(tuple((perm[c], perm[t]) for c, t in seq)),
            "".join(bases[perm.index(i) - 1] for i in range(1, n)),
        )
        if best is None or key < best:
            best = key
    return best


def enumerate_circuits(n: int, max_cnots: int):
    """Canonical (CNOT sequence, bases) pairs of n-pair rounds with up to ``max_cnots`` CNOTs.

    Returns
    -------
    circuits : list of (tuple of (control, target), str)
        Every pair takes part; one member per class of the reductions above
        (except the merging of identical compiled maps, done on the front).
    before : int
        Circuits (sequences times bases) before any reduction, idle pairs included.
    """
    # perm[old] = new; pair 0 (kept) stays
    perms = [(0,) + p for p in permutations(range(1, n))]
    gates = [(c, t) for c in range(n) for t in range(n) if c != t]
    level = {(): [perms[0]]}
    kept = []
    for _ in range(max_cnots):
        nxt = {}
        for seq in level:
            for g in gates:
                form, stabiliser = _canonical_sequence(seq + (g,), perms)
                nxt.setdefault(form, stabiliser)
        level = nxt
        for seq, stabiliser in level.items():
            if len({p for g in seq for p in g}) == n:
                kept.append((seq, stabiliser))
    circuits = []
    for seq, stabiliser in kept:
        for bases in product("ZX", repeat=n - 1):
            # relabellings that fix the sequence act on the bases: keep the least
            relabelled = [
                tuple(bases[perm.index(i) - 1] for i in range(1, n)) for perm in stabiliser
            ]
            if bases == min(relabelled):
                circuits.append((seq, "".join(bases)))
    before = sum(len(gates) ** k for k in range(max_cnots + 1)) * 2 ** (n - 1)
    return circuits, before


# ---------------------------------------------------------------- evaluation
def _joint_bits(n):
    labels = np.array(list(product(range(4), repeat=n)), dtype=np.intp)
    return X_BIT[labels], Z_BIT[labels]


def _gate_sources(n):
    """Per CNOT (c, t): gather index taking old joint weights to new ones, shape (4**n,)."""
    x, z = _joint_bits(n)
    weights = 4 ** np.arange(n - 1, -1, -1)
    out = {}
    for c in range(n):
        for t in range(n):
            if c == t:
                continue
            nx, nz = x.copy(), z.copy()
            nx[:, t] ^= nx[:, c]
            nz[:, c] ^= nz[:, t]
            new = (label_from_bits(nx, nz) * weights).sum(axis=1)
            out[(c, t)] = np.argsort(new)
    return out


def _final_weights(sequences, n, pair, s, kept_pair=None):
    """Joint weights after each CNOT sequence (all of one length), shape (B, 4**n)."""
    start = pair if kept_pair is None else kept_pair
    for _ in range(n - 1):
        start = np.multiply.outer(start, pair).ravel()
    dist = np.tile(start, (len(sequences), 1))
    sources = _gate_sources(n)
    seq = np.array(sequences, dtype=np.intp).reshape(len(sequences), -1, 2)
    for step in range(seq.shape[1]):
        codes = seq[:, step, 0] * n + seq[:, step, 1]
        for code in np.unique(codes):
            rows = np.flatnonzero(codes == code)
            c, t = divmod(int(code), n)
            d = dist[rows][:, sources[(c, t)]]
            shaped = d.reshape((len(rows),) + (4,) * n)
            marginal = shaped.sum(axis=(1 + c, 1 + t), keepdims=True) / 16.0
            # both nodes' gates perfect with probability s; else the two pairs' labels are uniform
            dist[rows] = (s * shaped + (1.0 - s) * marginal).reshape(len(rows), -1)
    return dist


def _readouts(n):
    """Per bases string: one-hot readout (4**n, 4 * 2**(n-1)) to (kept label, true pattern)."""
    x, z = _joint_bits(n)
    kept = label_from_bits(x[:, 0], z[:, 0])
    out = {}
    for bases in product("ZX", repeat=n - 1):
        pattern = np.zeros(4**n, dtype=np.intp)
        for i, b in enumerate(bases, start=1):
            pattern = 2 * pattern + (x[:, i] if b == "Z" else z[:, i])
        r = np.zeros((4**n, 4 * 2 ** (n - 1)))
        r[np.arange(4**n), kept * 2 ** (n - 1) + pattern] = 1.0
        out["".join(bases)] = r
    return out


def _flips(n_checks, q):
    m = np.arange(2**n_checks)
    differ = np.array([[bin(a ^ b).count("1") for b in m] for a in m])
    return q**differ * (1.0 - q) ** (n_checks - differ)


def pareto_front(success, fidelity) -> np.ndarray:
    """Indices of the points not dominated in (success, fidelity), success descending.

    Points equal to within rounding (:func:`optimise.pareto.quantise`) are one
    point: the first of them in that order is kept.
    """
    success, fidelity = np.asarray(success, dtype=float), np.asarray(fidelity, dtype=float)
    points = quantise(np.column_stack([success, fidelity]))
    front = np.flatnonzero(pareto_mask(points, (True, True)))
    front = front[np.lexsort((-fidelity[front], -success[front]))]
    _, first = np.unique(points[front], axis=0, return_index=True)
    return front[np.sort(first)]


@dataclass(frozen=True)
class Catalogue:
    """The rounds on the front, with what it took to find them.

    Attributes
    ----------
    n_pairs, max_cnots : int
    entries : list of dict
        ``form`` (compact form, :mod:`models.circuits`), ``success``,
        ``fidelity``, ``n_cnots``; success descending.
    before, after : int
        Circuits (gates and bases) before and after the reductions.
    build_seconds : float
    """

    n_pairs: int
    max_cnots: int
    entries: list
    before: int
    after: int
    build_seconds: float

    def kinds(self):
        """Register every catalogued round (:func:`models.kinds.register_circuit`); their names."""
        return [register_circuit(read_circuit(e["form"])).selection for e in self.entries]

    def to_json(self) -> dict:
        return {
            "format": FORMAT,
            "n_pairs": self.n_pairs,
            "max_cnots": self.max_cnots,
            "before": self.before,
            "after": self.after,
            "build_seconds": self.build_seconds,
            "entries": self.entries,
        }


def build_catalogue(
    n: int, max_cnots: int, *, pair, two_qubit, measurement, kept_pair=None, chunk=4096
):
    """Enumerate, reduce and evaluate n-pair rounds; keep the (success, fidelity) front.

    Parameters
    ----------
    n : int, 2 to 5
    max_cnots : int >= 1
    pair : array_like, shape (4,)
        Bell weights (I, X, Y, Z) of every sacrificed input.
    two_qubit, measurement : float, keyword-only
        Noise parameters (1 is perfect); single-qubit noise plays no part (no rotations).
    kept_pair : array_like, shape (4,), optional
        Bell weights of the kept input (default ``pair``): a pumping round's
        kept pair is a purified one.

    Returns
    -------
    Catalogue
    """
    started = time.perf_counter()
    pair = np.asarray(pair, dtype=float)
    if kept_pair is not None:
        kept_pair = np.asarray(kept_pair, dtype=float)
    circuits, before = enumerate_circuits(n, max_cnots)
    s = float(two_qubit) ** 2
    q = 2.0 * measurement * (1.0 - measurement)
    readouts = _readouts(n)
    n_pat = 2 ** (n - 1)
    flips = _flips(n - 1, q)
    by_sequence: dict = {}
    for seq, bases in circuits:
        by_sequence.setdefault(seq, []).append(bases)
    sequences = sorted(by_sequence, key=lambda sq: (len(sq), sq))
    points = []  # (success, fidelity, sequence, bases, accepted)
    for length in sorted({len(sq) for sq in sequences}):
        group = [sq for sq in sequences if len(sq) == length]
        for lo in range(0, len(group), chunk):
            part = group[lo : lo + chunk]
            dist = _final_weights(part, n, pair, s, kept_pair)
            for bases, readout in readouts.items():
                rows = [i for i, sq in enumerate(part) if bases in by_sequence[sq]]
                if not rows:
                    continue
                table = (dist[rows] @ readout).reshape(len(rows), 4, n_pat) @ flips
                points += _accepted_fronts(table, [part[i] for i in rows], bases)
    success = np.array([p[0] for p in points])
    fidelity = np.array([p[1] for p in points])
    entries, maps = [], set()
    for i in pareto_front(success, fidelity):
        succ, fid, seq, bases, accepted = points[i]
        gates = tuple(("cnot", c, t) for c, t in seq)
        circuit = canonical_circuit(n, gates, bases, accepted)[0]
        # the compiled map: its terms (to true patterns) and the accepted set
        terms = np.round(circuit.step.terms, 12).tobytes()
        key = hashlib.sha256(terms + repr(circuit.accepted).encode()).hexdigest()
        if key in maps:
            continue  # the same compiled map as a round already kept
        maps.add(key)
        entries.append(
            {"form": circuit.text, "success": succ, "fidelity": fid, "n_cnots": len(seq)}
        )
    return Catalogue(n, max_cnots, entries, before, len(circuits), time.perf_counter() - started)


def _accepted_fronts(table, sequences, bases):
    """Front points of the nested accepted sets of each row of ``table`` (B, 4, n_pat)."""
    total = table.sum(axis=1)  # (B, n_pat) probability of each reported pattern
    good = table[:, 0, :]
    conditional = np.where(total > 0, good / np.where(total > 0, total, 1.0), 0.0)
    order = np.argsort(-conditional, axis=1, kind="stable")
    cum_total = np.cumsum(np.take_along_axis(total, order, axis=1), axis=1)
    cum_good = np.cumsum(np.take_along_axis(good, order, axis=1), axis=1)
    fid = np.where(cum_total > 0, cum_good / np.where(cum_total > 0, cum_total, 1.0), 0.0)
    flat_s, flat_f = cum_total.ravel(), fid.ravel()
    out = []
    n_pat = table.shape[2]
    for i in pareto_front(flat_s, flat_f):
        row, k = divmod(int(i), n_pat)
        accepted = tuple(sorted(int(a) for a in order[row, : k + 1]))
        out.append((float(flat_s[i]), float(flat_f[i]), sequences[row], bases, accepted))
    return out


def _cache_key(n, max_cnots, pair, two_qubit, measurement, kept_pair=None) -> str:
    kept = None if kept_pair is None else [round(float(w), 12) for w in kept_pair]
    text = json.dumps(
        [FORMAT, n, max_cnots, [round(float(w), 12) for w in pair], two_qubit, measurement]
        + ([kept] if kept is not None else [])
    )
    return hashlib.sha256(text.encode()).hexdigest()[:12]


def load_or_build(n, max_cnots, *, pair, two_qubit, measurement, kept_pair=None, directory=None):
    """The cached catalogue for these settings, built and cached on first use
    (where the cache folder cannot be written, built each time).

    Returns
    -------
    catalogue : Catalogue
    cached : bool
        True when it was read from the cache.
    """
    folder = catalogue_directory(directory)
    key = _cache_key(n, max_cnots, pair, two_qubit, measurement, kept_pair)
    path = folder / f"rounds-n{n}-g{max_cnots}-{key}.json"
    try:
        data = json.loads(path.read_text())
        if data.get("format") == FORMAT:
            fields = {k: data[k] for k in ("before", "after", "build_seconds", "entries")}
            return Catalogue(n, max_cnots, **fields), True
    except (OSError, ValueError, KeyError, TypeError, AttributeError):
        pass  # a missing, unreadable or damaged cache file is a miss: built (and replaced) below
    catalogue = build_catalogue(
        n,
        max_cnots,
        pair=pair,
        two_qubit=two_qubit,
        measurement=measurement,
        kept_pair=kept_pair,
    )
    # a private temporary file per writer, then a rename: two processes building the
    # same catalogue never see half of one
    try:
        write_json_atomic(path, catalogue.to_json())
    except OSError:
        pass  # a cache that cannot be written is only a cache: the catalogue is built
    return catalogue, False
