"""The map's unit polygons as constraints: how much closer to the true surface every model gets.

Workload: the ``fold_units`` sheets of ``test_data/real/`` (an open fold draped on the 1 m lidar
DEM and on R's ``volcano``, its outcrop trace digitised with a recorded sideways error, and unit
polygons split by that digitised trace with superficial cover laid over parts; truth.json lists
the units above, below and ignored). Each sheet is run through the pipeline's steps in process
with the errors its maker states (``dem_grid.error_m`` as ``--dem-sigma``, ``digitising.sigma_m``
as ``--contact-sigma``), once per ``--model``,
without and with ``--map-units``.

Printed per sheet and model: the RMS of (model - true surface) over the grid cells inside the
convex hull of the picks (``hull``) and over every valid DEM cell (``sheet``), without and with the
polygons, the gain (1 - with/without), the number of constraint points, how many the spline holds
active, the share of check points the final surface still breaks and the fit time. A model that
cannot honour the units (a plane or quadratic on a fold) is reported as refused.

Target (the project's): the polygons improve the fold by at least 15 % where relief allows. Not a
timed test: figures go into the README.

With ``--half`` the sheets are also run with every other trace piece left out (``--where "FID % 2 = 0"``):
a map whose contacts are traced only in part while its unit polygons are complete.

Run: ``.venv/bin/python bench/bench_units.py [--dems lidar,volcano] [--models auto,plane,trend2,spline] [--half]``.
"""
from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np
import shapely

from _measure import load_line, machine_line, measured, result_line

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO / "test_data"))

import real_truth  # noqa: E402

from strikeline.errors import UndeterminedError  # noqa: E402
from strikeline.pipeline import (RunOptions, collect_picks, load_inputs, map_unit_bounds,  # noqa: E402
                                 map_unit_check, model_surface, pick_sigmas, surface_grid)
from strikeline.maps.trace import vertex_spacing_m  # noqa: E402

MODELS = ("auto", "plane", "trend2", "spline")


def rms(a):
    return float(np.sqrt(np.mean(a ** 2))) if a.size else float("nan")


def run(dem: str, models, *, where: str | None = None) -> list[dict]:
    paths = real_truth.case_paths(dem, "fold_units")
    truth = real_truth.load_truth(dem, "fold_units")
    sigma = float(truth["dem_grid"]["error_m"])
    kw = {"map_units": str(paths["units"]), "unit_field": "unit",
          "units_above": ",".join(truth["units"]["above"]), "units_below": ",".join(truth["units"]["below"])}
    opts = RunOptions(contacts=str(paths["contacts"]), contacts_layer="contacts", dem=str(paths["dem"]),
                      where=where, out="/nonexistent-out", dem_sigma_m=sigma,
                      contact_sigma_m=float(truth["digitising"]["sigma_m"]), **kw)
    inputs = load_inputs(opts)
    picks = collect_picks(inputs)
    grid = surface_grid(inputs, opts)
    X, Y = grid.mesh()
    valid = np.isfinite(inputs.dem)
    hull = shapely.convex_hull(shapely.multipoints(picks.xyz[:, :2]))
    inside = shapely.contains_xy(hull, X, Y) & valid
    z_true = real_truth.truth_surface(truth, X, Y)
    relief = float(np.nanmax(inputs.dem) - np.nanmin(inputs.dem))
    ub = map_unit_bounds(inputs.unit_polygons, inputs.unit_names, inputs.dem, inputs.dem_grid, opts)
    spacing = vertex_spacing_m(inputs.contacts.geoms)
    sig = pick_sigmas(inputs, picks, opts)
    rows = []
    for model in models:
        o = RunOptions(**{**opts.__dict__, "model": model})
        row = {"dem": dem if where is None else f"{dem}/half", "model": model, "n_picks": len(picks), "n_bounds": len(ub), "relief_m": relief}
        for tag, bounds in (("free", None), ("units", ub.bounds)):
            t0 = time.perf_counter()
            try:
                m = model_surface(picks, o, grid, bounds=bounds, what="picks", sigma=sig, vertex_spacing_m=spacing)
            except UndeterminedError as exc:
                row[tag] = {"refused": str(exc)[:90]}
                continue
            seconds = time.perf_counter() - t0
            z = m.evaluate_grid(grid)
            e = z - z_true
            r = {"kind": m.kind, "hull": rms(e[inside]), "sheet": rms(e[valid]), "s": seconds,
                 "active": m.params.get("n_active_bounds")}
            if bounds is not None:
                chk = map_unit_check(m, inputs.unit_polygons, inputs.unit_names, inputs.dem, inputs.dem_grid, o, ub)
                r["broken"] = chk["summary"]["check"]["share_violated"]
            row[tag] = r
        rows.append(row)
    return rows


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--dems", default=",".join(real_truth.DEMS))
    ap.add_argument("--models", default=",".join(MODELS))
    ap.add_argument("--half", action="store_true",
                    help="also with every other trace piece left out (a map whose contacts are traced only "
                         "in part while its unit polygons are complete)")
    a = ap.parse_args(argv)
    machine_line()
    with measured() as m:
        done = _main(a)
    t = [u["s"] / f["s"] for f, u in done if f["s"] > 0]
    gain = [100 * (1 - u["hull"] / f["hull"]) for f, u in done]
    result_line(f"unit polygons as constraints, {len(done)} sheet x model fits with and without", m,
                ratio=float(np.median(t)) if t else None, reference="fit time without units (median)",
                extra=f"median gain in hull RMS {np.median(gain):.1f}% (target >= 15% where relief allows)"
                if gain else "no fit with units ran")
    load_line("at the end")


def _main(a):
    done = []
    print("sheet        model   picks bounds | without: model  hull RMS  sheet RMS | with units: model  hull RMS  "
          "sheet RMS  active broken  time | gain hull  gain sheet")
    todo = [(dem, None) for dem in a.dems.split(",")]
    if a.half:
        todo += [(dem, "FID % 2 = 0") for dem in a.dems.split(",")]
    for dem, where in todo:
        for row in run(dem, a.models.split(","), where=where):
            f, u = row["free"], row["units"]
            left = f"{row['dem']:12s} {row['model']:7s} {row['n_picks']:5d} {row['n_bounds']:6d} | "
            if "refused" in f:
                print(left + f"refused: {f['refused']}")
                continue
            left += f"{f['kind']:7s} {f['hull']:8.3f} {f['sheet']:9.3f} | "
            if "refused" in u:
                print(left + f"refused: {u['refused']}")
                continue
            done.append((f, u))
            print(left + f"{u['kind']:7s} {u['hull']:8.3f} {u['sheet']:9.3f} {u['active'] or 0:7d} "
                  f"{100 * (u['broken'] or 0):5.1f}% {u['s']:5.1f}s | {100 * (1 - u['hull'] / f['hull']):8.1f}% "
                  f"{100 * (1 - u['sheet'] / f['sheet']):9.1f}%   (relief {row['relief_m']:.0f} m, "
                  f"fit without {f['s']:.1f}s)")
    return done


if __name__ == "__main__":
    main()
