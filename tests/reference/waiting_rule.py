"""The conventions' exact waiting-time rule, written out plainly (tests only).

A second, deliberately simple evaluation of a recipe under random waits, built
from the public step and memory maps only (:func:`models.steps.run_step`,
:func:`models.noise.store_with_decays`, :func:`models.recipes.making_order`) and
none of the model's waiting-time code. Every made pair carries its time-weighted
state ``H(s) = E[rho exp(-s T)]`` (T its whole production time, retries
included) at the rates s its users need; a raw pair has ``H(s) = raw R / (R + s)``.
With the memory map of a wait t written ``M(t) = sum_m exp(-a_m t) D_m``, one
attempt of a step whose inputs are made in order 1, 2, 3 (1 waits while 2 and 3
are made, 2 while 3 is made) gives

    A(s) = exp(-s D) sum_{m, n} S(D_m H_1(s), D_n H_2(s + a_m), H_3(s + a_m + a_n))

(two inputs: one sum), with S the step's unnormalised success branch, and
failed attempts restart, so ``H_out(s) = post(A(s)) / (1 - F(s))`` with
``F(s) = exp(-s D) prod_i sum(H_i(s)) - sum(A(s))`` and ``post`` the exchange
wait ``M(D)`` and, where asked, the re-twirl. The success probability is
``sum(A(0))`` and the mean time follows Wald's identity.

It is slow (plain recursion, one rate at a time) and meant for a handful of
short recipes; the Monte Carlo of tests/models/test_waiting.py checks it.
"""

from __future__ import annotations

import itertools
import math
from functools import lru_cache

import numpy as np

from models import Recipe, parse_recipe
from models.kinds import STEP_KINDS
from models.noise import store_with_decays
from models.recipes import making_order
from models.steps import run_step


def decay_maps(noise) -> tuple[np.ndarray, list[np.ndarray]]:
    """Rates a_m (1/s) and 4 x 4 maps D_m with ``store(pair, t) = pair @ sum_m e^{-a_m t} D_m``."""
    rates = np.array([0.0, 2.0 / noise.t2_s, 1.0 / noise.t1_s, 2.0 / noise.t1_s])
    eye, zero, one = np.eye(4), np.zeros(4), np.ones(4)
    constant = store_with_decays(eye, zero, zero, zero)
    maps = [constant]
    for k in range(3):
        decays = [zero, zero, zero]
        decays[k] = one
        maps.append(store_with_decays(eye, *decays) - constant)
    return rates, maps


def waiting_rule(recipe, profile) -> dict:
    """Output Bell weights, mean time per output and main-chain success probabilities.

    Returns
    -------
    dict with ``bell`` (4,), ``time_s`` float and ``success`` (depth,), one per
    round of the main chain.
    """
    recipe = parse_recipe(recipe) if isinstance(recipe, str) else recipe
    noise = profile.noise
    rate, delay = profile.pair_rate_hz, profile.classical_delay_s
    rates, maps = decay_maps(noise)
    exchange = sum(math.exp(-a * delay) * m for a, m in zip(rates, maps, strict=True))
    raw = np.array(profile.raw)
    p1_squared = noise.single_qubit**2

    @lru_cache(maxsize=None)
    def branch(selection, rotations):
        # S on unit inputs: S is multilinear, so these entries define it
        n = STEP_KINDS[selection].n_inputs
        labels = list(itertools.product(range(4), repeat=n))
        inputs = [np.eye(4)[[label[i] for label in labels]] for i in range(n)]
        p, kept = run_step(
            STEP_KINDS[selection].circuit,
            inputs,
            rotations,
            two_qubit=noise.two_qubit,
            single_qubit=noise.single_qubit,
            measurement=noise.measurement,
        )
        return (p[:, None] * kept).reshape((4,) * n + (4,))

    def retwirl(x):
        # the documented re-twirl, extended linearly to unnormalised weights
        total = x.sum()
        f = p1_squared * x[0] + (1.0 - p1_squared) / 4.0 * total
        rest = (total - f) / 3.0
        return np.array([f, rest, rest, rest])

    def inputs(rec: Recipe, depth: int):
        r = rec.rounds[depth - 1]
        prefix = Recipe(rec.rounds[: depth - 1])
        if r.sacrificed == "raw":
            sacrificed, memory = (prefix, 0), 1
        elif r.sacrificed == "same":
            sacrificed, memory = (rec, depth - 1), prefix.memory_per_node
        else:
            sacrificed, memory = (r.source, r.source.depth), r.source.memory_per_node
        made = [(rec, depth - 1)] + [sacrificed] * (r.n_inputs - 1)
        order = making_order([prefix.memory_per_node] + [memory] * (r.n_inputs - 1))
        return r, made, order

    def attempt(rec: Recipe, depth: int, s: float) -> np.ndarray:
        r, made, order = inputs(rec, depth)
        tensor = branch(r.selection, r.rotations)
        out = np.zeros(4)
        # waits[j]: exponents of the decays input order[j] suffers, one per later input
        for waits in itertools.product(range(4), repeat=r.n_inputs - 1):
            vectors = [None] * r.n_inputs
            shift = 0.0
            for j, i in enumerate(order):
                h = weighted(*made[i], s + shift)
                if j < len(waits):
                    h = h @ maps[waits[j]]
                    shift += rates[waits[j]]
                vectors[i] = h
            # contract the inputs in role order, kept pair first
            contracted = tensor
            for v in vectors:
                contracted = np.tensordot(v, contracted, axes=(0, 0))
            out += contracted
        return math.exp(-s * delay) * out

    @lru_cache(maxsize=None)
    def weighted(rec: Recipe, depth: int, s: float) -> np.ndarray:
        if depth == 0:
            return raw * (1.0 if math.isinf(rate) else rate / (rate + s))
        r, made, _ = inputs(rec, depth)
        a = attempt(rec, depth, s)
        fail = math.exp(-s * delay) * math.prod(weighted(*m, s).sum() for m in made) - a.sum()
        out = a @ exchange
        if r.twirl:
            out = retwirl(out)
        # at s = 0, 1 - fail is the success probability: use it without cancellation
        return out / (a.sum() if s == 0 else 1.0 - fail)

    @lru_cache(maxsize=None)
    def time_s(rec: Recipe, depth: int) -> float:
        if depth == 0:
            return 0.0 if math.isinf(rate) else 1.0 / rate
        _, made, _ = inputs(rec, depth)
        return (sum(time_s(*m) for m in made) + delay) / attempt(rec, depth, 0.0).sum()

    return {
        "bell": weighted(recipe, recipe.depth, 0.0),
        "time_s": time_s(recipe, recipe.depth),
        "success": np.array([attempt(recipe, d, 0.0).sum() for d in range(1, recipe.depth + 1)]),
    }
