"""The objective: a trial's recipe evaluated exactly, returned in a fixed objective order."""

from __future__ import annotations

import math
import os
import socket

from models.evaluate import evaluate

from .limits import Limits
from .samplers import ERROR_ATTR
from .space import suggest_recipe

# name -> (RecipeResult attribute, maximise?)
OBJECTIVES = {
    "fidelity": ("fidelity", True),
    "yield": ("pair_yield", True),
    "memory": ("memory_per_node", False),
    "time": ("time_per_output_s", False),
}
WORKER_ATTR = "worker"


def check_objectives(objectives) -> tuple[str, ...]:
    """Validate an objective list: fidelity and yield, optionally memory and time."""
    objectives = tuple(objectives)
    unknown = [o for o in objectives if o not in OBJECTIVES]
    if unknown:
        raise ValueError(f"objectives: {unknown[0]!r} is not one of {', '.join(OBJECTIVES)}")
    if len(set(objectives)) != len(objectives):
        raise ValueError(f"objectives = {objectives!r} names an objective twice")
    if "fidelity" not in objectives or "yield" not in objectives:
        raise ValueError(
            f"objectives = {objectives!r} must include 'fidelity' and 'yield' (the trade-off "
            "searched); 'memory' and 'time' may be added"
        )
    return objectives


def directions(objectives) -> list[str]:
    """optuna directions for an objective list."""
    return ["maximize" if OBJECTIVES[o][1] else "minimize" for o in objectives]


def objective_values(result, objectives) -> tuple[float, ...]:
    """The figures of a :class:`models.evaluate.RecipeResult` in objective order."""
    return tuple(float(getattr(result, OBJECTIVES[o][0])) for o in objectives)


def values_from_dict(entry: dict, objectives) -> tuple[float, ...]:
    """The same from ``RecipeResult.to_dict()`` (``None`` costs and times are infinite)."""
    keys = {
        "fidelity": "fidelity",
        "yield": "yield",
        "memory": "memory_per_node",
        "time": "time_per_output_s",
    }
    out = []
    for o in objectives:
        v = entry[keys[o]]
        out.append(math.inf if v is None else float(v))
    return tuple(out)


def worker_identity() -> dict:
    """Host and process of this worker, so a resume can tell a dead worker's trials."""
    return {"host": socket.gethostname(), "pid": os.getpid(), "start": process_start(os.getpid())}


def process_start(pid: int):
    """Start time of a process in clock ticks since boot (Linux), or None elsewhere."""
    try:
        with open(f"/proc/{pid}/stat", encoding="ascii") as handle:
            fields = handle.read().rsplit(")", 1)[1].split()
        return int(fields[19])
    except (OSError, IndexError, ValueError):
        return None


class Objective:
    """Callable for ``study.optimize``: suggest a recipe, evaluate it, store its figures.

    Each trial gets user attributes ``recipe`` (canonical notation), ``recipe_id``,
    ``result`` (``RecipeResult.to_dict()``) and ``worker``; with limits, one optuna
    constraint per limit (> 0: violated).
    """

    def __init__(self, profile, *, max_depth: int, objectives, limits: Limits):
        self.profile = profile
        self.max_depth = max_depth
        self.objectives = tuple(objectives)
        self.limits = limits
        self.worker = worker_identity()

    def __call__(self, trial):
        trial.set_user_attr(WORKER_ATTR, self.worker)
        try:
            recipe = suggest_recipe(trial, self.max_depth)
            result = evaluate(recipe, self.profile)
        except Exception as error:
            trial.set_user_attr(ERROR_ATTR, f"{type(error).__name__}: {error}")
            raise
        record(trial, result, self.limits)
        return objective_values(result, self.objectives)


def trial_attrs(result) -> dict:
    """User attributes recording a recipe's figures on its trial."""
    return {"recipe": result.notation, "recipe_id": result.recipe_id, "result": result.to_dict()}


def trial_constraints(result, limits: Limits) -> dict:
    """optuna constraints of a result under limits (empty without limits)."""
    return limits.violations(
        memory_per_node=result.memory_per_node,
        time_per_output_s=result.time_per_output_s,
        depth=len(result.trace),
    )


def record(trial, result, limits: Limits) -> None:
    trial.set_user_attr("depth", len(result.trace))
    for key, value in trial_attrs(result).items():
        trial.set_user_attr(key, value)
    for key, value in trial_constraints(result, limits).items():
        trial.set_constraint(key, value if math.isfinite(value) else 1e300)
