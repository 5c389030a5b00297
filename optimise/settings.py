"""What a search is: :class:`SearchSettings`, one frozen, validated value.

Each field says in its metadata what it is for (``role``):

``study``
    identifies the optuna study (with the profile): a study started with other
    values of these is not the same study;
``run``
    fixed for the run folder, but not part of the study's identity;
``budget``
    may change when a run is resumed (more trials, another wall time, more
    workers, another target asked of the front).

A field may also name the command-line option that sets it (``option``), so that
an error names what the user typed, and whether a ``settings.json`` written
before the field existed may lack it (``added``: the default is then read).
The deep layer's settings are ``run`` fields: they change the front, and a
resumed run computes the deep layer again, so a resume with other values is
refused (a new run name keeps both fronts reproducible).

``settings.json`` is :meth:`SearchSettings.to_json` (plus the dates and version
the run folder adds); :meth:`SearchSettings.from_json` reads it back. The samplers
a search may use, and every setting each records, are listed here too
(:data:`SAMPLERS`, :func:`sampler_settings`); :mod:`optimise.samplers` builds them.
This module imports no numpy or optuna, so the command line can offer its choices
at once.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field
from numbers import Integral, Real

from .errors import InputError, user_input
from .limits import Limits, as_limits
from .objectives import DEFAULT as DEFAULT_OBJECTIVES
from .objectives import check_objectives

SAMPLERS = ("nsga2", "tpe", "random")
NSGA2_POPULATION = 40
TPE_STARTUP_TRIALS = 20
MAX_DEPTH_LIMIT = 12
ROLES = ("study", "run", "budget")
# the deep layer of a search (optimise.deep): its defaults keep it to about 15 s of
# the demo's minute (tests/benchmarks/bench_search.py); its time grows roughly as
# the width squared times the levels
DEEP_WIDTH = 8
DEEP_LAYERS = 2
DEEP_LEVELS_LIMIT = 12
# a width of 256 would take some hours on the demo and a few GB of memory (width 64
# took 17 min and 0.4 GB on a shared 2-core machine; both grow about as the width squared)
DEEP_WIDTH_LIMIT = 256
# general check rounds (optimise.catalogue): pairs per round and CNOTs per circuit;
# five CNOTs on five pairs enumerate 5e7 circuits (about 20 s, then cached)
CHECK_ROUND_PAIRS = (2, 5)
CHECK_ROUND_CNOTS = (1, 5)
CHECK_ROUNDS_TOP = 24
CHECK_ROUNDS_TOP_LIMIT = 512


def parse_check_rounds(spec) -> tuple[tuple[int, int], ...]:
    """``"3:3,4:4"`` -> ((3, 3), (4, 4)): catalogues of n-pair rounds of up to g CNOTs.

    Raises
    ------
    InputError
        Naming the item, the allowed pairs and CNOTs.
    """
    if spec is None:
        return ()
    if not isinstance(spec, str) or not spec.strip():
        raise InputError(
            f"check_rounds = {spec!r} must be catalogues as PAIRS:CNOTS[,PAIRS:CNOTS...], "
            "such as '3:3,4:4'"
        )
    out = []
    for item in spec.split(","):
        parts = item.strip().split(":")
        try:
            n, g = (int(x) for x in parts)
        except ValueError:
            raise InputError(
                f"check_rounds = {spec!r}: {item.strip()!r} must be PAIRS:CNOTS, such as '4:4'"
            ) from None
        (n_low, n_high), (g_low, g_high) = CHECK_ROUND_PAIRS, CHECK_ROUND_CNOTS
        if not n_low <= n <= n_high:
            raise InputError(f"check_rounds = {spec!r}: pairs {n} is outside [{n_low}, {n_high}]")
        if not g_low <= g <= g_high:
            raise InputError(f"check_rounds = {spec!r}: CNOTs {g} is outside [{g_low}, {g_high}]")
        if (n, g) not in out:
            out.append((n, g))
    return tuple(out)


def sampler_settings(name: str, seed: int) -> dict:
    """Every setting of a sampler, as recorded in the study and in ``settings.json``."""
    if name not in SAMPLERS:
        raise ValueError(f"sampler = {name!r} is not one of {', '.join(SAMPLERS)}")
    seeding = "each trial's sampler is seeded from (seed + worker index, number of finished trials)"
    if name == "nsga2":
        return {
            "name": "nsga2",
            "class": "optuna.samplers.NSGAIISampler",
            "seed": seed,
            "population_size": NSGA2_POPULATION,
            "crossover": "uniform",
            "crossover_prob": 0.9,
            "swapping_prob": 0.5,
            "mutation_prob": None,
            "seeding": seeding,
        }
    if name == "tpe":
        return {
            "name": "tpe",
            "class": "optuna.samplers.TPESampler",
            "seed": seed,
            "n_startup_trials": TPE_STARTUP_TRIALS,
            "multivariate": True,
            "group": True,
            "constant_liar": False,
            "seeding": seeding,
        }
    return {
        "name": "random",
        "class": "optuna.samplers.RandomSampler",
        "seed": seed,
        "seeding": seeding,
    }


def _role(role: str, option: str | None = None, *, added: bool = False, **kwargs):
    return field(metadata={"role": role, "option": option, "added": added}, **kwargs)


def _check_int(name, value, low, high, meaning):
    if (
        isinstance(value, bool)
        or not isinstance(value, Integral)
        or value < low
        or (high is not None and value > high)
    ):
        span = f"[{low}, {high}]" if high is not None else f"[{low}, inf)"
        raise InputError(f"{name} = {value!r} is outside {span}; it is {meaning}")


@dataclass(frozen=True)
class SearchSettings:
    """Everything a search is, validated on construction.

    Attributes
    ----------
    max_depth : int in [1, 12]
        Most rounds in a recipe's main chain.
    objectives : tuple of str
        See :mod:`optimise.objectives` (fidelity and yield, optionally memory, time).
    limits : Limits
        Hardware limits (a dict of its fields or None is accepted).
    exhaustive_depth : int in [0, max_depth] or None
        Depth up to which every linear recipe is evaluated first (None: automatic).
    deep_width : int in [0, 256]
        Pairs the deep layer keeps per level (0: no cap).
    deep_layers : int in [0, 256]
        Pareto layers the deep layer keeps per level (0: all); not 0 with a
        width of 0, which would keep every pair.
    deep_levels : int in [0, 12] or None
        Levels of the deep layer (None: twice the depth cap, at most 12; 0: no
        deep layer).
    check_rounds : str or None
        Catalogues of general check rounds (:mod:`optimise.catalogue`) a second
        deep pass may use, as ``PAIRS:CNOTS[,PAIRS:CNOTS...]`` (pairs 2 to 5, CNOTs
        1 to 5); None: none.
    check_rounds_top : int in [1, 512]
        Rounds taken from each catalogue, spread evenly along its front.
    seed : int in [0, 2**32 - 1]
    sampler : one of :data:`SAMPLERS`
    storage : str or None
        Study storage as given (None: SQLite in the run folder); once a run folder
        is prepared, the storage it records (a file name in the folder, or a URL
        with its password masked).
    n_trials : int >= 0
        Total finished trials the study should reach.
    timeout_s : float > 0 or None
        Wall-time budget of one call, seconds.
    workers : int in [1, 256]
        Local worker processes.
    target_fidelity : float in (0, 1] or None

    Raises
    ------
    InputError
        (a ValueError) naming the field, its value and the allowed range.
    """

    max_depth: int = _role("study", "--depth", default=6)
    objectives: tuple = _role("study", "--objectives", default=DEFAULT_OBJECTIVES)
    limits: Limits = _role("study", default_factory=Limits)
    exhaustive_depth: int | None = _role("run", "--exhaustive-depth", default=None)
    deep_width: int = _role("run", "--deep-width", added=True, default=DEEP_WIDTH)
    deep_layers: int = _role("run", "--deep-layers", added=True, default=DEEP_LAYERS)
    deep_levels: int | None = _role("run", "--deep-levels", added=True, default=None)
    check_rounds: str | None = _role("run", "--check-rounds", added=True, default=None)
    check_rounds_top: int = _role("run", "--check-rounds-top", added=True, default=CHECK_ROUNDS_TOP)
    seed: int = _role("study", "--seed", default=0)
    sampler: str = _role("study", "--sampler", default="nsga2")
    storage: str | None = _role("run", "--storage", default=None)
    n_trials: int = _role("budget", "--trials", default=200)
    timeout_s: float | None = _role("budget", "--time", default=None)
    workers: int = _role("budget", "--workers", default=1)
    target_fidelity: float | None = _role("budget", "--target", default=None)

    def __post_init__(self):
        _check_int(
            "max_depth", self.max_depth, 1, MAX_DEPTH_LIMIT, "the most rounds a recipe may have"
        )
        _check_int("n_trials", self.n_trials, 0, None, "the total number of optuna trials")
        _check_int("seed", self.seed, 0, 2**32 - 1, "the seed of the samplers")
        _check_int("workers", self.workers, 1, 256, "the number of local worker processes")
        if self.exhaustive_depth is not None:
            _check_int(
                "exhaustive_depth",
                self.exhaustive_depth,
                0,
                self.max_depth,
                "the depth up to which every linear recipe is evaluated (None: automatic)",
            )
        _check_int(
            "deep_width",
            self.deep_width,
            0,
            DEEP_WIDTH_LIMIT,
            "the most pairs the deep layer keeps per level (0: no cap)",
        )
        _check_int(
            "deep_layers",
            self.deep_layers,
            0,
            DEEP_WIDTH_LIMIT,
            "the Pareto layers the deep layer keeps per level (0: all)",
        )
        if self.deep_width == 0 and self.deep_layers == 0:
            raise InputError(
                "deep_width = 0 and deep_layers = 0 together keep every pair the deep layer "
                "makes, a hundredfold more or so each level; cap one of them"
            )
        if self.deep_levels is not None:
            _check_int(
                "deep_levels",
                self.deep_levels,
                0,
                DEEP_LEVELS_LIMIT,
                "the levels of the deep layer (None: automatic; 0: no deep layer)",
            )
        if self.check_rounds is not None:
            spec = self.check_rounds
            canonical = ",".join(f"{n}:{g}" for n, g in sorted(parse_check_rounds(spec)))
            object.__setattr__(self, "check_rounds", canonical)
        _check_int(
            "check_rounds_top",
            self.check_rounds_top,
            1,
            CHECK_ROUNDS_TOP_LIMIT,
            "the rounds taken from each catalogue of check rounds",
        )
        if self.check_rounds is None and self.check_rounds_top != CHECK_ROUNDS_TOP:
            raise InputError(
                f"check_rounds_top = {self.check_rounds_top!r} needs check_rounds = "
                "PAIRS:CNOTS[,PAIRS:CNOTS...], the catalogues it takes rounds from"
            )
        t = self.timeout_s
        if t is not None and (
            isinstance(t, bool) or not isinstance(t, Real) or math.isnan(t) or not t > 0
        ):
            raise InputError(f"timeout_s = {t!r} must be a wall time in seconds > 0, or None")
        if self.sampler not in SAMPLERS:
            raise InputError(f"sampler = {self.sampler!r} is not one of {', '.join(SAMPLERS)}")
        f = self.target_fidelity
        if f is not None and (isinstance(f, bool) or not isinstance(f, Real) or not 0 < f <= 1):
            raise InputError(f"target_fidelity = {f!r} is outside (0, 1]")
        if self.storage is not None and not isinstance(self.storage, str):
            object.__setattr__(self, "storage", str(self.storage))
        with user_input():
            object.__setattr__(self, "objectives", check_objectives(self.objectives))
            object.__setattr__(self, "limits", as_limits(self.limits))

    # ------------------------------------------------------------------ derived

    @classmethod
    def fields_of(cls, *roles: str) -> tuple[str, ...]:
        """Names of the fields with one of these roles, in declaration order."""
        unknown = set(roles) - set(ROLES)
        if unknown:
            raise ValueError(f"unknown role {sorted(unknown)[0]!r}; one of {', '.join(ROLES)}")
        return tuple(f.name for f in dataclasses.fields(cls) if f.metadata["role"] in roles)

    @classmethod
    def options(cls) -> dict[str, str]:
        """The command-line option of each field that has one (field name -> option)."""
        return {
            f.name: f.metadata["option"] for f in dataclasses.fields(cls) if f.metadata["option"]
        }

    @classmethod
    def with_added_defaults(cls, data: dict) -> dict:
        """``settings.json`` data with the fields it predates (``added``) at their defaults."""
        later = {
            f.name: f.default
            for f in dataclasses.fields(cls)
            if f.metadata["added"] and f.name not in data
        }
        return {**data, **later}

    @property
    def depth_cap(self) -> int:
        """The deepest recipe searched: ``max_depth``, or the depth limit if lower."""
        cap = self.limits.max_depth
        return self.max_depth if cap is None else min(self.max_depth, cap)

    @property
    def space(self) -> str:
        """One sentence naming the recipes the optuna layer samples."""
        from .space import describe_space

        return describe_space(self.depth_cap, self.check_rounds)

    @property
    def sampler_settings(self) -> dict:
        return sampler_settings(self.sampler, self.seed)

    def study_identity(self, profile_dict: dict) -> dict:
        """What identifies the optuna study: the ``study`` fields, the check rounds when asked
        for (choices of its space) and the profile."""
        data = self.to_json()
        identity = {k: data[k] for k in self.fields_of("study")}
        if self.check_rounds is not None:
            # the check rounds are choices of the study's space: a study shared by
            # runs that offer other rounds would hold trials it cannot read back
            identity["check_rounds"] = self.check_rounds
            identity["check_rounds_top"] = self.check_rounds_top
        identity["profile"] = profile_dict
        return identity

    def fixed_json(self) -> dict:
        """The settings a resumed run must repeat (``study`` and ``run`` fields)."""
        data = self.to_json()
        return {k: data[k] for k in self.fields_of("study", "run")}

    def replace(self, **changes) -> SearchSettings:
        return dataclasses.replace(self, **changes)

    # ------------------------------------------------------------------ JSON

    def to_json(self) -> dict:
        """The ``settings.json`` form (``sampler`` as every setting of the sampler, plus
        ``space``, a sentence for the reader)."""
        out = {}
        for f in dataclasses.fields(self):
            value = getattr(self, f.name)
            if f.name == "objectives":
                value = list(value)
            elif f.name == "limits":
                value = value.to_dict()
            elif f.name == "sampler":
                value = self.sampler_settings
            out[f.name] = value
            if f.name == "storage":  # the reader's sentence, after what identifies the run
                out["space"] = self.space
        return out

    @classmethod
    def from_json(cls, data: dict) -> SearchSettings:
        """Read :meth:`to_json`'s form back (other keys, such as dates, are ignored).

        Raises
        ------
        ValueError
            When a field is missing or invalid (the caller names the file). A field
            added since run folders were first written (``added``) may be missing:
            it then takes its default.
        """
        if not isinstance(data, dict):
            raise ValueError(f"settings must be a JSON object, not {type(data).__name__}")
        data = cls.with_added_defaults(data)
        missing = [f.name for f in dataclasses.fields(cls) if f.name not in data]
        if missing:
            raise ValueError(f"settings have no {missing[0]!r}")
        values = {f.name: data[f.name] for f in dataclasses.fields(cls)}
        sampler = values["sampler"]
        if not isinstance(sampler, dict) or "name" not in sampler:
            raise ValueError("settings' 'sampler' must be an object with a 'name'")
        values["sampler"] = sampler["name"]
        if not isinstance(values["limits"], dict):
            raise ValueError("settings' 'limits' must be an object")
        try:
            return cls(**values)
        except TypeError as error:
            raise ValueError(str(error)) from error
