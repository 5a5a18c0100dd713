"""Thinning 100,000 clustered picks to at most 2,000 representatives (strikeline.picks.thinning).

Workload: 100 random-walk lines of 1,000 picks each (5 m steps) on a 10 km sheet, the same
picks as ``tests/test_thinning.py``. Prints the time of ``thin_picks`` (best of 5)
and peak memory against a reference measured in the same run: ``scipy.stats.binned_statistic_2d`` computing the
cell centroids once on the final lattice (no bisection). Target: under 2 s.
Run: ``.venv/bin/python bench/bench_thinning.py [--picks 100000]``.
"""
from __future__ import annotations

import argparse

import numpy as np
from scipy.stats import binned_statistic_2d

from _measure import load_line, machine_line, measure, result_line
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


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--picks", type=int, default=100_000)
    args = ap.parse_args()
    machine_line()
    p = clustered_lines(args.picks, np.random.default_rng(5))
    t, m = measure(lambda: thin_picks(p, max_points=2000), 5)
    cell = t.cell_m
    lo = p[:, :2].min(axis=0)
    nx = int(np.ceil((p[:, 0].max() - lo[0]) / cell)) + 1
    ny = int(np.ceil((p[:, 1].max() - lo[1]) / cell)) + 1
    edges = (lo[0] + cell * np.arange(nx + 1), lo[1] + cell * np.arange(ny + 1))
    _, ref = measure(lambda: binned_statistic_2d(p[:, 0], p[:, 1], p[:, 2], "mean", bins=edges), 5)
    result_line(f"scipy binned_statistic_2d on the final lattice, {len(p):,} picks (reference)", ref)
    result_line(f"thin_picks {len(p):,} -> {len(t):,} representatives (cell {cell:.1f} m), best of 5", m,
                ratio=m.wall_s / ref.wall_s, reference="scipy binned_statistic_2d, one pass",
                extra=f"target < 2 s: {'met' if m.wall_s < 2 else 'NOT met'}")
    load_line("at the end")


if __name__ == "__main__":
    main()
