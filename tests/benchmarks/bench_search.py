"""Exhaustive-layer speed and optuna search quality, measured and printed side by side.

Run from anywhere (pytest ignores this folder)::

    python tests/benchmarks/bench_search.py [--depth 6] [--budget 600] [--jobs 2]
        [--quality-depth 3] [--samplers nsga2,tpe,random] [--seeds 3]
        [--skip-speed] [--skip-quality]

1. Exhaustive layer on a Werner input (F = 0.8) with noisy two-qubit gates and
   measurements (p = eta = 0.99), once with perfect single-qubit rotations (the
   Duer-Briegel assumption, where relabelled states merge) and once with noisy
   ones (p1 = 0.99, no relabelling merge): wall time, distinct states and rounds
   evaluated per depth, depth by depth up to ``--depth``. A depth whose estimated
   time (rounds per state of the previous depth times its states, at the
   measured rate) exceeds what is left of ``--budget`` seconds is not run; its
   estimate is printed instead, marked as such.
2. Quality at ``--quality-depth``, where the exhaustive front is known: the
   hypervolume (fidelity above the raw pair's, yield above 0) that NSGA-II, TPE
   and random sampling (optuna's RandomSampler) reach over the same linear space
   with 1%, 2% and 5% of the exhaustive layer's evaluations (one evaluation = one
   round evaluated; a trial of d rounds costs d), as a percentage of the
   exhaustive front's hypervolume. The samplers are not seeded with any known
   recipe (a real search is: it starts from the exhaustive front). Mean and range
   over the seeds. TPE's cost per trial grows with the trials done: at depth 3
   (about 6,000 trials for 5%) it takes of the order of 15 minutes per seed.

Speed is never asserted in a test.
"""

from __future__ import annotations

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ[_var] = "1"

import argparse  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))  # the repository root

import numpy as np  # noqa: E402
import optuna  # noqa: E402

from models.evaluate import evaluate  # noqa: E402
from models.noise import NodeNoise  # noqa: E402
from models.profile import Profile  # noqa: E402
from models.states import werner  # noqa: E402
from optimise.exhaustive import exhaustive_front  # noqa: E402
from optimise.pareto import hypervolume_2d  # noqa: E402
from optimise.samplers import SlotSeededSampler, sampler_settings  # noqa: E402
from optimise.space import suggest_recipe  # noqa: E402

PROFILES = {
    "p1 = 1   ": Profile(
        tuple(werner(0.8)), NodeNoise(two_qubit=0.99, single_qubit=1.0, measurement=0.99)
    ),
    "p1 = 0.99": Profile(
        tuple(werner(0.8)), NodeNoise(two_qubit=0.99, single_qubit=0.99, measurement=0.99)
    ),
}


def speed(depth_goal: int, budget_s: float, jobs: int) -> None:
    print(
        f"1. exhaustive layer, Werner F = 0.8, p = eta = 0.99, {jobs} worker processes, "
        f"budget {budget_s:g} s per profile"
    )
    print(
        f"{'profile':10s} {'depth':>5s} {'distinct states':>16s} {'rounds evaluated':>17s} "
        f"{'time (s)':>10s} {'front':>6s}"
    )
    for name, profile in PROFILES.items():
        started = time.monotonic()
        states, evals, level_s = [], [], []  # per depth: states, rounds, time of that depth
        for depth in range(1, depth_goal + 1):
            if depth >= 3 and evals[-1] >= 100_000:
                # estimate: rounds per state and growth of states as at the last depth,
                # at the rate measured there
                per_state = evals[-1] / max(states[-2], 1)
                growth = states[-1] / max(states[-2], 1)
                rate = evals[-1] / max(level_s[-1], 1e-9)
                est_evals = per_state * states[-1]
                left = budget_s - (time.monotonic() - started)
                if est_evals / rate > left:
                    est_states = states[-1] * growth
                    for deeper in range(depth, depth_goal + 1):
                        print(
                            f"{name:10s} {deeper:5d} {f'~{est_states:.2g} (est.)':>16s} "
                            f"{f'~{est_evals:.2g} (est.)':>17s} "
                            f"{f'~{est_evals / rate:.2g} (est.)':>10s} {'-':>6s}   not run: "
                            f"over the budget at {rate:,.0f} rounds/s"
                        )
                        est_evals *= growth
                        est_states *= growth
                    break
            t0 = time.monotonic()
            per_depth = {}

            def record(d, n, e, sec, per_depth=per_depth):
                per_depth[d] = sec

            front = exhaustive_front(profile, max_depth=depth, n_jobs=jobs, on_depth=record)
            dt = time.monotonic() - t0
            states.append(front.states_per_depth[-1])
            evals.append(front.evaluations_per_depth[-1])
            level_s.append(per_depth[depth])
            print(
                f"{name:10s} {depth:5d} {states[-1]:16,d} {evals[-1]:17,d} {dt:10.2f} "
                f"{len(front.results):6d}   symmetry merge: {front.symmetry}",
                flush=True,
            )
    print("   (time: the whole search up to that depth;")
    print("    distinct states: after merging, at that depth)")


def hypervolume(results, profile) -> float:
    pts = np.array([[r.fidelity, r.pair_yield] for r in results])
    return hypervolume_2d(pts, (profile.raw_pair[0], 0.0))


SHARES = (0.01, 0.02, 0.05)


def sampled_hypervolumes(profile, depth, sampler_name, seed, budgets):
    """Hypervolume of the trials so far when the rounds spent first reach each budget."""
    settings = sampler_settings(sampler_name, seed)
    study = optuna.create_study(
        directions=["maximize", "maximize"], sampler=SlotSeededSampler(settings)
    )
    spent = {"rounds": 0}
    found, at = [], []

    def objective(trial):
        recipe = suggest_recipe(trial, depth, nested=False)
        result = evaluate(recipe, profile)
        spent["rounds"] += recipe.depth
        found.append(result)
        return result.fidelity, result.pair_yield

    def checkpoint(study, trial):
        while len(at) < len(budgets) and spent["rounds"] >= budgets[len(at)]:
            at.append((hypervolume(found, profile), len(found)))
        if len(at) == len(budgets):
            study.stop()

    study.optimize(objective, callbacks=[checkpoint])
    return at


NAMES = {"nsga2": "NSGA-II", "tpe": "TPE", "random": "random"}


def quality(depth: int, jobs: int, samplers=("nsga2", "tpe", "random"), seeds=(0, 1, 2)) -> None:
    optuna.logging.set_verbosity(optuna.logging.WARNING)
    profile = PROFILES["p1 = 0.99"]
    front = exhaustive_front(profile, max_depth=depth, n_jobs=jobs)
    total = sum(front.evaluations_per_depth)
    reference = hypervolume(front.results, profile)
    print(
        f"\n2. quality at depth {depth} (p1 = 0.99): exhaustive front "
        f"{len(front.results)} recipes, "
        f"{total:,d} rounds evaluated, hypervolume {reference:.6g} (= 100%)"
    )
    budgets = [int(share * total) for share in SHARES]
    table = {}
    for sampler in samplers:
        t0 = time.monotonic()
        runs = [sampled_hypervolumes(profile, depth, sampler, seed, budgets) for seed in seeds]
        table[sampler] = runs
        print(f"   {sampler}: {time.monotonic() - t0:.0f} s for {len(seeds)} seeds", flush=True)
    print(
        f"{'budget (rounds)':>16s} {'trials':>7s} " + " ".join(f"{NAMES[s]:>22s}" for s in samplers)
    )
    for i, (share, budget) in enumerate(zip(SHARES, budgets, strict=True)):
        cells = []
        for sampler in samplers:
            ratios = [100 * run[i][0] / reference for run in table[sampler]]
            cells.append(f"{np.mean(ratios):6.2f}% [{min(ratios):5.1f}, {max(ratios):5.1f}]")
        trials = table[samplers[-1]][0][i][1]
        print(
            f"{f'{share:.0%} = {budget:,d}':>16s} {trials:7d} "
            + " ".join(f"{c:>22s}" for c in cells)
        )
    print(
        f"   (percent of the exhaustive hypervolume, mean over seeds {list(seeds)} [min, max];"
        f" trials: {NAMES[samplers[-1]]}, seed 0)"
    )


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--depth", type=int, default=6)
    parser.add_argument("--budget", type=float, default=600.0, help="seconds per profile")
    parser.add_argument("--jobs", type=int, default=2)
    parser.add_argument("--quality-depth", type=int, default=3)
    parser.add_argument("--skip-quality", action="store_true")
    parser.add_argument("--skip-speed", action="store_true")
    parser.add_argument("--seeds", type=int, default=3, help="seeds 0 .. N-1 per sampler")
    parser.add_argument(
        "--samplers",
        default="nsga2,tpe,random",
        help="comma-separated, of nsga2, tpe, random (TPE is the slowest)",
    )
    args = parser.parse_args(argv)
    if not args.skip_speed:
        speed(args.depth, args.budget, args.jobs)
    if not args.skip_quality:
        quality(
            args.quality_depth, args.jobs, tuple(args.samplers.split(",")), tuple(range(args.seeds))
        )
    return 0


if __name__ == "__main__":
    sys.exit(main())
