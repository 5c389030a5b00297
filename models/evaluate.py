"""Exact evaluation of one recipe for a noise profile: fidelity, costs, memory, time.

Model (exact for the Bell-diagonal model with twirled memories):

- Steps: the compiled circuits of the step registry (:data:`models.kinds.STEP_KINDS`)
  with the profile's :class:`models.noise.NodeNoise`, run on the joint weights of
  their inputs (:func:`models.waiting.run_attempt`), because shared waits correlate
  the inputs.
- Re-twirl (``~``): a random bilateral Clifford applied as one gate, drawn from
  a set (such as the three cyclic relabellings ``Z``, ``y``, ``x``) that makes a
  Bell-diagonal pair Werner; whatever is drawn, it adds the single-qubit noise
  of one rotation (p1 at each node). So the output is exactly Werner, with
  fidelity ``p1**2 F + (1 - p1**2) / 4``. It is applied after the classical
  exchange, once the step is known to have succeeded.
- Costs: raw pairs per output, ``cost(raw) = 1``,
  ``cost(step) = (cost(kept) + sum cost(sacrificed)) / P_success``; yield = 1/cost.
- Memory per node: the inputs of a step are made one after another, in the
  order that needs the fewest qubits at once (largest need first; ties: kept
  pair first, then the sacrificed pairs in order); memory(step) = max over
  that order of (memory of the input + number of inputs already stored).
  Raw pair 1, pumping 2, symmetric depth d: d + 1, double-selection pumping 3.
- Rounds: communication rounds on the critical path, 1 + the largest of the inputs'.
- Time: raw pairs arrive from one link as a Poisson process of rate
  ``pair_rate_hz`` (a raw pair takes an exponential time of mean 1/R; ``inf``:
  no time). The inputs of a step are made one after another in the order
  above, then one classical exchange of outcomes takes the one-way delay D
  (both nodes send at once). A failed step discards everything and starts
  again, so by Wald's identity ``E[T(step)] = (sum E[T(input)] + D) / P_success``.
- Memory decay: an input waits from the moment it is made until the last input
  is made; the kept output waits D during the exchange. Every pair carries its
  time-weighted state ``E[rho exp(-s T)]`` at the rates its users need
  (:mod:`models.waiting`), which averages every wait exactly, retries and the
  dependence of success on an attempt's duration included. The rates each pair
  is needed at are worked out top-down (:func:`levels_needed`), then the recipe
  is evaluated bottom-up. ``tests/models/test_waiting.py`` compares with a Monte
  Carlo simulation of arrivals, waits and decays.

References
----------
1. C. H. Bennett et al., Phys. Rev. Lett. 76, 722 (1996) (BBPSSW, the re-twirl).
2. W. Duer, H.-J. Briegel, J. I. Cirac and P. Zoller, Phys. Rev. A 59, 169 (1999).
3. A. Wald, Ann. Math. Statist. 15, 283 (1944) (mean of a random sum; from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .kinds import STEP_KINDS
from .notation import as_recipe, canonical
from .recipes import Recipe, Round, making_order, memory_needed
from .waiting import Weighted, joint_deficit, joint_waits, retry, run_attempt, twirl

__all__ = ["RecipeResult", "RoundFigures", "evaluate", "levels_needed", "twirl"]


def levels_needed(recipe: Recipe, level: int = 0):
    """Rate-lattice levels at which each pair of a recipe is needed, worked out top-down.

    Input j (0-based, in making order) of a step whose output is needed up to
    level k is needed up to level k + j (:mod:`models.waiting`).

    Returns
    -------
    prefix : list of int, length depth + 1
        ``prefix[i]``: level of the pair made by the first i rounds (0: the raw pair).
    sacrificed : list of int, length depth
        Level of round i's sacrificed pairs (raw pairs, copies or the source's output).
    """
    rounds = recipe.rounds
    inputs = []  # memory needs of each round's inputs, kept pair first
    memory = 1
    for r in rounds:
        inputs.append([memory] + [_sacrificed_memory(r, memory)] * (r.n_inputs - 1))
        memory = memory_needed(inputs[-1])
    prefix = [0] * (len(rounds) + 1)
    prefix[-1] = level
    sacrificed = [0] * len(rounds)
    for i in reversed(range(len(rounds))):
        r = rounds[i]
        position = {role: j for j, role in enumerate(making_order(inputs[i]))}
        sacrificed[i] = prefix[i + 1] + max(position[j] for j in range(1, r.n_inputs))
        prefix[i] = prefix[i + 1] + position[0]
        if r.sacrificed == "same":
            prefix[i] = max(prefix[i], sacrificed[i])
    return prefix, sacrificed


def _sacrificed_memory(r: Round, memory: int) -> int:
    return {"raw": 1, "same": memory}.get(r.sacrificed) or r.source.memory_per_node


@dataclass(frozen=True)
class _Product:
    """Figures of the pair a (sub-)recipe makes, as needed by the step that uses it."""

    bell: np.ndarray
    cost: float
    memory: int
    rounds: int
    time_s: float
    weighted: Weighted
    steps: tuple[float, ...] = ()
    trace: tuple = field(default=())


def _raw(profile, level: int, twirled: bool = False) -> _Product:
    # a raw pair twirled on arrival (a recipe's leading '~') takes no time to twirl
    bound = profile.bound()
    pair = twirl(profile.raw, bound.single_qubit) if twirled else profile.raw
    return _Product(pair, 1.0, 1, 0, bound.raw_time_s, bound.raw_weighted(level, pair))


def _step(r: Round, inputs: list[_Product], profile, level: int) -> tuple[_Product, float]:
    bound = profile.bound()
    memories = [c.memory for c in inputs]
    order = making_order(memories)
    made = [inputs[i].weighted for i in order]
    lattice = bound.lattice(level + len(inputs) - 1)
    k = lattice.size(level)
    joint = joint_waits(made, lattice, k)
    branch = run_attempt(STEP_KINDS[r.selection].circuit, joint, order, r.rotations, bound)
    deficit = joint_deficit([h.deficit[:, :k] for h in made])
    success, weighted = retry(branch, deficit, bound, lattice, twirled=r.twirl)
    p = float(success[0])
    ok = p > 0
    product = _Product(
        weighted.state[0, 0],
        sum(c.cost for c in inputs) / p if ok else math.inf,
        memory_needed(memories),
        1 + max(c.rounds for c in inputs),
        (sum(c.time_s for c in inputs) + bound.delay_s) / p if ok else math.inf,
        weighted,
    )
    return product, p


def _evaluate(recipe: Recipe, profile, level: int = 0, cache=None) -> _Product:
    cache = {} if cache is None else cache
    key = (recipe, level)
    if key in cache:
        return cache[key]
    prefix, sacrificed_level = levels_needed(recipe, level)
    raw_uses = [prefix[0]] + [
        lv for r, lv in zip(recipe.rounds, sacrificed_level, strict=True) if r.sacrificed == "raw"
    ]
    raw = _raw(profile, max(raw_uses), recipe.raw_twirl)
    current = raw
    steps: list[float] = []
    trace = []
    for i, r in enumerate(recipe.rounds):
        if r.sacrificed == "raw":
            sacrificed = raw
        elif r.sacrificed == "same":
            sacrificed = current
        else:
            sacrificed = _evaluate(r.source, profile, sacrificed_level[i], cache)
            steps.extend(sacrificed.steps)
        current, p = _step(r, [current] + [sacrificed] * (r.n_inputs - 1), profile, prefix[i + 1])
        steps.append(p)
        trace.append(
            RoundFigures(
                bell=tuple(float(w) for w in current.bell),
                fidelity=float(current.bell[0]),
                success_probability=p,
                raw_pairs_per_output=current.cost,
                memory_per_node=current.memory,
                time_per_output_s=current.time_s,
            )
        )
    product = _Product(
        current.bell,
        current.cost,
        current.memory,
        current.rounds,
        current.time_s,
        current.weighted,
        tuple(steps),
        tuple(trace),
    )
    cache[key] = product
    return product


def _finite_or_none(value: float):
    return value if math.isfinite(value) else None


def _check_figures(*, bell, fidelity, raw_pairs, memory, time_s):
    if len(bell) != 4 or abs(sum(bell) - 1.0) > 1e-9 or min(bell) < -1e-12:
        raise ValueError(f"bell = {bell!r} must be 4 Bell weights summing to 1")
    if not -1e-12 <= fidelity <= 1 + 1e-12:
        raise ValueError(f"fidelity = {fidelity!r} is outside [0, 1]")
    if not raw_pairs >= 1 - 1e-12:
        raise ValueError(f"raw_pairs_per_output = {raw_pairs!r} must be >= 1 (or inf)")
    if not (isinstance(memory, int) and memory >= 1):
        raise ValueError(f"memory_per_node = {memory!r} must be an integer >= 1 (qubits)")
    if not time_s >= 0:
        raise ValueError(f"time_per_output_s = {time_s!r} must be >= 0 seconds (or inf)")


@dataclass(frozen=True)
class RoundFigures:
    """Figures of the pair made by the main chain up to and including one round.

    Attributes
    ----------
    bell : tuple of 4 floats
        Bell weights (I, X, Y, Z) of the round's output.
    fidelity : float
    success_probability : float
        Probability that this round's step succeeds.
    raw_pairs_per_output : float
        Mean raw pairs consumed per output of the chain so far (inf if it never succeeds).
    memory_per_node : int
        Qubits per node needed by the chain so far.
    time_per_output_s : float
        Mean time per output of the chain so far, seconds.
    """

    bell: tuple[float, float, float, float]
    fidelity: float
    success_probability: float
    raw_pairs_per_output: float
    memory_per_node: int
    time_per_output_s: float

    def __post_init__(self):
        _check_figures(
            bell=self.bell,
            fidelity=self.fidelity,
            raw_pairs=self.raw_pairs_per_output,
            memory=self.memory_per_node,
            time_s=self.time_per_output_s,
        )
        if not 0 <= self.success_probability <= 1 + 1e-12:
            raise ValueError(
                f"success_probability = {self.success_probability!r} is outside [0, 1]"
            )


@dataclass(frozen=True)
class RecipeResult:
    """Everything :func:`evaluate` reports about one recipe for one profile.

    Attributes
    ----------
    notation : str
        Canonical recipe string.
    recipe_id : str
        12 hex digits, hash of ``notation``.
    bell : tuple of 4 floats
        Output Bell weights (I, X, Y, Z).
    fidelity : float
        Output fidelity with Phi+.
    success_probabilities : tuple of float
        One per step in the order the steps happen: for each round of the main
        chain, the steps of its source (same rule, recursively), then the round.
    raw_pairs_per_output : float
        Mean raw pairs consumed per output pair (inf if a step never succeeds).
    pair_yield : float
        Output pairs per raw pair, ``1 / raw_pairs_per_output``.
    memory_per_node : int
        Qubits each node must store at once.
    rounds : int
        Classical communication rounds on the critical path.
    time_per_output_s : float
        Mean time per output pair, seconds.
    trace : tuple of RoundFigures
        One entry per round of the main chain.
    """

    notation: str
    recipe_id: str
    bell: tuple[float, float, float, float]
    fidelity: float
    success_probabilities: tuple[float, ...]
    raw_pairs_per_output: float
    pair_yield: float
    memory_per_node: int
    rounds: int
    time_per_output_s: float
    trace: tuple[RoundFigures, ...] = ()

    def __post_init__(self):
        _check_figures(
            bell=self.bell,
            fidelity=self.fidelity,
            raw_pairs=self.raw_pairs_per_output,
            memory=self.memory_per_node,
            time_s=self.time_per_output_s,
        )
        if not (isinstance(self.rounds, int) and self.rounds >= 0):
            raise ValueError(f"rounds = {self.rounds!r} must be an integer >= 0")
        if not 0 <= self.pair_yield <= 1 + 1e-12:
            raise ValueError(f"pair_yield = {self.pair_yield!r} is outside [0, 1]")

    def to_dict(self) -> dict:
        """Plain-JSON form; infinite costs and times become ``None``.

        Keys: ``recipe``, ``id``, ``fidelity``, ``bell``, ``success_probabilities``,
        ``raw_pairs_per_output``, ``yield``, ``memory_per_node``, ``rounds``,
        ``time_per_output_s``.
        """
        return {
            "recipe": self.notation,
            "id": self.recipe_id,
            "fidelity": self.fidelity,
            "bell": list(self.bell),
            "success_probabilities": list(self.success_probabilities),
            "raw_pairs_per_output": _finite_or_none(self.raw_pairs_per_output),
            "yield": self.pair_yield,
            "memory_per_node": self.memory_per_node,
            "rounds": self.rounds,
            "time_per_output_s": _finite_or_none(self.time_per_output_s),
        }


def evaluate(recipe, profile, *, canonicalise: bool = True) -> RecipeResult:
    """Evaluate one recipe exactly for a noise profile.

    Parameters
    ----------
    recipe : Recipe or str
        A recipe or a recipe string (:mod:`models.notation`).
    profile : models.Profile
    canonicalise : bool, keyword-only
        Evaluate the canonical form (default), so that every spelling of a recipe
        reports identical figures. With False the recipe is evaluated as
        written: the figures are the same, except that the output's X and Y
        weights (and those of the trace) may be exchanged.

    Returns
    -------
    RecipeResult

    Examples
    --------
    Two DEJMPS rounds from a Werner pair of F = 0.7 with perfect operations
    (Deutsch et al., PRL 77, 2818 (1996)): P = 0.68 then 0.640138.

    >>> from models.profile import Profile
    >>> from models.states import werner
    >>> res = evaluate("sY^2", Profile(tuple(werner(0.7))))
    >>> round(res.fidelity, 6), [round(p, 6) for p in res.success_probabilities]
    (0.845946, [0.68, 0.640138])
    >>> round(res.raw_pairs_per_output, 4), res.memory_per_node, res.rounds
    (9.1892, 3, 2)
    """
    recipe = as_recipe(recipe)
    if canonicalise:
        recipe = canonical(recipe)
    product = _evaluate(recipe, profile)
    bell = tuple(float(w) for w in product.bell)
    return RecipeResult(
        notation=recipe.notation,
        recipe_id=recipe.recipe_id,
        bell=bell,
        fidelity=bell[0],
        success_probabilities=product.steps,
        raw_pairs_per_output=float(product.cost),
        pair_yield=1.0 / product.cost if product.cost > 0 else 0.0,
        memory_per_node=int(product.memory),
        rounds=int(product.rounds),
        time_per_output_s=float(product.time_s),
        trace=product.trace,
    )
