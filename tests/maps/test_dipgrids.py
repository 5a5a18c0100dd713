"""Dip, dip-direction and depth grids (strikeline.maps.dipgrids).

Analytic planes first (exact answers, edges included), then a curved surface against two
general-purpose references: numpy.gradient (the same central/one-sided differences) and
GDAL's own slope and aspect (gdal.DEMProcessing, the library behind ``gdaldem``).
"""
from __future__ import annotations

import subprocess
import sys

import numpy as np
import pytest
from osgeo import gdal

from strikeline.errors import CancelledError, InputError
from strikeline.geometry.grid import Grid
from strikeline.maps.dipgrids import depth_below_ground, dip_grids

# common practice: a surface falling 600 m over 1,200 m perpendicular to strike dips
# atan(600 / 1200) = atan(0.5) = 26.5651°.
FALL_M = 600.0
RUN_M = 1200.0
DIP_ATAN_HALF_DEG = 26.565051177077990  # common practice: degrees(atan(0.5))

# common practice: azimuths are clockwise from grid north: N 0°, E 90°, S 180°, W 270°.
AZ_NORTH, AZ_EAST, AZ_SOUTH, AZ_WEST = 0.0, 90.0, 180.0, 270.0

#: Tolerance against GDAL's slope/aspect where both are defined (project target).
GDAL_TOL_DEG = 0.05
#: float32 storage of angles near 90-360°: a few ulp.
EXACT_TOL_DEG = 1e-4

GDAL_VERSION = gdal.__version__  # Source: GDAL 3.6.2 gdaldem/DEMProcessing (the installed one)


def _grid(rows=25, cols=30, dx=10.0, dy=10.0):
    return Grid((500_000.0, dx, 0.0, 6_200_000.0, 0.0, -dy), (rows, cols))


def _plane(grid, dip_direction_deg, tan_dip, z0=1000.0):
    """z of a plane through z0 at the grid's first cell centre, falling toward dip_direction."""
    x, y = grid.mesh()
    x = x - x[0, 0]
    y = y - y[0, 0]
    a = np.radians(dip_direction_deg)
    return z0 - tan_dip * (x * np.sin(a) + y * np.cos(a))


def _angle_diff(a, b):
    return np.abs((np.asarray(a, float) - np.asarray(b, float) + 180.0) % 360.0 - 180.0)


# --- analytic planes ---------------------------------------------------------------------

@pytest.mark.parametrize(
    "azimuth",
    [AZ_NORTH, AZ_EAST, AZ_SOUTH, AZ_WEST],
    ids=["north", "east", "south", "west"],
)
def test_plane_600_over_1200_dips_atan_half_in_each_cardinal_direction(azimuth):
    g = _grid()
    z = _plane(g, azimuth, FALL_M / RUN_M)
    dip, dd = dip_grids(z, g)
    assert dip.dtype == np.float32 and dd.dtype == np.float32
    # every cell, edges included: one-sided differences are exact on a plane
    np.testing.assert_allclose(dip, DIP_ATAN_HALF_DEG, atol=EXACT_TOL_DEG)
    assert _angle_diff(dd, azimuth).max() < EXACT_TOL_DEG


def test_plane_fall_over_run_across_1200_m_east():
    # The worked figure itself: 600 m of fall between two cells 1,200 m apart in x.
    g = Grid((0.0, 1200.0, 0.0, 1200.0, 0.0, -1200.0), (1, 2))
    z = np.array([[900.0, 300.0]])
    dip, dd = dip_grids(z, g)
    np.testing.assert_allclose(dip, [[np.nan, np.nan]])  # one row: no y neighbours
    g2 = Grid((0.0, 1200.0, 0.0, 2400.0, 0.0, -1200.0), (2, 2))
    dip2, dd2 = dip_grids(np.array([[900.0, 300.0], [900.0, 300.0]]), g2)
    np.testing.assert_allclose(dip2, DIP_ATAN_HALF_DEG, atol=EXACT_TOL_DEG)
    np.testing.assert_allclose(dd2, AZ_EAST, atol=EXACT_TOL_DEG)


@pytest.mark.parametrize("dip_direction_deg,dip_deg", [(35.0, 12.0), (123.4, 41.0),
                                                        (222.0, 3.5), (301.0, 67.0),
                                                        (359.5, 20.0)])
def test_oblique_planes_on_rectangular_cells(dip_direction_deg, dip_deg):
    g = _grid(rows=17, cols=23, dx=12.5, dy=30.0)
    z = _plane(g, dip_direction_deg, np.tan(np.radians(dip_deg)))
    dip, dd = dip_grids(z, g)
    np.testing.assert_allclose(dip, dip_deg, atol=EXACT_TOL_DEG)
    assert _angle_diff(dd, dip_direction_deg).max() < EXACT_TOL_DEG
    assert dd.min() >= 0.0 and dd.max() < 360.0


def test_flat_surface_has_zero_dip_and_no_direction():
    g = _grid(rows=6, cols=7)
    dip, dd = dip_grids(np.full(g.shape, 250.0), g)
    assert np.all(dip == 0.0)
    assert np.all(np.isnan(dd))


def test_north_dip_maps_to_zero_not_360():
    # gradient with an exactly zero east component: azimuth must be 0, never 360
    g = _grid(rows=5, cols=5)
    _, y = g.mesh()
    dip, dd = dip_grids(y - y.min(), g)  # rises northward -> dips south
    assert np.all(dd == AZ_SOUTH)
    dip, dd = dip_grids(y.max() - y, g)  # falls northward -> dips north
    assert np.all(dd == AZ_NORTH)


# --- edges and NaN -----------------------------------------------------------------------

def test_nan_holes_on_a_plane_keep_every_other_cell_exact():
    g = _grid(rows=20, cols=24)
    z = _plane(g, 250.0, 0.3)
    z[5:9, 6:11] = np.nan     # a hole
    z[:, 20] = np.nan         # a cut through the whole grid
    z[0, 0] = np.nan          # a corner
    dip, dd = dip_grids(z, g)
    hole = np.isnan(z)
    assert np.all(np.isnan(dip[hole])) and np.all(np.isnan(dd[hole]))
    ok = ~hole
    np.testing.assert_allclose(dip[ok], np.degrees(np.arctan(0.3)), atol=EXACT_TOL_DEG)
    assert _angle_diff(dd[ok], 250.0).max() < EXACT_TOL_DEG


def test_cell_without_any_x_neighbour_is_nan():
    g = _grid(rows=5, cols=5)
    z = _plane(g, 90.0, 0.5)
    z[2, 1] = np.nan
    z[2, 3] = np.nan          # cell (2, 2) has no valid neighbour in x
    dip, dd = dip_grids(z, g)
    assert np.isnan(dip[2, 2]) and np.isnan(dd[2, 2])
    assert np.all(np.isnan(dip[2, [0, 4]]))  # also isolated in x (grid edge + NaN)
    # (1, 1) and (3, 3) lose their neighbour toward row 2: one-sided in y, exact on a plane
    np.testing.assert_allclose(dip[[1, 3], [1, 3]], DIP_ATAN_HALF_DEG, atol=EXACT_TOL_DEG)
    one_col = Grid((0.0, 10.0, 0.0, 50.0, 0.0, -10.0), (5, 1))
    dip1, _ = dip_grids(np.arange(5.0)[:, None], one_col)
    assert np.all(np.isnan(dip1))


def test_edges_use_one_sided_differences_hand_worked():
    # z = x^2 / 100 along x (dx = 10): at the west edge (x=5, 15) the forward difference is
    # (2.25 - 0.25) / 10 = 0.2; in the interior at x=15 the central one is (6.25-0.25)/20.
    g = Grid((0.0, 10.0, 0.0, 30.0, 0.0, -10.0), (3, 4))
    x, _ = g.mesh()
    z = x ** 2 / 100.0
    dip, dd = dip_grids(z, g)
    west_slope = (2.25 - 0.25) / 10.0        # hand-worked forward difference
    interior_slope = (6.25 - 0.25) / 20.0    # hand-worked central difference
    east_slope = (12.25 - 6.25) / 10.0       # hand-worked backward difference
    np.testing.assert_allclose(dip[:, 0], np.degrees(np.arctan(west_slope)), atol=EXACT_TOL_DEG)
    np.testing.assert_allclose(dip[:, 1], np.degrees(np.arctan(interior_slope)), atol=EXACT_TOL_DEG)
    np.testing.assert_allclose(dip[:, 3], np.degrees(np.arctan(east_slope)), atol=EXACT_TOL_DEG)
    assert np.all(dd == AZ_WEST)  # rises eastward, so it falls to the west


def _curved(grid):
    x, y = grid.mesh()
    u = (x - x.min()) / 10.0
    v = (y - y.min()) / 10.0
    return 800.0 - 0.35 * 10 * u + 0.12 * 10 * v + 40.0 * np.sin(u / 9.0) * np.cos(v / 7.0) \
        + 0.02 * (u - 20) ** 2


def test_curved_surface_matches_numpy_gradient_everywhere():
    # Source: numpy 1.26 numpy.gradient (edge_order=1): central differences inside, one-sided
    # at the edges, the same scheme as dip_grids on a grid without NaN.
    g = _grid(rows=40, cols=50, dx=10.0, dy=15.0)
    z = _curved(g)
    dz_drow, dz_dx = np.gradient(z, g.cell_y_m, g.cell_x_m, edge_order=1)
    dz_dy = -dz_drow  # rows run southward
    ref_dip = np.degrees(np.arctan(np.hypot(dz_dx, dz_dy)))
    ref_dd = np.degrees(np.arctan2(-dz_dx, -dz_dy)) % 360.0
    dip, dd = dip_grids(z, g)
    np.testing.assert_allclose(dip, ref_dip, atol=EXACT_TOL_DEG)
    assert _angle_diff(dd, ref_dd).max() < EXACT_TOL_DEG


# --- against GDAL ------------------------------------------------------------------------

def _gdal_slope_aspect(z, grid, alg):
    src = gdal.GetDriverByName("MEM").Create("", grid.cols, grid.rows, 1, gdal.GDT_Float64)
    src.SetGeoTransform(grid.transform)
    band = src.GetRasterBand(1)
    band.SetNoDataValue(-9999.0)
    band.WriteArray(np.where(np.isnan(z), -9999.0, z))
    out = {}
    for what in ("slope", "aspect"):
        ds = gdal.DEMProcessing("", src, what, format="MEM", alg=alg)
        assert ds is not None, gdal.GetLastErrorMsg()
        b = ds.GetRasterBand(1)
        a = b.ReadAsArray().astype(float)
        nd = b.GetNoDataValue()
        a[a == nd] = np.nan
        out[what] = a
    return out["slope"], out["aspect"]


def _interior(shape):
    m = np.zeros(shape, bool)
    m[1:-1, 1:-1] = True
    return m


def test_curved_surface_matches_gdal_zevenbergen_thorne():
    # Source: GDAL 3.6.2 gdaldem/DEMProcessing, alg="ZevenbergenThorne" (4-neighbour
    # differences); aspect there is the azimuth of the downslope direction, 0 = north,
    # clockwise, the same convention as dip direction. GDAL leaves edges as nodata.
    g = _grid(rows=60, cols=70)
    z = _curved(g)
    ref_dip, ref_dd = _gdal_slope_aspect(z, g, "ZevenbergenThorne")
    dip, dd = dip_grids(z, g)
    both = _interior(g.shape) & np.isfinite(ref_dip) & np.isfinite(ref_dd)
    assert both.sum() == (g.rows - 2) * (g.cols - 2), f"GDAL {GDAL_VERSION} left gaps"
    assert np.abs(dip[both] - ref_dip[both]).max() < GDAL_TOL_DEG
    assert _angle_diff(dd[both], ref_dd[both]).max() < GDAL_TOL_DEG


def test_nan_hole_matches_gdal_away_from_the_hole():
    # Source: GDAL 3.6.2 gdaldem/DEMProcessing (ZevenbergenThorne): cells whose four
    # neighbours are valid use the same central differences in both.
    g = _grid(rows=40, cols=40)
    z = _curved(g)
    z[12:20, 15:22] = np.nan
    ref_dip, ref_dd = _gdal_slope_aspect(z, g, "ZevenbergenThorne")
    dip, dd = dip_grids(z, g)
    valid = ~np.isnan(z)
    full = _interior(g.shape)
    full[1:-1, 1:-1] &= (valid[:-2, 1:-1] & valid[2:, 1:-1] & valid[1:-1, :-2] & valid[1:-1, 2:]
                         & valid[1:-1, 1:-1])
    both = full & np.isfinite(ref_dip) & np.isfinite(ref_dd)
    assert both.sum() > 0.8 * full.sum()
    assert np.abs(dip[both] - ref_dip[both]).max() < GDAL_TOL_DEG
    assert _angle_diff(dd[both], ref_dd[both]).max() < GDAL_TOL_DEG
    assert np.all(np.isnan(dip[~valid]))


@pytest.mark.parametrize("dip_direction_deg,dip_deg", [(57.0, 28.0), (200.0, 9.0)])
def test_plane_matches_gdal_horn(dip_direction_deg, dip_deg):
    # Source: GDAL 3.6.2 gdaldem/DEMProcessing, default alg="Horn" (8-neighbour weighted
    # differences, exact on a plane like the 4-neighbour ones).
    g = _grid(rows=20, cols=25, dx=10.0, dy=10.0)
    z = _plane(g, dip_direction_deg, np.tan(np.radians(dip_deg)))
    ref_dip, ref_dd = _gdal_slope_aspect(z, g, "Horn")
    dip, dd = dip_grids(z, g)
    both = _interior(g.shape) & np.isfinite(ref_dip) & np.isfinite(ref_dd)
    assert both.sum() == (g.rows - 2) * (g.cols - 2)
    assert np.abs(dip[both] - ref_dip[both]).max() < GDAL_TOL_DEG
    assert _angle_diff(dd[both], ref_dd[both]).max() < GDAL_TOL_DEG


def test_flat_cells_are_undefined_direction_in_gdal_too():
    # Source: GDAL 3.6.2 gdaldem/DEMProcessing: aspect of a flat cell is nodata (unless
    # -zero_for_flat); slope 0.
    g = _grid(rows=8, cols=8)
    z = np.full(g.shape, 42.0)
    ref_dip, ref_dd = _gdal_slope_aspect(z, g, "ZevenbergenThorne")
    dip, dd = dip_grids(z, g)
    inner = _interior(g.shape)
    assert np.all(np.isnan(ref_dd[inner])) and np.all(np.isnan(dd[inner]))
    assert np.all(ref_dip[inner] == 0.0) and np.all(dip[inner] == 0.0)


# --- blocks, callbacks, dtypes, errors ---------------------------------------------------

def test_result_is_independent_of_block_size():
    g = _grid(rows=23, cols=19)
    z = _curved(g)
    z[3:6, 4:9] = np.nan
    z[10, :] = np.nan
    ref = dip_grids(z, g, block_rows=1000)
    for block_rows in (1, 2, 5, 22):
        got = dip_grids(z, g, block_rows=block_rows)
        for a, b in zip(got, ref):
            np.testing.assert_array_equal(a, b)


def test_float32_input_agrees_with_float64():
    g = _grid(rows=30, cols=30)
    z = _curved(g)
    d64, a64 = dip_grids(z, g)
    d32, a32 = dip_grids(z.astype(np.float32), g)
    assert np.abs(d32 - d64).max() < 0.01
    assert _angle_diff(a32, a64).max() < 0.05


def test_progress_reaches_one_and_cancel_raises():
    g = _grid(rows=50, cols=10)
    z = _curved(g)
    seen = []
    dip_grids(z, g, block_rows=7, progress=seen.append)
    assert len(seen) == 8 and seen == sorted(seen) and seen[-1] == 1.0
    calls = []

    def cancel_after_two():
        calls.append(1)
        return len(calls) > 2

    with pytest.raises(CancelledError, match="cancelled"):
        dip_grids(z, g, block_rows=7, is_cancelled=cancel_after_two)
    assert len(calls) == 3


@pytest.mark.parametrize("surface,grid,match", [
    (np.zeros((4, 5)), _grid(rows=5, cols=4), r"shape \(4, 5\).*grid has shape \(5, 4\)"),
    (np.zeros(20), _grid(rows=4, cols=5), "2-D array"),
    (np.zeros((4, 5), dtype=int), _grid(rows=4, cols=5), "float array with NaN"),
])
def test_bad_surface_is_refused(surface, grid, match):
    with pytest.raises(InputError, match=match):
        dip_grids(surface, grid)


def test_bad_block_rows_is_refused():
    with pytest.raises(InputError, match="block_rows must be at least 1, got 0"):
        dip_grids(np.zeros((3, 3)), _grid(rows=3, cols=3), block_rows=0)


def test_depth_below_ground():
    # common practice: depth below ground = ground elevation - surface elevation.
    dem = np.array([[120.0, 80.0, np.nan], [100.0, 100.0, 100.0]])
    surface = np.array([[20.0, 95.0, 50.0], [100.0, np.nan, 130.0]])
    expected = np.array([[100.0, -15.0, np.nan], [0.0, np.nan, -30.0]])  # hand-worked
    np.testing.assert_array_equal(depth_below_ground(dem, surface), expected)
    d32 = depth_below_ground(dem.astype(np.float32), surface.astype(np.float32))
    assert d32.dtype == np.float32
    with pytest.raises(InputError, match="dem has shape .*surface has shape"):
        depth_below_ground(dem, surface[:, :2])


def test_grids_module_imports_without_gdal():
    # with osgeo blocked, any GDAL import inside strikeline.maps.dipgrids raises ImportError
    code = "import sys; sys.modules['osgeo'] = None; import strikeline.maps.dipgrids"
    subprocess.run([sys.executable, "-c", code], check=True)
