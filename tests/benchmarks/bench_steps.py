"""Throughput of the Bell-diagonal steps, side by side with the density-matrix reference.

Run from anywhere (pytest ignores this folder)::

    python tests/benchmarks/bench_steps.py [--batch 100000] [--repeats 7] [--reference 300]

Prints evaluations per second of ``models.two_to_one`` and ``models.double_selection``
on one batch of random inputs (per-row random rotations and noise, best of several
repeats, one thread), the same steps through the qutip reference in
``tests/reference/density_matrix.py`` on a few hundred inputs, and the ratio. It
also prints the largest model-reference difference on those inputs, so a fast but
wrong model shows up here too. Speed is never asserted in a test.
"""

from __future__ import annotations

import os

# one thread: set before numpy is imported (OPENBLAS_CORETYPE, if set, is left alone)
for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ[_var] = "1"

import argparse  # noqa: E402
import functools  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))  # the repository root

import numpy as np  # noqa: E402

import models  # noqa: E402
from tests.reference import density_matrix as ref  # noqa: E402

GOAL_TWO_TO_ONE = 10e6  # evaluations per second


def random_inputs(rng, n: int, n_pairs: int) -> dict:
    return {
        "pairs": [rng.dirichlet(np.ones(4), size=n) for _ in range(n_pairs)],
        "rotations": [rng.integers(0, 6, size=n) for _ in range(n_pairs)],
        "two_qubit": rng.uniform(0.8, 1.0, size=n),
        "single_qubit": rng.uniform(0.8, 1.0, size=n),
        "measurement": rng.uniform(0.9, 1.0, size=n),
    }


def model_call(step, inputs):
    return step(
        *inputs["pairs"],
        rotations=tuple(inputs["rotations"]),
        two_qubit=inputs["two_qubit"],
        single_qubit=inputs["single_qubit"],
        measurement=inputs["measurement"],
    )


def reference_calls(step, inputs, n: int):
    out = []
    for i in range(n):
        out.append(
            step(
                *(p[i] for p in inputs["pairs"]),
                rotations=tuple(tuple(models.PERMUTATIONS[r[i]]) for r in inputs["rotations"]),
                two_qubit=float(inputs["two_qubit"][i]),
                single_qubit=float(inputs["single_qubit"][i]),
                measurement=float(inputs["measurement"][i]),
            )
        )
    return out


def best_seconds(fn, repeats: int) -> float:
    best = float("inf")
    for _ in range(repeats):
        start = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - start)
    return best


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--batch", type=int, default=100_000, help="model batch size")
    parser.add_argument("--repeats", type=int, default=7, help="timed repeats (best is kept)")
    parser.add_argument("--reference", type=int, default=300, help="reference evaluations per step")
    parser.add_argument("--seed", type=int, default=2024)
    args = parser.parse_args(argv)

    rng = np.random.default_rng(args.seed)
    rows = []
    for name, step, ref_step, n_pairs in (
        ("2->1", models.two_to_one, ref.two_to_one, 2),
        ("double selection", models.double_selection, ref.double_selection, 3),
    ):
        inputs = random_inputs(rng, args.batch, n_pairs)
        model_call(step, inputs)  # warm-up: compiles the circuit once
        seconds = best_seconds(functools.partial(model_call, step, inputs), args.repeats)
        model_rate = args.batch / seconds

        n_ref = min(args.reference, args.batch)
        ref.rotation_unitary((0, 1, 3, 2))  # warm-up: the Clifford search is cached
        start = time.perf_counter()
        results = reference_calls(ref_step, inputs, n_ref)
        ref_rate = n_ref / (time.perf_counter() - start)

        success, kept = model_call(step, inputs)
        difference = max(
            np.abs(success[:n_ref] - [r.success for r in results]).max(),
            np.abs(kept[:n_ref] - np.array([r.bell for r in results])).max(),
        )
        rows.append((name, model_rate, ref_rate, difference))

    print(f"numpy {np.__version__}, qutip {ref.qutip.__version__}, one thread")
    print(
        f"model batch {args.batch}, best of {args.repeats}; reference {args.reference} evaluations"
    )
    print()
    header = (
        f"{'step':<18}{'model evals/s':>16}{'reference evals/s':>20}{'ratio':>12}{'max |diff|':>13}"
    )
    print(header)
    print("-" * len(header))
    for name, model_rate, ref_rate, difference in rows:
        print(
            f"{name:<18}{model_rate:>16.4g}{ref_rate:>20.4g}{model_rate / ref_rate:>12.3g}"
            f"{difference:>13.2g}"
        )
    print()
    rate = rows[0][1]
    verdict = "met" if rate >= GOAL_TWO_TO_ONE else "NOT met"
    print(
        f"2->1 goal {GOAL_TWO_TO_ONE:.0e} evals/s: {verdict} ({rate / GOAL_TWO_TO_ONE:.2f} x goal)"
    )
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
