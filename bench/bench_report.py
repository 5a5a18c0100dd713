"""Benchmark: drawing report.html from an output folder whose grids grow, in bounded memory.

Runs ``strikeline run`` once on the demo sheet's exact contact and DEM (``--no-report``), then
makes output folders whose ``surface.tif``, ``depth.tif`` and ``uncertainty.tif`` cover the same
ground with N x N cells (``--sizes``, default 1,000 and 10,000; the DEM resampled bilinearly by
GDAL, the run's plane as the surface, written block by block), beside the run's own
``summary.json`` and ``results.gpkg``. Each folder's report is drawn in a child process of its own
(``strikeline.report.write_report``), measured alone (wall, CPU, peak resident memory), against
the reference of the same run: the report of the run's own folder (400 x 400 cells). Memory that
stays flat while the grids grow 600-fold is what the report promises (rasters are read decimated
to a million cells, picks thinned to 20,000).

With ``--sheets N ...`` it also runs ``strikeline run --no-report`` on invented N x N sheets
(``bench/_sheets.py``: the planar contact on the hilly terrain, 15 km square), so the structure
contours have as many vertices as a real run's (about 140 per cell of the sheet's side), and
times the report of each folder against the floor of any report that shows those grids: GDAL
alone reading ``surface.tif`` and ``depth.tif`` averaged to the same million cells
(``gdal.Translate`` to memory, one file after the other, GDAL's decoding threads on). It also times
the same report with the two grids' decimated arrays already in hand (read before the clock
starts): what the report would cost if the writer of the grids kept those arrays while it wrote
the blocks, so that the report decoded no cell of the GeoTIFFs.

Usage::

    .venv/bin/python bench/bench_report.py [--sizes 1000 10000] [--sheets 2000 4000]
"""
from __future__ import annotations

import argparse
import json
import shutil
import sys
import tempfile
from pathlib import Path

import numpy as np
from osgeo import gdal

import _sheets
from _measure import load_line, machine_line, mib, result_line, run_child, strikeline_command
from strikeline import vocabulary as V
from strikeline.io.sampling import decimation
from strikeline.report.data import MAX_MAP_CELLS

DEMO = Path(__file__).resolve().parents[1] / "test_data" / "demo"
BLOCK_ROWS = 512


def _child(folder: Path):
    code = "import sys; from strikeline.report import write_report; write_report(sys.argv[1])"
    done = run_child([sys.executable, "-c", code, str(folder)])
    if done.returncode:
        raise SystemExit(f"report of {folder} failed: {done.error_line()}")
    return done


def _grid_folder(run: Path, n: int, dest: Path) -> int:
    """``dest`` with the run's summary and GeoPackage and N x N grids over the same ground; returns
    the bytes of the three grids as float32."""
    dest.mkdir()
    for name in (V.SUMMARY_FILE, V.RESULTS_FILE):
        shutil.copy(run / name, dest / name)
    plane = json.loads((run / V.SUMMARY_FILE).read_text())["model"]["params"]
    c0, cu, cv = plane["coefficients"]
    (x0, y0), scale = plane["origin_m"], plane["scale_m"]
    src = gdal.Open(str(run / V.SURFACE.file))
    xmin, dx, _, ymax, _, dy = src.GetGeoTransform()
    xmax, ymin = xmin + dx * src.RasterXSize, ymax + dy * src.RasterYSize
    ground = dest / "ground.tif"
    gdal.Warp(str(ground), str(DEMO / "dem.tif"), width=n, height=n, outputBounds=(xmin, ymin, xmax, ymax),
              resampleAlg="bilinear", outputType=gdal.GDT_Float32, creationOptions=["TILED=YES", "COMPRESS=DEFLATE"])
    g = gdal.Open(str(ground))
    gt, wkt = g.GetGeoTransform(), g.GetProjection()
    outs = {}
    for name in (V.SURFACE.file, V.DEPTH.file, V.UNCERTAINTY.file):
        ds = gdal.GetDriverByName("GTiff").Create(str(dest / name), n, n, 1, gdal.GDT_Float32,
                                                  ["TILED=YES", "COMPRESS=DEFLATE", "PREDICTOR=3", "BIGTIFF=YES"])
        ds.SetGeoTransform(gt)
        ds.SetProjection(wkt)
        ds.GetRasterBand(1).SetNoDataValue(-99999.0)
        outs[name] = ds
    x = gt[0] + gt[1] * (np.arange(n) + 0.5)
    for r0 in range(0, n, BLOCK_ROWS):
        rows = min(BLOCK_ROWS, n - r0)
        y = gt[3] + gt[5] * (np.arange(r0, r0 + rows) + 0.5)
        surf = (c0 + cu * (x[None, :] - x0) / scale + cv * (y[:, None] - y0) / scale).astype(np.float32)
        dem = g.GetRasterBand(1).ReadAsArray(0, r0, n, rows).astype(np.float32)
        outs[V.SURFACE.file].GetRasterBand(1).WriteArray(surf, 0, r0)
        outs[V.DEPTH.file].GetRasterBand(1).WriteArray(dem - surf, 0, r0)
        outs[V.UNCERTAINTY.file].GetRasterBand(1).WriteArray(np.full_like(surf, 2.5), 0, r0)
    for ds in outs.values():
        ds.FlushCache()
    outs.clear()
    g = None
    ground.unlink()
    return 3 * 4 * n * n


#: Side of the invented sheets of ``--sheets`` (m).
SHEET_M = 15_000.0


def _gdal_floor(folder: Path):
    """GDAL alone reading the surface and the depth averaged to the report's million cells."""
    code = ("import sys; from osgeo import gdal; gdal.UseExceptions(); gdal.SetConfigOption('GDAL_NUM_THREADS', "
            "'ALL_CPUS'); n = int(sys.argv[2]); [gdal.Translate('', sys.argv[1] + '/' + f, format='MEM', "
            "width=n, height=n, resampleAlg='average', outputType=gdal.GDT_Float64) "
            "for f in ('surface.tif', 'depth.tif')]")
    ds = gdal.Open(str(folder / V.SURFACE.file))
    shape = (ds.RasterYSize, ds.RasterXSize)
    ds = None
    n = -(-shape[0] // decimation(shape, MAX_MAP_CELLS))
    done = run_child([sys.executable, "-c", code, str(folder), str(n)])
    if done.returncode:
        raise SystemExit(f"GDAL's read of {folder} failed: {done.error_line()}")
    return done


#: The report drawn (timed from the call, after the interpreter's start) as it is (``read``), or with
#: the surface's and the depth's decimated arrays read before the clock starts (``given``).
_GIVEN = """
import sys, time
from pathlib import Path
from strikeline.report import data as D, page as P
folder = Path(sys.argv[1])
if sys.argv[2] == "given":
    given = {n: D._raster(folder / n, max_cells=D.MAX_MAP_CELLS) for n in ("surface.tif", "depth.tif")}
    read = D._raster
    D._raster = lambda path, **k: given[Path(path).name] if Path(path).name in given else read(path, **k)
t, c = time.perf_counter(), time.process_time()
P.render_report(folder)
print(time.perf_counter() - t, time.process_time() - c)
"""


def _timed_report(folder: Path, how: str) -> tuple[float, float]:
    """Wall and CPU seconds of the report of ``folder``, its grids read (``how='read'``) or already
    in hand (``'given'``); see _GIVEN."""
    done = run_child([sys.executable, "-c", _GIVEN, str(folder), how])
    if done.returncode:
        raise SystemExit(f"report of {folder} with its grids given failed: {done.error_line()}")
    wall, cpu = (float(v) for v in done.stdout.split()[-2:])
    return wall, cpu


def _sheets_run(tmp: Path, sizes) -> None:
    contacts = tmp / "contacts.gpkg"
    _sheets.write_traces(contacts, SHEET_M, [_sheets.plane_surface(SHEET_M)])
    for n in sizes:
        dem, out = tmp / f"dem{n}.tif", tmp / f"sheet{n}"
        _sheets.write_dem(dem, n, SHEET_M)
        done = run_child(strikeline_command() + ["run", "--contacts", str(contacts), "--dem", str(dem),
                                                 "--out", str(out), "--no-report", "--quiet"])
        dem.unlink()
        if done.returncode:
            raise SystemExit(f"strikeline run on the {n:,}^2 sheet failed: {done.error_line()}")
        floor = _gdal_floor(out)
        m = _child(out)
        result_line(f"report of a {n:,} x {n:,} sheet's run", m, ratio=m.wall_s / floor.wall_s,
                    reference=f"GDAL alone reading surface.tif and depth.tif averaged ({floor.wall_s:.2f} s, "
                              f"{floor.cpu_s:.2f} s CPU)", extra=f"{m.cpu_s:.2f} s CPU")
        (rw, rc), (gw, gc) = _timed_report(out, "read"), _timed_report(out, "given")
        print(f"  the report's call: {rw:.2f} s, {rc:.2f} s CPU; with surface.tif's and depth.tif's decimated "
              f"arrays in hand (no cell decoded) {gw:.2f} s, {gc:.2f} s CPU", flush=True)
        shutil.rmtree(out)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--sizes", type=int, nargs="+", default=[1000, 10000])
    ap.add_argument("--sheets", type=int, nargs="*", default=[],
                    help="also run invented N x N sheets and time their reports (e.g. 2000 4000)")
    args = ap.parse_args()
    gdal.UseExceptions()
    machine_line()
    with tempfile.TemporaryDirectory(prefix="strikeline-bench-report-") as d:
        run = Path(d) / "run"
        done = run_child(strikeline_command() + [
            "run", "--contacts", str(DEMO / "contacts.gpkg"), "--dem", str(DEMO / "dem.tif"), "--out", str(run),
            "--no-report", "--quiet"])
        if done.returncode:
            raise SystemExit(f"strikeline run failed: {done.error_line()}")
        ref = _child(run)
        result_line("report of the demo's own folder (400 x 400 cells)", ref, extra="reference")
        for n in args.sizes:
            folder = Path(d) / f"grids_{n}"
            nbytes = _grid_folder(run, n, folder)
            m = _child(folder)
            result_line(f"report of {n:,} x {n:,} cells", m, ratio=m.peak_bytes / ref.peak_bytes,
                        reference="the reference's peak memory",
                        extra=f"three float32 grids of {mib(nbytes)} in all")
            shutil.rmtree(folder)
        if args.sheets:
            _sheets_run(Path(d), args.sheets)
    load_line("at the end")


if __name__ == "__main__":
    main()
