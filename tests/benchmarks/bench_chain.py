"""Throughput of the batch chain evaluator, with and without memory noise.

Run from anywhere (pytest ignores this folder)::

    python tests/benchmarks/bench_chain.py [--recipes 2000] [--depth 4] [--states 200]

Prints, side by side for a profile with memory noise (waits of about a tenth of
T1) and the same profile with perfect memories (best of a few repeats, one thread):

1. ``evaluate_linear`` on random linear recipes, and a loop of ``evaluate`` on a
   few of them (with the largest difference between the two);
2. ``advance`` and ``advance_every`` in the exhaustive-search pattern (distinct
   states x all codes) at the last depth, in rows per second;
3. the same one depth earlier, where the states carry the waiting data of one
   more round;
4. a whole exhaustive search (``optimise.exhaustive.exhaustive_front``, one process)
   of every linear recipe up to ``--exhaustive`` rounds.

and the ratio perfect / memory of each. The script runs unchanged on older
checkouts whose ``start_chains`` takes no ``rounds_ahead`` and whose ``advance``
takes no ``parent`` (the rows are then taken out first), so the same rows can be
measured before and after a change. Speed is never
asserted in a test.
"""

from __future__ import annotations

import os

# one thread: set before numpy is imported
for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ[_var] = "1"

import argparse  # noqa: E402
import inspect  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))  # the repository root

import numpy as np  # noqa: E402

from models import (  # noqa: E402
    NodeNoise,
    Profile,
    advance,
    advance_every,
    evaluate,
    evaluate_linear,
    recipe_from_codes,
    start_chains,
)
from models.chain import N_CODES  # noqa: E402

MEMORY = Profile(
    (0.85, 0.07, 0.03, 0.05),
    NodeNoise(0.98, 0.99, 0.98, t1_s=0.02, t2_s=0.012),
    length_km=100.0,
    pair_rate_hz=1000.0,
)
PERFECT = Profile(
    MEMORY.raw_pair, NodeNoise(0.98, 0.99, 0.98), length_km=100.0, pair_rate_hz=1000.0
)
AHEAD = "rounds_ahead" in inspect.signature(start_chains).parameters
PARENT = "parent" in inspect.signature(advance).parameters


def chains_for(profile, n, rounds_ahead):
    if AHEAD:
        return start_chains(profile, n, rounds_ahead=rounds_ahead)
    return start_chains(profile, n)


def best_of(repeats: int, fn):
    best = float("inf")
    for _ in range(repeats):
        start = time.perf_counter()
        result = fn()
        best = min(best, time.perf_counter() - start)
    return best, result


def measure(profile, args) -> dict:
    """Seconds (or rows per second) of each benchmark row for one profile."""
    rng = np.random.default_rng(0)
    codes = rng.integers(0, N_CODES, size=(args.recipes, args.depth))
    figures = {}
    figures["evaluate_linear s"], out = best_of(
        args.repeats, lambda: evaluate_linear(codes, profile)
    )
    few = codes[: max(1, args.recipes // 20)]
    start = time.perf_counter()
    singles = [evaluate(recipe_from_codes(row), profile, canonicalise=False) for row in few]
    figures["evaluate() loop s (extrapolated)"] = (
        (time.perf_counter() - start) / len(few) * len(codes)
    )
    figures["largest fidelity difference"] = max(
        abs(r.fidelity - out["fidelity"][i]) for i, r in enumerate(singles)
    )
    all_codes = np.arange(N_CODES)
    for label, ahead in (("last depth", 2), ("one depth earlier", 3)):
        chains = chains_for(profile, args.states, ahead)
        chains, _ = advance(chains, rng.integers(0, N_CODES, size=args.states), profile)
        parent = np.repeat(np.arange(args.states), N_CODES)
        tiled = np.tile(all_codes, args.states)
        if PARENT:  # as the exhaustive search calls it
            grid_s, _ = best_of(
                args.repeats, lambda: advance(chains, tiled, profile, parent=parent)
            )
        else:
            rows = chains.take(parent)
            grid_s, _ = best_of(args.repeats, lambda: advance(rows, tiled, profile))
        every_s, _ = best_of(args.repeats, lambda: advance_every(chains, all_codes, profile))
        figures[f"advance rows/s, {label}"] = len(tiled) / grid_s
        figures[f"advance_every rows/s, {label}"] = len(tiled) / every_s
    if args.exhaustive:
        from optimise.exhaustive import exhaustive_front

        figures[f"exhaustive_front depth {args.exhaustive} s"], _ = best_of(
            1, lambda: exhaustive_front(profile, max_depth=args.exhaustive, count_last=False)
        )
    return figures


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--recipes", type=int, default=2000)
    parser.add_argument("--depth", type=int, default=4)
    parser.add_argument("--states", type=int, default=200)
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument(
        "--exhaustive", type=int, default=2, help="depth of an exhaustive search to time (0: none)"
    )
    args = parser.parse_args(argv)
    memory = measure(MEMORY, args)
    perfect = measure(PERFECT, args)
    print(f"start_chains takes rounds_ahead: {AHEAD}, advance takes parent: {PARENT}")
    print(f"{'':44s} {'memory noise':>14s} {'perfect memory':>15s} {'perfect/memory':>15s}")
    for key in memory:
        a, b = memory[key], perfect[key]
        if "rows/s" in key:
            ratio = f"{b / a:15.2f}"
        elif key.endswith("difference"):
            ratio = ""
        else:
            ratio = f"{a / b:15.2f}"
        print(f"{key:44s} {a:14.3g} {b:15.3g} {ratio}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
