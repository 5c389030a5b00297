"""The search driver: the exhaustive layer, then a resumable optuna study beyond it.

:func:`run_search` is what ``stillroom search`` calls. Everything it does lives in
the run folder (:class:`optimise.run.Run`) and the study storage
(:mod:`optimise.storage`), so running the same call again resumes: ``n_trials`` is
the total budget, trials of a killed process are failed and asked again
(:mod:`optimise.resume`), and each trial's recipe is drawn from a seed derived
from the run's seed and the trial's place (:mod:`optimise.samplers`), so a
single-worker run gives the same trials however often it was interrupted.
"""

from __future__ import annotations

import multiprocessing
import os
import signal
import socket
import sys
import time
from dataclasses import dataclass
from pathlib import Path

import optuna
from optuna.trial import TrialState

from models.notation import parse_recipe

from .errors import InputError, RunError
from .explore import FrontExplorer
from .front import BaselineResult, baseline_results
from .limits import Limits
from .objective import Objective
from .objectives import directions
from .processes import StopRequest, checkpoint, is_running, parent_alive, worker_identity
from .progress import SearchProgress
from .resume import fail_stale_trials, reask_abandoned, register_worker, registered_workers
from .run import Run, load_run, same_values
from .samplers import SlotSeededSampler, finished_count
from .seeding import (
    check_round_layer,
    deep_layer,
    enqueue_known,
    exhaustive_layer,
    release_layer_workers,
    study_selections,
)
from .settings import SearchSettings
from .space import SELECTION_CHOICES, is_linear_space
from .storage import StorageSpec, open_resolved, resolve_storage
from .targets import TargetAnswer, cheapest_reaching
from .tracker import FrontTracker

__all__ = ["Limits", "SearchOutcome", "SearchSettings", "run_search", "load_run"]

STUDY_PREFIX = "stillroom-"
POLL_S = 1.0


@dataclass
class SearchOutcome:
    """What :func:`run_search` found.

    Attributes
    ----------
    run_dir : Path
    front : list of RecipeResult, fidelity descending
    baselines : list of BaselineResult, every textbook baseline at each depth 1..max_depth
    n_trials_total : int
        Finished trials in the study (all runs and workers).
    n_trials_this_run : int
    complete_depth : int
        The front is complete for all linear recipes up to this depth.
    target : TargetAnswer or None
    """

    run_dir: Path
    front: list
    baselines: list[BaselineResult]
    n_trials_total: int
    n_trials_this_run: int
    complete_depth: int
    target: TargetAnswer | None


def _storage_for(storage, run_dir: Path, workers: int, recorded):
    """Resolve the storage, honouring the one a run folder already uses (``recorded``)."""
    shared = workers > 1
    if storage is None and recorded is not None:
        kept = recorded.storage or ""
        if "://" in kept and not kept.startswith("sqlite:///"):
            raise RunError(
                f"run folder {run_dir} keeps its study in {kept}; pass that storage URL again "
                "(with its password) to resume it"
            )
        spec = resolve_storage(kept if "/" in kept or ":" in kept else run_dir / kept, run_dir)
    else:
        spec = resolve_storage(storage, run_dir)
    if shared and not spec.shared:
        raise InputError(
            f"workers = {workers} needs a storage several processes can share, but the study is "
            f"in SQLite ({spec.describe()}); use workers = 1, or a journal file or a "
            "postgresql:// URL (for an existing run: a new run under another name)"
        )
    return spec


def _recorded_storage(spec, run_dir: Path) -> str:
    target = Path(spec.target) if spec.kind != "rdb" else None
    if target is not None and target.parent == run_dir.resolve():
        return target.name
    return spec.describe()


def run_search(
    profile, *, run_dir, settings=None, progress=True, on_start=None, **fields
) -> SearchOutcome:
    """Search recipes for a profile; resumable (run the same call again to go on).

    Parameters
    ----------
    profile : models.Profile
    run_dir : path of the run folder (``runs/<name>``)
    settings : SearchSettings, optional
        What to search; or give its fields as keywords instead (``max_depth``,
        ``n_trials``, ``timeout_s``, ``seed``, ``sampler``, ``storage``,
        ``workers``, ``objectives``, ``limits``, ``exhaustive_depth``,
        ``target_fidelity``: see :class:`optimise.settings.SearchSettings`).
        ``n_trials`` is the total of the study, counting earlier runs and every
        process on a shared storage (it may grow); more than one worker needs a
        storage they can share (by default a journal file in the run folder).
    progress : bool
        Show a progress bar on stderr.
    on_start : callable, optional
        Called with ``resumed`` (bool) once the run folder is owned and its
        settings written, before the search itself.

    Returns
    -------
    SearchOutcome

    Raises
    ------
    InputError
        For a setting out of range (naming it and the range), or a storage or run
        folder that cannot be used (nothing is written then).
    RunError
        When the run folder holds another search, or another search owns it now.
    KeyboardInterrupt
        After a Ctrl-C, once the study is left resumable.
    """
    started = time.monotonic()
    if settings is None:
        settings = SearchSettings(**fields)
    elif fields:
        raise TypeError(f"give either settings or its fields, not both ({', '.join(fields)})")
    run = Run(run_dir)
    bar = SearchProgress(settings.n_trials, 0, settings.timeout_s, enabled=progress)
    spec = _storage_for(settings.storage, run.folder, settings.workers, run.recorded_settings())
    settings = settings.replace(storage=_recorded_storage(spec, run.folder))
    run.check_resume(settings, profile.to_dict())  # read-only: refuse before writing anything
    verbosity = optuna.logging.get_verbosity()
    optuna.logging.set_verbosity(optuna.logging.WARNING)
    stop = StopRequest()
    try:
        with stop.installed():
            # a server first: one that cannot be opened leaves no run folder behind
            storage = open_resolved(spec) if spec.kind == "rdb" else None
            with run.lock():
                storage = storage or open_resolved(spec)
                study = _open_study(storage, spec, run, settings, profile)
                recorded, resumed = run.prepare(settings, profile.to_dict())
                if on_start is not None:
                    on_start(resumed)
                return _search(profile, run, settings, recorded, study, spec, started, bar, stop)
    finally:
        optuna.logging.set_verbosity(verbosity)


def _open_study(storage, spec, run: Run, settings: SearchSettings, profile, worker=0):
    name = STUDY_PREFIX + run.name
    study = optuna.create_study(
        storage=storage,
        study_name=name,
        directions=directions(settings.objectives),
        sampler=SlotSeededSampler(settings.sampler_settings, worker=worker),
        load_if_exists=True,
    )
    identity = settings.study_identity(profile.to_dict())
    attrs = study.user_attrs
    if "stillroom" not in attrs:
        study.set_user_attr("stillroom", identity)
        study.set_user_attr("sampler", settings.sampler_settings)
    elif not same_values(attrs["stillroom"], identity):
        raise RunError(
            f"study {name!r} in {spec.describe()} was started by a search with other settings "
            f"or another profile. {run.new_run_hint()}."
        )
    return study


def budget_used(study) -> int:
    """Trials that count towards the budget, finished (:func:`finished_count`) or running."""
    return finished_count(study) + len(
        study.get_trials(deepcopy=False, states=(TrialState.RUNNING,))
    )


def _layer_note(bar, phase: str, template: str):
    """A layer's callback after each depth or level: a progress note, then a checkpoint."""

    def note(depth, count, evaluations, seconds):
        if bar.enabled:
            bar.note(template.format(depth, count, evaluations, seconds))
        checkpoint(phase)

    return note


def _search(profile, run: Run, settings, recorded, study, spec, started, bar, stop):
    depth = settings.depth_cap

    on_depth = _layer_note(
        bar,
        "exhaustive",
        "exhaustive layer: depth {}, {:,d} distinct states, {:,d} rounds evaluated in {:.1f} s",
    )
    on_level = _layer_note(
        bar, "deep", "deep layer: level {}, {:,d} pairs kept of {:,d} rounds evaluated in {:.1f} s"
    )

    with stop.interruptible():  # pure computation: a Ctrl-C ends it at once
        try:
            selections = _study_selections(study, profile, settings)
            exhaustive = exhaustive_layer(profile, run, settings, on_depth=on_depth)
            baselines = baseline_results(profile, settings.max_depth)
            known = [r.notation for r in exhaustive.results]
            known += [b.result.notation for b in baselines]
            deep = deep_layer(profile, settings, known, on_level=on_level)
            checked = None
            general = selections[len(SELECTION_CHOICES) :]
            if general:
                on_level = _layer_note(
                    bar,
                    "check rounds",
                    "deep layer with check rounds: level {}, {:,d} pairs kept of {:,d} rounds "
                    "evaluated in {:.1f} s",
                )
                linear = [r.notation for r in deep.results if parse_recipe(r.notation).is_linear]
                checked = check_round_layer(
                    profile, settings, known + linear, general, on_level=on_level
                )
        finally:
            release_layer_workers()
    me = worker_identity()
    register_worker(study, me)  # before any trial is asked: see optimise.resume
    done_before = finished_count(study)  # trials asked again below are this run's work
    stale = fail_stale_trials(study, me)
    asked = reask_abandoned(
        study,
        profile,
        max_depth=depth,
        objectives=settings.objectives,
        limits=settings.limits,
        worker=me,
        selections=selections,
    )
    if stale or asked:
        bar.note(
            f"resuming: {len(stale)} trials left running by a stopped process marked "
            f"failed; {len(asked)} recipes of interrupted trials evaluated again"
        )
    if finished_count(study) < settings.n_trials:

        def between():
            checkpoint("enqueue")
            stop.check()

        enqueue_known(
            study,
            [r.notation for r in deep.results]
            + ([r.notation for r in checked.results] if checked is not None else [])
            + known,
            depth,
            between=between,
            selections=selections,
        )
    complete = exhaustive.complete_depth >= depth and is_linear_space(depth) and exhaustive.complete
    tracker = FrontTracker(
        run,
        profile=profile,
        settings=settings,
        recorded=recorded,
        baselines=baselines,
        exhaustive=exhaustive,
        complete=complete,
    )
    tracker.add_layer(deep.space, deep.results, deep.equivalents)
    if checked is not None:
        tracker.add_layer(checked.space, checked.results, checked.equivalents)
    done_now = finished_count(study)
    tracker.add_trials(study.get_trials(deepcopy=False))
    tracker.write(done_now)
    timeout_s = settings.timeout_s
    left = None if timeout_s is None else max(0.0, timeout_s - (time.monotonic() - started))
    bar.total, bar.done = settings.n_trials, done_now
    if bar.deadline is not None:
        bar.deadline = time.monotonic() + (left or 0.0)
    with bar:
        bar.update(done_now, tracker.best_fidelity(), tracker.size())
        if budget_used(study) < settings.n_trials and (left is None or left > 0):
            try:
                if settings.workers == 1:
                    shared = others_may_write(spec, run, settings.workers)
                    _optimize_here(
                        study, profile, settings, shared, left, tracker, bar, stop, selections
                    )
                else:
                    _optimize_workers(
                        spec, run, settings, profile, left, tracker, bar, stop, selections
                    )
            finally:
                tracker.add_trials(study.get_trials(deepcopy=False))
                tracker.write(finished_count(study))
    stop.check()
    total = finished_count(study)
    front = tracker.results()
    target = None
    if settings.target_fidelity is not None:
        target = cheapest_reaching(
            front, settings.target_fidelity, settings.limits, space=tracker.space_sentence
        )
        tracker.target = target
    tracker.write(total)
    return SearchOutcome(
        run_dir=run.folder,
        front=front,
        baselines=baselines,
        n_trials_total=total,
        n_trials_this_run=total - done_before,
        complete_depth=exhaustive.complete_depth,
        target=target,
    )


class _Between:
    """Called after every trial: stops the process's loop at the budget or when asked.

    Parameters
    ----------
    n_trials : int
        The study's budget.
    shared : bool
        Other processes may add trials: count the study's finished and running
        trials after each trial (one process alone needs no recount: optuna's own
        ``n_trials`` is exact).
    asked_to_stop : callable () -> bool
        A Ctrl-C, or (a worker) a stop from the parent or the parent's death.
    """

    def __init__(self, n_trials: int, shared: bool, asked_to_stop, after=None):
        self.n_trials = n_trials
        self.shared = shared
        self.asked_to_stop = asked_to_stop
        self.after = after

    def __call__(self, study, trial):
        checkpoint("trial")
        if self.after is not None:
            self.after(study, trial)
        if self.asked_to_stop() or (self.shared and budget_used(study) >= self.n_trials):
            study.stop()


SELECTIONS_ATTR = "selections"


def _study_selections(study, profile, settings) -> tuple[str, ...]:
    """The step kinds the study samples, fixed when the study is first opened.

    The built-in kinds, and with ``--check-rounds`` the rounds offered
    (:func:`optimise.seeding.study_selections`), stored on the study: a resumed
    run and every worker read the same choices back, whatever the catalogue
    cache holds by then.
    """
    if settings.check_rounds is None:
        return SELECTION_CHOICES
    stored = study.user_attrs.get(SELECTIONS_ATTR)
    if stored is None:
        stored = list(study_selections(profile, settings))
        study.set_user_attr(SELECTIONS_ATTR, stored)
    return tuple(stored)


def _objective(profile, settings: SearchSettings, shared: bool, selections) -> Objective:
    return Objective(
        profile,
        max_depth=settings.depth_cap,
        objectives=settings.objectives,
        limits=settings.limits,
        shared=shared,
        selections=selections,
    )


def worker_offset(study, me: dict) -> int:
    """Which seeds this process draws from, on a storage shared with other processes.

    The number of other processes registered on the study and not known to be gone
    (see :mod:`optimise.resume`): a lone process draws as a single worker does (0),
    so its run is reproducible; processes working at the same time draw apart.
    """
    others = registered_workers(study, besides=me)
    here = socket.gethostname()
    return sum(1 for w in others if w.get("host") != here or is_running(w))


def _explorer(settings, tracker, selections):
    """After each trial: queue neighbours of the front when due (:mod:`optimise.explore`)."""
    explorer = FrontExplorer(settings.depth_cap, settings.n_trials, selections)

    def notations():
        return [e["recipe"] for e in tracker.entries()]

    return lambda study: explorer(study, notations, len(tracker.finished))


def others_may_write(spec: StorageSpec, run: Run, workers: int) -> bool:
    """Whether processes other than this search may add trials to its study.

    A storage file in the run folder is used only by the search that holds the
    folder's lock and its own workers: one process alone there need not count the
    study again after each trial.
    """
    if not spec.shared:
        return False
    if workers > 1 or spec.kind == "rdb":
        return True
    return Path(spec.target).parent != run.folder.resolve()


def _optimize_here(study, profile, settings, shared, left, tracker, bar, stop, selections):
    if shared:
        offset = worker_offset(study, worker_identity())
        study.sampler = SlotSeededSampler(settings.sampler_settings, worker=offset)
    explore = _explorer(settings, tracker, selections)
    explore(study)

    def after(study, trial):
        if tracker.add_trial(trial):
            tracker.write(None)
        explore(study)
        bar.update(bar.done + 1, tracker.best_fidelity(), tracker.size())

    study.optimize(
        _objective(profile, settings, shared, selections),
        n_trials=max(0, settings.n_trials - budget_used(study)),
        timeout=left,
        callbacks=[_Between(settings.n_trials, shared, lambda: stop.requested, after)],
        catch=(ValueError, ArithmeticError),
    )


@dataclass(frozen=True)
class WorkerJob:
    """What a local worker process needs (pickled to it by ``multiprocessing``)."""

    settings: SearchSettings
    profile: dict
    storage: StorageSpec
    run_dir: str
    worker: int
    timeout_s: float | None
    parent_pid: int = 0
    offset: int = 0


def worker_main(job: WorkerJob, stop_event=None) -> int:
    """Entry point of a local worker process (see :func:`_optimize_workers`).

    The worker stops after its current trial when ``stop_event`` is set or its
    parent (``job.parent_pid``) is gone.
    """
    from models.profile import Profile

    optuna.logging.set_verbosity(optuna.logging.WARNING)
    profile = Profile.from_dict(job.profile)
    settings = job.settings
    run = Run(job.run_dir)
    worker = job.offset * settings.workers + job.worker
    study = _open_study(open_resolved(job.storage), job.storage, run, settings, profile, worker)
    register_worker(study, worker_identity())

    def asked_to_stop():
        gone = job.parent_pid and not parent_alive(job.parent_pid)
        return bool(gone or (stop_event is not None and stop_event.is_set()))

    if asked_to_stop() or budget_used(study) >= settings.n_trials:
        return 0
    study.optimize(
        _objective(profile, settings, True, _study_selections(study, profile, settings)),
        n_trials=None,
        timeout=job.timeout_s,
        callbacks=[_Between(settings.n_trials, True, asked_to_stop)],
        catch=(ValueError, ArithmeticError),
    )
    return 0


def _worker_entry(job, stop_event):
    # the parent handles Ctrl-C and tells the workers through stop_event
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    try:
        worker_main(job, stop_event)
    except Exception as error:  # one line, the parent reports the exit code
        print(f"stillroom: worker {job.worker}: {type(error).__name__}: {error}", file=sys.stderr)
        sys.exit(1)


def _optimize_workers(spec, run, settings, profile, left, tracker, bar, stop, selections):
    context = multiprocessing.get_context("spawn")
    stop_event = context.Event()
    monitor = _open_study(open_resolved(spec), spec, run, settings, profile)
    offset = worker_offset(monitor, worker_identity())
    jobs = [
        WorkerJob(settings, profile.to_dict(), spec, str(run.folder), i, left, os.getpid(), offset)
        for i in range(settings.workers)
    ]
    processes = [
        context.Process(target=_worker_entry, args=(job, stop_event), daemon=False) for job in jobs
    ]
    for p in processes:
        p.start()
    explore = _explorer(settings, tracker, selections)
    try:
        while any(p.is_alive() for p in processes):
            if stop.requested:
                stop_event.set()  # each worker ends its trial, then stops
            for p in processes:
                p.join(timeout=POLL_S / len(processes))
            trials = monitor.get_trials(deepcopy=False)
            if tracker.add_trials(trials):
                tracker.write(None)
            explore(monitor)
            bar.update(len(tracker.finished), tracker.best_fidelity(), tracker.size())
    finally:
        stop_event.set()
        for p in processes:
            p.join(timeout=30)
        for p in processes:
            if p.is_alive():
                p.terminate()
    stop.check()
    failed = [p.exitcode for p in processes if p.exitcode not in (0, None)]
    if failed:
        raise RunError(
            f"{len(failed)} of {settings.workers} workers stopped with an error (exit codes "
            f"{failed}); run the same command again to resume"
        )
