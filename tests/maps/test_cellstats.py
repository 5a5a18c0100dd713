"""Thickness statistics in bounded memory: the figures from values read in pieces are numpy's on
the whole array, exactly (numpy is the outside reference: np.mean, np.std and np.percentile with
its default linear method, numpy 1.26)."""
from __future__ import annotations

import numpy as np
import pytest

import strikeline.maps.cellstats as cellstats
from strikeline.maps.cellstats import cell_statistics

QS = (0, 10, 25, 50, 90, 99.9, 100)


def _pieces(x, sizes):
    def passes():
        k = i = 0
        while k < x.size:
            m = sizes[i % len(sizes)]
            i += 1
            yield x[k:k + m]
            k += m
    return passes


def _numpy(x):
    # Source: numpy 1.26 on the whole array (the in-memory chain's own calls)
    return {"n_cells": x.size, "mean_m": float(np.mean(x)), "std_m": float(np.std(x)),
            **{f"p{q:g}_m": float(np.percentile(x, q)) for q in QS}}


CASES = {
    "normal": lambda rng, n: rng.standard_normal(n) * 7.0 + 60.0,
    "constant": lambda rng, n: np.full(n, 42.5),
    "three values": lambda rng, n: rng.integers(0, 3, n) * 1.5 + 10.0,
    "both signs": lambda rng, n: rng.standard_normal(n) * 3.0 - 1.0,
    "wide": lambda rng, n: rng.lognormal(3.0, 2.0, n),
}


@pytest.mark.parametrize("n", [1, 2, 7, 129, 8191, 8192, 8193, 30001])
@pytest.mark.parametrize("case", sorted(CASES))
def test_pieces_give_numpys_numbers(n, case):
    x = CASES[case](np.random.default_rng(n), n)
    got = cell_statistics(_pieces(x, [1, 5000, 9000, 77, 13]), percentiles=QS)
    assert got == _numpy(x)  # exactly: the same float64 numbers
    assert cell_statistics(x, percentiles=QS) == _numpy(x)


@pytest.mark.parametrize("case", sorted(CASES))
def test_deep_selection_when_bins_are_crowded(monkeypatch, case):
    """Bins of more than COLLECT_CAP values are refined digit by digit, down to the whole key."""
    monkeypatch.setattr(cellstats, "COLLECT_CAP", 5)
    x = CASES[case](np.random.default_rng(7), 40_000)
    assert cell_statistics(_pieces(x, [3000, 17]), percentiles=QS) == _numpy(x)


def test_numpys_buffer_size_is_followed():
    """numpy sums a float64 array in blocks of its buffer size: a program that changes it gets
    numpy's numbers still."""
    x = CASES["normal"](np.random.default_rng(11), 50_001)
    old = np.setbufsize(4096)
    try:
        assert cell_statistics(_pieces(x, [3001, 17]), percentiles=QS) == _numpy(x)
    finally:
        np.setbufsize(old)


def test_no_cells():
    want = {"n_cells": 0, "mean_m": None, "std_m": None, "p10_m": None, "p90_m": None}
    assert cell_statistics(np.empty(0)) == want
    assert cell_statistics(_pieces(np.empty(0), [5])) == want


def test_in_reach_values_of_a_scratch_file_in_tiny_bands(tmp_path):
    """The block path's scratch copy read back in bands of 3 rows gives numpy's figures on the
    array's finite cells (row-major)."""
    from strikeline.geometry.grid import Grid
    from strikeline.io.gridfiles import StripWriter
    from strikeline.pipeline.thickness_stats import in_reach_values

    rng = np.random.default_rng(5)
    grid = Grid((500000.0, 10.0, 0.0, 4000200.0, 0.0, -10.0), (20, 31), "", None)
    a = rng.standard_normal(grid.shape) * 4.0 + 30.0
    a[rng.random(grid.shape) < 0.3] = np.nan
    w = StripWriter(tmp_path / "t.tif", grid, scratch=True)
    w.write_rows(0, a)
    path = w.close()
    got = cell_statistics(in_reach_values(path, grid, band_rows=3), percentiles=QS)
    assert got == _numpy(a[np.isfinite(a)])
