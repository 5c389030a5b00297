"""Why a recipe is good, step by step: the errors each check removes and the noise it adds.

:func:`explain` walks a recipe in the order its steps happen (the steps of a
sub-recipe, then the round that uses it, as
:attr:`models.evaluate.RecipeResult.success_probabilities` lists them) and,
for each step, splits the change of the kept pair into three parts:

1. the **ideal step** (perfect gates and measurements, no waiting) on the
   step's inputs: per error label, the weight the check removes (negative:
   the weight it adds, as the plain step copies a phase flip of the
   sacrificed pair onto the kept pair), compared in the output's frame
   (the kept input's weights relabelled by its rotation);
2. the infidelity **gate and measurement noise** add: the ideal step's
   fidelity minus that of the same step with the profile's gates and
   measurements, still without waiting;
3. the infidelity **memory decay** (waits while the other inputs are made and
   during the classical exchange) and any re-twirl add: the rest, down to the
   exact figure of :func:`models.evaluate.evaluate`.

Parts 1 and 2 use :func:`models.steps.run_step` on the inputs as they are made
(before they wait); part 3 is the difference to the exact figures, so the
three add up to the exact change of fidelity.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class StepStory:
    """One step of a recipe, explained.

    Attributes
    ----------
    label : str
        Where the step sits: ``"round 2"``, or ``"round 3 > source round 1"``
        for a step of the sub-recipe that round 3 pumps with.
    step : str
        The round as written (``dpYZY(dsXYy)``).
    depth : int
        0 for the main chain, 1 inside its sources, and so on.
    twirled : bool
        True when the step re-twirls its output (``~``).
    kept_in : ndarray (4,)
        The kept input as made (before waiting), Bell weights (I, X, Y, Z).
    bell : tuple of 4 floats
        The exact output, as :func:`models.evaluate.evaluate` gives it.
    fidelity_in, fidelity : float
        Fidelity of the kept input and of the exact output.
    success_probability : float
        Exact probability that the step's checks agree.
    removed : ndarray (3,)
        Weights of the error labels X, Y, Z the ideal step removes (negative: adds),
        in the labels after the kept pair's rotation.
    relabelled : str
        How that rotation renamed the kept pair's labels (``"input Y is Z, input Z
        is Y"``); empty when it is no gate.
    gate_noise : float
        Infidelity added by gate and measurement noise.
    memory_noise : float
        Infidelity added by memory decay and the re-twirl; signed, so that the
        parts add up exactly to the change of fidelity.
    """

    label: str
    step: str
    depth: int
    twirled: bool
    kept_in: np.ndarray
    bell: tuple
    fidelity_in: float
    fidelity: float
    success_probability: float
    removed: np.ndarray
    gate_noise: float
    memory_noise: float
    relabelled: str = ""

    def sentence(self) -> str:
        """``removes X 0.0123, Y 0.0040; adds Z 0.0012; gates add 0.0031, memory 0.0002``."""
        parts = []
        names = ("X", "Y", "Z")
        gone = [f"{n} {w:.4f}" for n, w in zip(names, self.removed, strict=True) if w > 5e-5]
        grown = [f"{n} {-w:.4f}" for n, w in zip(names, self.removed, strict=True) if w < -5e-5]
        frame = (
            f" (labels after the kept pair's rotation: {self.relabelled})"
            if self.relabelled
            else ""
        )
        parts.append("removes " + (", ".join(gone) if gone else "no error weight") + frame)
        if grown:
            parts.append("copies in " + ", ".join(grown))
        parts.append(f"gates and measurements add {self.gate_noise:.4f} infidelity")
        memory = "memory decay" + (" and re-twirl" if self.twirled else "")
        verb = "add" if self.twirled else "adds"
        if self.memory_noise >= 0:
            parts.append(f"{memory} {verb} {self.memory_noise:.4f}")
        else:
            parts.append(f"{memory} {verb} {self.memory_noise:.4f} (a gain)")
        return "; ".join(parts)


def explain(recipe, profile) -> list[StepStory]:
    """Every step of a recipe, in the order they happen, explained (see the module docstring).

    Parameters
    ----------
    recipe : models.Recipe or str
        Evaluated in canonical form, as :func:`models.evaluate.evaluate` does.
    profile : models.Profile

    Returns
    -------
    list of StepStory
        As many as the recipe's ``success_probabilities``, in the same order.
    """
    from models.notation import as_recipe, canonical

    return _stories(canonical(as_recipe(recipe)), profile, "", 0)


def _stories(recipe, profile, prefix: str, depth: int) -> list[StepStory]:
    from models.evaluate import evaluate, twirl
    from models.formatting import format_recipe
    from models.kinds import STEP_KINDS
    from models.recipes import Recipe
    from models.rotations import rotate
    from models.steps import run_step

    noise = profile.noise
    raw = np.asarray(profile.raw, dtype=float)
    if recipe.raw_twirl:
        raw = twirl(raw, noise.single_qubit)
    exact = evaluate(recipe, profile, canonicalise=False).trace
    stories: list[StepStory] = []
    kept = raw
    for k, (r, figures) in enumerate(zip(recipe.rounds, exact, strict=True), 1):
        label = f"{prefix}round {k}"
        if r.sacrificed == "raw":
            sacrificed = raw
        elif r.sacrificed == "same":
            sacrificed = kept
        else:
            stories += _stories(r.source, profile, f"{label} > source ", depth + 1)
            sacrificed = np.asarray(evaluate(r.source, profile, canonicalise=False).bell)
        inputs = [kept] + [sacrificed] * (r.n_inputs - 1)
        circuit = STEP_KINDS[r.selection].circuit
        _, ideal = run_step(
            circuit, inputs, r.rotations, two_qubit=1.0, single_qubit=1.0, measurement=1.0
        )
        _, noisy = run_step(
            circuit,
            inputs,
            r.rotations,
            two_qubit=noise.two_qubit,
            single_qubit=noise.single_qubit,
            measurement=noise.measurement,
        )
        ideal, noisy = ideal[0], noisy[0]
        before = rotate(kept, r.rotations[0])
        stories.append(
            StepStory(
                label=label,
                step=format_recipe(Recipe((r,))),
                depth=depth,
                twirled=bool(r.twirl),
                kept_in=kept,
                bell=figures.bell,
                fidelity_in=float(kept[0]),
                fidelity=figures.fidelity,
                success_probability=figures.success_probability,
                removed=before[1:] - ideal[1:],
                gate_noise=float(ideal[0] - noisy[0]),
                memory_noise=float(noisy[0] - figures.fidelity),
                relabelled=_relabelling(r.rotations[0]),
            )
        )
        kept = np.asarray(figures.bell, dtype=float)
    return stories


def _relabelling(rotation: int) -> str:
    """``"input Y is Z, input Z is Y"``: what a rotation does to the error labels."""
    from models.rotations import PERMUTATIONS

    names = "IXYZ"
    return ", ".join(
        f"input {names[k]} is {names[PERMUTATIONS[rotation, k]]}"
        for k in (1, 2, 3)
        if PERMUTATIONS[rotation, k] != k
    )
