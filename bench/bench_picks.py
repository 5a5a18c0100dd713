"""Benchmark: elevation picks on a synthetic large sheet, against plain shapely (a script, not a test).

Builds, deterministically, a fictional 20 km x 20 km sheet (``--scale`` shrinks every count):

* 5,000 topographic contour lines with 2,000,000 vertices: 250 hills, each ringed by 20
  closed, wavy contour loops of 400 vertices at a 10 m interval;
* 200 mapped contact lines of 2,000 vertices each, meandering across the sheet;
* a 5,000 x 5,000 float32 DEM at 4 m cells (about 100 MB) with a nodata hole.

and times, with its peak memory (growth of the resident high-water mark):

* :func:`strikeline.picks.picks_from_contours` on all CPUs and on one thread (target: under 2 s),
  against the plain-shapely reference in the same run: one ``shapely.STRtree`` of the contour
  lines, a bulk ``query(predicate="intersects")`` with the contacts and ``shapely.intersection``
  of each pair, keeping the points (no cutting into pieces, no merging of copies, no overlaps);
  the picks must be that reference's points, byte for byte (the line after the timings says);
* :func:`strikeline.picks.picks_from_dem` against plain shapely + scipy: every contact densified
  with ``shapely.segmentize`` to at most one cell between vertices (``line_interpolate_point`` per
  point walks the whole line each time: minutes at this size), the DEM's nodata set to NaN and
  sampled bilinearly at the vertices with ``scipy.ndimage.map_coordinates(order=1)``.

Run:  .venv/bin/python bench/bench_picks.py [--repeat 3] [--scale 1.0]
"""
from __future__ import annotations

import argparse
import os
import time

import numpy as np
import shapely
from scipy import ndimage

from _measure import load_line, machine_line, measure, result_line
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


def scale_workload(scale: float) -> None:
    """Shrink the sheet's counts by ``scale`` (1 = the full workload)."""
    global N_HILLS, N_CONTACTS, DEM_CELLS
    N_HILLS = max(2, round(N_HILLS * scale))
    N_CONTACTS = max(2, round(N_CONTACTS * scale))
    DEM_CELLS = max(200, round(DEM_CELLS * scale ** 0.5))


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
    k = DEM_CELLS / 5_000
    dem[int(2_000 * k):int(2_300 * k), int(2_000 * k):int(2_600 * k)] = -9999.0  # a lake mask
    return dem, grid


def shapely_contour_picks(contacts, contours, elevations):
    """Plain shapely: STRtree of contour lines, intersects pairs, exact intersections, points."""
    tree = shapely.STRtree(contours)
    ia, ib = tree.query(contacts, predicate="intersects")
    inter = shapely.intersection(contacts[ia], contours[ib])
    parts, k = shapely.get_parts(inter, return_index=True)
    is_pt = shapely.get_type_id(parts) == 0
    xy = shapely.get_coordinates(parts[is_pt])
    return np.column_stack([xy, elevations[ib[k[is_pt]]]])


def same_points(a, b):
    """Whether two (n, 3) point arrays hold the same rows, bit for bit, in any order."""
    a, b = (np.ascontiguousarray(v[np.lexsort(v.T[::-1])]) for v in (a, b))
    return a.shape == b.shape and a.tobytes() == b.tobytes()


def shapely_dem_picks(contacts, dem, grid):
    """Plain shapely + scipy: vertices added so none is more than a cell apart, bilinear DEM samples."""
    xy = shapely.get_coordinates(shapely.segmentize(contacts, grid.cell_x_m))
    z = np.where(dem == grid.nodata, np.float32(np.nan), dem)
    x0, cx, _, y0, _, cy = grid.transform
    cols = (xy[:, 0] - x0) / cx - 0.5
    rows = (xy[:, 1] - y0) / cy - 0.5
    v = ndimage.map_coordinates(z, [rows, cols], order=1, mode="nearest", prefilter=False)
    ok = np.isfinite(v)
    return np.column_stack([xy[ok], v[ok]])


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--scale", type=float, default=1.0, help="share of the full workload's counts (0-1]")
    args = ap.parse_args()
    scale_workload(args.scale)
    rng = np.random.default_rng(20240611)
    machine_line()
    print(f"shapely {shapely.__version__}, GEOS {'.'.join(map(str, shapely.geos_version))}")

    t0 = time.perf_counter()
    contours, elevations = make_contours(rng)
    contacts = make_contacts(rng)
    print(f"built sheet in {time.perf_counter() - t0:.2f} s")
    n_cv = int(shapely.get_num_coordinates(contours).sum())
    n_kv = int(shapely.get_num_coordinates(contacts).sum())
    print(f"workload: {len(contours):,} contour lines ({n_cv:,} vertices), "
          f"{len(contacts):,} contact lines ({n_kv:,} vertices, "
          f"{shapely.length(contacts).sum() / 1000:,.0f} km), best of {args.repeat}")

    ref_xyz, ref = measure(lambda: shapely_contour_picks(contacts, contours, elevations), args.repeat)
    result_line(f"plain shapely contour crossings ({len(ref_xyz):,} points; reference)", ref)
    for workers in (1, None):
        picks, m = measure(lambda: picks_from_contours(contacts, contours, elevations, workers=workers),
                           args.repeat)
        label = f"{os.cpu_count()} threads" if workers is None else "1 thread"
        verdict = f"target < {TARGET_CONTOURS_S:.0f} s: {'met' if m.wall_s < TARGET_CONTOURS_S else 'NOT met'}"
        result_line(f"picks_from_contours, {label} ({len(picks):,} picks)", m, ratio=m.wall_s / ref.wall_s,
                    reference="plain shapely", extra=verdict)
    print(f"picks_from_contours' points are the plain-shapely crossings, byte for byte: "
          f"{'yes' if same_points(picks.xyz, ref_xyz) else 'NO'}")

    t0 = time.perf_counter()
    dem, grid = make_dem()
    print(f"DEM: {grid.rows:,} x {grid.cols:,} float32 cells of {grid.cell_x_m:g} m "
          f"({dem.nbytes / 2**20:.0f} MiB), built in {time.perf_counter() - t0:.2f} s")
    ref_xyz, ref = measure(lambda: shapely_dem_picks(contacts, dem, grid), args.repeat)
    result_line(f"plain shapely segmentize + scipy bilinear ({len(ref_xyz):,} points; reference)", ref)
    picks, m = measure(lambda: picks_from_dem(contacts, dem, grid), args.repeat)
    result_line(f"picks_from_dem, spacing {grid.cell_x_m:g} m ({len(picks):,} picks)", m,
                ratio=m.wall_s / ref.wall_s, reference="plain shapely + scipy")
    load_line("at the end")


if __name__ == "__main__":
    main()
