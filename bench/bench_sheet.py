"""Benchmark: one whole map sheet end to end, ``strikeline run`` as a user runs it, at growing sizes.

Workload (deterministic, invented): a 15 km square of fictional hills (310-890 m) as a float32
GeoTIFF of N x N cells (1,000, 4,000 and 12,000 by default; 30,000 with ``--huge``), written by
GDAL block by block, and one mapped contact (``--surface plane``: a plane dipping 14 deg toward
123 deg; ``fold``: an open plunging fold) traced by GDAL's contour generator - the same lines at
every size, so only the DEM's resolution grows. Each size is run as the console command
``strikeline run --contacts contacts.gpkg --dem dem.tif --out DIR`` in a child process, measured
alone with ``os.wait4`` (wall time, CPU time, peak resident memory ``ru_maxrss``).

Reference, same run, same DEM file: GDAL's own command ``gdaldem slope -alg ZevenbergenThorne``
(the dip method of ``strikeline.maps.dip_grids``) writing a compressed tiled GeoTIFF - one
streaming pass of GDAL over the DEM, read and written block by block.

Where the command has ``--log-json``, each step's wall and CPU seconds are printed from its log
(CPU/wall above 1: more than one core at work). Printed per size: time and peak memory, nanoseconds and bytes per cell, CPU/wall, the ratio to
the reference; then the growth exponents b of time ~ cells^b and peak ~ cells^b (least-squares
line through log-log points of the sizes that ran). A size the tool refuses (its workload check)
prints ``refused: <its one-line reason>``.

Run:  .venv/bin/python bench/bench_sheet.py [--sizes 1000,4000,12000] [--huge] [--surface plane|fold]
"""
from __future__ import annotations

import argparse
import contextlib
import json
import shutil
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

import _sheets
from _measure import load_line, machine_line, mib, result_line, run_child, status_line, strikeline_command

SIZE_M = 15_000.0
DEFAULT_SIZES = (1_000, 4_000, 12_000)
HUGE = 30_000
#: Disk a size needs: DEM and reference (float32, compressed at best to about half) and the run's
#: grids (surface, dip, dip direction, depth, uncertainty) - an upper figure (our choice).
DISK_BYTES_PER_CELL = 4 * 8


def growth_exponent(cells, values):
    """Slope b of log(value) = a + b log(cells), least squares; None with fewer than two points."""
    if len(cells) < 2:
        return None
    return float(np.polyfit(np.log(cells), np.log(values), 1)[0])


#: Steps of ``strikeline run`` whose work is over the grid's cells.
GRID_STEPS = ("surface model", "grids", "structure contours", "depth, trace and misfit", "writing outputs")


def has_option(flag: str) -> bool:
    """Whether the installed ``strikeline run`` takes ``flag`` (it is in its --help)."""
    return flag in run_child(strikeline_command() + ["run", "--help"]).stdout


def print_steps(log: Path) -> str:
    """Print each step's wall and CPU seconds from a ``--log-json`` file; return the grid steps' CPU/wall."""
    rows = []
    for line in log.read_text().splitlines():
        with contextlib.suppress(ValueError):
            e = json.loads(line)
            if e.get("event") == "step_end":
                rows.append((e["step"], e["wall_s"], e["cpu_s"], e.get("peak_rss_mib", float("nan"))))
    for step, wall, cpu, peak in rows:
        r = f"{cpu / wall:5.2f}" if wall > 0.005 else "    -"
        print(f"    {step:<26s} {wall:8.2f} s  CPU {cpu:8.2f} s  CPU/wall {r}  peak RSS so far {peak:8.0f} MiB")
    gw = sum(w for s, w, _, _ in rows if s in GRID_STEPS)
    gc = sum(c for s, _, c, _ in rows if s in GRID_STEPS)
    return f"grid steps cpu/wall {gc / gw:.2f}" if gw > 0 else ""


def run_size(tmp: Path, n: int, contacts: Path, *, gdaldem: str | None, log_json: bool = False) -> dict | None:
    label = f"sheet {n:,}^2 cells end to end (strikeline run)"
    free = shutil.disk_usage(tmp).free
    if free < DISK_BYTES_PER_CELL * n * n:
        status_line(label, f"not available: needs about {mib(DISK_BYTES_PER_CELL * n * n)} of disk, "
                           f"{mib(free)} free in {tmp}")
        return None
    dem = tmp / f"dem{n}.tif"
    t0 = time.perf_counter()
    _sheets.write_dem(dem, n, SIZE_M)
    print(f"  DEM {n:,} x {n:,} at {SIZE_M / n:g} m written block by block in {time.perf_counter() - t0:.1f} s "
          f"({mib(dem.stat().st_size)} on disk)", flush=True)
    out = tmp / f"out{n}"
    log = tmp / f"run{n}.jsonl"
    run = run_child(strikeline_command() + ["run", "--contacts", str(contacts), "--dem", str(dem),
                                            "--out", str(out)]
                    + (["--quiet", "--log-json", str(log)] if log_json else []))
    shutil.rmtree(out, ignore_errors=True)
    steps = print_steps(log) if log_json and log.exists() else ""
    if run.returncode != 0:
        dem.unlink()
        what = "refused" if run.returncode == 2 else f"failed (exit {run.returncode})"
        status_line(label, f"{what}: {run.error_line()} (after {run.wall_s:.1f} s)")
        return None
    ref = None
    if gdaldem:
        ref = run_child([gdaldem, "slope", str(dem), str(tmp / "slope.tif"), "-alg", "ZevenbergenThorne", "-q",
                         "-co", "COMPRESS=DEFLATE", "-co", "PREDICTOR=3", "-co", "TILED=YES",
                         "-co", "BIGTIFF=IF_SAFER"])
        (tmp / "slope.tif").unlink(missing_ok=True)
        if ref.returncode != 0:
            print(f"  reference gdaldem slope failed: {ref.error_line()}")
            ref = None
    dem.unlink()
    cells = n * n
    extra = f"{1e9 * run.wall_s / cells:.0f} ns/cell, {run.peak_bytes / cells:.1f} B/cell" + (
        f", {steps}" if steps else "")
    if ref is not None:
        result_line(label, run, ratio=run.wall_s / ref.wall_s,
                    reference=f"gdaldem slope file to file ({ref.wall_s:.2f} s, {mib(ref.peak_bytes)})",
                    extra=extra + f"; peak {run.peak_bytes / ref.peak_bytes:.1f} x the reference's")
    else:
        result_line(label, run, extra=extra + "; no reference (gdaldem not found)")
    return {"cells": cells, "time": run.wall_s, "peak": run.peak_bytes}


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", default=",".join(str(s) for s in DEFAULT_SIZES),
                    help="comma-separated cells per side (default %(default)s)")
    ap.add_argument("--huge", action="store_true", help=f"also run {HUGE:,} x {HUGE:,} cells")
    ap.add_argument("--surface", choices=("plane", "fold"), default="plane")
    ap.add_argument("--tmp", help="folder for the sheets (default: the system's temporary folder)")
    args = ap.parse_args(argv)
    sizes = [int(s) for s in args.sizes.split(",") if s.strip()]
    if args.huge and HUGE not in sizes:
        sizes.append(HUGE)
    machine_line()
    gdaldem = shutil.which("gdaldem") or (str(Path(sys.executable).parent / "gdaldem")
                                          if (Path(sys.executable).parent / "gdaldem").exists() else None)
    with tempfile.TemporaryDirectory(prefix="strikeline-bench-sheet-", dir=args.tmp) as tmp:
        tmp = Path(tmp)
        contacts = tmp / "contacts.gpkg"
        f = (_sheets.plane_surface if args.surface == "plane" else _sheets.fold_surface)(SIZE_M)
        n_lines = _sheets.write_traces(contacts, SIZE_M, [f])
        print(f"workload: {SIZE_M / 1000:g} km square sheet, one {args.surface} contact in {n_lines} line(s); "
              f"sizes {', '.join(f'{n:,}^2' for n in sizes)} cells", flush=True)
        log_json = has_option("--log-json")
        done = [r for n in sizes if (r := run_size(tmp, n, contacts, gdaldem=gdaldem, log_json=log_json)) is not None]
    cells = [r["cells"] for r in done]
    bt = growth_exponent(cells, [r["time"] for r in done])
    bm = growth_exponent(cells, [r["peak"] for r in done])
    if bt is None:
        print("growth exponents: need two sizes that ran")
    else:
        print(f"{'result:'} sheet growth exponents over {len(done)} sizes | time ~ cells^{bt:.2f} | "
              f"peak memory ~ cells^{bm:.2f}")
    load_line("at the end")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
