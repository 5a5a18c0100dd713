"""Which cells of a scratch grid hold values, read once ahead (ValidCells), and the structure
contours trimmed with it while the trace is drawn.

References: the mask GDAL reads of the whole file (GDAL 3.6 ``ReadAsArray``, nodata and non-finite
cells hold no value) indexed by numpy, and the lines the file look-up (FileMask) gives.
"""
from __future__ import annotations

import threading
from types import SimpleNamespace

import numpy as np
import pytest

gdal = pytest.importorskip("osgeo.gdal")

from strikeline.errors import CancelledError, RasterReadError  # noqa: E402
from strikeline.geometry.grid import Grid  # noqa: E402
from strikeline.io.contours import ValidCells  # noqa: E402
from strikeline.io.gridfiles import SCRATCH_NODATA, FileMask, contour_lines_from_file  # noqa: E402
from strikeline.pipeline import tiled  # noqa: E402


def write_scratch(path, values: np.ndarray, *, tile=(256, 16)) -> Grid:
    """A float64 tiled GeoTIFF like a scratch grid (nodata the lowest float64), NaN cells as nodata."""
    rows, cols = values.shape
    ds = gdal.GetDriverByName("GTiff").Create(str(path), cols, rows, 1, gdal.GDT_Float64,
                                              ["TILED=YES", f"BLOCKXSIZE={tile[0]}", f"BLOCKYSIZE={tile[1]}"])
    grid = Grid((1000.0, 2.0, 0.0, 9000.0, 0.0, -2.0), (rows, cols))
    ds.SetGeoTransform(grid.transform)
    band = ds.GetRasterBand(1)
    band.SetNoDataValue(SCRATCH_NODATA)
    band.WriteArray(np.where(np.isnan(values), SCRATCH_NODATA, values))
    band = ds = None
    return grid


def gdal_mask(path) -> np.ndarray:
    """Source: GDAL 3.6 ReadAsArray of the whole band; a value is finite and not the nodata."""
    ds = gdal.Open(str(path))
    band = ds.GetRasterBand(1)
    a = band.ReadAsArray()
    return np.isfinite(a) & (a != band.GetNoDataValue())


@pytest.fixture(scope="module")
def holey(tmp_path_factory):
    """A sloping surface of 700 x 900 cells with a hole, a nodata margin, specks and one block wholly empty."""
    rows, cols = 700, 900
    r, c = np.mgrid[0:rows, 0:cols]
    z = 400.0 + 0.37 * c - 0.21 * r + 5 * np.sin(c / 40.0)
    z[(r - 350) ** 2 + (c - 420) ** 2 < 90 ** 2] = np.nan   # a hole across block edges
    z[:, :3] = np.nan                                        # a margin
    z[600:, 800:] = np.nan                                   # the corner block, empty
    rng = np.random.default_rng(4)
    z[rng.integers(0, rows, 40), rng.integers(0, cols, 40)] = np.nan  # specks
    path = tmp_path_factory.mktemp("valid") / "surface.tif"
    grid = write_scratch(path, z)
    return path, grid


def test_lookups_equal_gdals_mask(holey):
    path, grid = holey
    ref = gdal_mask(path)
    rng = np.random.default_rng(0)
    r = rng.integers(0, grid.rows, 50_000)
    c = rng.integers(0, grid.cols, 50_000)
    for keep in (32 * 2**20, 256 * 256 + 1, 0):  # all partly valid blocks kept, one kept, none (the file asked)
        cells = ValidCells(path, grid, fallback=FileMask(path, grid), keep_bytes=keep)
        assert np.array_equal(cells[r, c], ref[r, c])
        # a 2-D look-up keeps its shape; the whole grid equals the mask
        R, C = np.mgrid[0:grid.rows, 0:grid.cols]
        assert np.array_equal(cells[R, C], ref)
    assert cells[np.empty(0, int), np.empty(0, int)].shape == (0,)


def test_without_a_file_lookup_a_block_it_did_not_keep_is_refused(holey):
    path, grid = holey
    cells = ValidCells(path, grid, keep_bytes=0)
    with pytest.raises(RasterReadError, match="no file look-up"):
        cells[np.array([350]), np.array([420 + 89])]  # the hole's edge: a partly valid block


def test_cancel_stops_the_read(holey):
    path, grid = holey
    calls = []

    def cancelled():
        calls.append(1)
        return len(calls) > 2

    with pytest.raises(CancelledError, match="cancelled"):
        ValidCells(path, grid, is_cancelled=cancelled)


def test_trimmed_contours_equal_the_file_lookups(holey):
    path, grid = holey
    cells = ValidCells(path, grid, fallback=FileMask(path, grid))
    # Source: the same generator's lines trimmed with the file look-up (FileMask, read at each look-up)
    ref = contour_lines_from_file(path, grid, interval_m=7.0)
    got = contour_lines_from_file(path, grid, interval_m=7.0, valid=lambda: cells)
    assert len(ref[0]) > 20
    assert [g.wkb for g in got[0]] == [g.wkb for g in ref[0]]
    assert np.array_equal(got[1], ref[1])


def test_concurrent_contours_and_trace_read_the_cells_once_meanwhile(holey, tmp_path, monkeypatch):
    path, grid = holey
    depth = write_scratch(tmp_path / "depth.tif", gdal.Open(str(path)).ReadAsArray() * 0 + np.linspace(-50, 50, grid.cols))
    tiles = SimpleNamespace(scratch={"surface": path, "depth": tmp_path / "depth.tif"},
                            any_valid={"surface": True, "depth": True},
                            all_valid={"surface": False, "depth": False})  # as BlockGrids: cells to read
    made, on = [], []
    real = ValidCells

    class Counted(real):
        def __init__(self, *a, **k):
            on.append(threading.current_thread() is threading.main_thread())
            super().__init__(*a, **k)
            made.append(self)

    import strikeline.io.contours as io_contours
    monkeypatch.setattr(io_contours, "ValidCells", Counted)
    monkeypatch.setattr(tiled, "THREADS", 2)
    (lines, levels, flags), trace = tiled.contours_and_trace_of_blocks(tiles, grid, depth, interval_m=7.0)
    assert len(made) == 1 and on == [False]  # read once, on the second thread
    # Source: the serial calls, each trimming with the file look-up
    ref = contour_lines_from_file(path, grid, interval_m=7.0)
    assert [g.wkb for g in lines] == [g.wkb for g in ref[0]] and np.array_equal(levels, ref[1])
    ref_trace, _ = contour_lines_from_file(tmp_path / "depth.tif", depth, levels=[0.0])
    assert [g.wkb for g in trace] == [g.wkb for g in ref_trace]


def test_non_finite_cells_hold_no_value(tmp_path):
    z = np.full((300, 520), 12.5)
    z[7, 9], z[299, 519], z[150, 300] = np.inf, -np.inf, np.nan
    grid = write_scratch(tmp_path / "s.tif", z)
    R, C = np.mgrid[0:300, 0:520]
    got = ValidCells(tmp_path / "s.tif", grid)[R, C]
    assert np.array_equal(got, gdal_mask(tmp_path / "s.tif"))
    assert got.sum() == z.size - 3


@pytest.mark.parametrize("spoil", ["none", "nan", "inf", "nodata"])
def test_a_writers_all_valid_is_gdals_mask_of_its_file(tmp_path, spoil):
    """StripWriter.all_valid is true exactly when GDAL's mask of the file it wrote is all true."""
    from strikeline.io.gridfiles import StripWriter

    rows, cols = 40, 600
    z = np.add.outer(np.arange(rows) * 0.5, np.arange(cols) * 0.25)
    if spoil != "none":
        z[33, 517] = {"nan": np.nan, "inf": np.inf, "nodata": SCRATCH_NODATA}[spoil]
    grid = Grid((1000.0, 2.0, 0.0, 9000.0, 0.0, -2.0), (rows, cols))
    w = StripWriter(tmp_path / "s.tif", grid, scratch=True)
    for r0 in range(0, rows, 16):
        for c0 in range(0, cols, 256):
            w.write_block(r0, c0, z[r0:r0 + 16, c0:c0 + 256])
    w.finish()
    path = w.commit()
    assert w.any_valid
    # Source: GDAL 3.6 ReadAsArray of the file written (gdal_mask)
    assert w.all_valid == bool(gdal_mask(path).all()) == (spoil == "none")


def test_a_surface_valid_everywhere_is_not_read_for_the_trimming(tmp_path, monkeypatch):
    """With the writer's word that every cell holds a value, no ValidCells read is made and the
    lines are those trimmed with the file look-up (FileMask: the cells read from the file)."""
    r, c = np.mgrid[0:300, 0:520]
    z = 400.0 + 0.37 * c - 0.21 * r + 5 * np.sin(c / 40.0)
    path = tmp_path / "surface.tif"
    grid = write_scratch(path, z)
    assert gdal_mask(path).all()
    depth = write_scratch(tmp_path / "depth.tif", z * 0 + np.linspace(-50, 50, grid.cols))
    made = []

    class Counted(ValidCells):
        def __init__(self, *a, **k):
            made.append(1)
            super().__init__(*a, **k)

    import strikeline.io.contours as io_contours
    monkeypatch.setattr(io_contours, "ValidCells", Counted)
    monkeypatch.setattr(io_contours, "HAND_OVER_ROWS", 16)
    monkeypatch.setattr(tiled, "THREADS", 2)
    tiles = SimpleNamespace(scratch={"surface": path, "depth": tmp_path / "depth.tif"},
                            any_valid={"surface": True, "depth": True}, all_valid={"surface": True, "depth": True})
    (lines, levels, flags), trace = tiled.contours_and_trace_of_blocks(tiles, grid, depth, interval_m=7.0)
    assert made == []
    ref = contour_lines_from_file(path, grid, interval_m=7.0)  # trimmed with FileMask
    assert len(lines) > 20 and [g.wkb for g in lines] == [g.wkb for g in ref[0]] and np.array_equal(levels, ref[1])
