"""Pareto masks and hypervolumes against independent implementations.

References used here:
- the definition of Pareto dominance (at least as good in every objective, strictly
  better in one): common practice, no source;
- optuna's own non-domination filter ``optuna.study._multi_objective._is_pareto_front``
  and hypervolume ``optuna._hypervolume.compute_hypervolume`` (WFG algorithm), both
  written independently of stillroom (they minimise, so values are negated there).
"""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays
from optuna._hypervolume import compute_hypervolume
from optuna.study._multi_objective import _is_pareto_front

from optimise.pareto import hypervolume_2d, pareto_mask, unique_front


def brute_force_mask(values, maximise):
    """Pareto dominance straight from its definition, O(N^2)."""
    g = np.asarray(values, float) * np.where(maximise, 1.0, -1.0)
    n = len(g)
    out = np.ones(n, dtype=bool)
    for i in range(n):
        for j in range(n):
            if (g[j] >= g[i]).all() and (g[j] > g[i]).any():
                out[i] = False
                break
    return out


# small integer grids make ties and duplicates frequent
points = st.integers(1, 40).flatmap(
    lambda n: st.integers(2, 4).flatmap(
        lambda k: st.tuples(
            arrays(np.int64, (n, k), elements=st.integers(0, 6)),
            st.lists(st.booleans(), min_size=k, max_size=k),
        )
    )
)


@settings(max_examples=150, deadline=None)
@given(points)
def test_mask_matches_the_definition(case):
    values, maximise = case
    np.testing.assert_array_equal(pareto_mask(values, maximise), brute_force_mask(values, maximise))


@settings(max_examples=100, deadline=None)
@given(points)
def test_mask_matches_optuna(case):
    values, maximise = case
    loss = values * np.where(maximise, -1.0, 1.0)  # optuna minimises
    np.testing.assert_array_equal(
        pareto_mask(values, maximise), _is_pareto_front(loss, assume_unique_lexsorted=False)
    )


def test_mask_keeps_ties_and_handles_edges():
    # equal points do not dominate each other: definition (common practice, no source)
    assert pareto_mask([[1, 1], [1, 1]], (True, True)).tolist() == [True, True]
    assert pareto_mask(np.zeros((0, 2)), (True, True)).tolist() == []
    assert pareto_mask([[3], [5], [5]], (True,)).tolist() == [False, True, True]
    # infinite costs are allowed (a recipe that never succeeds)
    assert pareto_mask([[0.9, np.inf], [0.8, 2.0]], (True, False)).tolist() == [True, True]
    with pytest.raises(ValueError, match="objectives"):
        pareto_mask([[1, 2]], (True,))
    with pytest.raises(ValueError, match="NaN"):
        pareto_mask([[np.nan, 2]], (True, True))


@settings(max_examples=100, deadline=None)
@given(arrays(np.float64, st.tuples(st.integers(1, 30), st.just(2)), elements=st.floats(0.01, 1.0)))
def test_hypervolume_matches_optuna(values):
    reference = (0.0, 0.0)
    ours = hypervolume_2d(values, reference, (True, True))
    theirs = compute_hypervolume(-values, np.array([0.0, 0.0]))
    assert ours == pytest.approx(theirs, rel=1e-12, abs=1e-15)


def test_hypervolume_by_hand():
    # staircase of rectangles computed by hand (common practice, no source)
    pts = [[0.9, 0.1], [0.8, 0.3], [0.5, 0.6]]
    expected = 0.9 * 0.1 + 0.8 * 0.2 + 0.5 * 0.3
    assert hypervolume_2d(pts, (0, 0)) == pytest.approx(expected, rel=1e-15)
    # minimising the second objective: mirror it
    mirrored = [[0.9, -0.1], [0.8, -0.3], [0.5, -0.6]]
    assert hypervolume_2d(mirrored, (0, 0), (True, False)) == pytest.approx(expected)
    # points worse than the reference add nothing
    assert hypervolume_2d([[0.5, -1.0]], (0, 0)) == 0.0


def test_unique_front_keeps_one_point_per_value_and_prefers_the_order():
    # [0] and [2] do not dominate each other and agree to 1e-14: one point
    values = [[0.9 * (1 + 1e-14), 0.1], [0.8, 0.5], [0.9, 0.1 * (1 + 1e-14)], [0.7, 0.4]]
    picked = unique_front(values, (True, True), order=[5, 0, 1, 0])
    assert picked.tolist() == [1, 2]  # [2] comes before [0] in the order
    assert unique_front(values, (True, True)).tolist() == [0, 1]
