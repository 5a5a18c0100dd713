"""Benchmark: dip and dip-direction grids against ``gdaldem slope`` + ``gdaldem aspect``.

Builds a synthetic 5,000 x 5,000 float32 surface GeoTIFF (a folded, dipping surface with a
nodata patch) in a temporary directory, then in the same run:

* times the command-line programs ``gdaldem slope`` and ``gdaldem aspect`` (gdal-bin) on that
  file, via subprocess: wall time of each program, i.e. reading the GeoTIFF, computing and
  writing its GeoTIFF;
* times ``strikeline.maps.dipgrids.dip_grids`` on the array already in memory: computation only,
  no reading or writing (the read time of the same file through GDAL is printed separately);
* as a compute-only cross-check, times GDAL's own slope + aspect in-process
  (``gdal.DEMProcessing`` into MEM rasters);
* measures the peak memory that ``dip_grids`` allocates beyond its input (tracemalloc,
  which numpy reports its allocations to), relative to the grid's size; the two float32
  outputs are included.

Each timing is the best of ``--repeat`` runs. Targets (the project's): dip_grids at most 1.0x
gdaldem's combined time; peak memory under 3x the grid's size.

Usage::

    .venv/bin/python bench/bench_dipgrids.py [--size 5000] [--repeat 3]
"""
from __future__ import annotations

import argparse
import os
import platform
import shutil
import subprocess
import tempfile
import time
import tracemalloc

import numpy as np
from osgeo import gdal

from strikeline.geometry.grid import Grid
from strikeline.maps.dipgrids import dip_grids

NODATA = -99999.0
CELL_M = 10.0
TARGET_TIME_RATIO = 1.0
TARGET_MEMORY_RATIO = 3.0


def make_surface(n: int) -> np.ndarray:
    """A fictional folded surface dipping ~20° east-south-east, float32, NaN patch."""
    cols = np.arange(n, dtype=np.float32) * np.float32(CELL_M)
    rows = np.arange(n, dtype=np.float32)[:, None] * np.float32(CELL_M)
    z = np.empty((n, n), dtype=np.float32)
    z[:] = np.float32(2500.0) - np.float32(0.34) * cols
    z += np.float32(0.12) * rows
    z += np.float32(60.0) * np.sin(cols / np.float32(1700.0)) * np.cos(rows / np.float32(2300.0))
    z[n // 3: n // 3 + n // 20, n // 2: n // 2 + n // 15] = np.nan
    return z


def write_geotiff(path: str, z: np.ndarray, grid: Grid) -> None:
    drv = gdal.GetDriverByName("GTiff")
    ds = drv.Create(path, grid.cols, grid.rows, 1, gdal.GDT_Float32, ["TILED=YES"])
    ds.SetGeoTransform(grid.transform)
    band = ds.GetRasterBand(1)
    band.SetNoDataValue(NODATA)
    band.WriteArray(np.where(np.isnan(z), np.float32(NODATA), z))
    ds.FlushCache()
    band = ds = None


def best_of(repeat: int, fn) -> float:
    best = float("inf")
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--size", type=int, default=5000, help="rows = cols of the surface")
    ap.add_argument("--repeat", type=int, default=3, help="runs per timing (best is kept)")
    args = ap.parse_args(argv)
    if shutil.which("gdaldem") is None:
        raise SystemExit("gdaldem not found: install gdal-bin (sudo apt-get install gdal-bin)")

    n = args.size
    grid = Grid((400_000.0, CELL_M, 0.0, 7_000_000.0, 0.0, -CELL_M), (n, n))
    tmp = tempfile.mkdtemp(prefix="strikeline-bench-")
    try:
        src = os.path.join(tmp, "surface.tif")
        z = make_surface(n)
        write_geotiff(src, z, grid)
        del z

        def gdaldem(what):
            out = os.path.join(tmp, f"{what}.tif")
            subprocess.run(["gdaldem", what, src, out, "-q"], check=True)

        t_slope = best_of(args.repeat, lambda: gdaldem("slope"))
        t_aspect = best_of(args.repeat, lambda: gdaldem("aspect"))

        ds = gdal.Open(src)
        t_read = best_of(1, lambda: ds.GetRasterBand(1).ReadAsArray())
        surface = ds.GetRasterBand(1).ReadAsArray()
        surface[surface == np.float32(NODATA)] = np.nan

        def in_process_gdal():
            for what in ("slope", "aspect"):
                r = gdal.DEMProcessing("", ds, what, format="MEM")
                r = None
        t_gdal_mem = best_of(args.repeat, in_process_gdal)
        ds = None

        t_ours = best_of(args.repeat, lambda: dip_grids(surface, grid))
        surface64 = surface.astype(np.float64)
        t_ours64 = best_of(args.repeat, lambda: dip_grids(surface64, grid))
        del surface64

        tracemalloc.start()
        tracemalloc.reset_peak()
        base = tracemalloc.get_traced_memory()[0]
        result = dip_grids(surface, grid)
        peak = tracemalloc.get_traced_memory()[1] - base
        tracemalloc.stop()
        del result
    finally:
        shutil.rmtree(tmp, ignore_errors=True)

    grid_mb = surface.nbytes / 2**20
    t_gdaldem = t_slope + t_aspect
    ratio_t = t_ours / t_gdaldem
    ratio_m = peak / surface.nbytes
    print(f"dip grids benchmark: {n} x {n} float32 surface ({grid_mb:.0f} MiB), "
          f"best of {args.repeat}; GDAL {gdal.__version__}, numpy {np.__version__}, "
          f"Python {platform.python_version()}, {os.cpu_count()} CPU(s)")
    print()
    rows = [
        ("gdaldem slope (CLI: read + compute + write)", f"{t_slope:8.3f} s"),
        ("gdaldem aspect (CLI: read + compute + write)", f"{t_aspect:8.3f} s"),
        ("gdaldem slope + aspect", f"{t_gdaldem:8.3f} s"),
        ("GDAL DEMProcessing slope + aspect in-process, to MEM", f"{t_gdal_mem:8.3f} s"),
        ("GeoTIFF read (GDAL, not part of dip_grids time)", f"{t_read:8.3f} s"),
        ("dip_grids, float32 input (compute only)", f"{t_ours:8.3f} s"),
        ("dip_grids, float64 input (compute only)", f"{t_ours64:8.3f} s"),
        ("time ratio dip_grids / gdaldem slope+aspect",
         f"{ratio_t:8.2f} x  (target <= {TARGET_TIME_RATIO:.1f})"),
        ("time ratio dip_grids / in-process GDAL", f"{t_ours / t_gdal_mem:8.2f} x"),
        ("dip_grids peak memory beyond input (tracemalloc)",
         f"{peak / 2**20:8.0f} MiB = {ratio_m:.2f} x grid  (target < {TARGET_MEMORY_RATIO:.1f})"),
    ]
    width = max(len(r[0]) for r in rows)
    for name, value in rows:
        print(f"  {name:<{width}}  {value}")
    ok = ratio_t <= TARGET_TIME_RATIO and ratio_m < TARGET_MEMORY_RATIO
    print()
    print("targets met" if ok else "TARGETS MISSED")
    return 0 if ok else 1


if __name__ == "__main__":
    raise SystemExit(main())
