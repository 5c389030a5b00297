"""Published purification schemes as recipes, to compare searched recipes against.

Each baseline is defined by the physical check each round makes: the error,
named by its label in the frame of the original raw pairs (``Z``: a phase flip,
Phi-; ``X``: a bit flip, Psi+; ``Y``: both, Psi-), that the round's parity check
on an input leaves undetected (it detects the other two). The builder
(:func:`checked_rounds`) then chooses each round's rotation letters relative to
the frame the kept pair is in by then: the kept pair carries the rotations of
all earlier rounds (they are not undone), fresh raw pairs arrive in the
original frame, and copies of the pair so far are in the kept pair's frame. So
a round meant to check phase flips rejects a phase flip of the original frame
on the kept pair whatever rounds came before (``tests/models/test_baselines.py``
checks this on the step itself). Of the two letters that make a check, the
builder takes no gate (``Z``) when it will do, otherwise the one that leaves the
kept pair's frame a capital letter (a choice of ours; the other differs by an
exchange of the X and Y labels only).

Each baseline's ``source`` says which parts of its definition are from the paper
and which are from memory (recalled and not checked against the paper).

References
----------
1. C. H. Bennett, G. Brassard, S. Popescu, B. Schumacher, J. A. Smolin and
   W. K. Wootters, Phys. Rev. Lett. 76, 722 (1996) (BBPSSW).
2. D. Deutsch, A. Ekert, R. Jozsa, C. Macchiavello, S. Popescu and A. Sanpera,
   Phys. Rev. Lett. 77, 2818 (1996) (DEJMPS).
3. W. Duer, H.-J. Briegel, J. I. Cirac and P. Zoller, Phys. Rev. A 59, 169 (1999)
   (entanglement pumping).
4. W. Duer and H.-J. Briegel, Rep. Prog. Phys. 70, 1381 (2007) (review; pumping
   with alternating bit- and phase-flip checks).
5. K. Fujii and K. Yamamoto, Phys. Rev. A 80, 042308 (2009) (double selection).
"""

from __future__ import annotations

import difflib
from collections.abc import Callable
from dataclasses import dataclass
from numbers import Integral

from .kinds import STEP_KINDS
from .recipes import Recipe, Round
from .rotations import COMPOSE, IDENTITY, PERMUTATIONS, ROTATION_NAMES, undetected_label
from .states import X, Y, Z

# error labels by the letter that names them (X = 1, Y = 2, Z = 3)
LABELS = {"X": X, "Y": Y, "Z": Z}
_CAPITALS = tuple(ROTATION_NAMES.index(name) for name in ("Z", "Y", "X"))


def rotation_missing(label: int, frame: int) -> int:
    """The rotation whose check misses ``label`` (original frame) on a pair in ``frame``.

    A pair in ``frame`` carries rotation ``frame`` relative to the original raw
    pairs, so the original label ``label`` reads ``PERMUTATIONS[frame, label]``
    on it. Of the two rotations that move that label onto Z (which the Z-basis
    check misses), no gate is taken when it is one of them, else the one after
    which the pair's frame is a capital letter.

    Examples
    --------
    >>> ROTATION_NAMES[rotation_missing(Z, IDENTITY)], ROTATION_NAMES[rotation_missing(X, IDENTITY)]
    ('Z', 'X')
    >>> ROTATION_NAMES[rotation_missing(Z, ROTATION_NAMES.index("X"))]  # undo the X <-> Z exchange
    'X'
    """
    current = int(PERMUTATIONS[frame, label])
    candidates = [r for r in range(6) if undetected_label(r) == current]
    if IDENTITY in candidates:
        return IDENTITY
    return next(r for r in candidates if COMPOSE[frame, r] in _CAPITALS)


def checked_rounds(
    token: str, kept_checks: str, fresh_checks: str | None = None, *, twirl: bool = False
) -> Callable[..., tuple[Round, ...]]:
    """A builder ``depth -> rounds`` from the checks each round makes.

    Parameters
    ----------
    token : str
        Notation token of the rounds (``"p"``, ``"s"``, ``"dp"``, ``"ds"``).
    kept_checks : str
        Letters (``X``, ``Y``, ``Z``) of the original-frame errors the kept
        pair's check misses, round by round, repeated cyclically.
    fresh_checks : str or None
        The same for fresh raw pairs of pumping rounds (``None``: as the kept
        pair). Copies of the pair so far are always checked as the kept pair.
    twirl : bool
        Re-twirl every round's output.
    """
    ((selection, kind),) = [
        (name, "raw" if token == k.pump_token else "same")
        for name, k in STEP_KINDS.items()
        if token in (k.pump_token, k.same_token)
    ]
    n_sacrificed = STEP_KINDS[selection].n_inputs - 1
    fresh_checks = kept_checks if fresh_checks is None else fresh_checks

    def build(depth: int) -> tuple[Round, ...]:
        frame = IDENTITY
        rounds = []
        for i in range(depth):
            kept = rotation_missing(LABELS[kept_checks[i % len(kept_checks)]], frame)
            if kind == "raw":
                fresh = LABELS[fresh_checks[i % len(fresh_checks)]]
                sacrificed = rotation_missing(fresh, IDENTITY)
            else:
                sacrificed = kept  # a copy is in the kept pair's frame
            rotations = (kept,) + (sacrificed,) * n_sacrificed
            rounds.append(Round(selection, kind, rotations, twirl=twirl))
            frame = int(COMPOSE[frame, kept])
        return tuple(rounds)

    return build


def original_frame_checks(recipe) -> tuple[tuple[int, ...], ...]:
    """The original-frame error label each input's rotation moves onto Z, round by round.

    For the kept input (and for the sacrificed pair of a 2->1 step) this is the
    error its parity check misses. One tuple per round of the main chain, kept
    input first, then the sacrificed inputs; labels X = 1, Y = 2, Z = 3. Rounds
    whose sacrificed pairs come from a source are refused (their frame is the
    source's own).

    Examples
    --------
    >>> original_frame_checks(baseline("dejmps", 3))  # Y, then Z, then Y
    ((2, 2), (3, 3), (2, 2))
    """
    frame = IDENTITY
    out = []
    for i, r in enumerate(recipe.rounds):
        if r.sacrificed == "sub":
            raise ValueError(f"round {i} takes its sacrificed pairs from a source")
        # a fresh raw pair is in the original frame, a copy in the kept pair's
        sacrificed_frame = IDENTITY if r.sacrificed == "raw" else frame
        frames = (frame,) + (sacrificed_frame,) * (r.n_inputs - 1)
        pairs = zip(frames, r.rotations, strict=True)
        out.append(tuple(undetected_label(int(COMPOSE[f, k])) for f, k in pairs))
        frame = int(COMPOSE[frame, r.rotations[0]])
    return tuple(out)


@dataclass(frozen=True)
class Baseline:
    """A named published scheme.

    Attributes
    ----------
    name : str
        Short name used on the command line.
    title : str
        One line saying what the scheme does.
    source : str
        Citation (authors, journal, volume, page, year), saying which parts of the
        definition are from the paper and which from memory.
    build : callable int -> Recipe
        The recipe with the given number of rounds (>= 1).
    """

    name: str
    title: str
    source: str
    build: Callable[[int], Recipe]

    def __post_init__(self):
        for field_name in ("name", "title", "source"):
            value = getattr(self, field_name)
            if not (isinstance(value, str) and value):
                raise ValueError(f"{field_name} = {value!r} must be a non-empty string")
        if not callable(self.build):
            raise ValueError(f"build = {self.build!r} must be a function depth -> Recipe")


def _recipe(rounds: Callable[..., tuple[Round, ...]], *, raw_twirl: bool = False):
    def build(depth: int) -> Recipe:
        return Recipe(rounds(depth), raw_twirl=raw_twirl)

    return build


BASELINES: dict[str, Baseline] = {
    b.name: b
    for b in (
        Baseline(
            "bbpssw",
            "raw pairs twirled to Werner form, symmetric recurrence, plain Z-basis check, "
            "output re-twirled: ~sZ~^d",
            "Bennett, Brassard, Popescu, Schumacher, Smolin and Wootters, "
            "Phys. Rev. Lett. 76, 722 (1996): twirling the input pairs, the bilateral XOR of "
            "two copies, the Z-basis comparison and the re-twirl of the output are from the "
            "paper (its worked values are reproduced); that the twirl costs the noise of one "
            "rotation is our model",
            _recipe(checked_rounds("s", "Z", twirl=True), raw_twirl=True),
        ),
        Baseline(
            "dejmps",
            "symmetric recurrence with the Y <-> Z rotation before each check, not undone: "
            "checks miss Y, Z, Y, ... of the original frame: sY^d",
            "Deutsch, Ekert, Jozsa, Macchiavello, Popescu and Sanpera, "
            "Phys. Rev. Lett. 77, 2818 (1996): the rotation on both pairs before every round, "
            "never undone, and no twirl are from the paper (its iterated map is reproduced)",
            _recipe(checked_rounds("s", "YZ")),
        ),
        Baseline(
            "pumping",
            "entanglement pumping with fresh raw pairs and the DEJMPS step: the kept pair's "
            "check misses Y, Z, Y, ..., a fresh pair's misses Y: pY^d",
            "Duer, Briegel, Cirac and Zoller, Phys. Rev. A 59, 169 (1999): pumping one pair "
            "with fresh elementary pairs is from the paper; that each round applies the "
            "DEJMPS rotation to both pairs without undoing it is from memory",
            _recipe(checked_rounds("p", "YZ", "Y")),
        ),
        Baseline(
            "alternating-pumping",
            "pumping with fresh raw pairs, checks alternating between bit flips (missing Z) "
            "and phase flips (missing X) of the original frame: pZ.pX.pXZ.pX...",
            "alternating bit- and phase-flip checks as reviewed by Duer and Briegel, "
            "Rep. Prog. Phys. 70, 1381 (2007), from memory; that each round checks the "
            "fresh pair for the same error as the kept pair is from memory",
            _recipe(checked_rounds("p", "ZX")),
        ),
        Baseline(
            "double-selection-pumping",
            "double-selection pumping with fresh raw pairs, checks alternating between "
            "missing Z and missing X of the original frame: dpZ.dpX.dpXZZ.dpX...",
            "Fujii and Yamamoto, Phys. Rev. A 80, 042308 (2009): double selection with fresh "
            "pairs is from the paper's abstract; the alternation of the checks, and the same "
            "check on the fresh pairs as on the kept pair, are from memory",
            _recipe(checked_rounds("dp", "ZX")),
        ),
    )
}


def baseline(name: str, depth: int) -> Recipe:
    """The recipe of a named baseline with ``depth`` rounds.

    Raises
    ------
    ValueError
        For an unknown name (with the closest known names) or a depth that is
        not an integer >= 1.

    Examples
    --------
    >>> baseline("dejmps", 3).notation
    'sY^3'
    >>> baseline("alternating-pumping", 4).notation
    'pZ.pX.pXZ.pX'
    >>> baseline("bbpssw", 2).notation
    '~sZ~^2'
    >>> try:
    ...     baseline("dejmp", 2)
    ... except ValueError as err:
    ...     print(str(err).split(";")[1].split("?")[0])
     did you mean 'dejmps'
    """
    if name not in BASELINES:
        close = difflib.get_close_matches(str(name), list(BASELINES), n=2)
        hint = f"; did you mean {' or '.join(map(repr, close))}?" if close else "."
        raise ValueError(f"unknown baseline {name!r}{hint} Known: {', '.join(BASELINES)}")
    from .notation import MAX_ROUNDS

    if isinstance(depth, bool) or not isinstance(depth, Integral) or not 1 <= depth <= MAX_ROUNDS:
        shown = repr(depth) if len(repr(depth)) <= 40 else repr(depth)[:40] + "..."
        raise ValueError(
            f"depth = {shown} must be an integer in [1, {MAX_ROUNDS}] (the number of rounds)"
        )
    return BASELINES[name].build(int(depth))
