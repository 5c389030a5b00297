"""Pareto fronts and the 2-D hypervolume, on plain arrays.

A point dominates another when it is at least as good in every objective and
strictly better in one. Points with equal values do not dominate each other, so
ties are all kept by :func:`pareto_mask`; callers that want one recipe per point
collapse ties themselves (:func:`front_order` helps choose which).
"""

from __future__ import annotations

import numpy as np


def _as_gains(values, maximise) -> np.ndarray:
    """Values turned into quantities to maximise, shape (N, k), float."""
    v = np.asarray(values, dtype=float)
    if v.ndim != 2:
        raise ValueError(f"values has shape {v.shape}; expected (N, k): one row per point")
    maximise = tuple(bool(m) for m in maximise)
    if len(maximise) != v.shape[1]:
        raise ValueError(
            f"maximise has {len(maximise)} entries but values has {v.shape[1]} objectives"
        )
    if np.isnan(v).any():
        raise ValueError("values contain NaN; every point needs a value for every objective")
    signs = np.where(maximise, 1.0, -1.0)
    return v * signs


def pareto_mask(values, maximise) -> np.ndarray:
    """Which points no other point dominates.

    Parameters
    ----------
    values : array_like, shape (N, k)
        One row per point, one column per objective.
    maximise : sequence of k bools
        ``True`` where larger is better, ``False`` where smaller is better.

    Returns
    -------
    ndarray of bool, shape (N,)
        ``True`` for the non-dominated points (equal points are all kept).

    Examples
    --------
    >>> pareto_mask([[0.9, 0.1], [0.8, 0.5], [0.7, 0.4], [0.9, 0.1]], (True, True)).tolist()
    [True, True, False, True]
    """
    gains = _as_gains(values, maximise)
    n, k = gains.shape
    if n == 0:
        return np.zeros(0, dtype=bool)
    if k == 1:
        return gains[:, 0] == gains[:, 0].max()
    if k == 2:
        return _mask_2d(gains)
    return _mask_nd(gains)


def _mask_2d(gains: np.ndarray) -> np.ndarray:
    # sort by the first objective descending, then the second descending: a point is
    # dominated exactly when an earlier point of a strictly larger first objective has
    # a second objective >= its own, or an earlier point of the same first objective has
    # a strictly larger second one.
    order = np.lexsort((-gains[:, 1], -gains[:, 0]))
    a = gains[order, 0]
    b = gains[order, 1]
    n = len(order)
    starts = np.flatnonzero(np.r_[True, a[1:] != a[:-1]])  # first index of each equal-a group
    group = np.cumsum(np.r_[True, a[1:] != a[:-1]]) - 1  # group number of each point
    group_top = b[starts][group]  # the largest b of the point's group (groups sorted by b)
    running = np.maximum.accumulate(b)
    before = np.r_[-np.inf, running][starts][group]  # best b of strictly larger a
    first_group = starts[group] == 0  # nothing has a larger a (b may be -inf)
    mask_sorted = (b == group_top) & (first_group | (b > before))
    mask = np.zeros(n, dtype=bool)
    mask[order] = mask_sorted
    return mask


def _mask_nd(gains: np.ndarray) -> np.ndarray:
    # keep a shrinking set of candidates; each pass removes what the first candidate
    # dominates (points are visited in descending lexicographic order, so a point is
    # never dominated by one visited after it).
    order = np.lexsort(tuple(-gains[:, c] for c in reversed(range(gains.shape[1]))))
    g = gains[order]
    alive = np.ones(len(g), dtype=bool)
    for i in range(len(g)):
        if not alive[i]:
            continue
        rest = alive.copy()
        rest[: i + 1] = False
        idx = np.flatnonzero(rest)
        if idx.size == 0:
            break
        ge = (g[i] >= g[idx]).all(axis=1)
        gt = (g[i] > g[idx]).any(axis=1)
        alive[idx[ge & gt]] = False
    mask = np.zeros(len(g), dtype=bool)
    mask[order] = alive
    return mask


def hypervolume_2d(values, reference, maximise=(True, True)) -> float:
    """Area dominated by a set of 2-D points and bounded by a reference point.

    Parameters
    ----------
    values : array_like, shape (N, 2)
    reference : sequence of 2 floats
        A point worse than every point of interest in both objectives; points not
        strictly better than it in both objectives add nothing.
    maximise : pair of bools

    Returns
    -------
    float

    Examples
    --------
    >>> hypervolume_2d([[2.0, 1.0], [1.0, 2.0]], (0.0, 0.0))
    3.0
    """
    gains = _as_gains(values, maximise)
    if gains.shape[1] != 2:
        raise ValueError(f"hypervolume_2d needs 2 objectives, got {gains.shape[1]}")
    ref = np.asarray(reference, dtype=float) * np.where(tuple(maximise), 1.0, -1.0)
    keep = (gains > ref).all(axis=1)
    g = gains[keep]
    if len(g) == 0:
        return 0.0
    g = g[_mask_2d(g)]
    # descending first objective -> ascending second objective along the front
    g = g[np.lexsort((g[:, 1], -g[:, 0]))]
    area = 0.0
    previous_b = ref[1]
    for a, b in g:
        if b > previous_b:
            area += (a - ref[0]) * (b - previous_b)
            previous_b = b
    return float(area)


def unique_front(values, maximise, order=None, *, rtol: float = 1e-12) -> np.ndarray:
    """Indices of the Pareto front with one point per distinct value vector.

    Values are first rounded to ``rtol`` (:func:`quantise`), so that a point is not
    kept only because rounding errors made an equal objective look a hair better.
    Points whose values agree to ``rtol`` (relative, per objective) count as one;
    the one that comes first in ``order`` (a sequence of sort keys, one per point;
    default: input order) is kept. Returned in input order.

    Examples
    --------
    >>> unique_front([[0.9, 0.1], [0.8, 0.5], [0.9, 0.1]], (True, True), order=[2, 0, 1]).tolist()
    [1, 2]
    """
    v = np.asarray(values, dtype=float)
    mask = pareto_mask(quantise(v, rtol), maximise)
    idx = np.flatnonzero(mask)
    if idx.size == 0:
        return idx
    rank = np.arange(len(v))
    if order is not None:
        permutation = sorted(range(len(v)), key=lambda i: order[i])
        rank[permutation] = np.arange(len(v))
    keys = quantise(v[idx], rtol)
    best: dict = {}
    for position, i in enumerate(idx):
        key = tuple(keys[position])
        if key not in best or rank[i] < rank[best[key]]:
            best[key] = i
    return np.array(sorted(best.values()), dtype=np.intp)


def quantise(values, rtol: float = 1e-12) -> np.ndarray:
    """Round each value to a multiple of ``rtol`` times its binary magnitude.

    Two figures that agree to about ``rtol`` (computed along different paths, say)
    become equal; infinite values are kept.

    Examples
    --------
    >>> bool(quantise([0.1 + 0.2])[0] == quantise([0.3])[0])
    True
    """
    v = np.asarray(values, dtype=float)
    finite = np.isfinite(v)
    scale = np.where(finite & (v != 0), np.abs(v), 1.0)
    quantum = np.exp2(np.floor(np.log2(scale))) * rtol
    return np.where(finite, np.round(np.where(finite, v, 0.0) / quantum) * quantum, v)


def evenly_spread(count: int, room: int) -> np.ndarray:
    """Indices of ``room`` items spread evenly over ``count`` in order, both ends kept
    (all of them when they fit); sorted, without repeats.

    Examples
    --------
    >>> evenly_spread(10, 4).tolist(), evenly_spread(3, 5).tolist()
    ([0, 3, 6, 9], [0, 1, 2])
    """
    if count <= room:
        return np.arange(count)
    return np.unique(np.linspace(0, count - 1, room).round().astype(int))
