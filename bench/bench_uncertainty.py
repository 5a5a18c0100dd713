"""Benchmark: the uncertainty grid and the extrapolation flag (a script, not a test).

A fictional folded contact mapped as eight sinuous lines over a 20 km sheet (picks every 10 m,
elevations from an invented fold), fitted as a plane and as a spline (strikeline.surfaces.
fit_surface); on an N x N grid of 5 m cells it times, against the previous computation in the same
run:

- the standard-error grid: SurfaceModel.standard_error_grid (distance to data by lower envelope
  row by row, blocks of rows in threads) vs the per-cell formula with one KD-tree search per cell
  (SurfaceModel.standard_error on the mesh, as the grid was made before);
- the extrapolation flag at the points of densified structure contours: is_extrapolated (KD-tree
  search bounded by the reach) vs the unbounded distance compared with the reach.

Both must give identical values; prints wall and CPU time and the ratio.

Run:  .venv/bin/python bench/bench_uncertainty.py [--cells 2000]
"""
from __future__ import annotations

import argparse
import os
import time

import numpy as np
import shapely
from _measure import load_line, machine_line, measure, result_line

from strikeline.geometry.grid import Grid
from strikeline.surfaces import fit_surface
from strikeline.surfaces.hull import distance_to_data

CELL_M = 5.0


def fold_z(x, y):
    """The invented fold: a plane dipping gently east with an anticline along y."""
    return 400.0 - 0.02 * (x - 400_000.0) + 80.0 * np.cos((y - 5_300_000.0) / 2500.0)


def contact_picks(extent_m: float, rng) -> np.ndarray:
    """Picks every 10 m along eight sinuous lines across the middle of the sheet."""
    pts = []
    for k in range(8):
        t = np.arange(0.0, 0.6 * extent_m, 10.0)
        x = 400_000.0 + 0.2 * extent_m + t
        y = 5_300_000.0 + (0.25 + 0.07 * k) * extent_m + 300 * np.sin(t / (900.0 + 130 * k)) + rng.normal(0, 2, t.size)
        pts.append(np.column_stack([x, y, fold_z(x, y) + rng.normal(0, 1.0, t.size)]))
    return np.vstack(pts)


def timed(fn):
    t, c = time.perf_counter(), time.process_time()
    out = fn()
    return out, time.perf_counter() - t, time.process_time() - c


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cells", type=int, default=2000)
    args = ap.parse_args(argv)
    n = args.cells
    extent = n * CELL_M
    grid = Grid((400_000.0, CELL_M, 0.0, 5_300_000.0 + extent, 0.0, -CELL_M), (n, n))
    xyz = contact_picks(extent, np.random.default_rng(7))
    machine_line()
    load_line("start")
    print(f"workload: {n} x {n} grid of {CELL_M:g} m cells; {len(xyz)} picks on 8 lines; "
          f"{os.cpu_count()} CPUs, load {os.getloadavg()[0]:.1f}")
    for kind in ("plane", "spline"):
        model, t_fit, _ = timed(lambda: fit_surface(xyz, model=kind, seed=0, max_points=3000))
        print(f"{kind}: fitted in {t_fit:.1f} s ({model.n_used} data used, reach {model.reach_m:.0f} m)")
        xs, ys = grid.cell_centres()

        def previous():
            out = np.empty(grid.shape)
            step = max(1, (1 << 20) // n)
            for r0 in range(0, n, step):
                X, Y = np.meshgrid(xs, ys[r0:r0 + step])
                out[r0:r0 + step] = model.standard_error(X, Y)
            return out
        old, m_old = measure(previous)
        new, m_new = measure(lambda: model.standard_error_grid(grid))
        same = np.array_equal(old, new)
        print(f"  standard-error grid: per-cell KD-tree {m_old.wall_s:6.2f} s (cpu {m_old.cpu_s:6.2f}); "
              f"standard_error_grid {m_new.wall_s:6.2f} s (cpu {m_new.cpu_s:6.2f}); "
              f"{m_old.wall_s / m_new.wall_s:.1f}x; identical: {same}")
        result_line(f"standard-error grid of a {kind} surface, {n:,}^2 cells, {len(xyz):,} picks "
                    f"(standard_error_grid)", m_new, ratio=m_new.wall_s / m_old.wall_s,
                    reference=(f"of the per-cell formula with one KD-tree search per cell "
                               f"({m_old.wall_s:.2f} s, {m_old.cpu_s:.2f} s CPU)"),
                    extra=f"values identical: {same}")
        z = model.evaluate_grid(grid)
        from strikeline.io.contours import contour_lines
        geoms, _ = contour_lines(z, grid, interval_m=10.0)
        pts = shapely.get_coordinates(shapely.segmentize(np.asarray(geoms, dtype=object), CELL_M))
        old_f, t_old, _ = timed(lambda: distance_to_data(pts[:, 0], pts[:, 1], model.data_xy) > model.reach_m)
        new_f, t_new, _ = timed(lambda: model.is_extrapolated(pts[:, 0], pts[:, 1]))
        print(f"  extrapolation flag at {len(pts)} contour points: unbounded {t_old:6.2f} s; bounded "
              f"{t_new:6.2f} s; {t_old / t_new:.1f}x; identical: {np.array_equal(old_f, new_f)} "
              f"({old_f.mean():.0%} extrapolated)")
    load_line("end")


if __name__ == "__main__":
    main()
