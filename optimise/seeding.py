"""What a study starts from: the exhaustive front (cached in the run folder) and the baselines."""

from __future__ import annotations

import json
from pathlib import Path

from models.evaluate import evaluate
from models.notation import parse_recipe

from .exhaustive import ExhaustiveFront, describe_linear_space, exhaustive_front
from .files import write_json_atomic
from .runfolder import EXHAUSTIVE_FILE
from .space import recipe_params

# automatic depth: expand a depth only while it needs at most this many rounds
# evaluated, which keeps the exhaustive layer to seconds (see tests/benchmarks)
AUTO_MAX_EVALUATIONS = 3_000_000


def exhaustive_layer(
    profile, run_dir, settings: dict, depth: int, objectives, limits, on_depth=None
):
    """The exhaustive front of the run, computed once and kept in ``exhaustive.json``."""
    path = Path(run_dir) / EXHAUSTIVE_FILE
    requested = settings["exhaustive_depth"]
    if requested == 0:
        return ExhaustiveFront([], (), (), False, 0, "no exhaustive layer", "none", 0.0)
    if path.exists():
        data = json.loads(path.read_text(encoding="utf-8"))
        results = [evaluate(notation, profile) for notation in data["front"]]
        return ExhaustiveFront(
            results=results,
            states_per_depth=tuple(data["states_per_depth"]),
            evaluations_per_depth=tuple(data["evaluations_per_depth"]),
            complete=data["complete"],
            complete_depth=data["complete_depth"],
            space=data["space"],
            symmetry=data["symmetry"],
            seconds=data["seconds"],
        )
    goal = depth if requested is None else min(requested, depth)
    front = exhaustive_front(
        profile,
        max_depth=goal,
        objectives=objectives,
        limits=limits,
        n_jobs=-1,
        max_evaluations=AUTO_MAX_EVALUATIONS if requested is None else None,
        on_depth=on_depth,
    )
    write_json_atomic(
        path,
        {
            "complete_depth": front.complete_depth,
            "complete": front.complete,
            "states_per_depth": list(front.states_per_depth),
            "evaluations_per_depth": list(front.evaluations_per_depth),
            "symmetry": front.symmetry,
            "seconds": front.seconds,
            "space": describe_linear_space(front.complete_depth),
            "front": [r.notation for r in front.results],
        },
    )
    return front


def enqueue_known(study, notations, max_depth: int) -> int:
    """Enqueue recipes (skipping those already in the study); returns how many were new."""
    seen, count = set(), 0
    before = len(study.get_trials(deepcopy=False))
    for notation in notations:
        params = recipe_params(parse_recipe(notation), max_depth)
        if params is None:
            continue
        key = tuple(sorted(params.items()))
        if key in seen:
            continue
        seen.add(key)
        study.enqueue_trial(params, skip_if_exists=True)
        count += 1
    return len(study.get_trials(deepcopy=False)) - before if count else 0
