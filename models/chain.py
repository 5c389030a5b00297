"""Vectorised evaluation of many linear recipes, one round at a time.

A linear recipe (no sources) is a sequence of round codes: indices into
:data:`LINEAR_ROUNDS`. :func:`advance` applies one round to N partial recipes at
once (no Python loop over N); :func:`evaluate_linear` evaluates an (N, D) array
of codes, evaluating each distinct prefix once. The model is the one of
:mod:`models.evaluate` (same costs, memory, waiting times and re-twirl), and the
results agree with :func:`models.evaluate.evaluate` to rounding.

Order of :data:`LINEAR_ROUNDS` (fixed; a round's code is its index):
selection (``single`` codes 0-143, then ``double`` codes 144-1007), then twirl
(False, True), then sacrificed (``raw``, ``same``), then the rotations tuple in
lexicographic order of rotation indices (kept input first), the last index
changing fastest. So code ``c < 144`` is
``twirl = c // 72``, ``sacrificed = (c // 36) % 2``, rotations ``divmod(c % 36, 6)``.

References
----------
1. W. Duer, H.-J. Briegel, J. I. Cirac and P. Zoller, Phys. Rev. A 59, 169 (1999).
"""

from __future__ import annotations

from dataclasses import dataclass
from itertools import product

import numpy as np

from .evaluate import (
    finish_step,
    made_joint,
    raw_pair_figures,
    wait_for,
)
from .kinds import STEP_KINDS
from .recipes import Recipe, Round
from .steps import DOUBLE_SELECTION, TWO_TO_ONE, run_joint, run_step


def _linear_rounds() -> tuple[Round, ...]:
    rounds = []
    for selection, kind in STEP_KINDS.items():
        n = kind.n_inputs
        for twirled in (False, True):
            for sacrificed in ("raw", "same"):
                for rotations in product(range(6), repeat=n):
                    rounds.append(Round(selection, sacrificed, rotations, twirl=twirled))
    return tuple(rounds)


LINEAR_ROUNDS: tuple[Round, ...] = _linear_rounds()
N_CODES = len(LINEAR_ROUNDS)
# rows per chunk in advance(): bounds the joint weights of double selection in memory
CHUNK_ROWS = 65536
# below this many rows per code on average, per-row rotations beat grouping by code
SMALL_GROUPS = 24
_CODE_OF = {r: i for i, r in enumerate(LINEAR_ROUNDS)}
# decoding tables, indexed by code
CODE_DOUBLE = np.array([r.selection == "double" for r in LINEAR_ROUNDS])
CODE_SAME = np.array([r.sacrificed == "same" for r in LINEAR_ROUNDS])
CODE_TWIRL = np.array([r.twirl for r in LINEAR_ROUNDS])
CODE_ROTATIONS = np.array(
    [r.rotations + (0,) * (3 - len(r.rotations)) for r in LINEAR_ROUNDS], dtype=np.intp
)


def round_code(r: Round) -> int:
    """Code (index into :data:`LINEAR_ROUNDS`) of a round without a source.

    Examples
    --------
    >>> round_code(Round("single", "same", "Y"))
    50
    >>> LINEAR_ROUNDS[50].rotations
    (2, 2)
    """
    try:
        return _CODE_OF[r]
    except KeyError:
        raise ValueError(
            f"round {r!r} has a source; only rounds with sacrificed 'raw' or 'same' have codes"
        ) from None
    except TypeError:
        raise ValueError(f"round = {r!r} is not a Round") from None


def linear_codes(recipe) -> tuple[int, ...]:
    """Codes of the rounds of a linear recipe (Recipe or string), first round first."""
    from .notation import as_recipe

    return tuple(round_code(r) for r in as_recipe(recipe).rounds)


def recipe_from_codes(codes) -> Recipe:
    """Linear recipe from a sequence of codes; a trailing -1 padding is dropped."""
    out = []
    codes = [int(c) for c in np.asarray(codes).ravel()]
    for i, c in enumerate(codes):
        if c == -1:
            if any(d != -1 for d in codes[i:]):
                raise ValueError(f"codes = {codes!r}: -1 may only pad the end")
            break
        if not 0 <= c < N_CODES:
            raise ValueError(f"codes[{i}] = {c} is outside [0, {N_CODES - 1}] (or -1 padding)")
        out.append(LINEAR_ROUNDS[c])
    return Recipe(tuple(out))


@dataclass(frozen=True)
class ChainBatch:
    """N partial linear recipes: the pair each makes and what the next round needs.

    Attributes
    ----------
    bell : ndarray, shape (N, 4), float
        Bell weights (I, X, Y, Z) of the pair made so far.
    raw_pairs : ndarray, shape (N,), float
        Mean raw pairs per pair made so far (inf if a step never succeeds).
    memory : ndarray, shape (N,), int
        Qubits per node needed so far.
    rounds : ndarray, shape (N,), int
        Communication rounds on the critical path.
    time_s : ndarray, shape (N,), float
        Mean production time of the pair, seconds.
    laplace : ndarray, shape (N, 10), float
        Laplace transform of the production time at the rates of
        :func:`models.evaluate.memory_rates`: what a pair waiting for this one
        decays with.
    """

    bell: np.ndarray
    raw_pairs: np.ndarray
    memory: np.ndarray
    rounds: np.ndarray
    time_s: np.ndarray
    laplace: np.ndarray

    def __post_init__(self):
        n = np.shape(self.bell)[0] if np.ndim(self.bell) == 2 else -1
        if np.shape(self.bell) != (n, 4):
            raise ValueError(f"bell has shape {np.shape(self.bell)}; expected (N, 4)")
        for name in ("raw_pairs", "memory", "rounds", "time_s"):
            if np.shape(getattr(self, name)) != (n,):
                raise ValueError(
                    f"{name} has shape {np.shape(getattr(self, name))}; expected ({n},)"
                )
        if np.shape(self.laplace) != (n, 10):
            raise ValueError(f"laplace has shape {np.shape(self.laplace)}; expected ({n}, 10)")

    def __len__(self) -> int:
        return self.bell.shape[0]

    def take(self, index) -> ChainBatch:
        """The chains at ``index`` (an int array or a boolean mask)."""
        return ChainBatch(
            self.bell[index],
            self.raw_pairs[index],
            self.memory[index],
            self.rounds[index],
            self.time_s[index],
            self.laplace[index],
        )


def start_chains(profile, n: int) -> ChainBatch:
    """``n`` chains that have made one raw pair each (no round yet)."""
    if not (isinstance(n, (int, np.integer)) and n >= 0):
        raise ValueError(f"n = {n!r} must be an integer >= 0")
    time_s, laplace = raw_pair_figures(profile)
    return ChainBatch(
        np.tile(profile.raw, (n, 1)),
        np.ones(n),
        np.ones(n, dtype=np.int64),
        np.zeros(n, dtype=np.int64),
        np.full(n, time_s),
        np.tile(laplace, (n, 1)),
    )


def _check_codes(codes, low: int) -> np.ndarray:
    c = np.asarray(codes)
    if c.size and not np.issubdtype(c.dtype, np.integer):
        raise ValueError(
            f"round codes must be integers (indices into LINEAR_ROUNDS), got {c.dtype}"
        )
    bad = c[(c < low) | (c >= N_CODES)]
    if bad.size:
        raise ValueError(
            f"round code {int(bad[0])} is outside [{low}, {N_CODES - 1}] "
            f"(indices into LINEAR_ROUNDS{', -1 pads' if low < 0 else ''})"
        )
    return c.astype(np.intp)


def advance(chains: ChainBatch, codes, profile) -> tuple[ChainBatch, np.ndarray]:
    """Apply round ``codes[i]`` to chain ``i`` for every i at once.

    Parameters
    ----------
    chains : ChainBatch of N chains
    codes : int array, shape (N,)
        Indices into :data:`LINEAR_ROUNDS`.
    profile : models.Profile

    Returns
    -------
    chains : ChainBatch
        The N chains one round longer.
    success : ndarray, shape (N,)
        Success probability of the round's step.

    Examples
    --------
    >>> from models.profile import Profile
    >>> from models.states import werner
    >>> profile = Profile(tuple(werner(0.7)))
    >>> code = round_code(Round("single", "same", "Y"))
    >>> out, p = advance(start_chains(profile, 1), [code], profile)
    >>> round(float(p[0]), 6), round(float(out.bell[0, 0]), 6), int(out.memory[0])
    (0.68, 0.735294, 2)
    """
    codes = _check_codes(codes, 0)
    n = len(chains)
    if codes.shape != (n,):
        raise ValueError(f"codes has shape {codes.shape}; expected ({n},), one per chain")
    s = _sacrificed(chains, CODE_SAME[codes], profile)
    success = np.empty(n)
    kept = np.empty((n, 4))
    # rows sorted by code, then taken in chunks (bounded memory), each chunk
    # grouped by code: a step with scalar rotations is much faster
    order = np.argsort(codes, kind="stable")
    for lo in range(0, n, CHUNK_ROWS):
        rows = order[lo : lo + CHUNK_ROWS]
        _step_rows(
            rows, codes[rows], chains.bell, s["bell"], s["laplace"], profile.noise, success, kept
        )
    return _finish(chains, codes, s, success, kept, profile), success


def advance_every(chains: ChainBatch, codes, profile) -> tuple[ChainBatch, np.ndarray]:
    """Apply every round of ``codes`` to every chain (what an exhaustive search needs).

    Equal to ``advance(chains.take(np.repeat(range(S), C)), np.tile(codes, S), profile)``
    but faster: the waits of a chain's inputs are worked out once per chain and
    kind of sacrificed pair, not once per code.

    Parameters
    ----------
    chains : ChainBatch of S chains
    codes : int array, shape (C,)
    profile : models.Profile

    Returns
    -------
    chains : ChainBatch of S * C chains, chain-major (row ``s * C + c`` is chain s after code c)
    success : ndarray, shape (S * C,)
    """
    codes = _check_codes(codes, 0).ravel()
    n_states, n_codes = len(chains), codes.size
    noise = profile.noise
    success = np.empty((n_states, n_codes))
    kept = np.empty((n_states, n_codes, 4))
    params = dict(
        two_qubit=noise.two_qubit, single_qubit=noise.single_qubit, measurement=noise.measurement
    )
    step = max(1, CHUNK_ROWS // 64)
    for lo in range(0, n_states, step):
        part = chains.take(np.arange(lo, min(lo + step, n_states)))
        prepared = {}
        for same in (False, True):
            s = _sacrificed(part, np.full(len(part), same), profile)
            stored = wait_for(part.bell, s["laplace"])
            joint = None
            if CODE_DOUBLE[codes[CODE_SAME[codes] == same]].any():
                joint = made_joint(
                    part.bell, s["bell"], s["bell"], s["laplace"], s["laplace"], (0, 1, 2)
                )
            prepared[same] = (s["bell"], stored, joint)
        for c, code in enumerate(codes):
            r = LINEAR_ROUNDS[code]
            s_bell, stored, joint = prepared[r.sacrificed == "same"]
            if r.selection == "single":
                p, k = run_step(TWO_TO_ONE, (stored, s_bell), r.rotations, **params)
            else:
                p, k = run_joint(DOUBLE_SELECTION, joint, r.rotations, **params)
            success[lo : lo + len(part), c] = p
            kept[lo : lo + len(part), c] = k
    rows = chains.take(np.repeat(np.arange(n_states), n_codes))
    all_codes = np.tile(codes, n_states)
    s = _sacrificed(rows, CODE_SAME[all_codes], profile)
    success = success.reshape(-1)
    return _finish(rows, all_codes, s, success, kept.reshape(-1, 4), profile), success


def _sacrificed(chains: ChainBatch, same, profile) -> dict:
    """Figures of the sacrificed pairs: fresh raw pairs, or independent copies of the chain."""
    raw_time, raw_laplace = raw_pair_figures(profile)
    return {
        "bell": np.where(same[:, None], chains.bell, profile.raw),
        "laplace": np.where(same[:, None], chains.laplace, raw_laplace),
        "time_s": np.where(same, chains.time_s, raw_time),
        "cost": np.where(same, chains.raw_pairs, 1.0),
        "memory": np.where(same, chains.memory, 1),
    }


def _finish(chains, codes, s, success, kept, profile) -> ChainBatch:
    """Exchange wait, re-twirl, costs, memory, times and Laplace transforms after the steps."""
    n_sacrificed = np.where(CODE_DOUBLE[codes], 2, 1)
    # the kept pair needs at least as much memory as a sacrificed one, so the
    # best order makes it first, then the sacrificed pairs in order
    memory = np.maximum(chains.memory, s["memory"] + n_sacrificed)
    out, cost, time_s, laplace = finish_step(
        kept,
        success,
        twirled=CODE_TWIRL[codes],
        inputs_cost=chains.raw_pairs + n_sacrificed * s["cost"],
        inputs_time_s=chains.time_s + n_sacrificed * s["time_s"],
        inputs_laplace=chains.laplace * s["laplace"] ** n_sacrificed[:, None],
        profile=profile,
    )
    return ChainBatch(out, cost, memory.astype(np.int64), chains.rounds + 1, time_s, laplace)


def _step_rows(rows, row_codes, bell, s_bell, s_laplace, noise, success, kept):
    """Steps of ``rows`` (sorted by code): fills ``success[rows]`` and ``kept[rows]``."""
    double = CODE_DOUBLE[row_codes]
    single_rows, double_rows = rows[~double], rows[double]
    # waiting depends on the chain and the sacrificed pairs only, not on the rotations
    stored = wait_for(bell[single_rows], s_laplace[single_rows])
    joint = made_joint(
        bell[double_rows],
        s_bell[double_rows],
        s_bell[double_rows],
        s_laplace[double_rows],
        s_laplace[double_rows],
        (0, 1, 2),
    )
    params = dict(
        two_qubit=noise.two_qubit, single_qubit=noise.single_qubit, measurement=noise.measurement
    )
    for group, codes_ in ((single_rows, row_codes[~double]), (double_rows, row_codes[double])):
        if group.size == 0:
            continue
        distinct, starts = np.unique(codes_, return_index=True)
        if group.size < SMALL_GROUPS * distinct.size:
            # many codes with few rows each: one call with per-row rotations
            rot = CODE_ROTATIONS[codes_]
            if group is single_rows:
                success[group], kept[group] = run_step(
                    TWO_TO_ONE, (stored, s_bell[group]), (rot[:, 0], rot[:, 1]), **params
                )
            else:
                success[group], kept[group] = run_joint(
                    DOUBLE_SELECTION, joint, (rot[:, 0], rot[:, 1], rot[:, 2]), **params
                )
            continue
        bounds = np.append(starts, group.size)
        for code, lo, hi in zip(distinct, bounds[:-1], bounds[1:], strict=True):
            r = LINEAR_ROUNDS[code]
            target = group[lo:hi]
            if r.selection == "single":
                # the kept pair waited while the sacrificed pair was made
                success[target], kept[target] = run_step(
                    TWO_TO_ONE, (stored[lo:hi], s_bell[target]), r.rotations, **params
                )
            else:
                success[target], kept[target] = run_joint(
                    DOUBLE_SELECTION, joint[lo:hi], r.rotations, **params
                )


def evaluate_linear(codes, profile) -> dict:
    """Evaluate N linear recipes given as round codes, sharing common prefixes.

    Parameters
    ----------
    codes : int array, shape (N, D)
        Row i is recipe i's round codes (indices into :data:`LINEAR_ROUNDS`),
        padded with -1 after its last round (a row of -1 is the raw pair).
    profile : models.Profile

    Returns
    -------
    dict of arrays
        ``bell`` (N, 4), ``fidelity`` (N,), ``raw_pairs_per_output`` (N,),
        ``yield`` (N,), ``memory_per_node`` (N,) int, ``rounds`` (N,) int,
        ``time_per_output_s`` (N,), and ``success_probabilities`` (N, D) with NaN
        after a recipe's last round.

    Each distinct prefix is evaluated once: at depth d the rows still running are
    grouped by (distinct prefix of length d, code d) with ``np.unique``.

    Examples
    --------
    >>> from models.profile import Profile
    >>> from models.states import werner
    >>> s = round_code(Round("single", "same", "Y"))
    >>> out = evaluate_linear([[s, s], [s, -1]], Profile(tuple(werner(0.7))))
    >>> out["fidelity"].round(6).tolist(), out["memory_per_node"].tolist()
    ([0.845946, 0.735294], [3, 2])
    """
    codes = _check_codes(codes, -1)
    if codes.ndim != 2:
        raise ValueError(f"codes has shape {codes.shape}; expected (N, D)")
    n, depth = codes.shape
    padding = codes < 0
    if depth > 1 and np.any(padding[:, :-1] & ~padding[:, 1:]):
        row = int(np.flatnonzero(np.any(padding[:, :-1] & ~padding[:, 1:], axis=1))[0])
        raise ValueError(f"codes[{row}] = {codes[row].tolist()}: -1 may only pad the end of a row")
    level = start_chains(profile, 1)
    final = start_chains(profile, n)
    success = np.full((n, depth), np.nan)
    parent = np.zeros(n, dtype=np.int64)
    for d in range(depth):
        active = ~padding[:, d]
        if not active.any():
            break
        key = parent[active] * N_CODES + codes[active, d]
        unique, inverse = np.unique(key, return_inverse=True)
        level, p = advance(level.take(unique // N_CODES), unique % N_CODES, profile)
        rows = np.flatnonzero(active)
        success[rows, d] = p[inverse]
        ends = padding[rows, d + 1] if d + 1 < depth else np.ones(rows.size, dtype=bool)
        done = rows[ends]
        picked = level.take(inverse[ends])
        for name in ("bell", "raw_pairs", "memory", "rounds", "time_s", "laplace"):
            getattr(final, name)[done] = getattr(picked, name)
        parent = np.zeros(n, dtype=np.int64)
        parent[rows] = inverse
    with np.errstate(divide="ignore"):
        pair_yield = np.where(np.isfinite(final.raw_pairs), 1.0 / final.raw_pairs, 0.0)
    return {
        "bell": final.bell,
        "fidelity": final.bell[:, 0].copy(),
        "raw_pairs_per_output": final.raw_pairs,
        "yield": pair_yield,
        "memory_per_node": final.memory,
        "rounds": final.rounds,
        "time_per_output_s": final.time_s,
        "success_probabilities": success,
    }
