"""Benchmark: surface models from 100,000 picks to a 2,000 x 2,000 grid (a script, not a test).

Workload (deterministic, fictional):

* a 10 km x 10 km sheet whose contact surface is folded and tilted,
  ``z = 300 + 0.03 x − 0.01 y + 60 sin(2π y / 4,000) + 25 cos(2π x / 5,000)`` (metres);
* 100,000 picks clustered along 160 meandering synthetic contact lines (a pick every ~6 m,
  like DEM sampling), with 1 m of Gaussian noise; each line is split into 1 km segments for
  the cross-validation groups (:func:`strikeline.stats.segment_groups`);
* ``fit_surface(model='auto')``: thinning to 2,000 representatives, 5-fold grouped
  cross-validation of plane, trend2 and spline (GCV smoothing), refit of the chosen model;
* ``evaluate_grid`` on a 2,000 x 2,000 grid of 5 m cells (coarse evaluation + bicubic
  interpolation, checked against full evaluation), then ``standard_error_grid``.

Prints the workload, seconds per stage, the total, the largest difference between the grid and
full evaluation at 20,000 random cells (independent of the method's own check cells), and the
peak memory as the process's peak resident set size (``resource.getrusage(RUSAGE_SELF)
.ru_maxrss``: everything the process held, Python and libraries included).

Reference measured in the same run: ``scipy.interpolate.griddata`` (linear on the Delaunay
triangulation) from as many picks as the model keeps (a random subset) onto the same grid, its time,
peak memory and RMS against the truth inside the hull - a general-purpose interpolator's speed
and accuracy on the same picks.

Targets (the project's): under 30 s on 2 cores and under 2 GiB peak memory.

Run:  .venv/bin/python bench/bench_surfaces.py [--picks 100000] [--cells 2000]

``--sheet N`` instead times the model and grid steps of the bench sheets (:mod:`_sheets`: a 15 km
square of invented hills, N x N DEM cells) with a planar contact and with a curved one (the
plunging fold), in this process: CPU seconds (``time.process_time``, less sensitive than wall time
to other work on the machine) of ``model_surface`` and of the grids (``evaluate_grid``,
``standard_error_grid``, ``dip_grids``), best of ``--repeat`` runs of the grids, and the curved
sheet's figures over the planar sheet's measured in the same run (the target: at most 1.5).
"""
from __future__ import annotations

import argparse
import os
import resource

import numpy as np
from scipy.interpolate import griddata

from _measure import load_line, machine_line, measured, result_line
from strikeline.stats import segment_groups
from strikeline.geometry.grid import Grid
from strikeline.surfaces import fit_surface

SHEET_M = 10_000.0
N_LINES = 160
NOISE_M = 1.0
SEGMENT_M = 1_000.0
TARGET_S = 30.0
TARGET_GIB = 2.0


def truth(x, y):
    return (300.0 + 0.03 * x - 0.01 * y + 60.0 * np.sin(2 * np.pi * y / 4_000.0)
            + 25.0 * np.cos(2 * np.pi * x / 5_000.0))


def make_picks(n_picks, rng):
    """Picks along meandering lines inside the sheet: (xyz, line id)."""
    per_line = n_picks // N_LINES
    xs, ids = [], []
    for i in range(N_LINES):
        x0, y0 = rng.uniform(0.05 * SHEET_M, 0.95 * SHEET_M, 2)
        heading = rng.uniform(0, 2 * np.pi) + np.cumsum(rng.normal(0, 0.02, per_line))
        step = 6.0
        x = x0 + np.cumsum(step * np.cos(heading))
        y = y0 + np.cumsum(step * np.sin(heading))
        # fold the path back into the sheet (reflect at the edges)
        x = np.abs(np.mod(x + SHEET_M, 2 * SHEET_M) - SHEET_M)
        y = np.abs(np.mod(y + SHEET_M, 2 * SHEET_M) - SHEET_M)
        xs.append(np.column_stack([x, y]))
        ids.append(np.full(per_line, i))
    xy = np.vstack(xs)
    z = truth(xy[:, 0], xy[:, 1]) + rng.normal(0, NOISE_M, len(xy))
    return np.column_stack([xy, z]), np.concatenate(ids)


def sheet_model_inputs(tmp, n: int, surface: str) -> dict:
    """The arguments of :func:`strikeline.pipeline.model_surface` for one bench sheet of ``n`` x
    ``n`` DEM cells (``surface``: plane or fold), its picks collected as a run collects them;
    ``picks``, ``opts`` and ``grid`` first, then the keywords."""
    from pathlib import Path

    import _sheets
    from strikeline.maps.trace import vertex_spacing_m
    from strikeline.pipeline import RunOptions, collect_picks, load_inputs, pick_sigmas, surface_grid
    size_m = 15_000.0
    folder = Path(tmp) / surface
    folder.mkdir()
    f = (_sheets.plane_surface if surface == "plane" else _sheets.fold_surface)(size_m)
    _sheets.write_traces(folder / "contacts.gpkg", size_m, [f])
    _sheets.write_dem(folder / "dem.tif", n, size_m)
    opts = RunOptions(contacts=str(folder / "contacts.gpkg"), dem=str(folder / "dem.tif"), out=str(folder / "out"))
    inputs = load_inputs(opts)
    picks = collect_picks(inputs, spacing_m=opts.pick_spacing_m)
    return dict(picks=picks, opts=opts, grid=surface_grid(inputs, opts), what=surface,
                sigma=pick_sigmas(inputs, picks, opts), vertex_spacing_m=vertex_spacing_m(inputs.contacts.geoms))


def sheet_steps(tmp, n: int, surface: str, repeat: int) -> dict:
    """CPU seconds of the model and grid steps of one bench sheet (``surface``: plane or fold)."""
    import time

    from strikeline.maps import dip_grids
    from strikeline.pipeline import model_surface
    args = sheet_model_inputs(tmp, n, surface)
    picks, opts, grid = args.pop("picks"), args.pop("opts"), args.pop("grid")
    t0 = time.process_time()
    model = model_surface(picks, opts, grid, **args)
    out = {"model": time.process_time() - t0, "kind": model.kind, "n": len(picks.xyz)}
    for name in ("evaluate_grid", "standard_error_grid", "dip_grids"):
        out[name] = float("inf")
    for _ in range(repeat):
        model._grid_plans.clear()  # the coarse lattice is made again, as in a fresh run
        t0 = time.process_time()
        z, rep = model.evaluate_grid(grid, return_report=True)
        t1 = time.process_time()
        model.standard_error_grid(grid)
        t2 = time.process_time()
        dip_grids(z, grid)
        t3 = time.process_time()
        for name, t in zip(("evaluate_grid", "standard_error_grid", "dip_grids"), (t1 - t0, t2 - t1, t3 - t2)):
            out[name] = min(out[name], t)
        del z
    out["report"] = rep
    return out


def main_sheet(n: int, repeat: int) -> None:
    import tempfile
    machine_line()
    print(f"workload: bench sheets of 15 km, {n:,} x {n:,} DEM cells, a planar and a folded contact; CPU seconds "
          f"(process_time), grids best of {repeat}")
    with tempfile.TemporaryDirectory(prefix="strikeline-bench-surfaces-") as tmp:
        res = {s: sheet_steps(tmp, n, s, repeat) for s in ("plane", "fold")}
    steps = ("model", "evaluate_grid", "standard_error_grid", "dip_grids")
    for s, r in res.items():
        grids = sum(r[k] for k in steps[1:])
        print(f"  {s:5s} sheet: model {r['kind']} from {r['n']:,} picks; CPU model {r['model']:.2f} s, "
              + ", ".join(f"{k} {r[k]:.2f} s" for k in steps[1:]) + f"; grids {grids:.2f} s; {r['report']}")
    p, f = res["plane"], res["fold"]
    gp, gf = (sum(r[k] for k in steps[1:]) for r in (p, f))
    print(f"result: curved / planar sheet, same run | model {f['model'] / p['model']:.2f} x | grids {gf / gp:.2f} x "
          f"| model + grids {(f['model'] + gf) / (p['model'] + gp):.2f} x (target <= 1.5)")
    load_line("at the end")


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--picks", type=int, default=100_000)
    ap.add_argument("--cells", type=int, default=2_000)
    ap.add_argument("--max-points", type=int, default=2_000)
    ap.add_argument("--sheet", type=int, help="time plane and fold bench sheets of this many cells a side instead")
    ap.add_argument("--repeat", type=int, default=2, help="runs of the grid steps with --sheet (best taken)")
    args = ap.parse_args()
    if args.sheet:
        main_sheet(args.sheet, max(1, args.repeat))
        return
    machine_line()
    rng = np.random.default_rng(20240604)
    xyz, line = make_picks(args.picks, rng)
    groups = segment_groups(xyz[:, 0], xyz[:, 1], line, block_m=SEGMENT_M)
    cell = SHEET_M / args.cells
    grid = Grid((0.0, cell, 0.0, SHEET_M, 0.0, -cell), (args.cells, args.cells))
    print(f"workload: {len(xyz):,} picks on {N_LINES} contact lines ({len(np.unique(groups))} "
          f"segments of <= {SEGMENT_M:.0f} m), noise {NOISE_M} m; grid {args.cells:,} x "
          f"{args.cells:,} cells of {cell:g} m; cores {os.cpu_count()}")

    with measured() as m_all:
        with measured() as m_fit:
            model = fit_surface(xyz, model="auto", groups=groups, max_points=args.max_points)
        with measured() as m_grid:
            z, rep = model.evaluate_grid(grid, return_report=True)
        with measured() as m_se:
            se = model.standard_error_grid(grid)
    t0, t1, t2, t3 = 0.0, m_fit.wall_s, m_fit.wall_s + m_grid.wall_s, m_fit.wall_s + m_grid.wall_s + m_se.wall_s

    r = rng.integers(0, args.cells, 20_000)
    c = rng.integers(0, args.cells, 20_000)
    xs, ys = grid.cell_centres()
    full = model.evaluate(xs[c], ys[r])
    err_full = float(np.abs(z[r, c] - full).max())
    X, Y = xs[c], ys[r]
    inside = model.hull_distance(X, Y) == 0
    err_truth = z[r, c][inside] - truth(X, Y)[inside]
    peak_gib = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 2 ** 20  # KiB on Linux

    print(f"model: chosen {model.kind}; cv_rmse_m "
          + ", ".join(f"{k} {v:.2f}" for k, v in model.cv_rmse_m.items())
          + f"; {model.n_used} representatives (cell {model.thin_cell_m:.1f} m), "
          f"{model.n_folds} folds")
    print(f"grid: {rep.method} step {rep.step_cells} cells, max checked error "
          f"{rep.max_checked_error_m:.4f} m at {rep.n_checked} cells; max error vs full "
          f"evaluation at 20,000 random cells {err_full:.4f} m; RMS vs truth inside hull "
          f"{np.sqrt(np.mean(err_truth ** 2)):.2f} m; standard error {np.nanmin(se):.2f}-"
          f"{np.nanmax(se):.2f} m")
    print(f"seconds: fit {t1 - t0:.2f}, evaluate_grid {t2 - t1:.2f}, standard_error_grid "
          f"{t3 - t2:.2f}; total {t3 - t0:.2f} (target < {TARGET_S:.0f})")
    print(f"peak memory (ru_maxrss, whole process): {peak_gib:.2f} GiB (target < "
          f"{TARGET_GIB:.0f})")
    sub = rng.choice(len(xyz), size=min(len(xyz), model.n_used), replace=False)
    with measured() as m_ref:
        zref = griddata(xyz[sub, :2], xyz[sub, 2], (xs[None, :], ys[:, None]), method="linear")
    ref_err = zref[r, c][inside] - truth(X, Y)[inside]
    ref_rms = float(np.sqrt(np.nanmean(ref_err ** 2)))
    del zref
    rms = float(np.sqrt(np.mean(err_truth ** 2)))
    result_line(f"scipy griddata linear from {len(sub):,} picks to {args.cells:,}^2 (reference)", m_ref,
                extra=f"RMS vs truth in hull {ref_rms:.2f} m")
    result_line(f"fit_surface auto from {len(xyz):,} picks + grid + standard error, {args.cells:,}^2", m_all,
                ratio=m_all.wall_s / m_ref.wall_s, reference="scipy griddata",
                extra=f"fit {m_fit.wall_s:.1f} s (cpu/wall {m_fit.cpu_per_wall:.2f}), grid {m_grid.wall_s:.1f} s, "
                      f"se {m_se.wall_s:.1f} s; model {model.kind}, RMS vs truth in hull {rms:.2f} m "
                      f"(reference's {ref_rms:.2f})")
    load_line("at the end")


if __name__ == "__main__":
    main()
