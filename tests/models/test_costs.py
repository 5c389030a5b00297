"""Costs, memory, rounds and times on hand-worked cases; limits of recurrence and pumping.

Expected values come from published success probabilities and formulas, named
beside each check, combined by hand with the cost rule of the conventions
(cost(step) = (cost(kept) + sum cost(sacrificed)) / P, cost(raw) = 1) and Wald's
identity for the mean time of a random sum (A. Wald, Ann. Math. Statist. 15,
283 (1944), from memory).
"""

from __future__ import annotations

import math

import pytest
from numpy.testing import assert_allclose

from models import NodeNoise, Profile, evaluate, werner

# DEJMPS from a Werner pair of F = 0.7, iterated (Deutsch et al., Phys. Rev. Lett.
# 77, 2818 (1996)): success probabilities of rounds 1, 2, 3
DEJMPS_P = [0.68, 0.640138, 0.766253]
PERFECT_07 = Profile(tuple(werner(0.7)))


def bbpssw(f):
    """BBPSSW map with re-twirl (Bennett et al., Phys. Rev. Lett. 76, 722 (1996))."""
    r = (1.0 - f) / 3.0
    n = f**2 + 2 * f * (1 - f) / 3 + 5 * r**2
    return (f**2 + r**2) / n, n


@pytest.mark.parametrize("depth", [1, 2, 3])
def test_dejmps_raw_pairs_per_output(depth):
    cost = 1.0
    for p in DEJMPS_P[:depth]:
        cost = 2 * cost / p  # two copies of the previous pair per attempt
    result = evaluate("sY" if depth == 1 else f"sY^{depth}", PERFECT_07)
    assert_allclose(result.raw_pairs_per_output, cost, rtol=2e-6)
    assert_allclose(result.pair_yield, 1 / cost, rtol=2e-6)
    assert_allclose(result.success_probabilities, DEJMPS_P[:depth], atol=5e-7)
    assert result.memory_per_node == depth + 1 and result.rounds == depth


@pytest.mark.parametrize("f0", [0.7, 0.8, 0.9])
def test_bbpssw_costs_follow_the_published_map(f0):
    f, cost, probabilities = f0, 1.0, []
    for _ in range(3):
        f, n = bbpssw(f)
        cost = 2 * cost / n
        probabilities.append(n)
    result = evaluate("sZ~^3", Profile(tuple(werner(f0))))
    assert_allclose(result.fidelity, f, rtol=1e-12)
    assert_allclose(result.success_probabilities, probabilities, rtol=1e-12)
    assert_allclose(result.raw_pairs_per_output, cost, rtol=1e-12)


def test_published_bbpssw_worked_values():
    # Bennett et al. (1996), worked values quoted in the conventions
    for f0, f1, n in [(0.7, 0.735294, 0.68), (0.8, 0.838150, 0.768889), (0.9, 0.926396, 0.875556)]:
        result = evaluate("sZ~", Profile(tuple(werner(f0))))
        assert_allclose([result.fidelity, result.success_probabilities[0]], [f1, n], atol=5e-7)


def test_pumping_and_double_selection_cost_rules():
    profile = Profile((0.8, 0.1, 0.06, 0.04), NodeNoise(0.98, 0.99, 0.99))
    result = evaluate("pY^3", profile)
    cost = 1.0
    for t in result.trace:
        cost = (cost + 1.0) / t.success_probability  # one fresh raw pair per attempt
        assert_allclose(t.raw_pairs_per_output, cost, rtol=1e-12)
        assert t.memory_per_node == 2
    result = evaluate("dpZ.dpX", profile)
    cost = 1.0
    for t in result.trace:
        cost = (cost + 2.0) / t.success_probability  # two fresh raw pairs per attempt
        assert_allclose(t.raw_pairs_per_output, cost, rtol=1e-12)
    assert result.memory_per_node == 3


def test_nested_recipe_cost_and_rounds():
    profile = Profile((0.8, 0.1, 0.06, 0.04), NodeNoise(0.98, 0.99, 0.99))
    result = evaluate("sY^2.pY(sY)", profile)
    p = result.success_probabilities  # sY, sY, then the source's sY, then the pumping step
    cost_1 = 2 / p[0]
    cost_2 = 2 * cost_1 / p[1]
    assert_allclose(p[2], p[0], rtol=1e-12)  # the source is the same procedure as round 1
    assert_allclose(result.raw_pairs_per_output, (cost_2 + cost_1) / p[3], rtol=1e-12)
    assert result.rounds == 3 and result.memory_per_node == 3


def test_mean_time_follows_wald_with_published_probabilities():
    # perfect operations and memories: the DEJMPS probabilities stay as published
    rate, length = 1000.0, 200.0
    profile = Profile(tuple(werner(0.7)), length_km=length, pair_rate_hz=rate)
    delay = length / 2.0e5  # fibre at about 2e5 km/s (common practice, no source)
    t1 = (2 / rate + delay) / DEJMPS_P[0]
    t2 = (2 * t1 + delay) / DEJMPS_P[1]
    result = evaluate("sY^2", profile)
    assert_allclose(result.time_per_output_s, t2, rtol=2e-6)
    assert_allclose(evaluate("raw", profile).time_per_output_s, 1 / rate)
    pumping = evaluate("pY", profile)
    assert_allclose(pumping.time_per_output_s, (2 / rate + delay) / 0.68, rtol=2e-6)


def test_instant_link_takes_only_the_classical_delay():
    profile = Profile(tuple(werner(0.7)), length_km=100.0)
    result = evaluate("sY", profile)
    assert_allclose(result.time_per_output_s, 100.0 / 2.0e5 / 0.68, rtol=2e-6)
    assert evaluate("sY", PERFECT_07).time_per_output_s == 0.0


def test_recurrence_reaches_one_and_pumping_saturates_with_perfect_operations():
    # Duer and Briegel, Rep. Prog. Phys. 70, 1381 (2007): recurrence on copies
    # converges to F = 1; pumping with the same raw pair reaches a fixed point < 1
    recurrence = evaluate("sY^10", PERFECT_07).fidelity
    assert recurrence > 1 - 1e-9
    pumping = [evaluate(f"pY^{k}", PERFECT_07).fidelity for k in (38, 39, 40)]
    assert pumping[2] - pumping[1] < 1e-9 and pumping[1] - pumping[0] < 1e-9
    assert pumping[2] < 0.9


def test_with_noisy_gates_both_saturate_below_one():
    # Duer and Briegel (2007): with imperfect operations recurrence also stops short of 1
    profile = Profile(tuple(werner(0.8)), NodeNoise(0.97, 0.99, 0.99))
    rec = [evaluate(f"sY^{k}", profile).fidelity for k in (20, 24)]
    pump = [evaluate(f"pY^{k}", profile).fidelity for k in (30, 32)]
    assert abs(rec[1] - rec[0]) < 1e-6 and rec[1] < 0.95
    assert abs(pump[1] - pump[0]) < 1e-6 and pump[1] < rec[1]


def test_result_json_keys():
    result = evaluate("pY^2", PERFECT_07)
    data = result.to_dict()
    assert list(data) == [
        "recipe",
        "id",
        "fidelity",
        "bell",
        "success_probabilities",
        "raw_pairs_per_output",
        "yield",
        "memory_per_node",
        "rounds",
        "time_per_output_s",
    ]
    assert data["recipe"] == "pY^2" and data["id"] == result.recipe_id
    assert math.isfinite(data["time_per_output_s"])
    # a pure Psi+ raw pair against its X-rotated copy (Phi-): the Z-basis parities
    # always disagree (common practice, no source); infinite figures become null
    never = evaluate("pZX", Profile((0.0, 1.0, 0.0, 0.0), length_km=10.0))
    assert never.success_probabilities == (0.0,)
    assert never.to_dict()["raw_pairs_per_output"] is None
    assert never.to_dict()["time_per_output_s"] is None
    assert never.pair_yield == 0.0
