"""Unit polygons of the fold sheet (test_data/fold), made from its analytic truth: where the
ground lies above the true surface the upper unit (Cawl) crops out, elsewhere the lower one
(Brenlow); a block of superficial cover (Alluvium) is laid over the south-west corner. GDAL's
polygoniser (gdal.Polygonize) turns the cells into polygons. Shared by the command-line tests
and the QGIS adapter's tests (test inputs only).
"""
import json
from pathlib import Path

import numpy as np
from osgeo import gdal, ogr, osr

FOLD = Path(__file__).resolve().parents[1] / "test_data" / "fold"


def fold_z(x, y):
    """The true surface elevation of the fold sheet at map points."""
    # Source: truth.json "equation" and "frame" of the fold sheet
    s = json.loads((FOLD / "truth.json").read_text())["surface"]
    a, p = np.radians(s["axis_trend_deg"]), np.radians(s["plunge_deg"])
    u = (x - s["x0"]) * np.sin(a) + (y - s["y0"]) * np.cos(a)
    t = (x - s["x0"]) * np.cos(a) - (y - s["y0"]) * np.sin(a)
    return s["z0"] - np.tan(p) * u + s["amplitude_m"] * np.cos(2 * np.pi * t / s["wavelength_m"])


def fold_dem():
    """``(DEM with NaN, geotransform, projection WKT)`` of the fold sheet."""
    ds = gdal.Open(str(FOLD / "dem.tif"))
    gt, wkt = ds.GetGeoTransform(), ds.GetProjection()
    a = ds.GetRasterBand(1).ReadAsArray().astype(float)
    nd = ds.GetRasterBand(1).GetNoDataValue()
    a[a == nd] = np.nan
    return a, gt, wkt


def write_fold_units(path, *, epsg=None):
    """Write the unit polygons (layer ``units``, fields ``code`` and ``unit``) to a GeoPackage,
    in the sheet's CRS or reprojected to ``epsg``."""
    dem, gt, wkt = fold_dem()
    r, c = np.mgrid[0:dem.shape[0], 0:dem.shape[1]]
    X, Y = gt[0] + (c + 0.5) * gt[1], gt[3] + (r + 0.5) * gt[5]
    code = np.where(dem > fold_z(X, Y), 1, 2).astype(np.int32)
    code[(X - X.min() < 600) & (Y - Y.min() < 500)] = 3  # superficial cover
    mem = gdal.GetDriverByName("MEM").Create("", dem.shape[1], dem.shape[0], 1, gdal.GDT_Int32)
    mem.SetGeoTransform(gt)
    mem.SetProjection(wkt)
    mem.GetRasterBand(1).WriteArray(code)
    tmp = ogr.GetDriverByName("Memory").CreateDataSource("")
    srs = osr.SpatialReference(wkt=wkt)
    lyr = tmp.CreateLayer("cells", srs, ogr.wkbPolygon)
    lyr.CreateField(ogr.FieldDefn("code", ogr.OFTInteger))
    gdal.Polygonize(mem.GetRasterBand(1), None, lyr, 0)
    out_srs = srs
    if epsg is not None:
        out_srs = osr.SpatialReference()
        out_srs.ImportFromEPSG(epsg)
        out_srs.SetAxisMappingStrategy(osr.OAMS_TRADITIONAL_GIS_ORDER)
        srs.SetAxisMappingStrategy(osr.OAMS_TRADITIONAL_GIS_ORDER)
    ct = osr.CoordinateTransformation(srs, out_srs) if epsg is not None else None
    ds = ogr.GetDriverByName("GPKG").CreateDataSource(str(path))
    o = ds.CreateLayer("units", out_srs, ogr.wkbPolygon)
    o.CreateField(ogr.FieldDefn("code", ogr.OFTInteger))
    o.CreateField(ogr.FieldDefn("unit", ogr.OFTString))
    names = {1: "Cawl", 2: "Brenlow", 3: "Alluvium"}
    for f in lyr:
        g = f.GetGeometryRef().Clone()
        if ct is not None:
            g.Transform(ct)
        nf = ogr.Feature(o.GetLayerDefn())
        nf.SetGeometry(g)
        nf.SetField("code", f.GetField("code"))
        nf.SetField("unit", names[f.GetField("code")])
        o.CreateFeature(nf)
    ds = None
    return path
