"""The report's decimated grid reads: whole k x k windows of a float32 grid averaged by numpy give
GDAL's own average resampling, value for value (nodata and NaN cells left out)."""
import numpy as np
import pytest
from osgeo import gdal

from strikeline.io import sampling as S

NODATA = -99999.0


def _grid(path, values, *, nodata=NODATA, dtype=gdal.GDT_Float32):
    rows, cols = values.shape
    ds = gdal.GetDriverByName("GTiff").Create(str(path), cols, rows, 1, dtype,
                                              ["TILED=YES", "COMPRESS=DEFLATE", "PREDICTOR=3" if dtype in (
                                                  gdal.GDT_Float32, gdal.GDT_Float64) else "PREDICTOR=1"])
    ds.SetGeoTransform((500_000.0, 2.0, 0.0, 4_000_000.0, 0.0, -2.0))
    if nodata is not None:
        ds.GetRasterBand(1).SetNoDataValue(nodata)
    ds.GetRasterBand(1).WriteArray(values)
    ds.FlushCache()
    ds = None
    return path


def _gdal_read(path, k, resample_alg):
    """Reference: GDAL's RasterIO with ``resample_alg`` into a buffer k times smaller, whole file at once."""
    ds = gdal.Open(str(path))
    b = ds.GetRasterBand(1)
    rows, cols = ds.RasterYSize, ds.RasterXSize
    out = b.ReadAsArray(0, 0, cols, rows, buf_xsize=-(-cols // k), buf_ysize=-(-rows // k),
                        buf_type=gdal.GDT_Float64, resample_alg=resample_alg)
    return S._as_float(out, b.GetNoDataValue())


def _gdal_average(path, k):
    """Reference: GDAL's average (GRIORA_Average) read k times smaller."""
    return _gdal_read(path, k, gdal.GRIORA_Average)


def _values(rows, cols, seed=7):
    rng = np.random.default_rng(seed)
    yy, xx = np.mgrid[0:rows, 0:cols]
    v = 400.0 + 80.0 * np.sin(xx / 37.0) * np.cos(yy / 23.0) + rng.normal(0.0, 3.0, (rows, cols))
    return v.astype(np.float32)


@pytest.mark.parametrize("pieces", ["one", "several"])
@pytest.mark.parametrize("shape,max_cells", [((1200, 1500), 20_000), ((1024, 768), 3_072), ((600, 600), 10_000)])
def test_window_mean_is_gdals_average(tmp_path, monkeypatch, shape, max_cells, pieces):
    if pieces == "several":  # each strip averaged in pieces of one block's width (rounded to windows)
        monkeypatch.setattr(S, "PIECE_COLUMNS", 1)
    v = _values(*shape)
    v[100:140, 200:260] = NODATA  # a hole of nodata
    v[5, 7] = np.nan  # and a NaN cell
    v[0:40, 0:40] = NODATA  # whole windows without a value
    path = _grid(tmp_path / "g.tif", v)
    k = S.decimation(shape, max_cells)
    assert shape[0] % k == 0 and shape[1] % k == 0 and k > 1  # the numpy path
    got, grid = S.read_decimated(path, max_cells=max_cells, resampling="average")
    want = _gdal_average(path, k)
    # Reference: GDAL 3.6's average resampling of the same file (the same float64 values, NaN alike)
    assert got.shape == want.shape == grid.shape
    assert np.array_equal(np.isnan(got), np.isnan(want))
    assert np.array_equal(got[~np.isnan(got)], want[~np.isnan(want)])
    assert np.isnan(got[0, 0])


def test_other_shapes_and_types_are_still_gdals(tmp_path):
    # rows not a multiple of the factor: GDAL resamples (its weights for partial windows)
    v = _values(1001, 1300)
    path = _grid(tmp_path / "odd.tif", v)
    got, _ = S.read_decimated(path, max_cells=20_000)
    k = S.decimation(v.shape, 20_000)
    assert v.shape[0] % k
    # Reference: GDAL's average of the first whole strips read the same way
    ds = gdal.Open(str(path))
    strip = k * (S.STRIP_ROWS // k)
    ref = ds.GetRasterBand(1).ReadAsArray(0, 0, 1300, strip, buf_xsize=got.shape[1], buf_ysize=strip // k,
                                          buf_type=gdal.GDT_Float64, resample_alg=gdal.GRIORA_Average)
    assert np.array_equal(got[:strip // k], ref)
    # a float64 grid: GDAL's average works in float64, not float32, so GDAL does it
    v64 = _values(600, 600).astype(np.float64) + 1e-7
    p64 = _grid(tmp_path / "f64.tif", v64, dtype=gdal.GDT_Float64)
    got64, _ = S.read_decimated(p64, max_cells=10_000)
    assert np.array_equal(got64, _gdal_average(p64, S.decimation((600, 600), 10_000)))


@pytest.mark.parametrize("pieces", ["one", "several"])
@pytest.mark.parametrize("shape,max_cells,sample_cells", [((1200, 1500), 20_000, 80_000),
                                                          ((1024, 768), 3_072, 12_288),
                                                          ((900, 900), 900, 8_100),
                                                          ((1001, 1300), 20_000, 80_000)])
def test_average_and_sample_from_one_read_are_gdals_two_reads(tmp_path, monkeypatch, shape, max_cells,
                                                              sample_cells, pieces):
    if pieces == "several":
        monkeypatch.setattr(S, "PIECE_COLUMNS", 1)
    v = _values(*shape, seed=11)
    v[300:380, 100:170] = NODATA
    v[9, 4] = np.nan
    path = _grid(tmp_path / "t.tif", v)
    mean, grid, sample = S.read_decimated_and_sample(path, max_cells=max_cells, sample_cells=sample_cells)
    # Reference: the two reads of GDAL's RasterIO as read_decimated makes them (average; nearest
    # neighbour, GDAL's own choice of cell in each window)
    want_mean, want_grid = S.read_decimated(path, max_cells=max_cells, resampling="average")
    want_near, _ = S.read_decimated(path, max_cells=sample_cells, resampling="nearest")
    kn = S.decimation(shape, sample_cells)
    if shape[0] % kn == 0 and shape[1] % kn == 0:  # whole windows: also GDAL's read of the whole file at once
        whole = _gdal_nearest(path, kn)
        assert np.array_equal(np.isnan(whole), np.isnan(want_near))
        assert np.array_equal(whole[~np.isnan(whole)], want_near[~np.isnan(want_near)])
    for got, want in ((mean, want_mean), (sample, want_near)):
        assert got.shape == want.shape
        assert np.array_equal(np.isnan(got), np.isnan(want))
        assert np.array_equal(got[~np.isnan(got)], want[~np.isnan(want)])
    assert grid == want_grid


def _gdal_nearest(path, k):
    """Reference: GDAL's nearest-neighbour read (GRIORA_NearestNeighbour) k times smaller."""
    return _gdal_read(path, k, gdal.GRIORA_NearestNeighbour)
