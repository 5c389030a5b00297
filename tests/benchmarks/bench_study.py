"""Where a study's time goes, per storage, and whether a trial's cost grows with the study.

Run from anywhere (pytest ignores this folder)::

    python tests/benchmarks/bench_study.py [--trials 2000] [--window 500]
        [--storages sqlite,journal-synced,journal] [--workers]

1. For each storage, the demo profile's study alone (no exhaustive or deep layer:
   the sampler, the objective and the storage, as ``stillroom search`` runs them)
   for ``--trials`` trials, side by side: trials per second, the share of the
   time spent in the physics (``models.evaluate.evaluate``), in the storage
   (every call on the study's storage object) and in the rest (the sampler,
   optuna's own loop, our callbacks), and the mean time of a trial in the first
   and the last ``--window`` trials (their ratio: 1.0 means the cost does not
   grow with the study). ``sqlite`` is SQLite in WAL mode, ``journal-synced`` is
   optuna's journal file as shipped (a disk sync after every record),
   ``journal`` is stillroom's default (:func:`optimise.storage.journal_backend`).
2. ``--workers``: the whole default demo search (``stillroom search``) with one
   and with two local workers, each in a fresh run folder, ``--repeats`` times
   interleaved (the best of each side is compared), wall times and their
   ratio.

Times are wall-clock on whatever else the machine is doing: the load average is
printed beside them. Nothing here is asserted.
"""

from __future__ import annotations

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ[_var] = "1"

import argparse  # noqa: E402
import subprocess  # noqa: E402
import sys  # noqa: E402
import tempfile  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

import optuna  # noqa: E402

import optimise.objective as objective_module  # noqa: E402
from optimise.limits import Limits  # noqa: E402
from optimise.objective import Objective  # noqa: E402
from optimise.objectives import directions  # noqa: E402
from optimise.profiles import demo_profile  # noqa: E402
from optimise.samplers import SlotSeededSampler  # noqa: E402
from optimise.settings import sampler_settings  # noqa: E402
from optimise.storage import open_storage  # noqa: E402

STORAGE_METHODS = (
    "create_new_trial",
    "set_trial_param",
    "set_trial_state_values",
    "set_trial_intermediate_value",
    "set_trial_user_attr",
    "set_trial_system_attr",
    "get_trial",
    "get_all_trials",
    "get_n_trials",
    "get_best_trial",
    "get_study_user_attrs",
    "get_study_system_attrs",
    "get_study_directions",
    "get_trial_id_from_study_id_trial_number",
    "get_trial_number_from_id",
    "get_trial_param",
    "set_study_user_attr",
    "set_study_system_attr",
    "check_trial_is_updatable",
)


class Clock:
    """Seconds spent inside wrapped callables."""

    def __init__(self):
        self.seconds = 0.0
        self.depth = 0  # nested calls (a storage method calling another) count once

    def wrap(self, fn):
        def timed(*args, **kwargs):
            self.depth += 1
            start = time.perf_counter()
            try:
                return fn(*args, **kwargs)
            finally:
                self.depth -= 1
                if self.depth == 0:
                    self.seconds += time.perf_counter() - start

        return timed


def _storage(kind: str, folder: Path):
    if kind == "sqlite":
        return open_storage(folder / "study.db", folder)
    if kind == "journal":
        return open_storage(folder / "study.journal", folder)
    if kind == "journal-synced":
        backend = optuna.storages.journal.JournalFileBackend(str(folder / "synced.journal"))
        return optuna.storages.JournalStorage(backend)
    raise ValueError(f"storage {kind!r} is not one of sqlite, journal-synced, journal")


def study_alone(kind: str, n_trials: int, window: int) -> dict:
    """Run the demo's study alone on one storage; time shares and the trial-cost growth."""
    profile = demo_profile()
    with tempfile.TemporaryDirectory() as tmp:
        study = optuna.create_study(
            storage=_storage(kind, Path(tmp)),
            study_name="bench",
            directions=directions(("fidelity", "yield")),
            sampler=SlotSeededSampler(sampler_settings("nsga2", 0)),
        )
        storage_clock, physics_clock = Clock(), Clock()
        inner = study._storage  # the object optuna calls (a cache around an RDB, or the journal)
        for name in STORAGE_METHODS:
            if hasattr(inner, name):
                setattr(inner, name, storage_clock.wrap(getattr(inner, name)))
        evaluate = objective_module.evaluate
        objective_module.evaluate = physics_clock.wrap(evaluate)
        ends = []
        try:
            objective = Objective(profile, max_depth=5, objectives=("fidelity", "yield"),
                                  limits=Limits())  # fmt: skip
            start = time.perf_counter()
            study.optimize(
                objective,
                n_trials=n_trials,
                callbacks=[lambda s, t: ends.append(time.perf_counter())],
                catch=(ValueError, ArithmeticError),
            )
            total = time.perf_counter() - start
        finally:
            objective_module.evaluate = evaluate
    gaps = [b - a for a, b in zip([start, *ends[:-1]], ends, strict=True)]
    first = sum(gaps[:window]) / max(1, len(gaps[:window]))
    last = sum(gaps[-window:]) / max(1, len(gaps[-window:]))
    return {
        "storage": kind,
        "trials": len(ends),
        "seconds": total,
        "physics": physics_clock.seconds / total,
        "storage_share": storage_clock.seconds / total,
        "first_ms": 1e3 * first,
        "last_ms": 1e3 * last,
    }


def whole_search(workers: int) -> float:
    """Wall seconds of ``stillroom search --workers N`` on the demo in a fresh folder."""
    with tempfile.TemporaryDirectory() as tmp:
        start = time.perf_counter()
        subprocess.run(
            [sys.executable, "-m", "optimise.cli", "search", "--no-progress",
             "--workers", str(workers), "--runs-dir", tmp],
            check=True, capture_output=True, cwd=ROOT,
        )  # fmt: skip
        return time.perf_counter() - start


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--trials", type=int, default=2000)
    parser.add_argument("--window", type=int, default=500)
    parser.add_argument("--storages", default="sqlite,journal-synced,journal")
    parser.add_argument("--workers", action="store_true", help="also time 1 and 2 workers")
    parser.add_argument(
        "--repeats", type=int, default=3, help="interleaved runs per side (best is shown)"
    )
    args = parser.parse_args(argv)
    optuna.logging.set_verbosity(optuna.logging.WARNING)
    print(f"load average before: {os.getloadavg()[0]:.2f}")
    print(f"\n== the demo's study alone, {args.trials} trials (NSGA-II, seed 0) ==")
    head = (f"{'storage':<16}{'trials/s':>9}{'physics':>9}{'storage':>9}{'rest':>7}"
            f"{'ms/trial first':>16}{'last':>7}{'last/first':>11}")  # fmt: skip
    print(head)
    rows = [study_alone(k, args.trials, args.window) for k in args.storages.split(",")]
    for r in rows:
        rest = 1 - r["physics"] - r["storage_share"]
        print(
            f"{r['storage']:<16}{r['trials'] / r['seconds']:>9.1f}{r['physics']:>9.0%}"
            f"{r['storage_share']:>9.0%}{rest:>7.0%}{r['first_ms']:>16.1f}{r['last_ms']:>7.1f}"
            f"{r['last_ms'] / r['first_ms']:>11.2f}"
        )
    base = rows[0]
    for r in rows[1:]:
        print(f"{r['storage']} vs {base['storage']}: {base['seconds'] / r['seconds']:.2f}x faster")
    print(f"load average after: {os.getloadavg()[0]:.2f}")
    if args.workers:
        print("\n== the whole default demo search, 1 and 2 local workers ==")
        # interleaved, so that a slower spell of the machine falls on both sides
        runs = {1: [], 2: []}
        for _ in range(args.repeats):
            for workers in runs:
                runs[workers].append(whole_search(workers))
        for workers, times in runs.items():
            print(
                f"{workers} worker{'s' if workers > 1 else ''}: "
                + ", ".join(f"{t:.1f} s" for t in times)
            )
        one, two = min(runs[1]), min(runs[2])
        print(f"best: 1 worker {one:.1f} s, 2 workers {two:.1f} s: {one / two:.2f}x faster")
        print(f"load average after: {os.getloadavg()[0]:.2f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
