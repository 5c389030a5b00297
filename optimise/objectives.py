"""The one table of objectives: what each figure of merit is called, where it lives, its unit.

Everything that lists objectives derives from :data:`OBJECTIVES`: the command
line's choices, the optuna directions, the values a front is merged on, the
report columns and the schema test. Adding an objective is one row here (plus
the figure itself in :class:`models.evaluate.RecipeResult`).

The rule, stated once: a search's objectives name ``fidelity`` and ``yield`` (the
trade-off searched), in any order, and may add the others; none twice.

Examples
--------
>>> check_objectives("fidelity,yield,memory")
('fidelity', 'yield', 'memory')
>>> directions(("fidelity", "time"))
Traceback (most recent call last):
...
ValueError: objectives = ('fidelity', 'time') must include 'fidelity' and 'yield' (the trade-off searched); 'memory' and 'time' may be added
"""

from __future__ import annotations

import math
from dataclasses import dataclass


@dataclass(frozen=True)
class ObjectiveInfo:
    """One objective.

    Attributes
    ----------
    name : str
        What users write (``--objectives fidelity,yield,memory``).
    maximise : bool
        True when larger is better.
    attribute : str
        The :class:`models.evaluate.RecipeResult` attribute holding it.
    json_key : str
        Its key in ``RecipeResult.to_dict()`` (front.json, recipes.json, --json).
    title : str
        Column title in tables.
    unit : str
        Unit, for plot axes and documentation ("" when dimensionless).
    grows_along_chain : bool
        True when it never decreases as rounds are added to a recipe, so a
        partial recipe over a limit on it can be dropped with its extensions.
    """

    name: str
    maximise: bool
    attribute: str
    json_key: str
    title: str
    unit: str
    grows_along_chain: bool

    @property
    def direction(self) -> str:
        """optuna's word for the direction."""
        return "maximize" if self.maximise else "minimize"


OBJECTIVES = {
    o.name: o
    for o in (
        ObjectiveInfo("fidelity", True, "fidelity", "fidelity", "fidelity F", "", False),
        ObjectiveInfo(
            "yield", True, "pair_yield", "yield", "yield", "output pairs per raw pair", False
        ),
        ObjectiveInfo(
            "memory", False, "memory_per_node", "memory_per_node", "memory / node", "qubits", True
        ),
        ObjectiveInfo(
            "time", False, "time_per_output_s", "time_per_output_s", "time / output", "s", True
        ),
    )
}
REQUIRED = ("fidelity", "yield")
DEFAULT = REQUIRED


def check_objectives(objectives) -> tuple[str, ...]:
    """Validate an objective list (a sequence or a comma-separated string); see the rule above.

    Raises
    ------
    ValueError
        Naming the bad entry and the allowed names.
    """
    if isinstance(objectives, str):
        objectives = [part.strip() for part in objectives.split(",") if part.strip()]
    objectives = tuple(objectives)
    unknown = [o for o in objectives if o not in OBJECTIVES]
    if unknown:
        raise ValueError(f"unknown objective {unknown[0]!r}; choose from {', '.join(OBJECTIVES)}")
    if len(set(objectives)) != len(objectives):
        raise ValueError(f"objectives = {objectives!r} names an objective twice")
    if any(r not in objectives for r in REQUIRED):
        optional = " and ".join(repr(o) for o in OBJECTIVES if o not in REQUIRED)
        raise ValueError(
            f"objectives = {objectives!r} must include "
            f"{' and '.join(repr(o) for o in REQUIRED)} (the trade-off searched); "
            f"{optional} may be added"
        )
    return objectives


def directions(objectives) -> list[str]:
    """optuna directions for an objective list."""
    return [OBJECTIVES[o].direction for o in check_objectives(objectives)]


def maximised(objectives) -> tuple[bool, ...]:
    """Which objectives of a list are maximised (for Pareto filtering)."""
    return tuple(OBJECTIVES[o].maximise for o in objectives)


def objective_values(result, objectives) -> tuple[float, ...]:
    """The figures of a :class:`models.evaluate.RecipeResult` in objective order."""
    return tuple(float(getattr(result, OBJECTIVES[o].attribute)) for o in objectives)


def values_from_dict(entry: dict, objectives) -> tuple[float, ...]:
    """The same from ``RecipeResult.to_dict()`` (``None`` costs and times are infinite)."""
    out = []
    for o in objectives:
        v = entry[OBJECTIVES[o].json_key]
        out.append(math.inf if v is None else float(v))
    return tuple(out)
