"""The block path's writing lanes (strikeline.pipeline.tiled._stream_blocks): each file takes its
blocks in the grid's order whichever file is slow, and a failure or a cancel anywhere stops the
pass with nothing left behind.

Ground: R's ``volcano`` data set (test_data/real/volcano, a real DEM shipped with R) and a plane
fitted to the picks on its mapped contact, evaluated on a 600 x 600 grid of 1 m cells over its
corner (3 x 3 blocks of 256 x 256). References: GDAL's GTiff driver reading the files back
against the model's whole-grid evaluation rounded by numpy to float32, and the same pass on one
thread.
"""
from __future__ import annotations

import sys
import threading
import time
from pathlib import Path

import numpy as np
import pytest

gdal = pytest.importorskip("osgeo.gdal")

from strikeline import vocabulary as V  # noqa: E402
from strikeline.errors import CancelledError, OutputError  # noqa: E402
from strikeline.geometry.grid import Grid  # noqa: E402
from strikeline.io.gridfiles import StripWriter  # noqa: E402
from strikeline.pipeline import load_inputs, tiled  # noqa: E402
from strikeline.pipeline.options import RunOptions  # noqa: E402

REPO = Path(__file__).resolve().parents[2]
VOLCANO = REPO / "test_data" / "real" / "volcano"
sys.path.insert(0, str(REPO / "tests"))
from helpers import sha256_of as _sha  # noqa: E402
BLOCK = (256, 256)


@pytest.fixture(scope="module")
def sheet():
    from strikeline.pipeline.steps import collect_picks
    from strikeline.surfaces import fit_surface

    opts = RunOptions(out="unused", contacts=str(VOLCANO / "plane" / "contacts.gpkg"), dem=str(VOLCANO / "dem.tif"))
    inputs = load_inputs(opts)
    model = fit_surface(collect_picks(inputs).xyz, model="plane")
    x0, _, _, y0, _, _ = inputs.dem_grid.transform
    grid = Grid((x0, 1.0, 0.0, y0, 0.0, -1.0), (600, 600), inputs.dem_grid.crs_wkt, inputs.dem_grid.nodata)
    return model, grid


def _pool_threads() -> int:
    return sum(1 for t in threading.enumerate() if t.name.startswith("ThreadPoolExecutor"))


def _spy_writes(monkeypatch, *, slow: str | None = None, fail_at=None):
    """Record every write_block call as (file name, r0, c0); ``slow``: a file whose writes each
    take 20 ms longer; ``fail_at``: (file name, call number) that raises OutputError."""
    calls, lock = [], threading.Lock()
    original = StripWriter.write_block

    def spy(self, r0, c0, values):
        name = Path(self.path).name
        with lock:
            calls.append((name, r0, c0))
            nth = sum(1 for c in calls if c[0] == name)
        if fail_at is not None and (name, nth) == fail_at:
            raise OutputError(f"'{self.path}': GDAL could not write it (disk full, from the test)")
        if name == slow:
            time.sleep(0.02)
        return original(self, r0, c0, values)

    monkeypatch.setattr(StripWriter, "write_block", spy)
    return calls


def test_each_file_takes_its_blocks_in_order_while_one_file_is_slow(tmp_path, monkeypatch, sheet):
    model, grid = sheet
    calls = _spy_writes(monkeypatch, slow=V.DIP.file)
    seen = []
    (tmp_path / "two").mkdir()
    (tmp_path / "one").mkdir()
    tiles = tiled.grids_by_blocks(model, grid, tmp_path / "two", block_shape=BLOCK, threads=2, progress=seen.append)
    windows = [(r0, c0) for band in tiled.block_windows(grid.shape, BLOCK) for r0, _, c0, _ in band]
    names = {c[0] for c in calls}
    assert len(names) == 5  # four outputs and the surface's scratch copy
    for name in names:
        assert [(r, c) for n, r, c in calls if n == name] == windows, name
    assert seen == sorted(seen) and seen[-1] == 1.0  # progress rises to the whole grid
    # Source: GDAL's GTiff driver reads back the model's whole-grid values rounded to float32 (numpy)
    with_gdal = gdal.Open(str(tiles.files[V.SURFACE.file].path)).ReadAsArray()
    np.testing.assert_array_equal(with_gdal, model.evaluate_grid(grid).astype(np.float32))
    # the same pass on one thread writes the same bytes
    monkeypatch.undo()
    one = tiled.grids_by_blocks(model, grid, tmp_path / "one", block_shape=BLOCK, threads=1)
    for name, gf in tiles.files.items():
        assert _sha(gf.path) == _sha(one.files[name].path), name


@pytest.mark.parametrize("fail_at", [(V.DIP.file, 1), (V.UNCERTAINTY.file, 5), ("surface_f64.tif", 9)])
def test_a_failed_write_stops_the_pass_and_leaves_nothing(tmp_path, monkeypatch, sheet, fail_at):
    model, grid = sheet
    _spy_writes(monkeypatch, fail_at=fail_at)
    pools = _pool_threads()
    out = tmp_path / "out"
    out.mkdir()
    (out / "kept.txt").write_text("not ours")
    with pytest.raises(OutputError, match="disk full, from the test"):
        tiled.grids_by_blocks(model, grid, out, block_shape=BLOCK, threads=2)
    assert sorted(p.name for p in out.iterdir()) == ["kept.txt"]  # no file, no .part, no scratch folder
    assert _pool_threads() == pools  # the pass's threads have ended: none writes after the error


def test_a_failed_block_stops_the_pass_and_leaves_nothing(tmp_path, sheet):
    model, grid = sheet
    count = {"n": 0}
    lock = threading.Lock()

    class Failing:
        def __getattr__(self, name):
            return getattr(model, name)

        def standard_error_grid(self, *a, **k):
            with lock:
                count["n"] += 1
                if count["n"] == 2:
                    raise MemoryError("from the test")
            return model.standard_error_grid(*a, **k)

    with pytest.raises(MemoryError, match="from the test"):
        tiled.grids_by_blocks(Failing(), grid, tmp_path, block_shape=BLOCK, threads=2)
    assert list(tmp_path.iterdir()) == []


def test_a_cancel_stops_between_blocks_and_leaves_nothing(tmp_path, sheet):
    model, grid = sheet
    seen = []
    with pytest.raises(CancelledError, match="nothing was written"):
        tiled.grids_by_blocks(model, grid, tmp_path, block_shape=BLOCK, threads=2, progress=seen.append,
                              is_cancelled=lambda: bool(seen))
    assert seen and seen[-1] < 1.0
    assert list(tmp_path.iterdir()) == []
