"""Interrupted searches resume: no finished trial lost, none repeated, same result.

The reference is the same search run without interruption (same seed); the
interruptions are a real SIGKILL or SIGINT that the search process sends itself
at a chosen point (a test-only hook, :func:`optimise.processes.checkpoint`), and a
Ctrl-C (KeyboardInterrupt) inside a trial.
"""

import datetime
import os
import re
import signal
import socket
import subprocess
import sys
from pathlib import Path

import optuna
import pytest
from optuna.trial import TrialState, create_trial

import optimise.objective
from models.noise import NodeNoise
from models.profile import Profile
from models.states import werner
from optimise.processes import TEST_KILL_ENV
from optimise.profiles import profile_to_toml
from optimise.resume import is_stale
from optimise.search import load_run, run_search
from optimise.storage import open_storage

ROOT = Path(__file__).resolve().parents[2]
PROFILE = Profile(
    tuple(werner(0.8)), NodeNoise(two_qubit=0.98, single_qubit=0.99, measurement=0.98)
)
# 60 trials: 15 seeded (baselines and the depth-1 front), then NSGA-II; its second
# generation (population 40) starts at trial 40, so crossover runs after the kill too
ARGS = dict(max_depth=3, n_trials=60, exhaustive_depth=1, seed=3, progress=False)

def trials_of(run_dir):
    storage = open_storage(None, run_dir)
    return optuna.load_study(study_name=f"stillroom-{run_dir.name}", storage=storage).trials


def complete_sequence(trials):
    return [
        (t.user_attrs["result"]["recipe"], tuple(t.values))
        for t in trials
        if t.state == TrialState.COMPLETE
    ]


@pytest.fixture(scope="module")
def reference(tmp_path_factory):
    run_dir = tmp_path_factory.mktemp("reference") / "ref"
    out = run_search(PROFILE, run_dir=run_dir, **ARGS)
    return out, trials_of(run_dir)


# Kill moments: the process signals itself at a named point (optimise.processes.checkpoint,
# STILLROOM_TEST_KILL_AT=PHASE:N[:INT]), so no test races a signal against progress. Writes
# of a run folder, in order: settings.json (1), profile.json (2), exhaustive.json (3), then
# front.json as the front changes; after the search, the command line writes the reports.
KILL_MOMENTS = [
    "exhaustive:1",  # inside the exhaustive layer, before its cache is written
    "write:1",  # writing settings.json
    "write:3",  # writing exhaustive.json
    "enqueue:1",  # seeding the study: first recipe enqueued
    "enqueue:9",
    "ask:1",  # an enqueued trial just started, before its worker is recorded on it
    "ask:45",  # a sampled trial, before its recipe is drawn
    "trial:1",  # a trial just finished
    "trial:30",
    "trial:59",
    "write:5",  # the front.json after the trials (the deep front leaves them none to write)
    "exhaustive:1:INT",  # Ctrl-C: exit 130, one line, then the same command resumes
    "enqueue:4:INT",
    "ask:20:INT",
]
SEARCH = ["--depth", "3", "--trials", "60", "--exhaustive-depth", "1", "--seed", "3"]
SEARCH += ["--no-progress"]


def search_args(folder, name) -> list[str]:
    profile = folder / "profile.toml"
    if not profile.exists():
        profile.write_text(profile_to_toml(PROFILE))
    return ["search", str(profile), "--name", name, "--runs-dir", str(folder / "runs"), *SEARCH]


def cli_search(folder, name, moment):
    """``stillroom search`` of PROFILE in a subprocess told to signal itself at ``moment``."""
    env = {**os.environ, "PYTHONPATH": str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", "")}
    env[TEST_KILL_ENV] = moment
    command = [sys.executable, "-m", "optimise.cli", *search_args(folder, name)]
    # the timeout only guards against a hang; it is never what the test measures
    return subprocess.run(
        command, cwd=folder, env=env, capture_output=True, text=True, timeout=300
    )


def resume(folder, name) -> int:
    """The same command again, in this process (no kill asked)."""
    from optimise.cli import main

    return main(search_args(folder, name))


def report_files(run_dir):
    return {p.name for p in run_dir.iterdir() if p.suffix in (".csv", ".md", ".tex")}


@pytest.fixture(scope="module")
def cli_reference(tmp_path_factory):
    folder = tmp_path_factory.mktemp("cli-reference")
    assert resume(folder, "ref") == 0
    run_dir = folder / "runs" / "ref"
    return run_dir, trials_of(run_dir)


def repeated_recipes(trials) -> int:
    ids = [t.user_attrs["recipe_id"] for t in trials if t.state == TrialState.COMPLETE]
    return len(ids) - len(set(ids))


@pytest.mark.slow
@pytest.mark.parametrize("moment", KILL_MOMENTS)
def test_a_kill_at_any_moment_resumes_to_the_uninterrupted_result(tmp_path, cli_reference, moment):
    ref_dir, ref_trials = cli_reference
    killed = cli_search(tmp_path, "k", moment)
    if moment.endswith(":INT"):
        assert killed.returncode == 130, killed.stderr
        assert killed.stderr == "interrupted; run the same command to resume\n"
    else:
        assert killed.returncode == -signal.SIGKILL, killed.stderr
    run_dir = tmp_path / "runs" / "k"
    if (run_dir / "study.journal").exists():
        before = trials_of(run_dir)
        if moment.endswith(":INT"):  # a Ctrl-C leaves no trial running
            assert not [t for t in before if t.state == TrialState.RUNNING]
        finished_before = {
            t.number: (t.params, t.values) for t in before if t.state == TrialState.COMPLETE
        }
    else:
        finished_before = {}

    assert resume(tmp_path, "k") == 0
    after = trials_of(run_dir)
    by_number = {t.number: t for t in after}
    for number, (params, values) in finished_before.items():  # no finished trial lost
        assert (by_number[number].params, by_number[number].values) == (params, values)
    assert not [t for t in after if t.state == TrialState.RUNNING]
    # the same finished trials as without the kill: none lost or repeated (a trial asked
    # again on resume comes after those enqueued before the kill, so compare as sets)
    assert sorted(complete_sequence(after)) == sorted(complete_sequence(ref_trials))
    assert repeated_recipes(after) == 0
    assert load_run(run_dir).n_trials == load_run(ref_dir).n_trials == 60
    assert load_run(run_dir).results == load_run(ref_dir).results
    assert report_files(run_dir) == report_files(ref_dir) == {"front.csv", "table.md", "table.tex"}
    assert not (run_dir / ".search.lock").exists()


@pytest.mark.slow
def test_a_kill_while_the_reports_are_written_is_mended_by_the_same_command(
    tmp_path, cli_reference
):
    ref_dir, _ = cli_reference
    assert resume(tmp_path, "k") == 0
    # the same command again finds its budget reached and rewrites the front and the
    # reports: settings.json (write 1), front.json twice (2, 3), front.csv (4), then
    # recipes.json (5), where it is killed
    killed = cli_search(tmp_path, "k", "write:5")
    assert killed.returncode == -signal.SIGKILL
    assert resume(tmp_path, "k") == 0
    run_dir = tmp_path / "runs" / "k"
    assert load_run(run_dir).results == load_run(ref_dir).results
    for name in ("front.csv", "table.md", "table.tex"):
        # the tables' provenance says when each run was made; everything else is the same
        assert _undated((run_dir / name).read_text()) == _undated((ref_dir / name).read_text())
    assert not [p for p in run_dir.iterdir() if p.name.endswith(".tmp")]  # nothing half-written


def _undated(text: str) -> str:
    return re.sub(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d(\.\d+)?([+-]\d\d:\d\d|Z)?", "<date>", text)


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
    # the same trials; the interrupted one, asked again, is numbered after those
    # still waiting in the queue then (recipes queued around the front)
    assert sorted(complete_sequence(trials_of(run_dir))) == sorted(complete_sequence(ref_trials))
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
