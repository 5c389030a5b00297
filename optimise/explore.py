"""Trials around the front: extensions and one-step edits of the best recipes found so far.

A sampler draws each parameter on its own, so it rarely continues a pattern (a
recipe whose best form is one more of its own rounds) or changes a single round
of a good recipe while keeping the rest. Every :data:`EVERY` finished trials the
search therefore queues up to :data:`SHARE` recipes one edit away from the
current front, taken round-robin over the front (highest fidelity first) so
that every part of the front gets its turn:

1. extensions: the recipe with one more round, a copy of its last round, then of
   each of its other rounds (a pattern continued: ``sY.sX`` -> ``sY.sX^2``,
   ``sY.sX.sY``, ``sY.sX.pY``);
2. edits of one round: another built-in selection (2->1 <-> double selection;
   a general check round is not swapped for another), another source of the
   sacrificed pairs, the re-twirl switched, then one input's rotation changed.

Only recipes of the search space (``max_depth`` rounds at most) that no trial of
the study holds or waits for are queued; what is queued is decided by the front
and the study alone, so a single-worker run stays reproducible from its seed.
"""

from __future__ import annotations

from optuna.trial import TrialState

from models.kinds import N_INPUTS
from models.notation import parse_recipe
from models.rotations import ROTATION_NAMES

from .space import SELECTION_CHOICES, recipe_from_params, recipe_params, sacrificed_choices

# queue SHARE neighbours of the front after every EVERY finished trials: a quarter
# of the budget explores around the front, the rest is the sampler's
EVERY = 40
SHARE = 10
EXPLORED_ATTR = "explored_at"


def _round_of(params: dict, i: int) -> dict:
    prefix = f"r{i}."
    return {k[len(prefix) :]: v for k, v in params.items() if k.startswith(prefix)}


def _with_round(params: dict, i: int, fields: dict) -> dict:
    prefix = f"r{i}."
    out = {k: v for k, v in params.items() if not k.startswith(prefix)}
    out.update({prefix + k: v for k, v in fields.items()})
    return out


def _extensions(params: dict, max_depth: int) -> list[dict]:
    depth = params["depth"]
    if depth >= max_depth:
        return []
    out = []
    for i in [depth - 1, *range(depth - 1)]:
        fields = _round_of(params, i)
        # round 0 has no source (raw pairs and copies are the same there): both go on
        sources = [fields["sacrificed"]] if i else ["same", "raw"]
        for source in sources:
            out.append(
                _with_round({**params, "depth": depth + 1}, depth, {**fields, "sacrificed": source})
            )
    return out


def _edits(params: dict) -> list[dict]:
    out = []
    depth = params["depth"]
    for i in range(depth):
        fields = _round_of(params, i)
        for selection in SELECTION_CHOICES:  # the built-in kinds
            if selection != fields["selection"]:
                rots = [fields.get(f"rot{j}", fields["rot0"]) for j in range(N_INPUTS[selection])]
                changed = {k: v for k, v in fields.items() if not k.startswith("rot")}
                changed.update({f"rot{j}": r for j, r in enumerate(rots)})
                out.append(_with_round(params, i, {**changed, "selection": selection}))
        if i >= 1:
            for source in sacrificed_choices(i):
                if source != fields["sacrificed"]:
                    out.append(_with_round(params, i, {**fields, "sacrificed": source}))
        out.append(_with_round(params, i, {**fields, "twirl": not fields["twirl"]}))
    for i in range(depth):
        fields = _round_of(params, i)
        for j in range(N_INPUTS[fields["selection"]]):
            for name in ROTATION_NAMES:
                if name != fields[f"rot{j}"]:
                    out.append(_with_round(params, i, {**fields, f"rot{j}": name}))
    return out


def neighbours(notation: str, max_depth: int, selections=SELECTION_CHOICES) -> list[dict]:
    """Parameter sets one edit away from a recipe, in the order they are tried.

    Parameters
    ----------
    notation : str
        A recipe in our notation; one outside the search space has no neighbours.
    max_depth : int
        The search space's largest number of rounds.
    selections : tuple of str
        The step kinds of the search space (general check rounds included).

    Returns
    -------
    list of dict
        Trial parameters (as :func:`optimise.space.recipe_params` gives them):
        extensions first, then edits of one round.

    Examples
    --------
    >>> [p["depth"] for p in neighbours("sY", 3)][:1]
    [2]
    >>> neighbours("sY.sX.sX", 3)[0]["r0.selection"]
    'double'
    """
    params = recipe_params(parse_recipe(notation), max_depth, selections)
    if params is None:
        return []
    return _extensions(params, max_depth) + _edits(params)


def _taken_ids(study, max_depth: int, selections) -> set:
    """Recipe ids the study holds or has queued."""
    taken = set()
    for trial in study.get_trials(deepcopy=False):
        recipe_id = trial.user_attrs.get("recipe_id")
        if recipe_id is None and trial.state == TrialState.WAITING:
            try:
                fixed = trial.system_attrs.get("fixed_params", {})
                recipe_id = recipe_from_params(fixed, max_depth, selections).recipe_id
            except (KeyError, ValueError):
                continue
        taken.add(recipe_id)
    return taken


class FrontExplorer:
    """:func:`explore_front` for one search, called after every trial.

    The front is listed and the study asked only when ``finished`` has passed a
    new multiple of :data:`EVERY` (the first call always looks: a run resumed just
    after a due point), and never once the budget is spent.

    Parameters
    ----------
    max_depth : int
    budget : int
        The study's total trials: nothing is queued that no trial would run.
    selections : tuple of str
        The step kinds of the search space.
    """

    def __init__(self, max_depth: int, budget: int, selections=SELECTION_CHOICES):
        self.max_depth = max_depth
        self.selections = tuple(selections)
        self.budget = budget
        self.looked_at = None  # the last mark looked at

    def __call__(self, study, front_notations, finished: int) -> int:
        """``front_notations``: a callable giving the current front, highest fidelity first."""
        mark = (finished // EVERY) * EVERY
        if finished >= self.budget or mark == self.looked_at:
            return 0
        self.looked_at = mark
        return explore_front(study, front_notations(), self.max_depth, finished, self.selections)


def explore_front(
    study, front_notations, max_depth: int, finished: int, selections=SELECTION_CHOICES
) -> int:
    """Queue neighbours of the front when ``finished`` has passed a multiple of EVERY.

    Parameters
    ----------
    study : optuna.Study
    front_notations : sequence of str
        The current front, highest fidelity first.
    max_depth : int
    finished : int
        Finished trials of the study (the budget count).
    selections : tuple of str
        The step kinds of the search space.

    Returns
    -------
    int
        Recipes queued (0 between multiples of :data:`EVERY`, or when done already).
    """
    mark = (finished // EVERY) * EVERY
    if mark == 0 or study.user_attrs.get(EXPLORED_ATTR, 0) >= mark:
        return 0
    taken = _taken_ids(study, max_depth, selections)
    lists = [neighbours(n, max_depth, selections) for n in front_notations]
    queued = 0
    cursor = [0] * len(lists)
    while queued < SHARE and any(c < len(ls) for c, ls in zip(cursor, lists, strict=True)):
        for k, candidates in enumerate(lists):
            while cursor[k] < len(candidates):
                params = candidates[cursor[k]]
                cursor[k] += 1
                try:
                    recipe = recipe_from_params(params, max_depth, selections)
                except ValueError:
                    continue
                if recipe.recipe_id in taken:
                    continue
                taken.add(recipe.recipe_id)
                study.enqueue_trial(recipe_params(recipe, max_depth, selections) or params)
                queued += 1
                break
            if queued >= SHARE:
                break
    study.set_user_attr(EXPLORED_ATTR, mark)
    return queued
