"""What a search found, as types: :class:`Front` and :class:`BaselineResult`.

A run folder's ``front.json`` is :meth:`Front.to_json`; :meth:`Front.from_json`
reads it back (through :class:`optimise.run.Run`). Reports, plots, the command
line and notebooks read a :class:`Front`, never the JSON.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from .targets import TargetAnswer


def result_from_dict(entry: dict):
    """A :class:`models.evaluate.RecipeResult` from its ``to_dict()`` form (no trace).

    Raises
    ------
    ValueError
        When a key is missing or a figure is invalid.
    """
    from models.evaluate import RecipeResult

    def number(key):
        value = entry[key]
        return math.inf if value is None else value

    try:
        return RecipeResult(
            notation=entry["recipe"],
            recipe_id=entry["id"],
            bell=tuple(entry["bell"]),
            fidelity=entry["fidelity"],
            success_probabilities=tuple(entry["success_probabilities"]),
            raw_pairs_per_output=number("raw_pairs_per_output"),
            pair_yield=entry["yield"],
            memory_per_node=entry["memory_per_node"],
            rounds=entry["rounds"],
            time_per_output_s=number("time_per_output_s"),
        )
    except (KeyError, TypeError) as error:
        raise ValueError(f"a recipe entry lacks or mangles {error}") from error


@dataclass(frozen=True)
class BaselineResult:
    """A textbook baseline (:data:`models.baselines.BASELINES`) at one depth, evaluated."""

    name: str
    depth: int
    result: object  # models.evaluate.RecipeResult

    def to_dict(self) -> dict:
        return {**self.result.to_dict(), "baseline": self.name, "depth": self.depth}

    @classmethod
    def from_dict(cls, entry: dict) -> BaselineResult:
        return cls(
            name=entry.get("baseline", ""),
            depth=entry.get("depth", entry.get("rounds")),
            result=result_from_dict(entry),
        )


def baseline_results(profile, max_depth: int) -> list[BaselineResult]:
    """Every textbook baseline at depths 1..max_depth, evaluated for a profile."""
    from models.baselines import BASELINES, baseline
    from models.evaluate import evaluate

    return [
        BaselineResult(name, depth, evaluate(baseline(name, depth), profile))
        for name in BASELINES
        for depth in range(1, max_depth + 1)
    ]


def equivalents_from(entries) -> dict:
    """:attr:`Front.equivalents` from ``front.json``'s entries (written before they were
    listed, an entry has none).

    Raises
    ------
    ValueError
        When an entry's ``equivalents`` is not a list of strings.
    """
    out = {}
    for entry in entries:
        names = entry.get("equivalents") or []
        if not isinstance(names, list) or not all(isinstance(n, str) for n in names):
            raise ValueError(f"the equivalents of {entry.get('recipe')!r} are not recipe strings")
        if names:
            out[entry["recipe"]] = tuple(names)
    return out


def target_from_dict(data: dict | None):
    """A :class:`optimise.targets.TargetAnswer` from its ``to_dict()`` form."""
    if data is None:
        return None
    recipe = data.get("recipe")
    return TargetAnswer(
        target_fidelity=data["target_fidelity"],
        reached=data["reached"],
        recipe=None if recipe is None else result_from_dict(recipe),
        best_reachable=result_from_dict(data["best_reachable"]),
        message=data["message"],
    )


@dataclass(frozen=True)
class Front:
    """The Pareto front of a run, what was searched and how completely, and the baselines.

    Attributes
    ----------
    profile : dict
        The noise profile (``models.Profile.to_dict()``).
    settings : dict
        The search settings as recorded (``SearchSettings.to_json()`` plus dates).
    searched_space : str
        Sentence naming what was searched (exhaustively, then by sampling).
    complete_depth : int or None
        Every linear recipe up to this depth was evaluated.
    complete : bool
        True when the front is proven complete for the searched space.
    n_trials : int or None
        Finished trials in the study.
    results : tuple of RecipeResult
        The front, fidelity descending.
    equivalents : dict
        Notation of a front recipe -> the other recipes found with every one of
        its figures (shortest, then alphabetical, first); recipes without are left
        out. In ``front.json``, each front entry's ``equivalents`` list.
    baselines : tuple of BaselineResult
    target : TargetAnswer or None
    stillroom_version, created, updated : str or None
        Provenance.
    """

    profile: dict
    settings: dict = field(default_factory=dict)
    searched_space: object = None
    complete_depth: int | None = None
    complete: bool = False
    n_trials: int | None = None
    results: tuple = ()
    equivalents: dict = field(default_factory=dict)
    baselines: tuple = ()
    target: TargetAnswer | None = None
    stillroom_version: str | None = None
    created: str | None = None
    updated: str | None = None

    REQUIRED = ("profile", "front", "baselines")

    @property
    def profile_name(self) -> str:
        return self.profile.get("name", "profile")

    @property
    def raw_fidelity(self) -> float:
        return self.profile["raw_pair"][0]

    @property
    def seed(self):
        return self.settings.get("seed")

    def equivalents_of(self, result) -> tuple[str, ...]:
        """The other recipes with every figure of the front recipe ``result``."""
        return tuple(self.equivalents.get(result.notation, ()))

    def entry(self, result) -> dict:
        """A front recipe as ``front.json`` lists it: its figures and its equivalents."""
        return {**result.to_dict(), "equivalents": list(self.equivalents_of(result))}

    def to_json(self) -> dict:
        return {
            "stillroom_version": self.stillroom_version,
            "created": self.created,
            "updated": self.updated,
            "profile": self.profile,
            "settings": self.settings,
            "searched_space": self.searched_space,
            "complete_depth": self.complete_depth,
            "complete": bool(self.complete),
            "n_trials": self.n_trials,
            "front": [self.entry(r) for r in self.results],
            "baselines": [b.to_dict() for b in self.baselines],
            "target": None if self.target is None else self.target.to_dict(),
        }

    @classmethod
    def from_json(cls, data: dict) -> Front:
        """Read :meth:`to_json`'s form.

        Raises
        ------
        ValueError
            Naming the first missing key or bad entry (the caller names the file).
        """
        if not isinstance(data, dict):
            raise ValueError(f"it holds a JSON {type(data).__name__}, not an object")
        for key in cls.REQUIRED:
            if key not in data:
                raise ValueError(f"it has no {key!r} key")
        return cls(
            profile=data["profile"],
            settings=data.get("settings", {}),
            searched_space=data.get("searched_space"),
            complete_depth=data.get("complete_depth"),
            complete=bool(data.get("complete", False)),
            n_trials=data.get("n_trials"),
            results=tuple(result_from_dict(e) for e in data["front"]),
            equivalents=equivalents_from(data["front"]),
            baselines=tuple(BaselineResult.from_dict(e) for e in data["baselines"]),
            target=target_from_dict(data.get("target")),
            stillroom_version=data.get("stillroom_version"),
            created=data.get("created"),
            updated=data.get("updated"),
        )
