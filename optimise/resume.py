"""Resuming a study: trials left running by a dead process, and their recipes asked again.

A trial stays RUNNING in the storage when its process is killed. On resume:

1. :func:`fail_stale_trials` marks FAIL each RUNNING trial whose worker is known to
   be gone: a process of this host that no longer exists (or whose pid now belongs
   to a younger process), or, for RDB storages, a trial whose heartbeat stopped
   (optuna's own check). A trial of a live worker, here or on another machine, is
   left alone. A trial killed in the instant between being asked and recording its
   worker carries no worker; every process registers itself on the study
   (:func:`register_worker`) before it asks a trial, so such a trial is stale as
   soon as no other registered process of this host is alive and none is
   registered from another host (with another host registered, after
   :data:`ORPHAN_GRACE`).
2. :func:`reask_abandoned` evaluates again the recipe of every such trial (a FAIL
   without the objective's ``error`` attribute, which is how optuna also records a
   Ctrl-C) and adds it as a finished trial with the same parameters, distributions
   and sampler bookkeeping, marked ``reask_of``. So no finished trial is lost and
   none is repeated, and the sampler (:mod:`optimise.samplers`) sees the same
   history as an uninterrupted run. A trial killed before its recipe was fully
   drawn cannot be rebuilt; the seeded sampler draws the same recipe again.
"""

from __future__ import annotations

import socket
import warnings
from datetime import datetime, timedelta

import optuna
from optuna.trial import TrialState, create_trial

from models.evaluate import evaluate
from models.kinds import N_INPUTS

from .objective import REPEAT_ATTR, WORKER_ATTR, trial_attrs, trial_constraints
from .objectives import objective_values
from .processes import is_running
from .samplers import ERROR_ATTR
from .space import SELECTION_CHOICES, distributions_for, recipe_from_params

REASK_ATTR = "reask_of"
REGISTERED_PREFIX = "process "  # study user attributes naming the processes that worked on it
ORPHAN_GRACE = timedelta(minutes=5)  # a RUNNING trial with no worker yet, for this long: dead


def register_worker(study, identity: dict) -> None:
    """Record on the study that this process (a :func:`worker_identity`) may ask trials."""
    key = f"{REGISTERED_PREFIX}{identity['host']} {identity['pid']} {identity['start']}"
    study.set_user_attr(key, identity)


def registered_workers(study, *, besides: dict | None = None) -> list[dict]:
    """The processes registered on the study, except ``besides`` (this one)."""
    found = [v for k, v in study.user_attrs.items() if k.startswith(REGISTERED_PREFIX)]
    return [w for w in found if besides is None or w != besides]


def is_stale(
    trial, host: str | None = None, now: datetime | None = None, workers: list | None = None
) -> bool:
    """Whether a RUNNING trial's worker is known to be gone (see the module docstring).

    ``workers`` are the other processes registered on the study; None: unknown.
    """
    host = host or socket.gethostname()
    owner = trial.user_attrs.get(WORKER_ATTR)
    if owner is None:
        here = [w for w in workers or () if w.get("host") == host]
        if workers is not None and not any(is_running(w) for w in here):
            if len(here) == len(workers):  # no process elsewhere could have asked it
                return True
        # none for minutes means it died
        start = trial.datetime_start
        return start is not None and (now or datetime.now()) - start > ORPHAN_GRACE
    if owner.get("host") != host:
        return False
    return not is_running(owner)


def fail_stale_trials(study, me: dict | None = None) -> list[int]:
    """Mark FAIL the RUNNING trials of dead workers; returns their numbers.

    ``me`` is this process's :func:`worker_identity` when it has registered itself
    (before asking any trial): then trials that no worker recorded are judged by
    the other registered processes.
    """
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # fail_stale_trials is flagged experimental
        optuna.storages.fail_stale_trials(study)  # RDB heartbeats; no-op elsewhere
    workers = None if me is None else registered_workers(study, besides=me)
    failed = []
    for trial in study.get_trials(deepcopy=False, states=(TrialState.RUNNING,)):
        if is_stale(trial, workers=workers):
            try:
                study.tell(trial.number, state=TrialState.FAIL, skip_if_finished=True)
            except (ValueError, RuntimeError):
                continue  # finished meanwhile by its worker: not stale after all
            failed.append(trial.number)
    return failed


def abandoned_trials(study) -> list:
    """FAIL trials without an objective error and not yet asked again, in number order."""
    trials = study.get_trials(deepcopy=False)
    asked_again = {t.user_attrs.get(REASK_ATTR) for t in trials}
    return [
        t
        for t in trials
        if t.state == TrialState.FAIL
        and ERROR_ATTR not in t.user_attrs
        and t.number not in asked_again
    ]


def reask_abandoned(
    study, profile, *, max_depth, objectives, limits, worker: dict, selections=SELECTION_CHOICES
) -> list[int]:
    """Evaluate the abandoned trials' recipes again and add them as finished trials.

    ``selections``: the step kinds of the study's space (:mod:`optimise.space`).

    Returns the numbers of the trials asked again.
    """
    done = []
    complete = {
        t.user_attrs.get("recipe_id"): t.number
        for t in study.get_trials(deepcopy=False, states=(TrialState.COMPLETE,))
    }
    for trial in abandoned_trials(study):
        params = dict(trial.system_attrs.get("fixed_params", {}))
        params.update(trial.params)
        try:
            recipe = recipe_from_params(params, max_depth, selections)
        except (KeyError, ValueError):
            continue  # cut short before its recipe was drawn: the sampler draws it again
        used = _used_params(params, recipe.depth)
        attrs = {k: v for k, v in trial.user_attrs.items() if k != ERROR_ATTR}
        first = complete.get(recipe.recipe_id)
        if first is not None:  # evaluated meanwhile by another trial: a repeat, as the objective
            attrs.update({REASK_ATTR: trial.number, REPEAT_ATTR: first, WORKER_ATTR: worker})
            study.add_trial(
                create_trial(
                    state=TrialState.PRUNED,
                    params=used,
                    distributions=distributions_for(used, max_depth, selections=selections),
                    user_attrs=attrs,
                )
            )
            done.append(trial.number)
            continue
        result = evaluate(recipe, profile)
        attrs.update(trial_attrs(result))
        attrs.update({REASK_ATTR: trial.number, WORKER_ATTR: worker})
        constraints = trial_constraints(result, limits)
        study.add_trial(
            create_trial(
                state=TrialState.COMPLETE,
                values=objective_values(result, objectives),
                params=used,
                distributions=distributions_for(used, max_depth, selections=selections),
                user_attrs=attrs,
                system_attrs={
                    k: v for k, v in trial.system_attrs.items() if not k.startswith("constraints")
                },
                constraints={k: min(v, 1e300) for k, v in constraints.items()} or None,
            )
        )
        complete[recipe.recipe_id] = study.get_trials(deepcopy=False)[-1].number
        done.append(trial.number)
    return done


def _unused_rotation(key: str, selection) -> bool:
    """Whether ``key`` is a rotation of an input that a round of ``selection`` does not have."""
    if ".rot" not in key:
        return False
    return int(key[key.index(".rot") + 4 :]) >= N_INPUTS.get(selection, 0)


def _used_params(params: dict, depth: int) -> dict:
    """The parameters a trial of this depth suggests (an enqueued set may hold more)."""
    out = {}
    for k, v in params.items():
        if k != "depth":
            i = int(k[1 : k.index(".")])
            if i >= depth or _unused_rotation(k, params.get(f"r{i}.selection")):
                continue
        out[k] = v
    return out
