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

from dataclasses import dataclass, fields, replace
from itertools import product
from types import SimpleNamespace

import numpy as np

from .kinds import STEP_KINDS
from .recipes import Recipe, Round
from .waiting import Weighted, joint_deficit, joint_waits, prepare, retry, run_attempt


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
# below this many rows (times rates) per code on average, per-row rotations beat
# grouping by code
SMALL_GROUPS = 24
_CODE_OF = {r: i for i, r in enumerate(LINEAR_ROUNDS)}
# decoding tables, indexed by code
CODE_DOUBLE = np.array([r.selection == "double" for r in LINEAR_ROUNDS])
CODE_SELECTION = np.array([r.selection for r in LINEAR_ROUNDS])
CODE_N_INPUTS = np.array([r.n_inputs for r in LINEAR_ROUNDS], dtype=np.intp)
# the most inputs of any kind: a chain's waiting data shrink by WIDEST - 1 levels per round
WIDEST = max(kind.n_inputs for kind in STEP_KINDS.values())
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

    recipe = as_recipe(recipe)
    if recipe.raw_twirl:
        # the chain starts from the raw pair as delivered; a twirled start has no code
        raise ValueError(
            f"recipe {recipe.notation!r} twirls its raw pairs ('~' in front); "
            "only recipes on untwirled raw pairs have round codes"
        )
    return tuple(round_code(r) for r in recipe.rounds)


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
    """N partial linear recipes: the pair each makes and what the next rounds need.

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
    weighted : ndarray, shape (N, K, 4), float
        Time-weighted state ``E[rho exp(-s T)]`` of the pair at the first K rates
        of the profile's rate lattice (:mod:`models.waiting`): what the pairs
        waiting for this one decay with. ``weighted[:, 0]`` equals ``bell``.
    deficit : ndarray, shape (N, K), float
        ``1 - sum(weighted)``, computed without cancellation.
    """

    bell: np.ndarray
    raw_pairs: np.ndarray
    memory: np.ndarray
    rounds: np.ndarray
    time_s: np.ndarray
    weighted: np.ndarray
    deficit: np.ndarray

    def __post_init__(self):
        n = np.shape(self.bell)[0] if np.ndim(self.bell) == 2 else -1
        if np.shape(self.bell) != (n, 4):
            raise ValueError(f"bell has shape {np.shape(self.bell)}; expected (N, 4)")
        for name in ("raw_pairs", "memory", "rounds", "time_s"):
            if np.shape(getattr(self, name)) != (n,):
                raise ValueError(
                    f"{name} has shape {np.shape(getattr(self, name))}; expected ({n},)"
                )
        shape = np.shape(self.weighted)
        if len(shape) != 3 or shape[0] != n or shape[2] != 4 or shape[1] < 1:
            raise ValueError(f"weighted has shape {shape}; expected ({n}, K, 4)")
        if np.shape(self.deficit) != shape[:2]:
            raise ValueError(f"deficit has shape {np.shape(self.deficit)}; expected {shape[:2]}")

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
            self.weighted[index],
            self.deficit[index],
        )

    @property
    def timed(self) -> Weighted:
        """The time-weighted states as the waiting module takes them."""
        return Weighted(self.weighted, self.deficit)


def start_chains(profile, n: int, *, rounds_ahead: int = 0, widest: int = WIDEST) -> ChainBatch:
    """``n`` chains that have made one raw pair each (no round yet).

    ``rounds_ahead``: how many rounds will be applied at most; the chains carry
    their time-weighted states at the rates those rounds need (level
    ``rounds_ahead * (widest - 1)`` of the rate lattice; with perfect memories
    one rate whatever the number). ``widest``: the most inputs of a round that
    may be applied (default the built-in kinds'; a general check round over n
    pairs needs n).
    """
    if not (isinstance(n, (int, np.integer)) and n >= 0):
        raise ValueError(f"n = {n!r} must be an integer >= 0")
    if not (isinstance(rounds_ahead, (int, np.integer)) and rounds_ahead >= 0):
        raise ValueError(f"rounds_ahead = {rounds_ahead!r} must be an integer >= 0")
    if not (isinstance(widest, (int, np.integer)) and widest >= 2):
        raise ValueError(f"widest = {widest!r} must be an integer >= 2")
    bound = profile.bound()
    raw = bound.raw_weighted(int(rounds_ahead) * (int(widest) - 1))
    return ChainBatch(
        np.tile(profile.raw, (n, 1)),
        np.ones(n),
        np.ones(n, dtype=np.int64),
        np.zeros(n, dtype=np.int64),
        np.full(n, bound.raw_time_s),
        np.repeat(raw.state, n, axis=0),
        np.repeat(raw.deficit, n, axis=0),
    )


def _lattice(chains: ChainBatch, bound, out_level=None, span: int = WIDEST - 1):
    """A rate lattice holding everything a round needs, and the number of output rates.

    ``span``: the most sacrificed pairs of the rounds applied (the levels a round
    adds to its output's).
    """
    size = chains.weighted.shape[1]
    if not bound.lattice(0).grows:
        return bound.lattice(0), 1
    top = 0
    while bound.lattice(top).size(top) < size:
        top += 1
    level = bound.lattice(top).level_of(size)
    if out_level is None:
        out_level = level - span
        if out_level < 0:
            raise ValueError(
                f"these chains carry waiting data for {level // span} more rounds; "
                "start them with start_chains(profile, n, rounds_ahead=...) large enough"
            )
    lattice = bound.lattice(max(level, out_level + span))
    return lattice, lattice.size(out_level)


def _concat(batches) -> ChainBatch:
    if len(batches) == 1:
        return batches[0]
    return ChainBatch(
        *[np.concatenate([getattr(b, f.name) for b in batches]) for f in fields(ChainBatch)]
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


def _made(chains: ChainBatch, same: bool, n_inputs: int, bound, lattice) -> list[Weighted]:
    """Inputs in making order: the chain's pair, then the sacrificed pairs.

    The kept pair needs at least as much memory as a sacrificed one (a copy or a
    raw pair), so the order that needs the fewest qubits makes it first.
    """
    if same:
        sacrificed = chains.timed
    else:
        sacrificed = bound.raw_weighted(int(lattice.levels[-1]))
    return [chains.timed] + [sacrificed] * (n_inputs - 1)


def advance(
    chains: ChainBatch, codes, profile, *, parent=None, level=None
) -> tuple[ChainBatch, np.ndarray]:
    """Apply round ``codes[i]`` to chain ``i`` for every i at once.

    Parameters
    ----------
    chains : ChainBatch of N chains
    codes : int array, shape (N,)
        Indices into :data:`LINEAR_ROUNDS`.
    profile : models.Profile
    parent : int array, shape (M,), optional
        Apply ``codes[i]`` to chain ``parent[i]`` instead (``codes`` then has shape
        (M,)): the same as ``advance(chains.take(parent), codes, profile)``, but the
        joint waits of a chain's inputs are worked out once per chain, kind of
        step and kind of sacrificed pair, whatever the number of its codes.
    level : int, optional
        Level of the rate lattice the output carries (default: one round's worth,
        ``WIDEST - 1`` levels, fewer than the input); a round needs its kept pair
        up to this level and, when its sacrificed pairs are copies, up to this
        level plus the number of sacrificed pairs.

    Returns
    -------
    chains : ChainBatch
        The N chains one round longer (their waiting data one round shorter).
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
    if parent is None:
        n = len(chains)
        if codes.shape != (n,):
            raise ValueError(f"codes has shape {codes.shape}; expected ({n},), one per chain")
        parent = np.arange(n)
    else:
        parent = np.asarray(parent, dtype=np.intp)
        n = parent.size
        if codes.shape != parent.shape or parent.ndim != 1:
            raise ValueError(f"codes has shape {codes.shape}; expected {parent.shape}, as parent")
    bound = profile.bound()
    lattice, k = _lattice(chains, bound, level)
    branch = np.empty((n, k, 4))
    # rows sorted by code, then taken in chunks (bounded memory), each chunk
    # grouped by kind of step and of sacrificed pair (their waits are shared),
    # then by code: a step with scalar rotations is much faster
    order = np.argsort(codes, kind="stable")
    chunk = max(1, CHUNK_ROWS // k)
    for lo in range(0, n, chunk):
        rows = order[lo : lo + chunk]
        row_codes = codes[rows]
        for selection, kind in STEP_KINDS.items():
            for same in (False, True):
                mask = (CODE_SELECTION[row_codes] == selection) & (CODE_SAME[row_codes] == same)
                if not mask.any():
                    continue
                group, group_codes = rows[mask], row_codes[mask]
                states, inverse = np.unique(parent[group], return_inverse=True)
                made = _made(chains.take(states), same, kind.n_inputs, bound, lattice)
                joint = joint_waits(made, lattice, k).take(inverse.ravel())
                _attempts(kind, joint, group, group_codes, bound, branch)
    return _finish(chains.take(parent), codes, branch, bound, lattice)


def _attempts(kind, joint, group, group_codes, bound, branch, order=None):
    """Success branches of ``group`` (sorted by code), written into ``branch[group]``.

    ``order``: the role of each input in making order (default: kept pair first).
    """
    distinct, starts = np.unique(group_codes, return_index=True)
    order = tuple(range(kind.n_inputs)) if order is None else order
    rates = joint.dense.shape[1] if joint.dense is not None else joint.factors[0].shape[1]
    if group.size * rates < SMALL_GROUPS * distinct.size:
        # many codes with few rows each: one call with per-row rotations
        rot = CODE_ROTATIONS[group_codes]
        rotations = tuple(rot[:, j] for j in range(kind.n_inputs))
        branch[group] = run_attempt(kind.circuit, joint, order, rotations, bound)
        return
    prepared = prepare(joint, order)
    bounds = np.append(starts, group.size)
    for code, lo, hi in zip(distinct, bounds[:-1], bounds[1:], strict=True):
        part = prepared.take(slice(lo, hi))
        rotations = LINEAR_ROUNDS[code].rotations
        branch[group[lo:hi]] = run_attempt(kind.circuit, part, order, rotations, bound)


def advance_sourced(
    kept: ChainBatch, source: ChainBatch, codes, profile, *, kept_index, source_index, level=0
) -> tuple[ChainBatch, np.ndarray]:
    """Rounds whose sacrificed pairs are made by another recipe: row i keeps
    ``kept[kept_index[i]]`` and sacrifices independent copies of ``source[source_index[i]]``.

    The pairs of a tree recipe: the sacrificed pairs of round ``codes[i]`` (its
    kind, rotations and re-twirl; its ``sacrificed`` field must be ``"raw"``, which
    here stands for "not copies of the kept pair") are made by the recipe of the
    source row, as :class:`models.recipes.Round` with ``sacrificed="sub"``. The
    inputs are made in :func:`models.making.making_order` of their memory needs
    (the source first when it needs more qubits than the kept pair), each waits
    while the later ones are made (:func:`models.waiting.joint_waits`), failures
    restart every input; costs, memory, rounds and times follow
    :mod:`models.evaluate`, whose figures this reproduces to rounding.

    Parameters
    ----------
    kept, source : ChainBatch
        Each row must carry its time-weighted states up to ``level + WIDEST - 1``.
    codes : int array, shape (N,)
        Indices into :data:`LINEAR_ROUNDS` of rounds with ``sacrificed == "raw"``.
    profile : models.Profile
    kept_index, source_index : int arrays, shape (N,)
        Rows of ``kept`` and ``source``.
    level : int
        Level of the rate lattice the outputs carry.

    Returns
    -------
    chains : ChainBatch of N rows, carrying ``level``
    success : ndarray, shape (N,)
        Success probability of each row's step.
    """
    codes = _check_codes(codes, 0)
    ki = np.asarray(kept_index, dtype=np.intp)
    si = np.asarray(source_index, dtype=np.intp)
    n = codes.size
    if codes.shape != (n,) or ki.shape != (n,) or si.shape != (n,):
        raise ValueError(
            f"codes, kept_index and source_index have shapes {codes.shape}, {ki.shape}, "
            f"{si.shape}; expected one equal (N,) shape"
        )
    if CODE_SAME[codes].any():
        raise ValueError(
            "advance_sourced takes rounds with sacrificed 'raw'; the source replaces it"
        )
    bound = profile.bound()
    if bound.lattice(0).grows:
        lattice = bound.lattice(int(level) + WIDEST - 1)
        k = lattice.size(int(level))
    else:
        lattice, k = bound.lattice(0), 1
    branch = np.empty((n, k, 4))
    kept_first = kept.memory[ki] >= source.memory[si]
    order = np.lexsort((codes, ~kept_first))
    chunk = max(1, CHUNK_ROWS // k)
    for lo in range(0, n, chunk):
        rows = order[lo : lo + chunk]
        for selection, kind in STEP_KINDS.items():
            m = kind.n_inputs - 1
            for first in (True, False):
                mask = (CODE_SELECTION[codes[rows]] == selection) & (kept_first[rows] == first)
                if not mask.any():
                    continue
                group = rows[mask]
                pair = ki[group] * len(source) + si[group]
                pairs, inverse = np.unique(pair, return_inverse=True)
                own = kept.take(pairs // len(source)).timed
                other = source.take(pairs % len(source)).timed
                # making order (models.making): the kept pair first unless the source
                # needs more qubits, and then last
                made = [own] + [other] * m if first else [other] * m + [own]
                roles = tuple(range(m + 1)) if first else tuple(range(1, m + 1)) + (0,)
                joint = joint_waits(made, lattice, k).take(inverse.ravel())
                _attempts(kind, joint, group, codes[group], bound, branch, roles)
    n_sacrificed = CODE_N_INPUTS[codes] - 1
    deficit = joint_deficit([kept.deficit[ki, :k]])
    for i in range(WIDEST - 1):
        more = joint_deficit([deficit, source.deficit[si, :k]])
        deficit = np.where((n_sacrificed > i)[:, None], more, deficit)
    success, weighted = retry(branch, deficit, bound, lattice, twirled=CODE_TWIRL[codes])
    ok = success > 0
    safe = np.where(ok, success, 1.0)
    cost = kept.raw_pairs[ki] + n_sacrificed * source.raw_pairs[si]
    time_s = kept.time_s[ki] + n_sacrificed * source.time_s[si]
    mk, ms = kept.memory[ki], source.memory[si]
    # max over making order of (memory of the input + inputs stored before it)
    memory = np.where(
        kept_first,
        np.maximum(mk, ms + n_sacrificed),
        np.maximum(ms + n_sacrificed - 1, mk + n_sacrificed),
    )
    out = ChainBatch(
        weighted.state[:, 0].copy(),
        np.where(ok, cost / safe, np.inf),
        memory.astype(np.int64),
        np.maximum(kept.rounds[ki], source.rounds[si]) + 1,
        np.where(ok, (time_s + bound.delay_s) / safe, np.inf),
        weighted.state,
        weighted.deficit,
    )
    return out, success


def advance_every(chains: ChainBatch, codes, profile) -> tuple[ChainBatch, np.ndarray]:
    """Apply every round of ``codes`` to every chain (what an exhaustive search needs).

    Equal to ``advance(chains.take(np.repeat(range(S), C)), np.tile(codes, S), profile)``
    but faster: the joint waits of a chain's inputs are worked out once per chain,
    kind of step and kind of sacrificed pair, not once per code.

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
    bound = profile.bound()
    lattice, k = _lattice(chains, bound)
    branch = np.empty((n_states, n_codes, k, 4))
    step = max(1, CHUNK_ROWS // (64 * k))
    for lo in range(0, n_states, step):
        part = chains.take(np.arange(lo, min(lo + step, n_states)))
        for selection, kind in STEP_KINDS.items():
            for same in (False, True):
                columns = np.flatnonzero(
                    (CODE_SELECTION[codes] == selection) & (CODE_SAME[codes] == same)
                )
                if columns.size == 0:
                    continue
                made = _made(part, same, kind.n_inputs, bound, lattice)
                order = tuple(range(kind.n_inputs))
                joint = prepare(joint_waits(made, lattice, k), order)
                for c in columns:
                    rotations = LINEAR_ROUNDS[codes[c]].rotations
                    branch[lo : lo + len(part), c] = run_attempt(
                        kind.circuit, joint, order, rotations, bound
                    )
    rows = chains.take(np.repeat(np.arange(n_states), n_codes))
    all_codes = np.tile(codes, n_states)
    return _finish(rows, all_codes, branch.reshape(-1, k, 4), bound, lattice)


def advance_rounds(
    chains: ChainBatch, rounds, which, profile, *, parent=None, level=None
) -> tuple[ChainBatch, np.ndarray]:
    """Apply ``rounds[which[i]]`` to chain ``parent[i]``: rounds of any kind, given as rounds.

    What :func:`advance` does for rounds that have no code: general check rounds
    over up to five pairs (:mod:`models.circuits`), with fresh raw pairs or
    copies of the chain's pair as sacrificed pairs. Same model (making order,
    waits, retries, re-twirl, costs) and the same figures as
    :func:`models.evaluate.evaluate` to rounding; vectorised over the rows of
    each round, with a Python loop over the distinct rounds only.

    Parameters
    ----------
    chains : ChainBatch
    rounds : sequence of models.recipes.Round
        Rounds without a source (``sacrificed`` ``"raw"`` or ``"same"``).
    which : int array, shape (N,)
        Index into ``rounds`` of each row's round.
    profile : models.Profile
    parent : int array, shape (N,), optional
        Chain of each row (default ``arange(N)``, one row per chain).
    level : int, optional
        Level of the rate lattice the output carries (default: the chains' less
        the most sacrificed pairs of ``rounds``).

    Returns
    -------
    chains : ChainBatch of N rows
    success : ndarray, shape (N,)

    Examples
    --------
    >>> from models.profile import Profile
    >>> from models.states import werner
    >>> profile = Profile(tuple(werner(0.7)))
    >>> rounds = [Round("01/Z/0", "same", (2, 2)), Round("single", "same", "Y")]
    >>> out, p = advance_rounds(start_chains(profile, 1), rounds, [0, 1], profile, parent=[0, 0])
    >>> bool(np.allclose(out.bell[0], out.bell[1])), round(float(p[0]), 6)
    (True, 0.68)
    """
    rounds = tuple(rounds)
    if not rounds or any(not isinstance(r, Round) or r.source is not None for r in rounds):
        raise ValueError("rounds must be a non-empty sequence of Round without a source")
    which = np.asarray(which, dtype=np.intp)
    n = which.size
    parent = np.arange(n) if parent is None else np.asarray(parent, dtype=np.intp)
    if which.shape != (n,) or parent.shape != (n,):
        raise ValueError(
            f"which and parent have shapes {which.shape} and {parent.shape}; expected (N,) both"
        )
    if n and (which.min() < 0 or which.max() >= len(rounds)):
        raise ValueError(f"which holds indices outside [0, {len(rounds) - 1}]")
    n_inputs = np.array([r.n_inputs for r in rounds], dtype=np.intp)
    bound = profile.bound()
    lattice, k = _lattice(chains, bound, level, span=int(n_inputs.max()) - 1)
    branch = np.empty((n, k, 4))
    # rows grouped by round once: a deep level offers thousands of rounds
    by_round = np.argsort(which, kind="stable")
    used, starts = np.unique(which[by_round], return_index=True)
    for i, lo, hi in zip(used, starts, np.append(starts[1:], n), strict=True):
        group, r = by_round[lo:hi], rounds[i]
        kind = STEP_KINDS[r.selection]
        states, inverse = np.unique(parent[group], return_inverse=True)
        made = _made(chains.take(states), r.sacrificed == "same", kind.n_inputs, bound, lattice)
        joint = joint_waits(made, lattice, k).take(inverse.ravel())
        order = tuple(range(kind.n_inputs))
        branch[group] = run_attempt(kind.circuit, joint, order, r.rotations, bound)
    same = np.array([r.sacrificed == "same" for r in rounds])[which]
    twirled = np.array([r.twirl for r in rounds])[which]
    return _finish_rounds(
        chains.take(parent), same, n_inputs[which] - 1, twirled, branch, bound, lattice
    )


def _finish(chains, codes, branch, bound, lattice) -> tuple[ChainBatch, np.ndarray]:
    """Retries, exchange wait, re-twirl, costs, memory and times after the attempts."""
    return _finish_rounds(
        chains,
        CODE_SAME[codes],
        CODE_N_INPUTS[codes] - 1,
        CODE_TWIRL[codes],
        branch,
        bound,
        lattice,
    )


def _finish_rounds(
    chains, same, n_sacrificed, twirled, branch, bound, lattice
) -> tuple[ChainBatch, np.ndarray]:
    """:func:`_finish` for rounds given by what it needs of them, one entry per row."""
    k = branch.shape[1]
    raw = bound.raw_weighted(0 if not lattice.grows else int(lattice.levels[k - 1]))
    own = chains.deficit[:, :k]
    sacrificed = np.where(same[:, None], own, raw.deficit[:, :k])
    deficit = joint_deficit([own])
    for i in range(int(n_sacrificed.max(initial=0))):
        more = joint_deficit([deficit, sacrificed])
        deficit = np.where((n_sacrificed > i)[:, None], more, deficit)
    success, weighted = retry(branch, deficit, bound, lattice, twirled=twirled)
    cost = chains.raw_pairs + n_sacrificed * np.where(same, chains.raw_pairs, 1.0)
    time_s = chains.time_s + n_sacrificed * np.where(same, chains.time_s, bound.raw_time_s)
    ok = success > 0
    safe = np.where(ok, success, 1.0)
    # the kept pair is made first (see _made), then the sacrificed pairs in order
    memory = np.maximum(chains.memory, np.where(same, chains.memory, 1) + n_sacrificed)
    out = ChainBatch(
        weighted.state[:, 0].copy(),
        np.where(ok, cost / safe, np.inf),
        memory.astype(np.int64),
        chains.rounds + 1,
        np.where(ok, (time_s + bound.delay_s) / safe, np.inf),
        weighted.state,
        weighted.deficit,
    )
    return out, success


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
    bound = profile.bound()
    safe_codes = np.maximum(codes, 0)
    # levels each round adds to what its kept pair must carry: copies are made
    # after the kept pair, raw pairs do not need the kept pair's waiting data
    extra = np.where(~padding & CODE_SAME[safe_codes], CODE_N_INPUTS[safe_codes] - 1, 0)
    if not bound.lattice(0).grows:
        extra[:] = 0
    # carry[:, d]: level the pair made by the first d rounds must carry
    carry = np.zeros((n, depth + 1), dtype=np.intp)
    carry[:, :depth] = np.cumsum(extra[:, ::-1], axis=1)[:, ::-1]
    start = start_chains(profile, 1)
    raw = bound.raw_weighted(int(carry[:, 0].max()) if n else 0)
    groups = [replace(start, weighted=raw.state.copy(), deficit=raw.deficit.copy())]
    final = {
        "bell": np.tile(profile.raw, (n, 1)),
        "raw_pairs": np.ones(n),
        "memory": np.ones(n, dtype=np.int64),
        "rounds": np.zeros(n, dtype=np.int64),
        "time_s": np.full(n, bound.raw_time_s),
    }
    success = np.full((n, depth), np.nan)
    # each running recipe's prefix: a group (one level of waiting data) and a row in it
    group = np.zeros(n, dtype=np.intp)
    parent = np.zeros(n, dtype=np.intp)
    for d in range(depth):
        active = ~padding[:, d]
        if not active.any():
            break
        rows = np.flatnonzero(active)
        offsets = np.cumsum([0] + [len(g) for g in groups])
        key = (offsets[group[rows]] + parent[rows]) * N_CODES + codes[rows, d]
        unique, inverse = np.unique(key, return_inverse=True)
        inverse = inverse.ravel()
        u_group = np.searchsorted(offsets, unique // N_CODES, side="right") - 1
        u_parent = unique // N_CODES - offsets[u_group]
        need = np.zeros(unique.size, dtype=np.intp)
        np.maximum.at(need, inverse, carry[rows, d + 1])
        p_u = np.empty(unique.size)
        new_groups, new_group, new_index = [], np.empty_like(need), np.empty_like(need)
        for lv in np.unique(need):
            pieces, chosen = [], []
            for g in np.unique(u_group[need == lv]):
                sel = np.flatnonzero((need == lv) & (u_group == g))
                out, p_u[sel] = advance(
                    groups[g], unique[sel] % N_CODES, profile, parent=u_parent[sel], level=int(lv)
                )
                pieces.append(out)
                chosen.append(sel)
            chosen = np.concatenate(chosen)
            new_group[chosen] = len(new_groups)
            new_index[chosen] = np.arange(chosen.size)
            new_groups.append(_concat(pieces))
        success[rows, d] = p_u[inverse]
        ends = padding[rows, d + 1] if d + 1 < depth else np.ones(rows.size, dtype=bool)
        for g, batch in enumerate(new_groups):
            here = ends & (new_group[inverse] == g)
            for name in final:
                final[name][rows[here]] = getattr(batch, name)[new_index[inverse[here]]]
        groups = new_groups
        group[rows] = new_group[inverse]
        parent[rows] = new_index[inverse]
    final = SimpleNamespace(**final)
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
