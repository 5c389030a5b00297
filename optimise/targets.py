"""The cheapest recipe that reaches a target fidelity, or a plain statement that none does."""

from __future__ import annotations

import math
from dataclasses import dataclass

from .limits import as_limits


@dataclass(frozen=True)
class TargetAnswer:
    """Answer to "which recipe reaches F >= F* for the fewest raw pairs?".

    Attributes
    ----------
    target_fidelity : float
    reached : bool
    recipe : RecipeResult or None
        The cheapest recipe reaching the target under the limits (None if none does).
    best_reachable : RecipeResult
        The highest fidelity among the recipes that respect the limits.
    message : str
        One or two plain sentences for the user.
    """

    target_fidelity: float
    reached: bool
    recipe: object
    best_reachable: object
    message: str

    def to_dict(self) -> dict:
        return {
            "target_fidelity": self.target_fidelity,
            "reached": self.reached,
            "recipe": None if self.recipe is None else self.recipe.to_dict(),
            "best_reachable": self.best_reachable.to_dict(),
            "message": self.message,
        }


def _cost_key(result):
    # fewest raw pairs per output; then fewer qubits, less time, fewer rounds, notation
    time_s = result.time_per_output_s
    return (
        result.raw_pairs_per_output,
        result.memory_per_node,
        math.inf if time_s is None else time_s,
        len(result.trace),
        result.notation,
    )


def cheapest_reaching(results, target_fidelity, limits=None, *, space: str | None = None):
    """The recipe of fewest raw pairs per output with fidelity >= ``target_fidelity``.

    Parameters
    ----------
    results : iterable of models.evaluate.RecipeResult
        The recipes to choose from (a front, the baselines, or both).
    target_fidelity : float in (0, 1]
    limits : Limits, dict or None
        Only recipes within the limits are considered.
    space : str, optional
        A sentence naming the searched space, quoted when the target is out of reach.

    Returns
    -------
    TargetAnswer

    Raises
    ------
    ValueError
        If the target is outside (0, 1], or if no recipe respects the limits.
    """
    f_star = target_fidelity
    if isinstance(f_star, bool) or not isinstance(f_star, (int, float)) or not 0 < f_star <= 1:
        raise ValueError(f"target_fidelity = {f_star!r} is outside (0, 1]; it is a fidelity")
    limits = as_limits(limits)
    allowed = [r for r in results if limits.allows(r)]
    if not allowed:
        raise ValueError(
            f"no recipe respects the limits ({limits.describe()}); relax them or search more"
        )
    best = max(allowed, key=lambda r: (r.fidelity, -r.raw_pairs_per_output))
    reaching = [r for r in allowed if r.fidelity >= f_star]
    where = f" in the searched space ({space})" if space else " among the recipes searched"
    under = "" if not limits.any else f" under the limits ({limits.describe()})"
    if reaching:
        pick = min(reaching, key=_cost_key)
        message = (
            f"F >= {f_star:g} is reached{under} by {pick.notation}: fidelity "
            f"{pick.fidelity:.6f} for {pick.raw_pairs_per_output:.4g} raw pairs per output "
            f"(yield {pick.pair_yield:.4g}), {pick.memory_per_node} qubits per node."
        )
        return TargetAnswer(float(f_star), True, pick, best, message)
    message = (
        f"F >= {f_star:g} is out of reach{where}{under}. The highest fidelity reachable is "
        f"{best.fidelity:.6f}, with {best.notation} ({best.raw_pairs_per_output:.4g} raw pairs "
        f"per output, {best.memory_per_node} qubits per node)."
    )
    return TargetAnswer(float(f_star), False, None, best, message)
