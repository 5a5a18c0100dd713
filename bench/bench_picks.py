"""Benchmark: elevation picks on a synthetic large sheet (a script, not a test).

Builds, deterministically, a fictional 20 km x 20 km sheet:

* 5,000 topographic contour lines with 2,000,000 vertices: 250 hills, each ringed by 20
  closed, wavy contour loops of 400 vertices at a 10 m interval;
* 200 mapped contact lines of 2,000 vertices each, meandering across the sheet;
* a 5,000 x 5,000 float32 DEM at 4 m cells (about 100 MB) with a nodata hole.

and times :func:`strikeline.picks.picks_from_contours` (target: under 2 s) and
:func:`strikeline.picks.picks_from_dem`. Prints the workload, the number of picks and the
seconds (best and median of ``--repeat`` runs).

Run:  .venv/bin/python bench/bench_picks.py [--repeat 3]
"""
from __future__ import annotations

import argparse
import os
import statistics
import time

import numpy as np
import shapely

from strikeline.geometry.grid import Grid
from strikeline.picks import picks_from_contours, picks_from_dem

SHEET_M = 20_000.0
N_HILLS = 250
RINGS_PER_HILL = 20
VERTICES_PER_RING = 400
N_CONTACTS = 200
VERTICES_PER_CONTACT = 2_000
DEM_CELLS = 5_000
TARGET_CONTOURS_S = 2.0


def make_contours(rng):
    theta = np.linspace(0.0, 2.0 * np.pi, VERTICES_PER_RING)
    centres = rng.uniform(1_000.0, SHEET_M - 1_000.0, (N_HILLS, 2))
    r_base = rng.uniform(300.0, 900.0, N_HILLS)
    phase = rng.uniform(0.0, 2.0 * np.pi, (N_HILLS, 2))
    base_m = rng.uniform(200.0, 400.0, N_HILLS).round(-1)
    j = np.arange(RINGS_PER_HILL)
    # radius[h, j, k]: ring j of hill h, vertex k
    wobble = (1.0 + 0.15 * np.sin(3 * theta[None, :] + phase[:, :1])
              + 0.05 * np.sin(7 * theta[None, :] + phase[:, 1:]))
    radius = (r_base[:, None, None] * (1.0 - j[None, :, None] / (RINGS_PER_HILL + 1))
              * wobble[:, None, :])
    x = centres[:, 0, None, None] + radius * np.cos(theta)
    y = centres[:, 1, None, None] + radius * np.sin(theta)
    x[..., -1] = x[..., 0]
    y[..., -1] = y[..., 0]
    coords = np.column_stack([x.ravel(), y.ravel()])
    index = np.repeat(np.arange(N_HILLS * RINGS_PER_HILL), VERTICES_PER_RING)
    lines = shapely.linestrings(coords, indices=index)
    elevations = (base_m[:, None] + 10.0 * j[None, :]).ravel()
    return lines, elevations


def make_contacts(rng):
    x = np.tile(np.linspace(0.0, SHEET_M, VERTICES_PER_CONTACT), N_CONTACTS)
    y0 = np.repeat(rng.uniform(500.0, SHEET_M - 500.0, N_CONTACTS), VERTICES_PER_CONTACT)
    ph = np.repeat(rng.uniform(0.0, 2.0 * np.pi, N_CONTACTS), VERTICES_PER_CONTACT)
    y = y0 + 400.0 * np.sin(x / 1_500.0 + ph) + rng.normal(0.0, 5.0, x.size)
    index = np.repeat(np.arange(N_CONTACTS), VERTICES_PER_CONTACT)
    return shapely.linestrings(np.column_stack([x, y]), indices=index)


def make_dem():
    cell = SHEET_M / DEM_CELLS
    grid = Grid((0.0, cell, 0.0, SHEET_M, 0.0, -cell), (DEM_CELLS, DEM_CELLS), nodata=-9999.0)
    xs, ys = grid.cell_centres()
    dem = (300.0 + 0.01 * xs[None, :] - 0.005 * ys[:, None]
           + 40.0 * np.sin(xs[None, :] / 900.0) * np.cos(ys[:, None] / 1_300.0)).astype(np.float32)
    dem[2_000:2_300, 2_000:2_600] = -9999.0  # a lake mask
    return dem, grid


def timed(fn, repeat):
    times, result = [], None
    for _ in range(repeat):
        t0 = time.perf_counter()
        result = fn()
        times.append(time.perf_counter() - t0)
    return result, times[0], min(times), statistics.median(times)


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    rng = np.random.default_rng(20240611)
    print(f"strikeline picks benchmark - {os.cpu_count()} CPU(s), shapely {shapely.__version__}, "
          f"GEOS {'.'.join(map(str, shapely.geos_version))}, numpy {np.__version__}")

    t0 = time.perf_counter()
    contours, elevations = make_contours(rng)
    contacts = make_contacts(rng)
    print(f"built sheet in {time.perf_counter() - t0:.2f} s")
    n_cv = int(shapely.get_num_coordinates(contours).sum())
    n_kv = int(shapely.get_num_coordinates(contacts).sum())
    print(f"workload: {len(contours):,} contour lines ({n_cv:,} vertices), "
          f"{len(contacts):,} contact lines ({n_kv:,} vertices, "
          f"{shapely.length(contacts).sum() / 1000:,.0f} km)")

    for workers in (None, 1):
        picks, first, best, med = timed(
            lambda: picks_from_contours(contacts, contours, elevations, workers=workers),
            args.repeat)
        label = "all CPUs" if workers is None else f"{workers} thread"
        verdict = "" if workers else ("  [target < %.1f s: %s]" % (
            TARGET_CONTOURS_S, "met" if best < TARGET_CONTOURS_S else "NOT met"))
        print(f"picks_from_contours ({label}): {len(picks):,} picks, best {best:.3f} s, "
              f"median {med:.3f} s of {args.repeat} (first {first:.3f} s){verdict}")

    t0 = time.perf_counter()
    dem, grid = make_dem()
    print(f"DEM: {grid.rows:,} x {grid.cols:,} float32 cells of {grid.cell_x_m:g} m "
          f"({dem.nbytes / 2**20:.0f} MiB), built in {time.perf_counter() - t0:.2f} s")
    picks, first, best, med = timed(lambda: picks_from_dem(contacts, dem, grid), args.repeat)
    print(f"picks_from_dem (spacing = cell size {grid.cell_x_m:g} m): {len(picks):,} picks, "
          f"best {best:.3f} s, median {med:.3f} s of {args.repeat} (first {first:.3f} s)")


if __name__ == "__main__":
    main()
