"""The waiting-time model against a Monte Carlo simulation of the waiting times.

The simulation samples what the model averages: raw pairs arrive as a Poisson
process, inputs are made one after another (kept pair first), every stored pair
decays (models.noise.store) for its sampled wait, each step succeeds with the
real state-dependent probability of its sampled inputs, failed attempts start
again from scratch, and the kept output waits the classical delay. Waits only
on raw pairs are modelled exactly, so those recipes must agree within
statistical error; waits on composite pairs use the documented approximation
(models/evaluate.py), whose error is measured here and bounded loosely.

Run ``python -m tests.models.test_waiting`` (from the repository root) to print the
agreement figures.
"""

from __future__ import annotations

import math
import sys

import numpy as np
import pytest

from models import NodeNoise, Profile, Recipe, evaluate, parse_recipe
from models.noise import store
from models.recipes import making_order
from models.steps import DOUBLE_SELECTION, TWO_TO_ONE, run_step

# waits of about a tenth of T1: raw pairs every 1 ms on average, T1 = 20 ms
PROFILE = Profile(
    (0.85, 0.07, 0.03, 0.05),
    NodeNoise(two_qubit=0.98, single_qubit=0.99, measurement=0.98, t1_s=0.02, t2_s=0.012),
    length_km=100.0,
    pair_rate_hz=1000.0,
)
SAMPLES = 20000


def simulate(text: str, profile: Profile, n: int, seed: int):
    """Monte Carlo of ``n`` outputs of a recipe (sources included).

    Inputs are made in the model's documented order (largest memory need first,
    ties kept pair first; :func:`models.recipes.making_order`). Returns the
    outputs' Bell weights (n, 4), their production times (n,) and, per round of
    the main chain, the number of attempts and of successes.
    """
    rng = np.random.default_rng(seed)
    recipe = parse_recipe(text)
    noise = profile.noise
    rate, delay = profile.pair_rate_hz, profile.classical_delay_s
    attempts = np.zeros(recipe.depth, dtype=np.int64)
    successes = np.zeros(recipe.depth, dtype=np.int64)

    def stored(pair, wait):
        return store(pair, wait_s=wait, t1_s=noise.t1_s, t2_s=noise.t2_s)

    def produce(rec: Recipe, depth: int, m: int, main: bool):
        if depth == 0:
            return np.tile(profile.raw, (m, 1)), rng.exponential(1.0 / rate, m)
        r = rec.rounds[depth - 1]
        prefix = Recipe(rec.rounds[: depth - 1])
        # (recipe, depth, counted in the main chain's statistics) of a sacrificed pair
        if r.sacrificed == "raw":
            sacrificed, sacrificed_memory = (rec, 0, False), 1
        elif r.sacrificed == "same":
            sacrificed, sacrificed_memory = (rec, depth - 1, main), prefix.memory_per_node
        else:
            sacrificed = (r.source, r.source.depth, False)
            sacrificed_memory = r.source.memory_per_node
        order = making_order([prefix.memory_per_node] + [sacrificed_memory] * (r.n_inputs - 1))
        bell, total = np.empty((m, 4)), np.zeros(m)
        pending = np.arange(m)
        while pending.size:
            k = pending.size
            made = {}
            for i in order:  # one after another; only the order of waiting matters
                if i == 0:
                    made[i] = produce(rec, depth - 1, k, main)
                else:
                    source, source_depth, counted = sacrificed
                    made[i] = produce(source, source_depth, k, counted)
            # each input waits while the inputs after it are made
            ready = [None] * r.n_inputs
            for j, i in enumerate(order):
                wait = sum((made[later][1] for later in order[j + 1 :]), np.zeros(k))
                ready[i] = stored(made[i][0], wait)
            circuit = TWO_TO_ONE if r.selection == "single" else DOUBLE_SELECTION
            p, out = run_step(
                circuit,
                ready,
                r.rotations,
                two_qubit=noise.two_qubit,
                single_qubit=noise.single_qubit,
                measurement=noise.measurement,
            )
            ok = rng.random(k) < p
            if main:
                attempts[depth - 1] += k
                successes[depth - 1] += ok.sum()
            total[pending] += sum(t for _, t in made.values()) + delay
            bell[pending[ok]] = stored(out[ok], delay)
            pending = pending[~ok]
        return bell, total

    bell, time_s = produce(recipe, recipe.depth, n, True)
    return bell, time_s, attempts, successes


def compare(text: str, profile: Profile = PROFILE, n: int = SAMPLES, seed: int = 1) -> dict:
    """Model minus simulation, in units of the simulation's standard error."""
    bell, time_s, attempts, successes = simulate(text, profile, n, seed)
    model = evaluate(text, profile, canonicalise=False)
    f, f_se = bell[:, 0].mean(), bell[:, 0].std() / math.sqrt(n)
    t, t_se = time_s.mean(), time_s.std() / math.sqrt(n)
    p = successes / attempts
    p_se = np.sqrt(p * (1 - p) / attempts)
    model_p = np.array([r.success_probability for r in model.trace])
    return {
        "fidelity": (model.fidelity, f, (model.fidelity - f) / f_se),
        "time": (model.time_per_output_s, t, (model.time_per_output_s - t) / t_se),
        "success": (model_p, p, (model_p - p) / p_se),
    }


@pytest.mark.parametrize("text", ["pY^3", "dpZ.dpX", "sY.pY^2", "pY(sY^2)"])
def test_waits_on_raw_pairs_agree_within_statistical_error(text):
    c = compare(text)
    assert abs(c["fidelity"][2]) < 4, c["fidelity"]
    assert abs(c["time"][2]) < 4, c["time"]
    assert np.all(np.abs(c["success"][2]) < 4), c["success"]


def test_the_simulation_would_notice_a_model_without_memory_decay():
    # the same simulation against the model with perfect memories: far apart,
    # so the agreement above is a real test of the waiting times
    bell, _, _, _ = simulate("pY^3", PROFILE, SAMPLES, seed=1)
    perfect = Profile(
        PROFILE.raw_pair, NodeNoise(0.98, 0.99, 0.98), length_km=100.0, pair_rate_hz=1000.0
    )
    f_se = bell[:, 0].std() / math.sqrt(SAMPLES)
    assert abs(evaluate("pY^3", perfect).fidelity - bell[:, 0].mean()) > 20 * f_se


def test_waits_on_composite_pairs_are_close():
    # documented approximation: measured about -0.6 % in fidelity for sY^3 here
    c = compare("sY^3")
    model_f, sim_f, _ = c["fidelity"]
    assert abs(model_f - sim_f) / sim_f < 0.02
    model_t, sim_t, _ = c["time"]
    assert abs(model_t - sim_t) / sim_t < 0.03
    model_p, sim_p, _ = c["success"]
    assert np.all(np.abs(model_p - sim_p) / sim_p < 0.02)


def report():  # pragma: no cover - a script, not a test
    for text in ["pY^3", "dpZ.dpX", "sY.pY^2", "pY(sY^2)", "sY^2", "sY^3", "dsY^2", "dpY(sY)"]:
        c = compare(text)
        (mf, sf, zf), (mt, st_, zt) = c["fidelity"], c["time"]
        mp, sp, zp = c["success"]
        print(
            f"{text:10s} fidelity model {mf:.5f} sim {sf:.5f} ({(mf - sf) / sf:+.2%}, {zf:+.1f} se)"
            f"  time model {mt * 1e3:.4f} ms sim {st_ * 1e3:.4f} ms ({zt:+.1f} se)"
            f"  success max |z| {np.max(np.abs(zp)):.1f}"
            f" max rel {np.max(np.abs(mp - sp) / sp):.2%}"
        )


if __name__ == "__main__":  # pragma: no cover
    sys.exit(report())
