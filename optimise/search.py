"""The search driver: the exhaustive layer, then a resumable optuna study beyond it.

:func:`run_search` is what ``stillroom search`` calls. Everything it does lives in
the run folder (:mod:`optimise.runfolder`) and the study storage
(:mod:`optimise.storage`), so running the same call again resumes: ``n_trials`` is
the total budget, trials of a killed process are failed and asked again
(:mod:`optimise.resume`), and each trial's recipe is drawn from a seed derived
from the run's seed and the trial's place (:mod:`optimise.samplers`), so a
single-worker run gives the same trials however often it was interrupted.
"""

from __future__ import annotations

import multiprocessing
import time
from dataclasses import dataclass
from numbers import Integral, Real
from pathlib import Path

import optuna

from . import runfolder
from .errors import InputError, RunError
from .fronts import FrontTracker, baseline_results
from .limits import Limits, as_limits
from .objective import Objective, check_objectives, directions, worker_identity
from .progress import SearchProgress
from .resume import fail_stale_trials, reask_abandoned
from .samplers import SAMPLERS, SlotSeededSampler, finished_count, sampler_settings
from .seeding import enqueue_known, exhaustive_layer
from .space import describe_space, is_linear_space
from .storage import open_resolved, resolve_storage
from .targets import TargetAnswer, cheapest_reaching

__all__ = ["Limits", "SearchOutcome", "run_search", "load_run"]

STUDY_PREFIX = "stillroom-"
MAX_DEPTH_LIMIT = 12
POLL_S = 1.0


@dataclass
class SearchOutcome:
    """What :func:`run_search` found.

    Attributes
    ----------
    run_dir : Path
    front : list of RecipeResult, fidelity descending
    baselines : list of RecipeResult, every textbook baseline at each depth 1..max_depth
    n_trials_total : int
        Finished trials in the study (all runs and workers).
    n_trials_this_run : int
    complete_depth : int
        The front is complete for all linear recipes up to this depth.
    target : TargetAnswer or None
    """

    run_dir: Path
    front: list
    baselines: list
    n_trials_total: int
    n_trials_this_run: int
    complete_depth: int
    target: TargetAnswer | None


load_run = runfolder.load_run


def _check_int(name, value, low, high=None, meaning=""):
    if (
        isinstance(value, bool)
        or not isinstance(value, Integral)
        or value < low
        or (high is not None and value > high)
    ):
        span = f"[{low}, {high}]" if high is not None else f"[{low}, inf)"
        raise InputError(f"{name} = {value!r} is outside {span}; it is {meaning}")
    return int(value)


def _validate(
    max_depth, n_trials, timeout_s, seed, sampler, workers, exhaustive_depth, target_fidelity
):
    _check_int("max_depth", max_depth, 1, MAX_DEPTH_LIMIT, "the most rounds a recipe may have")
    _check_int("n_trials", n_trials, 0, None, "the total number of optuna trials")
    _check_int("seed", seed, 0, 2**32 - 1, "the seed of the samplers")
    _check_int("workers", workers, 1, 256, "the number of local worker processes")
    if exhaustive_depth is not None:
        _check_int(
            "exhaustive_depth",
            exhaustive_depth,
            0,
            max_depth,
            "the depth up to which every linear recipe is evaluated (None: automatic)",
        )
    if timeout_s is not None and (
        isinstance(timeout_s, bool) or not isinstance(timeout_s, Real) or not timeout_s > 0
    ):
        raise InputError(f"timeout_s = {timeout_s!r} must be a wall time in seconds > 0, or None")
    if sampler not in SAMPLERS:
        raise InputError(f"sampler = {sampler!r} is not one of {', '.join(SAMPLERS)}")
    if target_fidelity is not None and (
        isinstance(target_fidelity, bool)
        or not isinstance(target_fidelity, Real)
        or not 0 < target_fidelity <= 1
    ):
        raise InputError(f"target_fidelity = {target_fidelity!r} is outside (0, 1]")


def _storage_for(storage, run_dir: Path, workers: int, recorded: dict | None, note):
    """Resolve the storage, honouring the one a run folder already uses."""
    shared = workers > 1
    if storage is None and recorded is not None:
        kept = recorded.get("storage", "")
        if "://" in kept and not kept.startswith("sqlite:///"):
            raise RunError(
                f"run folder {run_dir} keeps its study in {kept}; pass that storage URL again "
                "(with its password) to resume it"
            )
        spec = resolve_storage(kept if "/" in kept or ":" in kept else run_dir / kept, run_dir)
    else:
        spec = resolve_storage(storage, run_dir, shared=shared)
        if storage is None and shared:
            note(
                f"{workers} workers: SQLite serves one process, so the study is kept in the "
                f"journal file {Path(spec.target).name} in the run folder"
            )
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
    profile,
    *,
    run_dir,
    max_depth=6,
    n_trials=200,
    timeout_s=None,
    seed=0,
    sampler="nsga2",
    storage=None,
    workers=1,
    objectives=("fidelity", "yield"),
    limits=None,
    exhaustive_depth=None,
    target_fidelity=None,
    progress=True,
) -> SearchOutcome:
    """Search recipes for a profile; resumable (run the same call again to go on).

    Parameters
    ----------
    profile : models.Profile
    run_dir : path of the run folder (``runs/<name>``)
    max_depth : int
        Most rounds in a recipe's main chain.
    n_trials : int
        Total optuna trials of the study, counting earlier runs (it may grow).
    timeout_s : float or None
        Wall-time budget of this call.
    seed : int
    sampler : ``"nsga2"`` (default), ``"tpe"`` or ``"random"``
    storage : None (SQLite in the run folder), a path, a URL or ``journal:PATH``
    workers : int
        Local worker processes (each seeded ``seed + i``); more than one needs a
        storage they can share (by default a journal file in the run folder).
    objectives : tuple, ``fidelity`` and ``yield``, optionally ``memory``, ``time``
    limits : Limits, dict or None
    exhaustive_depth : int, None (automatic: what takes seconds) or 0 (none)
    target_fidelity : float or None
    progress : bool
        Show a progress bar on stderr.

    Returns
    -------
    SearchOutcome
    """
    started = time.monotonic()
    _validate(
        max_depth, n_trials, timeout_s, seed, sampler, workers, exhaustive_depth, target_fidelity
    )
    try:
        objectives = check_objectives(objectives)
        limits = as_limits(limits)
    except ValueError as error:
        raise InputError(str(error)) from error
    run_dir = Path(run_dir)
    bar = SearchProgress(n_trials, 0, timeout_s, enabled=progress)
    spec = _storage_for(storage, run_dir, workers, runfolder.recorded_settings(run_dir), bar.note)
    sampling = sampler_settings(sampler, seed)
    depth_cap = max_depth if limits.max_depth is None else min(max_depth, limits.max_depth)
    settings = {
        "max_depth": max_depth,
        "objectives": list(objectives),
        "limits": limits.to_dict(),
        "exhaustive_depth": exhaustive_depth,
        "seed": seed,
        "sampler": sampling,
        "storage": _recorded_storage(spec, run_dir),
        "space": describe_space(depth_cap),
        "n_trials": n_trials,
        "timeout_s": timeout_s,
        "workers": workers,
        "target_fidelity": target_fidelity,
    }
    settings, _ = runfolder.prepare_run_dir(run_dir, settings, profile.to_dict())
    verbosity = optuna.logging.get_verbosity()
    optuna.logging.set_verbosity(optuna.logging.WARNING)
    try:
        return _search(
            profile,
            run_dir,
            settings,
            spec,
            depth_cap,
            objectives,
            limits,
            workers,
            timeout_s,
            started,
            target_fidelity,
            bar,
        )
    finally:
        optuna.logging.set_verbosity(verbosity)


def _open_study(spec, run_dir: Path, settings: dict, profile, objectives, worker=0):
    storage = open_resolved(spec)
    name = STUDY_PREFIX + run_dir.name
    study = optuna.create_study(
        storage=storage,
        study_name=name,
        directions=directions(objectives),
        sampler=SlotSeededSampler(settings["sampler"], worker=worker),
        load_if_exists=True,
    )
    identity = {k: settings[k] for k in ("max_depth", "objectives", "limits", "seed", "sampler")}
    identity["profile"] = profile.to_dict()
    attrs = study.user_attrs
    if "stillroom" not in attrs:
        study.set_user_attr("stillroom", identity)
        study.set_user_attr("sampler", settings["sampler"])
    elif not runfolder._same(attrs["stillroom"], identity):
        raise RunError(
            f"study {name!r} in {spec.describe()} was started by a search with other settings "
            f"or another profile. {runfolder.new_run_hint(run_dir)}."
        )
    return study


def _search(
    profile,
    run_dir,
    settings,
    spec,
    depth,
    objectives,
    limits,
    workers,
    timeout_s,
    started,
    target_fidelity,
    bar,
) -> SearchOutcome:
    n_trials = settings["n_trials"]
    on_depth = None
    if bar.enabled:

        def on_depth(d, states, evaluations, seconds):
            bar.note(
                f"exhaustive layer: depth {d}, {states:,d} distinct states, "
                f"{evaluations:,d} rounds evaluated in {seconds:.1f} s"
            )

    exhaustive = exhaustive_layer(
        profile, run_dir, settings, depth, objectives, limits, on_depth=on_depth
    )
    baselines = baseline_results(profile, settings["max_depth"])
    study = _open_study(spec, run_dir, settings, profile, objectives)
    done_before = finished_count(study)  # trials asked again below are this run's work
    stale = fail_stale_trials(study)
    asked = reask_abandoned(
        study,
        profile,
        max_depth=depth,
        objectives=objectives,
        limits=limits,
        worker=worker_identity(),
    )
    if stale or asked:
        bar.note(
            f"resuming: {len(stale)} trials left running by a stopped process marked "
            f"failed; {len(asked)} recipes of interrupted trials evaluated again"
        )
    if finished_count(study) < n_trials:
        enqueue_known(
            study,
            [r.notation for r in exhaustive.results] + [b.notation for b, _, _ in baselines],
            depth,
        )
    complete = exhaustive.complete_depth >= depth and is_linear_space(depth) and exhaustive.complete
    tracker = FrontTracker(
        run_dir,
        profile=profile,
        settings=settings,
        objectives=objectives,
        limits=limits,
        baselines=baselines,
        exhaustive=exhaustive,
        complete=complete,
        max_depth=depth,
    )
    done_now = finished_count(study)
    tracker.add_trials(study.get_trials(deepcopy=False))
    tracker.write(done_now)
    remaining = max(0, n_trials - done_now)
    left = None if timeout_s is None else max(0.0, timeout_s - (time.monotonic() - started))
    bar.total, bar.done = n_trials, done_now
    if bar.deadline is not None:
        bar.deadline = time.monotonic() + (left or 0.0)
    with bar:
        bar.update(done_now, tracker.best_fidelity(), tracker.size())
        if remaining > 0 and (left is None or left > 0):
            try:
                if workers == 1:
                    _optimize_here(
                        study,
                        profile,
                        settings,
                        depth,
                        objectives,
                        limits,
                        remaining,
                        left,
                        tracker,
                        bar,
                    )
                else:
                    _optimize_workers(
                        spec,
                        run_dir,
                        settings,
                        profile,
                        depth,
                        objectives,
                        limits,
                        workers,
                        left,
                        tracker,
                        bar,
                    )
            finally:
                tracker.add_trials(study.get_trials(deepcopy=False))
                tracker.write(finished_count(study))
    total = finished_count(study)
    front = tracker.results()
    target = None
    if target_fidelity is not None:
        target = cheapest_reaching(front, target_fidelity, limits, space=tracker.space_sentence)
        tracker.target = target
    tracker.write(total)
    return SearchOutcome(
        run_dir=run_dir,
        front=front,
        baselines=[b for b, _, _ in baselines],
        n_trials_total=total,
        n_trials_this_run=total - done_before,
        complete_depth=exhaustive.complete_depth,
        target=target,
    )


class _BudgetStop:
    """Stops a worker once the study holds ``n_trials`` finished trials."""

    def __init__(self, n_trials: int):
        self.n_trials = n_trials

    def __call__(self, study, trial):
        if finished_count(study) >= self.n_trials:
            study.stop()


def _optimize_here(
    study, profile, settings, depth, objectives, limits, remaining, left, tracker, bar
):
    objective = Objective(profile, max_depth=depth, objectives=objectives, limits=limits)

    def after(study, trial):
        if tracker.add_trial(trial):
            tracker.write(None)
        bar.update(bar.done + 1, tracker.best_fidelity(), tracker.size())

    # one process: the remaining count is exact, no need to recount the study per trial
    study.optimize(
        objective,
        n_trials=remaining,
        timeout=left,
        callbacks=[after],
        catch=(ValueError, ArithmeticError),
    )


def worker_main(job: dict) -> int:
    """Entry point of a local worker process (see :func:`_optimize_workers`)."""
    from models.profile import Profile

    from .storage import StorageSpec

    optuna.logging.set_verbosity(optuna.logging.WARNING)
    profile = Profile.from_dict(job["profile"])
    limits = Limits(**job["limits"])
    spec = StorageSpec(job["kind"], job["target"])
    study = _open_study(
        spec,
        Path(job["run_dir"]),
        job["settings"],
        profile,
        job["objectives"],
        worker=job["worker"],
    )
    objective = Objective(
        profile, max_depth=job["depth"], objectives=job["objectives"], limits=limits
    )
    remaining = job["settings"]["n_trials"] - finished_count(study)
    if remaining <= 0:
        return 0
    study.optimize(
        objective,
        n_trials=remaining,
        timeout=job["timeout_s"],
        callbacks=[_BudgetStop(job["settings"]["n_trials"])],
        catch=(ValueError, ArithmeticError),
    )
    return 0


def _worker_entry(job):
    try:
        worker_main(job)
    except KeyboardInterrupt:
        pass


def _optimize_workers(
    spec, run_dir, settings, profile, depth, objectives, limits, workers, left, tracker, bar
):
    context = multiprocessing.get_context("spawn")
    jobs = [
        {
            "kind": spec.kind,
            "target": spec.target,
            "run_dir": str(run_dir),
            "settings": settings,
            "profile": profile.to_dict(),
            "objectives": list(objectives),
            "limits": limits.to_dict(),
            "depth": depth,
            "worker": i,
            "timeout_s": left,
        }
        for i in range(workers)
    ]
    processes = [context.Process(target=_worker_entry, args=(job,), daemon=False) for job in jobs]
    for p in processes:
        p.start()
    monitor = _open_study(spec, run_dir, settings, profile, objectives)
    try:
        while any(p.is_alive() for p in processes):
            for p in processes:
                p.join(timeout=POLL_S / len(processes))
            trials = monitor.get_trials(deepcopy=False)
            if tracker.add_trials(trials):
                tracker.write(None)
            bar.update(finished_count(monitor), tracker.best_fidelity(), tracker.size())
    except KeyboardInterrupt:
        for p in processes:
            p.join(timeout=10)  # the workers got the same Ctrl-C and fail their trials
        for p in processes:
            if p.is_alive():
                p.terminate()
        raise
    failed = [p.exitcode for p in processes if p.exitcode not in (0, None)]
    if failed:
        raise RunError(
            f"{len(failed)} of {workers} workers stopped with an error (exit codes {failed}); "
            "run the same command again to resume"
        )
