"""A noise profile: the raw pair a link delivers and the nodes' imperfections.

References
----------
1. Fibre group speed about 2e5 km/s (refractive index about 1.47): common practice, no source.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .noise import NodeNoise
from .states import BELL_NAMES, validate_bell

FIBRE_SPEED_KM_S = 2.0e5


@dataclass(frozen=True)
class Profile:
    """Everything the exact evaluation of a recipe needs.

    Attributes
    ----------
    raw_pair : tuple of 4 floats
        Bell weights (I, X, Y, Z) = (Phi+, Psi+, Psi-, Phi-) of each raw pair.
    noise : NodeNoise
        Gate, measurement and memory imperfections (the same at both nodes).
    length_km : float >= 0
        Link length; the one-way classical delay is ``length_km / FIBRE_SPEED_KM_S``.
    pair_rate_hz : float > 0
        Mean rate at which the link delivers raw pairs (``inf``: instantly).
        Arrivals are modelled as a Poisson process (exponential waits).
    name : str
        A label for reports.
    """

    raw_pair: tuple[float, float, float, float]
    noise: NodeNoise = field(default_factory=NodeNoise)
    length_km: float = 0.0
    pair_rate_hz: float = math.inf
    name: str = "profile"

    def __post_init__(self):
        weights = validate_bell(self.raw_pair, "raw_pair")
        if weights.ndim != 1:
            raise ValueError(f"raw_pair must be one Bell-diagonal pair, got shape {weights.shape}")
        object.__setattr__(self, "raw_pair", tuple(float(w) for w in weights))
        if not isinstance(self.noise, NodeNoise):
            raise ValueError(f"noise must be a NodeNoise, got {type(self.noise).__name__}")
        if not (isinstance(self.length_km, (int, float)) and 0 <= self.length_km < math.inf):
            raise ValueError(f"length_km = {self.length_km!r} must be a finite length >= 0 km")
        if not (isinstance(self.pair_rate_hz, (int, float)) and self.pair_rate_hz > 0):
            raise ValueError(f"pair_rate_hz = {self.pair_rate_hz!r} must be a rate > 0 per second")
        largest = max(self.raw_pair)
        if largest <= 0.5:
            k = self.raw_pair.index(largest)
            raise ValueError(
                f"raw_pair's largest Bell weight is {largest:g} ({BELL_NAMES[k]}); recurrence "
                "and pumping need one weight above 1/2, which this pair does not have"
            )

    @property
    def raw(self) -> np.ndarray:
        """Raw pair as an array of shape (4,)."""
        return np.array(self.raw_pair)

    @property
    def classical_delay_s(self) -> float:
        """One-way classical delay over the link, seconds."""
        return self.length_km / FIBRE_SPEED_KM_S

    def bound(self):
        """What every step needs, worked out once (:class:`models.waiting.BoundNoise`, cached)."""
        from .waiting import bind

        return bind(self)

    def to_dict(self) -> dict:
        """Plain-JSON form (inverse: :meth:`from_dict`)."""
        n = self.noise
        return {
            "name": self.name,
            "raw_pair": list(self.raw_pair),
            "two_qubit": n.two_qubit,
            "single_qubit": n.single_qubit,
            "measurement": n.measurement,
            "t1_s": None if math.isinf(n.t1_s) else n.t1_s,
            "t2_s": None if math.isinf(n.t2_s) else n.t2_s,
            "length_km": self.length_km,
            "pair_rate_hz": None if math.isinf(self.pair_rate_hz) else self.pair_rate_hz,
        }

    @classmethod
    def from_dict(cls, data: dict) -> Profile:
        def finite_or_inf(value):
            return math.inf if value is None else float(value)

        noise = NodeNoise(
            two_qubit=float(data.get("two_qubit", 1.0)),
            single_qubit=float(data.get("single_qubit", 1.0)),
            measurement=float(data.get("measurement", 1.0)),
            t1_s=finite_or_inf(data.get("t1_s")),
            t2_s=finite_or_inf(data.get("t2_s")),
        )
        return cls(
            raw_pair=tuple(data["raw_pair"]),
            noise=noise,
            length_km=float(data.get("length_km", 0.0)),
            pair_rate_hz=finite_or_inf(data.get("pair_rate_hz")),
            name=str(data.get("name", "profile")),
        )
