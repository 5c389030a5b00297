"""Hardware limits a recipe must respect: memory per node, time per output, depth."""

from __future__ import annotations

import math
from dataclasses import dataclass
from numbers import Integral, Real


@dataclass(frozen=True)
class Limits:
    """Optional limits; ``None`` means no limit.

    Attributes
    ----------
    max_memory_per_node : int >= 1 or None
        Qubits each node can store at once.
    max_time_per_output_s : float > 0 or None
        Longest acceptable mean time per output pair, seconds.
    max_depth : int >= 1 or None
        Most rounds in a recipe's main chain.

    Examples
    --------
    >>> Limits(max_memory_per_node=0)  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    ValueError: max_memory_per_node = 0 is outside [1, inf); it is the number of qubits ...
    """

    max_memory_per_node: int | None = None
    max_time_per_output_s: float | None = None
    max_depth: int | None = None

    def __post_init__(self):
        _check_int(
            "max_memory_per_node",
            self.max_memory_per_node,
            "the number of qubits each node can store at once",
        )
        _check_int("max_depth", self.max_depth, "the most rounds in a recipe's main chain")
        t = self.max_time_per_output_s
        if t is not None and (
            isinstance(t, bool) or not isinstance(t, Real) or math.isnan(t) or not t > 0
        ):
            raise ValueError(
                f"max_time_per_output_s = {t!r} is outside (0, inf]; it is the longest "
                "acceptable mean time per output pair, in seconds"
            )

    @property
    def any(self) -> bool:
        """Whether any limit is set."""
        return any(
            v is not None
            for v in (self.max_memory_per_node, self.max_time_per_output_s, self.max_depth)
        )

    def violations(self, *, memory_per_node, time_per_output_s, depth) -> dict:
        """How far a recipe is over each limit (> 0: violated), for the limits that are set."""
        out = {}
        if self.max_memory_per_node is not None:
            out["memory_per_node"] = float(memory_per_node - self.max_memory_per_node)
        if self.max_time_per_output_s is not None:
            t = time_per_output_s
            out["time_per_output_s"] = (
                math.inf if t is None or math.isinf(t) else float(t - self.max_time_per_output_s)
            )
        if self.max_depth is not None:
            out["depth"] = float(depth - self.max_depth)
        return out

    def allows(self, result) -> bool:
        """Whether a :class:`models.evaluate.RecipeResult` respects every limit."""
        v = self.violations(
            memory_per_node=result.memory_per_node,
            time_per_output_s=result.time_per_output_s,
            depth=len(result.trace),
        )
        return all(x <= 0 for x in v.values())

    def to_dict(self) -> dict:
        return {
            "max_memory_per_node": self.max_memory_per_node,
            "max_time_per_output_s": self.max_time_per_output_s,
            "max_depth": self.max_depth,
        }

    def describe(self) -> str:
        """``"at most 3 qubits per node, at most 0.01 s per output"`` or ``"no limits"``."""
        parts = []
        if self.max_memory_per_node is not None:
            parts.append(f"at most {self.max_memory_per_node} qubits per node")
        if self.max_time_per_output_s is not None:
            parts.append(f"at most {self.max_time_per_output_s:g} s per output pair")
        if self.max_depth is not None:
            parts.append(f"at most {self.max_depth} rounds")
        return ", ".join(parts) if parts else "no limits"


def _check_int(name, value, meaning):
    if value is None:
        return
    if isinstance(value, bool) or not isinstance(value, Integral) or value < 1:
        raise ValueError(f"{name} = {value!r} is outside [1, inf); it is {meaning}")


def as_limits(limits) -> Limits:
    """``None`` -> no limits; a dict -> :class:`Limits`; a :class:`Limits` unchanged."""
    if limits is None:
        return Limits()
    if isinstance(limits, Limits):
        return limits
    if isinstance(limits, dict):
        return Limits(**limits)
    raise ValueError(f"limits = {limits!r} must be a Limits, a dict of its fields, or None")
