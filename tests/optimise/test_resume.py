"""Interrupted searches resume: no finished trial lost, none repeated, same result.

The reference is the same search run without interruption (same seed); the
interruptions are a real SIGKILL of a search running in another process (the
storage polled until trials are done and one is running) and a Ctrl-C
(KeyboardInterrupt) inside a trial.
"""

import datetime
import os
import signal
import socket
import subprocess
import sys
import time
from pathlib import Path

import optuna
import pytest
from optuna.trial import TrialState, create_trial

import optimise.objective
from models.noise import NodeNoise
from models.profile import Profile
from models.states import werner
from optimise.resume import is_stale
from optimise.search import load_run, run_search
from optimise.space import recipe_from_params
from optimise.storage import open_storage

ROOT = Path(__file__).resolve().parents[2]
PROFILE = Profile(
    tuple(werner(0.8)), NodeNoise(two_qubit=0.98, single_qubit=0.99, measurement=0.98)
)
# 60 trials: 15 seeded (baselines and the depth-1 front), then NSGA-II; its second
# generation (population 40) starts at trial 40, so crossover runs after the kill too
ARGS = dict(max_depth=3, n_trials=60, exhaustive_depth=1, seed=3, progress=False)

CHILD = """
import sys, time
import optimise.objective as objective
from models.noise import NodeNoise
from models.profile import Profile
from models.states import werner
from optimise.search import run_search

evaluate = objective.evaluate
def slow(recipe, profile):  # a slow trial, so that the kill lands inside one
    time.sleep(0.15)
    return evaluate(recipe, profile)
objective.evaluate = slow
noise = NodeNoise(two_qubit=0.98, single_qubit=0.99, measurement=0.98)
profile = Profile(tuple(werner(0.8)), noise)
run_search(profile, run_dir=sys.argv[1], max_depth=3, n_trials=60, exhaustive_depth=1, seed=3,
           progress=False)
"""


def trials_of(run_dir):
    storage = open_storage(None, run_dir)
    return optuna.load_study(study_name=f"stillroom-{run_dir.name}", storage=storage).trials


def drawn(trial):
    """Whether a trial's whole recipe has been drawn (it is then inside its evaluation)."""
    try:
        recipe_from_params(trial.params, 3)
    except (KeyError, ValueError):
        return False
    return True


def complete_sequence(trials):
    return [
        (t.user_attrs["recipe"], tuple(t.values)) for t in trials if t.state == TrialState.COMPLETE
    ]


@pytest.fixture(scope="module")
def reference(tmp_path_factory):
    run_dir = tmp_path_factory.mktemp("reference") / "ref"
    out = run_search(PROFILE, run_dir=run_dir, **ARGS)
    return out, trials_of(run_dir)


@pytest.mark.slow
def test_killed_search_resumes_to_the_uninterrupted_result(tmp_path, reference):
    ref_out, ref_trials = reference
    run_dir = tmp_path / "killed"
    env = {**os.environ, "PYTHONPATH": str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", "")}
    child = subprocess.Popen([sys.executable, "-c", CHILD, str(run_dir)], cwd=ROOT, env=env)
    deadline = time.monotonic() + 120
    try:
        while True:
            assert child.poll() is None, "the search ended before it could be killed"
            assert time.monotonic() < deadline, "the search made no progress"
            # front.json is written once the study exists: then it is safe to read it
            if (run_dir / "front.json").exists():
                trials = trials_of(run_dir)
                done = sum(t.state == TrialState.COMPLETE for t in trials)
                running = [t for t in trials if t.state == TrialState.RUNNING and drawn(t)]
                if done >= 30 and running:
                    os.kill(child.pid, signal.SIGKILL)
                    break
            time.sleep(0.03)
    finally:
        child.wait(timeout=30)
    assert child.returncode == -signal.SIGKILL
    before = trials_of(run_dir)
    left_running = [t.number for t in before if t.state == TrialState.RUNNING]
    assert left_running, "the kill was meant to land inside a trial"
    finished_before = {
        t.number: (t.params, t.values) for t in before if t.state == TrialState.COMPLETE
    }

    out = run_search(PROFILE, run_dir=run_dir, **ARGS)

    after = trials_of(run_dir)
    by_number = {t.number: t for t in after}
    # no finished trial lost
    for number, (params, values) in finished_before.items():
        assert by_number[number].state == TrialState.COMPLETE
        assert (by_number[number].params, by_number[number].values) == (params, values)
    # the trial the kill interrupted is failed, and its recipe asked again once
    for number in left_running:
        assert by_number[number].state == TrialState.FAIL
        again = [t for t in after if t.user_attrs.get("reask_of") == number]
        assert len(again) == 1 and again[0].state == TrialState.COMPLETE
        assert (
            again[0].params.items() >= {k: v for k, v in by_number[number].params.items()}.items()
        )
    # none repeated: the same finished trials, in the same order, as without the kill
    assert complete_sequence(after) == complete_sequence(ref_trials)
    assert out.n_trials_total == ref_out.n_trials_total == 60
    assert [r.recipe_id for r in out.front] == [r.recipe_id for r in ref_out.front]
    assert load_run(run_dir).results == load_run(ref_out.run_dir).results


@pytest.mark.slow
def test_ctrl_c_inside_a_trial_then_resume(tmp_path, reference, monkeypatch):
    ref_out, ref_trials = reference
    run_dir = tmp_path / "interrupted"
    evaluate = optimise.objective.evaluate
    calls = {"n": 0}

    def interrupt_once(recipe, profile):
        calls["n"] += 1
        if calls["n"] == 45:
            raise KeyboardInterrupt
        return evaluate(recipe, profile)

    monkeypatch.setattr(optimise.objective, "evaluate", interrupt_once)
    with pytest.raises(KeyboardInterrupt):
        run_search(PROFILE, run_dir=run_dir, **ARGS)
    partial = load_run(run_dir)  # the front written so far survives the interruption
    failed = [t for t in trials_of(run_dir) if t.state == TrialState.FAIL]
    assert len(failed) == 1 and "error" not in failed[0].user_attrs
    assert partial.n_trials == failed[0].number  # every trial before it finished
    monkeypatch.setattr(optimise.objective, "evaluate", evaluate)
    out = run_search(PROFILE, run_dir=run_dir, **ARGS)
    assert out.n_trials_this_run == 60 - partial.n_trials
    assert complete_sequence(trials_of(run_dir)) == complete_sequence(ref_trials)
    assert [r.recipe_id for r in out.front] == [r.recipe_id for r in ref_out.front]


def test_only_trials_of_dead_workers_are_stale():
    dead = subprocess.Popen([sys.executable, "-c", "pass"])
    dead.wait()
    here = socket.gethostname()

    def running(worker, minutes_ago=0):
        trial = create_trial(
            state=TrialState.RUNNING, user_attrs={} if worker is None else {"worker": worker}
        )
        trial.datetime_start = datetime.datetime.now() - datetime.timedelta(minutes=minutes_ago)
        return trial

    me = optimise.objective.worker_identity()
    assert not is_stale(running(me))  # this very process: alive
    assert is_stale(running({**me, "pid": dead.pid}))  # exited
    assert is_stale(running({**me, "start": (me["start"] or 0) + 1}))  # pid reused by another
    assert not is_stale(running({**me, "host": here + "-elsewhere", "pid": dead.pid}))
    assert not is_stale(running(None, minutes_ago=1))  # just started, worker not yet recorded
    assert is_stale(running(None, minutes_ago=30))


def test_reasked_trial_keeps_parameters_and_constraints(tmp_path):
    # a trial left RUNNING by a process that exited, with its recipe drawn: resume fails
    # it and adds the same recipe as a finished trial, constraints as the objective sets
    from optimise.limits import Limits
    from optimise.resume import fail_stale_trials, reask_abandoned
    from optimise.samplers import SlotSeededSampler, sampler_settings
    from optimise.space import suggest_recipe

    dead = subprocess.Popen([sys.executable, "-c", "pass"])
    dead.wait()
    storage = open_storage(tmp_path / "s.log", tmp_path)
    study = optuna.create_study(
        storage=storage,
        study_name="s",
        directions=["maximize", "maximize"],
        sampler=SlotSeededSampler(sampler_settings("nsga2", 0)),
    )
    params = {
        "depth": 2,
        "r0.selection": "single",
        "r0.rot0": "Y",
        "r0.rot1": "Y",
        "r0.twirl": False,
        "r1.selection": "double",
        "r1.sacrificed": "same",
        "r1.rot0": "X",
        "r1.rot1": "Z",
        "r1.rot2": "Y",
        "r1.twirl": False,
    }
    study.enqueue_trial(params)
    trial = study.ask()
    suggest_recipe(trial, 3)  # draws the recipe as the objective does, then "dies"
    assert trial.params == params
    worker = {**optimise.objective.worker_identity(), "pid": dead.pid}
    trial.set_user_attr("worker", worker)
    assert fail_stale_trials(study) == [trial.number]
    limits = Limits(max_memory_per_node=3)
    asked = reask_abandoned(
        study,
        PROFILE,
        max_depth=3,
        objectives=("fidelity", "yield"),
        limits=limits,
        worker=optimise.objective.worker_identity(),
    )
    assert asked == [trial.number]
    again = study.trials[-1]
    assert again.state == TrialState.COMPLETE and again.params == params
    assert again.user_attrs["reask_of"] == trial.number
    result = again.user_attrs["result"]
    assert again.values == [result["fidelity"], result["yield"]]
    assert set(again.constraints) == {"memory_per_node"}
    assert again.constraints["memory_per_node"] == result["memory_per_node"] - 3
    # asked once only
    assert (
        reask_abandoned(
            study,
            PROFILE,
            max_depth=3,
            objectives=("fidelity", "yield"),
            limits=limits,
            worker=worker,
        )
        == []
    )
