"""Seeded optuna samplers whose choices survive an interruption.

optuna does not store a sampler's random state, so a sampler seeded once and
re-created on resume would draw different recipes than an uninterrupted run.
:class:`SlotSeededSampler` re-seeds its inner sampler before every trial from
``(seed + worker, slot)``, where the slot is the number of trials already finished
in the study (trials abandoned by a killed process do not count). Every sampler
used here draws only from its random state and from the finished trials in the
storage, so a single worker asks trial ``k`` for the same recipe however many
times the run was stopped before it.
"""

from __future__ import annotations

import numpy as np
import optuna
from optuna.samplers import BaseSampler
from optuna.samplers._lazy_random_state import LazyRandomState
from optuna.trial import TrialState

from .settings import SAMPLERS, sampler_settings

ERROR_ATTR = "error"  # user attr set on a trial whose objective raised

__all__ = ["SAMPLERS", "SlotSeededSampler", "build_sampler", "finished_count", "sampler_settings"]


def build_sampler(settings: dict, seed: int) -> BaseSampler:
    """An optuna sampler from :func:`optimise.settings.sampler_settings`, with the given seed.

    A new sampler is a name in :data:`optimise.settings.SAMPLERS` with its
    recorded settings in :func:`~optimise.settings.sampler_settings`, and a branch here.
    """
    name = settings["name"]
    if name == "nsga2":
        return optuna.samplers.NSGAIISampler(
            population_size=settings["population_size"],
            crossover_prob=settings["crossover_prob"],
            swapping_prob=settings["swapping_prob"],
            mutation_prob=settings["mutation_prob"],
            seed=seed,
        )
    if name == "tpe":
        import warnings

        with warnings.catch_warnings():  # multivariate and group are flagged experimental
            warnings.simplefilter("ignore", optuna.exceptions.ExperimentalWarning)
            return optuna.samplers.TPESampler(
                n_startup_trials=settings["n_startup_trials"],
                multivariate=settings["multivariate"],
                group=settings["group"],
                constant_liar=settings["constant_liar"],
                seed=seed,
            )
    return optuna.samplers.RandomSampler(seed=seed)


def counts_towards_budget(trial) -> bool:
    """Complete, pruned, or failed by the objective (a trial whose process died is not)."""
    if trial.state == TrialState.FAIL:
        return ERROR_ATTR in trial.user_attrs
    return trial.state in (TrialState.COMPLETE, TrialState.PRUNED)


def finished_count(study) -> int:
    """Trials that count towards the budget: complete, pruned, or failed by the objective.

    A trial failed because its process died (no ``error`` attribute) does not count:
    its recipe is asked again on resume.
    """
    return sum(1 for t in study.get_trials(deepcopy=False) if counts_towards_budget(t))


class SettledPrefix:
    """Walks a study's trial list once: trials before the first unfinished one are settled.

    Trials are numbered in the order they were asked and a finished trial never
    changes, so each settled trial is handed to ``on_settled`` exactly once and
    later calls look only at the rest (the trials running, waiting in the queue,
    or asked since). What a per-trial check costs then stops growing with the study
    (but for optuna's own list of trials, which it builds for each call).
    """

    def __init__(self, on_settled):
        self.on_settled = on_settled
        self.settled = 0

    def rest(self, study) -> list:
        """The trials after the settled prefix, after settling what has finished since."""
        trials = study.get_trials(deepcopy=False)
        i = self.settled
        while i < len(trials) and trials[i].state.is_finished():
            self.on_settled(trials[i])
            i += 1
        self.settled = i
        return trials[i:]


class FinishedCount:
    """:func:`finished_count`, kept up to date incrementally (see :class:`SettledPrefix`)."""

    def __init__(self):
        self.settled_count = 0
        self.prefix = SettledPrefix(self._settle)

    def _settle(self, trial) -> None:
        self.settled_count += counts_towards_budget(trial)

    def __call__(self, study) -> int:
        rest = self.prefix.rest(study)
        return self.settled_count + sum(1 for t in rest if counts_towards_budget(t))


def slot_seed(seed: int, worker: int, slot: int) -> int:
    """A 32-bit seed for one trial, independent across workers and slots."""
    return int(np.random.SeedSequence([int(seed) + int(worker), int(slot)]).generate_state(1)[0])


def _random_states(obj, depth: int = 0) -> list:
    """The random states a sampler draws from: its own and those of samplers it holds."""
    found = []
    for value in vars(obj).values():
        if isinstance(value, LazyRandomState):
            found.append(value)
        elif isinstance(value, BaseSampler) and depth < 2:
            found += _random_states(value, depth + 1)
    return found


def reseed(sampler, seed: int) -> bool:
    """Seed every random state of a built-in optuna sampler in place; False if none found.

    Keeping the sampler (rather than building a new one per trial) keeps its caches,
    such as the search space it has inferred, which otherwise cost a pass over all
    trials for every new trial. The caches do not change what it draws.
    """
    states = _random_states(sampler)
    for i, state in enumerate(states):
        state.rng.seed(slot_seed(seed, i, 0))
    return bool(states)


class SlotSeededSampler(BaseSampler):
    """Delegates to a sampler re-seeded for each trial (see module docstring).

    Parameters
    ----------
    settings : dict from :func:`sampler_settings`
    worker : int
        Index of the worker process; worker ``i`` draws from seed ``seed + i``.
    """

    def __init__(self, settings: dict, worker: int = 0):
        self.settings = dict(settings)
        self.worker = int(worker)
        self.last_slot = None
        self.finished = FinishedCount()
        self._inner = build_sampler(self.settings, slot_seed(self.settings["seed"], self.worker, 0))

    def before_trial(self, study, trial):
        self.last_slot = self.finished(study)
        seed = slot_seed(self.settings["seed"], self.worker, self.last_slot)
        if not reseed(self._inner, seed):  # an optuna whose samplers hold their state elsewhere
            self._inner = build_sampler(self.settings, seed)
        self._inner.before_trial(study, trial)

    def infer_relative_search_space(self, study, trial):
        return self._inner.infer_relative_search_space(study, trial)

    def sample_relative(self, study, trial, search_space):
        return self._inner.sample_relative(study, trial, search_space)

    def sample_independent(self, study, trial, param_name, param_distribution):
        return self._inner.sample_independent(study, trial, param_name, param_distribution)

    def after_trial(self, study, trial, state, values):
        self._inner.after_trial(study, trial, state, values)

    def reseed_rng(self) -> None:
        # seeds are derived per trial; nothing to reseed (optuna calls this for n_jobs > 1)
        pass
