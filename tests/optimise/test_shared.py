"""One run folder, one search; several processes, one budget; Ctrl-C and a dead parent.

Sources: "a folder is owned by one writer at a time" and "a worker exits when its
parent does" are common practice for long-running jobs (no source). Signals are
sent by the search to itself at a chosen point (optimise.processes.checkpoint),
so nothing here races a timer against progress.
"""

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import optuna
import pytest
from optuna.trial import TrialState

from models.noise import NodeNoise
from models.profile import Profile
from models.states import werner
from optimise.cli import main
from optimise.errors import RunError
from optimise.processes import TEST_KILL_ENV
from optimise.profiles import profile_to_toml
from optimise.run import LOCK_FILE, Run
from optimise.storage import open_storage

ROOT = Path(__file__).resolve().parents[2]
PROFILE = Profile(
    tuple(werner(0.8)), NodeNoise(two_qubit=0.98, single_qubit=0.99, measurement=0.98)
)


def env_with(**extra):
    env = {**os.environ, "PYTHONPATH": str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", "")}
    env.pop(TEST_KILL_ENV, None)
    env.update(extra)
    return env


def search_command(folder, *extra):
    profile = folder / "p.toml"
    if not profile.exists():
        profile.write_text(profile_to_toml(PROFILE))
    return [sys.executable, "-m", "optimise.cli", "search", str(profile), "--name", "r",
            "--runs-dir", str(folder / "runs"), "--depth", "3", "--exhaustive-depth", "1",
            "--no-progress", *extra]  # fmt: skip


def study_trials(run_dir, storage=None):
    study = optuna.load_study(
        study_name=f"stillroom-{Path(run_dir).name}", storage=open_storage(storage, run_dir)
    )
    return study.trials


def test_a_second_search_of_a_held_run_folder_gets_one_line(tmp_path, capsys):
    run = Run(tmp_path / "runs" / "r")
    with run.lock():
        # another process of this machine holds it: flock is per open file, so a second
        # lock from this process is refused just as another process's would be
        with pytest.raises(RunError, match=rf"in use by the search of process {os.getpid()} on"):
            with Run(tmp_path / "runs" / "r").lock():
                pass
        args = ["search", "--name", "r", "--runs-dir", str(tmp_path / "runs"), "--trials", "5"]
        assert main(args + ["--no-progress"]) == 2
        out, err = capsys.readouterr()
        assert out == "" and err.count("\n") == 1 and f"process {os.getpid()}" in err
        assert sorted(p.name for p in run.folder.iterdir()) == [LOCK_FILE]  # nothing written
    assert list(run.folder.iterdir()) == []  # the lock file goes with the search


@pytest.mark.slow
def test_two_searches_started_together_on_one_name(tmp_path):
    # the same-name race: both start at once; exactly one runs, the other says who holds it
    command = search_command(tmp_path, "--trials", "40")
    started = [
        subprocess.Popen(command, env=env_with(), stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                         text=True)
        for _ in range(2)
    ]  # fmt: skip
    done = [p.communicate(timeout=300) + (p.returncode,) for p in started]
    codes = sorted(code for _, _, code in done)
    refused = [err for _, err, code in done if code == 2]
    if codes == [0, 0]:  # the second started after the first had finished: both fine
        pass
    else:
        assert codes == [0, 2], done
        assert refused[0].count("\n") == 1 and "is in use by the search of process" in refused[0]
    trials = study_trials(tmp_path / "runs" / "r")
    assert sum(t.state == TrialState.COMPLETE for t in trials) <= 40


@pytest.mark.slow
def test_ctrl_c_of_local_workers_is_one_line_and_leaves_nothing_running(tmp_path):
    # the parent sends itself SIGINT when it writes the run folder's 6th file (a front.json
    # while the workers run); the workers finish their trial and stop
    command = search_command(tmp_path, "--trials", "100000", "--workers", "2")
    done = subprocess.run(command, env=env_with(**{TEST_KILL_ENV: "write:6:INT"}),
                          capture_output=True, text=True, timeout=300)  # fmt: skip
    assert done.returncode == 130, done.stderr
    # one line: no traceback of a worker, no warning of optuna
    assert done.stderr.splitlines() == ["interrupted; run the same command to resume"]
    trials = study_trials(tmp_path / "runs" / "r", tmp_path / "runs" / "r" / "study.journal")
    assert trials and not [t for t in trials if t.state == TrialState.RUNNING]


@pytest.mark.slow
def test_workers_stop_when_their_parent_is_killed(tmp_path):
    # the parent kills itself (SIGKILL) at its 6th file write, while its workers run
    run_dir = tmp_path / "runs" / "r"
    command = search_command(tmp_path, "--trials", "100000", "--workers", "2")
    done = subprocess.run(command, env=env_with(**{TEST_KILL_ENV: "write:6"}),
                          capture_output=True, text=True, timeout=300)  # fmt: skip
    assert done.returncode == -signal.SIGKILL
    # the workers recorded themselves on the study; each must end after its trial
    study = optuna.load_study(
        study_name="stillroom-r", storage=open_storage(run_dir / "study.journal", run_dir)
    )
    pids = [v["pid"] for k, v in study.user_attrs.items() if k.startswith("process ")]
    assert len(pids) == 3  # the parent and its two workers
    for pid in pids:
        polls = 0
        while _alive(pid):  # a worker ends after the trial it was running
            polls += 1
            assert polls < 3000, f"worker {pid} still runs after its parent died"  # a guard
            time.sleep(0.01)
    resumed = subprocess.run(
        search_command(tmp_path, "--trials", "60", "--workers", "2"),
        env=env_with(), capture_output=True, text=True, timeout=300,
    )  # fmt: skip
    assert resumed.returncode == 0, resumed.stderr
    trials = study_trials(run_dir, run_dir / "study.journal")
    assert not [t for t in trials if t.state == TrialState.RUNNING]


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    return True


@pytest.mark.slow
def test_three_processes_on_one_journal_keep_one_budget_and_repeat_no_recipe(tmp_path):
    # three separate searches (as on three machines: three run folders) share one study
    storage = tmp_path / "shared.log"
    commands = []
    for i in range(3):
        command = search_command(tmp_path, "--trials", "45", "--storage", str(storage))
        command[command.index("--runs-dir") + 1] = str(tmp_path / f"machine{i}")
        commands.append(command)
    started = [
        subprocess.Popen(c, env=env_with(), stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                         text=True)
        for c in commands
    ]  # fmt: skip
    for p in started:
        _, err = p.communicate(timeout=300)
        assert p.returncode == 0, err
    trials = study_trials(tmp_path / "machine0" / "r", storage)
    finished = [t for t in trials if t.state in (TrialState.COMPLETE, TrialState.PRUNED)]
    assert 45 <= len(finished) <= 45 + 3  # at most one extra trial per process
    ids = [t.user_attrs["recipe_id"] for t in trials if t.state == TrialState.COMPLETE]
    assert len(ids) == len(set(ids))  # no recipe evaluated twice
    assert not [t for t in trials if t.state == TrialState.RUNNING]
    front = json.loads((tmp_path / "machine0" / "r" / "front.json").read_text())
    assert front["n_trials"] >= 45 - 3  # the first to finish saw the others' trials too
