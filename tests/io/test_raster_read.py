"""read_raster: the band's own type read (on every CPU) and made float64 once, nodata as NaN;
markers of undeclared holes found in any block of rows.

Reference: GDAL's own ReadAsArray of the file (osgeo.gdal 3.6).
"""
from __future__ import annotations

import re

import numpy as np
import pytest
from osgeo import gdal, osr

from strikeline.errors import InputError
from strikeline.geometry.grid import Grid
from strikeline.io._gdal import gdal_exceptions
from strikeline.io.raster import raster_from_array, read_raster


def _utm():
    srs = osr.SpatialReference()
    srs.ImportFromEPSG(32633)
    return srs.ExportToWkt()


@pytest.mark.parametrize("dtype,gdt", [(np.float32, gdal.GDT_Float32), (np.int16, gdal.GDT_Int16)])
def test_read_equals_gdal_with_nodata_as_nan(tmp_path, dtype, gdt):
    rng = np.random.default_rng(2)
    z = (rng.uniform(100, 900, (300, 260))).astype(dtype)
    z[20:40, 30:70] = -9999
    path = str(tmp_path / "dem.tif")
    with gdal_exceptions():
        ds = gdal.GetDriverByName("GTiff").Create(path, 260, 300, 1, gdt, options=["COMPRESS=DEFLATE", "TILED=YES"])
        ds.SetGeoTransform((400000.0, 5.0, 0.0, 5301500.0, 0.0, -5.0))
        ds.SetProjection(_utm())
        ds.GetRasterBand(1).SetNoDataValue(-9999)
        ds.GetRasterBand(1).WriteArray(z)
        ds = None
        # Source: GDAL's ReadAsArray, as float64, its nodata value made NaN
        ds = gdal.Open(path)
        want = ds.GetRasterBand(1).ReadAsArray().astype(np.float64)
        ds = None
    want[want == -9999] = np.nan
    arr, grid = read_raster(path, label="DEM")
    assert arr.dtype == np.float64 and np.array_equal(arr, want, equal_nan=True)
    assert gdal.GetConfigOption("GDAL_NUM_THREADS") is None  # the read's setting does not stay


@pytest.mark.parametrize("value", [-32768.0, 3e38])
def test_a_marker_only_in_the_last_block_of_rows_is_found(value):
    # 1,100 x 1,000 cells: more than one block of about a million cells
    a = np.full((1100, 1000), 250.0, dtype=np.float32)
    a[-1, -3:] = value
    grid = Grid((400000.0, 5.0, 0.0, 5305500.0, 0.0, -5.0), a.shape, _utm())
    with pytest.raises(InputError, match=re.escape(f"3 cell(s) equal {value:g}")):
        raster_from_array(a, grid, what="DEM 'x.tif'")
