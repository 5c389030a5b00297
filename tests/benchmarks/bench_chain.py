"""Throughput of the batch chain evaluator against one-recipe evaluation.

Run from anywhere (pytest ignores this folder)::

    python tests/benchmarks/bench_chain.py [--recipes 2000] [--depth 4] [--states 200]

Prints, side by side (best of a few repeats, one thread):

1. ``evaluate_linear`` on random linear recipes against a loop of ``evaluate``;
2. prefix sharing: ``evaluate_linear`` on recipes that share their first rounds
   against ``advance`` applied row by row without sharing;
3. ``advance`` in the exhaustive-search pattern (distinct states x all 1008 codes),
   in rows per second.

It also prints the largest difference between the batch and one-recipe results,
so a fast but wrong batch shows up here too. Speed is never asserted in a test.
"""

from __future__ import annotations

import os

# one thread: set before numpy is imported
for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ[_var] = "1"

import argparse  # noqa: E402
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

PROFILE = Profile(
    (0.85, 0.07, 0.03, 0.05),
    NodeNoise(0.98, 0.99, 0.98, t1_s=0.02, t2_s=0.012),
    length_km=100.0,
    pair_rate_hz=1000.0,
)


def best_of(repeats: int, fn):
    best = float("inf")
    for _ in range(repeats):
        start = time.perf_counter()
        result = fn()
        best = min(best, time.perf_counter() - start)
    return best, result


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--recipes", type=int, default=2000)
    parser.add_argument("--depth", type=int, default=4)
    parser.add_argument("--states", type=int, default=200)
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args(argv)
    rng = np.random.default_rng(0)

    codes = rng.integers(0, N_CODES, size=(args.recipes, args.depth))
    batch_s, out = best_of(args.repeats, lambda: evaluate_linear(codes, PROFILE))
    few = codes[: max(1, args.recipes // 20)]
    start = time.perf_counter()
    singles = [evaluate(recipe_from_codes(row), PROFILE, canonicalise=False) for row in few]
    single_s = (time.perf_counter() - start) / len(few) * len(codes)
    worst = max(abs(r.fidelity - out["fidelity"][i]) for i, r in enumerate(singles))
    print(f"evaluate_linear {args.recipes} x {args.depth}: {batch_s:.3f} s")
    print(f"evaluate() loop (extrapolated from {len(few)}): {single_s:.3f} s")
    print(f"ratio loop / batch: {single_s / batch_s:.1f}   largest fidelity difference {worst:.1e}")

    # recipes sharing their first depth - 1 rounds in groups of 50
    shared = codes.copy()
    shared[:, : args.depth - 1] = shared[::50][np.arange(len(codes)) // 50, : args.depth - 1]
    sharing_s, _ = best_of(args.repeats, lambda: evaluate_linear(shared, PROFILE))

    def unshared():
        chains = start_chains(PROFILE, len(shared))
        for d in range(args.depth):
            chains, _ = advance(chains, shared[:, d], PROFILE)
        return chains

    plain_s, _ = best_of(args.repeats, unshared)
    print(
        f"prefix sharing: {sharing_s:.3f} s, no sharing: {plain_s:.3f} s, "
        f"ratio {plain_s / sharing_s:.1f}"
    )

    chains = start_chains(PROFILE, args.states)
    chains, _ = advance(chains, rng.integers(0, N_CODES, size=args.states), PROFILE)
    rows = chains.take(np.repeat(np.arange(args.states), N_CODES))
    all_codes = np.tile(np.arange(N_CODES), args.states)
    grid_s, _ = best_of(args.repeats, lambda: advance(rows, all_codes, PROFILE))
    every_s, _ = best_of(args.repeats, lambda: advance_every(chains, np.arange(N_CODES), PROFILE))
    print(
        f"advance {args.states} states x {N_CODES} codes: {grid_s:.3f} s, "
        f"{len(all_codes) / grid_s:.3g} rows/s"
    )
    print(
        f"advance_every, same grid: {every_s:.3f} s, {len(all_codes) / every_s:.3g} rows/s, "
        f"ratio {grid_s / every_s:.1f}"
    )
    return 0


if __name__ == "__main__":
    sys.exit(main())
