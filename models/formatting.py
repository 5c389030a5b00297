"""Writing recipes as strings (the grammar is in :mod:`models.notation`).

Kept apart from the parser so that :class:`models.recipes.Recipe` can name its
own canonical string without a circular import: this module reads recipes but
never builds them, so it does not import :mod:`models.recipes`.
"""

from __future__ import annotations

from .kinds import STEP_KINDS
from .rotations import ROTATION_NAMES

# a leading RAW_TWIRL marks a recipe whose raw pairs are twirled to Werner form on arrival
RAW_TWIRL = "~"


def _format_round(r) -> str:
    step = STEP_KINDS[r.selection]
    kind = step.same_token if r.sacrificed == "same" else step.pump_token
    rot = r.rotations
    letters = (
        ROTATION_NAMES[rot[0]] if len(set(rot)) == 1 else "".join(ROTATION_NAMES[k] for k in rot)
    )
    source = f"({format_recipe(r.source)})" if r.sacrificed == "sub" else ""
    return kind + letters + source + ("~" if r.twirl else "")


def format_recipe(recipe) -> str:
    """The string of a recipe exactly as it is (no canonicalisation).

    ``parse_recipe(format_recipe(r)) == r`` for every recipe; for the canonical
    string use ``recipe.notation`` (or ``format_recipe(canonical(r))``).

    Examples
    --------
    >>> from models.recipes import Recipe, Round
    >>> format_recipe(Recipe((Round("single", "same", "Y"),) * 3))
    'sY^3'
    >>> format_recipe(Recipe((Round("single", "same", "Z", twirl=True),) * 2, raw_twirl=True))
    '~sZ~^2'
    """
    if isinstance(recipe, str):
        from .notation import parse_recipe  # the parser builds recipes; read only when needed

        recipe = parse_recipe(recipe)
    head = RAW_TWIRL if recipe.raw_twirl else ""
    if not recipe.rounds:
        return head + "raw"
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
    return head + ".".join(parts)
