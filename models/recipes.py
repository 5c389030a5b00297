"""Purification recipes as values: a linear chain of rounds, trees through sources.

A :class:`Recipe` is the chain of rounds applied, one after another, to a kept
pair that starts as a raw pair. Each :class:`Round` is one purification step: it
says which circuit checks the kept pair (2->1 or double selection), where the
sacrificed pairs come from (fresh raw pairs, copies of the pair made so far, or a
sub-recipe, which makes the recipe a tree), the bilateral rotation applied to
each input and whether the output is re-twirled to Werner form.

A recipe may also twirl the raw pairs its chain uses to Werner form on arrival
(:attr:`Recipe.raw_twirl`, written with a leading ``~``), as BBPSSW does with
its input pairs.

The string form of recipes (``"sY^3"``, ``"pZ.pX"``) is read by
:mod:`models.notation` and written by :mod:`models.formatting`; a recipe's
:attr:`Recipe.notation` is its canonical string (rules in
:mod:`models.canonical_form`) and :attr:`Recipe.recipe_id` a hash of it, so that two
spellings of the same physical procedure share one identity. Neither module
imports this one at module level. :func:`making_order` and
:func:`memory_needed` live in :mod:`models.making` and are re-exported here.

References
----------
1. C. H. Bennett et al., Phys. Rev. Lett. 76, 722 (1996) (BBPSSW, the re-twirl).
2. D. Deutsch et al., Phys. Rev. Lett. 77, 2818 (1996) (DEJMPS).
3. W. Duer, H.-J. Briegel, J. I. Cirac and P. Zoller, Phys. Rev. A 59, 169 (1999)
   (entanglement pumping).
4. K. Fujii and K. Yamamoto, Phys. Rev. A 80, 042308 (2009) (double selection).
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass
from functools import cached_property
from numbers import Integral

from .canonical_form import canonical
from .formatting import format_recipe
from .kinds import N_INPUTS, SELECTIONS, step_kind
from .making import making_order, memory_needed
from .rotations import ROTATION_NAMES

__all__ = ["SACRIFICED", "Recipe", "Round", "making_order", "memory_needed"]

SACRIFICED = ("raw", "same", "sub")


def _rotation_tuple(rotations, n_inputs: int) -> tuple[int, ...]:
    """Normalise rotations (an int, a name, a string of names or a sequence) to ints."""
    if isinstance(rotations, str):
        items = list(rotations)
    elif isinstance(rotations, Integral):
        items = [rotations]
    else:
        try:
            items = list(rotations)
        except TypeError:
            raise ValueError(
                f"rotations = {rotations!r} must be rotation indices 0-5 or names "
                f"({', '.join(ROTATION_NAMES)}), one per input or one for all"
            ) from None
    if len(items) == 1:
        items = items * n_inputs
    if len(items) != n_inputs:
        raise ValueError(
            f"rotations = {rotations!r} has {len(items)} entries; this step has {n_inputs} "
            "inputs (kept pair first), so give 1 (the same for all) or one per input"
        )
    out = []
    for item in items:
        if isinstance(item, str) and item in ROTATION_NAMES:
            out.append(ROTATION_NAMES.index(item))
        elif isinstance(item, Integral) and not isinstance(item, bool) and 0 <= item < 6:
            out.append(int(item))
        else:
            raise ValueError(
                f"rotations entry {item!r} is not a rotation: use an index in [0, 5] or a "
                f"name in {', '.join(ROTATION_NAMES)} (models.rotations.ROTATION_NAMES)"
            )
    return tuple(out)


@dataclass(frozen=True)
class Round:
    """One purification step applied to the pair made so far.

    Attributes
    ----------
    selection : {"single", "double"}
        ``"single"``: the 2->1 step (one sacrificed pair, Z-basis parity check);
        ``"double"``: double selection (two sacrificed pairs, Fujii and Yamamoto 2009).
    sacrificed : {"raw", "same", "sub"}
        Where the sacrificed pairs come from: fresh raw pairs (pumping), copies of
        the pair made by all previous rounds, each made independently
        (symmetric recurrence), or pairs made by the sub-recipe ``source``.
    rotations : tuple of int
        Bilateral rotation (index into :data:`models.rotations.ROTATION_NAMES`)
        applied to each input before the CNOTs, kept input first: 2 entries for
        ``"single"``, 3 for ``"double"``. A single int or name, or a string of
        names such as ``"YZ"``, is accepted and normalised.
    source : Recipe or None
        The sub-recipe that makes the sacrificed pairs; required exactly when
        ``sacrificed == "sub"``.
    twirl : bool
        Re-twirl the kept output to Werner form (as in BBPSSW).

    Examples
    --------
    >>> Round("single", "same", "Y")
    Round(selection='single', sacrificed='same', rotations=(2, 2), source=None, twirl=False)
    >>> Round("single", "raw", (0, 7))  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    ValueError: rotations entry 7 is not a rotation: use an index in [0, 5] or a name ...
    """

    selection: str
    sacrificed: str
    rotations: tuple[int, ...] = (0, 0)
    source: Recipe | None = None
    twirl: bool = False

    def __post_init__(self):
        if self.selection not in SELECTIONS:
            step_kind(self.selection)  # a general round registers here; ValueError if unknown
        if self.sacrificed not in SACRIFICED:
            raise ValueError(
                f"sacrificed = {self.sacrificed!r} is not one of "
                f"{', '.join(map(repr, SACRIFICED))} (fresh raw pairs, copies of the pair so "
                "far, or pairs made by `source`)"
            )
        object.__setattr__(
            self, "rotations", _rotation_tuple(self.rotations, N_INPUTS[self.selection])
        )
        if self.sacrificed == "sub":
            if not isinstance(self.source, Recipe):
                raise ValueError(
                    f"source = {self.source!r} must be a Recipe when sacrificed = 'sub' "
                    "(the sub-recipe that makes the sacrificed pairs)"
                )
        elif self.source is not None:
            raise ValueError(
                f"source = {self.source!r} is given but sacrificed = {self.sacrificed!r}; "
                "a source needs sacrificed = 'sub'"
            )
        if not isinstance(self.twirl, bool):
            raise ValueError(f"twirl = {self.twirl!r} must be True or False")

    @property
    def n_inputs(self) -> int:
        """Number of input pairs of the step, kept pair included (2 or 3)."""
        return N_INPUTS[self.selection]


@dataclass(frozen=True)
class Recipe:
    """A chain of rounds applied to a raw pair; the empty chain is the raw pair.

    Attributes
    ----------
    rounds : tuple of Round
        The main chain, first round first. Trees arise through ``Round.source``.
    raw_twirl : bool
        Twirl each raw pair the main chain uses (the one it starts from, the
        fresh pairs of pumping rounds and so those of the copies of symmetric
        rounds) to Werner form on arrival, with the single-qubit noise of one
        rotation (:func:`models.evaluate.twirl`). A source is a recipe of its
        own with its own ``raw_twirl``.

    Examples
    --------
    >>> from models.notation import parse_recipe
    >>> r = parse_recipe("sY^3")
    >>> r.depth, r.is_linear, r.notation
    (3, True, 'sY^3')
    >>> parse_recipe("pY.sY").notation  # in the first round s and p are the same
    'sY^2'
    >>> len(r.recipe_id)
    12
    """

    rounds: tuple[Round, ...] = ()
    raw_twirl: bool = False

    def __post_init__(self):
        if not isinstance(self.raw_twirl, bool):
            raise ValueError(f"raw_twirl = {self.raw_twirl!r} must be True or False")
        try:
            rounds = tuple(self.rounds)
        except TypeError:
            raise ValueError(f"rounds = {self.rounds!r} must be a sequence of Round") from None
        for i, r in enumerate(rounds):
            if not isinstance(r, Round):
                raise ValueError(f"rounds[{i}] = {r!r} is not a Round")
        object.__setattr__(self, "rounds", rounds)

    @property
    def depth(self) -> int:
        """Number of rounds in the main chain (0 for the raw pair)."""
        return len(self.rounds)

    @property
    def is_linear(self) -> bool:
        """True when no round takes its sacrificed pairs from a sub-recipe and raw
        pairs are used as they arrive: the recipes that have round codes
        (:func:`models.chain.linear_codes`)."""
        return not self.raw_twirl and all(r.source is None for r in self.rounds)

    @cached_property
    def memory_per_node(self) -> int:
        """Qubits each node stores at once (1 for the raw pair); see :func:`memory_needed`."""
        memory = 1
        for r in self.rounds:
            sacrificed = {"raw": 1, "same": memory}.get(r.sacrificed)
            if sacrificed is None:
                sacrificed = r.source.memory_per_node
            memory = memory_needed([memory] + [sacrificed] * (r.n_inputs - 1))
        return memory

    @cached_property
    def notation(self) -> str:
        """Canonical string of the recipe (see :mod:`models.canonical_form`)."""
        return format_recipe(canonical(self))

    @cached_property
    def recipe_id(self) -> str:
        """First 12 hex digits of the SHA-256 of the canonical string."""
        return hashlib.sha256(self.notation.encode("utf-8")).hexdigest()[:12]
