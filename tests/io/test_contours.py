"""Contour lines of grids through GDAL's contour generator (strikeline.io.contours); the
checks of levels and the trimming without GDAL are tested in tests/maps/test_map_contours.py.

The reference for positions is the analytic surface the grid samples (a plane or a ramp,
where linear interpolation between cell centres is exact); GDAL's contour generator is the
reference implementation of the line tracing itself.
"""
from __future__ import annotations

import numpy as np
import pytest
import shapely
from osgeo import gdal, ogr

from strikeline.errors import InputError, RasterReadError
from strikeline.geometry.grid import Grid
from strikeline.io.contours import contour_lines

#: Vertices of a contour of a plane lie on the plane within 0.01 m (the project's tolerance).
ON_PLANE_TOL_M = 0.01

# Source: the analytic plane z = Z0 + GX*(x - X0) + GY*(y - Y0), sampled at cell centres
# (values of our own choosing; the generator, GDAL 3.6.2 alg/contour.cpp, is the reference).
Z0_M = 420.0
GX = -0.085          # dz/dx (m/m)
GY = 0.031           # dz/dy (m/m)
X0_M, Y0_M = 352_000.0, 5_710_000.0


def _grid(rows=40, cols=50, dx=25.0, dy=20.0):
    return Grid((X0_M, dx, 0.0, Y0_M + rows * dy, 0.0, -dy), (rows, cols))


def _plane_z(x, y):
    return Z0_M + GX * (np.asarray(x) - X0_M) + GY * (np.asarray(y) - Y0_M)


def _plane_grid(grid):
    x, y = grid.mesh()
    return _plane_z(x, y)


def _vertex_misfit(geoms, elev):
    worst = 0.0
    for g, e in zip(geoms, elev):
        xy = shapely.get_coordinates(g)
        worst = max(worst, float(np.abs(_plane_z(xy[:, 0], xy[:, 1]) - e).max()))
    return worst


def _centre_box(grid):
    xs, ys = grid.cell_centres()
    return shapely.box(xs[0], ys[-1], xs[-1], ys[0])


# --- planes ------------------------------------------------------------------------------

def test_every_vertex_lies_on_the_plane():
    g = _grid()
    geoms, elev = contour_lines(_plane_grid(g), g, interval_m=10.0)
    assert len(geoms) == len(elev) > 5
    assert all(isinstance(x, shapely.LineString) for x in geoms)
    assert elev.dtype == np.float64
    assert _vertex_misfit(geoms, elev) < ON_PLANE_TOL_M


def test_levels_are_multiples_of_the_interval():
    g = _grid()
    z = _plane_grid(g)
    interval = 7.5
    geoms, elev = contour_lines(z, g, interval_m=interval)
    # hand-worked: every multiple of the interval strictly inside the sampled range
    expected = np.arange(np.ceil(z.min() / interval), np.floor(z.max() / interval) + 1) * interval
    np.testing.assert_allclose(np.unique(elev), expected)
    np.testing.assert_allclose(elev / interval, np.rint(elev / interval), atol=1e-9)


def test_base_offsets_the_levels():
    g = _grid()
    z = _plane_grid(g)
    geoms, elev = contour_lines(z, g, interval_m=10.0, base_m=3.0)
    expected = 3.0 + 10.0 * np.arange(np.ceil((z.min() - 3.0) / 10.0),
                                      np.floor((z.max() - 3.0) / 10.0) + 1)  # hand-worked
    np.testing.assert_allclose(np.unique(elev), expected)
    assert _vertex_misfit(geoms, elev) < ON_PLANE_TOL_M


def test_fixed_levels_override_the_interval():
    g = _grid()
    geoms, elev = contour_lines(_plane_grid(g), g, interval_m=10.0, levels=[401.25, 395.0])
    assert sorted(set(elev.tolist())) == [395.0, 401.25]
    assert _vertex_misfit(geoms, elev) < ON_PLANE_TOL_M


def test_gdal_fringe_is_trimmed_to_the_valid_centres():
    # Source: GDAL 3.6.2 alg/contour.cpp: lines are extended over the half-cell border with
    # extrapolated values; with trim_fringe=False they come back unchanged.
    g = _grid()
    z = _plane_grid(g)
    raw, raw_elev = contour_lines(z, g, interval_m=10.0, trim_fringe=False)
    cut, cut_elev = contour_lines(z, g, interval_m=10.0)
    xmin, ymin, xmax, ymax = g.bounds
    raw_xy = shapely.get_coordinates(raw)
    assert np.isclose(raw_xy[:, 0], xmin).any() or np.isclose(raw_xy[:, 1], ymin).any()
    assert _vertex_misfit(raw, raw_elev) > ON_PLANE_TOL_M      # the stubs are off the plane
    inner = _centre_box(g).buffer(1e-6)
    assert all(inner.covers(x) for x in cut)
    # trimming only removes: every trimmed line lies on its raw line
    raw_by_level = {e: shapely.union_all(raw[raw_elev == e]) for e in np.unique(raw_elev)}
    for x, e in zip(cut, cut_elev):
        assert raw_by_level[e].buffer(1e-6).covers(x)


# --- nodata ------------------------------------------------------------------------------

def test_no_contour_crosses_a_nan_region():
    g = _grid(rows=40, cols=50)
    z = _plane_grid(g)
    r0, r1, c0, c1 = 12, 22, 18, 30
    z[r0:r1, c0:c1] = np.nan
    xs, ys = g.cell_centres()
    # Interpolation there would involve a NaN cell: strictly between the valid centres
    # around the hole.
    no_data = shapely.box(xs[c0 - 1], ys[r1], xs[c1], ys[r0 - 1]).buffer(-1e-6)
    for trim in (True, False):
        geoms, elev = contour_lines(z, g, interval_m=5.0, trim_fringe=trim)
        assert len(geoms) > 0
        if trim:
            assert not any(no_data.intersects(x) for x in geoms)
            assert _vertex_misfit(geoms, elev) < ON_PLANE_TOL_M
        else:
            # GDAL itself never enters the NaN cells' footprints
            cells = shapely.box(xs[c0] - 12.5, ys[r1 - 1] - 10.0, xs[c1 - 1] + 12.5,
                                ys[r0] + 10.0).buffer(-1e-6)
            assert not any(cells.intersects(x) for x in geoms)


def test_a_ring_cut_by_a_hole_comes_back_as_one_line():
    # A cone z = distance from its axis: the 300 m contour is a closed ring (hand-worked),
    # a nodata hole on it turns it into a single open line, not two.
    g = Grid((0.0, 10.0, 0.0, 1000.0, 0.0, -10.0), (100, 100))
    x, y = g.mesh()
    z = np.hypot(x - 500.0, y - 500.0)
    geoms, elev = contour_lines(z, g, levels=[300.0])
    assert len(geoms) == 1 and geoms[0].is_closed
    z[45:55, 75:85] = np.nan          # straddles (800, 500), on the ring
    geoms, elev = contour_lines(z, g, levels=[300.0])
    assert len(geoms) == 1 and not geoms[0].is_closed
    xy = shapely.get_coordinates(geoms[0])
    # linear interpolation of a cone between centres 10 m apart: within a few decimetres
    assert np.abs(np.hypot(xy[:, 0] - 500.0, xy[:, 1] - 500.0) - 300.0).max() < 0.5


def test_a_ring_through_the_fringe_of_one_nan_cell_is_opened_once():
    # One NaN cell 9.9 m off the 300 m ring of the cone: GDAL 3.6.2 keeps the ring closed,
    # running it through the cell's extrapolated fringe; the trimmed ring is one open line.
    g = Grid((0.0, 10.0, 0.0, 1000.0, 0.0, -10.0), (100, 100))
    x, y = g.mesh()
    z = np.hypot(x - 500.0, y - 500.0)
    z[40, 79] = np.nan                # centre (795, 595), 309.9 m from the axis
    raw, _ = contour_lines(z, g, levels=[300.0], trim_fringe=False)
    assert len(raw) == 1 and raw[0].is_closed
    geoms, _ = contour_lines(z, g, levels=[300.0])
    assert len(geoms) == 1 and not geoms[0].is_closed
    assert raw[0].length - 25.0 < geoms[0].length < raw[0].length


def test_all_nan_and_out_of_range_give_nothing():
    g = _grid(rows=5, cols=6)
    geoms, elev = contour_lines(np.full(g.shape, np.nan), g, interval_m=10.0)
    assert geoms.shape == (0,) and elev.shape == (0,)
    geoms, elev = contour_lines(_plane_grid(g), g, levels=[-5000.0])
    assert geoms.shape == (0,) and elev.shape == (0,)


# --- zero line of a depth grid -----------------------------------------------------------

def test_zero_line_of_a_ramp_lies_where_expected():
    # depth = 300 - 0.25 * (x - X0): zero at x = X0 + 1200 (hand-worked), a straight N-S line
    g = _grid(rows=30, cols=80, dx=25.0, dy=25.0)
    x, y = g.mesh()
    depth = 300.0 - 0.25 * (x - X0_M)
    zero_x = X0_M + 300.0 / 0.25
    geoms, elev = contour_lines(depth.astype(np.float32), g, levels=[0.0])
    assert len(geoms) == 1 and elev.tolist() == [0.0]
    xy = shapely.get_coordinates(geoms[0])
    assert np.abs(xy[:, 0] - zero_x).max() < ON_PLANE_TOL_M / 0.25
    xs, ys = g.cell_centres()
    np.testing.assert_allclose(sorted([xy[0, 1], xy[-1, 1]]), [ys[-1], ys[0]], atol=1e-6)


def test_zero_line_of_an_oblique_ramp():
    g = _grid(rows=35, cols=45)
    x, y = g.mesh()
    depth = _plane_grid(g) - 400.0
    geoms, elev = contour_lines(depth, g, levels=[0.0])
    assert len(geoms) == 1
    xy = shapely.get_coordinates(geoms[0])
    assert np.abs(_plane_z(xy[:, 0], xy[:, 1]) - 400.0).max() < ON_PLANE_TOL_M


# --- errors and GDAL state ---------------------------------------------------------------

def test_bad_levels_are_refused_by_the_level_checks():
    # the checks themselves: tests/maps/test_map_contours.py
    g = _grid(rows=4, cols=4)
    with pytest.raises(InputError, match="needs interval_m .* or levels"):
        contour_lines(_plane_grid(g), g)
    with pytest.raises(InputError, match="interval_m must be positive, got -5.0"):
        contour_lines(_plane_grid(g), g, interval_m=-5)


@pytest.mark.parametrize("array,match", [
    (np.zeros((4, 5)), r"shape \(4, 5\) but its grid has shape \(4, 4\)"),
    (np.zeros(16), "2-D array"),
    (np.zeros((4, 4), dtype=np.int32), "float array with NaN"),
])
def test_bad_arrays_are_refused(array, match):
    with pytest.raises(InputError, match=match):
        contour_lines(array, _grid(rows=4, cols=4), interval_m=1.0)


def test_gdal_failure_is_wrapped_with_gdals_message(monkeypatch):
    def failing(*args, **kwargs):
        raise RuntimeError("simulated GDAL failure text")

    monkeypatch.setattr(gdal, "ContourGenerateEx", failing)
    g = _grid(rows=4, cols=4)
    with pytest.raises(RasterReadError, match="simulated GDAL failure text"):
        contour_lines(_plane_grid(g), g, interval_m=1.0)


def test_gdal_exception_mode_is_left_as_found():
    before = (gdal.GetUseExceptions(), ogr.GetUseExceptions())
    g = _grid(rows=6, cols=6)
    contour_lines(_plane_grid(g), g, interval_m=1.0)
    assert (gdal.GetUseExceptions(), ogr.GetUseExceptions()) == before
