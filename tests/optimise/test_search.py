"""The search driver: run folder, front, settings checks, determinism, targets, workers.

External references: Pareto dominance (common practice, no source); the figures of
each recipe from ``models.evaluate.evaluate``; optuna's own trial records.
"""

import json
import math

import numpy as np
import optuna
import pytest

from models.evaluate import evaluate
from models.noise import NodeNoise
from models.notation import parse_recipe
from models.profile import Profile
from models.states import werner
from optimise.errors import InputError, RunError
from optimise.exhaustive import exhaustive_front
from optimise.pareto import pareto_mask, quantise
from optimise.search import Limits, load_run, run_search
from optimise.storage import open_storage
from optimise.targets import cheapest_reaching

PROFILE = Profile(
    tuple(werner(0.8)),
    NodeNoise(two_qubit=0.98, single_qubit=0.99, measurement=0.98),
    name="test-werner",
)
FRONT_KEYS = {
    "stillroom_version",
    "created",
    "updated",
    "profile",
    "settings",
    "searched_space",
    "complete_depth",
    "complete",
    "n_trials",
    "front",
    "baselines",
    "target",
}
RESULT_KEYS = {
    "recipe",
    "id",
    "fidelity",
    "bell",
    "success_probabilities",
    "raw_pairs_per_output",
    "yield",
    "memory_per_node",
    "rounds",
    "time_per_output_s",
}


def study_of(run_dir, storage=None):
    storage = open_storage(storage, run_dir)
    return optuna.load_study(study_name=f"stillroom-{run_dir.name}", storage=storage)


def recipe_of(trial):
    """A trial's recipe: in its result, or (a repeat, not evaluated) its own attribute.

    None for a trial still waiting in the queue (a recipe queued around the front).
    """
    result = trial.user_attrs.get("result")
    return result["recipe"] if result is not None else trial.user_attrs.get("recipe")


def points(entries):
    return np.array([[e["fidelity"], e["yield"]] for e in entries])


def test_run_folder_front_and_trials(tmp_path):
    run_dir = tmp_path / "first"
    out = run_search(
        PROFILE, run_dir=run_dir, max_depth=3, n_trials=30, exhaustive_depth=2, progress=False
    )
    for name in ("settings.json", "profile.json", "study.journal", "front.json", "exhaustive.json"):
        assert (run_dir / name).exists(), name
    data = json.loads((run_dir / "front.json").read_text())  # the file's own layout
    assert set(data) == FRONT_KEYS
    front_read = load_run(run_dir)  # and the Front type read back from it
    assert front_read.to_json()["front"] == data["front"]
    assert [(b.name, b.depth) for b in front_read.baselines] == [
        (b.name, b.depth) for b in out.baselines
    ]
    assert data["n_trials"] == out.n_trials_total == out.n_trials_this_run == 30
    assert data["profile"] == PROFILE.to_dict()
    assert data["settings"]["seed"] == 0 and data["settings"]["sampler"]["name"] == "nsga2"
    assert data["complete_depth"] == out.complete_depth == 2 and data["complete"] is False
    assert data["target"] is None and out.target is None
    # the front: RecipeResult.to_dict() entries and their equivalents, fidelity descending,
    # one per recipe
    assert all(set(e) == RESULT_KEYS | {"equivalents"} for e in data["front"])
    fids = [e["fidelity"] for e in data["front"]]
    assert fids == sorted(fids, reverse=True)
    assert [e["id"] for e in data["front"]] == [r.recipe_id for r in out.front]
    assert len({e["id"] for e in data["front"]}) == len(data["front"])
    # baselines: every textbook baseline at depths 1..3, marked with name and depth
    assert len(data["baselines"]) == 5 * 3 == len(out.baselines)
    assert {(b["baseline"], b["depth"]) for b in data["baselines"]} == {
        (name, d)
        for name in (
            "bbpssw",
            "dejmps",
            "pumping",
            "alternating-pumping",
            "double-selection-pumping",
        )
        for d in (1, 2, 3)
    }
    # the front is the Pareto front of every finished trial and the exhaustive front
    study = study_of(run_dir)
    trials = [t for t in study.trials if t.state.name == "COMPLETE"]
    assert len(trials) == 30
    for t in trials:
        # one record per figure set: the id drawn and the result evaluated agree
        assert t.user_attrs["recipe_id"] == t.user_attrs["result"]["id"]
        recipe = t.user_attrs["result"]["recipe"]
        assert evaluate(recipe, PROFILE).fidelity == pytest.approx(t.values[0])
    ex = exhaustive_front(PROFILE, max_depth=2)
    pool = [t.user_attrs["result"] for t in trials] + [r.to_dict() for r in ex.results]
    front = points(data["front"])
    everything = quantise(np.vstack([front, points(pool)]))
    mask = pareto_mask(everything, (True, True))
    assert mask[: len(front)].all()  # nothing dominates a front entry (definition)
    on_front = {tuple(p) for p in quantise(front)}
    assert {tuple(p) for p in everything[mask]} == on_front  # and every Pareto point is listed
    # the study records its sampler and settings
    assert study.user_attrs["sampler"]["name"] == "nsga2"
    assert study.user_attrs["sampler"]["seed"] == 0
    assert study.user_attrs["stillroom"]["max_depth"] == 3


def test_rerun_checks_settings_and_lets_the_budget_grow(tmp_path):
    run_dir = tmp_path / "grow"
    common = dict(
        run_dir=run_dir,
        max_depth=2,
        exhaustive_depth=1,
        progress=False,
        storage=tmp_path / "grow.log",
    )
    first = run_search(PROFILE, n_trials=20, **common)
    again = run_search(PROFILE, n_trials=20, **common)
    assert again.n_trials_this_run == 0 and again.n_trials_total == 20
    more = run_search(PROFILE, n_trials=28, **common)
    assert more.n_trials_this_run == 8 and more.n_trials_total == 28
    assert len(study_of(run_dir, tmp_path / "grow.log").trials) == 28
    assert first.front  # something was found
    with pytest.raises(RunError, match=r"seed = 0.*seed = 5.*--name"):
        run_search(PROFILE, n_trials=28, seed=5, **common)
    with pytest.raises(RunError, match="max_depth"):
        run_search(PROFILE, n_trials=28, **{**common, "max_depth": 3})
    other = Profile(tuple(werner(0.85)), PROFILE.noise, name="test-werner")
    with pytest.raises(RunError, match="noise profile"):
        run_search(other, n_trials=28, **common)
    with pytest.raises(RunError, match="storage"):
        run_search(PROFILE, n_trials=28, **{**common, "storage": tmp_path / "elsewhere.log"})


def test_same_seed_same_trials_other_seed_other_trials(tmp_path):
    def recipes(name, seed):
        run_dir = tmp_path / name
        storage = tmp_path / f"{name}.log"
        run_search(
            PROFILE,
            run_dir=run_dir,
            max_depth=3,
            n_trials=40,
            seed=seed,
            exhaustive_depth=1,
            storage=storage,
            progress=False,
        )
        return [recipe_of(t) for t in study_of(run_dir, storage).trials]

    a, b, c = recipes("a", 7), recipes("b", 7), recipes("c", 8)
    assert a == b
    assert a != c


def test_tpe_and_random_samplers_run(tmp_path):
    for sampler in ("tpe", "random"):
        run_dir = tmp_path / sampler
        out = run_search(
            PROFILE,
            run_dir=run_dir,
            max_depth=3,
            n_trials=25,
            sampler=sampler,
            exhaustive_depth=0,
            storage=tmp_path / f"{sampler}.log",
            progress=False,
        )
        assert out.n_trials_total == 25 and out.complete_depth == 0
        assert (
            study_of(run_dir, tmp_path / f"{sampler}.log").user_attrs["sampler"]["name"] == sampler
        )


def test_complete_when_the_exhaustive_layer_covers_the_space(tmp_path):
    out = run_search(
        PROFILE,
        run_dir=tmp_path / "all",
        max_depth=2,
        n_trials=5,
        exhaustive_depth=2,
        storage=tmp_path / "all.log",
        progress=False,
    )
    data = load_run(tmp_path / "all")
    assert data.complete is True and data.complete_depth == 2
    ex = exhaustive_front(PROFILE, max_depth=2)
    # the deep layer adds tree recipes (outside the linear space): the front's linear
    # recipes are exhaustive front points, and every exhaustive point is on the front
    # or dominated by a tree
    found = quantise(points(r.to_dict() for r in data.results))
    linear = {
        tuple(p)
        for p, r in zip(found, data.results, strict=True)
        if parse_recipe(r.notation).is_linear
    }
    exhaustive = {
        tuple(p) for p in quantise(np.array([[r.fidelity, r.pair_yield] for r in ex.results]))
    }
    assert linear <= exhaustive
    for f, y in exhaustive - linear:
        assert any(a >= f and b >= y and (a, b) != (f, y) for a, b in found)
    assert len(out.front) == len(data.results)


def test_target_reached_and_out_of_reach(tmp_path):
    common = dict(max_depth=2, n_trials=5, exhaustive_depth=2, progress=False)
    out = run_search(
        PROFILE, run_dir=tmp_path / "t1", target_fidelity=0.9, storage=tmp_path / "t1.log", **common
    )
    assert out.target.reached
    # the cheapest reaching F >= 0.9 among all linear recipes of depth <= 2 (exhaustive)
    best_cost = min(r.raw_pairs_per_output for r in out.front if r.fidelity >= 0.9)
    assert out.target.recipe.raw_pairs_per_output == pytest.approx(best_cost)
    assert load_run(tmp_path / "t1").target.reached is True
    out = run_search(
        PROFILE,
        run_dir=tmp_path / "t2",
        target_fidelity=0.9999,
        storage=tmp_path / "t2.log",
        **common,
    )
    assert not out.target.reached and out.target.recipe is None
    assert "out of reach" in out.target.message
    assert out.target.best_reachable.fidelity == max(r.fidelity for r in out.front)
    assert out.target.best_reachable.notation in out.target.message


def test_cheapest_reaching_picks_fewest_raw_pairs_under_limits():
    results = [evaluate(n, PROFILE) for n in ("sY", "sY^2", "pY^2", "dsZ.dsY", "sY^3", "pY")]
    for f_star in (0.82, 0.86, 0.9):
        answer = cheapest_reaching(results, f_star)
        ok = [r for r in results if r.fidelity >= f_star]
        if ok:
            assert answer.reached
            assert answer.recipe.raw_pairs_per_output == min(r.raw_pairs_per_output for r in ok)
        else:
            assert not answer.reached
    limited = cheapest_reaching(results, 0.5, Limits(max_memory_per_node=2))
    assert limited.recipe.memory_per_node <= 2
    deep = cheapest_reaching(results, 0.999, Limits(max_depth=2))
    assert not deep.reached and len(deep.best_reachable.trace) <= 2
    with pytest.raises(ValueError, match="target_fidelity"):
        cheapest_reaching(results, 1.5)


def test_limits_and_arguments_are_validated(tmp_path):
    with pytest.raises(ValueError, match=r"max_memory_per_node = 0 is outside \[1, inf\)"):
        Limits(max_memory_per_node=0)
    with pytest.raises(ValueError, match="max_time_per_output_s"):
        Limits(max_time_per_output_s=-1.0)
    with pytest.raises(ValueError, match="max_depth"):
        Limits(max_depth=2.5)
    with pytest.raises(InputError, match="n_trials"):
        run_search(PROFILE, run_dir=tmp_path / "x", n_trials=-1, progress=False)
    with pytest.raises(InputError, match="sampler"):
        run_search(PROFILE, run_dir=tmp_path / "x", sampler="grid", progress=False)
    with pytest.raises(InputError, match="objectives"):
        run_search(PROFILE, run_dir=tmp_path / "x", objectives=("fidelity",), progress=False)
    with pytest.raises(InputError, match="SQLite"):
        run_search(
            PROFILE, run_dir=tmp_path / "x", workers=2, storage=tmp_path / "x.db", progress=False
        )
    assert not (tmp_path / "x").exists()  # nothing written for a refused call


def test_limits_bound_the_front(tmp_path):
    limits = Limits(max_memory_per_node=3)
    out = run_search(
        PROFILE,
        run_dir=tmp_path / "lim",
        max_depth=3,
        n_trials=20,
        limits=limits,
        exhaustive_depth=2,
        storage=tmp_path / "lim.log",
        progress=False,
    )
    assert out.front and all(r.memory_per_node <= 3 for r in out.front)


def test_memory_and_time_objectives(tmp_path):
    profile = Profile(tuple(werner(0.8)), PROFILE.noise, length_km=5.0, pair_rate_hz=1e5)
    out = run_search(
        profile,
        run_dir=tmp_path / "obj",
        max_depth=2,
        n_trials=10,
        objectives=("fidelity", "yield", "memory", "time"),
        exhaustive_depth=2,
        storage=tmp_path / "obj.log",
        progress=False,
    )
    values = np.array(
        [[r.fidelity, r.pair_yield, r.memory_per_node, r.time_per_output_s] for r in out.front]
    )
    assert pareto_mask(quantise(values), (True, True, False, False)).all()
    # memory and time keep points that fidelity and yield alone drop (the deep
    # layer's trees can fill the two-objective front as much)
    assert len(out.front) >= len(
        run_search(
            profile,
            run_dir=tmp_path / "obj2",
            max_depth=2,
            n_trials=10,
            exhaustive_depth=2,
            storage=tmp_path / "obj2.log",
            progress=False,
        ).front
    )


@pytest.mark.slow
def test_two_local_workers_share_one_journal_study(tmp_path, capsys):
    run_dir = tmp_path / "pair"
    out = run_search(
        PROFILE,
        run_dir=run_dir,
        max_depth=3,
        n_trials=40,
        workers=2,
        exhaustive_depth=1,
        progress=False,
    )
    assert (run_dir / "study.journal").exists() and not (run_dir / "study.db").exists()
    trials = study_of(run_dir, run_dir / "study.journal").trials
    numbers = [t.number for t in trials]
    assert len(numbers) == len(set(numbers))  # unique trial numbers
    # a recipe drawn again is told PRUNED as a repeat of the trial that has it
    assert all(
        t.state.name == "COMPLETE" or (t.state.name == "PRUNED" and "repeat_of" in t.user_attrs)
        for t in trials
    )
    complete = [t.user_attrs["recipe_id"] for t in trials if t.state.name == "COMPLETE"]
    assert len(complete) == len(set(complete))  # no recipe evaluated twice
    per_worker = {}
    for t in trials:
        per_worker.setdefault(t.user_attrs["worker"]["pid"], []).append(t.number)
    assert len(per_worker) == 2  # both processes worked
    assert sum(len(v) for v in per_worker.values()) == len(trials) == out.n_trials_total
    assert 40 <= len(trials) <= 42  # at most one extra trial per process
    settings = json.loads((run_dir / "settings.json").read_text())
    assert settings["storage"] == "study.journal" and settings["workers"] == 2
    assert not math.isnan(out.front[0].fidelity)


def test_space_parameters_round_trip_recipes():
    # each baseline (models.baselines) and nested recipes (models.notation) survive the
    # round trip recipe -> trial parameters -> recipe, judged by the canonical notation
    from models.baselines import BASELINES, baseline
    from models.notation import parse_recipe
    from optimise.space import distributions_for, recipe_from_params, recipe_params

    # the space has no twirl of the raw pairs, so bbpssw (~sZ~^d) is not in it
    recipes = [baseline(name, d) for name in BASELINES for d in (1, 2, 4)]
    recipes = [r for r in recipes if not r.raw_twirl]
    recipes += [parse_recipe(t) for t in ("sY^2.pY(sY)", "sZ.sX.dpYZX(sZ.sX)~", "pX.dsYyz~")]
    for recipe in recipes:
        params = recipe_params(recipe, 4)
        assert params is not None, recipe.notation
        assert recipe_from_params(params, 4).notation == recipe.notation
        dists = distributions_for(params, 4)
        assert all(dists[k]._contains(dists[k].to_internal_repr(v)) for k, v in params.items())
    # a source that is not a prefix of the recipe itself is outside the space
    assert recipe_params(parse_recipe("sY^2.pY(pX)"), 4) is None
    assert recipe_params(parse_recipe("sY^5"), 4) is None
    # so is a recipe that twirls its raw pairs (models.notation's leading '~')
    for text in ("~sZ~^2", "sY.pY(~raw)", "sY.pY(~sY)"):
        assert recipe_params(parse_recipe(text), 4) is None, text


def test_a_run_folder_kept_in_sqlite_resumes_there(tmp_path):
    """Run folders made when SQLite was the default go on in their study.db."""
    run_dir = tmp_path / "older"
    common = dict(max_depth=2, exhaustive_depth=1, progress=False)
    run_search(PROFILE, run_dir=run_dir, n_trials=8, storage=run_dir / "study.db", **common)
    out = run_search(PROFILE, run_dir=run_dir, n_trials=12, **common)
    assert out.n_trials_total == 12 and out.n_trials_this_run == 4
    assert not (run_dir / "study.journal").exists()
    assert json.loads((run_dir / "settings.json").read_text())["storage"] == "study.db"
