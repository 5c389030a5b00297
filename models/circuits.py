"""General check rounds: their compact notation, canonical form and identity.

A general check round takes ``n`` pairs (2 to 5; pair 0 is kept), applies
bilateral CNOTs between any two of them and bilateral rotations, measures every
sacrificed pair at both nodes in the Z or the X basis and keeps pair 0 when the
reported parities (one bit per sacrificed pair: 1 when its two outcomes differ)
fall in an accepted set. The 2->1 check and double selection are members.

Compact form (our own notation)::

    form     := gates '/' bases '/' accepted
    gates    := (gate (',' gate)*)?            in the order applied
    gate     := digit digit                    CNOT, control pair then target pair
              | digit rot                      rotation of a pair (Z z Y y X x)
    bases    := ('Z' | 'X'){n - 1}             basis of pairs 1 .. n-1 (n pairs in all)
    accepted := bits (',' bits)*               reported parities kept, pair 1 first

The 2->1 check is ``01/Z/0``, double selection ``01,21/ZX/00``. In a recipe
string a general round is written ``c{form}`` when its sacrificed pairs are fresh
raw pairs or made by a source, and ``cs{form}`` when they are copies of the pair
made so far; ``c{#id}`` and ``cs{#id}`` name a round already known to this
process (read from a recipe or loaded from a catalogue) by its id.

Canonical form: identity rotations are dropped; gates on disjoint pairs
commute exactly (noise included, since each gate's noise acts on its own pairs),
so the gates are written in the least order such exchanges reach; the accepted
patterns are sorted. The sacrificed pairs are *not* relabelled: a round's inputs
are made one after another in label order, so under memory decay pair 1 waits
while pair 2 is made, and exchanging their labels changes which pair decays
(it changes the figures by up to about 1e-3 in fidelity at waits of a
hundredth of T2). The id is the first 10 hex digits of the SHA-256 of the
canonical form.

Examples
--------
>>> c = read_circuit("01,21/ZX/00")
>>> c.text, c.n_pairs
('01,21/ZX/00', 3)
>>> read_circuit("21,01/ZX/00").text  # gates sharing pair 1: their order stays
'21,01/ZX/00'
>>> read_circuit("02,12/XZ/00").text  # not relabelled: the pairs wait differently
'02,12/XZ/00'
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass
from functools import cached_property

from .rotations import ROTATION_NAMES
from .steps import StepCircuit

MAX_PAIRS = 5
MIN_PAIRS = 2


@dataclass(frozen=True)
class GeneralCircuit:
    """A general check round in canonical form.

    Attributes
    ----------
    n_pairs : int
    gates : tuple
        ``("cnot", control, target)`` or ``("rot", pair, rotation index)``, in order.
    bases : str
        Basis of pairs 1 .. n-1, one letter each (``"Z"`` reads the x bit,
        ``"X"`` the z bit).
    accepted : tuple of int
        Accepted reported-parity patterns, pair 1 most significant, sorted.
    """

    n_pairs: int
    gates: tuple
    bases: str
    accepted: tuple[int, ...]

    @cached_property
    def text(self) -> str:
        """The compact form (see the module docstring)."""
        return _format(self)

    @cached_property
    def circuit_id(self) -> str:
        """First 10 hex digits of the SHA-256 of :attr:`text`."""
        return hashlib.sha256(self.text.encode("utf-8")).hexdigest()[:10]

    @property
    def n_cnots(self) -> int:
        return sum(g[0] == "cnot" for g in self.gates)

    @cached_property
    def step(self) -> StepCircuit:
        """The compiled circuit (:class:`models.steps.StepCircuit`)."""
        cnots, rotations = [], []
        for g in self.gates:
            if g[0] == "cnot":
                cnots.append((g[1], g[2]))
            else:
                rotations.append((len(cnots), g[1], g[2]))
        return StepCircuit(
            self.text,
            self.n_pairs,
            cnots=tuple(cnots),
            checks=tuple((i + 1, b) for i, b in enumerate(self.bases)),
            rotations=tuple(rotations),
            accepted=self.accepted,
        )


def _gate_text(g) -> str:
    if g[0] == "cnot":
        return f"{g[1]}{g[2]}"
    return f"{g[1]}{ROTATION_NAMES[g[2]]}"


def _format(c: GeneralCircuit) -> str:
    width = c.n_pairs - 1
    accepted = ",".join(format(a, f"0{width}b") for a in c.accepted)
    return f"{','.join(_gate_text(g) for g in c.gates)}/{c.bases}/{accepted}"


def _pairs_of(g) -> tuple[int, ...]:
    return (g[1], g[2]) if g[0] == "cnot" else (g[1],)


def _gate_key(g) -> str:
    return _gate_text(g)


def normal_order(gates) -> tuple:
    """The least order of ``gates`` reachable by exchanging neighbours on disjoint pairs.

    Greedy: among the gates that no earlier gate on a shared pair holds back,
    take the least (its text) first; this is the lexicographic normal form of
    the sequence up to such exchanges.
    """
    remaining = list(gates)
    out = []
    while remaining:
        free = []
        busy: set[int] = set()
        for i, g in enumerate(remaining):
            pairs = set(_pairs_of(g))
            if not pairs & busy:
                free.append(i)
            busy |= pairs
        best = min(free, key=lambda i: _gate_key(remaining[i]))
        out.append(remaining.pop(best))
    return tuple(out)


def canonical_circuit(n_pairs, gates, bases, accepted) -> tuple[GeneralCircuit, tuple[int, ...]]:
    """The canonical form of a round, and the relabelling of its pairs that reaches it.

    Only changes that are exact for every noise profile are made (see the module
    docstring): identity rotations dropped, disjoint gates in normal order,
    accepted patterns sorted. The pairs keep their labels, so the relabelling
    returned is the identity; it is returned so that callers which carry the
    rotations of a round's inputs need not change if an exact relabelling rule
    is ever proven.

    Returns
    -------
    circuit : GeneralCircuit
    perm : tuple of int
        ``perm[i]`` is the pair of the round as given that is pair ``i`` of the
        canonical one (``perm[0] == 0``).
    """
    _check(n_pairs, gates, bases, accepted)
    gates = tuple(g for g in gates if not (g[0] == "rot" and g[2] == 0))
    circuit = GeneralCircuit(n_pairs, normal_order(gates), bases, tuple(sorted(set(accepted))))
    return circuit, tuple(range(n_pairs))


def _check(n_pairs, gates, bases, accepted):
    if not (isinstance(n_pairs, int) and MIN_PAIRS <= n_pairs <= MAX_PAIRS):
        raise ValueError(f"n_pairs = {n_pairs!r} must be {MIN_PAIRS} to {MAX_PAIRS}")
    if len(bases) != n_pairs - 1 or set(bases) - {"X", "Z"}:
        raise ValueError(
            f"bases = {bases!r} must give Z or X for each of the {n_pairs - 1} sacrificed pairs"
        )
    for g in gates:
        pairs = _pairs_of(g)
        if not all(0 <= p < n_pairs for p in pairs) or len(set(pairs)) != len(pairs):
            raise ValueError(f"gate {g!r} must act on distinct pairs among 0..{n_pairs - 1}")
    if not accepted or not all(0 <= a < 2 ** (n_pairs - 1) for a in accepted):
        raise ValueError(
            f"accepted = {accepted!r} must list one or more parity patterns of {n_pairs - 1} bits"
        )


class CircuitSyntaxError(ValueError):
    """A compact circuit form that does not follow the grammar of :mod:`models.circuits`."""


def parse_circuit(text: str) -> tuple[GeneralCircuit, tuple[int, ...]]:
    """Read a compact form: the canonical circuit and its relabelling (see canonical_circuit)."""

    def fail(why):
        raise CircuitSyntaxError(
            f"cannot read circuit {text!r}: {why}; write it as gates/bases/accepted, "
            "e.g. 01,21/ZX/00 (double selection)"
        )

    parts = text.strip().split("/")
    if len(parts) != 3:
        fail("expected three parts separated by '/'")
    gate_text = parts[0]
    n = len(parts[1]) + 1
    gates = []
    for item in gate_text.split(",") if gate_text else []:
        if len(item) != 2 or not item[0].isdigit():
            fail(f"gate {item!r} is not two digits (a CNOT) or a digit and a rotation letter")
        if item[1].isdigit():
            gates.append(("cnot", int(item[0]), int(item[1])))
        elif item[1] in ROTATION_NAMES:
            gates.append(("rot", int(item[0]), ROTATION_NAMES.index(item[1])))
        else:
            fail(f"gate {item!r}: {item[1]!r} is neither a pair nor one of {ROTATION_NAMES}")
    accepted = []
    for bits in parts[2].split(","):
        if len(bits) != n - 1 or set(bits) - {"0", "1"}:
            fail(f"accepted pattern {bits!r} must be {n - 1} bits (0 agree, 1 differ)")
        accepted.append(int(bits, 2) if bits else 0)
    try:
        return canonical_circuit(n, tuple(gates), parts[1], tuple(accepted))
    except ValueError as error:
        fail(str(error))


def read_circuit(text: str) -> GeneralCircuit:
    """The canonical :class:`GeneralCircuit` of a compact form."""
    return parse_circuit(text)[0]


def describe(circuit: GeneralCircuit, rotations=None) -> list[str]:
    """Lines that show a general round as each node runs it (no I/O here).

    Node A applies each rotation U, node B its conjugate U* (written ``U*``);
    both apply the same CNOTs and measure the same bases.

    Parameters
    ----------
    circuit : GeneralCircuit
    rotations : sequence of int, optional
        The round's rotation of each input (kept input first), shown first.

    Examples
    --------
    >>> for line in describe(read_circuit("01,21/ZX/00")):
    ...     print(line)
    node A: CNOT 0>1, CNOT 2>1; measure 1 in Z, 2 in X
    node B: CNOT 0>1, CNOT 2>1; measure 1 in Z, 2 in X
    keep pair 0 when the parities of pairs 1,2 read 00 (0 agree, 1 differ)
    """
    placed = [("rot", i, r) for i, r in enumerate(rotations or ()) if r]
    lines = []
    for node, star in (("A", ""), ("B", "*")):
        gates = [
            f"CNOT {g[1]}>{g[2]}" if g[0] == "cnot" else f"{ROTATION_NAMES[g[2]]}{star} on {g[1]}"
            for g in placed + list(circuit.gates)
        ]
        measures = ", ".join(f"{i + 1} in {b}" for i, b in enumerate(circuit.bases))
        lines.append(f"node {node}: {', '.join(gates) or 'no gate'}; measure {measures}")
    width = circuit.n_pairs - 1
    patterns = " or ".join(format(a, f"0{width}b") for a in circuit.accepted)
    pairs = ",".join(str(i) for i in range(1, circuit.n_pairs))
    lines.append(
        f"keep pair 0 when the parities of pairs {pairs} read {patterns} (0 agree, 1 differ)"
    )
    return lines


def general_rounds(recipe):
    """(path, round) of every general round of a recipe and its sources, in reading order.

    ``path`` names the round: ``"3"`` is round 3 of the main chain, ``"3/2"``
    round 2 of round 3's source.
    """
    from .kinds import BUILT_IN

    out = []
    for i, r in enumerate(recipe.rounds, start=1):
        if r.source is not None:
            out += [(f"{i}/{path}", sub) for path, sub in general_rounds(r.source)]
        if r.selection not in BUILT_IN:
            out.append((str(i), r))
    return out
