"""Benchmark: writing a run's GeoTIFFs (a script, not a test).

Five float64 grids of a fictional sheet (surface of a gently folded contact, dip, dip direction,
depth below a hilly DEM, uncertainty growing away from the data; NaN outside a corner), written:

- reference: the previous writer, one file after another (a whole float32 copy per grid, DEFLATE
  level 6 with the floating-point predictor, the whole band read back and compared);
- strikeline.io.geotiff.write_geotiffs: DEFLATE level 1, float32 a block of rows at a time, the
  files written concurrently in threads, the check reading two tiles and every tile's place.

Prints time, file size, the peak of numpy's extra memory (tracemalloc) and the ratio, checks that
the pixel values of both are identical (read back with GDAL), then one grid under other
compressions (size and time) for the trade stated in strikeline.io.geotiff.

Run:  .venv/bin/python bench/bench_writes.py [--cells 4000]
"""
from __future__ import annotations

import argparse
import os
import tempfile
import time
from pathlib import Path

import numpy as np
from osgeo import gdal

from _measure import load_line, machine_line, result_line, traced
from strikeline.geometry.grid import Grid
from strikeline.io.geotiff import NODATA_OUT, RasterOut, write_geotiffs

OLD_OPTIONS = ["COMPRESS=DEFLATE", "PREDICTOR=3", "TILED=YES", "BIGTIFF=IF_SAFER"]


def sheet_grids(cells: int, cell_m: float = 5.0):
    """Five grids of a fictional sheet, float64 with NaN, and their Grid."""
    grid = Grid((400_000.0, cell_m, 0.0, 5_300_000.0 + cells * cell_m, 0.0, -cell_m), (cells, cells))
    xs, ys = grid.cell_centres()
    u = (xs - 400_000.0)[None, :] / 1000.0
    v = (ys - 5_300_000.0)[:, None] / 1000.0
    dem = 600 + 180 * np.sin(u / 1.7) * np.cos(v / 2.3) + 90 * np.sin(u / 0.6 + v / 0.9) + 40 * np.cos(u / 0.31 - v / 0.47)
    surface = 520 - 24 * u + 60 * np.sin(v / 3.1) + 0 * u * v
    gy, gx = np.gradient(surface, -cell_m, cell_m)
    dip = np.degrees(np.arctan(np.hypot(gx, gy)))
    ddir = np.mod(np.degrees(np.arctan2(-gx, -gy)), 360.0)
    unc = np.sqrt(2.0 ** 2 + (0.9 * np.hypot(u - cells * cell_m / 2000, v - cells * cell_m / 2000)) ** 2)
    depth = dem - surface
    hole = (u + v) < cells * cell_m / 1000 * 0.15  # a corner without data
    grids = {"surface": surface, "dip": dip, "dip_direction": ddir, "depth": depth, "uncertainty": unc}
    for a in grids.values():
        a[hole] = np.nan
    return grids, grid


def old_write(path: str, array, grid: Grid, description: str) -> None:
    """The previous writer's work: a whole float32 copy, DEFLATE 6, the whole band read back."""
    a = np.asarray(array, dtype=np.float32)
    values = np.where(np.isfinite(a), a, np.float32(NODATA_OUT))
    ds = gdal.GetDriverByName("GTiff").Create(path + ".part", grid.cols, grid.rows, 1, gdal.GDT_Float32,
                                              options=OLD_OPTIONS)
    ds.SetGeoTransform(grid.transform)
    b = ds.GetRasterBand(1)
    b.SetNoDataValue(NODATA_OUT)
    b.SetDescription(description)
    b.SetUnitType("m")
    b.WriteArray(values)
    b = ds = None
    ds = gdal.Open(path + ".part")
    got = ds.GetRasterBand(1).ReadAsArray()
    ds = None
    assert np.array_equal(got.view(np.uint32), values.view(np.uint32))
    os.replace(path + ".part", path)


def read(path) -> np.ndarray:
    ds = gdal.Open(str(path))
    a = ds.GetRasterBand(1).ReadAsArray()
    ds = None
    return a


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cells", type=int, default=4000)
    args = ap.parse_args(argv)
    gdal.UseExceptions()
    machine_line()
    grids, grid = sheet_grids(args.cells)
    mib = 2 ** 20
    print(f"workload: {len(grids)} grids of {args.cells} x {args.cells} cells (float64 in memory, "
          f"{sum(a.nbytes for a in grids.values()) / mib:.0f} MiB); {os.cpu_count()} CPUs, "
          f"load {os.getloadavg()[0]:.1f}")
    with tempfile.TemporaryDirectory() as tmp:
        old_dir, new_dir = Path(tmp) / "old", Path(tmp) / "new"
        old_dir.mkdir()
        new_dir.mkdir()
        _, m_old = traced(lambda: [old_write(str(old_dir / f"{k}.tif"), a, grid, k) for k, a in grids.items()])
        items = [RasterOut(new_dir / f"{k}.tif", a, k, "m") for k, a in grids.items()]
        _, m_new = traced(lambda: write_geotiffs(items, grid))
        size = {d: sum(os.path.getsize(d / f"{k}.tif") for k in grids) for d in (old_dir, new_dir)}
        same = all(np.array_equal(read(old_dir / f"{k}.tif").view(np.uint32), read(new_dir / f"{k}.tif").view(np.uint32))
                   for k in grids)
        print(f"  {'writer':<52s} {'wall s':>7s} {'cpu s':>7s} {'MiB':>7s} {'extra MiB':>9s}")
        for name, m, d in (("reference: one by one, DEFLATE 6, whole read-back", m_old, old_dir),
                           ("write_geotiffs: threads, DEFLATE 1, two-tile check", m_new, new_dir)):
            print(f"  {name:<52s} {m.wall_s:7.2f} {m.cpu_s:7.2f} {size[d] / mib:7.1f} {m.peak_bytes / mib:9.0f}")
        print(f"  speed-up {m_old.wall_s / m_new.wall_s:.2f}x; size {size[new_dir] / size[old_dir]:.2f}x; "
              f"pixel values identical: {same}")
        result_line(f"write {len(grids)} GeoTIFFs of {args.cells:,}^2 cells (write_geotiffs)", m_new,
                    peak_note="tracemalloc", ratio=m_new.wall_s / m_old.wall_s,
                    reference=f"one by one, DEFLATE 6, whole read-back ({m_old.wall_s:.2f} s)",
                    extra=f"size {size[new_dir] / size[old_dir]:.2f}x; pixel values identical: {same}")
        print("one grid (surface), one file, other compressions (GDAL 3.6, 256 x 256 tiles):")
        a = np.where(np.isfinite(grids["surface"]), grids["surface"], NODATA_OUT).astype(np.float32)
        for name, opts in (("DEFLATE 6, PREDICTOR=3", ["COMPRESS=DEFLATE", "PREDICTOR=3"]),
                           ("DEFLATE 1, PREDICTOR=3", ["COMPRESS=DEFLATE", "ZLEVEL=1", "PREDICTOR=3"]),
                           ("DEFLATE 1, no predictor", ["COMPRESS=DEFLATE", "ZLEVEL=1"]),
                           ("ZSTD 1, PREDICTOR=3", ["COMPRESS=ZSTD", "ZSTD_LEVEL=1", "PREDICTOR=3"]),
                           ("ZSTD 9, PREDICTOR=3", ["COMPRESS=ZSTD", "ZSTD_LEVEL=9", "PREDICTOR=3"]),
                           ("LZW, PREDICTOR=3", ["COMPRESS=LZW", "PREDICTOR=3"]),
                           ("none", [])):
            p = str(Path(tmp) / "c.tif")
            t = time.perf_counter()
            ds = gdal.GetDriverByName("GTiff").Create(p, grid.cols, grid.rows, 1, gdal.GDT_Float32,
                                                      options=["TILED=YES", *opts])
            ds.GetRasterBand(1).WriteArray(a)
            ds = None
            tw = time.perf_counter() - t
            t = time.perf_counter()
            same = np.array_equal(read(p).view(np.uint32), a.view(np.uint32))
            tr = time.perf_counter() - t
            print(f"  {name:<26s} write {tw:6.2f} s  read {tr:6.2f} s  {os.path.getsize(p) / mib:7.1f} MiB  "
                  f"values identical: {same}")
            os.remove(p)
    load_line("at the end")


if __name__ == "__main__":
    main()
