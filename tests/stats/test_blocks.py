"""Hold-out blocks (strikeline.stats.blocks): which lattice points lie in the picks' triangulation.

:func:`inside_triangulation` stands in for ``scipy.spatial.Delaunay.find_simplex(q) >= 0`` in
:func:`typical_gap_m`; it is checked against scipy's own answer on the layouts the tool meets
(picks along mapped lines, nearly collinear runs, a regular grid, a circle), with points inside,
outside, on the picks themselves and on lattices like the one ``typical_gap_m`` uses.
"""
from __future__ import annotations

import numpy as np
import pytest
from scipy.spatial import Delaunay

from strikeline.stats.blocks import inside_triangulation, typical_gap_m


def _layouts():
    rng = np.random.default_rng(7)
    t = np.linspace(0.0, 1.0, 400)
    along_lines = np.concatenate([np.c_[400_000 + 3000 * t, 5_300_000 + 900 * t + 300 * k
                                        + 20 * np.sin(7 * t + k)] for k in range(4)])
    nearly_collinear = np.concatenate([np.c_[1000 * t, 300 * t + 100 * k + rng.normal(0, 1e-9, t.size)]
                                       for k in range(3)] + [rng.uniform(0, 1000, (50, 2))])
    grid = np.array([[i, j] for i in range(30) for j in range(30)], dtype=float)
    ring = 1e3 * np.c_[np.cos(np.linspace(0, 6.28, 500)), np.sin(np.linspace(0, 6.28, 500))] + 5e6
    return {"picks along curved lines": along_lines, "nearly collinear runs": nearly_collinear,
            "regular grid": grid, "circle": ring, "scattered": rng.uniform(0, 1000, (3000, 2))}


def _lattice(p, n=10_000):
    lo, hi = p.min(axis=0), p.max(axis=0)
    side = float(np.sqrt(np.prod(hi - lo) / n))
    gx, gy = np.arange(lo[0] + side / 2, hi[0], side), np.arange(lo[1] + side / 2, hi[1], side)
    return np.stack(np.meshgrid(gx, gy), axis=-1).reshape(-1, 2)


@pytest.mark.parametrize("name", list(_layouts()))
def test_inside_triangulation_is_find_simplex(name):
    p = np.unique(_layouts()[name], axis=0)
    rng = np.random.default_rng(3)
    lo, hi = p.min(axis=0), p.max(axis=0)
    q = np.r_[_lattice(p), rng.uniform(lo - 0.2 * (hi - lo), hi + 0.2 * (hi - lo), (5000, 2)), p]
    # Source: scipy.spatial.Delaunay.find_simplex (scipy's own point location, -1 outside)
    expected = Delaunay(p).find_simplex(q) >= 0
    got = inside_triangulation(Delaunay(p), q)
    assert got.dtype == bool and got.shape == expected.shape
    assert np.array_equal(got, expected), f"{int((got != expected).sum())} of {len(q)} points differ"
    assert 0 < expected.sum() < len(q)  # both answers occur


def test_typical_gap_is_the_median_distance_over_the_lattice_inside():
    p = np.unique(_layouts()["picks along curved lines"], axis=0)
    q = _lattice(p)
    # Source: scipy - find_simplex for inside, cKDTree.query for the nearest pick
    from scipy.spatial import cKDTree
    inside = q[Delaunay(p).find_simplex(q) >= 0]
    expected = float(np.median(cKDTree(p).query(inside)[0]))
    assert typical_gap_m(p) == expected


def test_inside_triangulation_falls_back_to_find_simplex_when_geos_sees_a_conflict(monkeypatch):
    # The demo sheet's picks made GEOS's coverage union report a "side location conflict" among
    # nearly flat triangles; the answer must then be scipy's own, not an internal failure.
    import shapely

    def conflict(*args, **kwargs):
        raise shapely.errors.GEOSException("TopologyException: side location conflict")

    monkeypatch.setattr(shapely, "coverage_union_all", conflict)
    p = np.unique(_layouts()["picks along curved lines"], axis=0)
    q = _lattice(p)
    # Source: scipy.spatial.Delaunay.find_simplex (scipy's own point location, -1 outside)
    expected = Delaunay(p).find_simplex(q) >= 0
    assert np.array_equal(inside_triangulation(Delaunay(p), q), expected)
    assert 0 < expected.sum() < len(q)
