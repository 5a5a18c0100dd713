"""Invented map sheets for the bench scripts, made deterministically with GDAL.

A sheet is a square of fictional terrain (smooth hills and valleys of a few hundred metres of
relief) in UTM zone 33N, written as a tiled float32 GeoTIFF block by block (a 30,000 x 30,000 DEM
never sits in memory whole), and one or more contact surfaces whose outcrop traces are drawn
by GDAL's contour generator as the zero line of (terrain - surface). The traces are drawn on a
grid of at most ``TRACE_CELLS`` cells a side over the same square, from the formulas (not from
the DEM file), so one sheet's contacts are the same lines whatever the DEM's resolution.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np
from osgeo import gdal, ogr, osr

EPSG = 32633
X0, Y0 = 400_000.0, 5_300_000.0
TRACE_CELLS = 2_000
BLOCK_ROWS = 512
#: Plane of the planar workloads: dips 14 deg toward 123 deg through the sheet's centre at 600 m.
PLANE_DIP_DEG, PLANE_DIR_DEG, PLANE_Z = 14.0, 123.0, 600.0


def terrain(x, y):
    """Ground elevation (m) at map coordinates: 310-890 m of smooth hills (invented)."""
    u, v = (x - X0) / 1000.0, (y - Y0) / 1000.0
    return (600 + 180 * np.sin(u / 1.7) * np.cos(v / 2.3) + 90 * np.sin(u / 0.6 + v / 0.9)
            + 40 * np.cos(u / 0.31 - v / 0.47))


def plane_surface(size_m: float, *, offset_m: float = 0.0):
    """The planar contact (optionally raised by ``offset_m``) as ``f(x, y) -> z``."""
    d, dd = np.radians(PLANE_DIP_DEG), np.radians(PLANE_DIR_DEG)
    cx, cy = X0 + size_m / 2, Y0 + size_m / 2

    def f(x, y):
        return PLANE_Z + offset_m - np.tan(d) * ((x - cx) * np.sin(dd) + (y - cy) * np.cos(dd))
    return f


def fold_surface(size_m: float, *, offset_m: float = 0.0):
    """A curved contact: an open upright fold (wavelength half the sheet, amplitude 120 m,
    hinge trending 033) that plunges 3 deg toward 033 and is tilted 4 deg toward 123; its trace
    winds across the sheet in closed loops and long arcs."""
    cx, cy = X0 + size_m / 2, Y0 + size_m / 2
    a = np.radians(123.0)
    lam = size_m / 2.0

    def f(x, y):
        across = (x - cx) * np.sin(a) + (y - cy) * np.cos(a)   # toward 123
        along = (x - cx) * np.cos(a) - (y - cy) * np.sin(a)    # toward 033
        return (PLANE_Z + offset_m + 120.0 * np.cos(2 * np.pi * across / lam)
                - np.tan(np.radians(4.0)) * across - np.tan(np.radians(3.0)) * along)
    return f


def _srs():
    srs = osr.SpatialReference()
    srs.ImportFromEPSG(EPSG)
    return srs


def write_dem(path: Path, cells: int, size_m: float, *, x0: float = X0, y0: float = Y0,
              block_rows: int = BLOCK_ROWS) -> Path:
    """Write the terrain over the square of side ``size_m`` whose south-west corner is
    (``x0``, ``y0``) as a ``cells`` x ``cells`` tiled float32 GeoTIFF, ``block_rows`` at a time."""
    gdal.UseExceptions()
    cell = size_m / cells
    opts = ["COMPRESS=DEFLATE", "PREDICTOR=3", "TILED=YES", "BIGTIFF=IF_SAFER", "ZLEVEL=1",
            "NUM_THREADS=ALL_CPUS"]
    ds = gdal.GetDriverByName("GTiff").Create(str(path), cells, cells, 1, gdal.GDT_Float32, options=opts)
    ds.SetGeoTransform((x0, cell, 0.0, y0 + size_m, 0.0, -cell))
    ds.SetProjection(_srs().ExportToWkt())
    band = ds.GetRasterBand(1)
    band.SetNoDataValue(-9999)
    xs = x0 + cell * (np.arange(cells) + 0.5)
    for r0 in range(0, cells, block_rows):
        r1 = min(cells, r0 + block_rows)
        ys = y0 + size_m - cell * (np.arange(r0, r1) + 0.5)
        band.WriteArray(terrain(xs[None, :], ys[:, None]).astype(np.float32), 0, r0)
    band = None
    ds.FlushCache()
    ds = None
    return path


def write_traces(path: Path, size_m: float, surfaces, *, x0: float = X0, y0: float = Y0,
                 trace_cells: int = TRACE_CELLS,
                 unit_names=None, pieces_m: float | None = None, max_lines: int | None = None) -> int:
    """Draw the outcrop trace of each surface over the square of side ``size_m`` whose south-west
    corner is (``x0``, ``y0``) (``f(x, y) -> z``) into a GeoPackage line layer
    ``contacts`` with fields ``unit`` (the surface's name) and ``elev``; return the line count.

    ``pieces_m`` cuts every trace into pieces of about that length (a contact mapped in
    stretches between cover); ``max_lines`` keeps the longest lines up to that count.
    """
    gdal.UseExceptions()
    ogr.UseExceptions()
    cell = size_m / trace_cells
    xs = x0 + cell * (np.arange(trace_cells) + 0.5)
    ys = y0 + size_m - cell * (np.arange(trace_cells) + 0.5)
    X, Y = np.meshgrid(xs, ys)
    ground = terrain(X, Y)
    gt = (x0, cell, 0.0, y0 + size_m, 0.0, -cell)
    names = unit_names or [f"unit{k + 1}" for k in range(len(surfaces))]
    lines = []  # (unit, geometry)
    for name, f in zip(names, surfaces):
        mem = gdal.GetDriverByName("MEM").Create("", trace_cells, trace_cells, 1, gdal.GDT_Float32)
        mem.SetGeoTransform(gt)
        mem.GetRasterBand(1).WriteArray((ground - f(X, Y)).astype(np.float32))
        tmp = ogr.GetDriverByName("Memory").CreateDataSource("")
        lyr = tmp.CreateLayer("t", _srs(), ogr.wkbLineString)
        lyr.CreateField(ogr.FieldDefn("id", ogr.OFTInteger))
        lyr.CreateField(ogr.FieldDefn("elev", ogr.OFTReal))
        gdal.ContourGenerateEx(mem.GetRasterBand(1), lyr, options=["FIXED_LEVELS=0", "ID_FIELD=0", "ELEV_FIELD=1"])
        for feat in lyr:
            g = feat.GetGeometryRef()
            pts = np.array(g.GetPoints())[:, :2]
            if pieces_m:
                seg = np.hypot(*np.diff(pts, axis=0).T)
                along = np.concatenate([[0.0], np.cumsum(seg)])
                k = np.floor(along / pieces_m).astype(int)
                for j in np.unique(k):
                    idx = np.flatnonzero(k == j)
                    idx = np.arange(idx[0], min(idx[-1] + 2, len(pts)))  # share the cut vertex
                    if len(idx) >= 2:
                        lines.append((name, pts[idx]))
            elif len(pts) >= 2:
                lines.append((name, pts))
        mem = tmp = None
    if max_lines is not None and len(lines) > max_lines:
        length = [float(np.hypot(*np.diff(p, axis=0).T).sum()) for _, p in lines]
        keep = sorted(np.argsort(length)[::-1][:max_lines])
        lines = [lines[i] for i in keep]
    out = ogr.GetDriverByName("GPKG").CreateDataSource(str(path))
    lyr = out.CreateLayer("contacts", _srs(), ogr.wkbLineString)
    lyr.CreateField(ogr.FieldDefn("unit", ogr.OFTString))
    lyr.StartTransaction()
    for name, pts in lines:
        feat = ogr.Feature(lyr.GetLayerDefn())
        feat.SetField("unit", name)
        g = ogr.Geometry(ogr.wkbLineString)
        for x, y in pts:
            g.AddPoint_2D(float(x), float(y))
        feat.SetGeometry(g)
        lyr.CreateFeature(feat)
    lyr.CommitTransaction()
    n = lyr.GetFeatureCount()
    lyr = out = None
    return n
