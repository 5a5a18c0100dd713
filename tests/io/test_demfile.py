"""DemFile: a DEM left in its file gives, window by window, the values of the DEM read whole.

References: GDAL's own ReadAsArray of the file (osgeo.gdal 3.6) through strikeline.io.raster.read_raster
(itself checked against GDAL in test_raster_read.py); the bilinear values of
strikeline.picks.sample_bilinear on the whole array (Press et al. 2007, eq. 3.6.5, checked in
tests/picks); the slope of strikeline.maps.dip_grids on the whole array (Zevenbergen & Thorne 1987).
"""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from osgeo import gdal, osr

import strikeline.io.demfile as demfile
from strikeline.errors import InputError
from strikeline.io._gdal import gdal_exceptions
from strikeline.io.demfile import DemFile, open_dem
from strikeline.io.raster import read_raster
from strikeline.maps.dipgrids import dip_grids
from strikeline.picks import picks_from_dem, sample_bilinear

REAL = Path(__file__).resolve().parents[2] / "test_data" / "real"


def _utm():
    srs = osr.SpatialReference()
    srs.ImportFromEPSG(32633)
    return srs.ExportToWkt()


def _write(path, z, gdt, nodata=None):
    with gdal_exceptions():
        ds = gdal.GetDriverByName("GTiff").Create(str(path), z.shape[1], z.shape[0], 1, gdt,
                                                  options=["COMPRESS=DEFLATE", "TILED=YES"])
        ds.SetGeoTransform((400000.0, 5.0, 0.0, 5301500.0, 0.0, -5.0))
        ds.SetProjection(_utm())
        if nodata is not None:
            ds.GetRasterBand(1).SetNoDataValue(nodata)
        ds.GetRasterBand(1).WriteArray(z)
        ds = None
    return str(path)


@pytest.fixture
def small_strips(monkeypatch):
    """Strips of 64 cells: every sampler crosses many strips and windows (the values must not change)."""
    monkeypatch.setattr(demfile, "STRIP_CELLS", 64)


@pytest.mark.parametrize("dem", ["volcano", "lidar"])
def test_windows_are_the_whole_read(dem, small_strips):
    path = REAL / dem / "dem.tif"
    whole, grid = read_raster(path, label="DEM")
    d = open_dem(path, label="DEM")
    assert d.grid.transform == grid.transform and d.shape == whole.shape and d.grid.nodata == grid.nodata
    assert d.minimum == np.nanmin(whole) and d.maximum == np.nanmax(whole)
    for r0, r1, c0, c1 in [(0, 7, 0, 5), (3, 40, 11, 12), (whole.shape[0] - 6, whole.shape[0], 2, whole.shape[1])]:
        assert np.array_equal(d[r0:r1, c0:c1], whole[r0:r1, c0:c1], equal_nan=True)
    assert np.array_equal(d.read(), whole, equal_nan=True)


@pytest.mark.parametrize("dem", ["volcano", "lidar"])
def test_samples_and_slope_are_those_of_the_whole_array(dem, small_strips):
    path = REAL / dem / "dem.tif"
    whole, grid = read_raster(path, label="DEM")
    d = open_dem(path, label="DEM")
    xmin, ymin, xmax, ymax = grid.bounds
    rng = np.random.default_rng(5)
    # inside, on the half-cell border, outside, and on cell-centre rows and columns
    x = np.concatenate([rng.uniform(xmin - 3, xmax + 3, 3000), grid.cell_centres()[0][:5], [np.nan]])
    y = np.concatenate([rng.uniform(ymin - 3, ymax + 3, 3000), grid.cell_centres()[1][:5], [ymin]])
    want = sample_bilinear(whole, grid, x, y)
    got = d.sample_bilinear(x, y)
    assert np.array_equal(got, want, equal_nan=True) and np.isfinite(got).sum() > 2000
    assert np.array_equal(sample_bilinear(d, grid, x, y), want, equal_nan=True)  # handed its own sampler
    slope = sample_bilinear(dip_grids(whole, grid)[0].astype(float), grid, x, y)
    got_slope = d.sample_bilinear(x, y, derive=lambda w, g: dip_grids(w, g)[0].astype(float), halo=1)
    assert np.array_equal(got_slope, slope, equal_nan=True)


def test_picks_from_the_file_are_the_picks_of_the_array(small_strips):
    import shapely

    path = REAL / "volcano" / "dem.tif"
    whole, grid = read_raster(path, label="DEM")
    xmin, ymin, xmax, ymax = grid.bounds
    lines = [shapely.LineString([(xmin + 10, ymin + 10), (xmax - 20, ymax - 5), (xmax + 50, ymax)]),
             shapely.LineString([(xmin - 30, 0.5 * (ymin + ymax)), (xmax - 7, 0.4 * (ymin + ymax) + 0.6 * ymin)])]
    a = picks_from_dem(lines, whole, grid, contact_ids=[3, 9])
    b = picks_from_dem(lines, open_dem(path), grid, contact_ids=[3, 9])
    assert np.array_equal(a.xyz, b.xyz) and np.array_equal(a.contact_id, b.contact_id) and len(a) > 50


def test_metres_are_the_whole_arrays_conversion(tmp_path, small_strips):
    from strikeline.pipeline.elevation_units import dem_in_metres

    rng = np.random.default_rng(1)
    z = rng.uniform(300, 3000, (40, 30)).astype(np.float32)
    z[5:9, 2:6] = -9999
    path = _write(tmp_path / "ft.tif", z, gdal.GDT_Float32, nodata=-9999)
    whole, _ = read_raster(path, label="DEM")
    declared = {"band_unit": "ft", "crs_unit": "", "crs_metres_per_unit": None}
    want = dem_in_metres(whole, declared, None, what="DEM")
    d = dem_in_metres(open_dem(path), declared, None, what="DEM")
    assert isinstance(d, DemFile) and d.scale == 0.3048  # Source: international foot, 0.3048 m exactly
    assert np.array_equal(d.read(), want, equal_nan=True) and d.maximum == np.nanmax(want)


@pytest.mark.parametrize("case", ["marker", "empty", "missing"])
def test_refusals_are_read_rasters_own_words(tmp_path, case, monkeypatch):
    """Every refusal of a DEM left in its file is read_raster's message, word for word."""
    z = np.full((700, 20), 250.0, dtype=np.float32)
    if case == "marker":
        z[-1, -3:] = -32768.0  # in the last strip only
        path = _write(tmp_path / "m.tif", z, gdal.GDT_Float32)
    elif case == "empty":
        path = _write(tmp_path / "e.tif", np.full((30, 20), -1.0, np.float32), gdal.GDT_Float32, nodata=-1.0)
    else:
        path = str(tmp_path / "none.tif")
    with pytest.raises(InputError) as want:
        read_raster(path, label="DEM")
    monkeypatch.setattr(demfile, "STRIP_CELLS", 200)  # several strips
    with pytest.raises(InputError) as got:
        open_dem(path, label="DEM")
    assert str(got.value) == str(want.value)
