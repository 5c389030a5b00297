"""The deep layer: breadth first over made pairs, keeping the first Pareto layers.

Level by level, a *library* of made pairs grows: level 0 is the raw pair; level
d holds pairs made by a round whose kept pair is a pair of level d - 1 (with fresh
raw pairs or copies of itself as sacrificed pairs: pumping and symmetric
recurrence) or whose kept and sacrificed pairs are any two library pairs, one of
them of level d - 1 (pumping with made pairs, nested pumping, trees that mix
levels). Every round of the space is tried: every step kind of
:data:`models.kinds.STEP_KINDS`, every rotation of every input, with and
without re-twirl. So a pair of level d is a tree recipe in our notation
(``sY^2.pY(sY)``), whose main chain has at most d rounds.

After each level, identical states are merged exactly (the exhaustive layer's
keys: :func:`optimise.levels.state_keys`, :func:`optimise.levels.merge_identical`),
then only the pairs on the first ``layers`` Pareto layers of the objectives
(fidelity and yield, and memory and time when asked) are kept, at most
``width`` of them. That pruning is a heuristic: a pair off those layers may
have better continuations. With an unlimited width and layers the deep layer
over linear rounds is the exhaustive layer (the tests check it). Candidates are
first evaluated for their figures only (their own waiting data at rate 0, which
is cheap); with decaying memories, of candidates with identical Bell weights
only the cheapest takes part in that choice; the kept pairs are then made with all
their waiting data and merged exactly. Seeds (known linear recipes, with their
prefixes) are kept whatever the pruning, but only the pairs the pruning chose
are offered as sacrificed pairs.

Every recipe on the final front is rebuilt from its back-pointers and
re-evaluated with :func:`models.evaluate.evaluate`; the two must agree. Recipes
with identical figures are one front point: the representative is the one with
the shortest, then alphabetically first, canonical notation; the others are
listed as equivalents. Everything is deterministic: the same settings give the
same front.

Each pair carries the waiting data its future users may need: a pair of level d
carries the rate-lattice level ``(depth - d) * (WIDEST - 1)`` (see
:mod:`models.waiting`), enough for any use at a later level.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field

import numpy as np
from joblib import Parallel, delayed, effective_n_jobs

from models.chain import (
    CODE_N_INPUTS,
    CODE_ROTATIONS,
    CODE_SAME,
    LINEAR_ROUNDS,
    N_CODES,
    WIDEST,
    ChainBatch,
    advance,
    advance_rounds,
    advance_sourced,
    linear_codes,
    start_chains,
)
from models.evaluate import evaluate
from models.kinds import step_kind
from models.notation import as_recipe
from models.recipes import Recipe, Round

from .exhaustive import closed_under_rotations, space_codes
from .levels import (
    add_twirled,
    base_codes,
    canonical_rotations,
    concat,
    labels_of,
    merge_identical,
    objective_values,
    state_keys,
    symmetry_of,
    valid_pairs,
)
from .limits import as_limits
from .objectives import check_objectives
from .objectives import objective_values as figures_of
from .pareto import evenly_spread, pareto_mask, quantise

DEFAULT_DEPTH = 10
DEFAULT_LAYERS = 2
DEFAULT_WIDTH = 8
BATCH = 16384  # rows per advance call, as in the exhaustive layer
RAW, SAME = -1, -2  # source levels of rounds that sacrifice raw pairs or copies
SHARES_PER_WORKER = 8  # runs of units per worker and level (tests/benchmarks/bench_deep.py)


@dataclass(frozen=True, kw_only=True)
class DeepFront:
    """What the deep layer found.

    Attributes
    ----------
    results : list of models.evaluate.RecipeResult
        The front, fidelity descending, one representative per distinct point.
    equivalents : dict
        Representative notation -> tuple of the other notations found with
        identical figures (empty tuples omitted).
    pairs_per_level : tuple of int
        Library pairs kept at levels 1, 2, ...
    evaluations_per_level : tuple of int
        Rounds evaluated at each level.
    depth, layers, width : int
        The settings (``width`` 0: unlimited).
    general : tuple of str
        The general check rounds offered (their selections), besides the built-in kinds.
    space : str
        One sentence naming what was searched.
    seconds : float
    """

    results: list
    equivalents: dict
    pairs_per_level: tuple
    evaluations_per_level: tuple
    depth: int
    layers: int
    width: int
    space: str
    seconds: float
    general: tuple = ()


def describe_deep_space(depth: int, layers: int, width: int, general: int = 0) -> str:
    """One sentence naming the deep layer's search.

    Examples
    --------
    >>> describe_deep_space(10, 2, 8).split("keeping ")[1]
    'the pairs on the first 2 Pareto layers, at most 8 per level'
    >>> describe_deep_space(4, 0, 16).split("keeping ")[1]
    'at most 16 pairs per level, taken Pareto layer by Pareto layer'
    """
    if layers:
        kept = "the pairs on " + (
            f"the first {layers} Pareto layers" if layers > 1 else "the Pareto front"
        )
        kept += (f", at most {width}" if width else "") + " per level"
    else:
        kept = (
            f"at most {width} pairs per level, taken Pareto layer by Pareto layer"
            if width
            else "every pair"
        )
    rounds = (
        f", and {general} general check round{'s' if general != 1 else ''} with raw pairs or "
        "copies, one rotation for every input or for the kept pair"
        if general
        else ""
    )
    return (
        f"trees of up to {depth} levels built from made pairs (pumping with raw pairs, "
        f"copies or other made pairs, every rotation{rounds}), keeping {kept}"
    )


def pareto_layers(values, maximise, layers: int, width: int) -> np.ndarray:
    """Rows on the first ``layers`` Pareto layers, at most ``width`` (0: no cap).

    Layer 1 is the Pareto front, layer 2 the front of the rest, and so on. When a
    layer does not fit in what the width leaves, its points are taken evenly
    spread along it (sorted by the first objective, best first, then by row), so
    the choice is fixed by the values alone. Returned sorted.
    """
    q = quantise(np.asarray(values, dtype=float))
    remaining = np.arange(len(q))
    chosen = []
    room = width if width else len(q)
    for _ in range(layers if layers else len(q)):
        if remaining.size == 0 or room <= 0:
            break
        mask = pareto_mask(q[remaining], maximise)
        front = remaining[mask]
        if front.size > room:
            sign = 1.0 if maximise[0] else -1.0
            front = front[np.lexsort((front, -sign * q[front, 0]))]
            front = front[evenly_spread(front.size, room)]
        chosen.append(front)
        room -= front.size
        remaining = remaining[~mask]
    return np.sort(np.concatenate(chosen)) if chosen else np.zeros(0, dtype=np.intp)


@dataclass
class _Level:
    """The library pairs of one level and where each came from."""

    batch: ChainBatch
    kept_level: np.ndarray
    kept_row: np.ndarray
    source_level: np.ndarray  # RAW, SAME or a level
    source_row: np.ndarray
    code: np.ndarray
    chain: np.ndarray  # rounds in the main chain
    keys: np.ndarray = None
    seed_rows: dict = field(default_factory=dict)  # seed prefix (codes) -> row
    # pairs the pruning chose (seeds kept only as seeds are not offered as sources,
    # which would multiply the sourced rounds by the number of seeds)
    searched: np.ndarray = None


@dataclass
class _Candidates:
    """Rows proposed for one level, merged and thinned as they come."""

    options: dict
    parts: list = field(default_factory=list)
    held: int = 0
    evaluations: int = 0

    def add(self, batch, keys, origin):
        self.parts.append((batch, keys, origin))
        self.held += len(batch)
        if self.held > 200_000:
            self.parts = [self.squeeze()]
            self.held = len(self.parts[0][0])

    def squeeze(self):
        batch = concat([p[0] for p in self.parts])
        keys = np.concatenate([p[1] for p in self.parts])
        origin = np.concatenate([p[2] for p in self.parts])
        keep = merge_identical(keys, labels_of(batch, self.options["extra"]))
        # the first layers of the union lie on the first layers of any part that holds them
        values, maximise = objective_values(batch.take(keep), self.options["objectives"])
        keep = keep[pareto_layers(values, maximise, self.options["layers"], 0)]
        return batch.take(keep), keys[keep], origin[keep]


def _filter(batch, success, options):
    ok = success > 0
    if options["max_memory"] is not None:
        ok &= batch.memory <= options["max_memory"]
    if options["max_time"] is not None:
        ok &= batch.time_s <= options["max_time"]
    return ok


def _sourced_rows(kept: _Level, source: _Level, same_level: bool, base, profile, dedupe):
    """(kept row, source row, code) of every sourced round on two levels' searched pairs."""
    k_rows, s_rows = np.meshgrid(
        np.flatnonzero(kept.searched), np.flatnonzero(source.searched), indexing="ij"
    )
    k_rows, s_rows = k_rows.ravel(), s_rows.ravel()
    if same_level:  # a pair sacrificing copies of itself is a symmetric round, made elsewhere
        other = k_rows != s_rows
        k_rows, s_rows = k_rows[other], s_rows[other]
    if not dedupe:
        return (
            np.repeat(k_rows, len(base)),
            np.repeat(s_rows, len(base)),
            np.tile(base, len(k_rows)),
        )
    p1 = profile.noise.single_qubit
    kept_ok = canonical_rotations(kept.batch.bell, p1)  # (rows, 6)
    src_ok = canonical_rotations(source.batch.bell, p1)
    rot = CODE_ROTATIONS[base]
    valid = kept_ok[k_rows][:, rot[:, 0]]
    for j in range(1, WIDEST):
        used = CODE_N_INPUTS[base] > j
        valid &= src_ok[s_rows][:, rot[:, j]] | ~used[None, :]
    pair, column = np.nonzero(valid)
    return k_rows[pair], s_rows[pair], base[column]


def _origin(n, kept_level, kept_row, source_level, source_row, code):
    out = np.empty((n, 5), dtype=np.int64)
    out[:, 0], out[:, 1], out[:, 2], out[:, 3], out[:, 4] = (
        kept_level,
        kept_row,
        source_level,
        source_row,
        code,
    )
    return out


def _work(library, d, profile, base, options) -> list:
    """The candidate evaluations of level d as units, in a fixed order.

    A unit is ``(kept level, source level or None, kept rows, source rows, codes)``:
    one call of :func:`models.chain.advance` (source None: raw pairs or copies) or
    :func:`models.chain.advance_sourced` on at most :data:`BATCH` rows. The units
    are the same whatever the number of workers, so every row is computed by the
    same call and the front does not depend on how the units are shared out.
    """
    units = []
    parent, code = valid_pairs(library[d - 1].batch, profile, base, options["dedupe"])
    for lo in range(0, len(code), BATCH):
        units.append((d - 1, None, parent[lo : lo + BATCH], None, code[lo : lo + BATCH]))
    if options["general"]:
        # general rounds carry codes N_CODES + their index in options["general"];
        # the untwirled ones are evaluated, their twirled partners follow from them
        rows = np.arange(len(library[d - 1].batch))
        untwirled = N_CODES + np.arange(0, len(options["general"]), 2)
        parent, code = np.repeat(rows, untwirled.size), np.tile(untwirled, rows.size)
        for lo in range(0, len(code), BATCH):
            units.append((d - 1, None, parent[lo : lo + BATCH], None, code[lo : lo + BATCH]))
    if not options["trees"]:
        return units
    # rounds sacrificing other made pairs: one side from level d - 1
    sourced = base[~CODE_SAME[base]]
    for a in range(d):
        for b in range(1, d):
            if max(a, b) != d - 1 or not len(library[a].batch) or not len(library[b].batch):
                continue
            ki, si, code = _sourced_rows(
                library[a], library[b], a == b, sourced, profile, options["dedupe"]
            )
            for lo in range(0, len(code), BATCH):
                sl = slice(lo, lo + BATCH)
                units.append((a, b, ki[sl], si[sl], code[sl]))
    return units


def _evaluate_units(units, batches, profile, codes, options):
    """Candidates of some units, merged and thinned (what a worker returns).

    ``batches``: level -> the library pairs of that level the units use. Returns
    ``(batch, keys, origin, evaluations)``, or None when no candidate passes.
    """
    p1 = profile.noise.single_qubit
    base, want_base, want_twirl = base_codes(codes)
    position = np.full(len(LINEAR_ROUNDS), -1)
    position[base] = np.arange(len(base))
    gather = _Candidates(options)
    general = options["general"]
    for kept_level, source_level, kept_row, source_row, code in units:
        kept = batches[kept_level]
        if source_level is None and code[0] >= N_CODES:
            # general rounds: every one wanted, untwirled and twirled (its code + 1)
            out, success = advance_rounds(
                kept, general, code - N_CODES, profile, parent=kept_row, level=0
            )
            source_level = np.where(options["general_same"][code - N_CODES], SAME, RAW)
            source_row = np.zeros_like(kept_row)
            wanted = np.ones(code.size, bool)
            out, new_codes, rows = add_twirled(out, code, wanted, wanted, p1, partner=code + 1)
        else:
            if source_level is None:
                out, success = advance(kept, code, profile, parent=kept_row, level=0)
                source_level = np.where(CODE_SAME[code], SAME, RAW)
                source_row = np.zeros_like(kept_row)
            else:
                out, success = advance_sourced(
                    kept,
                    batches[source_level],
                    code,
                    profile,
                    kept_index=kept_row,
                    source_index=source_row,
                    level=0,
                )
            pos = position[code]
            out, new_codes, rows = add_twirled(out, code, want_base[pos], want_twirl[pos], p1)
        ok = _filter(out, success[rows], options)
        out = out.take(ok)
        src = source_level if np.ndim(source_level) == 0 else source_level[rows][ok]
        origin = _origin(
            len(out), kept_level, kept_row[rows][ok], src, source_row[rows][ok], new_codes[ok]
        )
        gather.add(out, state_keys(out.bell, out.weighted[:, :1], options["symmetry"]), origin)
        gather.evaluations += len(code)
    if not gather.parts:
        return None
    return gather.squeeze() + (gather.evaluations,)


def _shares(units, pieces: int) -> list:
    """``units`` cut into at most ``pieces`` runs of about equal rows, in order."""
    rows = np.cumsum([len(u[4]) for u in units])
    if not len(units):
        return []
    cuts = np.searchsorted(rows, rows[-1] * np.arange(1, pieces) / pieces, side="right")
    bounds = np.unique(np.concatenate([[0], cuts, [len(units)]]))
    return [units[a:b] for a, b in zip(bounds[:-1], bounds[1:], strict=True) if b > a]


def _propose(library, d, profile, codes, options, gather, n_jobs):
    """Every candidate of level d, evaluated for its figures only (waiting data at rate 0).

    The figures of a pair (its Bell weights, costs, memory, rounds, time) need its
    inputs' waiting data but not its own beyond rate 0, so the candidates are
    first evaluated cheaply and only the pairs kept are made again with all the
    waiting data they carry (:func:`_make`). The evaluations are shared out over
    ``n_jobs`` workers of the active joblib backend; their results are gathered
    in the order of the units, so the level is the same for any ``n_jobs``.
    """
    base, _, _ = base_codes(codes)
    units = _work(library, d, profile, base, options)
    jobs = effective_n_jobs(n_jobs)
    # units differ in cost (double selection, sourced rounds): many short runs
    # per worker keep every worker busy to the end of the level
    shares = _shares(units, 1 if jobs == 1 else SHARES_PER_WORKER * jobs)
    tasks = []
    for share in shares:
        used = {u[0] for u in share} | {u[1] for u in share if u[1] is not None}
        tasks.append((share, {lv: library[lv].batch for lv in used}))
    if len(tasks) > 1:
        outs = Parallel(n_jobs=n_jobs, return_as="generator")(
            delayed(_evaluate_units)(share, batches, profile, codes, options)
            for share, batches in tasks
        )
    else:
        outs = (
            _evaluate_units(share, batches, profile, codes, options) for share, batches in tasks
        )
    for out in outs:
        if out is not None:
            gather.add(*out[:3])
            gather.evaluations += out[3]


def _make(library, origin, profile, level, general=()) -> ChainBatch:
    """The pairs of ``origin`` rows, carrying waiting data up to ``level``."""
    pieces, rows = [], []
    is_general = origin[:, 4] >= N_CODES
    combos = np.unique(np.column_stack([origin[:, [0, 2]], is_general]), axis=0)
    for kept_level, source_level, by_round in combos:
        here = np.flatnonzero(
            (origin[:, 0] == kept_level) & (origin[:, 2] == source_level) & (is_general == by_round)
        )
        kept = library[kept_level].batch
        if by_round:
            which = origin[here, 4] - N_CODES
            out, _ = advance_rounds(
                kept, general, which, profile, parent=origin[here, 1], level=level
            )
        elif source_level < 0:
            out, _ = advance(kept, origin[here, 4], profile, parent=origin[here, 1], level=level)
        else:
            out, _ = advance_sourced(
                kept,
                library[source_level].batch,
                origin[here, 4],
                profile,
                kept_index=origin[here, 1],
                source_index=origin[here, 3],
                level=level,
            )
        pieces.append(out)
        rows.append(here)
    batch = concat(pieces)
    return batch.take(np.argsort(np.concatenate(rows), kind="stable"))


def _expand(library, d, profile, codes, options, out_level, seeds_here, n_jobs):
    """Level d: candidates proposed, merged, thinned to the first layers, then made."""
    gather = _Candidates(options)
    _propose(library, d, profile, codes, options, gather, n_jobs)
    batch, _, origin = gather.squeeze()
    values, maximise = objective_values(batch, options["objectives"])
    origin = origin[pareto_layers(values, maximise, options["layers"], options["width"])]
    chosen = len(origin)
    # seeds (known good linear recipes) stay in the library whatever the pruning
    prefixes = sorted(p for p in seeds_here if p[:-1] in library[d - 1].seed_rows)
    if prefixes:
        parents = np.array([library[d - 1].seed_rows[p[:-1]] for p in prefixes])
        last = np.array([p[-1] for p in prefixes], dtype=np.intp)
        src = np.where(CODE_SAME[last], SAME, RAW)
        seeds = _origin(len(last), d - 1, parents, src, 0, last)
        origin = np.concatenate([origin, seeds])
    batch = (
        _make(library, origin, profile, out_level, options["general"])
        if len(origin)
        else batch.take([])
    )
    keys = state_keys(batch.bell, batch.weighted, options["symmetry"])
    ok = np.isfinite(batch.raw_pairs)
    keep = merge_identical(keys[ok], labels_of(batch.take(ok), options["extra"]))
    keep = np.flatnonzero(ok)[keep]
    labels = labels_of(batch, options["extra"])
    target = {}
    for i, prefix in enumerate(prefixes):
        row = len(origin) - len(prefixes) + i
        if ok[row]:
            # the seed itself, or a kept pair in the same state at no higher cost
            same = keep[(keys[keep] == keys[row]).all(axis=1)]
            same = [j for j in same if (labels[j] <= labels[row] * (1 + 1e-12)).all()]
            target[prefix] = same[0] if same else row
    keep = np.unique(np.concatenate([keep, np.array(list(target.values()), dtype=np.intp)]))
    seed_rows = {p: int(np.searchsorted(keep, r)) for p, r in target.items()}
    origin, batch, keys = origin[keep], batch.take(keep), keys[keep]
    chain = np.array([library[a].chain[r] + 1 for a, r in origin[:, :2]], dtype=np.int64)
    level = _Level(batch, *origin.T, chain, keys, seed_rows, keep < chosen)
    return level, gather.evaluations


def _recipe(library, d, row, memo, general=()) -> Recipe:
    if d == 0:
        return Recipe(())
    if (d, row) in memo:
        return memo[(d, row)]
    lv = library[d]
    kept = _recipe(library, int(lv.kept_level[row]), int(lv.kept_row[row]), memo, general)
    code = int(lv.code[row])
    r = LINEAR_ROUNDS[code] if code < N_CODES else general[code - N_CODES]
    s = int(lv.source_level[row])
    if s == SAME:
        step = Round(r.selection, "same", r.rotations, twirl=r.twirl)
    elif s == RAW:
        step = Round(r.selection, "raw", r.rotations, twirl=r.twirl)
    else:
        source = _recipe(library, s, int(lv.source_row[row]), memo, general)
        step = Round(r.selection, "sub", r.rotations, source=source, twirl=r.twirl)
    memo[(d, row)] = Recipe(kept.rounds + (step,))
    return memo[(d, row)]


def _seed_prefixes(seeds, depth) -> dict:
    """Per level d, the round-code prefixes of length d of the linear seeds."""
    per_level = {d: set() for d in range(1, depth + 1)}
    for seed in seeds:
        recipe = as_recipe(seed)
        if not recipe.is_linear or recipe.depth > depth:
            continue
        codes = linear_codes(recipe)
        for d in range(1, len(codes) + 1):
            per_level[d].add(tuple(codes[:d]))
    return per_level


def deep_front(
    profile,
    *,
    max_depth: int = DEFAULT_DEPTH,
    objectives=("fidelity", "yield"),
    limits=None,
    layers: int = DEFAULT_LAYERS,
    width: int = DEFAULT_WIDTH,
    seeds=(),
    include_double: bool = True,
    codes=None,
    symmetry: bool = True,
    trees: bool = True,
    max_chain: int | None = None,
    on_level=None,
    n_jobs: int | None = 1,
    general=(),
) -> DeepFront:
    """Breadth-first search over made pairs with Pareto pruning (see the module doc).

    Parameters
    ----------
    profile : models.Profile
    max_depth : int >= 1
        Levels (a pair of level d has at most d rounds in its main chain).
    objectives : tuple
        As :func:`optimise.exhaustive.exhaustive_front`.
    limits : Limits, dict or None
        Pairs over the memory or time limit are dropped with their extensions
        (both only grow); ``max_depth`` of the limits caps the levels.
    layers : int >= 0
        Pareto layers kept per level (0: all).
    width : int >= 0
        Most pairs kept per level (0: no cap).
    seeds : recipes (strings or Recipe)
        Linear recipes kept in the library whatever the pruning, with every
        prefix (the exhaustive front, the baselines); others are ignored.
    include_double, codes :
        The rounds of the space, as :func:`optimise.exhaustive.space_codes`.
    symmetry : bool
        Merge relabelled states where exact (:func:`optimise.levels.symmetry_of`).
    trees : bool
        Offer made pairs as sacrificed pairs (False: linear recipes only, the
        exhaustive layer's space, pruned).
    max_chain : int, optional
        Most rounds in a front recipe's main chain (pairs with longer chains
        still serve as sacrificed pairs); ``limits.max_depth`` caps it too.
    general : sequence of str
        General check rounds (:mod:`models.circuits`: canonical compact forms,
        bare or as ``c{form}``, as :mod:`optimise.catalogue` lists them) offered
        besides the built-in kinds: each as a round on a pair of the previous level
        with fresh raw pairs or copies of that pair as sacrificed pairs, one
        rotation for every input or (with raw pairs) for the kept pair alone,
        with and without re-twirl (:func:`general_round_variants`).
    on_level : callable(level, pairs, evaluations, seconds), optional
    n_jobs : int or None
        Workers of the active joblib backend (:func:`joblib.parallel_config`;
        local processes by default) that share each level's evaluations; -1 for
        all, None for the configured number. The front is the same for any value.

    Returns
    -------
    DeepFront
    """
    started = time.monotonic()
    objectives = check_objectives(objectives)
    limits = as_limits(limits)
    for name, value, low in (
        ("max_depth", max_depth, 1),
        ("layers", layers, 0),
        ("width", width, 0),
    ):
        if isinstance(value, bool) or not isinstance(value, int) or value < low:
            raise ValueError(f"{name} = {value!r} must be an integer >= {low}")
    depth = max_depth
    caps = [c for c in (max_chain, limits.max_depth) if c is not None]
    max_chain = min(caps) if caps else depth
    extra = general_round_variants(general)
    offered = tuple(dict.fromkeys(r.selection for r in extra))
    widest = max([WIDEST] + [r.n_inputs for r in extra])
    code_set = space_codes(include_double, codes)
    closed = closed_under_rotations(code_set)
    options = {
        "symmetry": symmetry_of(profile) if symmetry and closed else "none",
        "dedupe": math.isinf(profile.noise.t1_s) and math.isinf(profile.noise.t2_s) and closed,
        "extra": tuple(o for o in objectives if o in ("memory", "time")),
        "max_memory": limits.max_memory_per_node,
        "max_time": limits.max_time_per_output_s,
        "objectives": objectives,
        "layers": layers,
        "width": width,
        "trees": bool(trees),
        "general": extra,
        "general_same": np.array([r.sacrificed == "same" for r in extra], dtype=bool),
    }
    grows = profile.bound().lattice(0).grows
    raw = start_chains(profile, 1, rounds_ahead=depth, widest=widest)
    none = np.zeros(1, dtype=np.int64)
    library = [_Level(raw, none - 1, none, none, none, none - 1, none, None, {(): 0}, none == 0)]
    prefixes = _seed_prefixes(seeds, depth)
    kept, evaluations = [], []
    for d in range(1, depth + 1):
        t0 = time.monotonic()
        out_level = (depth - d) * (widest - 1) if grows else 0
        level, n = _expand(library, d, profile, code_set, options, out_level, prefixes[d], n_jobs)
        library.append(level)
        kept.append(len(level.batch))
        evaluations.append(n)
        if on_level is not None:
            on_level(d, kept[-1], n, time.monotonic() - t0)
    results, equivalents = _front(profile, library, objectives, max_chain, extra)
    return DeepFront(
        results=results,
        equivalents=equivalents,
        pairs_per_level=tuple(kept),
        evaluations_per_level=tuple(evaluations),
        depth=depth,
        layers=layers,
        width=width,
        space=describe_deep_space(depth, layers, width, len(offered)),
        seconds=time.monotonic() - started,
        general=offered,
    )


def general_round_variants(general) -> tuple:
    """The rounds the deep layer tries for each general check round named in ``general``.

    For each (in the order given, repeats dropped): sacrificed pairs fresh raw
    pairs or copies; then each of the six rotations applied to every input, and
    with raw pairs also to the kept pair alone (a rotation of a raw pair adds
    gate noise and, on a Werner pair, nothing else); each without and with
    re-twirl, the twirled round right after its untwirled partner (the deep
    layer relies on that order): 34 rounds per general round.

    Raises
    ------
    ValueError
        When a name is not a general check round (a built-in kind or bad text).
    """
    from models.kinds import BUILT_IN

    if isinstance(general, str):
        general = (general,)
    selections = []
    for i, name in enumerate(general):
        if not isinstance(name, str):
            raise ValueError(f"general[{i}] = {name!r} must be a general round's compact form")
        text = name[2:-1] if name.startswith("c{") and name.endswith("}") else name
        try:
            selection = step_kind(text).selection
        except (ValueError, KeyError) as err:
            raise ValueError(
                f"general[{i}] = {name!r} is not a general check round: {err}"
            ) from None
        if selection in BUILT_IN:
            raise ValueError(
                f"general[{i}] = {name!r} is a built-in kind; give general check rounds only"
            )
        if selection not in selections:
            selections.append(selection)
    out = []
    for selection in selections:
        n = step_kind(selection).n_inputs
        for sacrificed in ("raw", "same"):
            rotations = [(r,) * n for r in range(6)]
            if sacrificed == "raw":
                rotations += [(r,) + (0,) * (n - 1) for r in range(1, 6)]
            for rotation in rotations:
                for twirled in (False, True):
                    out.append(Round(selection, sacrificed, rotation, twirl=twirled))
    return tuple(out)


def _front(profile, library, objectives, max_chain, general=()):
    """The front over the library pairs, rebuilt, re-evaluated and checked."""
    where = [(d, r) for d, lv in enumerate(library) for r in np.flatnonzero(lv.chain <= max_chain)]
    values = np.concatenate(
        [objective_values(library[d].batch.take([r]), objectives)[0] for d, r in where]
    )
    maximise = tuple(o in ("fidelity", "yield") for o in objectives)
    q = quantise(values)
    on_front = np.flatnonzero(pareto_mask(q, maximise))
    groups: dict = {}
    for i in on_front:
        groups.setdefault(tuple(q[i]), []).append(i)
    memo, results, equivalents = {}, [], {}
    for key in sorted(groups):
        found = {}
        for i in groups[key]:
            recipe = _recipe(library, *where[i], memo, general)
            result = evaluate(recipe, profile)
            _check_agrees(result, values[i], objectives)
            found.setdefault(result.notation, result)
        names = sorted(found, key=lambda s: (len(s), s))
        results.append(found[names[0]])
        if len(names) > 1:
            equivalents[names[0]] = tuple(names[1:])
    results.sort(key=lambda r: (-r.fidelity, -r.pair_yield, r.notation))
    return results, equivalents


def _check_agrees(result, values, objectives):
    got = figures_of(result, objectives)
    for name, a, b in zip(objectives, got, values, strict=True):
        if not math.isclose(a, b, rel_tol=1e-9, abs_tol=1e-12):
            raise RuntimeError(
                f"internal error: {result.notation} evaluates to {name} {a!r} "
                f"but the deep layer found {b!r}"
            )
