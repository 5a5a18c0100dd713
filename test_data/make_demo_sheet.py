"""Write the fictional Harnvel Moor demo sheet into ``test_data/demo/``.

Run from the repository root::

    .venv/bin/python test_data/make_demo_sheet.py            # writes test_data/demo/
    .venv/bin/python test_data/make_demo_sheet.py --out DIR  # writes DIR/

Everything is analytic (sums of smooth functions, no random numbers), so every run gives the
same grid values and the same line geometries. The GeoPackages are written with a fixed
timestamp (GDAL's ``OGR_CURRENT_DATE``) so that repeated runs give the same bytes.

Outputs
-------
``dem.tif``
    400 x 400 cells at 10 m, float32, DEFLATE with floating-point predictor, nodata -9999
    (a small triangle of void cells in the north-east corner, as left by a survey gap).
``contacts.gpkg``, layer ``contacts``
    Outcrop trace of the sub-Harnvel unconformity: the zero line of (DEM - plane elevation),
    traced with GDAL's contour generator, clipped out of the Mirrow Water lake (a contact under
    water is not a mapped contact), pieces shorter than 50 m dropped.
``contours.gpkg``, layer ``topo_contours``
    Topographic contours of the DEM every 10 m, field ``elev_m``.
``truth.json``
    The plane and the fictional names.

This is a data-making script, not library code: it talks to GDAL/OGR directly.
"""
from __future__ import annotations

import argparse
import json
import math
from pathlib import Path

import numpy as np
import shapely
from osgeo import gdal, ogr, osr

gdal.UseExceptions()
ogr.UseExceptions()
osr.UseExceptions()

# ---------------------------------------------------------------- the fictional sheet
EPSG = 32631  # WGS 84 / UTM zone 31N; the coordinates below are invented
NCOLS = NROWS = 400
CELL_M = 10.0
X_WEST = 486_300.0
Y_NORTH = 5_217_700.0
NODATA = -9999.0

# The sub-Harnvel unconformity: a plane of our own choosing.
DIP_DEG = 18.7
DIP_DIRECTION_DEG = 221.3
REF_X = 488_412.0
REF_Y = 5_215_583.0
REF_Z = 607.4

CONTOUR_INTERVAL_M = 10.0
MIN_TRACE_LENGTH_M = 50.0
MIN_TOPO_LENGTH_M = 1.0  # only slivers left by cutting lines back to the DEM's domain
FIXED_TIMESTAMP = "2024-01-01T00:00:00.000Z"

NAMES = {
    "sheet": "Harnvel Moor (fictional demo sheet)",
    "lake": "Mirrow Water",
    "upper_unit": "Harnvel Sandstone Formation",
    "lower_unit": "Ostrim Schist Group",
    "contact": "base of the Harnvel Sandstone Formation",
}

# Mirrow Water: a closed basin in the terrain, flooded to a level just below its rim.
LAKE_X = 488_655.0
LAKE_Y = 5_214_840.0
LAKE_DEPTH_M = 42.0
LAKE_RADIUS_M = 310.0
DAM_HEIGHT_M = 18.0


def cell_centres():
    """Easting and northing of every cell centre, shape (NROWS, NCOLS) each."""
    x = X_WEST + (np.arange(NCOLS) + 0.5) * CELL_M
    y = Y_NORTH - (np.arange(NROWS) + 0.5) * CELL_M
    return np.meshgrid(x, y)


def plane_elevation(x, y):
    """Elevation (m) of the unconformity plane at (x, y)."""
    dd = math.radians(DIP_DIRECTION_DEG)
    along_dip = (x - REF_X) * math.sin(dd) + (y - REF_Y) * math.cos(dd)
    return REF_Z - math.tan(math.radians(DIP_DEG)) * along_dip


def terrain(x, y):
    """Land surface before the lake is flooded: moor upland cut by meandering valleys.

    The valleys run roughly down the dip direction, so the gently dipping unconformity crops
    out with V-shaped bends where it crosses them.
    """
    xc = X_WEST + NCOLS * CELL_M / 2
    yc = Y_NORTH - NROWS * CELL_M / 2
    X, Y = x - xc, y - yc
    a = math.radians(232.0)  # valley axes trend NE-SW
    u = X * math.sin(a) + Y * math.cos(a)  # along the valleys, increasing to the SW
    v = X * math.cos(a) - Y * math.sin(a)  # across the valleys
    meander = 170.0 * np.sin(2 * np.pi * u / 2300.0 + 0.7) + 60.0 * np.sin(2 * np.pi * u / 870.0)
    ridges = 105.0 * np.cos(2 * np.pi * (v + meander) / 1370.0)
    # valley floors are narrower than ridge crests: sharpen the troughs
    ridges = ridges - 38.0 * np.exp(-(((v + meander + 685.0) % 1370.0 - 685.0) ** 2) / (2 * 140.0**2))
    regional = 590.0 - 0.075 * u + 0.02 * v
    hill = 120.0 * np.exp(-((X + 1100.0) ** 2 + (Y - 1250.0) ** 2) / (2 * 520.0**2))
    knobs = (
        11.0 * np.sin(X / 157.0 + 0.3) * np.cos(Y / 211.0 - 1.1)
        + 7.0 * np.sin((X + 0.6 * Y) / 97.0 + 2.0)
        + 5.0 * np.cos((0.8 * X - Y) / 73.0 - 0.4)
    )
    # Mirrow Water's basin: a scoured hollow in a valley floor held up by a moraine rim
    q = np.hypot(x - LAKE_X, y - LAKE_Y) / LAKE_RADIUS_M
    hollow = -LAKE_DEPTH_M * np.where(q < 1.0, (1.0 - q**2) ** 2, 0.0)
    rim = DAM_HEIGHT_M * np.exp(-(((q - 0.8) / 0.22) ** 2))
    return regional + ridges + hill + knobs + hollow + rim


def flood_lake(z, x, y):
    """Flatten Mirrow Water: fill the basin around the lake centre to just below its rim.

    Returns the flooded DEM, the lake mask and the lake level.
    """
    r = np.hypot(x - LAKE_X, y - LAKE_Y)
    ring = (r > LAKE_RADIUS_M - 2 * CELL_M) & (r < LAKE_RADIUS_M + 2 * CELL_M)
    level = float(np.floor(z[ring].min()) - 3.0)
    below = z < level
    row, col = np.unravel_index(np.argmin(np.where(r < LAKE_RADIUS_M, z, np.inf)), z.shape)
    lake = np.zeros_like(below)
    lake[row, col] = True
    while True:  # 4-connected flood fill by repeated dilation
        grown = lake.copy()
        grown[1:] |= lake[:-1]
        grown[:-1] |= lake[1:]
        grown[:, 1:] |= lake[:, :-1]
        grown[:, :-1] |= lake[:, 1:]
        grown &= below
        if np.array_equal(grown, lake):
            break
        lake = grown
    if np.any(lake & (r >= LAKE_RADIUS_M - 2 * CELL_M)):
        raise RuntimeError("Mirrow Water spills out of its basin; lower the level")
    out = z.copy()
    out[lake] = level
    return out, lake, level


def void_corner(shape):
    """A small triangle of void cells in the north-east corner (a survey gap)."""
    rows, cols = np.indices(shape)
    return (rows + (shape[1] - 1 - cols)) < 9


def mem_raster(array, srs_wkt, nodata):
    ds = gdal.GetDriverByName("MEM").Create("", NCOLS, NROWS, 1, gdal.GDT_Float64)
    ds.SetGeoTransform((X_WEST, CELL_M, 0.0, Y_NORTH, 0.0, -CELL_M))
    ds.SetProjection(srs_wkt)
    band = ds.GetRasterBand(1)
    band.SetNoDataValue(nodata)
    band.WriteArray(array)
    return ds


def contour_lines(array, srs, *, levels=None, interval=None):
    """Run GDAL's contour generator; return a list of (level, shapely LineString)."""
    ds = mem_raster(array, srs.ExportToWkt(), NODATA)
    mem = ogr.GetDriverByName("Memory").CreateDataSource("")
    layer = mem.CreateLayer("c", srs, ogr.wkbLineString)
    layer.CreateField(ogr.FieldDefn("id", ogr.OFTInteger))
    layer.CreateField(ogr.FieldDefn("level", ogr.OFTReal))
    options = ["ID_FIELD=0", "ELEV_FIELD=1", f"NODATA={NODATA}"]
    if levels is not None:
        options.append("FIXED_LEVELS=" + ",".join(str(v) for v in levels))
    else:
        options.append(f"LEVEL_INTERVAL={interval}")
    gdal.ContourGenerateEx(ds.GetRasterBand(1), layer, options=options)
    out = []
    for feat in layer:
        geom = shapely.from_wkb(bytes(feat.GetGeometryRef().ExportToWkb()))
        geom = shapely.force_2d(geom)
        for part in shapely.get_parts(geom):
            if part.length > 0:
                out.append((feat.GetField("level"), part))
    return out


def squares_polygon(squares):
    """Union of the squares between cell centres flagged in ``squares`` (shape rows-1, cols-1).

    Square ``[i, j]`` has the centres of cells ``(i, j)``, ``(i+1, j)``, ``(i, j+1)`` and
    ``(i+1, j+1)`` as its corners: the cells the bilinear surface blends inside it.
    """
    rows, cols = np.nonzero(squares)
    x0 = X_WEST + (cols + 0.5) * CELL_M
    y0 = Y_NORTH - (rows + 0.5) * CELL_M
    return shapely.union_all(shapely.box(x0, y0 - CELL_M, x0 + CELL_M, y0))


def corner_any(mask):
    """Squares between cell centres with at least one corner cell in ``mask``."""
    return mask[:-1, :-1] | mask[1:, :-1] | mask[:-1, 1:] | mask[1:, 1:]


def defined_domain(void):
    """Where the DEM's bilinear surface is defined: inside the outermost cell centres and off
    every square that touches a void cell, shrunk by a millimetre.

    GDAL's contour generator also draws into the half-cell strip beyond the outermost centres
    (where it extends the edge values); the lines are cut back to the domain so that every
    vertex can be checked against the bilinear DEM. The millimetre keeps cut ends strictly
    inside valid squares.
    """
    eps = 1e-3
    half = CELL_M / 2
    frame = shapely.box(X_WEST + half + eps, Y_NORTH - NROWS * CELL_M + half + eps,
                        X_WEST + NCOLS * CELL_M - half - eps, Y_NORTH - half - eps)
    return shapely.difference(frame, shapely.buffer(squares_polygon(corner_any(void)), eps, join_style="mitre"))


def flat_lake_polygon(lake):
    """Polygon of the lake floor where the bilinear DEM is exactly flat.

    That is the union of the squares between cell centres whose four corner cells are all
    lake cells; there the trace is a straight line across water, not a mapped contact.
    """
    return squares_polygon(~corner_any(~lake))


def clipped_parts(geom, domain, min_length_m):
    """Parts of ``geom`` inside ``domain``, merged, shorter pieces dropped."""
    clipped = shapely.line_merge(shapely.intersection(geom, domain))
    return [p for p in shapely.get_parts(clipped) if p.length >= min_length_m]


def write_dem(path, dem, srs):
    opts = ["COMPRESS=DEFLATE", "PREDICTOR=3", "ZLEVEL=9"]
    ds = gdal.GetDriverByName("GTiff").Create(str(path), NCOLS, NROWS, 1, gdal.GDT_Float32, options=opts)
    ds.SetGeoTransform((X_WEST, CELL_M, 0.0, Y_NORTH, 0.0, -CELL_M))
    ds.SetProjection(srs.ExportToWkt())
    band = ds.GetRasterBand(1)
    band.SetNoDataValue(NODATA)
    band.SetDescription("elevation_m")
    band.SetUnitType("m")
    band.WriteArray(dem.astype(np.float32))
    band.FlushCache()
    ds = None


def write_lines(path, layer_name, srs, fields, records):
    """Write LineStrings with attributes to a fresh GeoPackage (one layer)."""
    if path.exists():
        path.unlink()
    drv = ogr.GetDriverByName("GPKG")
    ds = drv.CreateDataSource(str(path))
    layer = ds.CreateLayer(layer_name, srs, ogr.wkbLineString, options=["FID=fid", "GEOMETRY_NAME=geom"])
    for name, kind in fields:
        layer.CreateField(ogr.FieldDefn(name, kind))
    layer.StartTransaction()
    for geom, attrs in records:
        feat = ogr.Feature(layer.GetLayerDefn())
        for name, value in attrs.items():
            feat.SetField(name, value)
        feat.SetGeometry(ogr.CreateGeometryFromWkb(shapely.to_wkb(geom, output_dimension=2)))
        layer.CreateFeature(feat)
    layer.CommitTransaction()
    ds = None


def build(out_dir: Path) -> dict:
    """Generate the sheet into ``out_dir``; return a small summary."""
    out_dir.mkdir(parents=True, exist_ok=True)
    gdal.SetConfigOption("OGR_CURRENT_DATE", FIXED_TIMESTAMP)
    srs = osr.SpatialReference()
    srs.ImportFromEPSG(EPSG)
    srs.SetAxisMappingStrategy(osr.OAMS_TRADITIONAL_GIS_ORDER)

    x, y = cell_centres()
    dem, lake, lake_level = flood_lake(terrain(x, y), x, y)
    dem = dem.astype(np.float32)  # the values as stored; everything below derives from them
    void = void_corner(dem.shape)
    dem[void] = NODATA
    write_dem(out_dir / "dem.tif", dem, srs)

    valid = ~void
    dem64 = dem.astype(np.float64)
    depth = np.where(valid, dem64 - plane_elevation(x, y), NODATA)
    domain = defined_domain(void)
    trace = shapely.union_all([g for _, g in contour_lines(depth, srs, levels=[0.0])])
    on_land = shapely.difference(domain, flat_lake_polygon(lake))
    pieces = clipped_parts(trace, on_land, MIN_TRACE_LENGTH_M)
    # a stable order: west to east by the first vertex
    pieces.sort(key=lambda g: (round(g.coords[0][0], 3), round(g.coords[0][1], 3)))
    attrs = {"name": NAMES["contact"], "unit": NAMES["upper_unit"], "kind": "unconformity"}
    write_lines(out_dir / "contacts.gpkg", "contacts", srs,
                [("name", ogr.OFTString), ("unit", ogr.OFTString), ("kind", ogr.OFTString)],
                [(p, attrs) for p in pieces])

    topo = [(level, part)
            for level, g in contour_lines(np.where(valid, dem64, NODATA), srs, interval=CONTOUR_INTERVAL_M)
            for part in clipped_parts(g, domain, MIN_TOPO_LENGTH_M)]
    write_lines(out_dir / "contours.gpkg", "topo_contours", srs, [("elev_m", ogr.OFTReal)],
                [(g, {"elev_m": float(level)}) for level, g in topo])

    truth = {
        "sheet": NAMES["sheet"],
        "description": (
            "Fictional demo sheet. Gently dipping Harnvel Sandstone Formation rests with a planar "
            "angular unconformity on the Ostrim Schist Group; the contact crops out across "
            "meandering NE-SW valleys and is hidden beneath Mirrow Water, where it is not mapped."
        ),
        "contact": NAMES["contact"],
        "upper_unit": NAMES["upper_unit"],
        "lower_unit": NAMES["lower_unit"],
        "lake": NAMES["lake"],
        "lake_level_m": lake_level,
        "crs": f"EPSG:{EPSG}",
        "dip_deg": DIP_DEG,
        "dip_direction_deg": DIP_DIRECTION_DEG,
        "strike_rhr_deg": (DIP_DIRECTION_DEG - 90.0) % 360.0,
        "point": [REF_X, REF_Y, REF_Z],
        "plane_equation": "z = point_z - tan(dip) * ((x - point_x) * sin(dip_direction) + (y - point_y) * cos(dip_direction))",
        "dem": {"cols": NCOLS, "rows": NROWS, "cell_m": CELL_M, "nodata": NODATA,
                "x_west": X_WEST, "y_north": Y_NORTH},
        "contour_interval_m": CONTOUR_INTERVAL_M,
        "trace_min_length_m": MIN_TRACE_LENGTH_M,
        "trace_clipped_by_lake": True,
    }
    (out_dir / "truth.json").write_text(json.dumps(truth, indent=2) + "\n")
    return {
        "n_contacts": len(pieces),
        "n_contact_vertices": int(sum(len(p.coords) for p in pieces)),
        "contact_length_m": float(sum(p.length for p in pieces)),
        "n_topo_contours": len(topo),
        "n_topo_vertices": int(sum(len(g.coords) for _, g in topo)),
        "lake_cells": int(lake.sum()),
        "lake_level_m": lake_level,
        "void_cells": int(void.sum()),
        "relief_m": float(dem[valid].max() - dem[valid].min()),
    }


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=Path(__file__).resolve().parent / "demo",
                        help="output directory (default: test_data/demo next to this script)")
    args = parser.parse_args(argv)
    summary = build(args.out)
    for key, value in summary.items():
        print(f"{key}: {value}")


if __name__ == "__main__":
    main()
