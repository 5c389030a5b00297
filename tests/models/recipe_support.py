"""Random profiles and recipes shared by the recipe tests (not a test module).

Random data here is for property checks only: every expected value in the tests
comes from a published formula, the density-matrix reference or a Monte Carlo
simulation, never from these generators.
"""

from __future__ import annotations

import math

import numpy as np

from models import NodeNoise, Profile, Recipe, Round


def random_profile(rng: np.random.Generator, *, instant: bool = False) -> Profile:
    """A noise profile with every imperfection switched on (random but valid).

    Measurement, gate and memory noise are deliberately strong so that any
    equivalence that holds only for perfect operations shows up.
    """
    fidelity = rng.uniform(0.6, 0.95)
    rest = rng.dirichlet(np.ones(3)) * (1.0 - fidelity)
    t1 = rng.uniform(0.005, 0.2)
    t2 = rng.uniform(0.3, 2.0) * t1
    noise = NodeNoise(
        two_qubit=rng.uniform(0.9, 1.0),
        single_qubit=rng.uniform(0.85, 1.0),
        measurement=rng.uniform(0.8, 1.0),
        t1_s=t1,
        t2_s=min(t2, 2.0 * t1),
    )
    return Profile(
        (fidelity, *rest),
        noise,
        length_km=rng.uniform(0.0, 300.0),
        pair_rate_hz=math.inf if instant else rng.uniform(200.0, 5000.0),
    )


def random_round(rng, prefix: tuple[Round, ...], *, allow_source: bool) -> Round:
    selection = "single" if rng.random() < 0.7 else "double"
    n = 2 if selection == "single" else 3
    kinds = ["raw", "same", "sub"] if allow_source else ["raw", "same"]
    kind = kinds[rng.integers(len(kinds))]
    rotations = tuple(int(k) for k in rng.integers(0, 6, size=n))
    if rng.random() < 0.3:
        rotations = (rotations[0],) * n
    source = None
    if kind == "sub":
        u = rng.random()
        if u < 0.2:
            source = Recipe(())
        elif u < 0.5:
            source = Recipe(prefix)  # the prefix: canonical form turns it into s/ds
        else:
            source = random_recipe(rng, int(rng.integers(1, 3)), allow_source=False)
    return Round(selection, kind, rotations, source=source, twirl=bool(rng.random() < 0.25))


def random_recipe(rng, depth: int, *, allow_source: bool = True) -> Recipe:
    rounds: tuple[Round, ...] = ()
    for _ in range(depth):
        rounds = rounds + (random_round(rng, rounds, allow_source=allow_source),)
    return Recipe(rounds)


def figures(result) -> np.ndarray:
    """Every figure that must agree between two spellings of one procedure.

    Fidelity, costs, times, memory and rounds, the Z weight and X + Y weight of
    the output (a relabelling may exchange X and Y), and per round of the main
    chain its success probability, cost and time.
    """
    b = result.bell
    values = [
        result.fidelity,
        result.raw_pairs_per_output,
        result.time_per_output_s,
        result.memory_per_node,
        result.rounds,
        b[3],
        b[1] + b[2],
    ]
    for t in result.trace:
        values += [t.success_probability, t.raw_pairs_per_output, t.time_per_output_s]
    return np.array(values, dtype=float)
