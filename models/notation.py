"""Recipe strings: grammar, parser and JSON form.

Grammar (our own notation)::

    recipe    := '~'? ('raw' | round ('.' round)*)
    round     := kind rotations? source? '~'? ('^' count)?
    kind      := 'p' | 's' | 'dp' | 'ds'
    rotations := rot{1} | rot{n_inputs}
    rot       := 'Z' | 'z' | 'Y' | 'y' | 'X' | 'x'
    source    := '(' recipe ')'            only after p or dp
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
- ``~`` after a round re-twirls the round's output to Werner form (BBPSSW);
  ``^n`` repeats the round.
- ``~`` at the start of a recipe twirls every raw pair that recipe's chain uses
  (the kept pair it starts from, the fresh pairs of its ``p``/``dp`` rounds and,
  through them, the copies of ``s``/``ds`` rounds) to Werner form on arrival,
  with the noise of one rotation, as a re-twirl has. A source is a recipe of its
  own and carries its own mark: ``~sZ.pY(sY)`` twirls the main chain's raw pairs,
  not the source's; ``~sZ.pY(~sY)`` twirls both.

Examples: DEJMPS ``sY^3``; BBPSSW ``~sZ~^2``; pumping ``pY^4``; alternating
pumping ``pZ.pX.pXZ.pX``; a depth-2 DEJMPS pair pumped with depth-1 DEJMPS pairs
``sY^2.pY(sY)``; the raw pair ``raw`` and the twirled raw pair ``~raw``.
Rotation letters come before the source (``pY(sY)``; ``p(sY)Y`` is refused with
that hint), and ``sY.pY(sY)``, whose source is the prefix so far, is the same
procedure as ``sY^2``.

Limits, so that every command answers at once: a recipe string has at most
:data:`MAX_LENGTH` characters, at most :data:`MAX_ROUNDS` rounds in all (its
sources' rounds included, each repeat counted), a repeat count of at most
:data:`MAX_REPEAT`, and sources nested at most :data:`MAX_NESTING` deep. Past
them, :func:`parse_recipe` raises a :class:`RecipeSyntaxError` saying which.

A recipe's canonical string (:attr:`models.recipes.Recipe.notation`) is
:func:`format_recipe` of :func:`canonical`; the rules of the canonical form,
what each needs of the noise and the step kinds it is proven for are in
:mod:`models.canonical_form`. The JSON form (:func:`recipe_to_json`) adds the key
``"raw_twirl": true`` for a recipe whose raw pairs are twirled.

References
----------
1. C. H. Bennett et al., Phys. Rev. Lett. 76, 722 (1996) (BBPSSW, the re-twirl).
2. D. Deutsch et al., Phys. Rev. Lett. 77, 2818 (1996) (DEJMPS).
"""

from __future__ import annotations

from .canonical_form import canonical
from .formatting import RAW_TWIRL, format_recipe
from .kinds import STEP_KINDS
from .recipes import Recipe, Round
from .rotations import ROTATION_NAMES

__all__ = [
    "MAX_LENGTH",
    "MAX_NESTING",
    "MAX_REPEAT",
    "MAX_ROUNDS",
    "RecipeSyntaxError",
    "as_recipe",
    "canonical",
    "format_recipe",
    "parse_recipe",
    "recipe_from_json",
    "recipe_to_json",
]

MAX_LENGTH = 1000  # characters of a recipe string
MAX_ROUNDS = 64  # rounds in all, sources included (yields of 2**-64 are beyond any use)
MAX_REPEAT = 64  # the n of '^n'
MAX_NESTING = 8  # sources within sources
LIMITS_SENTENCE = (
    f"a recipe has at most {MAX_ROUNDS} rounds in all (sources included), a repeat count "
    f"of at most {MAX_REPEAT}, sources nested at most {MAX_NESTING} deep and at most "
    f"{MAX_LENGTH} characters"
)
_SHOWN = 60  # characters of a long recipe string shown in an error

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
    diagram : str
        Two lines: the string (a window of it, if long) and a caret under the
        offending character. The message itself is one line.
    """

    def __init__(self, text: str, position: int, expected: str):
        self.text = text
        self.position = position
        self.expected = expected
        found = repr(text[position]) if position < len(text) else "the end of the recipe"
        start = max(0, min(position - _SHOWN // 2, len(text) - _SHOWN))
        window = text[start : start + _SHOWN]
        self.diagram = f"  {window}\n  {' ' * (position - start)}^"
        shown = repr(text) if len(text) <= _SHOWN else f"{text[:_SHOWN]!r}... ({len(text)} characters)"
        super().__init__(
            f"cannot read recipe {shown}: found {found} at column {position + 1}; "
            f"expected {expected}"
        )


class _Parser:
    def __init__(self, text: str):
        self.text = text
        self.pos = 0
        self.nesting = 0
        self.rounds = 0

    def peek(self, n: int = 1) -> str:
        return self.text[self.pos : self.pos + n]

    def fail(self, expected: str, position: int | None = None):
        raise RecipeSyntaxError(self.text, self.pos if position is None else position, expected)

    def recipe(self, closing: str) -> Recipe:
        raw_twirl = self.peek() == RAW_TWIRL
        if raw_twirl:
            self.pos += 1
        if self.text.startswith("raw", self.pos):
            self.pos += 3
            return Recipe((), raw_twirl=raw_twirl)
        rounds: list[Round] = []
        first = True
        while True:
            rounds.extend(self.round(closing, after_twirl=raw_twirl and first))
            first = False
            if self.peek() == ".":
                self.pos += 1
                continue
            return Recipe(tuple(rounds), raw_twirl=raw_twirl)

    def _fail_round_token(self, start: int, after_twirl: bool):
        """Fail at the first character that no round token can continue."""
        read = 0
        while any(
            len(t) > read and self.text.startswith(t[: read + 1], start) for t, _ in _TOKENS
        ):
            read += 1
        if read == 0:
            if self.peek() == RAW_TWIRL:
                where = (
                    "one leading '~' twirls the raw pairs"
                    if after_twirl
                    else "a '~' before a round stands only at the start of a recipe or source,"
                    " where it twirls the raw pairs"
                )
                self.fail(f"a round: one of {_TOKEN_LIST} ({where})")
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

    def round(self, closing: str, after_twirl: bool = False) -> list[Round]:
        start = self.pos
        for token, (selection, pumping) in _TOKENS:
            if self.text.startswith(token, start):
                break
        else:
            self._fail_round_token(start, after_twirl)
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
            if self.nesting == MAX_NESTING:
                self.fail(f"a source nested at most {MAX_NESTING} deep (a limit of stillroom)")
            self.pos += 1
            self.nesting += 1
            source = self.recipe(")")
            self.nesting -= 1
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
            digits = self.text[digits_at : self.pos]
            count = int(digits) if len(digits) <= 6 else MAX_REPEAT + 1
            if count < 2:
                self.fail("a repeat count >= 2 (omit '^' for a single round)", digits_at)
            if count > MAX_REPEAT:
                self.fail(f"a repeat count of at most {MAX_REPEAT} (a limit of stillroom)", digits_at)
        self.rounds += count
        if self.rounds > MAX_ROUNDS:
            self.fail(f"at most {MAX_ROUNDS} rounds in all (a limit of stillroom)", start)
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
        One line: the column and what was expected there (``diagram`` shows it), also
        for a recipe beyond the limits (:data:`LIMITS_SENTENCE`).

    Examples
    --------
    >>> parse_recipe("pZY^2").rounds[0]
    Round(selection='single', sacrificed='raw', rotations=(0, 2), source=None, twirl=False)
    >>> parse_recipe("sY~x")
    Traceback (most recent call last):
    ...
    models.notation.RecipeSyntaxError: cannot read recipe 'sY~x': found 'x' at column 4; expected '^', '.' or the end of the recipe
    """
    if not isinstance(text, str):
        raise ValueError(f"recipe = {text!r} must be a string such as 'sY^3'")
    parser = _Parser(text.strip())
    if len(parser.text) > MAX_LENGTH:
        parser.fail(f"at most {MAX_LENGTH} characters (a limit of stillroom)", MAX_LENGTH)
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


# ---------------------------------------------------------------- JSON form
_ROUND_KEYS = {"selection", "sacrificed", "rotations", "twirl", "source"}


def recipe_to_json(recipe) -> dict:
    """Plain-JSON form of a recipe as it is: ``{"rounds": [round, ...]}``.

    Each round is ``{"selection", "sacrificed", "rotations" (list of names),
    "twirl"}`` plus ``"source"`` (a nested recipe) when ``sacrificed`` is
    ``"sub"``. A recipe whose raw pairs are twirled (a leading ``~``) has the
    key ``"raw_twirl": true`` beside ``"rounds"``; it is left out otherwise, so
    the form of every other recipe is unchanged. Inverse: :func:`recipe_from_json`.

    Examples
    --------
    >>> recipe_to_json("pZY")["rounds"][0]
    {'selection': 'single', 'sacrificed': 'raw', 'rotations': ['Z', 'Y'], 'twirl': False}
    >>> recipe_to_json("~raw")
    {'rounds': [], 'raw_twirl': True}
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
    if recipe.raw_twirl:
        return {"rounds": rounds, "raw_twirl": True}
    return {"rounds": rounds}


def recipe_from_json(data: dict) -> Recipe:
    """Recipe from :func:`recipe_to_json`'s form; raises ``ValueError`` naming a bad key."""
    if (
        not isinstance(data, dict)
        or not {"rounds"} <= set(data) <= {"rounds", "raw_twirl"}
        or not isinstance(data["rounds"], list)
    ):
        raise ValueError(
            f"recipe JSON {data!r} must be an object with one key 'rounds' (a list), "
            "and 'raw_twirl' (true or false) for a recipe whose raw pairs are twirled"
        )
    raw_twirl = data.get("raw_twirl", False)
    if not isinstance(raw_twirl, bool):
        raise ValueError(f"raw_twirl = {raw_twirl!r} must be true or false")
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
    return Recipe(tuple(rounds), raw_twirl=raw_twirl)
