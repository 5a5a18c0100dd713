"""strikeline.io.gridfiles.StripWriter: a grid written a band of rows at a time is the file a
whole-array write gives, and its check catches a damaged file.

Reference: GDAL's own reading of the files (osgeo.gdal 3.6) and the whole-array writer
:func:`strikeline.io.geotiff.write_geotiff` (itself checked against GDAL in test_geotiff).
"""
from __future__ import annotations

import os

import numpy as np
import pytest
from osgeo import gdal

from strikeline.errors import OutputError
from strikeline.geometry.grid import Grid
from strikeline.io._gdal import gdal_exceptions
from strikeline.io.geotiff import write_geotiff
from strikeline.io.gridfiles import SCRATCH_NODATA, StripWriter


def _grid(rows=600, cols=530):
    return Grid((400000.0, 5.0, 0.0, 5300000.0, 0.0, -5.0), (rows, cols), "")


def _values(grid):
    rng = np.random.default_rng(3)
    X, Y = grid.mesh()
    z = 500 + 0.01 * (X - 400000) + 30 * np.sin((Y - 5300000) / 300.0) + rng.normal(0, 1e-3, grid.shape)
    z[10:40, 100:130] = np.nan
    return z


def _write(path, z, grid, *, scratch=False, band_rows=97, block_cols=None):
    """Write ``z`` in bands of ``band_rows`` rows, or (``block_cols``) in blocks one tile row high."""
    w = StripWriter(path, grid, description="surface", unit="m", scratch=scratch)
    if block_cols is not None:
        for r0 in range(0, grid.rows, 256):
            for c0 in range(0, grid.cols, block_cols):
                w.write_block(r0, c0, z[r0:r0 + 256, c0:c0 + block_cols])
        return w
    for r0 in range(0, grid.rows, band_rows):
        w.write_rows(r0, z[r0:r0 + band_rows])
    return w


def test_bands_give_the_whole_array_file(tmp_path):
    grid = _grid()
    z = _values(grid)
    _write(tmp_path / "bands.tif", z, grid).close()
    write_geotiff(tmp_path / "whole.tif", z, grid, description="surface", unit="m")
    # Source: the whole-array writer's bytes (the same creation options and tile order)
    assert (tmp_path / "bands.tif").read_bytes() == (tmp_path / "whole.tif").read_bytes()


@pytest.mark.parametrize("block_cols", [256, 512])
def test_blocks_give_the_whole_array_file(tmp_path, block_cols):
    grid = _grid()  # 600 x 530: three tile rows and two or three blocks across, the last ones partial
    z = _values(grid)
    w = _write(tmp_path / "blocks.tif", z, grid, block_cols=block_cols)
    assert w.takes_blocks((256, block_cols)) and not w.takes_blocks((256, 300)) and not w.takes_blocks((128, 256))
    w.close()
    write_geotiff(tmp_path / "whole.tif", z, grid, description="surface", unit="m")
    # Source: the whole-array writer's bytes (the same creation options and tile order)
    assert (tmp_path / "blocks.tif").read_bytes() == (tmp_path / "whole.tif").read_bytes()


def test_blocks_out_of_order_or_off_the_tiles_are_refused(tmp_path):
    grid = _grid()
    z = _values(grid)
    w = StripWriter(tmp_path / "b.tif", grid)
    with pytest.raises(ValueError, match="in order"):
        w.write_block(0, 256, z[:256, 256:512])
    with pytest.raises(ValueError, match="tile's edge"):
        w.write_block(0, 0, z[:256, :300])
    w.write_block(0, 0, z[:256, :256])
    with pytest.raises(ValueError, match="in order"):
        w.write_rows(0, z[:256])
    w.abort()
    assert os.listdir(tmp_path) == []


def test_scratch_grid_takes_blocks_several_tile_rows_high(tmp_path):
    grid = _grid()  # 600 rows: two rows of 256-row blocks and one of 88 rows at the foot
    z = _values(grid)
    w = _write(tmp_path / "s.tif", z, grid, scratch=True, block_cols=256)
    assert w.takes_blocks((256, 512)) and w.takes_blocks((32, 256)) and not w.takes_blocks((40, 256))
    w.close()
    with gdal_exceptions():
        ds = gdal.Open(str(tmp_path / "s.tif"))
        b = ds.GetRasterBand(1)
        got, tiles = b.ReadAsArray(), b.GetBlockSize()
        b = ds = None
    # Source: GDAL's reading of the file: every value as written, in tiles 16 rows high
    assert tiles == [256, 16]
    ok = np.isfinite(z)
    assert np.array_equal(got[ok], z[ok]) and np.all(got[~ok] == SCRATCH_NODATA)


def test_scratch_grid_reads_back_as_float64(tmp_path):
    grid = _grid(300, 280)
    z = _values(grid)
    _write(tmp_path / "s.tif", z, grid, scratch=True).close()
    with gdal_exceptions():
        ds = gdal.Open(str(tmp_path / "s.tif"))  # kept: a band outlives no dataset
        b = ds.GetRasterBand(1)
        got = b.ReadAsArray()
        nodata = b.GetNoDataValue()
        b = ds = None
    # Source: GDAL's reading of the file; the values unchanged, the lowest float64 for no value
    assert nodata == SCRATCH_NODATA
    assert np.array_equal(got[np.isfinite(z)], z[np.isfinite(z)])
    assert np.all(got[~np.isfinite(z)] == SCRATCH_NODATA)


@pytest.mark.parametrize("damage", ["truncate", "first_tile", "last_tile"])
@pytest.mark.parametrize("scratch", [False, True])
@pytest.mark.parametrize("block_cols", [None, 256])
def test_the_check_catches_a_truncated_or_damaged_file(tmp_path, damage, scratch, block_cols):
    grid = _grid()
    z = _values(grid)
    w = _write(tmp_path / "s.tif", z, grid, scratch=scratch, block_cols=block_cols)
    w.finish()
    size = os.path.getsize(w.tmp)
    with gdal_exceptions():
        ds = gdal.Open(w.tmp)
        b = ds.GetRasterBand(1)
        tw, th = b.GetBlockSize()  # 256 x 256, a scratch grid's 256 x 16
        ty, tx = (0, 0) if damage == "first_tile" else ((grid.rows - 1) // th, (grid.cols - 1) // tw)
        # Source: GDAL's GTiff driver's metadata of where each tile lies (BLOCK_OFFSET_x_y)
        at = int(b.GetMetadataItem(f"BLOCK_OFFSET_{tx}_{ty}", "TIFF"))
        b = ds = None
    with open(w.tmp, "r+b") as f:
        if damage == "truncate":
            f.truncate(size * 2 // 3)
        else:  # bytes near the start of the tile (its first rows hold data) overwritten
            f.seek(at + 16)
            f.write(b"\x55" * 64)
    with pytest.raises(OutputError, match="could not write it"):
        w.verify()
    assert os.listdir(tmp_path) == []


def test_an_intact_file_passes_the_check(tmp_path):
    grid = _grid()
    w = _write(tmp_path / "s.tif", _values(grid), grid)
    w.finish()
    w.verify()
    assert w.commit() == str(tmp_path / "s.tif")
    assert os.listdir(tmp_path) == ["s.tif"]


@pytest.mark.parametrize("odd, any_valid, all_valid", [
    (None, True, True),  # every value finite
    (np.nan, True, False),
    (np.inf, True, False),
    (-np.inf, True, False),
    ("nodata", True, False),  # a real value equal to the nodata value, inside the others' range
    ("all_nan", False, False),
])
@pytest.mark.parametrize("dtype", [np.float64, np.float32])
@pytest.mark.parametrize("how", ["rows", "blocks"])
def test_valid_flags_and_values_match_gdal_and_leave_the_caller_s_array(tmp_path, odd, any_valid, all_valid,
                                                                        dtype, how):
    grid = _grid(300, 512)
    z = (500 + np.arange(grid.rows * grid.cols, dtype=float).reshape(grid.shape) * 1e-3 - 40).astype(dtype)
    if odd == "all_nan":
        z[:] = np.nan
    elif odd == "nodata":
        z[150, 300] = -99999.0
        z[0, 0] = -100000.0  # the least value: the nodata value lies inside the range
    elif odd is not None:
        z[150, 300] = odd
    kept = z.copy()
    path = tmp_path / "g.tif"
    w = StripWriter(path, grid, description="surface", unit="m")
    if how == "blocks":
        for r0 in range(0, grid.rows, 256):
            for c0 in (0, 256):
                w.write_block(r0, c0, z[r0:r0 + 256, c0:c0 + 256])
    else:
        for r0 in range(0, grid.rows, 100):
            w.write_rows(r0, z[r0:r0 + 100])
            z[r0:r0 + 100] = 7.0  # the caller reuses its rows at once: the file keeps what was given
        z[:] = kept
    assert (w.any_valid, w.all_valid) == (any_valid, all_valid)
    w.close()
    np.testing.assert_array_equal(z, kept)  # the caller's array is never changed
    ds = gdal.Open(str(path))
    b = ds.GetRasterBand(1)
    got, valid = b.ReadAsArray(), b.GetMaskBand().ReadAsArray() > 0
    # Source: GDAL's own reading of the file and its nodata mask (osgeo.gdal 3.6): the flags say what
    # the mask says, and the valid cells hold the values given, rounded to float32 by numpy
    assert bool(valid.any()) == any_valid and bool(valid.all()) == all_valid
    expected = kept.astype(np.float32)
    finite = np.isfinite(expected)
    np.testing.assert_array_equal(valid, finite & (expected != np.float32(-99999.0)))
    np.testing.assert_array_equal(got[finite], expected[finite])
