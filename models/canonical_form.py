"""Canonical form of recipes: one string for each physical procedure.

Every rule, what it needs of the noise, and the step kinds it is proven for
(the names of :data:`models.kinds.STEP_KINDS`). The code applies a rule to a
round only when the round's kind is listed here (:data:`RULES`), so a new kind
starts with no rules: its rounds stay as written, which is exact and merges less.

====================  ==========================================  ==============
rule                  needs of the noise                          kinds
====================  ==========================================  ==============
raw-source            nothing (a definition)                      single, double
source-is-prefix      nothing (a definition); a relabelled        single, double
                      source also needs relabel-input
first-round-copy      nothing (a definition)                      single, double
kept-exchange         nothing: T commutes with gate noise,        single, double
                      memory decay and the re-twirl
relabel-input         every rotation but ``Z`` adds the same      single, double
                      single-qubit noise; ``Z`` (no gate) and a
                      gate are never exchanged, which would need
                      perfect single-qubit gates
werner-input          the pair is used without waiting (memory    single, double
                      decay undoes the Werner form)
pumping-exchange      nothing (see the rule); the rounds whose    single
                      letters are exchanged
pumping-block         nothing; the rounds an exchange may cross   single, double
====================  ==========================================  ==============

What each rule says. Each rewriting is exact for every profile (gate,
measurement and memory noise, any raw pair, link length and pair rate): it
leaves every success probability, cost, memory count, time and the output
fidelity unchanged (the output's X and Y weights may be exchanged, and
intermediate fidelities may differ for pumping-exchange).
``tests/models/test_notation.py`` checks each rule numerically on random
profiles, and checks that recipes with identical figures share a string.

- raw-source: ``p(raw)`` is ``p`` (and ``p(~raw)`` is ``p`` in a recipe whose
  raw pairs are twirled, ``~...``).
- source-is-prefix: a source that is the same procedure as the prefix so far
  turns ``p``/``dp`` into ``s``/``ds`` (when the two differ by the relabelling
  T below, only if the rotations can absorb it: relabel-input).
- first-round-copy: with nothing before it, a copy of the pair so far is a raw
  pair, so ``s`` = ``p`` and ``ds`` = ``dp`` in the first round. It is written
  in the style of the second round (``s``/``ds`` if the second round is
  symmetric, else ``p``/``dp``); a one-round recipe is written ``s``/``ds``.
- kept-exchange: the X <-> Y exchange T (the rotation ``z``, a bilateral phase
  gate) on the kept pair commutes with the step, because the kept pair is the
  control of all its CNOTs and is never measured; it also commutes with the
  gate noise, with memory decay (which shrinks the XX and YY correlations alike)
  and with the re-twirl, and never changes the fidelity. So T T may be inserted
  between two rounds, one T pushed into the earlier round's kept rotation, the
  other into the later round's rotations (kept, and copies of the pair so far).
  A T left at the end only exchanges the output's X and Y weights. A pair that
  is T-invariant (X and Y weights equal: a re-twirled pair after any wait, and
  what a ``Z`` or ``z`` kept rotation and the step make of it) absorbs a T.
- relabel-input: a rotation r on a pair known to be T^c of the pair as written
  prepares the same input as r T^c on the pair as written, provided no
  rotation changes between ``Z`` (no gate) and a gate: ``Z`` and ``z`` can only
  pass a T on (T Z T = Z, T z T = z); the other letters absorb it (T Y = y,
  T X = x, T Y T = X, ...).
- werner-input: a re-twirled pair, or a twirled raw pair, used without waiting
  (the input made last in a step) is exactly Werner, so every gate letter on it
  does the same.
- pumping-exchange and pumping-block: exchanging the sacrificed rotations r and
  T r (``Y`` and ``y``, or ``X`` and ``x``) between two 2->1 rounds that pump
  raw pairs leaves the output unchanged if no round from the first to the one
  before the second is re-twirled and every round after the first, up to the
  second, pumps raw pairs (a pumping-block kind) with kept rotation ``Z`` or
  ``z``. Write the kept pair's weights in the basis (x bit, Fourier transform
  over the z bit): each of these steps, waits, noises and kept rotations acts
  on the Fourier-1 part as a diagonal matrix (a scalar for waits and noise) and
  on the rest in a way that does not tell r from T r, so the two changes
  commute. Within such a block capital letters go first (``pZy.pZY`` ->
  ``pZY.pZy``).

Order: of all spellings reachable by the rules, the canonical one prefers a
copy of the pair so far to a source, then smaller letters read round by round
(kept input first) in the order Z < Y < X < z < y < x. Formatting
(:mod:`models.formatting`): rotations are written once when all inputs share
one (``Z`` included); a raw source is omitted; maximal runs of identical rounds
are written once with ``^n``.

Not merged, because not exact for every profile (checked in the tests): the
X <-> Y exchange on a sacrificed pair alone (exact only for perfect
measurements), swapping the kept and sacrificed rotations of a symmetric 2->1
round (only for perfect measurements and memories); ``Z`` against ``z`` (only
for perfect single-qubit gates); other rotations of a re-twirled pair that has
waited (only for perfect memories); pumping exchanges between double-selection
rounds (not exact). Exact but not merged, to keep the rules simple: a
pumping-exchange across a round whose sacrificed pairs come from a source.

This module reads recipes and builds new ones with :func:`dataclasses.replace`,
so it does not import :mod:`models.recipes` (which imports it).

References
----------
1. C. H. Bennett et al., Phys. Rev. Lett. 76, 722 (1996) (BBPSSW, the re-twirl).
2. D. Deutsch et al., Phys. Rev. Lett. 77, 2818 (1996) (DEJMPS).
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from functools import lru_cache

from .making import making_order
from .rotations import COMPOSE, ROTATION_NAMES


@dataclass(frozen=True)
class CanonicalRule:
    """One rewriting rule of the canonical form.

    Attributes
    ----------
    name : str
    needs : str
        What the rule needs of the noise to be exact.
    kinds : tuple of str
        Step kinds (:data:`models.kinds.STEP_KINDS` names) it is proven for.
    """

    name: str
    needs: str
    kinds: tuple[str, ...]


_BOTH = ("single", "double")
RULES: dict[str, CanonicalRule] = {
    rule.name: rule
    for rule in (
        CanonicalRule("raw-source", "nothing (a definition)", _BOTH),
        CanonicalRule("source-is-prefix", "nothing (a definition)", _BOTH),
        CanonicalRule("first-round-copy", "nothing (a definition)", _BOTH),
        CanonicalRule(
            "kept-exchange", "nothing: T commutes with gate noise, decay and re-twirl", _BOTH
        ),
        CanonicalRule(
            "relabel-input",
            "every rotation but Z adds the same single-qubit noise; Z and gates stay apart",
            _BOTH,
        ),
        CanonicalRule("werner-input", "the Werner pair is used without waiting", _BOTH),
        CanonicalRule(
            "pumping-exchange", "nothing (rounds whose letters are exchanged)", ("single",)
        ),
        CanonicalRule("pumping-block", "nothing (rounds an exchange may cross)", _BOTH),
    )
}


def applies(rule: str, selection: str) -> bool:
    """True when ``rule`` (a name in :data:`RULES`) is proven for the step kind ``selection``."""
    return selection in RULES[rule].kinds


# State of a pair against the recipe as written: frame 0 (the same pair), frame 1
# (X and Y weights exchanged, i.e. T applied), _TINV (T-invariant, so either
# frame) or _WERNER (exactly Werner: invariant under every relabelling).
_T = ROTATION_NAMES.index("z")
_TINV = 2
_WERNER = 3
_COMMUTE_T = (0, 1)  # Z and z commute with T
# preference of letters in canonical strings: Z < Y < X < z < y < x
_RANK = tuple(("Z", "Y", "X", "z", "y", "x").index(name) for name in ROTATION_NAMES)


def _conjugate(r: int, before: int, after: int) -> int:
    """T^after . r . T^before (apply T^before first)."""
    if before:
        r = int(COMPOSE[_T, r])
    if after:
        r = int(COMPOSE[r, _T])
    return r


def _same_gate(old: int, new: int) -> bool:
    # only the identity rotation is noiseless; all other rotations add the same noise
    return (old == 0) == (new == 0)


def _frames(states) -> frozenset:
    out = set()
    for s in states:
        out |= {0, 1} if s >= _TINV else {s}
    return frozenset(out)


def _at_use(state: int, waits: bool) -> int:
    # memory decay keeps X and Y weights equal but not the Z weight
    return _TINV if state == _WERNER and waits else state


def _input_options(r: int, state: int, selection: str) -> list[int]:
    """Rotations r' that prepare the same input as r, for an input in ``state``."""
    if state == _WERNER and applies("werner-input", selection):
        return [0] if r == 0 else [1, 2, 3, 4, 5]
    if not applies("relabel-input", selection):
        return [] if state == 1 else [r]
    compensations = (0, 1) if state >= _TINV else (state,)
    return sorted(
        {_conjugate(r, c, 0) for c in compensations if _same_gate(r, _conjugate(r, c, 0))}
    )


def _product(options):
    out = [()]
    for choices in options:
        out = [o + (k,) for o in out for k in choices]
    return out


def _ends_twirled(recipe) -> bool:
    # the pair a recipe makes is exactly Werner when its last operation is a twirl
    return recipe.rounds[-1].twirl if recipe.rounds else recipe.raw_twirl


@lru_cache(maxsize=4096)  # sources and prefixes are canonicalised again and again
def _canon(recipe, flip_ok: bool):
    """Least member of the class of ``recipe``; and the frames h of its output.

    Returns the canonical recipe C and the set of h in {0, 1} such that C's output
    is T^h applied to ``recipe``'s output. With ``flip_ok`` False only members
    whose output may equal the original's (0 among the frames) are considered.
    """
    raw_state = _WERNER if recipe.raw_twirl else 0
    plans = []
    rounds = []  # physically identical to recipe's rounds so far
    for r in recipe.rounds:
        kind = r.selection
        merge = None
        source_state = 0
        if (
            r.sacrificed == "sub"
            and not r.source.rounds
            and r.source.raw_twirl == recipe.raw_twirl
            and applies("raw-source", kind)
        ):
            r = replace(r, sacrificed="raw", source=None)
        prefix = replace(recipe, rounds=tuple(rounds))
        if r.sacrificed == "sub":
            sac = r.rotations[1:]
            relabel = applies("relabel-input", kind)
            source, h = _canon(r.source, relabel and all(k not in _COMMUTE_T for k in sac))
            if h == {0, 1}:
                source_state = _WERNER if _ends_twirled(source) else _TINV
            else:
                # compensate the source's frame in the rotations: the same physical round
                (flip,) = h
                sac = tuple(_conjugate(k, flip, 0) for k in sac)
            r = replace(r, source=source, rotations=(r.rotations[0],) + sac)
            if applies("source-is-prefix", kind):
                merge = _relative_frames(source, prefix)
        sacrificed_memory = {"raw": 1, "same": prefix.memory_per_node}.get(
            r.sacrificed, r.source.memory_per_node if r.source is not None else 1
        )
        order = making_order([prefix.memory_per_node] + [sacrificed_memory] * (r.n_inputs - 1))
        waits = tuple(i != order[-1] for i in range(r.n_inputs))
        plans.append((r, merge, source_state, waits, raw_state))
        rounds.append(r)
    chosen, final = _least_rounds(plans, flip_ok, raw_state)
    out = _sort_pumped(list(chosen))
    if (
        out
        and out[0].sacrificed in ("raw", "same")
        and applies("first-round-copy", out[0].selection)
    ):
        symmetric = len(out) == 1 or out[1].sacrificed == "same"
        out[0] = replace(out[0], sacrificed="same" if symmetric else "raw")
    return replace(recipe, rounds=tuple(out)), final


def _pumps_raw(r, i: int) -> bool:
    # in the first round a copy of the pair so far is a raw pair
    return r.sacrificed == "raw" or (
        i == 0 and r.sacrificed == "same" and applies("first-round-copy", r.selection)
    )


def _sort_pumped(rounds: list) -> list:
    """Exchange the sacrificed rotations r and T r of 2->1 rounds pumping raw pairs.

    Within a block of rounds linked by "the earlier round is not re-twirled and the
    later one pumps raw pairs with kept rotation Z or z", such exchanges are
    exact: written in the basis (x, Fourier in z) of the kept pair's labels,
    every step and wait in the block is diagonal on the part that tells r from
    T r and acts alike on the rest. Capitals go first.
    """
    out = list(rounds)
    start = 0
    for end in range(1, len(out) + 1):
        linked = end < len(out) and (
            not out[end - 1].twirl
            and out[end].rotations[0] in _COMMUTE_T
            and _pumps_raw(out[end], end)
            and applies("pumping-block", out[end].selection)
        )
        if linked:
            continue
        for capital in ("Y", "X"):
            pair = (ROTATION_NAMES.index(capital), ROTATION_NAMES.index(capital.lower()))
            where = [
                i
                for i in range(start, end)
                if applies("pumping-exchange", out[i].selection)
                and _pumps_raw(out[i], i)
                and out[i].rotations[1] in pair
            ]
            n_capital = sum(out[i].rotations[1] == pair[0] for i in where)
            for j, i in enumerate(where):
                letter = pair[0] if j < n_capital else pair[1]
                out[i] = replace(out[i], rotations=(out[i].rotations[0], letter))
        start = end
    return out


def _relative_frames(source, prefix):
    """Frames d with source output = T^d (prefix output), or None if they differ."""
    if not prefix.rounds:
        return None
    source_c, h_source = _canon(source, True)
    prefix_c, h_prefix = _canon(prefix, True)
    if source_c != prefix_c:
        return None
    return frozenset(a ^ b for a in h_source for b in h_prefix)


def _choices(plan, state: int):
    """Every exact rewriting of a round given the ``state`` of the pair so far.

    Yields (key, round, state of the output); keys order the rewritings (a copy of
    the prefix before a source, then the rotations, kept input first).
    """
    r, merge, source_state, waits, raw_state = plan
    kind = r.selection
    kept, sac = r.rotations[0], r.rotations[1:]
    forms = []  # (rank, sacrificed kind, source, options per sacrificed input)
    copy_states = [_at_use(state, w) for w in waits[1:]]

    def options(states):
        return [_input_options(k, s, kind) for k, s in zip(sac, states, strict=True)]

    if r.sacrificed == "same":
        forms.append((0, "same", None, options(copy_states)))
    else:
        if merge is not None:
            # the source is the prefix up to T^d: the copy needs compensation d xor frame
            (delta,) = merge if len(merge) == 1 else (0,)
            states = [s ^ delta if s < _TINV else s for s in copy_states]
            forms.append((0, "same", None, options(states)))
        source = r.source
        fresh = source_state if r.sacrificed == "sub" else raw_state
        forms.append((1, r.sacrificed, source, options([_at_use(fresh, w) for w in waits[1:]])))
    exchange = applies("kept-exchange", kind)
    relabel = applies("relabel-input", kind)
    kept_state = _at_use(state, waits[0])
    kept_options = []
    if kept_state == _WERNER:
        # a Werner pair is T-invariant, and so is what the step makes of it if T commutes
        out = _WERNER if r.twirl else (_TINV if exchange else 0)
        kept_options = [(k, out) for k in _input_options(kept, _WERNER, kind)]
    else:
        for c in (0, 1) if kept_state == _TINV else (kept_state,):
            for g in (0, 1) if exchange else (0,):
                new_kept = _conjugate(kept, c, g)
                if new_kept != kept and not (relabel and _same_gate(kept, new_kept)):
                    continue
                if r.twirl:
                    out = _WERNER
                elif kept_state == _TINV and kept in _COMMUTE_T and exchange:
                    out = _TINV
                else:
                    out = g
                kept_options.append((new_kept, out))
    for new_kept, out in kept_options:
        for rank, sacrificed, source, per_input in forms:
            for rot in _product(per_input):
                new = replace(r, sacrificed=sacrificed, source=source, rotations=(new_kept,) + rot)
                yield (rank, _RANK[new_kept]) + tuple(_RANK[k] for k in rot), new, out


def _least_rounds(plans, flip_ok: bool, start_state: int):
    n = len(plans)
    all_states = (0, 1, _TINV, _WERNER)
    feasible = [set() for _ in range(n + 1)]
    feasible[n] = set(all_states) if flip_ok else {0, _TINV, _WERNER}
    for i in range(n - 1, -1, -1):
        for state in all_states:
            if any(out in feasible[i + 1] for _, _, out in _choices(plans[i], state)):
                feasible[i].add(state)
    states = {start_state}  # the raw pair is the raw pair (exactly Werner if twirled)
    chosen = []
    for i in range(n):
        best, best_round, nxt = None, None, set()
        for state in states:
            for key, new, out in _choices(plans[i], state):
                if out not in feasible[i + 1]:
                    continue
                if best is None or key < best:
                    best, best_round, nxt = key, new, {out}
                elif key == best:
                    nxt.add(out)
        chosen.append(best_round)
        states = nxt
    return chosen, _frames(states)


def canonical(recipe):
    """The canonical member of a recipe's class of physically identical recipes.

    Accepts a :class:`models.recipes.Recipe` or a string. The rules are in the
    module docstring; the canonical recipe has the same fidelity, success
    probabilities, costs, memory, rounds and times as the original for every
    profile, and its output's X and Y weights may be exchanged.

    Examples
    --------
    >>> from models.formatting import format_recipe
    >>> format_recipe(canonical("pY.sY.sY"))
    'sY^3'
    >>> format_recipe(canonical("sY.pY(sY)"))
    'sY^2'
    >>> format_recipe(canonical("pY.py"))  # the last kept X <-> Y exchange only relabels
    'pY.pYy'
    """
    if isinstance(recipe, str):
        from .notation import parse_recipe  # the parser builds recipes; read only when needed

        recipe = parse_recipe(recipe)
    elif not hasattr(recipe, "rounds"):
        raise ValueError(f"recipe = {recipe!r} must be a Recipe or a recipe string such as 'sY^3'")
    return _canon(recipe, True)[0]
