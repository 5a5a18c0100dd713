"""Values computed once per band and shared by its blocks (strikeline.pipeline.band_share).

The standard error of a fitted surface on a real DEM's grid (the volcano sheet, R's ``volcano``
data set) is asked for block by block from several threads at once; each block must hold the
values of the model's per-cell formula with the distance to the nearest datum from scipy's
k-d tree (the outside reference: ``scipy.spatial.cKDTree.query``), and each band must be
computed once, in its row parts.
"""
from __future__ import annotations

import threading
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import numpy as np
import pytest

pytest.importorskip("osgeo.gdal")

from strikeline.pipeline import load_inputs  # noqa: E402
from strikeline.pipeline.band_share import SharedBands  # noqa: E402
from strikeline.pipeline.options import RunOptions  # noqa: E402
from strikeline.pipeline.tiled import block_windows  # noqa: E402

VOLCANO = Path(__file__).resolve().parents[2] / "test_data" / "real" / "volcano"


def _model(kind: str):
    from strikeline.pipeline.steps import collect_picks
    from strikeline.surfaces import fit_surface

    opts = RunOptions(out="unused", contacts=str(next((VOLCANO / "fold").glob("*.gpkg"))), dem=str(VOLCANO / "dem.tif"))
    inputs = load_inputs(opts)
    return fit_surface(collect_picks(inputs).xyz, model=kind), inputs.dem_grid


@pytest.mark.parametrize("kind", ["plane", "spline"])
def test_blocks_from_threads_hold_the_per_cell_values_and_each_band_is_computed_once(kind):
    model, grid = _model(kind)
    calls, lock = [], threading.Lock()

    def rows(a, b):
        with lock:
            calls.append((a, b))
        return model.standard_error_grid(grid, window=(a, b, 0, grid.cols), workers=1)

    block = (13, 9)
    bands = block_windows(grid.shape, block)
    share = SharedBands(rows, uses=len(bands[0]), parts=2)
    windows = [w for band in bands for w in band]
    with ThreadPoolExecutor(max_workers=3) as pool:
        parts = list(pool.map(lambda w: share.get(*w), windows))
    got = np.full(grid.shape, np.nan)
    for (r0, r1, c0, c1), part in zip(windows, parts):
        got[r0:r1, c0:c1] = part
    xs, ys = grid.cell_centres()
    X, Y = np.meshgrid(xs, ys)
    s = model._surface
    # Source: the per-cell formula with scipy's cKDTree distance (standard_error without distance=)
    want = s.standard_error(X.ravel(), Y.ravel()).reshape(X.shape)
    np.testing.assert_allclose(got, want, rtol=1e-12, atol=0)
    # each band once, in two row parts that cover it (arithmetic: a partition of the rows)
    assert sorted(calls) == sorted((a, b) for band in bands for a, b in _halves(band[0][0], band[0][1]))
    assert share._bands == {}  # every band forgotten once its blocks took their columns


def _halves(r0, r1):
    m = int(np.round((r0 + r1) / 2))
    return [(r0, m), (m, r1)] if r1 - r0 > 1 else [(r0, r1)]


def test_a_failed_part_fails_every_block_of_its_band():
    def rows(a, b):
        if a >= 4:
            raise RuntimeError("part failed")
        return np.zeros((b - a, 6))

    share = SharedBands(rows, uses=3, parts=2)
    with ThreadPoolExecutor(max_workers=3) as pool:
        futures = [pool.submit(share.get, 0, 8, c, c + 2) for c in (0, 2, 4)]
    for f in futures:
        with pytest.raises(RuntimeError, match="part failed"):
            f.result()


def test_a_float32_band_holds_each_float64_value_rounded_once():
    model, grid = _model("spline")

    def rows(a, b):
        return model.standard_error_grid(grid, window=(a, b, 0, grid.cols), workers=1)

    block = (13, 9)
    bands = block_windows(grid.shape, block)
    windows = [w for band in bands for w in band]
    got = {}
    for dtype in (None, np.float32):
        share = SharedBands(rows, uses=len(bands[0]), parts=2, dtype=dtype)
        with ThreadPoolExecutor(max_workers=3) as pool:
            parts = list(pool.map(lambda w: share.get(*w), windows))
        got[dtype] = np.full(grid.shape, np.nan, dtype=parts[0].dtype)
        for (r0, r1, c0, c1), part in zip(windows, parts):
            got[dtype][r0:r1, c0:c1] = part
        assert share._bands == {}
    assert got[np.float32].dtype == np.float32 and got[None].dtype == np.float64
    # Source: numpy's float64 -> float32 cast (round to nearest), the cast the output writer makes
    # (strikeline.io.gridfiles.StripWriter: np.asarray(values, dtype=np.float32)): the same bits
    assert np.array_equal(got[np.float32], got[None].astype(np.float32), equal_nan=True)
    xs, ys = grid.cell_centres()
    X, Y = np.meshgrid(xs, ys)
    want = model._surface.standard_error(X.ravel(), Y.ravel()).reshape(X.shape)
    # Source: IEEE 754 binary32, unit roundoff 2**-24 (plus the 1e-12 of the test above)
    np.testing.assert_allclose(got[np.float32], want, rtol=2.0 ** -24 + 1e-12, atol=0)
