"""Every linear recipe up to a depth, and the exact Pareto front among them.

Breadth first, depth by depth, over *distinct states*: the states of depth d are
expanded by every round of :data:`models.chain.LINEAR_ROUNDS` (2->1 with every
rotation pair, double selection with every rotation triple, pumping or symmetric,
with and without re-twirl), with :func:`models.chain.advance` in batches spread
over worker processes. Partial recipes that reach the same state are merged,
keeping the cheapest (:func:`optimise.levels.merge_identical` says why that is
exact and why different states are never pruned against each other). Each state
keeps a back-pointer (parent state, round code) from which its recipe is rebuilt.

The result is complete: every linear recipe of the space up to ``complete_depth``
is either on the front or dominated by a recipe on it.

Exact shortcuts (each proved where it is defined, in :mod:`optimise.levels`):
rounds that would hand the step bit-identical inputs are evaluated once; the
re-twirled variant of a round is derived from the untwirled one; and with perfect
single-qubit gates, states that differ by a relabelling of X, Y, Z (only X <-> Y
when memories decay) are merged. Nothing else is pruned, so the number of
distinct states grows by a factor of about 100 per depth for a Werner input:
``tests/benchmarks/bench_search.py`` measures how deep this gets in a given time.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass

import numpy as np
from joblib import Parallel, delayed, effective_n_jobs

from models.chain import (
    CODE_DOUBLE,
    CODE_SAME,
    CODE_TWIRL,
    N_CODES,
    ChainBatch,
    recipe_from_codes,
    start_chains,
)
from models.evaluate import evaluate

from .levels import (
    FIELDS,
    base_codes,
    concat,
    count_rounds,
    expand_chunk,
    labels_of,
    merge_identical,
    objective_values,
    symmetry_of,
)
from .limits import as_limits
from .objectives import check_objectives
from .pareto import pareto_mask, quantise, unique_front

PARALLEL_MIN_ROWS = 5_000_000  # rounds before input merging; below this one process is faster


@dataclass(frozen=True, kw_only=True)
class ExhaustiveFront:
    """The complete front of the linear recipes up to a depth.

    Attributes
    ----------
    results : list of models.evaluate.RecipeResult
        The front, fidelity descending, one recipe per distinct point.
    states_per_depth : tuple of int
        Distinct states (after merging) at depth 1, 2, ...
    evaluations_per_depth : tuple of int
        Rounds evaluated with :func:`models.chain.advance` at each depth.
    complete : bool
        True when every depth up to the requested one was searched.
    complete_depth : int
        The front is complete for every linear recipe of at most this many rounds.
    space : str
        One sentence naming the space.
    symmetry : str
        The exact relabelling merge used (``"xyz"``, ``"xy"`` or ``"none"``).
    seconds : float
        Wall time.
    """

    results: list
    states_per_depth: tuple
    evaluations_per_depth: tuple
    complete: bool
    complete_depth: int
    space: str
    symmetry: str
    seconds: float


def space_codes(include_double: bool = True, codes=None) -> np.ndarray:
    """Round codes of the space: all of LINEAR_ROUNDS, or without double selection."""
    c = np.arange(N_CODES) if codes is None else np.unique(np.asarray(codes, dtype=np.intp))
    if c.size and (c.min() < 0 or c.max() >= N_CODES):
        raise ValueError(
            f"codes must be indices into models.chain.LINEAR_ROUNDS (0..{N_CODES - 1})"
        )
    return c if include_double else c[~CODE_DOUBLE[c]]


def closed_under_rotations(codes) -> bool:
    """Whether the space holds, with each round, the same round with any other rotations."""
    c = np.unique(np.asarray(codes, dtype=np.intp))
    kind = CODE_DOUBLE[c] * 4 + CODE_SAME[c] * 2 + CODE_TWIRL[c]
    for k in np.unique(kind):
        # every code is one rotation tuple of its kind: all 36 (2->1) or 216 (double) there?
        if np.count_nonzero(kind == k) != (216 if k >= 4 else 36):
            return False
    return True


def describe_linear_space(depth: int, include_double: bool = True, restricted: bool = False) -> str:
    """One sentence naming the exhaustive space."""
    what = (
        "a chosen subset of the linear rounds"
        if restricted
        else (
            "2->1 steps with every rotation pair"
            + (" and double selection with every rotation triple" if include_double else "")
            + ", pumping fresh raw pairs or symmetric, with or without re-twirl"
        )
    )
    return f"every linear recipe of 1 to {depth} rounds, each round one of {what}"


def _chunks(level: ChainBatch, jobs: int, per_state: int):
    """Row ranges of a level's chunks, for ``jobs`` workers (a count, not -1)."""
    n = len(level)
    pieces = 1 if n * per_state < PARALLEL_MIN_ROWS or jobs == 1 else min(n, 8 * jobs)
    # memory bound: at most ~2M rounds per chunk
    pieces = max(pieces, math.ceil(n * per_state / 2_000_000))
    bounds = np.linspace(0, n, pieces + 1).astype(int)
    return [(a, b) for a, b in zip(bounds[:-1], bounds[1:], strict=True) if b > a]


def _expand_level(level, profile, codes, options, n_jobs):
    """Chunk results in the order of the chunks, parents shifted to level indices.

    The chunks run on the active joblib backend (:func:`joblib.parallel_config`;
    local processes by default); taken in their order, the merges keep the same
    one of equal partial recipes whichever worker finished first.
    """
    jobs = effective_n_jobs(n_jobs)
    ranges = _chunks(level, jobs, len(codes))
    tasks = [({f: getattr(level, f)[a:b] for f in FIELDS}, a) for a, b in ranges]
    if len(tasks) > 1 and jobs != 1:
        outs = Parallel(n_jobs=n_jobs, return_as="generator")(
            delayed(_shifted)(arrays, profile, codes, options, a) for arrays, a in tasks
        )
    else:
        outs = (_shifted(arrays, profile, codes, options, a) for arrays, a in tasks)
    yield from outs


def _shifted(arrays, profile, codes, options, offset):
    out = expand_chunk(arrays, profile, codes, options)
    out["parent"] = out["parent"] + offset
    return out


class _Gather:
    """Collects a level's chunks; at the last depth keeps only Pareto candidates.

    The hashes counting the last depth's states go to buckets by their top bits,
    so that no more than one bucket is ever sorted at once.
    """

    BUCKETS = 64

    def __init__(self, options):
        self.options = options
        self.parts = []
        self.held = 0
        self.evaluations = 0
        self.buckets = [[] for _ in range(self.BUCKETS)]

    def add(self, out):
        self.evaluations += out.pop("evaluations")
        hashes = out.pop("hashes", None)
        if hashes is not None:
            top = (hashes >> np.uint64(58)).astype(np.intp)
            order = np.argsort(top, kind="stable")
            bounds = np.searchsorted(top[order], np.arange(self.BUCKETS + 1))
            for b in range(self.BUCKETS):
                if bounds[b + 1] > bounds[b]:
                    self.buckets[b].append(hashes[order[bounds[b] : bounds[b + 1]]])
        self.parts.append(out)
        self.held += len(out["code"])
        if self.options["final"] and self.held > 400_000:
            self.parts = [self._merged()]
            self.held = len(self.parts[0]["code"])

    def _merged(self) -> dict:
        parts = self.parts
        batch = concat([ChainBatch(**{f: o[f] for f in FIELDS}) for o in parts])
        keys = np.concatenate([o["keys"] for o in parts])
        keep = merge_identical(keys, labels_of(batch, self.options["extra"]))
        if self.options["final"]:
            values, maximise = objective_values(batch.take(keep), self.options["objectives"])
            keep = keep[pareto_mask(quantise(values), maximise)]
        merged = {f: getattr(batch, f)[keep] for f in FIELDS}
        merged["keys"] = keys[keep]
        for name in ("parent", "code"):
            merged[name] = np.concatenate([o[name] for o in parts])[keep]
        return merged

    def result(self):
        merged = self._merged()
        batch = ChainBatch(**{f: merged[f] for f in FIELDS})
        if self.options["final"]:
            n_states = sum(len(np.unique(np.concatenate(b))) for b in self.buckets if b)
        else:
            n_states = len(batch)
        return batch, merged["parent"], merged["code"], n_states


def exhaustive_front(
    profile,
    *,
    max_depth,
    objectives=("fidelity", "yield"),
    limits=None,
    n_jobs=1,
    include_double=True,
    codes=None,
    max_states=None,
    max_evaluations=None,
    symmetry=True,
    count_last=True,
    on_depth=None,
) -> ExhaustiveFront:
    """Exact Pareto front of every linear recipe with 0..max_depth rounds (0: the raw pair).

    Parameters
    ----------
    profile : models.Profile
    max_depth : int >= 1
    objectives : tuple
        ``"fidelity"`` and ``"yield"`` (maximised), optionally ``"memory"`` and
        ``"time"`` (minimised).
    limits : Limits, dict or None
        Recipes over a limit are left out. Memory and time never decrease along a
        chain, so a partial recipe over a limit is dropped with all its extensions.
    n_jobs : int or None
        Workers of the active joblib backend (:func:`joblib.parallel_config`;
        local processes by default); -1 for all, None for the configured number.
    include_double : bool
        Include double-selection rounds.
    codes : int array, optional
        Restrict the rounds to these codes of :data:`models.chain.LINEAR_ROUNDS`.
    max_states : int, optional
        Stop before expanding a depth with more distinct states than this; the
        result is then complete only up to ``complete_depth``.
    max_evaluations : int, optional
        Likewise, stop before a depth that needs more rounds evaluated than this.
    symmetry : bool
        Merge relabelled states where that is exact (:func:`optimise.levels.symmetry_of`).
    count_last : bool
        Count the distinct states of the last depth (costs memory at large depths).
    on_depth : callable(depth, states, evaluations, seconds), optional
        Called after each depth.

    Returns
    -------
    ExhaustiveFront
    """
    started = time.monotonic()
    objectives = check_objectives(objectives)
    limits = as_limits(limits)
    if isinstance(max_depth, bool) or not isinstance(max_depth, int) or max_depth < 1:
        raise ValueError(f"max_depth = {max_depth!r} must be an integer >= 1")
    depth_goal = max_depth if limits.max_depth is None else min(max_depth, limits.max_depth)
    code_set = space_codes(include_double, codes)
    closed = closed_under_rotations(code_set)
    # both shortcuts swap one rotation for another, so the space must hold them all
    sym = symmetry_of(profile) if symmetry and closed else "none"
    options = {
        "symmetry": sym,
        # identical-input shortcut: needs inputs that reach the step unchanged (no memory
        # decay) and a space holding every rotation variant of each of its rounds
        "dedupe": math.isinf(profile.noise.t1_s) and math.isinf(profile.noise.t2_s) and closed,
        "extra": tuple(o for o in objectives if o in ("memory", "time")),
        "max_memory": limits.max_memory_per_node,
        "max_time": limits.max_time_per_output_s,
        "objectives": objectives,
        "final": False,
        "count": bool(count_last),
    }
    # with perfect memories the waiting data is one rate whatever the rounds ahead
    rate_free = start_chains(profile, 1, rounds_ahead=depth_goal).weighted.shape[1] == 1
    if max_evaluations is None or rate_free:
        passes = [depth_goal]
    else:
        # The chains carry the waiting data of every round still to come, which grows
        # with the rounds ahead; the evaluation bound decides how deep this call
        # goes, so carry data for one depth more per pass and deepen only while the
        # bound allows (each pass costs about 1% of the next: a depth multiplies the
        # states a hundredfold).
        passes = range(1, depth_goal + 1)
    reported = [0]

    def report(depth, n_states, n_evaluations, seconds):
        if on_depth is not None and depth > reported[0]:  # each depth once, as it is reached
            on_depth(depth, n_states, n_evaluations, seconds)
        reported[0] = max(reported[0], depth)

    for goal in passes:
        sweep = _sweep(
            profile, goal, code_set, options, n_jobs, max_states, max_evaluations, count_last,
            report,
        )  # fmt: skip
        if sweep.complete_depth < goal or goal == depth_goal:
            break
        base, _, _ = base_codes(code_set)
        if sweep.states[-1] * len(base) > max_evaluations:
            break  # the next pass would stop before the next depth
    candidates, back, states, evaluations = (
        sweep.candidates,
        sweep.back,
        sweep.states,
        sweep.evaluations,
    )
    complete_depth = sweep.complete_depth
    results = _front_results(profile, candidates, back, objectives)
    space = describe_linear_space(complete_depth, include_double, restricted=codes is not None)
    return ExhaustiveFront(
        results=results,
        states_per_depth=tuple(states),
        evaluations_per_depth=tuple(evaluations),
        complete=complete_depth == depth_goal,
        complete_depth=complete_depth,
        space=space,
        symmetry=sym,
        seconds=time.monotonic() - started,
    )


@dataclass
class _Sweep:
    """One breadth-first pass to ``goal`` depths: front candidates and back-pointers."""

    candidates: list  # (depth, indices at that depth, objective values)
    back: list  # per depth: (parent, code) of each kept state
    states: list
    evaluations: list
    complete_depth: int


def _sweep(
    profile, goal, code_set, options, n_jobs, max_states, max_evaluations, count_last, report
):
    """Expand depth by depth up to ``goal``, chains carrying the data of ``goal`` rounds."""
    options = dict(options)
    objectives = options["objectives"]
    level = start_chains(profile, 1, rounds_ahead=goal)
    # doing nothing is a recipe too: the raw pair itself (depth 0) beats every
    # recipe that yields less and ends below the raw fidelity
    raw_values, _ = objective_values(level, objectives)
    out = _Sweep([(0, np.array([0]), raw_values)], [], [], [], 0)
    for depth in range(1, goal + 1):
        if max_states is not None and depth > 1 and len(level) > max_states:
            break
        if (
            max_evaluations is not None
            and depth > 1
            and count_rounds(level, profile, code_set, options["dedupe"], stop_at=max_evaluations)
            > max_evaluations
        ):
            break
        options["final"] = depth == goal
        t0 = time.monotonic()
        gather = _Gather(options)
        for chunk in _expand_level(level, profile, code_set, options, n_jobs):
            gather.add(chunk)
        batch, parent, code, n_states = gather.result()
        if options["final"] and not count_last:
            n_states = -1
        out.back.append((parent, code))
        values, maximise = objective_values(batch, objectives)
        on_front = np.flatnonzero(pareto_mask(quantise(values), maximise))
        out.candidates.append((depth, on_front, values[on_front]))
        out.states.append(int(n_states))
        out.evaluations.append(int(gather.evaluations))
        out.complete_depth = depth
        report(depth, int(n_states), out.evaluations[-1], time.monotonic() - t0)
        level = batch
        if len(level) == 0:
            break
    return out


def _codes_of(depth: int, index: int, back) -> list[int]:
    codes = []
    for d in range(depth, 0, -1):
        parent, code = back[d - 1]
        codes.append(int(code[index]))
        index = int(parent[index])
    return codes[::-1]


def _front_results(profile, candidates, back, objectives) -> list:
    if not candidates:
        return []
    values = np.concatenate([c[2] for c in candidates])
    where = [(d, int(i)) for d, idx, _ in candidates for i in idx]
    maximise = tuple(o in ("fidelity", "yield") for o in objectives)
    order = [(d, i) for d, i in where]  # shallower first, then discovery order
    picks = unique_front(values, maximise, order=order)
    results = {}
    for p in picks:
        depth, index = where[p]
        result = evaluate(recipe_from_codes(_codes_of(depth, index, back)), profile)
        if not math.isclose(result.fidelity, values[p][0], rel_tol=1e-9, abs_tol=1e-12):
            raise RuntimeError(
                f"internal error: {result.notation} evaluates to fidelity {result.fidelity!r} "
                f"but the breadth-first search found {values[p][0]!r}"
            )
        results.setdefault(result.recipe_id, result)
    return sorted(results.values(), key=lambda r: (-r.fidelity, -r.pair_yield, r.notation))
