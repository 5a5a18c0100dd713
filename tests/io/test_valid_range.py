"""The valid range of a band found in its own type, and the marker count it lets skip.

References: numpy's ``nanmin``/``nanmax`` of the float64 copy with NaN for nodata (numpy 1.26) for
the range; numpy's ``count_nonzero`` of the cells equal to each marker, counted here cell by cell
on the float64 copy, for the marker counts; GDAL's exact ``ComputeRasterMinMax(False)`` (GDAL 3.6,
which skips the band's nodata) for the lowest and highest cell of a DEM opened in its file.
"""
from __future__ import annotations

import numpy as np
import pytest
from osgeo import gdal, osr

import strikeline.io.demfile as demfile
from strikeline.errors import InputError
from strikeline.io._gdal import gdal_exceptions
from strikeline.io.demfile import open_dem
from strikeline.io.raster import (NODATA_SENTINELS, SENTINEL_ABS_LIMIT, HoleCount,
                                  raster_from_array, valid_range)
from strikeline.geometry.grid import Grid

from helpers import write_tiled_dem


def _numpy_range(a, nodata):
    """numpy's extremes of the float64 copy with NaN for nodata and non-finite cells (reference)."""
    f = np.array(a, dtype=np.float64)
    if nodata is not None:
        f[f == nodata] = np.nan
    f[~np.isfinite(f)] = np.nan
    if not np.isfinite(f).any():
        return None
    return float(np.nanmin(f)), float(np.nanmax(f))


def _numpy_markers(a, nodata):
    """The most frequent marker and its count, counted cell by cell on the float64 copy (reference)."""
    f = np.asarray(a, dtype=np.float64)
    counts = [(int(np.count_nonzero(f == v)), v) for v in NODATA_SENTINELS if nodata is None or v != nodata]
    huge = np.isfinite(f) & (np.abs(f) >= SENTINEL_ABS_LIMIT)
    if nodata is not None:
        huge &= f != nodata
    found = [c for c in counts if c[0]]
    if huge.any() and not any(abs(v) >= SENTINEL_ABS_LIMIT for _, v in found):
        found.append((int(huge.sum()), float(f[huge].flat[0])))
    if not found:
        return None
    n, v = max(found)
    return v, n


CASES = [
    # (dtype, nodata, cells written over random elevations)
    (np.float32, -9999.0, {(0, 0): -9999.0}),                   # nodata at the low end
    (np.float32, 9999.0, {(1, 1): 9999.0, (2, 2): np.nan}),     # nodata at the high end, a NaN
    (np.float32, 450.0, {(1, 1): 450.0}),                        # nodata inside the range
    (np.float32, 0.1, {(3, 3): np.float32(0.1)}),                # nodata float32 cannot hold: no cell is it
    (np.float32, None, {(0, 1): np.inf, (0, 2): -np.inf}),       # infinities are not valid
    (np.float32, None, {(4, 4): -9999.0}),                       # an undeclared marker
    (np.float32, -9999.0, {(4, 4): -32768.0, (5, 5): -9999.0}),  # a marker other than the nodata
    (np.float32, None, {(2, 3): 3.0e35}),                        # beyond the limit
    (np.float32, float(np.finfo(np.float32).min), {(1, 2): np.finfo(np.float32).min}),
    (np.float64, -9999.0, {(0, 0): -9999.0, (6, 6): np.nan}),
    (np.float64, np.nan, {(0, 0): np.nan}),
    (np.int16, -32768.0, {(0, 0): -32768, (1, 0): -9999}),
    (np.int32, None, {}),
    (np.uint16, 0.0, {(2, 2): 0}),
]


@pytest.mark.parametrize("dtype, nodata, cells", CASES)
def test_range_and_markers_match_numpy_on_the_float64_copy(dtype, nodata, cells):
    rng = np.random.default_rng(11)
    a = (300 + 500 * rng.random((9, 13))).astype(dtype)
    for (r, c), v in cells.items():
        a[r, c] = v
    # Source: numpy's nanmin/nanmax of the float64 copy with NaN for nodata (numpy 1.26)
    assert valid_range(a, nodata) == _numpy_range(a, nodata)
    # Source: numpy's count_nonzero of the cells equal to each marker on the float64 copy
    assert HoleCount(nodata).add(a).result() == _numpy_markers(a, nodata)


def test_a_band_of_nodata_has_no_range():
    a = np.full((4, 5), -9999.0, dtype=np.float32)
    a[0, 0] = np.nan
    # Source: numpy's nanmin/nanmax of the float64 copy: no valid cell, no range
    assert valid_range(a, -9999.0) is None
    assert _numpy_range(a, -9999.0) is None
    assert HoleCount(-9999.0).add(a).result() is None


def test_a_given_range_without_markers_skips_the_count_and_one_with_them_counts():
    a = np.array([[500.0, -9999.0]], dtype=np.float32)
    # a range said to hold no marker is trusted: nothing is counted (the caller's range is a's own)
    assert HoleCount(None).add(a, value_range=(500.0, 600.0)).result() is None
    # Source: arithmetic - the one cell of a set to -9999 (a common nodata marker, from memory)
    assert HoleCount(None).add(a, value_range=valid_range(a, None)).result() == (-9999.0, 1)


def test_the_in_memory_reader_still_refuses_an_undeclared_marker():
    grid = Grid((400000.0, 5.0, 0.0, 5301500.0, 0.0, -5.0), (3, 4), _wkt(), None)
    z = np.full((3, 4), 512.0)
    z[1, 2] = -32767.0
    # Source: arithmetic - the one cell of z set to -32767 (a common nodata marker, from memory)
    with pytest.raises(InputError, match=r"1 cell\(s\) equal -32767"):
        raster_from_array(z, grid, what="DEM 'x.tif'", path="x.tif")


def _wkt():
    srs = osr.SpatialReference()
    srs.ImportFromEPSG(32633)
    return srs.ExportToWkt()


def _dem(path, z, *, nodata):
    return write_tiled_dem(path, z, nodata=nodata)


def _gdal_min_max(path):
    with gdal_exceptions():
        ds = gdal.Open(path)
        lo, hi = ds.GetRasterBand(1).ComputeRasterMinMax(False)
        ds = None
    return lo, hi


@pytest.mark.parametrize("low_nodata", [True, False])
def test_open_dem_range_equals_gdals_exact_min_max_over_several_strips(tmp_path, monkeypatch, low_nodata):
    rng = np.random.default_rng(5)
    z = (310 + 580 * rng.random((70, 45))).astype(np.float32)
    nodata = -9999.0 if low_nodata else 9999.0
    z[3:7, 2:9] = nodata  # in the first strip
    z[50, 40] = np.nan
    path = _dem(tmp_path / "dem.tif", z, nodata=nodata)
    monkeypatch.setattr(demfile, "STRIP_CELLS", 45 * 16)  # strips of one block row: five of them
    dem = open_dem(path)
    # Source: GDAL's exact ComputeRasterMinMax(False) of the file (GDAL 3.6, nodata skipped)
    assert (dem.minimum, dem.maximum) == _gdal_min_max(path)


def test_open_dem_refuses_a_marker_in_a_later_strip(tmp_path, monkeypatch):
    z = np.full((64, 40), 620.0, dtype=np.float32)
    z[57, 3] = -32768.0  # in the fourth strip of one block row
    path = _dem(tmp_path / "dem.tif", z, nodata=-9999.0)
    monkeypatch.setattr(demfile, "STRIP_CELLS", 40 * 16)
    # Source: arithmetic - the one cell of z set to -32768 (the int16 minimum, a common nodata marker: common practice)
    with pytest.raises(InputError, match=r"1 cell\(s\) equal -32768, a common nodata marker"):
        open_dem(path)
