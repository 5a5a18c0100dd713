"""Benchmark: the whole `strikeline run` chain on a synthetic full map sheet (a script, not a test).

Builds, deterministically, a fictional 15 km x 15 km sheet in a temporary folder: a 3,000 x 3,000
float32 DEM at 5 m cells (smooth hills and valleys of a few hundred metres relief), a planar
dipping contact whose outcrop trace is drawn by GDAL's contour generator (the zero line of
DEM - plane), and runs :func:`strikeline.pipeline.run` on it with ``--model auto``, timing each
stage (read, picks, confidence, local attitudes, model, grids, contours, trace and misfit, write)
and the peak resident memory. Prints the workload and the figures.

Run:  .venv/bin/python bench/bench_run.py [--cells 3000]
"""
from __future__ import annotations

import argparse
import resource
import tempfile
import time
from pathlib import Path

import numpy as np
from osgeo import gdal, ogr, osr

from strikeline import pipeline as pl


def make_sheet(folder: Path, cells: int, cell_m: float = 5.0):
    gdal.UseExceptions()
    ogr.UseExceptions()
    x0, y0 = 400_000.0, 5_300_000.0
    xs = x0 + cell_m * (np.arange(cells) + 0.5)
    ys = y0 + cells * cell_m - cell_m * (np.arange(cells) + 0.5)
    X, Y = np.meshgrid(xs, ys)
    u, v = (X - x0) / 1000.0, (Y - y0) / 1000.0
    dem = (600 + 180 * np.sin(u / 1.7) * np.cos(v / 2.3) + 90 * np.sin(u / 0.6 + v / 0.9)
           + 40 * np.cos(u / 0.31 - v / 0.47)).astype(np.float32)
    srs = osr.SpatialReference()
    srs.ImportFromEPSG(32633)
    gt = (x0, cell_m, 0.0, y0 + cells * cell_m, 0.0, -cell_m)
    dem_path = folder / "dem.tif"
    ds = gdal.GetDriverByName("GTiff").Create(str(dem_path), cells, cells, 1, gdal.GDT_Float32,
                                              options=["COMPRESS=DEFLATE", "TILED=YES"])
    ds.SetGeoTransform(gt)
    ds.SetProjection(srs.ExportToWkt())
    ds.GetRasterBand(1).SetNoDataValue(-9999)
    ds.GetRasterBand(1).WriteArray(dem)
    ds = None
    # a plane dipping 14 deg toward 123 deg through the sheet's centre at 600 m
    d, dd = np.radians(14.0), np.radians(123.0)
    cx, cy = x0 + cells * cell_m / 2, y0 + cells * cell_m / 2
    plane = 600 - np.tan(d) * ((X - cx) * np.sin(dd) + (Y - cy) * np.cos(dd))
    diff = gdal.GetDriverByName("MEM").Create("", cells, cells, 1, gdal.GDT_Float32)
    diff.SetGeoTransform(gt)
    diff.SetProjection(srs.ExportToWkt())
    diff.GetRasterBand(1).WriteArray((dem - plane).astype(np.float32))
    contacts_path = folder / "contacts.gpkg"
    out = ogr.GetDriverByName("GPKG").CreateDataSource(str(contacts_path))
    lyr = out.CreateLayer("contacts", srs, ogr.wkbLineString)
    lyr.CreateField(ogr.FieldDefn("id", ogr.OFTInteger))
    lyr.CreateField(ogr.FieldDefn("elev", ogr.OFTReal))
    gdal.ContourGenerateEx(diff.GetRasterBand(1), lyr, options=["FIXED_LEVELS=0", "ID_FIELD=0", "ELEV_FIELD=1"])
    n_lines = lyr.GetFeatureCount()
    out = None
    return dem_path, contacts_path, n_lines


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cells", type=int, default=3000)
    args = ap.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        t0 = time.perf_counter()
        dem, contacts, n_lines = make_sheet(tmp, args.cells)
        print(f"workload: {args.cells} x {args.cells} DEM at 5 m ({args.cells * 5 / 1000:g} km square), "
              f"{n_lines} contact lines (made in {time.perf_counter() - t0:.1f} s)")
        opts = pl.RunOptions(contacts=str(contacts), dem=str(dem), out=str(tmp / "out"), model="auto")
        stages = {}
        last = [time.perf_counter()]

        def mark(name):
            now = time.perf_counter()
            stages[name] = now - last[0]
            last[0] = now

        start = time.perf_counter()
        inputs = pl.load_inputs(opts)
        mark("read inputs")
        picks = pl.collect_picks(inputs)
        mark("picks")
        results = pl.compute(inputs, opts)
        mark("compute (picks again, confidence, local attitudes, model, grids, contours, trace, misfit)")
        pl.write_results(results, opts.out)
        mark("write outputs")
        total = time.perf_counter() - start
        s = results.summary
        print(f"picks: {len(picks)}; model chosen: {s['model']['chosen']}; local windows: {s['attitudes']['n_windows']}; "
              f"plane dip {s['plane']['dip_deg']:.2f} toward {s['plane']['dip_direction_deg']:.1f} (truth 14.0 / 123.0)")
        for k, v in stages.items():
            print(f"  {k:<90s} {v:7.2f} s")
        peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024 ** 2
        print(f"total {total:.1f} s; peak resident memory {peak:.2f} GiB (ru_maxrss, whole process)")


if __name__ == "__main__":
    main()
