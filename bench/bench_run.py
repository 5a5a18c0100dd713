"""Benchmark: the whole `strikeline run` chain in process on a full synthetic sheet, plane and curved.

Builds, deterministically, a fictional sheet in a temporary folder: an N x N float32 DEM at 5 m
cells (``--cells``, default 2,000: a 10 km square; smooth hills of 310-890 m) and two contacts
whose outcrop traces GDAL's contour generator draws as the zero line of (DEM - surface):

* ``plane``: a plane dipping 14 deg toward 123 deg through the sheet's centre at 600 m;
* ``fold``: a curved surface - an open upright fold, wavelength half the sheet, amplitude 120 m,
  plunging 3 deg toward 033 and tilted 4 deg toward 123 (a curved surface at sheet scale).

Each is run through :func:`strikeline.pipeline.run` (``--model auto``, every output written), with
a reporter that times each named step of the run: wall and CPU seconds (``getrusage``, all
threads, so CPU/wall above 1 means more than one core at work) and the peak resident memory
during the step (the process's high-water mark, reset as each step begins).

References measured in the same run: for the planar run, GDAL's own pass over the same DEM in
process (read the GeoTIFF, ``gdal.DEMProcessing`` slope by Zevenbergen-Thorne into a MEM raster);
for the curved run, the planar run (curved/plane ratio; the project's target is at most 1.5).

Run:  .venv/bin/python bench/bench_run.py [--cells 2000] [--surfaces plane,fold]
"""
from __future__ import annotations

import argparse
import tempfile
import time
from pathlib import Path

from osgeo import gdal

import _sheets
from _measure import load_line, machine_line, measure, reset_peak, result_line, _status_kib
from strikeline import pipeline as pl
from strikeline.pipeline.progress import Reporter

CELL_M = 5.0
#: Steps whose work is over the grid's cells (the rest scale with the picks).
GRID_STEPS = ("surface model", "grids", "structure contours", "depth, trace and misfit", "writing outputs")
TARGET_CURVED_OVER_PLANE = 1.5


class StageReporter(Reporter):
    """Keeps each step's wall and CPU seconds and the peak resident memory during the step."""

    def __init__(self):
        self.rows = []

    def start(self, step):
        reset_peak()

    def finish(self, step, timing):
        self.rows.append((step.name, timing.wall_s, timing.cpu_s, _status_kib("VmHWM") * 1024.0))


def gdal_reference(dem: Path) -> None:
    ds = gdal.Open(str(dem))
    ds.GetRasterBand(1).ReadAsArray()
    out = gdal.DEMProcessing("", ds, "slope", format="MEM", alg="ZevenbergenThorne")
    out = ds = None  # noqa: F841


def run_one(tmp: Path, dem: Path, contacts: Path, name: str):
    rep = StageReporter()
    opts = pl.RunOptions(contacts=str(contacts), dem=str(dem), out=str(tmp / f"out_{name}"), model="auto")
    results, m = measure(lambda: pl.run(opts, reporter=rep))
    s = results.summary

    def num(v, fmt):
        return "-" if v is None else format(v, fmt)
    print(f"{name}: {len(results.picks):,} picks; model chosen {s['model']['chosen']}; local windows "
          f"{s['attitudes']['n_windows']}; best-fit plane dip {num(s['plane']['dip_deg'], '.2f')} toward "
          f"{num(s['plane']['dip_direction_deg'], '.1f')}")
    print(f"  {'step':<26s} {'wall s':>8s} {'CPU s':>8s} {'CPU/wall':>8s} {'peak RSS':>10s}")
    for step, wall, cpu, peak in rep.rows:
        ratio = cpu / wall if wall > 0.005 else float("nan")
        print(f"  {step:<26s} {wall:8.2f} {cpu:8.2f} {ratio:8.2f} {peak / 2**20:8.0f} MiB")
    gw = sum(r[1] for r in rep.rows if r[0] in GRID_STEPS)
    gc = sum(r[2] for r in rep.rows if r[0] in GRID_STEPS)
    return m, gc / gw if gw > 0 else float("nan")


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cells", type=int, default=2000)
    ap.add_argument("--surfaces", default="plane,fold", help="comma-separated: plane, fold")
    args = ap.parse_args(argv)
    n = args.cells
    size_m = n * CELL_M
    surfaces = [s for s in args.surfaces.split(",") if s]
    machine_line()
    with tempfile.TemporaryDirectory(prefix="strikeline-bench-run-") as tmp:
        tmp = Path(tmp)
        t0 = time.perf_counter()
        dem = _sheets.write_dem(tmp / "dem.tif", n, size_m)
        makers = {"plane": _sheets.plane_surface, "fold": _sheets.fold_surface}
        contacts = {}
        for s in surfaces:
            contacts[s] = tmp / f"contacts_{s}.gpkg"
            k = _sheets.write_traces(contacts[s], size_m, [makers[s](size_m)],
                                     trace_cells=min(n, _sheets.TRACE_CELLS))
            print(f"workload {s}: {n:,} x {n:,} DEM at {CELL_M:g} m ({size_m / 1000:g} km square), "
                  f"{k} contact line(s)")
        print(f"sheet made in {time.perf_counter() - t0:.1f} s")
        _, ref = measure(lambda: gdal_reference(dem))
        result_line(f"GDAL read + slope (ZevenbergenThorne) to MEM, {n:,}^2 DEM (reference)", ref)
        done = {}
        for s in surfaces:
            m, grid_ratio = run_one(tmp, dem, contacts[s], s)
            done[s] = m
            if s == "fold" and "plane" in done:
                r = m.wall_s / done["plane"].wall_s
                result_line(f"run --model auto, curved (fold) contact, {n:,}^2 DEM", m, ratio=r,
                            reference=f"the planar run (target <= {TARGET_CURVED_OVER_PLANE})",
                            extra=f"grid steps cpu/wall {grid_ratio:.2f}")
            else:
                result_line(f"run --model auto, {s} contact, {n:,}^2 DEM", m, ratio=m.wall_s / ref.wall_s,
                            reference="GDAL read + slope to MEM", extra=f"grid steps cpu/wall {grid_ratio:.2f}")
    load_line("at the end")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
