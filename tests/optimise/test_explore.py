"""Trials around the front (optimise/explore.py): what is queued, once, and only new recipes."""

import optuna

from models.notation import parse_recipe
from optimise.explore import EVERY, SHARE, explore_front, neighbours
from optimise.space import recipe_from_params, recipe_params


def notations(params_list, max_depth):
    return [recipe_from_params(p, max_depth).notation for p in params_list]


def test_extensions_continue_the_pattern_and_edits_change_one_round():
    found = notations(neighbours("sY.sX", 4), 4)
    assert found[:3] == ["sY.sX^2", "sY.sX.sY", "sY.sX.pY"]  # repeat the last round first
    assert "dsY.sX" in found and "sY.dsX" in found  # the other selection
    assert "pY.pX" in found  # the other source of the sacrificed pairs (sY.pX, canonical)
    assert "sY.sX~" in found and "sY~.sY" in found  # a re-twirl switched on
    base = recipe_params(parse_recipe("sY.sX"), 4)
    for params in neighbours("sY.sX", 4):
        if params["depth"] == 2:  # an edit: one round differs, the other is untouched
            differ = {k[:2] for k in set(params) | set(base) if params.get(k) != base.get(k)}
            assert len(differ) == 1, params


def test_no_extension_beyond_the_depth_cap_and_none_outside_the_space():
    assert all(p["depth"] <= 2 for p in neighbours("sY.sX", 2))
    assert neighbours("~sZ~", 3) == []  # twirled raw pairs: no parameter for that


def test_queued_once_per_mark_and_never_a_recipe_the_study_has():
    study = optuna.create_study(directions=["maximize", "maximize"])
    front = ["sY.sX", "pY"]
    held = recipe_params(parse_recipe("sY.sX^2"), 4)
    study.enqueue_trial(held)
    assert explore_front(study, front, 4, finished=EVERY - 1) == 0  # not due yet
    queued = explore_front(study, front, 4, finished=EVERY)
    assert queued == SHARE
    assert explore_front(study, front, 4, finished=EVERY + 5) == 0  # done for this mark
    waiting = [t for t in study.get_trials() if t.state.name == "WAITING"]
    ids = [recipe_from_params(t.system_attrs["fixed_params"], 4).recipe_id for t in waiting]
    assert len(ids) == len(set(ids)) == SHARE + 1  # the held recipe was not queued again
    # round-robin: both front recipes got their turn, the first one first
    names = notations([t.system_attrs["fixed_params"] for t in waiting[1:]], 4)
    assert names[0] == "sY.sX.sY" and names[1] == notations(neighbours("pY", 4), 4)[0]


def test_the_search_looks_at_the_front_only_when_a_mark_is_passed():
    from optimise.explore import FrontExplorer

    study = optuna.create_study(directions=["maximize", "maximize"])
    looked = []

    def front():
        looked.append(1)
        return ["sY.sX"]

    explorer = FrontExplorer(4, budget=3 * EVERY)
    for finished in range(3 * EVERY + 5):
        explorer(study, front, finished)
    # the first call (a resume may be due), then marks EVERY and 2 EVERY; not at the budget
    assert len(looked) == 3
    assert sum(t.state.name == "WAITING" for t in study.get_trials()) == 2 * SHARE
