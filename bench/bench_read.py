"""Benchmark: reading a DEM (a script, not a test).

A fictional 4,000 x 4,000 float32 DEM (DEFLATE, tiled, as surveys ship them) read by
strikeline.io.raster.read_raster, against the previous reading in the same run: the band decoded on
one thread, converted to float64, copied again and scanned for nodata markers on the whole array.
Prints time and the peak of numpy's memory (tracemalloc) per cell, and checks that both give the
same array; one ``result:`` line (``bench/_measure.py``) with the ratio to the previous reading.

Run:  .venv/bin/python bench/bench_read.py [--cells 4000]
"""
from __future__ import annotations

import argparse
import os
import tempfile
from pathlib import Path

import numpy as np
from osgeo import gdal, osr

from _measure import load_line, machine_line, result_line, traced
from strikeline.io.raster import NODATA_SENTINELS, SENTINEL_ABS_LIMIT, read_raster


def make_dem(path: Path, cells: int, cell_m: float = 5.0) -> None:
    srs = osr.SpatialReference()
    srs.ImportFromEPSG(32633)
    ds = gdal.GetDriverByName("GTiff").Create(str(path), cells, cells, 1, gdal.GDT_Float32,
                                              options=["COMPRESS=DEFLATE", "TILED=YES"])
    ds.SetGeoTransform((400_000.0, cell_m, 0.0, 5_300_000.0 + cells * cell_m, 0.0, -cell_m))
    ds.SetProjection(srs.ExportToWkt())
    b = ds.GetRasterBand(1)
    b.SetNoDataValue(-9999.0)
    u = np.arange(cells)[None, :] * cell_m / 1000.0
    for r0 in range(0, cells, 512):
        v = np.arange(r0, min(cells, r0 + 512))[:, None] * cell_m / 1000.0
        z = 600 + 180 * np.sin(u / 1.7) * np.cos(v / 2.3) + 90 * np.sin(u / 0.6 + v / 0.9)
        z[:, :50] = -9999.0  # a strip without data
        b.WriteArray(z.astype(np.float32), 0, r0)
    ds = None


def previous_read(path: Path) -> np.ndarray:
    """The previous reading's array work (same values; the checks that refuse bad files aside)."""
    ds = gdal.Open(str(path))
    b = ds.GetRasterBand(1)
    nodata = b.GetNoDataValue()
    arr = np.array(b.ReadAsArray().astype(np.float64), dtype=np.float64)
    ds = None
    for v in NODATA_SENTINELS:
        if v != nodata:
            np.count_nonzero(arr == v)
    huge = np.abs(arr) >= SENTINEL_ABS_LIMIT
    huge &= arr != nodata
    np.count_nonzero(huge & np.isfinite(arr))
    arr[arr == nodata] = np.nan
    arr[~np.isfinite(arr)] = np.nan
    assert np.isfinite(arr).any()
    return arr


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cells", type=int, default=4000)
    args = ap.parse_args(argv)
    gdal.UseExceptions()
    machine_line()
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "dem.tif"
        make_dem(path, args.cells)
        n = args.cells ** 2
        print(f"workload: {args.cells} x {args.cells} float32 DEM, DEFLATE, tiled "
              f"({os.path.getsize(path) / 2 ** 20:.0f} MiB); {os.cpu_count()} CPUs, load {os.getloadavg()[0]:.1f}")
        old, m_old = traced(lambda: previous_read(path))
        (new, _), m_new = traced(lambda: read_raster(path, label="DEM"))
        same = np.array_equal(old, new, equal_nan=True)
        print(f"  previous reading      {m_old.wall_s:6.2f} s  peak {m_old.peak_bytes / n:5.1f} bytes/cell")
        print(f"  read_raster           {m_new.wall_s:6.2f} s  peak {m_new.peak_bytes / n:5.1f} bytes/cell")
        print(f"  speed-up {m_old.wall_s / m_new.wall_s:.2f}x; memory {m_new.peak_bytes / m_old.peak_bytes:.2f}x; "
              f"same array: {same}")
        result_line(f"read a {args.cells:,}^2 float32 DEM (read_raster)", m_new, peak_note="tracemalloc",
                    ratio=m_new.wall_s / m_old.wall_s,
                    reference=f"the previous reading ({m_old.wall_s:.2f} s, {m_old.peak_bytes / n:.1f} B/cell)",
                    extra=f"{m_new.peak_bytes / n:.1f} B/cell; same array: {same}")
    load_line("at the end")

if __name__ == "__main__":
    main()
