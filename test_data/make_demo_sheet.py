"""Write the fictional demo sheets: Harnvel Moor (``test_data/demo/``) and Tolvane Fell (``test_data/fold/``).

Run from the repository root::

    .venv/bin/python test_data/make_demo_sheet.py                  # writes both sets
    .venv/bin/python test_data/make_demo_sheet.py --only demo      # only test_data/demo/
    .venv/bin/python test_data/make_demo_sheet.py --only fold      # only test_data/fold/
    .venv/bin/python test_data/make_demo_sheet.py --out DIR        # the demo set into DIR/
    .venv/bin/python test_data/make_demo_sheet.py --fold-out DIR   # the fold set into DIR/

The surfaces and the terrain are analytic (sums of smooth functions), so every run gives the
same grid values and the same line geometries. The only random numbers are the "reading errors"
of the dip measurements and the digitising errors of ``contacts_mapped.gpkg``, drawn from
generators with fixed seeds. The GeoPackages are written
with a fixed timestamp (GDAL's ``OGR_CURRENT_DATE``) so that repeated runs give the same bytes.

Outputs in ``demo/`` (Harnvel Moor, a planar unconformity)
----------------------------------------------------------
``dem.tif``
    400 x 400 cells at 10 m, float32, DEFLATE with floating-point predictor, nodata -9999
    (a small triangle of void cells in the north-east corner, as left by a survey gap).
``contacts.gpkg``, layer ``contacts``
    Outcrop trace of the sub-Harnvel unconformity (the base of the Harnvel Sandstone
    Formation): the zero line of (DEM - plane elevation), traced with GDAL's contour generator,
    clipped out of the Mirrow Water lake (a contact under water is not a mapped contact),
    pieces shorter than 50 m dropped.
``contacts_grouped.gpkg``, layer ``contacts``
    The same features with one more text field, ``block``, naming the two pieces the lake
    splits the trace into (``north``, ``south``): input for ``--group-by block``.
``contacts_mapped.gpkg``, layer ``contacts``
    The same two features (fields as ``contacts_grouped.gpkg``) as a field geologist would
    have digitised them (:func:`digitised_line`): vertices every 15-40 m, a smooth sideways
    error of about 3 m (never 8 m), and on the north piece one stretch traced about 70 m off
    the true line. Seeded, so every run gives the same lines.
``top_contacts.gpkg``, layer ``top_contacts``
    Outcrop trace of the top of the Harnvel Sandstone Formation: a plane parallel to the base,
    ``TRUE_THICKNESS_M`` above it (normal distance), made the same way as the base trace.
``boreholes.gpkg``, layer ``boreholes``
    Fictional boreholes that reach the base: ``hole_id``, ``collar_m`` (bilinear DEM at the
    collar), ``depth_m`` (vertical, collar - base plane) and ``base_z_m`` (base plane).
``orientations.gpkg``, layer ``dip_readings``
    Fictional compass readings of the base on its outcrop: ``site``, ``dip``, ``dip_dir``,
    ``strike`` (right-hand rule), whole degrees, each within 2 degrees of the plane.
``contours.gpkg``, layer ``topo_contours``
    Topographic contours of the DEM every 10 m, field ``elev_m``.
``truth.json``
    The planes, the thickness, the boreholes, the readings and the fictional names.

Outputs in ``fold/`` (Tolvane Fell, a plunging upright fold)
------------------------------------------------------------
``dem.tif``
    300 x 300 cells at 10 m, otherwise as above, no voids.
``contacts.gpkg``, layer ``contacts``
    Outcrop trace of the base of the Cawl Limestone Formation, folded (see
    :func:`fold_elevation`), made the same way as the Harnvel trace; then every vertex is slid
    along its cell edge onto the fold exactly (:func:`snap_to_surface`).
``contours.gpkg``, layer ``topo_contours``
    Topographic contours every 10 m, field ``elev_m``.
``truth.json``
    The fold formula, its parameters and its gradient (enough to evaluate the true surface and
    the true local dip anywhere).

This is a data-making script, not library code: it talks to GDAL/OGR directly.
"""
from __future__ import annotations

import argparse
import json
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import shapely
import shapely.ops
from osgeo import gdal, ogr, osr


HERE = Path(__file__).resolve().parent
NODATA = -9999.0
CONTOUR_INTERVAL_M = 10.0
MIN_TRACE_LENGTH_M = 50.0
MIN_TOPO_LENGTH_M = 1.0  # only slivers left by cutting lines back to the DEM's domain
FIXED_TIMESTAMP = "2024-01-01T00:00:00.000Z"


@dataclass(frozen=True)
class Sheet:
    """Raster layout of a sheet: ``ncols x nrows`` square cells, north-up."""

    ncols: int
    nrows: int
    cell_m: float
    x_west: float
    y_north: float

    @property
    def geotransform(self):
        return (self.x_west, self.cell_m, 0.0, self.y_north, 0.0, -self.cell_m)

    def cell_centres(self):
        """Easting and northing of every cell centre, shape (nrows, ncols) each."""
        x = self.x_west + (np.arange(self.ncols) + 0.5) * self.cell_m
        y = self.y_north - (np.arange(self.nrows) + 0.5) * self.cell_m
        return np.meshgrid(x, y)

    def bilinear(self, z, x, y):
        """Bilinear interpolation of the cell-centre values ``z`` at map points (no checks)."""
        col = (np.asarray(x, float) - self.x_west) / self.cell_m - 0.5
        row = (self.y_north - np.asarray(y, float)) / self.cell_m - 0.5
        c0 = np.floor(col).astype(int)
        r0 = np.floor(row).astype(int)
        fc, fr = col - c0, row - r0
        return ((1 - fr) * ((1 - fc) * z[r0, c0] + fc * z[r0, c0 + 1])
                + fr * ((1 - fc) * z[r0 + 1, c0] + fc * z[r0 + 1, c0 + 1]))


# ================================================================ Harnvel Moor (demo/)
EPSG = 32631  # WGS 84 / UTM zone 31N; the coordinates below are invented
DEMO = Sheet(ncols=400, nrows=400, cell_m=10.0, x_west=486_300.0, y_north=5_217_700.0)
# kept for readers of the original script
NCOLS, NROWS, CELL_M, X_WEST, Y_NORTH = DEMO.ncols, DEMO.nrows, DEMO.cell_m, DEMO.x_west, DEMO.y_north

# The sub-Harnvel unconformity: a plane of our own choosing.
DIP_DEG = 18.7
DIP_DIRECTION_DEG = 221.3
REF_X = 488_412.0
REF_Y = 5_215_583.0
REF_Z = 607.4

# The top of the Harnvel Sandstone Formation: parallel to the base, this far above it
# (measured along the normal).
TRUE_THICKNESS_M = 73.6

NAMES = {
    "sheet": "Harnvel Moor (fictional demo sheet)",
    "lake": "Mirrow Water",
    "upper_unit": "Harnvel Sandstone Formation",
    "lower_unit": "Ostrim Schist Group",
    "contact": "base of the Harnvel Sandstone Formation",
    "overlying_unit": "Tarlow Mudstone Formation",
    "top_contact": "top of the Harnvel Sandstone Formation",
}

# Mirrow Water: a closed basin in the terrain, flooded to a level just below its rim.
LAKE_X = 488_655.0
LAKE_Y = 5_214_840.0
LAKE_DEPTH_M = 42.0
LAKE_RADIUS_M = 310.0
DAM_HEIGHT_M = 18.0

# Fictional boreholes that reached the unconformity (collar positions, invented).
BOREHOLES = [
    ("HMB-04", 487_452.0, 5_215_838.0),  # just down-dip of the base trace
    ("HMB-09", 489_041.0, 5_214_688.0),  # between base and top traces, east of the lake
    ("HMB-13", 487_963.0, 5_214_617.0),  # down-dip of the top trace
    ("HMB-18", 486_818.0, 5_216_391.0),  # far from the trace, north-west
    ("HMB-21", 486_643.0, 5_213_982.0),  # far from the trace, south-west corner
]

# Fictional compass readings of the base at outcrop: (site, contact piece, fraction along it).
READING_SITES = [
    ("HM-D01", 0, 0.12),
    ("HM-D02", 0, 0.37),
    ("HM-D03", 0, 0.61),
    ("HM-D04", 0, 0.86),
    ("HM-D05", 1, 0.28),
    ("HM-D06", 1, 0.74),
]
READING_SEED = 3104
READING_SPREAD_DEG = 1.5  # uniform error before rounding to whole degrees
READING_MAX_ERROR_DEG = 2.0  # spread + half a degree of rounding
SITE_POSITION_M = 0.1  # site coordinates rounded to a decimetre (a hand-held GNSS would do worse)

BLOCK_NAMES = ("north", "south")  # the two pieces of the base trace, in file order

# A hand-digitised copy of the base trace, as a field geologist's mapped line would differ from
# the exact one (contacts_mapped.gpkg); see :func:`digitised_line`.
MAPPED_SEED = 5207
MAPPED_SPACING_M = (15.0, 40.0)  # vertex spacing drawn uniformly in this range, coarser than the DEM
MAPPED_SIGMA_M = 3.0  # standard deviation of the smooth sideways error
MAPPED_MAX_OFFSET_M = 8.0  # soft limit of the sideways error (tanh), never reached exactly
MAPPED_CORRELATION_M = 100.0  # e-folding length of the error's autocorrelation
MAPPED_END_TAPER_M = 30.0  # the error fades out toward the ends, snapped to the sheet edge and shore
MAPPED_NOISE_STEP_M = 5.0  # sampling step of the underlying Gaussian series
# One digitising slip: on the north piece, where the trace leaves a valley floor and climbs east
# across sloping ground (250-550 m from the west edge of the sheet, 2.5 km from the lake), a
# stretch was traced on the wrong side of the valley, MISTRACE_OFFSET_M to the left of the line
# (facing the way its vertices run, here east, so to the north), with half-cosine ramps in and out.
MISTRACE_FEATURE = 0  # north
MISTRACE_START_M = 1300.0  # along the exact trace, ramps included
MISTRACE_END_M = 1630.0
MISTRACE_RAMP_M = 75.0
MISTRACE_OFFSET_M = 70.0


def plane_elevation(x, y, *, offset_m=0.0):
    """Elevation (m) of the unconformity plane at (x, y), shifted up by ``offset_m``."""
    dd = math.radians(DIP_DIRECTION_DEG)
    along_dip = (x - REF_X) * math.sin(dd) + (y - REF_Y) * math.cos(dd)
    return REF_Z + offset_m - math.tan(math.radians(DIP_DEG)) * along_dip


def top_offset_m():
    """Vertical distance from the base plane up to the top plane (true thickness / cos dip)."""
    return TRUE_THICKNESS_M / math.cos(math.radians(DIP_DEG))


def cell_centres():
    """Easting and northing of every cell centre of the Harnvel sheet."""
    return DEMO.cell_centres()


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


# ================================================================ shared line making
def mem_raster(sheet, array, srs_wkt, nodata):
    ds = gdal.GetDriverByName("MEM").Create("", sheet.ncols, sheet.nrows, 1, gdal.GDT_Float64)
    ds.SetGeoTransform(sheet.geotransform)
    ds.SetProjection(srs_wkt)
    band = ds.GetRasterBand(1)
    band.SetNoDataValue(nodata)
    band.WriteArray(array)
    return ds


def contour_lines(sheet, array, srs, *, levels=None, interval=None):
    """Run GDAL's contour generator; return a list of (level, shapely LineString)."""
    ds = mem_raster(sheet, array, srs.ExportToWkt(), NODATA)
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


def squares_polygon(sheet, squares):
    """Union of the squares between cell centres flagged in ``squares`` (shape rows-1, cols-1).

    Square ``[i, j]`` has the centres of cells ``(i, j)``, ``(i+1, j)``, ``(i, j+1)`` and
    ``(i+1, j+1)`` as its corners: the cells the bilinear surface blends inside it.
    """
    rows, cols = np.nonzero(squares)
    x0 = sheet.x_west + (cols + 0.5) * sheet.cell_m
    y0 = sheet.y_north - (rows + 0.5) * sheet.cell_m
    return shapely.union_all(shapely.box(x0, y0 - sheet.cell_m, x0 + sheet.cell_m, y0))


def corner_any(mask):
    """Squares between cell centres with at least one corner cell in ``mask``."""
    return mask[:-1, :-1] | mask[1:, :-1] | mask[:-1, 1:] | mask[1:, 1:]


def defined_domain(sheet, void):
    """Where the DEM's bilinear surface is defined: inside the outermost cell centres and off
    every square that touches a void cell, shrunk by a millimetre.

    GDAL's contour generator also draws into the half-cell strip beyond the outermost centres
    (where it extends the edge values); the lines are cut back to the domain so that every
    vertex can be checked against the bilinear DEM. The millimetre keeps cut ends strictly
    inside valid squares.
    """
    eps = 1e-3
    half = sheet.cell_m / 2
    frame = shapely.box(sheet.x_west + half + eps, sheet.y_north - sheet.nrows * sheet.cell_m + half + eps,
                        sheet.x_west + sheet.ncols * sheet.cell_m - half - eps, sheet.y_north - half - eps)
    if not void.any():
        return frame
    return shapely.difference(frame, shapely.buffer(squares_polygon(sheet, corner_any(void)), eps,
                                                    join_style="mitre"))


def flat_lake_polygon(sheet, lake):
    """Polygon of the lake floor where the bilinear DEM is exactly flat.

    That is the union of the squares between cell centres whose four corner cells are all
    lake cells; there the trace is a straight line across water, not a mapped contact.
    """
    return squares_polygon(sheet, ~corner_any(~lake))


def clipped_parts(geom, domain, min_length_m):
    """Parts of ``geom`` inside ``domain``, merged, shorter pieces dropped."""
    clipped = shapely.line_merge(shapely.intersection(geom, domain))
    return [p for p in shapely.get_parts(clipped) if p.length >= min_length_m]


def trace_pieces(sheet, dem64, valid, surface, srs, where):
    """Outcrop trace of a surface: level 0 of (DEM - surface), kept inside ``where``.

    Pieces shorter than ``MIN_TRACE_LENGTH_M`` are dropped; the rest are sorted west to east
    by their first vertex, so the order is stable.
    """
    depth = np.where(valid, dem64 - surface, NODATA)
    trace = shapely.union_all([g for _, g in contour_lines(sheet, depth, srs, levels=[0.0])])
    pieces = clipped_parts(trace, where, MIN_TRACE_LENGTH_M)
    pieces.sort(key=lambda g: (round(g.coords[0][0], 3), round(g.coords[0][1], 3)))
    return pieces


def snap_to_surface(sheet, dem64, surface_fn, line, *, iterations=8):
    """Move each vertex of a traced line onto the exact intersection of the bilinear DEM and
    a curved surface.

    GDAL's contour generator places a vertex on an edge between two cell centres by linear
    interpolation of (DEM - surface) between them. The bilinear DEM is linear along that edge,
    a plane too, so for the Harnvel plane the vertex is exact; a folded surface is not linear,
    and the vertex misses it by up to a centimetre. Here each vertex slides along its edge
    (the coordinate that is not on a line of cell centres or on the domain frame stays free)
    by Newton steps on f = DEM - surface, so it lies on both surfaces to round-off.
    """
    xy = shapely.get_coordinates(line).copy()
    col = (xy[:, 0] - sheet.x_west) / sheet.cell_m - 0.5
    row = (sheet.y_north - xy[:, 1]) / sheet.cell_m - 0.5
    frame_x = sheet.x_west + sheet.cell_m / 2 + np.array([1e-3, (sheet.ncols - 1) * sheet.cell_m - 1e-3])
    frame_y = sheet.y_north - sheet.cell_m / 2 - np.array([1e-3, (sheet.nrows - 1) * sheet.cell_m - 1e-3])
    x_fixed = (np.abs(col - np.round(col)) < 1e-7) | np.any(np.abs(xy[:, :1] - frame_x) < 1e-7, axis=1)
    y_fixed = (np.abs(row - np.round(row)) < 1e-7) | np.any(np.abs(xy[:, 1:] - frame_y) < 1e-7, axis=1)
    if not np.all(x_fixed | y_fixed):
        raise RuntimeError("a traced vertex lies on no cell edge; cannot slide it along one")
    axis = np.where(x_fixed, 1, 0)  # the free coordinate
    step = np.zeros_like(xy)
    step[np.arange(len(xy)), axis] = 1e-4

    def f(p):
        return sheet.bilinear(dem64, p[:, 0], p[:, 1]) - surface_fn(p[:, 0], p[:, 1])

    for _ in range(iterations):
        slope = (f(xy + step) - f(xy - step)) / 2e-4
        xy[np.arange(len(xy)), axis] -= f(xy) / slope
    if np.max(np.abs(f(xy))) > 1e-9:
        raise RuntimeError("snapping traced vertices onto the surface did not converge")
    return shapely.LineString(xy)


def topo_contours(sheet, dem64, valid, srs, domain):
    return [(level, part)
            for level, g in contour_lines(sheet, np.where(valid, dem64, NODATA), srs,
                                          interval=CONTOUR_INTERVAL_M)
            for part in clipped_parts(g, domain, MIN_TOPO_LENGTH_M)]


# ================================================================ writers
def write_dem(path, sheet, dem, srs):
    opts = ["COMPRESS=DEFLATE", "PREDICTOR=3", "ZLEVEL=9"]
    ds = gdal.GetDriverByName("GTiff").Create(str(path), sheet.ncols, sheet.nrows, 1, gdal.GDT_Float32,
                                              options=opts)
    ds.SetGeoTransform(sheet.geotransform)
    ds.SetProjection(srs.ExportToWkt())
    band = ds.GetRasterBand(1)
    band.SetNoDataValue(NODATA)
    band.SetDescription("elevation_m")
    band.SetUnitType("m")
    band.WriteArray(dem.astype(np.float32))
    band.FlushCache()
    ds = None


def write_layer(ds, layer_name, srs, geom_type, fields, records):
    """Add one layer of shapely geometries with attributes to an open GeoPackage."""
    layer = ds.CreateLayer(layer_name, srs, geom_type, options=["FID=fid", "GEOMETRY_NAME=geom"])
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


def write_features(path, layer_name, srs, geom_type, fields, records):
    """Write shapely geometries with attributes to a fresh GeoPackage (one layer)."""
    if path.exists():
        path.unlink()
    drv = ogr.GetDriverByName("GPKG")
    ds = drv.CreateDataSource(str(path))
    write_layer(ds, layer_name, srs, geom_type, fields, records)
    ds = None


def write_lines(path, layer_name, srs, fields, records):
    """Write LineStrings with attributes to a fresh GeoPackage (one layer)."""
    write_features(path, layer_name, srs, ogr.wkbLineString, fields, records)


def write_points(path, layer_name, srs, fields, records):
    """Write 2-D Points with attributes to a fresh GeoPackage (one layer)."""
    write_features(path, layer_name, srs, ogr.wkbPoint, fields, records)


def projected_srs(epsg):
    srs = osr.SpatialReference()
    srs.ImportFromEPSG(epsg)
    srs.SetAxisMappingStrategy(osr.OAMS_TRADITIONAL_GIS_ORDER)
    return srs


def write_truth(path, truth):
    path.write_text(json.dumps(truth, indent=2) + "\n")


# ================================================================ Harnvel Moor extras
def borehole_records(dem64):
    """Collar (bilinear DEM), base elevation and vertical depth of every borehole."""
    out = []
    for hole_id, bx, by in BOREHOLES:
        collar = float(DEMO.bilinear(dem64, bx, by))
        base = float(plane_elevation(bx, by))
        out.append({"hole_id": hole_id, "x": bx, "y": by, "collar_m": collar,
                    "depth_m": collar - base, "base_z_m": base})
        if not out[-1]["depth_m"] > 0:
            raise RuntimeError(f"borehole {hole_id} collars below the base; move it down-dip")
    return out


def dip_readings(pieces):
    """Compass readings of the base at sites on its trace, with seeded reading errors.

    Each reading is the true dip and dip direction plus a uniform error of at most
    ``READING_SPREAD_DEG``, rounded to whole degrees (as written in a field notebook), so it
    lies within ``READING_MAX_ERROR_DEG`` of the truth.
    """
    rng = np.random.default_rng(READING_SEED)
    errors = rng.uniform(-READING_SPREAD_DEG, READING_SPREAD_DEG, size=(len(READING_SITES), 2))
    out = []
    for (site, piece, fraction), (e_dip, e_dd) in zip(READING_SITES, errors):
        p = shapely.line_interpolate_point(pieces[piece], fraction, normalized=True)
        sx = round(p.x / SITE_POSITION_M) * SITE_POSITION_M
        sy = round(p.y / SITE_POSITION_M) * SITE_POSITION_M
        dip = float(round(DIP_DEG + e_dip))
        dd = float(round(DIP_DIRECTION_DEG + e_dd) % 360)
        out.append({"site": site, "x": round(sx, 1), "y": round(sy, 1), "dip": dip, "dip_dir": dd,
                    "strike": (dd - 90.0) % 360.0})
    return out


def smooth_gaussian_series(rng, length_m, *, step_m, correlation_m):
    """A stationary Gaussian series of unit variance along ``[0, length_m]``.

    White noise at ``step_m`` spacing is convolved with a Gaussian kernel of standard deviation
    ``correlation_m / 2``; the result has the autocorrelation ``exp(-(d / correlation_m)**2)``,
    so ``correlation_m`` is its e-folding length. It is rescaled to unit sample variance.
    Returns the sample positions and values.
    """
    width = correlation_m / 2.0
    half = int(math.ceil(4 * width / step_m))
    n = int(math.ceil(length_m / step_m)) + 1
    white = rng.standard_normal(n + 2 * half)
    k = np.exp(-0.5 * (np.arange(-half, half + 1) * step_m / width) ** 2)
    series = np.convolve(white, k / np.sqrt(np.sum(k**2)), mode="valid")
    series = (series - series.mean()) / series.std()
    return np.arange(n) * step_m, series


def ramp_offset(s, *, start_m, end_m, ramp_m, offset_m):
    """Sideways offset of a mistraced stretch: 0 outside ``[start_m, end_m]``, ``offset_m``
    between the ramps, half-cosine ramps ``ramp_m`` long inside both ends."""
    up = np.clip((s - start_m) / ramp_m, 0.0, 1.0)
    down = np.clip((end_m - s) / ramp_m, 0.0, 1.0)
    return offset_m * 0.5 * (1.0 - np.cos(np.pi * np.minimum(up, down)))


def digitised_line(line, rng, *, mistrace=None):
    """A hand-digitised copy of an exact trace.

    1. Vertices at irregular spacings drawn uniformly from ``MAPPED_SPACING_M`` along the exact
       trace; the first and last vertex are its ends.
    2. Each vertex moved sideways (perpendicular to the trace, from the direction between points
       10 m before and after it) by a smooth Gaussian series (:func:`smooth_gaussian_series`)
       scaled to ``MAPPED_SIGMA_M`` and squashed by ``MAPPED_MAX_OFFSET_M * tanh(e / MAPPED_MAX_OFFSET_M)``
       so that it never exceeds the limit; it fades out (half-cosine) over the last
       ``MAPPED_END_TAPER_M`` at both ends, which stay on the sheet edge or the shore.
    3. Optionally, ``mistrace`` (keywords of :func:`ramp_offset`) adds one stretch displaced
       to the left of the line.

    Returns the new line and the along-trace distance of each of its vertices.
    """
    length = line.length
    lo, hi = MAPPED_SPACING_M
    gaps = rng.uniform(lo, hi, size=int(math.ceil(length / lo)) + 1)
    s = np.cumsum(gaps)
    s = np.concatenate([[0.0], s[s < length - lo], [length]])
    grid_s, series = smooth_gaussian_series(rng, length, step_m=MAPPED_NOISE_STEP_M,
                                            correlation_m=MAPPED_CORRELATION_M)
    error = MAPPED_MAX_OFFSET_M * np.tanh(MAPPED_SIGMA_M * np.interp(s, grid_s, series) / MAPPED_MAX_OFFSET_M)
    taper = np.clip(np.minimum(s, length - s) / MAPPED_END_TAPER_M, 0.0, 1.0)
    error = error * 0.5 * (1.0 - np.cos(np.pi * taper))
    if mistrace is not None:
        error = error + ramp_offset(s, **mistrace)
    on = shapely.get_coordinates(shapely.line_interpolate_point(line, s))
    ahead = shapely.get_coordinates(shapely.line_interpolate_point(line, np.minimum(s + 10.0, length)))
    behind = shapely.get_coordinates(shapely.line_interpolate_point(line, np.maximum(s - 10.0, 0.0)))
    tangent = ahead - behind
    tangent /= np.hypot(tangent[:, 0], tangent[:, 1])[:, None]
    left = np.column_stack([-tangent[:, 1], tangent[:, 0]])
    out = shapely.LineString(on + error[:, None] * left)
    if not out.is_simple:
        raise RuntimeError("the digitised contact crosses itself; change MAPPED_SEED or the noise")
    return out, s


def mapped_contacts(pieces):
    """Digitised copies of the base trace's pieces (north, south) and the record of the slip.

    One generator (``MAPPED_SEED``) serves both pieces in file order; the north piece carries
    the mistraced stretch.
    """
    rng = np.random.default_rng(MAPPED_SEED)
    stretch = {"start_m": MISTRACE_START_M, "end_m": MISTRACE_END_M, "ramp_m": MISTRACE_RAMP_M,
               "offset_m": MISTRACE_OFFSET_M}
    out = []
    for i, piece in enumerate(pieces):
        line, s = digitised_line(piece, rng, mistrace=stretch if i == MISTRACE_FEATURE else None)
        out.append(line)
        if i == MISTRACE_FEATURE:
            coords = shapely.get_coordinates(line)
            inside = (s >= MISTRACE_START_M) & (s <= MISTRACE_END_M)
            bad = shapely.LineString(coords[inside])
            exact = shapely.ops.substring(piece, MISTRACE_START_M, MISTRACE_END_M)
    record = {
        "feature": BLOCK_NAMES[MISTRACE_FEATURE],
        "feature_index": MISTRACE_FEATURE,
        **stretch,
        "side": "left",
        "note": "along the exact trace of the feature (contacts.gpkg), in the direction its "
                "vertices run: between start_m and end_m the digitised vertices are moved a "
                "further offset_m * (1 - cos(pi * min(1, (s - start_m) / ramp_m, (end_m - s) / "
                "ramp_m))) / 2 to the left, i.e. offset_m between the ramps; there the trace "
                "leaves a valley floor and climbs east across ground sloping 9-19 degrees, and the slip "
                "puts it about 70 m north of the true line",
        "plateau_m": [MISTRACE_START_M + MISTRACE_RAMP_M, MISTRACE_END_M - MISTRACE_RAMP_M],
        "exact_wkt": shapely.to_wkt(exact, rounding_precision=2),
        "mapped_wkt": shapely.to_wkt(bad, rounding_precision=2),
        "mapped_bbox": [round(v, 2) for v in bad.bounds],
    }
    return out, record


def build(out_dir: Path) -> dict:
    """Generate the Harnvel Moor sheet into ``out_dir``; return a small summary."""
    out_dir.mkdir(parents=True, exist_ok=True)
    gdal.SetConfigOption("OGR_CURRENT_DATE", FIXED_TIMESTAMP)
    srs = projected_srs(EPSG)

    x, y = cell_centres()
    dem, lake, lake_level = flood_lake(terrain(x, y), x, y)
    dem = dem.astype(np.float32)  # the values as stored; everything below derives from them
    void = void_corner(dem.shape)
    dem[void] = NODATA
    write_dem(out_dir / "dem.tif", DEMO, dem, srs)

    valid = ~void
    dem64 = dem.astype(np.float64)
    domain = defined_domain(DEMO, void)
    on_land = shapely.difference(domain, flat_lake_polygon(DEMO, lake))
    pieces = trace_pieces(DEMO, dem64, valid, plane_elevation(x, y), srs, on_land)
    attrs = {"name": NAMES["contact"], "unit": NAMES["upper_unit"], "kind": "unconformity"}
    contact_fields = [("name", ogr.OFTString), ("unit", ogr.OFTString), ("kind", ogr.OFTString)]
    write_lines(out_dir / "contacts.gpkg", "contacts", srs, contact_fields, [(p, attrs) for p in pieces])
    if len(pieces) != len(BLOCK_NAMES):
        raise RuntimeError(f"expected {len(BLOCK_NAMES)} pieces of the base trace, got {len(pieces)}")
    write_lines(out_dir / "contacts_grouped.gpkg", "contacts", srs,
                contact_fields + [("block", ogr.OFTString)],
                [(p, {**attrs, "block": b}) for p, b in zip(pieces, BLOCK_NAMES)])
    mapped, mistrace = mapped_contacts(pieces)
    write_lines(out_dir / "contacts_mapped.gpkg", "contacts", srs,
                contact_fields + [("block", ogr.OFTString)],
                [(p, {**attrs, "block": b}) for p, b in zip(mapped, BLOCK_NAMES)])

    top_pieces = trace_pieces(DEMO, dem64, valid, plane_elevation(x, y, offset_m=top_offset_m()), srs, on_land)
    top_attrs = {"name": NAMES["top_contact"], "unit": NAMES["overlying_unit"], "kind": "conformable"}
    write_lines(out_dir / "top_contacts.gpkg", "top_contacts", srs, contact_fields,
                [(p, top_attrs) for p in top_pieces])

    holes = borehole_records(dem64)
    write_points(out_dir / "boreholes.gpkg", "boreholes", srs,
                 [("hole_id", ogr.OFTString), ("collar_m", ogr.OFTReal), ("depth_m", ogr.OFTReal),
                  ("base_z_m", ogr.OFTReal)],
                 [(shapely.Point(h["x"], h["y"]), {k: h[k] for k in ("hole_id", "collar_m", "depth_m", "base_z_m")})
                  for h in holes])

    readings = dip_readings(pieces)
    write_points(out_dir / "orientations.gpkg", "dip_readings", srs,
                 [("site", ogr.OFTString), ("dip", ogr.OFTReal), ("dip_dir", ogr.OFTReal),
                  ("strike", ogr.OFTReal)],
                 [(shapely.Point(r["x"], r["y"]), {k: r[k] for k in ("site", "dip", "dip_dir", "strike")})
                  for r in readings])

    topo = topo_contours(DEMO, dem64, valid, srs, domain)
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
        # --- added for the isopach, borehole, dip-reading and group tests
        "top_contact": NAMES["top_contact"],
        "overlying_unit": NAMES["overlying_unit"],
        "true_thickness_m": TRUE_THICKNESS_M,
        "vertical_thickness_m": top_offset_m(),
        "top_plane": {
            "dip_deg": DIP_DEG,
            "dip_direction_deg": DIP_DIRECTION_DEG,
            "point": [REF_X, REF_Y, REF_Z + top_offset_m()],
            "note": "parallel to the base plane, true_thickness_m above it along the normal; "
                    "vertical_thickness_m = true_thickness_m / cos(dip)",
        },
        "boreholes": {
            "layer": "boreholes",
            "fields": {"hole_id": "text", "collar_m": "bilinear DEM elevation at the collar (m)",
                       "depth_m": "vertical depth from collar to the base (m) = collar_m - base_z_m",
                       "base_z_m": "elevation of the base plane (m)"},
            "sigma_m": 0.0,
            "note": "values exact from the plane and the stored DEM; no error added",
            "holes": holes,
        },
        "orientations": {
            "layer": "dip_readings",
            "surface": NAMES["contact"],
            "seed": READING_SEED,
            "max_reading_error_deg": READING_MAX_ERROR_DEG,
            "note": "true dip and dip direction plus a uniform error of at most "
                    f"{READING_SPREAD_DEG} degrees (numpy default_rng, seed above), rounded to whole "
                    "degrees; strike = dip_dir - 90 (right-hand rule); sites on the base trace, "
                    "coordinates rounded to 0.1 m",
            "readings": readings,
        },
        "grouped_contacts": {
            "file": "contacts_grouped.gpkg",
            "layer": "contacts",
            "field": "block",
            "blocks": list(BLOCK_NAMES),
            "note": "the features of contacts.gpkg in the same order, both on the one base plane",
        },
        # --- added for a realistic demo: a hand-digitised copy of the base trace
        "mapped_contacts": {
            "file": "contacts_mapped.gpkg",
            "layer": "contacts",
            "field": "block",
            "blocks": list(BLOCK_NAMES),
            "exact_file": "contacts.gpkg",
            "seed": MAPPED_SEED,
            "resample_spacing_m": list(MAPPED_SPACING_M),
            "positional_sigma_m": MAPPED_SIGMA_M,
            "max_offset_m": MAPPED_MAX_OFFSET_M,
            "correlation_length_m": MAPPED_CORRELATION_M,
            "end_taper_m": MAPPED_END_TAPER_M,
            "note": "the features of contacts.gpkg in the same order, as a field geologist's "
                    "digitised line: vertices every 15-40 m (uniform, numpy default_rng, seed above) "
                    "along the exact trace, each moved sideways by a smooth Gaussian series "
                    "(autocorrelation exp(-(d / correlation_length_m)^2), standard deviation "
                    "positional_sigma_m, squashed by max_offset_m * tanh(e / max_offset_m), faded "
                    "out over end_taper_m at both ends, which stay on the exact ends); plus one "
                    "digitising error",
            "digitising_error": mistrace,
        },
    }
    write_truth(out_dir / "truth.json", truth)
    return {
        "n_contacts": len(pieces),
        "n_contact_vertices": int(sum(len(p.coords) for p in pieces)),
        "contact_length_m": float(sum(p.length for p in pieces)),
        "n_mapped_contact_vertices": int(sum(len(p.coords) for p in mapped)),
        "n_top_contacts": len(top_pieces),
        "top_contact_length_m": float(sum(p.length for p in top_pieces)),
        "n_topo_contours": len(topo),
        "n_topo_vertices": int(sum(len(g.coords) for _, g in topo)),
        "lake_cells": int(lake.sum()),
        "lake_level_m": lake_level,
        "void_cells": int(void.sum()),
        "relief_m": float(dem[valid].max() - dem[valid].min()),
        "boreholes": {h["hole_id"]: round(h["depth_m"], 2) for h in holes},
    }


# ================================================================ Tolvane Fell (fold/)
FOLD_EPSG = 32630  # WGS 84 / UTM zone 30N; the coordinates below are invented
FOLD = Sheet(ncols=300, nrows=300, cell_m=10.0, x_west=523_700.0, y_north=6_061_400.0)

FOLD_NAMES = {
    "sheet": "Tolvane Fell (fictional fold sheet)",
    "fold": "Tolvane Fell Anticline",
    "upper_unit": "Cawl Limestone Formation",
    "lower_unit": "Brenlow Mudstone Formation",
    "contact": "base of the Cawl Limestone Formation",
}

# The folded base of the Cawl Limestone: an upright cylindrical fold whose hinge lines plunge
# gently along the axis (our own numbers).
FOLD_X0 = 525_120.0  # a point on an anticlinal hinge line
FOLD_Y0 = 6_059_930.0
FOLD_Z0 = 412.0
FOLD_AXIS_TREND_DEG = 62.0  # azimuth the hinge lines plunge toward
FOLD_PLUNGE_DEG = 5.5
FOLD_AMPLITUDE_M = 64.0
FOLD_WAVELENGTH_M = 1750.0


def fold_frame(x, y):
    """Along-axis ``s`` (toward the plunge) and across-axis ``t`` (toward trend + 90) in metres."""
    a = math.radians(FOLD_AXIS_TREND_DEG)
    dx, dy = x - FOLD_X0, y - FOLD_Y0
    return dx * math.sin(a) + dy * math.cos(a), dx * math.cos(a) - dy * math.sin(a)


def fold_elevation(x, y):
    """Elevation (m) of the folded base: ``z0 - tan(plunge) s + A cos(2 pi t / wavelength)``."""
    s, t = fold_frame(x, y)
    return (FOLD_Z0 - math.tan(math.radians(FOLD_PLUNGE_DEG)) * s
            + FOLD_AMPLITUDE_M * np.cos(2 * np.pi * t / FOLD_WAVELENGTH_M))


def fold_gradient(x, y):
    """Analytic ``(dz/dx, dz/dy)`` of :func:`fold_elevation`."""
    _, t = fold_frame(x, y)
    a = math.radians(FOLD_AXIS_TREND_DEG)
    dz_ds = -math.tan(math.radians(FOLD_PLUNGE_DEG))
    dz_dt = -FOLD_AMPLITUDE_M * 2 * np.pi / FOLD_WAVELENGTH_M * np.sin(2 * np.pi * t / FOLD_WAVELENGTH_M)
    # s = dx sin a + dy cos a, t = dx cos a - dy sin a
    return dz_ds * math.sin(a) + dz_dt * math.cos(a), dz_ds * math.cos(a) - dz_dt * math.sin(a)


def _becks(u, v, *, spacing_m, meander_m, meander_wavelength_m, phase, depth_m, width_m):
    """A family of meandering valleys about ``spacing_m`` apart across ``v``, winding along
    ``u``: troughs of Gaussian cross-section ``width_m`` wide whose depth swells and shrinks
    downstream between ``depth_m / 2`` and ``depth_m``."""
    wiggle = meander_m * np.sin(2 * np.pi * u / meander_wavelength_m + phase)
    wiggle = wiggle + 0.4 * meander_m * np.sin(2 * np.pi * u / (0.37 * meander_wavelength_m) + 2 * phase)
    w = v + wiggle + 0.18 * spacing_m * np.sin(2 * np.pi * v / (2.9 * spacing_m))  # uneven spacing
    off = (w + spacing_m / 2) % spacing_m - spacing_m / 2
    k = np.floor((w + spacing_m / 2) / spacing_m)  # which valley of the family
    swell = 0.75 + 0.25 * np.sin(2 * np.pi * u / (1.7 * meander_wavelength_m) + 1.3 * k + phase)
    return -depth_m * swell * np.exp(-(off**2) / (2 * width_m**2))


def fold_terrain(x, y):
    """Fell country on the folded limestone.

    The hard Cawl Limestone makes most of the ground and the fells follow the folds, but the
    anticline crests are worn down further than the synclines, so the soft Brenlow Mudstone
    comes up in long inliers along the anticlinal hinges that close round the plunging noses.
    Meandering becks cut across the folds down into the mudstone, so the base also crops out
    up and down both sides of the deeper becks.
    """
    xc = FOLD.x_west + FOLD.ncols * FOLD.cell_m / 2
    yc = FOLD.y_north - FOLD.nrows * FOLD.cell_m / 2
    X, Y = x - xc, y - yc
    s, t = fold_frame(x, y)
    a = math.radians(343.0)  # main becks trend NNW-SSE, across the fold axes
    u1 = X * math.sin(a) + Y * math.cos(a)
    v1 = X * math.cos(a) - Y * math.sin(a)
    b = math.radians(104.0)  # side becks trend ESE-WNW
    u2 = X * math.sin(b) + Y * math.cos(b)
    v2 = X * math.cos(b) - Y * math.sin(b)
    becks = (_becks(u1, v1, spacing_m=620.0, meander_m=110.0, meander_wavelength_m=1450.0, phase=0.4,
                    depth_m=75.0, width_m=105.0)
             + _becks(u2, v2, spacing_m=850.0, meander_m=70.0, meander_wavelength_m=1080.0, phase=2.1,
                      depth_m=55.0, width_m=85.0))
    crest_wear = 0.25 * FOLD_AMPLITUDE_M * np.cos(2 * np.pi * t / FOLD_WAVELENGTH_M)
    cover = 28.0 + 0.006 * X - 0.004 * Y - crest_wear  # limestone left above its base
    knobs = 5.0 * np.sin(X / 131.0 + 0.9) * np.cos(Y / 173.0 - 0.2) + 3.0 * np.cos((0.7 * X + Y) / 89.0)
    return fold_elevation(x, y) + cover + becks + knobs


def build_fold(out_dir: Path) -> dict:
    """Generate the Tolvane Fell fold sheet into ``out_dir``; return a small summary."""
    out_dir.mkdir(parents=True, exist_ok=True)
    gdal.SetConfigOption("OGR_CURRENT_DATE", FIXED_TIMESTAMP)
    srs = projected_srs(FOLD_EPSG)

    x, y = FOLD.cell_centres()
    dem = fold_terrain(x, y).astype(np.float32)
    write_dem(out_dir / "dem.tif", FOLD, dem, srs)
    dem64 = dem.astype(np.float64)
    valid = np.ones(dem.shape, dtype=bool)
    domain = defined_domain(FOLD, ~valid)
    pieces = trace_pieces(FOLD, dem64, valid, fold_elevation(x, y), srs, domain)
    pieces = [snap_to_surface(FOLD, dem64, fold_elevation, p) for p in pieces]
    attrs = {"name": FOLD_NAMES["contact"], "unit": FOLD_NAMES["upper_unit"], "kind": "conformable"}
    write_lines(out_dir / "contacts.gpkg", "contacts", srs,
                [("name", ogr.OFTString), ("unit", ogr.OFTString), ("kind", ogr.OFTString)],
                [(p, attrs) for p in pieces])
    topo = topo_contours(FOLD, dem64, valid, srs, domain)
    write_lines(out_dir / "contours.gpkg", "topo_contours", srs, [("elev_m", ogr.OFTReal)],
                [(g, {"elev_m": float(level)}) for level, g in topo])

    truth = {
        "sheet": FOLD_NAMES["sheet"],
        "description": (
            "Fictional fold sheet. The base of the Cawl Limestone Formation on the Brenlow Mudstone "
            "Formation is folded into upright cylindrical folds (the Tolvane Fell Anticline and its "
            "neighbours) whose hinge lines plunge gently north-east; the contact winds round the "
            "fold noses and up and down the becks."
        ),
        "contact": FOLD_NAMES["contact"],
        "upper_unit": FOLD_NAMES["upper_unit"],
        "lower_unit": FOLD_NAMES["lower_unit"],
        "fold": FOLD_NAMES["fold"],
        "crs": f"EPSG:{FOLD_EPSG}",
        "surface": {
            "kind": "plunging upright cylindrical fold",
            "equation": "z = z0 - tan(plunge) * s + amplitude * cos(2 pi t / wavelength)",
            "frame": "s = (x - x0) sin(axis_trend) + (y - y0) cos(axis_trend) (along the axis, toward "
                     "the plunge); t = (x - x0) cos(axis_trend) - (y - y0) sin(axis_trend) (across it, "
                     "toward axis_trend + 90)",
            "gradient": "dz/ds = -tan(plunge); dz/dt = -amplitude 2 pi / wavelength sin(2 pi t / "
                        "wavelength); dz/dx = dz/ds sin(axis_trend) + dz/dt cos(axis_trend); dz/dy = "
                        "dz/ds cos(axis_trend) - dz/dt sin(axis_trend)",
            "local_dip": "dip = atan(|grad z|); dip direction = azimuth of -grad z",
            "anticline_hinges": "t = k wavelength; syncline hinges: t = (k + 1/2) wavelength",
            "x0": FOLD_X0,
            "y0": FOLD_Y0,
            "z0": FOLD_Z0,
            "axis_trend_deg": FOLD_AXIS_TREND_DEG,
            "plunge_deg": FOLD_PLUNGE_DEG,
            "amplitude_m": FOLD_AMPLITUDE_M,
            "wavelength_m": FOLD_WAVELENGTH_M,
        },
        "dem": {"cols": FOLD.ncols, "rows": FOLD.nrows, "cell_m": FOLD.cell_m, "nodata": NODATA,
                "x_west": FOLD.x_west, "y_north": FOLD.y_north},
        "contour_interval_m": CONTOUR_INTERVAL_M,
        "trace_min_length_m": MIN_TRACE_LENGTH_M,
    }
    write_truth(out_dir / "truth.json", truth)
    return {
        "n_contacts": len(pieces),
        "n_contact_vertices": int(sum(len(p.coords) for p in pieces)),
        "contact_length_m": float(sum(p.length for p in pieces)),
        "n_topo_contours": len(topo),
        "n_topo_vertices": int(sum(len(g.coords) for _, g in topo)),
        "relief_m": float(dem.max() - dem.min()),
    }


def main(argv=None):
    # GDAL's exception mode is process-wide: switched on when run as a script, not on import
    # (a test that imports this module keeps its own mode)
    gdal.UseExceptions()
    ogr.UseExceptions()
    osr.UseExceptions()
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--only", choices=("demo", "fold"),
                        help="write only one set (default: both)")
    parser.add_argument("--out", type=Path, default=HERE / "demo",
                        help="output directory of the Harnvel Moor set (default: test_data/demo)")
    parser.add_argument("--fold-out", type=Path, default=HERE / "fold",
                        help="output directory of the Tolvane Fell set (default: test_data/fold)")
    args = parser.parse_args(argv)
    jobs = [("demo", build, args.out), ("fold", build_fold, args.fold_out)]
    for name, fn, out in jobs:
        if args.only in (None, name):
            print(f"[{name}] {out}")
            for key, value in fn(out).items():
                print(f"  {key}: {value}")


if __name__ == "__main__":
    main()
