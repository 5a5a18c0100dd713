"""Benchmark: a series of 16 sheets with `strikeline batch`, on 1 and on 2 worker processes.

Workload (deterministic, invented): a 4 x 4 mosaic of neighbouring sheets, each an N x N float32
DEM at 10 m cells (``--cells``, default 500: 5 km squares, a 20 km mosaic) of fictional hills
written by GDAL, and one upright folded contact across the whole mosaic (hinges trending 033,
amplitude 400 m about 600 m, wavelength one sheet side) whose trace GDAL's contour generator
draws on each sheet. The fold is made so that every sheet has a trace, whatever its size: across
any one sheet the contact passes through a whole wavelength, from 200 m to 1,000 m, beyond the
terrain's 290-910 m on both sides, so it crosses the ground on every sheet (a gentler fold left
sheets of 2-3 km with no contact at all, which the batch rightly reported as failed). The job
file (TOML, one ``[[sheet]]`` table per sheet with ``name``, ``contact`` - the same for all, so the
batch compares neighbours along their shared edges - ``contacts`` and ``dem``) is run by the
console command ``strikeline batch JOB.toml --out DIR --workers N`` in a child process, once
with ``--workers 1`` and once with ``--workers 2`` (fresh output folders, so neither run skips a
sheet), each measured alone: wall time, CPU time of the batch and its worker processes, and the
peak resident memory of the largest single process (``ru_maxrss``).

The reference is the 1-worker run of the same job in the same run; the figure is the speed-up
t(1 worker) / t(2 workers) (the project's target: at least 1.7). Where the installed
``strikeline`` has no ``batch`` command the script prints ``batch: not available``.

Run:  .venv/bin/python bench/bench_batch.py [--cells 500] [--sheets-per-side 4]
"""
from __future__ import annotations

import argparse
import json
import shutil
import tempfile
import time
from pathlib import Path

import numpy as np

import _sheets
from _measure import load_line, machine_line, result_line, run_child, status_line, strikeline_command

CELL_M = 10.0
#: The contact every sheet models, named in the job so that the batch compares the surfaces of
#: neighbouring sheets along their shared edges (part of the timed work, as in a survey's job).
CONTACT = "base of the folded unit"
TARGET_SPEEDUP = 1.7


#: The terrain's range (m): ``_sheets.terrain`` is 600 m plus terms of amplitude 180, 90 and 40 m.
TERRAIN_MIN_M, TERRAIN_MAX_M = 600.0 - 310.0, 600.0 + 310.0
FOLD_MEAN_M, FOLD_AMPLITUDE_M = 600.0, 400.0


def mosaic_fold(mosaic_m: float, wavelength_m: float):
    """An upright fold across the mosaic (hinges trending 033), ``wavelength_m`` from crest to
    crest, between 200 m and 1,000 m: beyond the terrain's range on both sides, so that on any
    square at least ``wavelength_m`` wide the contact lies above the ground along one crest and
    below it along one trough, and so crosses it (a trace on every sheet)."""
    assert FOLD_MEAN_M - FOLD_AMPLITUDE_M < TERRAIN_MIN_M and FOLD_MEAN_M + FOLD_AMPLITUDE_M > TERRAIN_MAX_M
    cx, cy = _sheets.X0 + mosaic_m / 2, _sheets.Y0 + mosaic_m / 2
    a = np.radians(123.0)

    def f(x, y):
        across = (x - cx) * np.sin(a) + (y - cy) * np.cos(a)
        return FOLD_MEAN_M + FOLD_AMPLITUDE_M * np.cos(2 * np.pi * across / wavelength_m)
    return f


def make_job(tmp: Path, cells: int, per_side: int) -> tuple[Path, int]:
    """Write the mosaic's DEMs and contact layers into ``tmp`` and the job file naming them; return
    the job file and the number of contact lines in all (every sheet has at least one)."""
    size_m = cells * CELL_M
    mosaic_m = size_m * per_side
    surface = mosaic_fold(mosaic_m, size_m)
    lines = [f"# {per_side ** 2} invented neighbouring sheets (strikeline bench)", ""]
    n_lines = 0
    for j in range(per_side):
        for i in range(per_side):
            name = f"sheet_{j}{i}"
            x0, y0 = _sheets.X0 + i * size_m, _sheets.Y0 + j * size_m
            dem = _sheets.write_dem(tmp / f"{name}_dem.tif", cells, size_m, x0=x0, y0=y0)
            contacts = tmp / f"{name}_contacts.gpkg"
            k = _sheets.write_traces(contacts, size_m, [surface], x0=x0, y0=y0, trace_cells=min(cells, 1000))
            if k == 0:  # a sheet without a contact fails in the batch: the workload would be wrong
                raise RuntimeError(f"bench_batch: sheet {name} ({cells} cells a side) has no contact trace; "
                                   "the mosaic's fold must cross the ground on every sheet")
            n_lines += k
            lines += ["[[sheet]]", f'name = "{name}"', f'contact = "{CONTACT}"', f'contacts = "{contacts.name}"',
                      f'dem = "{dem.name}"', ""]
    job = tmp / "job.toml"
    job.write_text("\n".join(lines))
    return job, n_lines


def shared_edges(out: Path) -> str:
    """How many shared edges batch.json compared and their largest mismatch, in a few words: over
    the whole edges, within reach of both sheets' data and where one or both extrapolate."""
    try:
        edges = json.loads((out / "batch.json").read_text()).get("edges", {})
    except (OSError, ValueError, AttributeError):
        return ""
    def largest(key):
        got = [e.get(key) for e in edges.values() if isinstance(e, dict) and e.get(key) is not None]
        return f"{max(got):.2f} m" if got else "none"

    if not any(isinstance(e, dict) and e.get("max_dz_m") is not None for e in edges.values()):
        return f"{len(edges)} shared edges compared"
    return (f"{len(edges)} shared edges compared (largest mismatch {largest('max_dz_m')}: within reach of both "
            f"sheets' data {largest('max_dz_in_reach_m')}, where extrapolated {largest('max_dz_extrapolated_m')})")


def failed_sheets(out: Path) -> str:
    """What batch.json says did not succeed, in a few words (empty when all did or it cannot tell)."""
    try:
        data = json.loads((out / "batch.json").read_text())
    except (OSError, ValueError):
        return ""
    sheets = data.get("sheets", {}) if isinstance(data, dict) else {}
    bad = [(k, v) for k, v in sheets.items() if isinstance(v, dict) and v.get("status") != "ok"]
    if not bad:
        return ""
    first = f" ({bad[0][0]}: {bad[0][1].get('error')})" if bad[0][1].get("error") else ""
    return f"{len(bad)} of {len(sheets)} sheet(s) not ok: {', '.join(k for k, _ in bad[:4])}{first}"


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cells", type=int, default=500, help="cells per side of each sheet")
    ap.add_argument("--sheets-per-side", type=int, default=4, help="the mosaic is this many sheets square")
    args = ap.parse_args(argv)
    machine_line()
    probe = run_child(strikeline_command() + ["batch", "--help"])
    if probe.returncode != 0:
        print("batch: not available")
        status_line("batch of sheets", f"not available: 'strikeline batch --help' says: {probe.error_line()}")
        return 0
    n_sheets = args.sheets_per_side ** 2
    with tempfile.TemporaryDirectory(prefix="strikeline-bench-batch-") as tmp:
        tmp = Path(tmp)
        t0 = time.perf_counter()
        job, n_lines = make_job(tmp, args.cells, args.sheets_per_side)
        print(f"workload: {n_sheets} sheets of {args.cells:,} x {args.cells:,} cells at {CELL_M:g} m, "
              f"{n_lines} contact lines in all; made in {time.perf_counter() - t0:.1f} s", flush=True)
        runs, ran_1 = {}, False
        for workers in (1, 2):
            out = tmp / f"out{workers}"
            r = run_child(strikeline_command() + ["batch", str(job), "--out", str(out), "--workers", str(workers)])
            runs[workers] = r
            label = f"batch of {n_sheets} sheets {args.cells:,}^2, {workers} worker(s)"
            bad = failed_sheets(out)
            problem = "; ".join(t for t in (shared_edges(out), bad or (r.error_line() if r.returncode != 0 else ""))
                                if t)
            shutil.rmtree(out, ignore_errors=True)
            if r.returncode != 0 and not bad:  # the batch itself failed, not some of its sheets
                status_line(label, f"failed (exit {r.returncode}): {problem}")
                continue
            if workers == 1:
                ran_1 = True  # the batch ran (some sheets may have failed, as in the 2-worker run)
                result_line(label, r, extra=f"peak of the largest process; {problem}".rstrip("; "))
            elif ran_1:
                speedup = runs[1].wall_s / r.wall_s
                result_line(label, r, ratio=r.wall_s / runs[1].wall_s, reference="1 worker",
                            extra=f"speed-up {speedup:.2f} (target >= {TARGET_SPEEDUP}: "
                                  f"{'met' if speedup >= TARGET_SPEEDUP else 'NOT met'}); {problem}".rstrip("; "))
            else:
                result_line(label, r, extra=problem)
    load_line("at the end")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
