"""Recipe strings: grammar, parser, formatter, canonical form and JSON form.

Grammar (our own notation)::

    recipe    := 'raw' | round ('.' round)*
    round     := kind rotations? source? '~'? ('^' count)?
    kind      := 'p' | 's' | 'dp' | 'ds'
    rotations := rot{1} | rot{n_inputs}
    rot       := 'Z' | 'z' | 'Y' | 'y' | 'X' | 'x'
    source    := '(' recipe ')'            only after p or dp
    '~'       := re-twirl the round's output to Werner form (BBPSSW)
    count     := integer >= 2, repeats the round

Meaning. Rounds apply left to right to the kept pair, which starts as a raw pair.

- ``p``: 2->1 step pumping a sacrificed pair that is a fresh raw pair, or is made
  by ``source``; ``s``: 2->1 step whose sacrificed pair is a copy of the pair made
  by all previous rounds, made independently (symmetric recurrence).
- ``dp`` / ``ds``: double selection, two sacrificed pairs, raw (or from
  ``source``) / copies of the pair so far.
- Rotations (:data:`models.rotations.ROTATION_NAMES`): one letter is the same
  rotation on every input; otherwise one letter per input, kept input first
  (2 for p and s, 3 for dp and ds). Omitted: ``Z``, which is no gate.
- ``~`` re-twirls the round's output to Werner form; ``^n`` repeats the round.

Examples: DEJMPS ``sY^3``; BBPSSW ``sZ~^2``; pumping ``pY^4``; alternating
pumping ``pZ.pX.pZ.pX``; a depth-2 DEJMPS pair pumped with depth-1 DEJMPS pairs
``sY^2.pY(sY)``; the raw pair ``raw``. Rotation letters come before the source
(``pY(sY)``; ``p(sY)Y`` is refused with that hint), and ``sY.pY(sY)``, whose source
is the prefix so far, is the same procedure as ``sY^2`` (rule 1 below).

Canonical strings (:func:`canonical`, :attr:`models.recipes.Recipe.notation`)
-----------------------------------------------------------------------------
Two spellings of the same physical procedure get one canonical string. Each
rewriting below is exact for every profile (gate, measurement and memory noise,
any raw pair, link length and pair rate): it leaves every success probability,
cost, memory count, time and the output fidelity unchanged (the output's X and
Y weights may be exchanged, and intermediate fidelities may differ for rule 5).
``tests/models/test_notation.py`` checks each rule numerically on random
profiles, and checks that recipes with identical figures share a string.

1. Sources. ``p(raw)`` is ``p``; a source that is the same procedure as the
   prefix so far turns ``p``/``dp`` into ``s``/``ds`` (whenever the rotations can
   absorb a relabelling between the two, see rule 3).
2. First round. With nothing before it, a copy of the pair so far is a raw pair,
   so ``s`` = ``p`` and ``ds`` = ``dp`` in the first round. It is written in the
   style of the second round (``s``/``ds`` if the second round is symmetric,
   else ``p``/``dp``); a one-round recipe is written ``s``/``ds``.
3. The X <-> Y exchange T (the rotation ``z``, a bilateral phase gate) on the
   kept pair commutes with both steps, because the kept pair is the control of
   all their CNOTs and is never measured; it also commutes with the gate noise,
   with memory decay (which shrinks the XX and YY correlations alike) and with
   the re-twirl, and never changes the fidelity. So T T may be inserted between
   two rounds, one T pushed into the earlier round's kept rotation, the other
   into the later round's rotations (kept, and copies of the pair so far),
   provided no rotation changes between ``Z`` (no gate) and a gate: ``Z`` and
   ``z`` can only pass a T on (T Z T = Z, T z T = z); the other letters absorb
   it (T Y = y, T X = x, T Y T = X, ...). A T left at the end only exchanges
   the output's X and Y weights. A pair that is T-invariant (X and Y weights
   equal: a re-twirled pair after any wait, and what a Z or z kept rotation and
   a step make of it) absorbs a T for free.
4. Werner inputs. A re-twirled pair used without waiting (the input made last
   in a step) is exactly Werner, so every gate letter on it does the same.
5. Pumping exchange. Exchanging the sacrificed rotations r and T r (``Y`` and
   ``y``, or ``X`` and ``x``) between two 2->1 rounds that pump raw pairs leaves
   the output unchanged if no round from the first to the one before the second
   is re-twirled and every round after the first, up to the second, pumps raw
   pairs (2->1 or double selection) with kept rotation ``Z`` or ``z``. Write the
   kept pair's weights in the basis (x bit, Fourier transform over the z bit):
   each of these steps, waits, noises and kept rotations acts on the Fourier-1
   part as a diagonal matrix (a scalar for waits and noise) and on the rest in
   a way that does not tell r from T r, so the two changes commute. Within such
   a block capital letters go first (``pZy.pZY`` -> ``pZY.pZy``).
6. Order. Of all spellings reachable by rules 1-5, the canonical one prefers a
   copy of the pair so far to a source, then smaller letters read round by
   round (kept input first) in the order Z < Y < X < z < y < x.
7. Formatting. Rotations are written once when all inputs share one (``Z``
   included); a raw source is omitted; maximal runs of identical rounds are
   written once with ``^n``.

Not merged, because not exact for every profile (checked in the tests): the
X <-> Y exchange on a sacrificed pair alone (exact only for perfect
measurements), swapping the kept and sacrificed rotations of a symmetric 2->1
round (only for perfect measurements and memories); ``Z`` against ``z`` (only
for perfect single-qubit gates); other rotations of a re-twirled pair that has
waited (only for perfect memories); pumping exchanges between double-selection
rounds (not exact). Exact but not merged, to keep the rules simple: a rule-5
exchange across a round whose sacrificed pairs come from a source.

References
----------
1. C. H. Bennett et al., Phys. Rev. Lett. 76, 722 (1996) (BBPSSW, the re-twirl).
2. D. Deutsch et al., Phys. Rev. Lett. 77, 2818 (1996) (DEJMPS).
"""

from __future__ import annotations

from dataclasses import replace
from functools import lru_cache

from .kinds import STEP_KINDS
from .recipes import Recipe, Round, making_order
from .rotations import COMPOSE, ROTATION_NAMES

# notation token -> (selection, pumping); longest first, so that "dp" is not read as "d" + "p"
_TOKENS = sorted(
    [(k.pump_token, (k.selection, True)) for k in STEP_KINDS.values()]
    + [(k.same_token, (k.selection, False)) for k in STEP_KINDS.values()],
    key=lambda item: -len(item[0]),
)
_TOKEN_LIST = ", ".join(repr(token) for token, _ in sorted(_TOKENS, key=lambda t: (len(t[0]), t)))
_ROT_LIST = ", ".join(ROTATION_NAMES)


class RecipeSyntaxError(ValueError):
    """A recipe string that does not follow the grammar of :mod:`models.notation`.

    Attributes
    ----------
    text : str
        The string that was read.
    position : int
        Index of the offending character (``len(text)`` for a premature end).
    expected : str
        What the grammar allows there.
    """

    def __init__(self, text: str, position: int, expected: str):
        self.text = text
        self.position = position
        self.expected = expected
        found = repr(text[position]) if position < len(text) else "the end of the recipe"
        super().__init__(
            f"cannot read recipe {text!r}: found {found} at column {position + 1}\n"
            f"  {text}\n  {' ' * position}^\n"
            f"expected {expected}"
        )


class _Parser:
    def __init__(self, text: str):
        self.text = text
        self.pos = 0

    def peek(self, n: int = 1) -> str:
        return self.text[self.pos : self.pos + n]

    def fail(self, expected: str, position: int | None = None):
        raise RecipeSyntaxError(self.text, self.pos if position is None else position, expected)

    def recipe(self, closing: str) -> Recipe:
        if self.text.startswith("raw", self.pos):
            self.pos += 3
            return Recipe(())
        rounds: list[Round] = []
        while True:
            rounds.extend(self.round(closing))
            if self.peek() == ".":
                self.pos += 1
                continue
            return Recipe(tuple(rounds))

    def _fail_round_token(self, start: int):
        """Fail at the first character that no round token can continue."""
        read = 0
        while any(
            len(t) > read and self.text.startswith(t[: read + 1], start) for t, _ in _TOKENS
        ):
            read += 1
        if read == 0:
            self.fail(f"a round: one of {_TOKEN_LIST} (or 'raw' for the raw pair alone)")
        head = self.text[start : start + read]
        nexts = sorted({t[read] for t, _ in _TOKENS if t.startswith(head) and len(t) > read})
        names = ", ".join(
            f"{t}: {STEP_KINDS[sel].title}{'' if pump else ', symmetric'}"
            for t, (sel, pump) in sorted(_TOKENS)
            if t.startswith(head) and len(t) > read
        )
        self.fail(
            " or ".join(repr(c) for c in nexts) + f" after {head!r} ({names})", start + read
        )

    def round(self, closing: str) -> list[Round]:
        start = self.pos
        for token, (selection, pumping) in _TOKENS:
            if self.text.startswith(token, start):
                break
        else:
            self._fail_round_token(start)
        kind = token
        self.pos += len(token)
        n_inputs = STEP_KINDS[selection].n_inputs
        letters_at = self.pos
        letters = []
        while self.peek() and self.peek() in ROTATION_NAMES:
            if len(letters) == n_inputs:
                self.fail(f"at most {n_inputs} rotation letters after {kind!r} (one per input)")
            letters.append(ROTATION_NAMES.index(self.peek()))
            self.pos += 1
        if 1 < len(letters) < n_inputs:
            self.fail(
                f"a rotation letter ({_ROT_LIST}): {kind!r} takes 1 letter (all inputs) "
                f"or {n_inputs} (one per input), found {len(letters)} at column {letters_at + 1}"
            )
        rotations = tuple(letters) if letters else (0,)
        source = None
        if self.peek() == "(":
            if not pumping:
                self.fail(
                    f"no source after {kind!r}: a source '(...)' follows only p or dp, "
                    f"{kind!r} sacrifices copies of the pair so far"
                )
            opened = self.pos
            self.pos += 1
            source = self.recipe(")")
            if self.peek() != ")":
                self.fail(f"')' to close the source opened at column {opened + 1}")
            self.pos += 1
        twirl = False
        if self.peek() == "~":
            twirl = True
            self.pos += 1
        count = 1
        if self.peek() == "^":
            self.pos += 1
            digits_at = self.pos
            while self.peek().isdigit() and self.peek().isascii():
                self.pos += 1
            if self.pos == digits_at:
                self.fail("a repeat count (an integer >= 2) after '^'")
            count = int(self.text[digits_at : self.pos])
            if count < 2:
                self.fail("a repeat count >= 2 (omit '^' for a single round)", digits_at)
        nxt = self.peek()
        if source is not None and nxt in ROTATION_NAMES and not twirl and count == 1:
            self.fail(
                f"'~', '^', '.' or the end here: rotation letters come before the source, "
                f"as in {kind}{nxt}(...)"
            )
        if nxt not in ("", ".", closing):
            allowed = []
            if not letters and source is None and not twirl and count == 1:
                allowed.append(f"a rotation letter ({_ROT_LIST})")
            if pumping and source is None and not twirl and count == 1:
                allowed.append("'(' (a source)")
            if not twirl and count == 1:
                allowed.append("'~'")
            if count == 1:
                allowed.append("'^'")
            allowed.append("'.'")
            allowed.append("')'" if closing == ")" else "the end of the recipe")
            self.fail(", ".join(allowed[:-1]) + " or " + allowed[-1])
        r = Round(
            selection,
            "sub" if source is not None else ("raw" if pumping else "same"),
            rotations,
            source=source,
            twirl=twirl,
        )
        return [r] * count


def parse_recipe(text: str) -> Recipe:
    """Read a recipe string (grammar in :mod:`models.notation`).

    Leading and trailing white space is ignored. The recipe is returned as
    written; use :func:`canonical` for its canonical form.

    Raises
    ------
    RecipeSyntaxError
        With the string, a caret under the offending character and what was expected.

    Examples
    --------
    >>> parse_recipe("pZY^2").rounds[0]
    Round(selection='single', sacrificed='raw', rotations=(0, 2), source=None, twirl=False)
    >>> parse_recipe("sY~x")
    Traceback (most recent call last):
    ...
    models.notation.RecipeSyntaxError: cannot read recipe 'sY~x': found 'x' at column 4
      sY~x
         ^
    expected '^', '.' or the end of the recipe
    """
    if not isinstance(text, str):
        raise ValueError(f"recipe = {text!r} must be a string such as 'sY^3'")
    parser = _Parser(text.strip())
    if not parser.text:
        parser.fail("a recipe such as 'sY^3', or 'raw' for the raw pair")
    recipe = parser.recipe("")
    if parser.pos != len(parser.text):
        if parser.peek() == ")":
            parser.fail("'.' or the end of the recipe (this ')' closes nothing)")
        parser.fail("the end of the recipe ('raw' stands alone)")
    return recipe


def as_recipe(recipe) -> Recipe:
    """A :class:`Recipe` from a Recipe or a recipe string."""
    if isinstance(recipe, Recipe):
        return recipe
    if isinstance(recipe, str):
        return parse_recipe(recipe)
    raise ValueError(f"recipe = {recipe!r} must be a Recipe or a recipe string such as 'sY^3'")


def _format_round(r: Round) -> str:
    step = STEP_KINDS[r.selection]
    kind = step.same_token if r.sacrificed == "same" else step.pump_token
    rot = r.rotations
    letters = (
        ROTATION_NAMES[rot[0]] if len(set(rot)) == 1 else "".join(ROTATION_NAMES[k] for k in rot)
    )
    source = f"({format_recipe(r.source)})" if r.sacrificed == "sub" else ""
    return kind + letters + source + ("~" if r.twirl else "")


def format_recipe(recipe: Recipe) -> str:
    """The string of a recipe exactly as it is (no canonicalisation).

    ``parse_recipe(format_recipe(r)) == r`` for every recipe; for the canonical
    string use ``recipe.notation`` (or ``format_recipe(canonical(r))``).

    Examples
    --------
    >>> format_recipe(Recipe((Round("single", "same", "Y"),) * 3))
    'sY^3'
    """
    recipe = as_recipe(recipe)
    if not recipe.rounds:
        return "raw"
    parts = []
    i = 0
    rounds = recipe.rounds
    while i < len(rounds):
        j = i
        while j + 1 < len(rounds) and rounds[j + 1] == rounds[i]:
            j += 1
        text = _format_round(rounds[i])
        parts.append(text if j == i else f"{text}^{j - i + 1}")
        i = j + 1
    return ".".join(parts)


# ---------------------------------------------------------------- canonical form
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


def _input_options(r: int, state: int) -> list[int]:
    """Rotations r' that prepare the same input as r, for an input in ``state``."""
    if state == _WERNER:
        return [0] if r == 0 else [1, 2, 3, 4, 5]
    compensations = (0, 1) if state == _TINV else (state,)
    return sorted(
        {_conjugate(r, c, 0) for c in compensations if _same_gate(r, _conjugate(r, c, 0))}
    )


def _product(options):
    out = [()]
    for choices in options:
        out = [o + (k,) for o in out for k in choices]
    return out


@lru_cache(maxsize=4096)  # sources and prefixes are canonicalised again and again
def _canon(recipe: Recipe, flip_ok: bool) -> tuple[Recipe, frozenset]:
    """Least member of the class of ``recipe``; and the frames h of its output.

    Returns the canonical recipe C and the set of h in {0, 1} such that C's output
    is T^h applied to ``recipe``'s output. With ``flip_ok`` False only members
    whose output may equal the original's (0 among the frames) are considered.
    """
    plans = []
    rounds: list[Round] = []  # physically identical to recipe's rounds so far
    for r in recipe.rounds:
        merge = None
        source_state = 0
        if r.sacrificed == "sub" and not r.source.rounds:
            r = replace(r, sacrificed="raw", source=None)
        prefix = Recipe(tuple(rounds))
        if r.sacrificed == "sub":
            sac = r.rotations[1:]
            source, h = _canon(r.source, all(k not in _COMMUTE_T for k in sac))
            if h == {0, 1}:
                source_state = _WERNER if source.rounds[-1].twirl else _TINV
            else:
                # compensate the source's frame in the rotations: the same physical round
                (flip,) = h
                sac = tuple(_conjugate(k, flip, 0) for k in sac)
            r = replace(r, source=source, rotations=(r.rotations[0],) + sac)
            merge = _relative_frames(source, prefix)
        sacrificed_memory = {"raw": 1, "same": prefix.memory_per_node}.get(
            r.sacrificed, r.source.memory_per_node if r.source is not None else 1
        )
        order = making_order([prefix.memory_per_node] + [sacrificed_memory] * (r.n_inputs - 1))
        waits = tuple(i != order[-1] for i in range(r.n_inputs))
        plans.append((r, merge, source_state, waits))
        rounds.append(r)
    chosen, final = _least_rounds(plans, flip_ok)
    out = _sort_pumped(list(chosen))
    if out and out[0].sacrificed in ("raw", "same"):
        symmetric = len(out) == 1 or out[1].sacrificed == "same"
        out[0] = replace(out[0], sacrificed="same" if symmetric else "raw")
    return Recipe(tuple(out)), final


def _pumps_raw(r: Round, i: int) -> bool:
    # in the first round a copy of the pair so far is a raw pair
    return r.sacrificed == "raw" or (i == 0 and r.sacrificed == "same")


def _sort_pumped(rounds: list[Round]) -> list[Round]:
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
        )
        if linked:
            continue
        for capital in ("Y", "X"):
            pair = (ROTATION_NAMES.index(capital), ROTATION_NAMES.index(capital.lower()))
            where = [
                i
                for i in range(start, end)
                if out[i].selection == "single"
                and _pumps_raw(out[i], i)
                and out[i].rotations[1] in pair
            ]
            n_capital = sum(out[i].rotations[1] == pair[0] for i in where)
            for j, i in enumerate(where):
                letter = pair[0] if j < n_capital else pair[1]
                out[i] = replace(out[i], rotations=(out[i].rotations[0], letter))
        start = end
    return out


def _relative_frames(source: Recipe, prefix: Recipe):
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
    r, merge, source_state, waits = plan
    kept, sac = r.rotations[0], r.rotations[1:]
    forms = []  # (rank, sacrificed kind, source, options per sacrificed input)
    copy_states = [_at_use(state, w) for w in waits[1:]]
    if r.sacrificed == "same":
        forms.append(
            (0, "same", None, [_input_options(k, s) for k, s in zip(sac, copy_states, strict=True)])
        )
    else:
        if merge is not None:
            # the source is the prefix up to T^d: the copy needs compensation d xor frame
            (delta,) = merge if len(merge) == 1 else (0,)
            states = [s ^ delta if s < _TINV else s for s in copy_states]
            forms.append(
                (0, "same", None, [_input_options(k, s) for k, s in zip(sac, states, strict=True)])
            )
        if r.sacrificed == "sub":
            states = [_at_use(source_state, w) for w in waits[1:]]
        else:
            states = [0] * len(sac)
        forms.append(
            (
                1,
                r.sacrificed,
                r.source,
                [_input_options(k, s) for k, s in zip(sac, states, strict=True)],
            )
        )
    kept_state = _at_use(state, waits[0])
    kept_options = []
    if kept_state == _WERNER:
        out = _WERNER if r.twirl else _TINV
        kept_options = [(k, out) for k in _input_options(kept, _WERNER)]
    else:
        for c in (0, 1) if kept_state == _TINV else (kept_state,):
            for g in (0, 1):
                new_kept = _conjugate(kept, c, g)
                if not _same_gate(kept, new_kept):
                    continue
                if r.twirl:
                    out = _WERNER
                elif kept_state == _TINV and kept in _COMMUTE_T:
                    out = _TINV
                else:
                    out = g
                kept_options.append((new_kept, out))
    for new_kept, out in kept_options:
        for rank, kind, source, options in forms:
            for rot in _product(options):
                new = replace(r, sacrificed=kind, source=source, rotations=(new_kept,) + rot)
                yield (rank, _RANK[new_kept]) + tuple(_RANK[k] for k in rot), new, out


def _least_rounds(plans, flip_ok: bool):
    n = len(plans)
    all_states = (0, 1, _TINV, _WERNER)
    feasible = [set() for _ in range(n + 1)]
    feasible[n] = set(all_states) if flip_ok else {0, _TINV, _WERNER}
    for i in range(n - 1, -1, -1):
        for state in all_states:
            if any(out in feasible[i + 1] for _, _, out in _choices(plans[i], state)):
                feasible[i].add(state)
    states = {0}  # the raw pair is the raw pair
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


def canonical(recipe) -> Recipe:
    """The canonical member of a recipe's class of physically identical recipes.

    Accepts a :class:`Recipe` or a string. The rules are in the module docstring;
    the canonical recipe has the same fidelity, success probabilities, costs,
    memory, rounds and times as the original for every profile, and its output's
    X and Y weights may be exchanged.

    Examples
    --------
    >>> format_recipe(canonical("pY.sY.sY"))
    'sY^3'
    >>> format_recipe(canonical("sY.pY(sY)"))
    'sY^2'
    >>> format_recipe(canonical("pY.py"))  # the last kept X <-> Y exchange only relabels
    'pY.pYy'
    """
    return _canon(as_recipe(recipe), True)[0]


# ---------------------------------------------------------------- JSON form
_ROUND_KEYS = {"selection", "sacrificed", "rotations", "twirl", "source"}


def recipe_to_json(recipe) -> dict:
    """Plain-JSON form of a recipe as it is: ``{"rounds": [round, ...]}``.

    Each round is ``{"selection", "sacrificed", "rotations" (list of names),
    "twirl"}`` plus ``"source"`` (a nested recipe) when ``sacrificed`` is
    ``"sub"``. Inverse: :func:`recipe_from_json`.

    Examples
    --------
    >>> recipe_to_json("pZY")["rounds"][0]
    {'selection': 'single', 'sacrificed': 'raw', 'rotations': ['Z', 'Y'], 'twirl': False}
    """
    recipe = as_recipe(recipe)
    rounds = []
    for r in recipe.rounds:
        item = {
            "selection": r.selection,
            "sacrificed": r.sacrificed,
            "rotations": [ROTATION_NAMES[k] for k in r.rotations],
            "twirl": r.twirl,
        }
        if r.source is not None:
            item["source"] = recipe_to_json(r.source)
        rounds.append(item)
    return {"rounds": rounds}


def recipe_from_json(data: dict) -> Recipe:
    """Recipe from :func:`recipe_to_json`'s form; raises ``ValueError`` naming a bad key."""
    if (
        not isinstance(data, dict)
        or set(data) != {"rounds"}
        or not isinstance(data["rounds"], list)
    ):
        raise ValueError(f"recipe JSON {data!r} must be an object with one key 'rounds' (a list)")
    rounds = []
    for i, item in enumerate(data["rounds"]):
        if not isinstance(item, dict):
            raise ValueError(f"rounds[{i}] = {item!r} must be an object")
        unknown = set(item) - _ROUND_KEYS
        if unknown:
            raise ValueError(
                f"rounds[{i}] has unknown key(s) {sorted(unknown)}; allowed: {sorted(_ROUND_KEYS)}"
            )
        missing = {"selection", "sacrificed", "rotations"} - set(item)
        if missing:
            raise ValueError(f"rounds[{i}] lacks key(s) {sorted(missing)}")
        source = recipe_from_json(item["source"]) if "source" in item else None
        try:
            rounds.append(
                Round(
                    item["selection"],
                    item["sacrificed"],
                    tuple(item["rotations"]),
                    source=source,
                    twirl=item.get("twirl", False),
                )
            )
        except ValueError as err:
            raise ValueError(f"rounds[{i}]: {err}") from None
    return Recipe(tuple(rounds))
