"""Published purification schemes as recipes, to compare searched recipes against.

Each baseline builds a recipe of a given depth (number of rounds). The recipe
strings are in our notation (:mod:`models.notation`); the source of each scheme
stands beside it, marked "from memory" where the detail was recalled and not
checked against the paper.

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

from .notation import parse_recipe
from .recipes import Recipe


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
        Citation (authors, journal, volume, page, year), "from memory" where recalled.
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


def _alternating(kind: str, letters: str) -> Callable[[int], Recipe]:
    def build(depth: int) -> Recipe:
        return parse_recipe(".".join(kind + letters[i % len(letters)] for i in range(depth)))

    return build


def _repeated(text: str) -> Callable[[int], Recipe]:
    def build(depth: int) -> Recipe:
        return parse_recipe(text if depth == 1 else f"{text}^{depth}")

    return build


BASELINES: dict[str, Baseline] = {
    b.name: b
    for b in (
        Baseline(
            "bbpssw",
            "symmetric recurrence, plain Z-basis check, output re-twirled: sZ~^d",
            "Bennett, Brassard, Popescu, Schumacher, Smolin and Wootters, "
            "Phys. Rev. Lett. 76, 722 (1996)",
            _repeated("sZ~"),
        ),
        Baseline(
            "dejmps",
            "symmetric recurrence with the Y <-> Z rotation before each check: sY^d",
            "Deutsch, Ekert, Jozsa, Macchiavello, Popescu and Sanpera, "
            "Phys. Rev. Lett. 77, 2818 (1996)",
            _repeated("sY"),
        ),
        Baseline(
            "pumping",
            "entanglement pumping with fresh raw pairs and the DEJMPS step: pY^d",
            "Duer, Briegel, Cirac and Zoller, Phys. Rev. A 59, 169 (1999); that they "
            "pumped with the DEJMPS rotation is from memory",
            _repeated("pY"),
        ),
        Baseline(
            "alternating-pumping",
            "pumping with fresh raw pairs, alternating bit-flip (Z) and phase-flip (X) "
            "checks: pZ.pX.pZ...",
            "alternating checks as reviewed by Duer and Briegel, Rep. Prog. Phys. 70, 1381 "
            "(2007), from memory",
            _alternating("p", "ZX"),
        ),
        Baseline(
            "double-selection-pumping",
            "double-selection pumping with fresh raw pairs, alternating Z and X checks: "
            "dpZ.dpX.dpZ...",
            "Fujii and Yamamoto, Phys. Rev. A 80, 042308 (2009), from memory",
            _alternating("dp", "ZX"),
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
    >>> baseline("alternating-pumping", 3).notation
    'pZ.pX.pZ'
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
    if isinstance(depth, bool) or not isinstance(depth, Integral) or depth < 1:
        raise ValueError(f"depth = {depth!r} must be an integer >= 1 (the number of rounds)")
    return BASELINES[name].build(int(depth))
