"""Contour levels and the trimming of contour lines to the valid cell centres
(strikeline.maps.contours), without GDAL.

The grids here are 10 m cells with values at cell centres (strikeline.geometry.grid); a point is
supported when it interpolates linearly between valid centres, as GDAL 3.6's marching squares
(alg/contour.cpp) interpolates them. Expected lines are worked by hand from the centres, and
cross-checked against shapely's clipping where the data end at a rectangle.
"""
from __future__ import annotations

import numpy as np
import pytest
import shapely

from strikeline.errors import InputError
from strikeline.geometry.grid import Grid
from strikeline.maps import check_contour_levels, supported_vertices, trim_contour_fringe


def _grid(n=5):
    # n x n cells of 10 m from (0, 0): centres at 5, 15, ..., 10 n - 5 in x and y
    return Grid((0.0, 10.0, 0.0, 10.0 * n, 0.0, -10.0), (n, n))


def _cell(grid, x, y):
    col, row = grid.xy_to_colrow(np.array([x]), np.array([y]))
    return int(row[0]), int(col[0])


def _lines(*coords):
    return np.array([shapely.LineString(c) for c in coords], dtype=object)


# --- levels ------------------------------------------------------------------------------

def test_interval_and_base_are_returned_as_floats():
    assert check_contour_levels(interval_m=25, base_m=5) == (None, 25.0, 5.0)


def test_fixed_levels_are_sorted_unique_and_take_precedence():
    levels, interval, base = check_contour_levels(interval_m=-1.0, levels=[30.0, -10.0, 30.0],
                                                  base_m=float("inf"))
    assert levels.tolist() == [-10.0, 30.0] and interval is None and base is None


@pytest.mark.parametrize("kwargs,match", [
    ({}, "needs interval_m .* or levels"),
    ({"interval_m": 0.0}, "interval_m must be positive, got 0.0"),
    ({"interval_m": -5}, "interval_m must be positive, got -5.0"),
    ({"interval_m": float("nan")}, "interval_m must be finite"),
    ({"interval_m": "50"}, "interval_m must be a number"),
    ({"interval_m": True}, "interval_m must be a number"),
    ({"interval_m": 10.0, "base_m": float("inf")}, "base_m must be finite"),
    ({"levels": []}, "levels must be a non-empty list"),
    ({"levels": "0"}, "levels must be a non-empty list"),
    ({"levels": [0.0, float("nan")]}, "levels must be a non-empty list of finite"),
])
def test_bad_levels_are_refused(kwargs, match):
    with pytest.raises(InputError, match=match):
        check_contour_levels(**kwargs)


# --- supported vertices --------------------------------------------------------------------

@pytest.mark.parametrize("xy,expected", [
    ((15.0, 35.0), True),          # on a centre
    ((20.0, 35.0), True),          # between two centres of one row
    ((10.0, 40.0), True),          # inside a square of four valid centres
    ((25.0, 25.0), False),         # on the invalid centre
    ((20.0, 25.0), False),         # between a valid and the invalid centre
    ((30.0, 30.0), False),         # in a square with the invalid centre as a corner
    ((2.0, 25.0), False),          # in the half-cell fringe west of the first centres
    ((45.0, 45.0), True),          # on the outermost centre
    ((45.0 + 1e-8, 45.0), True),   # round-off beside it counts as on it
    ((46.0, 45.0), False),         # beyond it
])
def test_supported_vertices_need_every_centre_they_interpolate(xy, expected):
    # Source: hand-worked from the cell-centre positions (valid everywhere but the centre
    # cell (25, 25)); interpolation uses floor/ceil of the fractional column and row.
    g = _grid()
    valid = np.ones(g.shape, dtype=bool)
    valid[_cell(g, 25.0, 25.0)] = False
    assert supported_vertices(np.array([xy]), valid, g).tolist() == [expected]


# --- trimming ------------------------------------------------------------------------------

def test_lines_inside_the_valid_centres_come_back_unchanged():
    g = _grid()
    geoms = _lines([(5.0, 5.0), (25.0, 25.0), (45.0, 10.0)])
    elev = np.array([12.5])
    out, out_elev = trim_contour_fringe(geoms, elev, np.ones(g.shape, dtype=bool), g)
    assert out is geoms and out_elev is elev


def test_the_half_cell_fringe_is_cut_as_shapely_clips_it():
    # A diagonal with vertices on the centre lines, from the grid's corner to beyond the last
    # centre: trimming keeps (5, 5)-(45, 45), the clip by the box of centres (Source: shapely
    # 2 intersection as reference).
    g = _grid()
    xs = np.arange(0.0, 50.1, 5.0)
    geoms = _lines(np.column_stack([xs, xs]))
    out, elev = trim_contour_fringe(geoms, np.array([3.0]), np.ones(g.shape, dtype=bool), g)
    assert len(out) == 1 and elev.tolist() == [3.0]
    clipped = shapely.intersection(geoms[0], shapely.box(5.0, 5.0, 45.0, 45.0))
    assert shapely.equals(out[0], clipped)
    assert shapely.get_coordinates(out[0])[[0, -1]].tolist() == [[5.0, 5.0], [45.0, 45.0]]


def test_a_line_through_nodata_splits_and_both_pieces_keep_its_level():
    # Along the centre row y = 25 with the centre (25, 25) invalid: the vertices at x = 20, 25
    # and 30 need that centre (hand-worked), so 5-15 and 35-45 remain.
    g = _grid()
    valid = np.ones(g.shape, dtype=bool)
    valid[_cell(g, 25.0, 25.0)] = False
    xs = np.arange(5.0, 45.1, 5.0)
    geoms = _lines(np.column_stack([xs, np.full_like(xs, 25.0)]),
                   [(5.0, 5.0), (45.0, 5.0)])
    out, elev = trim_contour_fringe(geoms, np.array([100.0, 90.0]), valid, g)
    pieces = sorted((shapely.get_coordinates(x)[:, 0].tolist(), e) for x, e in zip(out, elev))
    assert pieces == [([5.0, 10.0, 15.0], 100.0), ([5.0, 45.0], 90.0), ([35.0, 40.0, 45.0], 100.0)]
    assert elev.dtype == np.float64


def test_a_ring_cut_once_comes_back_as_one_open_line():
    # A square ring through the centres 15 and 35, starting at (15, 15); the invalid centre
    # (25, 35) removes its vertices at x = 20, 25, 30 on the north side (hand-worked). Split
    # without rotating, it would come back as two lines; rotated, it is one of 60 m.
    g = _grid()
    valid = np.ones(g.shape, dtype=bool)
    valid[_cell(g, 25.0, 35.0)] = False
    ring = [(15.0, 15.0), (15.0, 25.0), (15.0, 35.0), (20.0, 35.0), (25.0, 35.0), (30.0, 35.0),
            (35.0, 35.0), (35.0, 25.0), (35.0, 15.0), (25.0, 15.0), (15.0, 15.0)]
    out, elev = trim_contour_fringe(_lines(ring), np.array([7.0]), valid, g)
    assert len(out) == 1 and not out[0].is_closed and elev.tolist() == [7.0]
    assert out[0].length == pytest.approx(60.0)
    xy = shapely.get_coordinates(out[0])
    assert {tuple(xy[0]), tuple(xy[-1])} == {(35.0, 35.0), (15.0, 35.0)}


def test_lines_without_two_supported_vertices_are_dropped():
    g = _grid()
    valid = np.zeros(g.shape, dtype=bool)
    valid[_cell(g, 25.0, 25.0)] = True        # one valid centre: no two consecutive vertices
    out, elev = trim_contour_fringe(_lines([(15.0, 25.0), (25.0, 25.0), (35.0, 25.0)]),
                                    np.array([1.0]), valid, g)
    assert out.shape == (0,) and elev.shape == (0,) and elev.dtype == np.float64


def test_no_lines_give_no_lines():
    g = _grid()
    out, elev = trim_contour_fringe(np.empty(0, dtype=object), np.empty(0), np.ones(g.shape, bool), g)
    assert out.shape == (0,) and elev.shape == (0,)
