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

3. Targets (``--targets``): for five invented profiles (perfect and decaying
   memories, a biased raw pair, a harsh one, the demo), for each target F* in
   0.90 ... 0.995, the cheapest recipe and its raw pairs per output found by (a)
   the best textbook baseline at any depth up to 12, (b) the default search, (c)
   a long reference run (``--long-factor`` times the default budget: trials, and
   the deep layer's width times its square root, its cost growing as the width
   squared), with wall times and load average; the highest fidelity each reaches;
   and whether the deep layer alone (not seeded) finds every point of the
   exhaustive front at ``--coverage-depth``. The raw pair counts as a recipe on
   every side. ``--layers-only`` runs (b) and (c) without the optuna study (the
   exhaustive and deep layers only), for a quick look.

4. Check rounds (``--check-rounds 3:3,4:4``): for the same profiles, the size
   of each catalogue of general check rounds (:mod:`optimise.catalogue`) before
   and after the symmetry reductions, the rounds on its front and the time to
   build it (a fresh cache); then for each target F*, the cheapest recipe with
   today's round types (the best of the textbook baselines and the default
   search) against the cheapest with the new ones (the default search with
   ``--check-rounds``, whose front also holds the first deep pass's), and the
   saving ("today" also holds the recipes without general rounds that the
   second search found: a saving counts only what the new rounds bring). Then
   the one general round on raw pairs that does best against today's cheapest
   recipe of the same fidelity, and per target the cheapest single general
   round on raw pairs that reaches it (column "one general round"), to show
   what a round brings on its own.

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


TARGETS = (0.90, 0.95, 0.97, 0.98, 0.99, 0.995)


def target_profiles() -> dict:
    """Five invented profiles (made-up figures, no real device)."""
    from optimise.profiles import demo_profile

    return {
        "werner-perfect-memory": Profile(
            tuple(werner(0.8)),
            NodeNoise(two_qubit=0.99, single_qubit=1.0, measurement=0.99),
            name="werner-perfect-memory",
        ),
        "decaying-memory": Profile(
            tuple(werner(0.85)),
            NodeNoise(two_qubit=0.99, single_qubit=0.999, measurement=0.99, t1_s=10.0, t2_s=2.0),
            length_km=20.0,
            pair_rate_hz=1000.0,
            name="decaying-memory",
        ),
        "biased-raw-pair": Profile(
            (0.88, 0.01, 0.01, 0.10),
            NodeNoise(two_qubit=0.995, single_qubit=0.999, measurement=0.995),
            name="biased-raw-pair",
        ),
        "harsh": Profile(
            tuple(werner(0.7)),
            NodeNoise(two_qubit=0.97, single_qubit=0.99, measurement=0.98, t1_s=0.5, t2_s=0.2),
            length_km=10.0,
            pair_rate_hz=1000.0,
            name="harsh",
        ),
        "demo": demo_profile(),
    }


def cheapest(results, target):
    """(notation, raw pairs) of the cheapest result reaching ``target``, or None."""
    ok = [r for r in results if r.fidelity >= target]
    if not ok:
        return None
    best = min(ok, key=lambda r: (r.raw_pairs_per_output, len(r.notation), r.notation))
    return best.notation, best.raw_pairs_per_output


def _cell(x, width):
    """A (notation, raw pairs) cell right-aligned in ``width`` columns; '-' for None."""
    if x is None:
        return f"{'-':>{width}}"
    text = x[0] if len(x[0]) <= width - 10 else x[0][: width - 13] + "..."
    return f"{text + f' {x[1]:.4g}':>{width}}"


def best_baselines(profile, max_depth=12):
    from models.baselines import BASELINES, baseline

    raw = evaluate("raw", profile)
    out = [raw]
    for name in BASELINES:
        for depth in range(1, max_depth + 1):
            out.append(evaluate(baseline(name, depth), profile))
    return out


def layered_search(profile, factor: float, layers_only: bool, folder, **changes):
    """The default search (factor 1) or a longer one; returns (results, seconds).

    ``changes``: other settings (such as ``check_rounds``)."""
    from optimise.search import run_search
    from optimise.settings import SearchSettings

    started = time.monotonic()
    defaults = SearchSettings(max_depth=5, n_trials=1000)
    # the deep layer's time grows about as its width squared: factor times longer
    width = int(round(defaults.deep_width * factor**0.5))
    trials = 0 if layers_only else int(defaults.n_trials * factor)
    outcome = run_search(
        profile,
        run_dir=folder,
        settings=defaults.replace(n_trials=trials, deep_width=width, **changes),
        progress=False,
    )
    results = list(outcome.front) + [evaluate("raw", profile)]
    return results, time.monotonic() - started


def coverage(profile, depth: int, width: int):
    """Exhaustive front points at ``depth`` the unseeded deep layer misses."""
    from optimise.deep import deep_front

    exhaustive = exhaustive_front(profile, max_depth=depth, n_jobs=2)
    deep = deep_front(profile, max_depth=depth, width=width)
    found = np.array([[r.fidelity, r.pair_yield] for r in deep.results])
    missed = [
        r.notation
        for r in exhaustive.results
        if not np.any(
            (found[:, 0] >= r.fidelity * (1 - 1e-9)) & (found[:, 1] >= r.pair_yield * (1 - 1e-9))
        )
    ]
    return len(exhaustive.results), missed


def targets(names, long_factor, layers_only, coverage_depth, coverage_width, skip_long) -> None:
    import tempfile

    print("\n== targets: cheapest recipe per target (raw pairs per output) ==")
    print(
        f"(b) default search{' (exhaustive + deep layers only)' if layers_only else ''}; "
        f"(c) {long_factor:g} x the default budget"
    )
    for name, profile in target_profiles().items():
        if names and name not in names:
            continue
        with tempfile.TemporaryDirectory() as tmp:
            t0 = time.monotonic()
            base = best_baselines(profile)
            base_s = time.monotonic() - t0
            load = os.getloadavg()[0]
            default, default_s = layered_search(profile, 1.0, layers_only, Path(tmp) / "default")
            load = max(load, os.getloadavg()[0])
            if skip_long:
                long, long_s = [], float("nan")
            else:
                long, long_s = layered_search(profile, long_factor, layers_only, Path(tmp) / "long")
            load = max(load, os.getloadavg()[0])
        print(
            f"\n-- {name}: wall (a) {base_s:.1f} s, (b) {default_s:.1f} s, (c) {long_s:.1f} s "
            f"(load average up to {load:.2f} on 2 cores)"
        )
        print(f"{'F*':>6}  {'(a) baseline':>34}  {'(b) default':>44}  {'(c) long':>44}  checks")
        for t in TARGETS:
            a, b = cheapest(base, t), cheapest(default, t)
            c = cheapest(long, t) if long else None
            checks = []
            if a is not None:
                checks.append("b<=a" if b is not None and b[1] <= a[1] * (1 + 1e-9) else "b>a!")
            if c is not None:
                checks.append("within 2%" if b is not None and b[1] <= c[1] * 1.02 else "over 2%!")

            print(f"{t:>6}  {_cell(a, 34)}  {_cell(b, 44)}  {_cell(c, 44)}  {' '.join(checks)}")
        top = [max(r.fidelity for r in x) if x else float("nan") for x in (base, default, long)]
        print(f"highest fidelity: (a) {top[0]:.6f}  (b) {top[1]:.6f}  (c) {top[2]:.6f}")
        if coverage_depth:
            n, missed = coverage(profile, coverage_depth, coverage_width)
            print(
                f"deep layer alone (width {coverage_width}) at depth {coverage_depth}: "
                f"finds {n - len(missed)} of {n} "
                "exhaustive front points"
                + (f"; misses {len(missed)}, e.g. {', '.join(missed[:5])}" if missed else "")
            )


def _single_round_rivals(profile, general, front):
    """The general rounds on raw pairs set against ``front`` at their own fidelity.

    For every round of :func:`optimise.deep.general_round_variants` that sacrifices raw
    pairs, as a one-round recipe: its raw pairs per output against those of the
    cheapest recipe of ``front`` reaching its fidelity. Returns the round that
    does best, as (ratio, notation, fidelity, its raw pairs, front's cheapest), or
    None; the highest fidelity one general round reaches on raw pairs; and every
    such one-round result (for the cheapest single round reaching each target).
    """
    from models.recipes import Recipe
    from optimise.deep import general_round_variants

    best, top, singles = None, 0.0, []
    for r in general_round_variants(general):
        if r.sacrificed != "raw" or r.twirl:
            continue
        mine = evaluate(Recipe((r,)), profile)
        singles.append(mine)
        top = max(top, mine.fidelity)
        rival = cheapest(front, mine.fidelity)
        if rival is None:
            continue
        ratio = mine.raw_pairs_per_output / rival[1]
        if best is None or ratio < best[0]:
            best = (ratio, mine.notation, mine.fidelity, mine.raw_pairs_per_output, rival)
    return best, top, singles


def check_rounds(names, spec, layers_only) -> None:
    """Section 4: catalogue sizes, and the saving the general check rounds bring."""
    import tempfile

    from optimise.catalogue import build_catalogue
    from optimise.seeding import check_round_selections
    from optimise.settings import SearchSettings, parse_check_rounds

    print(f"\n== check rounds {spec}: catalogues, and the cheapest recipe per target ==")
    print(
        "today: the best of the textbook baselines, the default search, and the recipes "
        "without general rounds that the search with them found; new: any recipe found"
    )
    for name, profile in target_profiles().items():
        if names and name not in names:
            continue
        print(f"\n-- {name}")
        noise = profile.noise
        for n, g in parse_check_rounds(spec):
            cat = build_catalogue(
                n, g, pair=profile.raw, two_qubit=noise.two_qubit, measurement=noise.measurement
            )
            print(
                f"catalogue {n} pairs, up to {g} CNOTs: {cat.before:,d} circuits enumerated, "
                f"{cat.after:,d} after symmetry reduction, {len(cat.entries)} on the front, "
                f"built in {cat.build_seconds:.1f} s"
            )
        with tempfile.TemporaryDirectory() as tmp:
            os.environ["XDG_CACHE_HOME"] = str(Path(tmp) / "cache")
            general = check_round_selections(
                profile, SearchSettings(check_rounds=spec), directory=None
            )
            base = best_baselines(profile)
            load = os.getloadavg()[0]
            default, default_s = layered_search(profile, 1.0, layers_only, Path(tmp) / "today")
            new, new_s = layered_search(
                profile, 1.0, layers_only, Path(tmp) / "new", check_rounds=spec
            )
            load = max(load, os.getloadavg()[0])
        today = base + default + [r for r in new if "{" not in r.notation]
        print(
            f"search without check rounds {default_s:.1f} s, with {new_s:.1f} s "
            f"({len(general)} general rounds offered; load average up to {load:.2f} on 2 cores)"
        )
        best, top, singles = _single_round_rivals(profile, general, today)
        print(
            f"{'F*':>6}  {'today':>44}  {'with check rounds':>52}  saving  "
            f"{'one general round on raw pairs':>44}"
        )
        for t in TARGETS:
            a, b = cheapest(today, t), cheapest(today + new, t)
            saving = "" if a is None or b is None else f"{100 * (1 - b[1] / a[1]):5.1f} %"
            one = cheapest(singles, t)
            print(f"{t:>6}  {_cell(a, 44)}  {_cell(b, 52)}  {saving:>7}  {_cell(one, 44)}")
        if best is not None:
            ratio, notation, fidelity, cost, rival = best
            print(
                f"one general round on raw pairs reaches at most F {top:.4f}; best against "
                f"today's cheapest recipe of the same fidelity: {notation} F {fidelity:.4f} at "
                f"{cost:.4g} raw pairs per output, today {rival[0]} {rival[1]:.4g} "
                f"({100 * (ratio - 1):+.1f} %)"
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
    parser.add_argument("--targets", action="store_true", help="run section 3 only")
    parser.add_argument("--profiles", default="", help="comma-separated names (section 3)")
    parser.add_argument("--long-factor", type=float, default=10.0)
    parser.add_argument("--skip-long", action="store_true")
    parser.add_argument("--layers-only", action="store_true")
    parser.add_argument("--coverage-depth", type=int, default=4)
    parser.add_argument("--coverage-width", type=int, default=64)
    parser.add_argument(
        "--check-rounds", default="", metavar="N:G[,N:G]", help="run section 4 only"
    )
    args = parser.parse_args(argv)
    if args.check_rounds:
        names = [n for n in args.profiles.split(",") if n]
        check_rounds(names, args.check_rounds, args.layers_only)
        return 0
    if args.targets:
        names = [n for n in args.profiles.split(",") if n]
        targets(
            names,
            args.long_factor,
            args.layers_only,
            args.coverage_depth,
            args.coverage_width,
            args.skip_long,
        )
        return 0
    if not args.skip_speed:
        speed(args.depth, args.budget, args.jobs)
    if not args.skip_quality:
        quality(
            args.quality_depth, args.jobs, tuple(args.samplers.split(",")), tuple(range(args.seeds))
        )
    return 0


if __name__ == "__main__":
    sys.exit(main())
