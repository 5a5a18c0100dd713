"""Steps on grids made earlier (``strikeline.pipeline.rasters``), without QGIS."""
from __future__ import annotations

import math

import numpy as np
import pytest
import shapely

from strikeline.errors import InputError
from strikeline.geometry.grid import Grid
from strikeline.pipeline.rasters import (
    grid_over,
    points_bounds,
    raster_flag,
    require_same_grid,
    structure_contours_on_ground,
)

CELL_M = 10.0
#: A 1 km square of 10 m cells (origin at the top-left corner, y north).
GRID = Grid((0.0, CELL_M, 0.0, 1000.0, 0.0, -CELL_M), (100, 100))
DIP_DEG = 20.0  # the surface dips east
GROUND_SLOPE = 0.1  # the ground rises 0.1 m per metre northward


def surface_and_ground():
    X, Y = GRID.mesh()
    surface = 600.0 - math.tan(math.radians(DIP_DEG)) * X
    ground = 400.0 + GROUND_SLOPE * Y
    return surface, ground


def test_contours_split_where_the_surface_meets_the_ground():
    surface, ground = surface_and_ground()
    geoms, elev, flags = structure_contours_on_ground(surface, GRID, interval_m=50.0, dem=ground)
    assert set(flags) == {"below_ground"}
    assert len(geoms) == len(elev) == len(flags["below_ground"])
    # The structure contour at level L runs north-south at x = (600 - L) / tan(dip); the ground
    # reaches L at y = (L - 400) / 0.1, so the surface lies below the ground north of that point.
    # Source: common practice - the surface crops out where its elevation equals the ground's.
    for level in np.unique(elev):
        parts = [(g, b) for g, e, b in zip(geoms, elev, flags["below_ground"]) if e == level]
        y_cross = (level - 400.0) / GROUND_SLOPE
        for g, below in parts:
            ys = shapely.get_coordinates(g)[:, 1]
            mid = 0.5 * (ys.min() + ys.max())
            assert below == (mid > y_cross)
        if 5.0 < y_cross < 995.0:  # the crossing lies inside the grid: two parts meeting there
            assert sorted(b for _, b in parts) == [False, True]
            ends = [shapely.get_coordinates(g)[:, 1] for g, _ in parts]
            joint = min(e.max() for e in ends)
            assert joint == pytest.approx(y_cross, abs=CELL_M)
    # Lines and parts join without gaps: every level's parts cover the line's full length.
    whole, whole_elev, _ = structure_contours_on_ground(surface, GRID, interval_m=50.0)
    for level in np.unique(whole_elev):
        total = sum(shapely.length(g) for g, e in zip(geoms, elev) if e == level)
        assert total == pytest.approx(sum(shapely.length(g) for g, e in zip(whole, whole_elev) if e == level),
                                      rel=1e-9)


def test_contours_keep_the_extrapolated_flag_through_the_split():
    surface, ground = surface_and_ground()
    beyond = lambda x, y: np.asarray(x) > 500.0  # noqa: E731 - a data reach ending at x = 500 m
    geoms, elev, flags = structure_contours_on_ground(surface, GRID, interval_m=50.0, dem=ground,
                                                      extrapolated_fn=beyond)
    assert set(flags) == {"extrapolated", "below_ground"}
    for g, ex in zip(geoms, flags["extrapolated"]):
        x = shapely.get_coordinates(g)[:, 0].mean()
        assert ex == (x > 500.0)


def test_raster_flag_is_bilinear_interpolation():
    from scipy.interpolate import RegularGridInterpolator

    rng = np.random.default_rng(3)
    a = rng.uniform(0.0, 1.0, GRID.shape)
    a[10, 10] = np.nan
    flag = raster_flag(a, GRID, at_least=0.5)
    x = rng.uniform(5.0, 995.0, 500)
    y = rng.uniform(5.0, 995.0, 500)
    # Source: scipy.interpolate.RegularGridInterpolator (linear) over the cell centres.
    xs = 5.0 + CELL_M * np.arange(100)
    ys = 995.0 - CELL_M * np.arange(100)
    ref = RegularGridInterpolator((ys[::-1], xs), a[::-1], method="linear")(np.column_stack([y, x]))
    want = np.where(np.isfinite(ref), ref >= 0.5, False)
    np.testing.assert_array_equal(flag(x, y), want)


def test_require_same_grid():
    require_same_grid(GRID, GRID.with_nodata(-9999.0), what_a="surface 'a.tif'", what_b="DEM 'b.tif'")
    shifted = Grid((5.0, CELL_M, 0.0, 1000.0, 0.0, -CELL_M), (100, 100))
    with pytest.raises(InputError, match=r"surface 'a.tif' \(grid 100x100 cells of 10 m at 0.000, 1000.000\) "
                                         r"and DEM 'b.tif' .* are not on one grid"):
        require_same_grid(GRID, shifted, what_a="surface 'a.tif'", what_b="DEM 'b.tif'")


def test_grid_over_an_extent():
    xyz = np.array([[100.0, 200.0, 5.0], [2100.0, 1200.0, 7.0], [600.0, 700.0, 1.0]])
    assert points_bounds(xyz) == (100.0, 200.0, 2100.0, 1200.0)
    logs = []
    g = grid_over(points_bounds(xyz), cell_m=None, crs_wkt="", log=logs.append)
    # common practice: about 1/500 of the larger side (2000 m), rounded up to 1, 2 or 5 x 10^k: 4 m -> 5 m.
    assert g.cell_x_m == pytest.approx(5.0)
    assert any("5 m cells" in m for m in logs)
    assert grid_over((0.0, 0.0, 100.0, 50.0), cell_m=25.0, crs_wkt="").cell_x_m == pytest.approx(25.0)


def test_forecast_mask_marks_cells_beyond_the_reach_of_the_data():
    from strikeline.pipeline.rasters import forecast_mask
    from strikeline.surfaces import fit_surface

    rng = np.random.default_rng(4)
    xy = rng.uniform(100.0, 400.0, (60, 2))
    xyz = np.column_stack([xy, 500.0 - 0.2 * xy[:, 0]])
    model = fit_surface(xyz, model="plane")
    mask = forecast_mask(model, GRID)
    assert mask.dtype == np.float32 and set(np.unique(mask)) <= {0.0, 1.0}
    # Source: scipy.spatial.cKDTree - a cell is a forecast when its centre lies farther than the
    # reach from every pick (the definition of the reach of the data).
    from scipy.spatial import cKDTree

    X, Y = GRID.mesh()
    d, _ = cKDTree(xy).query(np.column_stack([X.ravel(), Y.ravel()]))
    far = (d > model.reach_m).reshape(GRID.shape)
    near = (d < model.reach_m * (1 - 1e-9)).reshape(GRID.shape)
    assert mask[far].min() == 1.0 and mask[near].max() == 0.0


def test_trace_misfit_layer():
    from strikeline.pipeline.outputs import trace_misfit_layer

    layer = trace_misfit_layer(np.array([[1.0, 2.0], [3.0, 4.0]]), [0.5, 7.0])
    np.testing.assert_array_equal(shapely.get_coordinates(layer.geoms), [[1, 2], [3, 4]])
    assert layer.fields["distance_m"].tolist() == [0.5, 7.0] and layer.name == "trace_misfit"
    assert len(trace_misfit_layer(np.empty((0, 2)), []).geoms) == 0


def test_surface_dip_grids_of_a_plane():
    from strikeline.pipeline.rasters import surface_dip_grids

    surface, _ = surface_and_ground()
    dip, dipdir = surface_dip_grids(surface, GRID.with_nodata(-9999.0))
    # Source: the plane's own formula above: 20 deg toward the east (90 deg) everywhere.
    np.testing.assert_allclose(dip, DIP_DEG, atol=1e-9)
    np.testing.assert_allclose(dipdir, 90.0, atol=1e-9)
