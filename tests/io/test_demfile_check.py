"""The check at opening of a DEM left in its file: strips of whole block rows read one ahead on a
second thread, GDAL's multithreaded decoding scoped to the reads.

References: GDAL's own ReadAsArray of the whole band (osgeo.gdal 3.6) for the values and the
lowest/highest cell; GDAL's block size (Band.GetBlockSize) for the strips; GDAL 3.6's
GetThreadLocalConfigOption for the scope of GDAL_NUM_THREADS.
"""
from __future__ import annotations

import numpy as np
import pytest
from osgeo import gdal

import strikeline.io.demfile as demfile
from strikeline.errors import RasterReadError
from strikeline.io._gdal import gdal_exceptions
from strikeline.io.demfile import decode_threads, open_dem, strip_rows

from helpers import write_tiled_dem


def _dem(path, z, *, block=16, nodata=-9999.0):
    return write_tiled_dem(path, z, nodata=nodata, block=block)


def _gdal_whole(path):
    """The band as GDAL reads it whole (the reference)."""
    with gdal_exceptions():
        ds = gdal.Open(path)
        a = ds.GetRasterBand(1).ReadAsArray().astype(float)
        ds = None
    return a


def test_strip_rows_are_whole_block_rows():
    # common practice: a strip of n block rows of height b is n * b rows
    assert strip_rows(100, 16, cells=100 * 50) == 48
    assert strip_rows(100, 16, cells=100 * 10) == 10  # less than a block row: as many rows as fit
    assert strip_rows(100, 1, cells=100 * 50) == 50
    assert strip_rows(0, 16, cells=10) == 10


@pytest.mark.parametrize("strip_cells", [97 * 3, 97 * 40, 97 * 1000])
def test_check_reads_whole_block_rows_and_finds_gdals_extremes(tmp_path, monkeypatch, strip_cells):
    rng = np.random.default_rng(7)
    z = (300 + 500 * rng.random((83, 97))).astype(np.float32)
    z[5:9, 10:30] = -9999.0  # declared nodata
    path = _dem(tmp_path / "dem.tif", z)
    whole = _gdal_whole(path)
    monkeypatch.setattr(demfile, "STRIP_CELLS", strip_cells)
    starts = []
    real = gdal.Band.ReadAsArray

    def spy(self, xoff=0, yoff=0, *args, **kwargs):
        starts.append(yoff)
        return real(self, xoff, yoff, *args, **kwargs)

    monkeypatch.setattr(gdal.Band, "ReadAsArray", spy)
    d = open_dem(path)
    valid = whole != -9999.0
    # Source: GDAL's own ReadAsArray of the whole band, its lowest and highest valid cell
    assert d.minimum == whole[valid].min() and d.maximum == whole[valid].max()
    step = strip_rows(97, 16, cells=strip_cells)
    # Source: GDAL's block size of the file (16-row blocks, Band.GetBlockSize): strips start on block rows
    assert starts == list(range(0, 83, step))
    if step >= 16:
        assert all(s % 16 == 0 for s in starts)  # no block row is decoded twice


def test_undeclared_marker_found_in_a_later_strip(tmp_path, monkeypatch):
    z = np.full((64, 40), 500.0, dtype=np.float32)
    z[60, 3] = -32768.0  # a marker the file does not declare, in the last strip
    path = _dem(tmp_path / "dem.tif", z, nodata=-9999.0)
    monkeypatch.setattr(demfile, "STRIP_CELLS", 40 * 16)
    with pytest.raises(ValueError, match="-32768"):
        open_dem(path)


def test_a_read_failing_on_the_second_thread_is_the_callers_error(tmp_path, monkeypatch):
    z = np.full((64, 40), 500.0, dtype=np.float32)
    path = _dem(tmp_path / "dem.tif", z)
    monkeypatch.setattr(demfile, "STRIP_CELLS", 40 * 16)
    real = gdal.Band.ReadAsArray

    def failing(self, xoff=0, yoff=0, *args, **kwargs):
        if yoff >= 32:
            raise RuntimeError("TIFFReadEncodedTile() failed")  # as GDAL raises for a damaged tile
        return real(self, xoff, yoff, *args, **kwargs)

    monkeypatch.setattr(gdal.Band, "ReadAsArray", failing)
    with pytest.raises(RasterReadError, match=r"could not read band 1 \(TIFFReadEncodedTile\(\) failed\)"):
        open_dem(path)


def test_decode_threads_is_scoped_to_the_block():
    name = "GDAL_NUM_THREADS"
    gdal.SetThreadLocalConfigOption(name, None)
    with decode_threads(2):
        assert gdal.GetThreadLocalConfigOption(name, None) == "2"
        with decode_threads(1):
            assert gdal.GetThreadLocalConfigOption(name, None) == "1"
        assert gdal.GetThreadLocalConfigOption(name, None) == "2"
    assert gdal.GetThreadLocalConfigOption(name, None) is None


def test_kept_window_is_the_files_own_type_and_reads_are_independent(tmp_path):
    rng = np.random.default_rng(3)
    z = (300 + 500 * rng.random((70, 90))).astype(np.float32)
    z[10:12, 5:9] = -9999.0
    path = _dem(tmp_path / "dem.tif", z)
    whole = _gdal_whole(path)
    ref = np.where(whole == -9999.0, np.nan, whole) * 0.3048  # GDAL's values, nodata as NaN, feet to metres
    d = open_dem(path).in_metres(0.3048)
    a = d[8:40, 3:50]
    kept = d._last[0][4]
    assert kept.dtype == np.float32 and kept.shape == (32, 90)  # the band's rows as GDAL read them (Float32)
    # Source: GDAL's own ReadAsArray of the whole band, nodata as NaN, times the foot's 0.3048 m
    # (the international foot, exactly 0.3048 m; from memory)
    assert np.array_equal(a, ref[8:40, 3:50], equal_nan=True)
    a[:] = 0.0  # a caller's array is its own: the kept window and the next read are unchanged
    b = d[9:20, 60:90]
    assert np.array_equal(b, ref[9:20, 60:90], equal_nan=True)
    assert np.array_equal(kept, whole[8:40].astype(np.float32))
