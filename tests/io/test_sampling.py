"""Bounded-memory readers of written outputs against numpy and scipy references."""
import numpy as np
import pytest
from scipy.interpolate import RegularGridInterpolator

from strikeline.geometry.grid import Grid
from strikeline.io.raster import write_geotiff
from strikeline.io.sampling import decimation, layer_names, read_decimated, read_point_sample, sample_bilinear
from strikeline.io.vector import LayerOut, write_gpkg

WKT_UTM31 = 'PROJCS["WGS 84 / UTM zone 31N",GEOGCS["WGS 84",DATUM["WGS_1984",SPHEROID["WGS 84",6378137,298.257223563]],PRIMEM["Greenwich",0],UNIT["degree",0.0174532925199433]],PROJECTION["Transverse_Mercator"],PARAMETER["latitude_of_origin",0],PARAMETER["central_meridian",3],PARAMETER["scale_factor",0.9996],PARAMETER["false_easting",500000],PARAMETER["false_northing",0],UNIT["metre",1],AUTHORITY["EPSG","32631"]]'  # noqa: E501


def _tif(path, values, *, x0=500000.0, y0=5000000.0, cell=10.0):
    grid = Grid((x0, cell, 0.0, y0, 0.0, -cell), values.shape, WKT_UTM31)
    write_geotiff(path, values, grid, description="test values", unit="m")
    return grid


def test_decimation_factor_bounds_the_cells():
    for shape, cap in [((30000, 30000), 1_000_000), ((401, 7), 100), ((5, 5), 25), ((1, 1), 1)]:
        k = decimation(shape, cap)
        assert -(-shape[0] // k) * -(-shape[1] // k) <= cap
        assert k == 1 or -(-shape[0] // (k - 1)) * -(-shape[1] // (k - 1)) > cap  # the smallest such factor


def test_read_decimated_averages_blocks_leaving_nodata_out(tmp_path):
    rng = np.random.default_rng(3)
    values = rng.normal(500.0, 30.0, (40, 60)).astype(np.float32)
    values[5:9, 7:13] = np.nan  # nodata cells
    _tif(tmp_path / "a.tif", values)
    arr, grid = read_decimated(tmp_path / "a.tif", max_cells=150)  # k = 4: 10 x 15 cells
    # Source: numpy - the mean of each 4 x 4 block without its nodata cells (GDAL's average resampling)
    ref = np.nanmean(values.astype(float).reshape(10, 4, 15, 4), axis=(1, 3))
    assert arr.shape == (10, 15) and grid.shape == (10, 15)
    np.testing.assert_allclose(arr, ref, rtol=1e-6)
    assert grid.transform == (500000.0, 40.0, 0.0, 5000000.0, 0.0, -40.0)


def test_read_decimated_in_strips_is_the_whole_read(tmp_path, monkeypatch):
    import strikeline.io.sampling as sampling

    rng = np.random.default_rng(5)
    values = rng.normal(0.0, 1.0, (96, 36)).astype(np.float32)
    _tif(tmp_path / "s.tif", values)
    monkeypatch.setattr(sampling, "STRIP_ROWS", 10)  # strips of 9 rows (k = 3), 11 of them
    arr, grid = read_decimated(tmp_path / "s.tif", max_cells=400)
    # Source: numpy - the mean of each 3 x 3 block
    ref = values.astype(float).reshape(32, 3, 12, 3).mean(axis=(1, 3))
    np.testing.assert_allclose(arr, ref, rtol=1e-6)


def test_read_decimated_nearest_and_whole(tmp_path):
    values = np.arange(36, dtype=np.float32).reshape(6, 6)
    _tif(tmp_path / "b.tif", values)
    same, _ = read_decimated(tmp_path / "b.tif", max_cells=1000)
    np.testing.assert_array_equal(same, values)
    near, _ = read_decimated(tmp_path / "b.tif", max_cells=9, resampling="nearest")
    assert near.shape == (3, 3) and set(near.ravel()) <= set(values.ravel())


def test_sample_bilinear_matches_scipy_across_strips(tmp_path):
    rng = np.random.default_rng(7)
    values = rng.normal(0.0, 5.0, (53, 37)).astype(np.float32)
    grid = _tif(tmp_path / "c.tif", values)
    xc, yc = grid.cell_centres()
    x = rng.uniform(xc[0], xc[-1], 500)
    y = rng.uniform(yc[-1], yc[0], 500)
    got = sample_bilinear(tmp_path / "c.tif", x, y, block_rows=5)  # many strips
    # Source: scipy.interpolate.RegularGridInterpolator(method="linear") on the cell centres
    ref = RegularGridInterpolator((yc[::-1], xc), values[::-1].astype(float))(np.column_stack([y, x]))
    np.testing.assert_allclose(got, ref, atol=1e-9)


def test_sample_bilinear_outside_and_at_nodata_is_nan(tmp_path):
    values = np.ones((4, 4), np.float32)
    values[0, 0] = np.nan
    _tif(tmp_path / "d.tif", values, x0=0.0, y0=40.0)
    got = sample_bilinear(tmp_path / "d.tif", [-30.0, 2.0, 35.0, 20.0], [20.0, 38.0, 5.0, 20.0])
    assert np.isnan(got[0]) and np.isnan(got[1])  # outside; next to the nodata cell
    assert got[2] == pytest.approx(1.0) and got[3] == pytest.approx(1.0)  # edge half-cell; inside


def test_read_point_sample_keeps_every_kth(tmp_path):
    import shapely

    n = 1001
    xyz = np.column_stack([np.arange(n) * 1.0 + 500000, np.full(n, 5000000.0), np.arange(n) * 2.0])
    layer = LayerOut("pts", shapely.points(xyz), {"v": np.arange(n, dtype=np.int64)}, "point_z")
    write_gpkg(tmp_path / "p.gpkg", [layer], WKT_UTM31)
    assert layer_names(tmp_path / "p.gpkg") == ["pts"] and layer_names(tmp_path / "missing.gpkg") == []
    s = read_point_sample(tmp_path / "p.gpkg", layer="pts", fields=("v",), max_points=100)
    assert s["n_total"] == n and s["step"] == 11 and len(s["x"]) == len(range(0, n, 11)) == 91
    np.testing.assert_array_equal(s["v"].astype(int), np.arange(0, n, 11))
    np.testing.assert_array_equal(s["z"], np.arange(0, n, 11) * 2.0)
