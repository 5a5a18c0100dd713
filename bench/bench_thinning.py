"""Thinning 100,000 clustered picks to at most 2,000 representatives (strikeline.picks.thinning).

Workload: 100 random-walk lines of 1,000 picks each (5 m steps) on a 10 km sheet, the same
picks as ``tests/test_thinning.py``. Prints the time of ``thin_picks`` (best and median of 5)
against a reference measured in the same run: ``scipy.stats.binned_statistic_2d`` computing the
cell centroids once on the final lattice (no bisection). Target: under 2 s.
Run: ``.venv/bin/python bench/bench_thinning.py``.
"""
from __future__ import annotations

import statistics
import time

import numpy as np
from scipy.stats import binned_statistic_2d

from strikeline.picks.thinning import thin_picks


def clustered_lines(n, rng, sheet=10_000.0, n_lines=100):
    per = n // n_lines
    out = []
    for _ in range(n_lines):
        x0, y0 = rng.uniform(0, sheet, 2)
        h = rng.uniform(0, 2 * np.pi) + np.cumsum(rng.normal(0, 0.02, per))
        out.append(np.column_stack([x0 + np.cumsum(5 * np.cos(h)), y0 + np.cumsum(5 * np.sin(h))]))
    xy = np.vstack(out)
    return np.column_stack([xy, 100 + 0.01 * xy[:, 0]])


def timed(fn, repeat=5):
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return out, min(times), statistics.median(times)


def main():
    p = clustered_lines(100_000, np.random.default_rng(5))
    t, best, med = timed(lambda: thin_picks(p, max_points=2000))
    cell = t.cell_m
    lo = p[:, :2].min(axis=0)
    nx = int(np.ceil((p[:, 0].max() - lo[0]) / cell)) + 1
    ny = int(np.ceil((p[:, 1].max() - lo[1]) / cell)) + 1
    edges = (lo[0] + cell * np.arange(nx + 1), lo[1] + cell * np.arange(ny + 1))
    _, ref_best, ref_med = timed(lambda: binned_statistic_2d(p[:, 0], p[:, 1], p[:, 2], "mean", bins=edges))
    print(f"thin_picks: 100,000 picks -> {len(t)} representatives (cell {cell:.1f} m): "
          f"best {best:.3f} s, median {med:.3f} s (target < 2 s)")
    print(f"reference scipy binned_statistic_2d, one pass on the final lattice: best {ref_best:.3f} s, "
          f"median {ref_med:.3f} s; ratio {best / ref_best:.1f}x")


if __name__ == "__main__":
    main()
