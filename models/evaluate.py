"""Exact evaluation of one recipe for a noise profile: fidelity, costs, memory, time.

Model (all of it exact for the Bell-diagonal model unless marked *approximation*):

- Steps: the compiled circuits of :mod:`models.steps` (``TWO_TO_ONE`` through
  :func:`models.steps.run_step`; ``DOUBLE_SELECTION`` through its compiled map
  :attr:`models.steps.StepCircuit.terms` on the joint input, see
  :func:`models.steps.run_joint`, because waiting correlates its inputs) with the profile's
  :class:`models.noise.NodeNoise`.
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
  again, so by Wald's identity ``E[T(step)] = (sum E[T(input)] + D) / P_success``
  (exact given P_success, the success probability averaged over the waits).
- Memory decay (:func:`models.noise.store_with_decays`): an input waits from the
  moment it is made until the last input is made (the sum of the production
  times of the inputs made after it); the kept output waits D during the
  exchange; the input made last does not wait. The stored state is affine in
  E[exp(-a W)] for a = 2/T2, 1/T1, 2/T1, so it is averaged exactly over a random
  wait W with the Laplace transform of W: ``R / (R + a)`` for a raw pair, a
  product over the inputs waited for, ``exp(-a D)`` for the exchange. In double
  selection the first two inputs made both wait for the third, so their decays
  are correlated; their joint state is averaged exactly
  (:func:`shared_wait_joint`), which needs Laplace transforms at sums of two
  rates as well (:func:`memory_rates`).
- *Approximation* for waits on composite inputs: the production time T of a
  step is a random sum of attempts A = (inputs' times + D) until one succeeds,
  and we use ``L_T(a) = P L_A(a) / (1 - (1 - P) L_A(a))`` with
  ``L_A = prod L_inputs * exp(-a D)``, which treats each attempt's success as
  independent of its duration (longer attempts decay more and succeed less
  often), and we treat the state of an input as independent of its own
  production time. Everything is exact when pairs only wait for raw pairs
  (pumping with raw pairs, by 2->1 steps or double selection, and every first
  round) and when memories are perfect. ``tests/models/test_waiting.py``
  compares with a Monte Carlo simulation of the waiting times: exact cases
  agree within statistical error, waits on composite pairs underestimate the
  output fidelity slightly (about half a percent for three DEJMPS rounds with
  waits of a tenth of T1).

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

from .noise import depolarize, store_with_decays
from .notation import as_recipe, canonical
from .recipes import Recipe, Round, making_order, memory_needed
from .states import twirl_to_werner
from .kinds import STEP_KINDS
from .steps import run_joint, run_step


def memory_rates(noise) -> np.ndarray:
    """Rates (1/s) at which production times' Laplace transforms are kept, shape (10,).

    Entry 0 is 0 (no decay); entries 1-3 are the decay rates (2/T2, 1/T1, 2/T1) of
    :func:`models.noise.memory_decays`; entries 4-9 are the sums of two of them
    (:data:`SUM_INDEX`), needed where two stored pairs wait for the same input.
    An infinite T1 or T2 gives rate 0.
    """
    single = [2.0 / noise.t2_s, 1.0 / noise.t1_s, 2.0 / noise.t1_s]
    sums = [single[i] + single[j] for i in range(3) for j in range(i, 3)]
    return np.array([0.0] + single + sums)


def _sum_index() -> np.ndarray:
    index = np.zeros((4, 4), dtype=np.intp)
    pairs = [(i, j) for i in range(1, 4) for j in range(i, 4)]
    for i in range(4):
        for j in range(4):
            if i == 0 or j == 0:
                index[i, j] = i + j
            else:
                index[i, j] = 4 + pairs.index((min(i, j), max(i, j)))
    return index


# SUM_INDEX[i, j]: the entry of memory_rates holding rate i + rate j (i, j in 0..3)
SUM_INDEX = _sum_index()


def raw_pair_figures(profile) -> tuple[float, np.ndarray]:
    """Mean time (s) to receive a raw pair and the Laplace transform of that time.

    Returns ``(1 / R, R / (R + a))`` with ``a = memory_rates(profile.noise)``,
    shape of the second (10,); ``(0, 1)`` for an instant link (R = inf).
    """
    rate = profile.pair_rate_hz
    a = memory_rates(profile.noise)
    if math.isinf(rate):
        return 0.0, np.ones(a.shape)
    return 1.0 / rate, rate / (rate + a)


def _decay_basis() -> np.ndarray:
    """Row k, part m: part m of the unit pair e_k under :func:`models.noise.store_with_decays`."""
    eye = np.eye(4)
    zero, one = np.zeros(4), np.ones(4)
    base = store_with_decays(eye, zero, zero, zero)
    parts = [base]
    for k in range(3):
        d = [zero, zero, zero]
        d[k] = one
        parts.append(store_with_decays(eye, *d) - base)
    return np.stack(parts)


# DECAY_BASIS[m] (4, 4): pair @ DECAY_BASIS[m] is the part of a stored pair that
# decays with exponential m (m = 0: the part that does not decay)
DECAY_BASIS = _decay_basis()


def decay_parts(pair) -> np.ndarray:
    """The parts of a stored pair that decay with each exponential, shape (..., 4, 4).

    ``store_with_decays(pair, d1, d2, d3) == parts[..., 0, :] + d1 parts[..., 1, :]
    + d2 parts[..., 2, :] + d3 parts[..., 3, :]`` for a normalised pair: the stored
    pair is affine in the three exponentials, which is why averaging over a
    random wait needs only their expectations.
    """
    return np.einsum("...i,mij->...mj", np.asarray(pair, dtype=float), DECAY_BASIS)


def wait_for(pair, laplace) -> np.ndarray:
    """A pair stored while an input of Laplace transform ``laplace`` (..., 10) is made.

    Equal to ``store_with_decays(pair, *laplace[..., 1:4])`` (exact average over the
    random wait); shape ``(..., 4)``.
    """
    weights = np.asarray(laplace, dtype=float)[..., :4]
    weights = np.concatenate([np.ones(weights.shape[:-1] + (1,)), weights[..., 1:]], axis=-1)
    if weights.ndim == 1:  # one wait for all pairs: a single 4 x 4 map
        return np.asarray(pair, dtype=float) @ np.tensordot(weights, DECAY_BASIS, axes=1)
    return np.einsum("...m,...mj->...j", weights, decay_parts(pair))


def shared_wait_joint(first, second, laplace_middle, laplace_last) -> np.ndarray:
    """Joint weights of two stored pairs that both wait for the last input, shape (..., 4, 4).

    ``first`` waits while the middle and the last inputs are made, ``second``
    while the last one is made; the common wait correlates their decays. With
    ``d_i(W) = exp(-a_i W)`` (``a_0 = 0``), E[d_i(T_mid + T_last) d_j(T_last)] =
    L_mid(a_i) L_last(a_i + a_j), so the average of the product state is exact.
    """
    lm = np.asarray(laplace_middle, dtype=float)
    ll = np.asarray(laplace_last, dtype=float)
    coefficients = lm[..., :4, None] * ll[..., SUM_INDEX]
    inner = np.einsum("...ij,...jb->...ib", coefficients, decay_parts(second))
    return np.einsum("...ia,...ib->...ab", decay_parts(first), inner)


def made_joint(first, second, third, laplace_second, laplace_third, order) -> np.ndarray:
    """Joint weights, by role, of three inputs made one after another, shape (N, 4, 4, 4).

    ``first``, ``second``, ``third`` (each (N, 4)) are the inputs in making order,
    ``order`` their roles (0 kept, 1 and 2 sacrificed). The first waits while the
    second and third are made, the second while the third is made
    (:func:`shared_wait_joint`); the third does not wait.
    """
    pair = shared_wait_joint(first, second, laplace_second, laplace_third)
    joint = pair[..., :, :, None] * np.asarray(third, dtype=float)[..., None, None, :]
    # axes 1, 2, 3 are the inputs in making order; put them in role order
    return np.moveaxis(joint, (1, 2, 3), tuple(1 + r for r in order))


def twirl(pair, single_qubit) -> np.ndarray:
    """Re-twirl to Werner form, with the noise of one rotation.

    The twirl is a random bilateral Clifford applied as a gate; averaged over
    the draw it makes a Bell-diagonal pair Werner, and it adds single-qubit
    depolarising noise ``single_qubit`` (p1) at each node whatever is drawn.
    Shape ``(..., 4)`` -> ``(..., 4)``.

    Examples
    --------
    >>> twirl([0.9, 0.1, 0.0, 0.0], 1.0).round(6).tolist()
    [0.9, 0.033333, 0.033333, 0.033333]
    >>> round(float(twirl([0.9, 0.1, 0.0, 0.0], 0.9)[0]), 6)  # 0.81 * 0.9 + 0.19 / 4
    0.7765
    """
    return depolarize(twirl_to_werner(pair), single_qubit)


def attempt_laplace(success, attempt_laplace_value):
    """Laplace transform of a production time, *approximation* of independent success.

    ``L_T = P L_A / (1 - (1 - P) L_A)`` for a geometric number of i.i.d. attempts of
    Laplace transform ``L_A``, each succeeding with probability P independently of
    its duration; 0 where P = 0. Broadcasts.
    """
    p = np.asarray(success, dtype=float)
    la = np.asarray(attempt_laplace_value, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        out = p * la / (1.0 - (1.0 - p) * la)
    return np.where(p > 0, out, 0.0)


def finish_step(kept, success, *, twirled, inputs_cost, inputs_time_s, inputs_laplace, profile):
    """A step's output and its costs once the step has run, for N steps at once.

    The kept pair waits the one-way classical delay D during the exchange of
    outcomes, then is re-twirled where ``twirled``; a failed step discards all
    inputs, so ``cost = sum of input costs / P`` and, by Wald's identity,
    ``time = (sum of input times + D) / P``; the production time's Laplace
    transform follows :func:`attempt_laplace`.

    Parameters
    ----------
    kept : (N, 4) kept pairs given success; success : (N,)
    twirled : bool or (N,) bool
    inputs_cost, inputs_time_s : (N,) sums over the step's inputs (raw pairs, seconds)
    inputs_laplace : (N, 10) product of the inputs' Laplace transforms
    profile : models.Profile

    Returns
    -------
    out (N, 4), cost (N,), time_s (N,), laplace (N, 10); cost and time are inf where P = 0.
    """
    noise = profile.noise
    delay = profile.classical_delay_s
    exchange = np.exp(-memory_rates(noise) * delay)
    out = wait_for(kept, exchange)
    twirled = np.broadcast_to(twirled, success.shape)
    if twirled.any():
        out[twirled] = twirl(out[twirled], noise.single_qubit)
    ok = success > 0
    safe = np.where(ok, success, 1.0)
    cost = np.where(ok, inputs_cost / safe, np.inf)
    time_s = np.where(ok, (inputs_time_s + delay) / safe, np.inf)
    laplace = attempt_laplace(success[:, None], inputs_laplace * exchange)
    return out, cost, time_s, laplace


@dataclass(frozen=True)
class _Product:
    """Figures of the pair a (sub-)recipe makes, as needed by the step that uses it."""

    bell: np.ndarray
    cost: float
    memory: int
    rounds: int
    time_s: float
    laplace: np.ndarray
    steps: tuple[float, ...] = ()
    trace: tuple = field(default=())


def _raw(profile, twirled: bool = False) -> _Product:
    # a raw pair twirled on arrival (a recipe's leading '~') takes no time to twirl
    time_s, laplace = raw_pair_figures(profile)
    bell = twirl(profile.raw, profile.noise.single_qubit) if twirled else profile.raw
    return _Product(bell, 1.0, 1, 0, time_s, laplace)


def _step(r: Round, inputs: list[_Product], profile) -> tuple[_Product, float]:
    noise = profile.noise
    memories = [c.memory for c in inputs]
    order = making_order(memories)
    circuit = STEP_KINDS[r.selection].circuit
    made = [inputs[i] for i in order]
    if len(inputs) == 2:
        stored = [None, None]
        stored[order[0]] = wait_for(made[0].bell, made[1].laplace)
        stored[order[1]] = made[1].bell
        success, kept = run_step(
            circuit,
            stored,
            r.rotations,
            two_qubit=noise.two_qubit,
            single_qubit=noise.single_qubit,
            measurement=noise.measurement,
        )
    else:
        joint = made_joint(*(c.bell[None] for c in made), made[1].laplace, made[2].laplace, order)
        success, kept = run_joint(
            circuit,
            joint,
            r.rotations,
            two_qubit=noise.two_qubit,
            single_qubit=noise.single_qubit,
            measurement=noise.measurement,
        )
    p = float(success[0])
    out, cost, time_s, laplace = finish_step(
        kept,
        success,
        twirled=r.twirl,
        inputs_cost=np.array([sum(c.cost for c in inputs)]),
        inputs_time_s=np.array([sum(c.time_s for c in inputs)]),
        inputs_laplace=np.prod([c.laplace for c in inputs], axis=0)[None],
        profile=profile,
    )
    product = _Product(
        out[0],
        float(cost[0]),
        memory_needed(memories),
        1 + max(c.rounds for c in inputs),
        float(time_s[0]),
        laplace[0],
    )
    return product, p


def _evaluate(recipe: Recipe, profile) -> _Product:
    raw = _raw(profile, recipe.raw_twirl)
    current = raw
    steps: list[float] = []
    trace = []
    for r in recipe.rounds:
        if r.sacrificed == "raw":
            sacrificed = raw
        elif r.sacrificed == "same":
            sacrificed = current
        else:
            sacrificed = _evaluate(r.source, profile)
            steps.extend(sacrificed.steps)
        current, p = _step(r, [current] + [sacrificed] * (r.n_inputs - 1), profile)
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
    return _Product(
        current.bell,
        current.cost,
        current.memory,
        current.rounds,
        current.time_s,
        current.laplace,
        tuple(steps),
        tuple(trace),
    )


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
