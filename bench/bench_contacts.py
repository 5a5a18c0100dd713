"""Benchmark: a 5,000 x 5,000 sheet with 200 mapped contact lines, `strikeline run` end to end.

Workload (deterministic, invented): a 25 km square of fictional hills as a 5,000 x 5,000 float32
GeoTIFF at 5 m cells (``--cells``), written by GDAL block by block, and one folded contact (an
open upright fold, wavelength half the sheet, plunging 3 deg toward 033) whose outcrop trace
GDAL's contour generator draws; the trace is cut into pieces of equal length along it, as a
contact mapped in stretches between drift cover, and the 200 longest pieces are kept
(``--contacts``). The console command ``strikeline run --contacts contacts.gpkg --dem dem.tif
--out DIR`` runs in a child process, measured alone (wall, CPU, peak resident memory).

Reference in the same run: the same command on the same DEM with the same trace left whole (the
contour generator's few long lines) - the same ground and picks, so the ratio is the cost of
the 200 separate contacts. Target (the project's): under 60 s on the development machine. Each
run's steps (wall and CPU seconds, from ``--log-json``) are printed, and the result line names
the step that took the most CPU.

Run:  .venv/bin/python bench/bench_contacts.py [--cells 5000] [--contacts 200]
"""
from __future__ import annotations

import argparse
import contextlib
import json
import shutil
import tempfile
import time
from pathlib import Path

import numpy as np
from osgeo import ogr

import _sheets
from _measure import load_line, machine_line, result_line, run_child, status_line, strikeline_command
from bench_sheet import has_option, print_steps

CELL_M = 5.0
TARGET_S = 60.0


def trace_length_m(path: Path) -> float:
    ds = ogr.Open(str(path))
    total = sum(f.GetGeometryRef().Length() for f in ds.GetLayer(0))
    ds = None
    return total


def largest_step(log: Path) -> str:
    """The step of a ``--log-json`` file that took the most CPU, with its share of the run's CPU."""
    steps, total = {}, 0.0
    for line in log.read_text().splitlines():
        with contextlib.suppress(ValueError):
            e = json.loads(line)
            if e.get("event") == "step_end":
                steps[e["step"]] = e["cpu_s"]
            elif e.get("event") == "end":
                total = e.get("cpu_s") or 0.0
    if not steps or total <= 0:
        return ""
    name = max(steps, key=steps.get)
    return f"largest step: {name} {steps[name]:.1f} s CPU ({100 * steps[name] / total:.0f}% of the run's)"


def run(contacts: Path, dem: Path, out: Path, *, log_json: bool):
    """``strikeline run`` on one contacts layer, measured alone; each step's seconds printed from its
    ``--log-json`` (where the command has it); the run and its largest step in a few words."""
    log = out.with_suffix(".jsonl")
    r = run_child(strikeline_command() + ["run", "--contacts", str(contacts), "--dem", str(dem), "--out", str(out)]
                  + (["--quiet", "--log-json", str(log)] if log_json else []))
    shutil.rmtree(out, ignore_errors=True)
    print(f"  {contacts.name}: {r.wall_s:.1f} s wall, {r.cpu_s:.1f} s CPU", flush=True)
    largest = ""
    if log_json and log.exists():
        print_steps(log)
        largest = largest_step(log)
    return r, largest


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cells", type=int, default=5000)
    ap.add_argument("--contacts", type=int, default=200, help="contact lines to keep")
    args = ap.parse_args(argv)
    ogr.UseExceptions()
    n, size_m = args.cells, args.cells * CELL_M
    machine_line()
    with tempfile.TemporaryDirectory(prefix="strikeline-bench-contacts-") as tmp:
        tmp = Path(tmp)
        t0 = time.perf_counter()
        dem = _sheets.write_dem(tmp / "dem.tif", n, size_m)
        fold = _sheets.fold_surface(size_m)
        whole = tmp / "whole.gpkg"
        n_whole = _sheets.write_traces(whole, size_m, [fold])
        length = trace_length_m(whole)
        pieces = tmp / "contacts.gpkg"
        # pieces a little shorter than length / count, so that at least `count` come out
        k = _sheets.write_traces(pieces, size_m, [fold], pieces_m=0.9 * length / args.contacts,
                                 max_lines=args.contacts)
        print(f"workload: {n:,} x {n:,} DEM at {CELL_M:g} m ({size_m / 1000:g} km square); one folded contact, "
              f"{length / 1000:.0f} km of trace, as {k} lines (reference: {n_whole} whole lines); "
              f"made in {time.perf_counter() - t0:.1f} s", flush=True)
        log_json = has_option("--log-json")
        ref, _ = run(whole, dem, tmp / "out_whole", log_json=log_json)
        many, largest = run(pieces, dem, tmp / "out_pieces", log_json=log_json)
    label = f"{k} contacts on a {n:,}^2 sheet end to end (strikeline run)"
    if many.returncode != 0:
        status_line(label, f"{'refused' if many.returncode == 2 else 'failed'}: {many.error_line()}")
        return 0
    verdict = "; ".join(t for t in (f"CPU {many.cpu_s:.1f} s", largest,
                                    f"target < {TARGET_S:.0f} s: {'met' if many.wall_s < TARGET_S else 'NOT met'}")
                        if t)
    if ref.returncode != 0:
        result_line(label, many, extra=f"{verdict}; reference failed: {ref.error_line()}")
    else:
        result_line(label, many, ratio=many.wall_s / ref.wall_s,
                    reference=f"the same trace as {n_whole} whole lines ({ref.wall_s:.1f} s, "
                              f"{ref.peak_bytes / 2**20:,.0f} MiB)", extra=verdict)
    load_line("at the end")
    return 0


if __name__ == "__main__":
    np.seterr(all="ignore")
    raise SystemExit(main())
