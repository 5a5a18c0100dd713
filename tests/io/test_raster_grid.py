"""raster_grid: a raster's georeferencing without reading a cell, with read_raster's checks.

Reference: GDAL's own view of the file (osgeo.gdal 3.6: GetGeoTransform, RasterXSize/YSize,
the band's nodata) and read_raster's messages for the same inputs.
"""
from __future__ import annotations

import numpy as np
import pytest
from osgeo import gdal, osr

import strikeline.io.raster as raster
from strikeline.errors import StrikelineError
from strikeline.io._gdal import gdal_exceptions
from strikeline.io.raster import raster_grid, read_raster


def _write(path, *, epsg=32633, shape=(120, 90), gt=(400000.0, 5.0, 0.0, 5301500.0, 0.0, -5.0)):
    srs = osr.SpatialReference()
    srs.ImportFromEPSG(epsg)
    with gdal_exceptions():
        ds = gdal.GetDriverByName("GTiff").Create(str(path), shape[1], shape[0], 1, gdal.GDT_Float32)
        ds.SetGeoTransform(gt)
        ds.SetProjection(srs.ExportToWkt())
        ds.GetRasterBand(1).SetNoDataValue(-9999)
        ds.GetRasterBand(1).WriteArray(np.arange(shape[0] * shape[1], dtype=np.float32).reshape(shape))
        ds = None


def test_the_grid_is_gdals_georeferencing_and_read_rasters_grid(tmp_path):
    path = tmp_path / "dem.tif"
    _write(path)
    grid = raster_grid(path, label="DEM")
    # Source: GDAL's own geotransform, size and nodata of the file.
    ds = gdal.Open(str(path))
    assert grid.transform == ds.GetGeoTransform()
    assert grid.shape == (ds.RasterYSize, ds.RasterXSize)
    assert grid.nodata == ds.GetRasterBand(1).GetNoDataValue()
    ds = None
    _, whole = read_raster(path, label="DEM")
    assert grid == whole  # the reader of the whole band places it the same


def test_a_raster_too_large_to_read_is_still_placed(tmp_path, monkeypatch):
    path = tmp_path / "big.tif"
    _write(path)
    monkeypatch.setattr(raster, "memory_budget_bytes", lambda: 4096)
    with pytest.raises(StrikelineError, match="memory budget"):
        read_raster(path, label="surface")
    assert raster_grid(path, label="surface").shape == (120, 90)


@pytest.mark.parametrize("case", ["missing", "geographic"])
def test_refusals_are_read_rasters_words(tmp_path, case):
    path = tmp_path / "dem.tif"
    if case == "geographic":  # degrees, not metres: refused as read_raster refuses it
        _write(path, epsg=4326, gt=(10.0, 0.001, 0.0, 46.0, 0.0, -0.001))
    with pytest.raises(StrikelineError) as want:
        read_raster(path, label="DEM")
    with pytest.raises(type(want.value)) as got:
        raster_grid(path, label="DEM")
    assert str(got.value) == str(want.value)
    assert str(path) in str(got.value)
