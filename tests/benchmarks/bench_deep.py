"""The demo's deep layer: one worker against two, and this tree against an earlier commit.

Run from anywhere (pytest ignores this folder)::

    python tests/benchmarks/bench_deep.py [--against REV] [--repeats 3] [--jobs 2]

The deep layer runs as ``stillroom search`` (no arguments) runs it: the demo
profile, ``optimise.seeding.deep_layer``'s levels and width, seeded with the
demo's exhaustive front and baselines (worked out once, by this tree, and given
to every run). Each run is a fresh process; the runs of the compared sides are
interleaved, each side's best wall time is printed with the ratio, and the fronts
are compared (they must be the same). ``--against REV`` also runs the layer of
commit REV (its ``models`` and ``optimise`` taken from git into a temporary
folder), one worker, beside this tree's. Speed is never asserted in a test.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]

# one run: the demo's deep layer with the given workers; prints seconds and the front
RUN = """
import json, sys, time
from optimise.profiles import demo_profile
from optimise.seeding import deep_layer
from optimise.settings import SearchSettings
seeds, jobs = json.loads(sys.argv[1]), int(sys.argv[2])
settings = SearchSettings(workers=jobs)
try:
    from optimise.seeding import layer_jobs  # noqa: F401  (this tree: workers decide)
except ImportError:
    assert jobs == 1, "an earlier tree has no workers for the deep layer"
started = time.monotonic()
front = deep_layer(demo_profile(), settings, seeds)
seconds = time.monotonic() - started
print(json.dumps({"seconds": seconds, "front": [r.to_dict() for r in front.results]}))
"""


def demo_seeds() -> list[str]:
    """The demo search's seeds: its exhaustive front and its baselines."""
    code = """
import json
from optimise.exhaustive import exhaustive_front
from optimise.front import baseline_results
from optimise.profiles import demo_profile
from optimise.seeding import AUTO_MAX_EVALUATIONS
from optimise.settings import SearchSettings
s, p = SearchSettings(), demo_profile()
ex = exhaustive_front(p, max_depth=s.depth_cap, objectives=s.objectives, limits=s.limits,
                      max_evaluations=AUTO_MAX_EVALUATIONS)
known = [r.notation for r in ex.results]
known += [b.result.notation for b in baseline_results(p, s.max_depth)]
print(json.dumps(known))
"""
    return json.loads(_python(ROOT, code))


def _python(tree: Path, code: str, *args) -> str:
    env = dict(os.environ, PYTHONPATH=str(tree))
    for var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
        env[var] = "1"
    done = subprocess.run(
        [sys.executable, "-c", code, *args], env=env, capture_output=True, text=True, check=True
    )
    return done.stdout.strip().splitlines()[-1]


def checkout(rev: str, folder: Path) -> Path:
    """``models`` and ``optimise`` of commit ``rev`` under ``folder``."""
    archive = subprocess.run(
        ["git", "-C", str(ROOT), "archive", rev, "models", "optimise"],
        capture_output=True,
        check=True,
    ).stdout
    subprocess.run(["tar", "-x", "-C", str(folder)], input=archive, check=True)
    return folder


def measure(sides: dict, seeds, repeats: int) -> dict:
    """Best seconds and the front of each side ``name -> (tree, jobs)``, runs interleaved."""
    best, fronts = {}, {}
    for _ in range(repeats):
        for name, (tree, jobs) in sides.items():
            out = json.loads(_python(tree, RUN, json.dumps(seeds), str(jobs)))
            best[name] = min(best.get(name, float("inf")), out["seconds"])
            fronts[name] = out["front"]
    return {name: (best[name], fronts[name]) for name in sides}


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--against", metavar="REV", help="also run commit REV, one worker")
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--jobs", type=int, default=2)
    args = parser.parse_args(argv)
    seeds = demo_seeds()
    print(f"demo deep layer, {len(seeds)} seeds, best of {args.repeats} runs each")
    with tempfile.TemporaryDirectory() as tmp:
        sides = {}
        if args.against:
            sides[f"{args.against}, 1 worker"] = (checkout(args.against, Path(tmp)), 1)
        sides["this tree, 1 worker"] = (ROOT, 1)
        sides[f"this tree, {args.jobs} workers"] = (ROOT, args.jobs)
        found = measure(sides, seeds, args.repeats)
    first_name, (first_s, first_front) = next(iter(found.items()))
    print(f"{'side':28s} {'seconds':>8s} {'speed-up':>9s} {'same front':>11s}")
    for name, (seconds, front) in found.items():
        same = "yes" if front == first_front else "NO"
        print(f"{name:28s} {seconds:8.2f} {first_s / seconds:8.2f}x {same:>11s}")
    print(f"(speed-up against {first_name!r}; machine load: {os.getloadavg()[0]:.2f})")
    return 0


if __name__ == "__main__":
    sys.exit(main())
