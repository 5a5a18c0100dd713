"""The shared-edge comparison on its own: sampling a grid up to its edge, the line two footprints
share, and the mismatch of two planes against the plane equation."""
from __future__ import annotations

import numpy as np
import pytest
import shapely
from shapely.geometry import box

from strikeline.batch.edges import edge_mismatch, footprint, sample_grid, shared_edge
from strikeline.geometry.grid import Grid


def plane_grid(a, b, c, *, x0=0.0, y0=0.0, cols=20, rows=10, cell=10.0):
    grid = Grid((x0, cell, 0.0, y0 + rows * cell, 0.0, -cell), (rows, cols))
    xs, ys = grid.mesh()
    return a * xs + b * ys + c, grid


def test_sampling_is_exact_for_a_plane_up_to_the_grid_edge():
    z, grid = plane_grid(0.3, -0.2, 100.0)
    x = np.array([0.0, 5.0, 123.4, 200.0, 200.0, 0.0])
    y = np.array([0.0, 5.0, 77.7, 100.0, 0.0, 100.0])
    # Source: bilinear interpolation (and its linear extension) reproduces any plane exactly
    # (common practice: it is exact for functions linear in x and y)
    assert sample_grid(z, grid, x, y) == pytest.approx(0.3 * x - 0.2 * y + 100.0, abs=1e-9)
    assert np.isnan(sample_grid(z, grid, np.array([-0.1, 200.1]), np.array([50.0, 50.0]))).all()


def test_a_hole_next_to_a_sample_gives_no_value():
    z, grid = plane_grid(0.0, 0.0, 1.0)
    z[0, 0] = np.nan
    got = sample_grid(z, grid, np.array([2.0, 150.0]), np.array([98.0, 50.0]))
    assert np.isnan(got[0]) and got[1] == 1.0


def test_shared_edge_of_touching_and_corner_footprints():
    a, b, c = box(0, 0, 100, 100), box(100, 20, 200, 120), box(100, 100, 200, 200)
    edge = shared_edge(a, b)
    assert edge.length == pytest.approx(80.0)
    assert shared_edge(a, c) is None  # a corner: no line
    assert shared_edge(a, box(300, 0, 400, 100)) is None


def test_two_planes_apart_by_dz_along_an_edge():
    dz, slope = 4.0, 0.25
    line = shapely.LineString([(0, 0), (0, 400)])

    def za(x, y):
        return 100.0 + slope * np.asarray(y)

    def zb(x, y):
        return 100.0 + slope * np.asarray(y) + dz

    got = edge_mismatch(line, za, zb, cell_m=10.0, interval_m=5.0)
    # Source: plane equation: equal elevations of two parallel planes dz apart lie dz / slope apart
    # along a line on which the elevation changes by `slope` per metre (common practice)
    assert got["median_dz_m"] == pytest.approx(dz) and got["max_dz_m"] == pytest.approx(dz)
    assert got["median_offset_m"] == pytest.approx(dz / slope) and got["max_offset_m"] == pytest.approx(dz / slope)
    assert got["n_samples"] == 81 and got["length_m"] == 400.0
    # levels 105..200 cross in both profiles: 100 + 0.25 * 400 = 200 and the second starts at 104
    assert got["n_levels"] == len(range(105, 201, 5))


def _write_curved_geotiff(path, *, rows=37, cols=53, cell=10.0, block=16):
    """A curved surface with a hole, written with GDAL directly (tiled float32, nodata -9999)."""
    from osgeo import gdal, osr

    x0, y0 = 500000.0, 4000000.0 + rows * cell
    xs = x0 + cell * (np.arange(cols) + 0.5)
    ys = y0 - cell * (np.arange(rows) + 0.5)
    X, Y = np.meshgrid(xs, ys)
    z = (300.0 + 40.0 * np.sin((X - x0) / 97.0) * np.cos((Y - y0) / 61.0)).astype(np.float32)
    z[5:8, 40:44] = -9999.0
    ds = gdal.GetDriverByName("GTiff").Create(str(path), cols, rows, 1, gdal.GDT_Float32,
                                              options=["TILED=YES", f"BLOCKXSIZE={block}", f"BLOCKYSIZE={block}"])
    ds.SetGeoTransform((x0, cell, 0.0, y0, 0.0, -cell))
    srs = osr.SpatialReference()
    srs.ImportFromEPSG(32633)
    ds.SetProjection(srs.ExportToWkt())
    b = ds.GetRasterBand(1)
    b.SetNoDataValue(-9999.0)
    b.WriteArray(z)
    b = ds = None
    return (x0, cell, 0.0, y0, 0.0, -cell), (rows, cols)


def test_footprint_and_edges_of_a_sheet_too_large_to_read_whole(tmp_path, monkeypatch):
    """With a memory budget too small for the whole band (as a 30,000^2 sheet's against this
    machine's), read_raster refuses it, and the index still gets its footprint and edge samples."""
    import strikeline.io.raster as raster
    from strikeline.batch.index import surface_sampler
    from strikeline.io.raster import raster_grid
    from strikeline.errors import InputError

    path = tmp_path / "surface.tif"
    gt, (rows, cols) = _write_curved_geotiff(path)
    whole, _ = raster.read_raster(path)
    monkeypatch.setattr(raster, "memory_budget_bytes", lambda: 4096)
    with pytest.raises(InputError, match="memory budget"):
        raster.read_raster(path)
    grid = raster_grid(path, label="surface")
    assert grid.shape == (rows, cols)
    x = np.linspace(gt[0], gt[0] + cols * 10.0, 300)
    y = np.full(300, gt[3] - rows * 10.0)  # the south edge
    np.testing.assert_array_equal(surface_sampler(path, grid)(x, y), sample_grid(whole, grid, x, y))


def test_footprint_and_edge_samples_of_a_file_match_the_whole_array(tmp_path):
    """The batch index reads only a raster's georeferencing for its footprint and the surface cells
    along an edge: the footprint of the corner coordinates GDAL reports, and the samples of
    sample_grid on the whole band as GDAL reads it, bit for bit."""
    from osgeo import gdal

    from strikeline.batch.index import SAMPLE_CHUNK, surface_sampler
    from strikeline.io.raster import raster_grid

    path = tmp_path / "surface.tif"
    gt, (rows, cols) = _write_curved_geotiff(path)
    grid = raster_grid(path, label="surface")
    # Source: GDAL's geotransform: the outer corners are (gt0, gt3) and (gt0 + cols gt1, gt3 + rows gt5)
    want = box(gt[0], gt[3] + rows * gt[5], gt[0] + cols * gt[1], gt[3])
    assert footprint(grid).equals_exact(want, 0.0)
    ds = gdal.Open(str(path))  # Source: GDAL reads the whole band, independent of strikeline's reader
    whole = ds.GetRasterBand(1).ReadAsArray().astype(np.float64)
    ds = None
    whole[whole == -9999.0] = np.nan
    # an edge-like path that runs along, across and around the grid, beyond it and through the hole,
    # longer than one chunk of samples
    t = np.linspace(0.0, 1.0, 3 * SAMPLE_CHUNK + 17)
    x = gt[0] - 3.0 + (cols * 10.0 + 6.0) * t
    y = gt[3] - 65.0 + 40.0 * np.sin(9.0 * t)
    x = np.concatenate([x, np.full(40, gt[0] + 5 * 10.0), [gt[0] + 415.0]])
    y = np.concatenate([y, np.linspace(gt[3], gt[3] - rows * 10.0, 40), [gt[3] - 65.0]])
    got = surface_sampler(path, grid)(x, y)
    ref = sample_grid(whole, grid, x, y)
    assert np.isnan(ref).any() and np.isfinite(ref).sum() > 1000
    np.testing.assert_array_equal(got, ref)


def test_mismatch_split_by_reach_of_the_data():
    """Two surfaces equal where both sheets have data and ``dz`` apart beyond: the split puts the
    difference where extrapolated, none within reach."""
    dz, slope = 25.0, 0.1
    line = shapely.LineString([(0, 0), (0, 400)])

    def za(x, y):
        return 100.0 + slope * np.asarray(y)

    def zb(x, y):
        return za(x, y) + np.where(np.asarray(y) > 150.0, dz, 0.0)

    got = edge_mismatch(line, za, zb, cell_m=10.0, interval_m=5.0, in_reach=lambda x, y: np.asarray(y) <= 150.0)
    # Source: arithmetic on the two surfaces above: 0 m apart for y <= 150 m, dz apart beyond; samples
    # every 5 m from 0 to 400 m, 31 of them at y <= 150 m
    assert got["n_samples"] == 81 and got["n_samples_in_reach"] == 31
    assert got["median_dz_in_reach_m"] == 0.0 and got["max_dz_in_reach_m"] == 0.0
    assert got["max_dz_extrapolated_m"] == pytest.approx(dz) and got["max_dz_m"] == pytest.approx(dz)
    none = edge_mismatch(line, za, zb, cell_m=10.0, interval_m=5.0)
    assert none["n_samples_in_reach"] is None and none["max_dz_extrapolated_m"] is None


def test_reach_test_is_the_distance_to_the_nearest_pick_of_each_sheet():
    from strikeline.batch.index import SheetOutputs, reach_test

    rng = np.random.default_rng(2)
    a = SheetOutputs("a", "ok", "c", None, data_xy=rng.random((40, 2)) * 500.0, reach_m=60.0)
    b = SheetOutputs("b", "ok", "c", None, data_xy=rng.random((30, 2)) * 500.0 + 200.0, reach_m=90.0)
    x, y = rng.random(2000) * 800.0, rng.random(2000) * 800.0
    got = reach_test([a, b])(x, y)

    def near(s):  # Source: brute force, every point against every pick (the nearest-datum distance)
        return np.min(np.hypot(x[:, None] - s.data_xy[:, 0], y[:, None] - s.data_xy[:, 1]), axis=1) <= s.reach_m
    np.testing.assert_array_equal(got, near(a) & near(b))
    assert got.any() and not got.all()
    assert reach_test([a, SheetOutputs("c", "ok", "c", None)]) is None
