"""The objective: a trial's recipe evaluated exactly, returned in a fixed objective order.

Which objectives exist, and their directions, is :mod:`optimise.objectives`.
"""

from __future__ import annotations

import math

import optuna
from optuna.trial import TrialState

from models.evaluate import evaluate

from .limits import Limits
from .objectives import objective_values
from .processes import checkpoint, worker_identity
from .samplers import ERROR_ATTR, SettledPrefix
from .space import SELECTION_CHOICES, suggest_recipe

WORKER_ATTR = "worker"
REPEAT_ATTR = "repeat_of"


class Objective:
    """Callable for ``study.optimize``: suggest a recipe, evaluate it, store its figures.

    Each trial gets user attributes ``worker``, ``recipe_id`` and ``result``
    (``RecipeResult.to_dict()``, which holds the canonical notation and the rounds);
    with limits, one optuna constraint per limit (> 0: violated).

    A recipe is evaluated once per study: a trial that draws a recipe already
    COMPLETE in the study (by ``recipe_id``, whichever process ran it), or being
    evaluated by a trial of lower number, is told PRUNED with ``repeat_of`` naming
    that trial. It counts towards the budget (so a study of a small space ends) but
    never enters the front twice. The check is made when the recipe is drawn and,
    on a storage ``shared`` with other processes, again after its evaluation, for
    two processes that drew it at the same moment.
    """

    def __init__(
        self,
        profile,
        *,
        max_depth: int,
        objectives,
        limits: Limits,
        shared=False,
        selections=SELECTION_CHOICES,
    ):
        self.shared = shared
        self.selections = tuple(selections)
        self.profile = profile
        self.max_depth = max_depth
        self.objectives = tuple(objectives)
        self.limits = limits
        self.worker = worker_identity()
        self.taken = TakenRecipes()

    def _skip_repeat(self, trial, recipe) -> None:
        first = self.taken.first(trial.study, recipe.recipe_id, trial.number)
        if first is not None:
            trial.set_user_attr("recipe", recipe.notation)
            trial.set_user_attr(REPEAT_ATTR, first)
            raise optuna.TrialPruned(f"recipe {recipe.notation} is trial {first}'s")

    def __call__(self, trial):
        checkpoint("ask")
        trial.set_user_attr(WORKER_ATTR, self.worker)
        try:
            recipe = suggest_recipe(trial, self.max_depth, selections=self.selections)
        except Exception as error:
            trial.set_user_attr(ERROR_ATTR, f"{type(error).__name__}: {error}")
            raise
        # recorded before the evaluation, so that other processes see it is taken
        trial.set_user_attr("recipe_id", recipe.recipe_id)
        self._skip_repeat(trial, recipe)
        try:
            result = evaluate(recipe, self.profile)
        except Exception as error:
            trial.set_user_attr(ERROR_ATTR, f"{type(error).__name__}: {error}")
            raise
        record(trial, result, self.limits)
        if self.shared:  # again, last: another process may have drawn it in the same instant
            self._skip_repeat(trial, recipe)
        return objective_values(result, self.objectives)


class TakenRecipes:
    """Which trial has (or is evaluating, at a lower number) a recipe, found incrementally.

    The finished prefix of the trial list is indexed once (recipe id -> first
    complete trial, :class:`optimise.samplers.SettledPrefix`) and only the trials
    after it are looked at again, where a scan of every trial grew with the study.
    """

    def __init__(self):
        self.complete: dict[str, int] = {}
        self.prefix = SettledPrefix(self._settle)

    def _settle(self, trial) -> None:
        if trial.state == TrialState.COMPLETE:
            self.complete.setdefault(trial.user_attrs.get("recipe_id"), trial.number)

    def first(self, study, recipe_id: str, number: int) -> int | None:
        """The trial number holding ``recipe_id`` other than ``number``, or None."""
        rest = self.prefix.rest(study)
        found = self.complete.get(recipe_id)
        if found is not None and found != number:
            return found
        for other in rest:
            if other.number == number or other.user_attrs.get("recipe_id") != recipe_id:
                continue
            if other.state == TrialState.COMPLETE or (
                other.state == TrialState.RUNNING and other.number < number
            ):
                return other.number
        return None


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
    """Store a result on its trial: one write (``recipe_id`` is set when the recipe is drawn).

    Each attribute is a record in the storage, and those writes, not the physics,
    were most of a trial's cost; ``recipe`` and the depth are in ``result``.
    """
    trial.set_user_attr("result", result.to_dict())
    for key, value in trial_constraints(result, limits).items():
        trial.set_constraint(key, value if math.isfinite(value) else 1e300)
