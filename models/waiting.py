"""Exact waiting times: time-weighted states, joint waits of a step's inputs, retries.

Model. Raw pairs arrive from one link as a Poisson process of rate R; the inputs
of a step are made one after another (in :func:`models.recipes.making_order`); a
stored input decays while the inputs after it are made; the kept output decays
during the classical exchange D; a failed step restarts all its inputs, which
are made again independently.

The memory map of a wait t on a Bell-diagonal pair is a sum of exponentials,
``M(t) = sum_m exp(-a_m t) D_m`` (:data:`DECAY_BASIS`, ``a = (0, 2/T2, 1/T1,
2/T1)``). So everything stays exact if each made pair carries its *time-weighted
state* ``H(s) = E[rho exp(-s T)]`` (T its whole production time, retries
included) at the rates s its users need, together with ``G(s) = 1 - sum H(s)``
computed without cancellation (``G(0) = 0`` exactly). For one attempt with inputs
made in order 1..n (input j waits while inputs j+1..n are made)::

    A(s) = exp(-s D) sum_{m_1..m_{n-1}} S(D_{m_1} H_1(s), D_{m_2} H_2(s + a_{m_1}), ...,
                                          H_n(s + a_{m_1} + ... + a_{m_{n-1}}))

with S the step's unnormalised success branch (multilinear in its inputs). The
attempt fails with weighted probability ``F(s) = exp(-s D) prod L_i(s) - tr A(s)``
(``L = sum H``) and failures restart, so ``H_out(s) = [twirl] M(D) A(s) / (1 - F(s))``.
We compute ``1 - F = Q + tr A`` with ``Q = 1 - exp(-s D) prod L_i`` assembled from
the ``G_i`` and ``expm1`` (all terms non-negative), so at s = 0 it is exactly the
success probability ``P = tr A(0)`` and ``sum H(0)`` stays 1 to rounding after any
number of rounds. The raw pair: ``H(s) = raw R / (R + s)``, ``G(s) = s / (R + s)``.

Rates. A pair used by a step at rate s is needed by that step's input at
position j (0-based, making order) at s plus a sum of j base rates; so the rates
are sums of base rates, which we hold as points of a :class:`RateLattice`: integer
counts over the distinct non-zero generators ``2/T2`` and ``1/T1`` (``2/T1`` is
twice the second). The points reachable with at most k sums (*level* k) number
``(k + 1)**2`` in general, ``2 k + 1`` when T2 = 2 T1 (one generator, with steps 1
and 2), ``k + 1`` when only T2 is finite, and 1 with perfect memories (nothing
is slower then). A recipe of depth d made of steps with at most n inputs needs
level ``(n - 1) d`` at its raw pairs, falling by ``n - 1`` per round.

References
----------
1. W. Duer, H.-J. Briegel, J. I. Cirac and P. Zoller, Phys. Rev. A 59, 169 (1999).
2. A. Wald, Ann. Math. Statist. 15, 283 (1944) (mean of a random sum; from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from functools import cached_property, lru_cache

import numpy as np

from .noise import store_with_decays
from .steps import run_joint, run_step


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
# decays as exp(-a_m t) (m = 0: the part that does not decay); linear in the pair
DECAY_BASIS = _decay_basis()


def decay_rates(noise) -> np.ndarray:
    """The rates a_m (1/s) of :data:`DECAY_BASIS`: ``(0, 2/T2, 1/T1, 2/T1)``, shape (4,)."""
    return np.array([0.0, 2.0 / noise.t2_s, 1.0 / noise.t1_s, 2.0 / noise.t1_s])


def memory_map(wait_s, noise) -> np.ndarray:
    """The 4 x 4 map of a fixed wait: ``pair @ memory_map(t, noise)`` is the stored pair."""
    weights = np.exp(-decay_rates(noise) * wait_s)
    return np.tensordot(weights, DECAY_BASIS, axes=1)


def twirl(pair, single_qubit) -> np.ndarray:
    """Re-twirl to Werner form, with the noise of one rotation; linear in ``pair``.

    The twirl is a random bilateral Clifford applied as a gate; averaged over
    the draw it makes a Bell-diagonal pair Werner, and it adds single-qubit
    depolarising noise ``single_qubit`` (p1) at each node whatever is drawn.
    Written linearly (the uniform part scales with the pair's total weight), so
    it applies to time-weighted states as well. Shape ``(..., 4)`` -> ``(..., 4)``.

    Examples
    --------
    >>> twirl([0.9, 0.1, 0.0, 0.0], 1.0).round(6).tolist()
    [0.9, 0.033333, 0.033333, 0.033333]
    >>> round(float(twirl([0.9, 0.1, 0.0, 0.0], 0.9)[0]), 6)  # 0.81 * 0.9 + 0.19 / 4
    0.7765
    """
    p = np.asarray(pair, dtype=float)
    rest = (p[..., 1] + p[..., 2] + p[..., 3]) / 3.0
    werner_part = np.stack([p[..., 0], rest, rest, rest], axis=-1)
    s2 = np.asarray(single_qubit, dtype=float)[..., None] ** 2
    return s2 * werner_part + (1.0 - s2) * 0.25 * p.sum(axis=-1, keepdims=True)


@dataclass(frozen=True, eq=False)
class RateLattice:
    """Sums of base decay rates up to a level, ordered by level (each level a prefix).

    Attributes
    ----------
    rates : ndarray, shape (K,)
        Rate of each point, 1/s; point 0 is rate 0.
    levels : ndarray, shape (K,), int
        Fewest base rates summing to the point.
    shift : ndarray, shape (K, 4), int
        ``shift[i, m]``: the point ``rates[i] + a_m``; -1 past the top level.
    groups : tuple of tuples of int
        The m with equal ``a_m`` (one group of all four with perfect memories).
    """

    rates: np.ndarray
    levels: np.ndarray
    shift: np.ndarray
    groups: tuple

    @cached_property
    def group_maps(self) -> np.ndarray:
        """Per group, the sum of its :data:`DECAY_BASIS` maps, shape (G, 4, 4)."""
        return np.stack([DECAY_BASIS[list(g)].sum(axis=0) for g in self.groups])

    @cached_property
    def group_shift(self) -> np.ndarray:
        """Per point and group, the point shifted by the group's rate, shape (K, G)."""
        return self.shift[:, [g[0] for g in self.groups]]

    @property
    def grows(self) -> bool:
        """False with perfect memories: the lattice is the single rate 0."""
        return len(self.groups) > 1

    def size(self, level: int) -> int:
        """Number of points up to ``level``."""
        return int(np.searchsorted(self.levels, level, side="right"))

    def level_of(self, size: int) -> int:
        """The level whose points number ``size``; ValueError if none does."""
        if not self.grows:
            return int(self.levels[-1])
        level = int(self.levels[size - 1]) if 0 < size <= len(self.rates) else -1
        if level < 0 or self.size(level) != size:
            raise ValueError(f"{size} rates is not a level of this profile's rate lattice")
        return level


def rate_lattice(noise, top: int) -> RateLattice:
    """The sums of up to ``top`` base decay rates of ``noise`` (see the module doc for sizes)."""
    g, h = 2.0 / noise.t2_s, 1.0 / noise.t1_s
    # base rates a_0..a_3 as integer counts over distinct non-zero generators
    if g == h:
        generators, base = [h], [(0,), (1,), (1,), (2,)]
    else:
        generators, base = [g, h], [(0, 0), (1, 0), (0, 1), (0, 2)]
    keep = [i for i, x in enumerate(generators) if x != 0.0]
    generators = [generators[i] for i in keep]
    base = [tuple(b[i] for i in keep) for b in base]
    groups = {}
    for m, b in enumerate(base):
        groups.setdefault(b, []).append(m)
    points, levels, index = [base[0]], [0], {base[0]: 0}
    frontier = [base[0]]
    for level in range(1, top + 1):
        new = []
        for p in frontier:
            for b in base[1:]:
                q = tuple(x + y for x, y in zip(p, b, strict=True))
                if q not in index:
                    index[q] = len(points)
                    points.append(q)
                    levels.append(level)
                    new.append(q)
        frontier = new
    shift = np.array(
        [
            [index.get(tuple(x + y for x, y in zip(p, b, strict=True)), -1) for b in base]
            for p in points
        ],
        dtype=np.intp,
    )
    counts = np.array(points, dtype=float).reshape(len(points), len(generators))
    return RateLattice(
        rates=counts @ np.array(generators, dtype=float),
        levels=np.array(levels, dtype=np.intp),
        shift=shift,
        groups=tuple(tuple(v) for v in groups.values()),
    )


@dataclass(frozen=True, eq=False)
class Weighted:
    """Time-weighted states of N pairs at the first K points of a rate lattice.

    Attributes
    ----------
    state : ndarray, shape (N, K, 4)
        ``H(s_k) = E[rho exp(-s_k T)]``; ``state[:, 0]`` is the pair's Bell weights.
    deficit : ndarray, shape (N, K)
        ``G(s_k) = 1 - sum H(s_k) = E[1 - exp(-s_k T)]``, without cancellation.
    scale : ndarray, shape (K,), or None
        Where ``state[n, k] = scale[k] * state[n, 0]`` (the raw pair: its state does
        not depend on its waiting time), which keeps joint waits in product form.
    """

    state: np.ndarray
    deficit: np.ndarray
    scale: np.ndarray | None = None


@dataclass(frozen=True, eq=False)
class BoundNoise:
    """What every step of one profile needs, worked out once (see :func:`bind`).

    Attributes
    ----------
    step : dict
        Keyword arguments of :func:`models.steps.run_step` and ``run_joint``
        (``two_qubit``, ``single_qubit``, ``measurement``).
    single_qubit : float
        p1, for the re-twirl.
    decay_rates : ndarray, shape (4,)
        a_m of :data:`DECAY_BASIS`, 1/s.
    delay_s : float
        One-way classical delay D, seconds.
    exchange : ndarray, shape (4, 4)
        ``pair @ exchange``: the pair after waiting D.
    raw : ndarray, shape (4,)
        The raw pair's Bell weights.
    pair_rate_hz : float
        R (``inf``: instant).
    raw_time_s : float
        Mean time to receive a raw pair, 1/R.
    noise : NodeNoise
        The profile's noise, from which rate lattices are built.
    """

    step: dict
    single_qubit: float
    decay_rates: np.ndarray
    delay_s: float
    exchange: np.ndarray
    raw: np.ndarray
    pair_rate_hz: float
    raw_time_s: float
    noise: object
    _lattices: dict = field(default_factory=dict, repr=False)

    def lattice(self, top: int) -> RateLattice:
        """The rate lattice up to level ``top`` (cached; lower levels are prefixes)."""
        if top not in self._lattices:
            self._lattices[top] = rate_lattice(self.noise, top)
        return self._lattices[top]

    def raw_weighted(self, level: int, pair=None) -> Weighted:
        """The raw pair's time-weighted state up to ``level``, one broadcast row."""
        lattice = self.lattice(level)
        s = lattice.rates[: lattice.size(level)]
        r = self.pair_rate_hz
        scale = np.ones_like(s) if math.isinf(r) else r / (r + s)
        deficit = np.zeros_like(s) if math.isinf(r) else s / (r + s)
        pair = self.raw if pair is None else np.asarray(pair, dtype=float)
        return Weighted(pair[None, None, :] * scale[None, :, None], deficit[None], scale)


@lru_cache(maxsize=64)
def bind(profile) -> BoundNoise:
    """The :class:`BoundNoise` of a profile (cached; also ``profile.bound()``)."""
    noise = profile.noise
    rate = profile.pair_rate_hz
    return BoundNoise(
        step=dict(
            two_qubit=noise.two_qubit,
            single_qubit=noise.single_qubit,
            measurement=noise.measurement,
        ),
        single_qubit=noise.single_qubit,
        decay_rates=decay_rates(noise),
        delay_s=profile.classical_delay_s,
        exchange=memory_map(profile.classical_delay_s, noise),
        raw=profile.raw,
        pair_rate_hz=rate,
        raw_time_s=0.0 if math.isinf(rate) else 1.0 / rate,
        noise=noise,
    )


@dataclass(frozen=True, eq=False)
class Joint:
    """Joint weights of a step's inputs (making order) at K rates, for N rows.

    Either ``factors``, a product of n arrays (N or 1, K, 4), or ``dense``,
    shape (N, K, 4**n) with input 1 most significant.
    """

    factors: tuple | None
    dense: np.ndarray | None

    def take(self, index) -> Joint:
        """The joint weights of rows ``index``."""
        if self.dense is not None:
            return Joint(None, self.dense[index])
        # per-row factors are taken; one broadcast row (a raw pair) stays as it is
        rows = max(f.shape[0] for f in self.factors)
        return Joint(tuple(f[index] if f.shape[0] == rows else f for f in self.factors), None)


def _outer(factors) -> np.ndarray:
    out = factors[0]
    for f in factors[1:]:
        out = out[..., :, None] * f[..., None, :]
        out = out.reshape(out.shape[:-2] + (-1,))
    return out


def joint_waits(made, lattice: RateLattice, k: int) -> Joint:
    """Joint weights of a step's inputs at the first ``k`` lattice rates.

    Worked out from the last input backwards: the joint weights ``W_j`` of inputs
    j..n, with input j taken at rate r, are ``sum_m D_m H_j(r) (x) W_{j+1}(r + a_m)``,
    evaluated once at every point input j is needed at (equal ``a_m`` grouped).

    Parameters
    ----------
    made : sequence of n :class:`Weighted`, in making order
        Input j (0-based) must hold the points up to the output's level + j.
    lattice : RateLattice holding all those points
    k : int
        Points of the output (a level's size).

    Returns
    -------
    Joint, rows N (the largest of the inputs'), K = k
    """
    n = len(made)
    if not lattice.grows:  # perfect memories: waits change nothing
        return Joint(tuple(h.state[:, :1] for h in made), None)
    top = int(lattice.levels[k - 1])
    if top + n - 1 > lattice.levels[-1]:
        raise ValueError(
            f"the rate lattice reaches level {lattice.levels[-1]}; "
            f"a step with {n} inputs needs {top + n - 1}"
        )
    sizes = [lattice.size(top + j) for j in range(n)]
    for j, h in enumerate(made):
        if h.state.shape[1] < sizes[j]:
            raise ValueError(
                f"input {j} in making order holds {h.state.shape[1]} rates, "
                f"the step needs {sizes[j]}"
            )
    last = made[-1]
    j = n - 2
    here = made[j].state[:, : sizes[j]]
    shift = lattice.group_shift[: sizes[j]]
    if last.scale is not None:
        # the last input's state does not depend on its time: a product
        first = sum(
            last.scale[shift[:, g]][None, :, None] * (here @ lattice.group_maps[g])
            for g in range(shift.shape[1])
        )
        if n == 2:
            return Joint((first, last.state[:, :1]), None)
        tail = _outer([first, last.state[:, :1]])
    else:
        tail = sum(
            _outer([here @ lattice.group_maps[g], last.state[:, shift[:, g]]])
            for g in range(shift.shape[1])
        )
    for j in range(n - 3, -1, -1):
        here = made[j].state[:, : sizes[j]]
        shift = lattice.group_shift[: sizes[j]]
        tail = sum(
            _outer([here @ lattice.group_maps[g], tail[:, shift[:, g]]])
            for g in range(shift.shape[1])
        )
    return Joint(None, tail)


@dataclass(frozen=True, eq=False)
class Prepared:
    """A step's joint input weights made ready for its attempts (:func:`prepare`).

    Either ``joint`` (a product of one or two factors, used as it is) or
    ``normalised``, shape (N, K, 4**n): the dense joint weights of each row and
    rate divided by their ``total`` (N, K), in making order; ``order`` is the role
    of each input in making order.
    """

    joint: Joint | None
    normalised: np.ndarray | None
    total: np.ndarray | None
    order: tuple

    def take(self, index) -> Prepared:
        """The prepared weights of rows ``index``."""
        if self.joint is not None:
            return Prepared(self.joint.take(index), None, None, self.order)
        return Prepared(None, self.normalised[index], self.total[index], self.order)


def prepare(joint: Joint, order) -> Prepared:
    """Joint weights ready for any number of attempts with other rotations.

    The normalisation of dense weights depends on the rows only, so a group of
    rows tried with many rotations (every code of a round kind) does it once.
    """
    order = tuple(order)
    if joint.dense is None and len(joint.factors) > 2:
        # three or more factors: one matrix product on the joint weights beats
        # the label-by-label sums of a product
        n = max(f.shape[0] for f in joint.factors)
        k = max(f.shape[1] for f in joint.factors)
        factors = [np.broadcast_to(f, (f.shape[0], k, 4)) for f in joint.factors]
        joint = Joint(None, np.broadcast_to(_outer(factors), (n, k, 4 ** len(factors))))
    if joint.dense is None:
        return Prepared(joint, None, None, order)
    n, k = joint.dense.shape[:2]
    flat = joint.dense.reshape(n * k, -1)
    # normalised first: at high rates the weights can be far below the smallest double
    total = flat.sum(axis=1)
    safe = np.where(total > 0, total, 1.0)
    return Prepared(None, (flat / safe[:, None]).reshape(n, k, -1), total.reshape(n, k), order)


def run_attempt(circuit, joint, order, rotations, bound: BoundNoise) -> np.ndarray:
    """Unnormalised success branch S of a step on joint weights, shape (N, K, 4).

    ``joint`` is a :class:`Joint` or (for many attempts on the same rows) its
    :class:`Prepared` form, whose ``order`` is then used; ``order`` gives the role
    (0 kept, then sacrificed) of each input in making order; ``rotations`` are in
    role order, ints or (N,) arrays.
    """
    prepared = joint if isinstance(joint, Prepared) else prepare(joint, order)
    order = prepared.order
    if prepared.joint is None:
        n, k = prepared.total.shape
    else:
        factors = prepared.joint.factors
        n = max(f.shape[0] for f in factors)
        k = max(f.shape[1] for f in factors)
    rotations = tuple(r if np.ndim(r) == 0 else np.repeat(r, k) for r in rotations)
    if prepared.joint is None:
        size = len(order)
        j = prepared.normalised.reshape((n * k,) + (4,) * size)
        j = np.moveaxis(j, tuple(range(1, size + 1)), tuple(1 + r for r in order))
        success, kept = run_joint(circuit, j, rotations, **bound.step)
        return (kept * (success * prepared.total.reshape(-1))[:, None]).reshape(n, k, 4)
    by_role = [None] * len(order)
    for f, role in zip(factors, order, strict=True):
        # one pair for every row and rate (a raw pair) goes in as one (4,) vector
        by_role[role] = f[0, 0] if f.shape[:2] == (1, 1) else np.broadcast_to(f, (n, k, 4))
    weights = np.ones(n * k)
    inputs = []
    for f in by_role:
        f = f.reshape(-1, 4) if f.ndim == 3 else f
        total = f.sum(axis=-1)
        safe = np.where(total > 0, total, 1.0)
        inputs.append(f / safe[..., None])
        weights = weights * total
    success, kept = run_step(circuit, inputs, rotations, **bound.step)
    return (kept * (success * weights)[:, None]).reshape(n, k, 4)


def joint_deficit(deficits) -> np.ndarray:
    """``1 - prod_i (1 - G_i)`` without cancellation, from the inputs' deficits."""
    g = 0.0
    for d in deficits:
        g = g + d * (1.0 - g)
    return g


def retry(branch, inputs_deficit, bound: BoundNoise, lattice: RateLattice, *, twirled):
    """A step's output, given one attempt's success branch; failures restart.

    Parameters
    ----------
    branch : (N, K, 4)
        :func:`run_attempt` (without the exchange factor ``exp(-s D)``).
    inputs_deficit : (N, K)
        :func:`joint_deficit` of the inputs at the same rates.
    bound : BoundNoise
    lattice : RateLattice (its first K rates are used)
    twirled : bool or (N,) bool
        Re-twirl the kept pair after the exchange.

    Returns
    -------
    success : (N,) the step's success probability ``tr A(0)``
    out : Weighted (N, K); rows that never succeed hold the maximally mixed pair.
    """
    k = branch.shape[1]
    s = lattice.rates[:k]
    late = np.exp(-s * bound.delay_s)
    attempt = branch * late[:, None]
    trace = attempt.sum(axis=-1)
    # 1 - exp(-sD) prod L_i = (1 - exp(-sD)) + exp(-sD) (1 - prod L_i): no cancellation
    q = -np.expm1(-s * bound.delay_s) + late * inputs_deficit
    denominator = q + trace
    out = attempt @ bound.exchange
    twirled = np.broadcast_to(twirled, out.shape[:1])
    if twirled.any():
        out[twirled] = twirl(out[twirled], bound.single_qubit)
    success = trace[:, 0].copy()
    ok = success > 0
    safe = np.where(ok[:, None], denominator, 1.0)
    state = np.where(ok[:, None, None], out / safe[..., None], 0.25)
    deficit = np.where(ok[:, None], q / safe, 0.0)
    return success, Weighted(state, deficit)
