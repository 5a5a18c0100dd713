"""Spatial thinning of picks (strikeline.picks.thinning).

Hand-made cells with exact centroids first, then scipy's binned statistics as a general-purpose
reference, the plane-preserving property of centroids, groups, and 100,000 clustered picks.
"""
from __future__ import annotations

import numpy as np
import pytest
from scipy.stats import binned_statistic_2d

from strikeline.errors import InputError
from strikeline.picks.thinning import choose_cell_size, thin_picks

#: Source: analytic -- the mean of (0,0,10), (4,2,14) and (2,4,18) is (2, 2, 14).
CELL_A_CENTROID = (2.0, 2.0, 14.0)
#: Source: analytic -- population std of z = 10, 14, 18 is sqrt(32/3).
CELL_A_Z_STD = np.sqrt(32.0 / 3.0)
#: Source: analytic -- a single pick is its own centroid.
CELL_B_CENTROID = (15.0, 5.0, 30.0)


def _clustered_lines(n, rng, sheet=10_000.0, n_lines=100):
    per = n // n_lines
    out = []
    for _ in range(n_lines):
        x0, y0 = rng.uniform(0, sheet, 2)
        h = rng.uniform(0, 2 * np.pi) + np.cumsum(rng.normal(0, 0.02, per))
        out.append(np.column_stack([x0 + np.cumsum(5 * np.cos(h)), y0 + np.cumsum(5 * np.sin(h))]))
    xy = np.vstack(out)
    return np.column_stack([xy, 100 + 0.01 * xy[:, 0]])


def test_hand_made_cells_have_exact_centroids():
    picks = [[0, 0, 10], [4, 2, 14], [2, 4, 18], [15, 5, 30]]  # cells of 10 m: (0,0) and (1,0)
    t = thin_picks(picks, cell_m=10.0)
    assert t.cell_m == 10.0 and len(t) == 2
    np.testing.assert_allclose(t.xyz[0], CELL_A_CENTROID, atol=1e-12)
    np.testing.assert_allclose(t.xyz[1], CELL_B_CENTROID, atol=1e-12)
    np.testing.assert_allclose(t.z_std_m, [CELL_A_Z_STD, 0.0], atol=1e-12)
    assert t.counts.tolist() == [3, 1]
    assert t.index.tolist() == [0, 0, 0, 1]


def test_centroids_match_scipy_binned_statistic():
    rng = np.random.default_rng(3)
    p = np.column_stack([rng.uniform(0, 1000, 5000), rng.uniform(0, 700, 5000),
                         rng.normal(300, 20, 5000)])
    cell = 37.0
    t = thin_picks(p, cell_m=cell)
    # Source: scipy.stats.binned_statistic_2d (general-purpose reference), same lattice.
    ex = np.arange(p[:, 0].min(), p[:, 0].max() + cell, cell)
    ey = np.arange(p[:, 1].min(), p[:, 1].max() + cell, cell)
    ref = [binned_statistic_2d(p[:, 0], p[:, 1], p[:, k], "mean", bins=[ex, ey]).statistic
           for k in range(3)]
    ref = np.column_stack([r.ravel() for r in ref])
    ref = ref[np.all(np.isfinite(ref), axis=1)]
    order = np.lexsort(ref.T[::-1])
    mine = t.xyz[np.lexsort(t.xyz.T[::-1])]
    assert len(mine) == len(ref)
    np.testing.assert_allclose(mine, ref[order], rtol=0, atol=1e-9)


def test_centroids_of_planar_picks_lie_on_the_plane():
    # Source: analytic -- a mean of points of a plane is a point of that plane.
    rng = np.random.default_rng(4)
    xy = rng.uniform(0, 2000, (20000, 2))
    plane = lambda x, y: 812.5 - 0.31 * x + 0.07 * y
    t = thin_picks(np.column_stack([xy, plane(xy[:, 0], xy[:, 1])]), max_points=500)
    assert len(t) <= 500
    np.testing.assert_allclose(t.xyz[:, 2], plane(t.xyz[:, 0], t.xyz[:, 1]), atol=1e-9)


def test_median_z_would_not_lie_on_a_sloping_plane():
    # The documented reason for the centroid: the median of z with the mean position misses
    # a sloping plane when picks are unevenly spread in a cell (here 3 picks, one far east).
    p = np.array([[0.0, 0.0], [1.0, 0.0], [9.0, 0.0]])
    z = 2.0 * p[:, 0]  # Source: analytic -- plane z = 2x
    mean_x, median_z = p[:, 0].mean(), np.median(z)
    assert abs(median_z - 2.0 * mean_x) > 1.0
    t = thin_picks(np.column_stack([p, z]), cell_m=10.0)
    assert t.xyz[0, 2] == pytest.approx(2.0 * t.xyz[0, 0], abs=1e-12)


def test_groups_are_never_merged():
    picks = [[1, 1, 5], [2, 2, 7], [3, 3, 9]]
    t = thin_picks(picks, cell_m=10.0, groups=["a", "b", "a"])
    assert len(t) == 2
    by_group = {g: xyz for g, xyz in zip(t.groups, t.xyz)}
    np.testing.assert_allclose(by_group["a"], [2, 2, 7])  # Source: analytic (mean of 2 picks)
    np.testing.assert_allclose(by_group["b"], [2, 2, 7])
    assert t.groups[t.index].tolist() == ["a", "b", "a"]


def test_merging_groups_labels_each_cell_with_its_majority_group():
    picks = [[1, 1, 5], [2, 2, 7], [3, 3, 9], [15, 1, 4], [16, 1, 6]]
    t = thin_picks(picks, cell_m=10.0, groups=["b", "a", "b", "a", "c"], by_group=False)
    assert len(t) == 2
    np.testing.assert_allclose(t.xyz[0], [2, 2, 7])  # Source: analytic (mean of 3 picks)
    # Source: analytic -- majority: cell 1 has b, a, b -> b; cell 2 a, c tie -> smallest, a
    assert t.groups.tolist() == ["b", "a"]


def test_few_picks_are_not_thinned_and_non_finite_rows_are_dropped():
    picks = [[0, 0, 1], [np.nan, 0, 1], [5, 5, 2]]
    t = thin_picks(picks, max_points=10)
    assert t.cell_m is None and len(t) == 2
    assert t.index.tolist() == [0, -1, 1]


def test_100k_clustered_picks_thin_to_at_most_max_points():
    # (its speed is measured by bench/bench_thinning.py, not asserted here)
    rng = np.random.default_rng(5)
    p = _clustered_lines(100_000, rng)
    t = thin_picks(p, max_points=2000)
    assert 1000 <= len(t) <= 2000  # near the target: the bisection stops at the boundary
    assert t.counts.sum() == len(p)
    # every pick lies in the cell of its representative
    cell = t.cell_m
    ij_pick = np.floor((p[:, :2] - p[:, :2].min(axis=0)) / cell)
    ij_rep = np.floor((t.xyz[t.index, :2] - p[:, :2].min(axis=0)) / cell)
    assert np.all(ij_pick == ij_rep)


def test_choose_cell_size_with_groups_respects_the_group_count():
    xy = np.array([[0.0, 0.0], [1.0, 1.0], [2.0, 2.0]])
    with pytest.raises(InputError, match="below the number of groups"):
        choose_cell_size(xy, max_points=1, groups=[1, 2, 3])
    assert choose_cell_size(xy, max_points=1) > 0


@pytest.mark.parametrize("kwargs,match", [
    ({"xyz": np.zeros((3, 2))}, r"\(n, 3\)"),
    ({"xyz": np.zeros((3, 3)), "cell_m": 0.0}, "cell_m must be a positive"),
    ({"xyz": np.zeros((3, 3)), "max_points": 0}, "max_points must be at least 1"),
    ({"xyz": np.full((2, 3), np.nan)}, "none of the 2 picks"),
    ({"xyz": np.zeros((3, 3)), "groups": [1, 2]}, "one label per pick"),
])
def test_bad_inputs_are_refused_with_a_message(kwargs, match):
    with pytest.raises(InputError, match=match):
        thin_picks(**kwargs)
