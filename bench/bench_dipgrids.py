"""Benchmark: dip and dip-direction grids against GDAL's own slope + aspect, memory to memory.

Builds a synthetic N x N float32 surface (``--size``, default 5,000; a folded, dipping surface with
a nodata patch) in memory, then times in the same process, on the same array:

* ``strikeline.maps.dipgrids.dip_grids`` (Zevenbergen & Thorne 1987 central differences),
  computation only;
* the reference, like for like: GDAL's own ``gdal.DEMProcessing`` slope and aspect with the same
  method (``alg="ZevenbergenThorne"``) from a MEM raster holding the array into MEM rasters -
  no file read or written on either side;
* for context, GDAL's default method (``alg="Horn"``, a 3 x 3 Sobel-type window) the same way.

It also checks that the two are the same computation: the largest difference between our dip
and direction and GDAL's slope and aspect on interior cells where both have values. Peak
memory is the growth of the process's resident high-water mark during each computation (GDAL
allocates outside Python, so tracemalloc would not see its share), relative to the grid's size.
Each timing is the best of ``--repeat`` runs.

Usage::

    .venv/bin/python bench/bench_dipgrids.py [--size 5000] [--repeat 3]
"""
from __future__ import annotations

import argparse

import numpy as np
from osgeo import gdal

from _measure import load_line, machine_line, measure, mib, result_line
from strikeline.geometry.grid import Grid
from strikeline.maps.dipgrids import dip_grids

CELL_M = 10.0


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


def mem_raster(z: np.ndarray, grid: Grid):
    ds = gdal.GetDriverByName("MEM").Create("", grid.cols, grid.rows, 1, gdal.GDT_Float32)
    ds.SetGeoTransform(grid.transform)
    band = ds.GetRasterBand(1)
    band.SetNoDataValue(float("nan"))
    band.WriteArray(z)
    return ds


def gdal_slope_aspect(ds, alg: str):
    """GDAL's slope (degrees) and aspect (azimuth of descent, degrees) as MEM rasters."""
    slope = gdal.DEMProcessing("", ds, "slope", format="MEM", alg=alg)
    aspect = gdal.DEMProcessing("", ds, "aspect", format="MEM", alg=alg)
    return slope, aspect


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--size", type=int, default=5000, help="rows = cols of the surface")
    ap.add_argument("--repeat", type=int, default=3, help="runs per timing (best is kept)")
    args = ap.parse_args(argv)
    gdal.UseExceptions()
    machine_line()
    n = args.size
    grid = Grid((400_000.0, CELL_M, 0.0, 7_000_000.0, 0.0, -CELL_M), (n, n))
    z = make_surface(n)
    ds = mem_raster(z, grid)
    print(f"workload: dip + dip direction of a {n:,} x {n:,} float32 surface ({mib(z.nbytes)}), memory to memory, "
          f"best of {args.repeat}")

    (dip, ddir), ours = measure(lambda: dip_grids(z, grid), args.repeat)
    (slope, aspect), zt = measure(lambda: gdal_slope_aspect(ds, "ZevenbergenThorne"), args.repeat)
    s = slope.GetRasterBand(1).ReadAsArray()
    a = aspect.GetRasterBand(1).ReadAsArray()
    nd_s, nd_a = slope.GetRasterBand(1).GetNoDataValue(), aspect.GetRasterBand(1).GetNoDataValue()
    slope = aspect = None
    inner = np.zeros((n, n), dtype=bool)
    inner[1:-1, 1:-1] = True
    both = inner & np.isfinite(dip) & (s != nd_s) & np.isfinite(s)
    d_dip = float(np.max(np.abs(dip[both] - s[both]))) if both.any() else float("nan")
    both_a = both & np.isfinite(ddir) & (a != nd_a) & np.isfinite(a)
    diff_a = np.abs(ddir[both_a] - a[both_a])
    d_dir = float(np.max(np.minimum(diff_a, 360.0 - diff_a))) if both_a.any() else float("nan")
    del s, a, dip, ddir
    _, horn = measure(lambda: gdal_slope_aspect(ds, "Horn"), args.repeat)
    ds = None

    print(f"  same computation: largest difference on {int(both.sum()):,} interior cells: dip {d_dip:.2g} deg, "
          f"direction {d_dir:.2g} deg (GDAL slope/aspect, ZevenbergenThorne)")
    result_line(f"dip grids {n:,}^2 float32, memory to memory", ours, ratio=ours.wall_s / zt.wall_s,
                reference=f"GDAL DEMProcessing slope+aspect ZevenbergenThorne MEM to MEM ({zt.wall_s:.2f} s, "
                          f"peak {mib(zt.peak_bytes)})",
                extra=f"peak {ours.peak_bytes / z.nbytes:.2f} x the grid; GDAL's {zt.peak_bytes / z.nbytes:.2f} x")
    result_line(f"GDAL slope+aspect Horn {n:,}^2, MEM to MEM (context)", horn,
                ratio=horn.wall_s / zt.wall_s, reference="GDAL ZevenbergenThorne")
    load_line("at the end")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
