"""Window means gathered while a grid is written (strikeline.io.window_means) against GDAL's
average resampling of the written file.

Reference: GDAL's ``ReadAsArray`` with ``buf_xsize``/``buf_ysize`` k times smaller than the band and
``resample_alg=gdal.GRIORA_Average`` (nodata cells left out; GDAL 3.6), read from the file the
same writer wrote, and strikeline's own decimated read (io.sampling.read_decimated), which the
report used before.
"""
from __future__ import annotations

import numpy as np
import pytest
from osgeo import gdal

from strikeline.geometry.grid import Grid
from strikeline.io._gdal import gdal_exceptions
from strikeline.io.gridfiles import StripWriter
from strikeline.io.sampling import read_decimated
from strikeline.io.window_means import WindowMeans


def _grid(rows, cols):
    return Grid((400000.0, 5.0, 0.0, 5300000.0, 0.0, -5.0), (rows, cols), "")


def _values(grid, seed=4):
    rng = np.random.default_rng(seed)
    X, Y = grid.mesh()
    z = 500 + 0.013 * (X - 400000) + 30 * np.sin((Y - 5300000) / 300.0) + rng.normal(0, 0.7, grid.shape)
    z[10:75, 100:190] = np.nan  # whole windows and parts of windows without data
    z[300:303, 7] = np.nan
    return z


def _gdal_average(path, k):
    ds = gdal.Open(str(path))
    b = ds.GetRasterBand(1)
    # Source: GDAL's own average resampling while reading (GRIORA_Average)
    a = b.ReadAsArray(buf_xsize=ds.RasterXSize // k, buf_ysize=ds.RasterYSize // k, buf_type=gdal.GDT_Float64,
                      resample_alg=gdal.GRIORA_Average)
    nodata = b.GetNoDataValue()
    ds = None
    a[a == nodata] = np.nan
    return a


@pytest.mark.parametrize("k", [6, 16, 30])
@pytest.mark.parametrize("how", ["blocks", "bands"])
def test_means_while_writing_equal_gdals_average_read(tmp_path, k, how):
    # 540 x 1,080 cells: tile rows of 256 and blocks of 256 / 512 columns cut windows of 6, 16
    # and 30 cells across both bands and blocks
    grid = _grid(480 if k == 16 else 540, 1024 if k == 16 else 1080)
    z = _values(grid)
    w = StripWriter(tmp_path / "g.tif", grid, description="surface", unit="m", means_k=k)
    if how == "blocks":
        for r0 in range(0, grid.rows, 256):
            for c0 in range(0, grid.cols, 512 if k == 16 else 256):
                w.write_block(r0, c0, z[r0:r0 + 256, c0:c0 + (512 if k == 16 else 256)])
    else:
        for r0 in range(0, grid.rows, 97):
            w.write_rows(r0, z[r0:r0 + 97])
    w.close()
    with gdal_exceptions():
        want = _gdal_average(tmp_path / "g.tif", k)
        ours, _ = read_decimated(tmp_path / "g.tif", max_cells=(grid.rows // k) * (grid.cols // k))
    got = w.means.means
    assert got.shape == want.shape and np.isnan(got).any()
    np.testing.assert_array_equal(got, want)  # bit for bit, NaN where GDAL gives nodata
    np.testing.assert_array_equal(got, ours)


def test_pieces_out_of_order_and_windows_that_do_not_tile_are_refused():
    with pytest.raises(ValueError, match="do not tile"):
        WindowMeans((100, 90), 7)
    m = WindowMeans((12, 12), 3)
    m.add(np.ones((6, 6), np.float32), 0, 0)
    with pytest.raises(ValueError, match="left to right"):
        m.add(np.ones((6, 3), np.float32), 0, 9)
