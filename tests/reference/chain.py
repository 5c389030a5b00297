"""Whole recipes on the density-matrix reference, chained round by round (tests only).

The steps of :mod:`tests.reference.density_matrix` act on full 4- or 6-qubit
density matrices; here they are chained by hand, reading a recipe only through
its public fields (``Round.selection``, ``sacrificed``, ``source``, ``rotations``,
``twirl``): the kept pair's Bell weights are passed on, copies for symmetric
rounds are copies of it, a source is chained the same way (recursively), the
classical exchange is a wait of D through the reference's Kraus operators, and
the re-twirl averages the three cyclic bilateral Cliffords, each applied as a gate
with depolarising noise (a twirl costs the noise of one rotation: stillroom's
stated choice). After each wait the state is reduced to its Bell diagonal: the
Bell-diagonal model assumes that twirl (the conventions' pair-level projection).

Random waits are out of reach, so the chain is valid only where no stored pair
waits a random time: with perfect memories (waits do nothing), or with an
instant link (no pair rate) in recipes whose every round pumps raw pairs (a made
pair takes a random number of attempts, each with an exchange, so a pair that
waits for one waits a random time). It refuses other cases.
"""

from __future__ import annotations

import math

import numpy as np

import models

from . import density_matrix as ref

# identity and the two 3-cycles of X, Y, Z: averaging over them makes a pair Werner
CYCLIC = ("Z", "y", "x")


def permutation(rotation: int):
    """Label permutation of a stillroom rotation index, ``None`` for the identity (no gate)."""
    return None if rotation == 0 else tuple(int(k) for k in models.PERMUTATIONS[rotation])


def reference_twirl(bell, single_qubit: float) -> np.ndarray:
    """Average over the three cyclic bilateral Cliffords, each applied as a noisy gate.

    The model's twirl is one random Clifford applied as a gate, so every draw,
    the identity included, carries the single-qubit noise of one rotation.
    """
    rho = ref.pair_state(np.asarray(bell, dtype=float))
    total = 0
    for name in CYCLIC:
        r = models.ROTATION_NAMES.index(name)
        out = rho
        if r != 0:
            u = ref.rotation_unitary(permutation(r))
            out = ref.apply_unitary(out, u, 0)
            out = ref.apply_unitary(out, u.conj(), 1)
        out = ref.depolarize(out, [0], single_qubit)
        out = ref.depolarize(out, [1], single_qubit)
        total = total + out / 3.0
    weights, _ = ref.bell_diagonal(total)
    return weights


def reference_chain(recipe, profile) -> tuple[np.ndarray, np.ndarray]:
    """Success probability of every step and the final Bell weights, from the reference.

    Parameters
    ----------
    recipe : models.Recipe or str
    profile : models.Profile
        With perfect memories (``t1_s = t2_s = inf``), or ``pair_rate_hz = inf`` and
        a recipe whose rounds all pump raw pairs.

    Returns
    -------
    success : ndarray, shape (steps,)
        In the order the steps happen, as :attr:`models.RecipeResult.success_probabilities`:
        for each round of the main chain, the steps of its source, then the round.
    bell : ndarray, shape (4,)
        Bell weights (I, X, Y, Z) of the output.
    """
    noise = profile.noise
    if isinstance(recipe, str):
        recipe = models.parse_recipe(recipe)
    perfect_memory = math.isinf(noise.t1_s) and math.isinf(noise.t2_s)
    pumping = all(r.sacrificed == "raw" for r in recipe.rounds)
    if not (perfect_memory or (math.isinf(profile.pair_rate_hz) and pumping)):
        raise ValueError(
            "the reference chain has no random waits: use perfect memories, or an instant "
            "link and a recipe whose every round pumps raw pairs"
        )
    raw = np.array(profile.raw)
    probabilities: list[float] = []

    def chain(rec) -> np.ndarray:
        current = raw
        for r in rec.rounds:
            if r.sacrificed == "raw":
                sacrificed = raw
            elif r.sacrificed == "same":
                sacrificed = current
            else:
                sacrificed = chain(r.source)
            params = dict(
                rotations=tuple(permutation(k) for k in r.rotations),
                two_qubit=noise.two_qubit,
                single_qubit=noise.single_qubit,
                measurement=noise.measurement,
            )
            if r.selection == "single":
                result = ref.two_to_one(current, sacrificed, **params)
            elif r.selection == "double":
                result = ref.double_selection(current, sacrificed, sacrificed, **params)
            else:
                raise ValueError(f"the reference has no circuit for selection {r.selection!r}")
            probabilities.append(result.success)
            # the exchange (the identity channel for perfect memories)
            current, _, _ = ref.store(
                result.rho, wait_s=profile.classical_delay_s, t1_s=noise.t1_s, t2_s=noise.t2_s
            )
            if r.twirl:
                current = reference_twirl(current, noise.single_qubit)
        return current

    bell = chain(recipe)
    return np.array(probabilities), bell
