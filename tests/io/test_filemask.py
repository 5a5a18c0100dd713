"""FileMask: which cells of a grid written to a file hold data, read a window at a time.

The reference is numpy's own indexing of ``isfinite`` of the array that was written, and GDAL's
block-cache accounting (``GetCacheUsed``) for the memory the look-up leaves behind.
"""
from __future__ import annotations

import numpy as np
import pytest

gdal = pytest.importorskip("osgeo.gdal")

from strikeline.geometry.grid import Grid  # noqa: E402
from strikeline.io.gridfiles import MASK_WINDOW_TILES, FileMask, StripWriter  # noqa: E402
from strikeline.maps.contours import supported_vertices  # noqa: E402


@pytest.fixture
def holed(tmp_path):
    """A 700 x 2300-cell float64 scratch grid (three tile rows, more than one mask window across)
    with NaN holes, written by the strip writer; returns (path, grid, array)."""
    rng = np.random.default_rng(7)
    grid = Grid((1000.0, 2.0, 0.0, 9000.0, 0.0, -2.0), (700, 2300))
    a = rng.normal(size=grid.shape)
    a[rng.random(grid.shape) < 0.05] = np.nan
    a[200:300, 2100:2300] = np.nan  # a block of nodata at the right edge
    w = StripWriter(tmp_path / "holed.tif", grid, scratch=True)
    for r0 in range(0, grid.rows, 100):
        w.write_rows(r0, a[r0:r0 + 100])
    return w.close(), grid, a


def test_mask_is_numpys_isfinite_at_the_cells(holed):
    path, grid, a = holed
    assert grid.cols > 256 * MASK_WINDOW_TILES  # several windows across
    rng = np.random.default_rng(11)
    r = rng.integers(0, grid.rows, 50_000)
    c = rng.integers(0, grid.cols, 50_000)
    # Source: numpy fancy indexing of the boolean array of the values written
    assert np.array_equal(FileMask(path, grid)[r, c], np.isfinite(a)[r, c])
    r2, c2 = r.reshape(250, 200), c.reshape(250, 200)
    assert np.array_equal(FileMask(path, grid)[r2, c2], np.isfinite(a)[r2, c2])
    assert FileMask(path, grid)[np.empty(0, int), np.empty(0, int)].shape == (0,)


def test_supported_vertices_from_the_file_equal_those_of_the_array(holed):
    path, grid, a = holed
    rng = np.random.default_rng(3)
    xy = np.column_stack([rng.uniform(1000.0, 1000.0 + 2 * grid.cols, 20_000),
                          rng.uniform(9000.0 - 2 * grid.rows, 9000.0, 20_000)])
    xy[::3, 0] = 1001.0 + 2.0 * rng.integers(0, grid.cols, len(xy[::3]))  # on centre lines
    expected = supported_vertices(xy, np.isfinite(a), grid)  # Source: numpy indexing (the array path)
    assert 0 < expected.sum() < len(xy)
    assert np.array_equal(supported_vertices(xy, FileMask(path, grid), grid), expected)


def test_mask_keeps_one_window_in_gdals_block_cache(holed, monkeypatch):
    """Every window's tiles are dropped after use, whatever the cache's size: while the mask
    reads, GDAL's block cache holds at most one window more than before (Source: GDAL's
    GDALGetCacheUsed64 accounting of the block cache, read before each window is read)."""
    path, grid, _ = holed
    before = gdal.GetCacheUsed()
    used = []
    read = gdal.Band.ReadAsArray

    def watched(self, *args, **kwargs):
        used.append(gdal.GetCacheUsed())
        return read(self, *args, **kwargs)

    monkeypatch.setattr(gdal.Band, "ReadAsArray", watched)
    r, c = np.mgrid[0:grid.rows:5, 0:grid.cols:5]
    FileMask(path, grid)[r, c]
    assert len(used) > 3  # Source: arithmetic - 3 tile rows x 2 windows across
    window = 256 * 256 * MASK_WINDOW_TILES * 8
    assert max(used) - before <= window
    assert gdal.GetCacheUsed() == before
