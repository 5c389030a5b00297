"""An independent check of one recipe: re-simulated with full density matrices.

:func:`verify` runs the recipe in :mod:`models.density` (full 4 x 4 pair states,
every noise source a Kraus map, the steps through their circuits) and sets its
fidelity, per-step success probabilities, raw pairs per output and mean time
beside those of the Bell-diagonal model (:func:`models.evaluate.evaluate`).

How the waits are handled:

- *exact*: when memories are perfect (waits change no state; times follow from
  Wald's identity with the simulated success probabilities), or when no wait is
  random (an instant link, and every pair that is stored waits only for raw
  pairs, which take no time, or the classical delay is zero). Each made pair
  is one density matrix and every figure is computed, not sampled.
- *sampled*: otherwise. The production process is simulated ``samples`` times
  with a seeded generator: raw pairs arrive after exponential waits, the
  inputs of a step are made one after another (in the model's order,
  :func:`models.recipes.making_order`), every stored pair decays in memory for
  its own sampled wait, each attempt succeeds with the probability its own
  inputs give and a failed attempt starts again from scratch; the kept pair
  waits the classical delay. Figures come with their standard errors.

Two runs: *twirled* keeps only the Bell diagonal of each pair after each wait,
which is what the Bell-diagonal model assumes, so it must agree with the model
(to rounding where exact, within statistical error where sampled, wherever
the model's waiting rule is exact); *untwirled* keeps the full density matrices
through the waits. Their difference answers whether the twirl assumption
matters for the recipe. The untwirled run is made when a memory decays (with
perfect memories both runs are the same), or on request.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from models import density
from models.evaluate import RecipeResult, evaluate
from models.formatting import format_recipe
from models.kinds import STEP_KINDS
from models.notation import as_recipe
from models.recipes import Recipe, making_order

DEFAULT_SAMPLES = 2000


@dataclass(frozen=True)
class Resimulation:
    """Figures of one density-matrix re-simulation (standard errors 0 where exact).

    Attributes
    ----------
    fidelity, fidelity_se : float
        Mean output fidelity with Phi+.
    bell : tuple of 4 floats
        Bell weights (I, X, Y, Z) of the mean output state.
    coherence : float
        Frobenius norm of the mean output's off-diagonal part in the Bell basis
        (0 for a Bell-diagonal output).
    success_probabilities, success_se : tuple of float
        One per step, in the model's order (a round's source steps, then the round).
    raw_pairs_per_output, raw_pairs_se : float
    time_per_output_s, time_se : float
        Mean time per output pair, seconds.
    """

    fidelity: float
    fidelity_se: float
    bell: tuple[float, ...]
    coherence: float
    success_probabilities: tuple[float, ...]
    success_se: tuple[float, ...]
    raw_pairs_per_output: float
    raw_pairs_se: float
    time_per_output_s: float
    time_se: float


@dataclass(frozen=True)
class Verification:
    """The model beside its re-simulation, for one recipe and profile.

    Attributes
    ----------
    recipe : str
        The recipe as written (that is what is simulated and evaluated).
    canonical : str
        Its canonical form.
    method : str
        ``"exact"`` or ``"sampled"``.
    samples, seed : int or None
        Outputs sampled and the generator's seed (None where exact).
    model : RecipeResult
    twirled : Resimulation
        Each pair's Bell diagonal kept after each wait (the model's assumption).
    untwirled : Resimulation or None
        Full density matrices through the waits.
    step_labels : tuple of str
        One label per step, in the order of ``success_probabilities``.
    fidelity_moved_se : float
        Standard error of ``untwirled.fidelity - twirled.fidelity`` (paired
        samples with common random numbers; 0 where exact or not run).
    """

    recipe: str
    canonical: str
    method: str
    samples: int | None
    seed: int | None
    model: RecipeResult
    twirled: Resimulation
    untwirled: Resimulation | None
    step_labels: tuple[str, ...]
    fidelity_moved_se: float = 0.0

    def rows(self) -> list[dict]:
        """One row per figure: name, model, simulated (twirled), se, difference, untwirled."""
        m, t, u = self.model, self.twirled, self.untwirled
        figures = [("fidelity F", m.fidelity, t.fidelity, t.fidelity_se, "fidelity")]
        for i, label in enumerate(self.step_labels):
            figures.append(
                (
                    f"success {label}",
                    m.success_probabilities[i],
                    t.success_probabilities[i],
                    t.success_se[i],
                    ("success_probabilities", i),
                )
            )
        for name, key, se in (
            ("raw pairs / output", "raw_pairs_per_output", t.raw_pairs_se),
            ("time / output (s)", "time_per_output_s", t.time_se),
        ):
            figures.append((name, getattr(m, key), getattr(t, key), se, key))
        rows = []
        for name, model, simulated, se, key in figures:
            row = {
                "figure": name,
                "model": model,
                "simulated": simulated,
                "standard_error": se,
                "difference": simulated - model,
            }
            if u is not None:
                untwirled = _figure(u, key)
                row["untwirled"] = untwirled
                row["moved"] = untwirled - simulated
            rows.append(row)
        return rows

    def to_dict(self) -> dict:
        """Plain-JSON form (infinite figures become None)."""

        def clean(x):
            if isinstance(x, float) and not math.isfinite(x):
                return None
            return x

        def run(r: Resimulation | None):
            if r is None:
                return None
            return {
                "fidelity": r.fidelity,
                "fidelity_se": r.fidelity_se,
                "bell": list(r.bell),
                "coherence": r.coherence,
                "success_probabilities": list(r.success_probabilities),
                "success_se": list(r.success_se),
                "raw_pairs_per_output": clean(r.raw_pairs_per_output),
                "raw_pairs_se": clean(r.raw_pairs_se),
                "time_per_output_s": clean(r.time_per_output_s),
                "time_se": clean(r.time_se),
            }

        return {
            "recipe": self.recipe,
            "canonical": self.canonical,
            "method": self.method,
            "samples": self.samples,
            "seed": self.seed,
            "steps": list(self.step_labels),
            "model": self.model.to_dict(),
            "twirled": run(self.twirled),
            "untwirled": run(self.untwirled),
            "fidelity_moved_se": self.fidelity_moved_se,
            "rows": [{k: clean(v) for k, v in row.items()} for row in self.rows()],
        }


def _figure(r: Resimulation, key):
    if isinstance(key, tuple):
        return r.success_probabilities[key[1]]
    return getattr(r, key)


def memory_decays(profile) -> bool:
    """True when a stored qubit decays (finite T1 or T2)."""
    return math.isfinite(profile.noise.t1_s) or math.isfinite(profile.noise.t2_s)


def waits_are_exact(recipe, profile) -> bool:
    """True when the re-simulation needs no sampling (see the module's docstring)."""
    recipe = as_recipe(recipe)
    if not memory_decays(profile):
        return True
    if math.isfinite(profile.pair_rate_hz):
        return False
    if profile.classical_delay_s == 0:
        return True
    return _only_raw_waited_for(recipe)


def _only_raw_waited_for(recipe: Recipe) -> bool:
    for depth, r in enumerate(recipe.rounds, 1):
        inputs = _inputs(recipe, depth)
        order = making_order([memory for _, _, memory in inputs])
        if any(inputs[i][1] > 0 for i in order[1:]):
            return False
        if r.source is not None and not _only_raw_waited_for(r.source):
            return False
    return True


def _inputs(recipe: Recipe, depth: int) -> list[tuple]:
    """(recipe, depth, memory per node) of each input of round ``depth``, kept first."""
    r = recipe.rounds[depth - 1]
    kept = (recipe, depth - 1, Recipe(recipe.rounds[: depth - 1]).memory_per_node)
    if r.sacrificed == "raw":
        sacrificed = (recipe, 0, 1)
    elif r.sacrificed == "same":
        sacrificed = kept
    else:
        sacrificed = (r.source, r.source.depth, r.source.memory_per_node)
    return [kept] + [sacrificed] * (r.n_inputs - 1)


def step_keys(recipe: Recipe, path: tuple = ()) -> list[tuple]:
    """Each step as (path of sources, depth), in the model's order of steps."""
    keys = []
    for depth, r in enumerate(recipe.rounds, 1):
        if r.source is not None:
            keys.extend(step_keys(r.source, path + (depth,)))
        keys.append((path, depth))
    return keys


def _step_label(recipe: Recipe, key) -> str:
    path, depth = key
    words, rec = [], recipe
    for d in path:
        words.append(f"round {d} source")
        rec = rec.rounds[d - 1].source
    words.append(f"round {depth} {format_recipe(Recipe((rec.rounds[depth - 1],)))}")
    return ", ".join(words)


class _Simulator:
    """One re-simulation of a recipe (twirled or not), exact or sampled."""

    def __init__(self, profile, *, twirled: bool, rng=None):
        self.profile = profile
        self.noise = profile.noise
        self.twirled = twirled
        self.rng = rng
        self.delay = profile.classical_delay_s
        self.effects = {}
        self.success = {}  # step key -> list of per-attempt success probabilities

    # ------------------------------------------------------------------ pieces
    def raw_state(self, recipe: Recipe, m: int):
        rho = density.pair_density(self.profile.raw)
        if recipe.raw_twirl:
            rho = density.twirl_to_werner(rho, single_qubit=self.noise.single_qubit)
        return np.broadcast_to(rho, (m, 4, 4))

    def raw_times(self, m: int):
        rate = self.profile.pair_rate_hz
        if math.isinf(rate):
            return np.zeros(m)
        if self.rng is None:
            return np.full(m, 1.0 / rate)  # exact mode: only the mean is used
        return self.rng.exponential(1.0 / rate, m)

    def wait(self, rho, wait_s):
        """A stored pair waits; the twirled run keeps its Bell diagonal only."""
        out = density.store_pair(rho, wait_s, t1_s=self.noise.t1_s, t2_s=self.noise.t2_s)
        return density.bell_project(out) if self.twirled else out

    def step(self, r, states):
        key = (r.selection, r.rotations)
        if key not in self.effects:
            self.effects[key] = density.step_effects(
                STEP_KINDS[r.selection].circuit,
                r.rotations,
                two_qubit=self.noise.two_qubit,
                single_qubit=self.noise.single_qubit,
                measurement=self.noise.measurement,
            )
        return density.run_on_pairs(self.effects[key], states)

    def finish(self, r, kept):
        """The kept pair waits the classical exchange, then is re-twirled where asked."""
        out = self.wait(kept, np.full(kept.shape[0], self.delay))
        if r.twirl:
            out = density.twirl_to_werner(out, single_qubit=self.noise.single_qubit)
        return out

    # ------------------------------------------------------------ exact mode
    def exact(self, recipe: Recipe, depth: int, path: tuple, memo: dict):
        """(state (1, 4, 4), raw pairs, mean time) of the pair made by ``depth`` rounds."""
        if (path, depth) in memo:
            return memo[(path, depth)]
        if depth == 0:
            made = (self.raw_state(recipe, 1), 1.0, float(self.raw_times(1)[0]))
        else:
            r = recipe.rounds[depth - 1]
            states, cost, time_s = [], 0.0, 0.0
            for sub, sub_depth, _ in _inputs(recipe, depth):
                sub_path = path if sub is recipe else path + (depth,)
                rho, c, t = self.exact(sub, sub_depth, sub_path, memo)
                # a stored pair waits only for raw pairs of an instant link, or
                # memories are perfect: no wait changes a state here
                states.append(rho)
                cost, time_s = cost + c, time_s + t
            p, kept = self.step(r, states)
            p = float(p[0])
            self.success[(path, depth)] = [np.array([p])]
            out = self.finish(r, kept)
            if p > 0:
                made = (out, cost / p, (time_s + self.delay) / p)
            else:
                made = (out, math.inf, math.inf)
        memo[(path, depth)] = made
        return made

    # ---------------------------------------------------------- sampled mode
    def sample(self, recipe: Recipe, depth: int, m: int, path: tuple):
        """``m`` pairs made by ``depth`` rounds: states (m, 4, 4), times (m,), raw pairs (m,)."""
        if depth == 0:
            return self.raw_state(recipe, m), self.raw_times(m), np.ones(m)
        r = recipe.rounds[depth - 1]
        inputs = _inputs(recipe, depth)
        order = making_order([memory for _, _, memory in inputs])
        rho = np.empty((m, 4, 4), dtype=complex)
        total_time, raw = np.zeros(m), np.zeros(m)
        pending = np.arange(m)
        while pending.size:
            k = pending.size
            made = {}
            for i in order:  # one after another
                sub, sub_depth, _ = inputs[i]
                sub_path = path if sub is recipe else path + (depth,)
                made[i] = self.sample(sub, sub_depth, k, sub_path)
            states = [None] * len(inputs)
            for j, i in enumerate(order):
                # each input waits while the inputs after it are made
                wait = sum((made[later][1] for later in order[j + 1 :]), np.zeros(k))
                states[i] = self.wait(made[i][0], wait)
            p, kept = self.step(r, states)
            self.success.setdefault((path, depth), []).append(p)
            ok = self.rng.random(k) < p
            total_time[pending] += sum(t for _, t, _ in made.values()) + self.delay
            raw[pending] += sum(n for _, _, n in made.values())
            rho[pending[ok]] = self.finish(r, kept[ok])
            pending = pending[~ok]
        return rho, total_time, raw


def _mean_se(x) -> tuple[float, float]:
    x = np.asarray(x, dtype=float)
    if x.size < 2:
        return float(x.mean()), 0.0
    return float(x.mean()), float(x.std(ddof=1) / math.sqrt(x.size))


def _resimulate(recipe: Recipe, profile, *, twirled: bool, exact: bool, samples, seed):
    keys = step_keys(recipe)
    if exact:
        sim = _Simulator(profile, twirled=twirled)
        rho, cost, time_s = sim.exact(recipe, recipe.depth, (), {})
        fidelities = density.bell_weights(rho)[:, 0]
        mean = rho[0]
        success = [float(sim.success[k][0][0]) for k in keys]
        figures = dict(
            success_se=(0.0,) * len(keys),
            raw_pairs_per_output=cost,
            raw_pairs_se=0.0,
            time_per_output_s=time_s,
            time_se=0.0,
        )
        fidelity, fidelity_se = float(fidelities[0]), 0.0
    else:
        sim = _Simulator(profile, twirled=twirled, rng=np.random.default_rng(seed))
        rho, times, raw = sim.sample(recipe, recipe.depth, samples, ())
        fidelities = density.bell_weights(rho)[:, 0]
        mean = rho.mean(axis=0)
        stats = [_mean_se(np.concatenate(sim.success[k])) for k in keys]
        success = [s for s, _ in stats]
        raw_mean, raw_se = _mean_se(raw)
        time_mean, time_se = _mean_se(times)
        figures = dict(
            success_se=tuple(se for _, se in stats),
            raw_pairs_per_output=raw_mean,
            raw_pairs_se=raw_se,
            time_per_output_s=time_mean,
            time_se=time_se,
        )
        fidelity, fidelity_se = _mean_se(fidelities)
    result = Resimulation(
        fidelity=fidelity,
        fidelity_se=fidelity_se,
        bell=tuple(float(w) for w in density.bell_weights(mean)),
        coherence=float(density.bell_coherence(mean)),
        success_probabilities=tuple(success),
        **figures,
    )
    return result, fidelities


def verify(
    recipe,
    profile,
    *,
    samples: int = DEFAULT_SAMPLES,
    seed: int = 0,
    untwirled: bool | None = None,
    sampled: bool | None = None,
) -> Verification:
    """Re-simulate a recipe with full density matrices beside the model's figures.

    Parameters
    ----------
    recipe : Recipe or str
        Simulated and evaluated as written (not canonicalised).
    profile : models.Profile
    samples : int, keyword-only
        Outputs sampled where waits must be sampled.
    seed : int, keyword-only
        Seed of the generator; the twirled and untwirled runs share it (common
        random numbers, so their difference is measured more precisely).
    untwirled : bool or None, keyword-only
        Also run without the twirl; default: when a memory decays.
    sampled : bool or None, keyword-only
        Force sampling (True) even where exact; default: sample only where needed.

    Returns
    -------
    Verification

    Examples
    --------
    DEJMPS twice from a Werner pair of F = 0.7, perfect operations (Deutsch et al.,
    PRL 77, 2818 (1996)): exact, and equal to the model.

    >>> from models import Profile, werner
    >>> v = verify("sY^2", Profile(tuple(werner(0.7))))
    >>> v.method, round(v.twirled.fidelity, 6), abs(v.rows()[0]["difference"]) < 1e-12
    ('exact', 0.845946, True)
    """
    recipe = as_recipe(recipe)
    if not (isinstance(samples, int) and samples >= 2):
        raise ValueError(f"samples = {samples!r} must be a whole number >= 2")
    exact = waits_are_exact(recipe, profile) if not sampled else False
    if untwirled is None:
        untwirled = memory_decays(profile)
    options = dict(exact=exact, samples=samples, seed=seed)
    twirled_run, f_twirled = _resimulate(recipe, profile, twirled=True, **options)
    untwirled_run, moved_se = None, 0.0
    if untwirled:
        untwirled_run, f_untwirled = _resimulate(recipe, profile, twirled=False, **options)
        if not exact:
            moved_se = _mean_se(f_untwirled - f_twirled)[1]
    return Verification(
        recipe=format_recipe(recipe),
        canonical=recipe.notation,
        method="exact" if exact else "sampled",
        samples=None if exact else samples,
        seed=None if exact else seed,
        model=evaluate(recipe, profile, canonicalise=False),
        twirled=twirled_run,
        untwirled=untwirled_run,
        step_labels=tuple(_step_label(recipe, k) for k in step_keys(recipe)),
        fidelity_moved_se=moved_se,
    )


TABLE_SAMPLES = 500


def verified_rows(results, profile, *, samples: int = TABLE_SAMPLES, seed: int = 0) -> list[dict]:
    """The verified column of a table: each recipe's model F beside its re-simulated F.

    Parameters
    ----------
    results : sequence of RecipeResult
        The table's rows (their canonical recipes are re-simulated).
    profile : models.Profile

    Returns
    -------
    list of dict, one per result: ``recipe``, ``method``, ``model``, ``simulated``,
    ``standard_error``, ``difference`` (fidelities).
    """
    rows = []
    for r in results:
        checked = verify(r.notation, profile, samples=samples, seed=seed, untwirled=False)
        row = checked.rows()[0]
        rows.append(
            {
                "recipe": r.notation,
                "method": checked.method,
                "model": r.fidelity,
                "simulated": row["simulated"],
                "standard_error": row["standard_error"],
                "difference": row["simulated"] - r.fidelity,
            }
        )
    return rows
