"""The bad-input matrix of ``strikeline run``: every input people have that the tool cannot use gets
exit status 2 and one line on stderr that names the file (or option), the problem and the fix; no
output folder, nothing written next to it, no input changed. Inputs the tool can use after a
stated repair (curved geometries linearised by GDAL, degenerate lines skipped) run to exit 0 and
say so in the log with a count.

Each row builds its inputs with OGR/GDAL directly (not through ``strikeline.io``) in ``tmp_path``
and runs the command in process (``helpers.run_cli``). The expected words of each row are what a
user needs to act: the culprit file or option and the fix.
"""
from __future__ import annotations

import functools
import json
import os
import sqlite3
import struct
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pytest
import shapely
from osgeo import gdal, ogr, osr

from helpers import DEMO, gdal_exceptions, run_cli, sha256_of, srs_of
from helpers import write_vector as write_any_vector

CONTACTS = DEMO / "contacts.gpkg"
DEM = DEMO / "dem.tif"
CONTOURS = DEMO / "contours.gpkg"
BOREHOLES = DEMO / "boreholes.gpkg"
ORIENTATIONS = DEMO / "orientations.gpkg"
#: The demo sheet's CRS (Source: test_data/demo/truth.json, and gdalinfo of dem.tif).
DEMO_EPSG = 32631
#: The demo DEM's declared nodata (Source: gdalinfo test_data/demo/dem.tif).
DEMO_NODATA = -9999.0
#: Fast options for the runs that must succeed (the model choice is not under test here).
FAST = ("--model", "plane", "--resamples", "100")


# --------------------------------------------------------------------------- writers (OGR/GDAL only)
#: Test inputs in the demo's CRS, in a layer named like the demo's contacts.
write_vector = functools.partial(write_any_vector, epsg=DEMO_EPSG, layer="contacts")


def demo_lines():
    """The demo contacts as shapely lines (read with OGR)."""
    ds = ogr.Open(str(CONTACTS))
    out = [shapely.from_wkb(bytes(f.GetGeometryRef().ExportToWkb())) for f in ds.GetLayer(0)]
    ds = None
    return out


def demo_dem():
    """``(array, geotransform, WKT, nodata)`` of the demo DEM."""
    ds = gdal.Open(str(DEM))
    b = ds.GetRasterBand(1)
    out = b.ReadAsArray().astype(np.float64), ds.GetGeoTransform(), ds.GetProjection(), b.GetNoDataValue()
    ds = None
    return out


def write_raster(path, bands, *, gt=None, epsg=DEMO_EPSG, dtype=gdal.GDT_Float32, nodata=None, colours=None,
                 palette=False, georeferenced=True):
    """A GeoTIFF of the given bands (2-D arrays) with GDAL."""
    bands = [np.asarray(b) for b in (bands if isinstance(bands, (list, tuple)) else [bands])]
    rows, cols = bands[0].shape
    with gdal_exceptions():
        ds = gdal.GetDriverByName("GTiff").Create(str(path), cols, rows, len(bands), dtype)
        if georeferenced:
            ds.SetGeoTransform(gt or demo_dem()[1])
            if epsg is not None:
                ds.SetProjection(srs_of(epsg).ExportToWkt())
        for i, a in enumerate(bands, start=1):
            b = ds.GetRasterBand(i)
            b.WriteArray(a)
            if nodata is not None:
                b.SetNoDataValue(nodata)
            if colours:
                b.SetColorInterpretation(colours[i - 1])
            if palette:
                ct = gdal.ColorTable()
                for k in range(256):
                    ct.SetColorEntry(k, (k, 255 - k, 0, 255))
                b.SetColorTable(ct)
        ds = None
    return str(path)


def _shifted(line, dx):
    return shapely.transform(line, lambda c: c + [dx, 0.0])


# --------------------------------------------------------------------------- the matrix
@dataclass(frozen=True)
class Case:
    """One row: ``build(folder)`` writes its inputs into ``folder`` and returns the arguments after
    ``run`` (without ``--out``); ``words`` must all appear in the one error line (case-insensitive;
    ``{in}`` stands for the inputs' folder)."""

    id: str
    build: Callable
    words: tuple
    code: int = 2


def _args(contacts=CONTACTS, dem=DEM, *extra):
    a = ["--contacts", contacts]
    if dem is not None:
        a += ["--dem", dem]
    return [*a, *extra]


def _text_file(path, text="this is not a map\n"):
    Path(path).write_text(text)
    return str(path)


def _dem_variant(folder, name, fn, **kw):
    """The demo DEM changed by ``fn(array, nodata_mask)`` and written by :func:`write_raster`."""
    a, gt, _, nd = demo_dem()
    kw.setdefault("gt", gt)
    return write_raster(folder / name, fn(a, a == nd), **kw)


def _huge_vrt(folder):
    """A VRT that presents the demo DEM as 300,000 x 300,000 cells (nothing is read to make it)."""
    path = str(folder / "huge.vrt")
    with gdal_exceptions():
        gdal.Translate(path, str(DEM), format="VRT", width=300000, height=300000)
    return path


def _with_sentinel(value, dtype):
    def fn(a, holes):
        out = a.copy()
        out[holes] = value
        return out.astype(dtype)
    return fn


def _lines_file(folder, name, geoms, **kw):
    return write_vector(folder / name, geoms, **kw)


#: A finite x written in place of a non-finite one, then replaced in the file's bytes: OGR's
#: GeoPackage writer cannot record an infinite or NaN extent in gpkg_contents when it closes.
_PLACEHOLDER_X = 487654.321


def _non_finite_gpkg(path, geoms, value, **kw):
    """``geoms`` written to a GeoPackage, then every x equal to :data:`_PLACEHOLDER_X` made ``value``
    (NaN or infinity) in the stored geometry blobs (the GeoPackage's header and WKB, little-endian)."""
    write_vector(path, geoms, options=["SPATIAL_INDEX=NO"], **kw)  # its triggers need SpatiaLite's functions
    con = sqlite3.connect(str(path))
    try:
        table = kw.get("layer", "contacts")
        old, new = struct.pack("<d", _PLACEHOLDER_X), struct.pack("<d", value)
        rows = con.execute(f'SELECT fid, geom FROM "{table}"').fetchall()
        for fid, blob in rows:
            if old in blob:
                con.execute(f'UPDATE "{table}" SET geom = ? WHERE fid = ?', (blob.replace(old, new), fid))
        con.commit()
    finally:
        con.close()
    return str(path)


def _nan_line(value, folder, name):
    a, b = demo_lines()
    coords = np.asarray(b.coords)
    coords[len(coords) // 2, 0] = _PLACEHOLDER_X
    return _non_finite_gpkg(folder / name, [a, shapely.LineString(coords), a], value, geom_type=ogr.wkbLineString)


def _curved_contacts(folder):
    """The demo contacts as CompoundCurves: one circular arc through three consecutive vertices of
    each, the rest straight pieces (a GeoPackage layer of type CompoundCurve)."""
    def fmt(pts):
        return ", ".join(f"{x!r} {y!r}" for x, y in pts)

    geoms = []
    for line in demo_lines():
        c = np.asarray(line.coords)
        k = len(c) // 2
        geoms.append(f"COMPOUNDCURVE(({fmt(c[:k + 1])}), CIRCULARSTRING({fmt(c[k:k + 3])}), ({fmt(c[k + 2:])}))")
    return write_vector(folder / "curved.gpkg", geoms, geom_type=ogr.wkbCompoundCurve)


def _degenerate_among_good(folder):
    a, b = demo_lines()
    x, y = a.coords[0]
    geoms = [a, f"LINESTRING({x} {y})", f"LINESTRING({x} {y}, {x} {y})", "LINESTRING EMPTY", None, b]
    return write_vector(folder / "messy.gpkg", geoms, geom_type=ogr.wkbLineString)


def _only_degenerate(folder):
    x, y = demo_lines()[0].coords[0]
    return write_vector(folder / "dots.gpkg", [f"LINESTRING({x} {y})", f"LINESTRING({x} {y}, {x} {y})"],
                        geom_type=ogr.wkbLineString)


def _no_prj_shapefile(folder):
    path = write_vector(folder / "contacts.shp", demo_lines(), epsg=None)
    return path


def _geojson_without_crs(folder):
    path = folder / "contacts.geojson"
    feats = [{"type": "Feature", "properties": {}, "geometry": shapely.geometry.mapping(g)} for g in demo_lines()]
    path.write_text(json.dumps({"type": "FeatureCollection", "features": feats}))
    return str(path)


def _geographic_contacts(folder):
    src, dst = srs_of(DEMO_EPSG), srs_of(4326)
    for s in (src, dst):
        s.SetAxisMappingStrategy(osr.OAMS_TRADITIONAL_GIS_ORDER)
    ct = osr.CoordinateTransformation(src, dst)
    geoms = []
    for line in demo_lines():
        g = ogr.CreateGeometryFromWkb(shapely.to_wkb(line))
        g.Transform(ct)
        geoms.append(g.ExportToWkt())
    return write_vector(folder / "lonlat.gpkg", geoms, epsg=4326)


def _contours_with(folder, field_kind):
    """The demo contours with field ``elev_m`` as text (``'250 m'``) or as a numeric field left null."""
    ds = ogr.Open(str(CONTOURS))
    geoms, vals = [], []
    for f in ds.GetLayer(0):
        geoms.append(f.GetGeometryRef().ExportToWkt())
        vals.append(f.GetField("elev_m"))
    ds = None
    path = str(folder / "contours.gpkg")
    with gdal_exceptions():
        out = ogr.GetDriverByName("GPKG").CreateDataSource(path)
        lyr = out.CreateLayer("topo_contours", srs_of(DEMO_EPSG), ogr.wkbLineString)
        lyr.CreateField(ogr.FieldDefn("elev_m", ogr.OFTString if field_kind == "text" else ogr.OFTReal))
        for wkt, v in zip(geoms, vals):
            f = ogr.Feature(lyr.GetLayerDefn())
            f.SetGeometry(ogr.CreateGeometryFromWkt(wkt))
            if field_kind == "text":
                f.SetField("elev_m", f"{v:g} m")
            lyr.CreateFeature(f)
        out = None
    return path


CASES = [
    # ---- files that are missing or are not what they claim to be (handled before this matrix)
    Case("contacts-missing", lambda d: _args(d / "nope.gpkg"), ("nope.gpkg", "file not found", "check the path")),
    Case("dem-missing", lambda d: _args(CONTACTS, d / "nope.tif"), ("DEM", "nope.tif", "file not found")),
    Case("contours-missing", lambda d: _args(CONTACTS, None, "--contours", d / "c.gpkg", "--elev-field", "z"),
         ("c.gpkg", "file not found")),
    Case("boreholes-missing", lambda d: _args(CONTACTS, DEM, "--boreholes", d / "b.gpkg"), ("b.gpkg", "not found")),
    Case("contacts-not-vector", lambda d: _args(_text_file(d / "contacts.gpkg")),
         ("contacts.gpkg", "cannot open it as a vector layer", "GeoPackage")),
    Case("dem-not-raster", lambda d: _args(CONTACTS, _text_file(d / "dem.tif")),
         ("dem.tif", "cannot open it as a raster", "GeoTIFF")),
    # ---- layers, geometry types, fields
    Case("contacts-layer-missing", lambda d: _args(CONTACTS, DEM, "--contacts-layer", "nope"),
         ("contacts.gpkg", "no layer 'nope'", "--contacts-layer")),
    Case("contacts-are-points", lambda d: _args(BOREHOLES), ("boreholes.gpkg", "point", "must hold lines")),
    Case("contacts-are-polygons", lambda d: _args(_lines_file(d, "poly.gpkg", [
        shapely.box(487000, 5214000, 488000, 5215000)])), ("poly.gpkg", "polygon", "give a line layer")),
    Case("contacts-empty-layer", lambda d: _args(_lines_file(d, "empty.gpkg", [], geom_type=ogr.wkbLineString)),
         ("empty.gpkg", "no feature", "give a layer with features")),
    Case("where-matches-nothing", lambda d: _args(CONTACTS, DEM, "--where", "unit = 'none'"),
         ("contacts.gpkg", "--where", "no feature")),
    Case("where-invalid-gpkg", lambda d: _args(CONTACTS, DEM, "--where", "unit = "),
         # OGR's own words (GDAL 3.6, GeoPackage driver: SQLite prepares the statement)
         ("contacts.gpkg", "--where", "not valid OGR SQL", "failed to prepare SQL", "fix the expression")),
    Case("where-invalid-shp", lambda d: _args(_lines_file(d, "c.shp", demo_lines(), fields={"unit": ["a", "b"]}),
                                               DEM, "--where", "nope ==="),
         ("c.shp", "--where", "not valid OGR SQL", "SQL Expression Parsing Error")),  # OGR's own words
    Case("contours-no-elev-field", lambda d: _args(CONTACTS, None, "--contours", CONTOURS),
         ("contours.gpkg", "--elev-field")),
    Case("contours-elev-field-missing", lambda d: _args(CONTACTS, None, "--contours", CONTOURS, "--elev-field", "z"),
         ("contours.gpkg", "no field 'z'", "--elev-field")),
    Case("contours-elev-field-text", lambda d: _args(CONTACTS, None, "--contours", _contours_with(d, "text"),
                                                      "--elev-field", "elev_m"),
         ("contours.gpkg", "not numeric", "--elev-field")),
    Case("contours-elev-field-null", lambda d: _args(CONTACTS, None, "--contours", _contours_with(d, "null"),
                                                      "--elev-field", "elev_m"),
         ("contours.gpkg", "no elevation", "--elev-field")),
    Case("group-by-missing", lambda d: _args(CONTACTS, DEM, "--group-by", "nope"),
         ("--group-by", "contacts.gpkg", "no field 'nope'")),
    Case("boreholes-are-lines", lambda d: _args(CONTACTS, DEM, "--boreholes", CONTACTS),
         ("boreholes", "contacts.gpkg", "must hold points")),
    Case("orientations-no-dip-field", lambda d: _args(CONTACTS, DEM, "--orientations", ORIENTATIONS,
                                                      "--dip-field", "nope"),
         ("orientations.gpkg", "no field 'nope'", "--dip-field")),
    # ---- coordinate reference systems
    Case("contacts-geographic", lambda d: _args(_geographic_contacts(d)),
         ("lonlat.gpkg", "geographic", "EPSG:4326", "reproject", "EPSG:32631")),
    Case("contacts-no-crs-gpkg", lambda d: _args(_lines_file(d, "nocrs.gpkg", demo_lines(), epsg=None)),
         ("nocrs.gpkg", "has no coordinate reference system", "ogr2ogr -a_srs")),
    Case("contacts-no-crs-shapefile", lambda d: _args(_no_prj_shapefile(d)),
         ("contacts.shp", "has no coordinate reference system", "ogr2ogr -a_srs")),
    Case("contacts-geojson-projected-coordinates", lambda d: _args(_geojson_without_crs(d)),
         ("contacts.geojson", "not longitudes and latitudes", "a_srs")),
    Case("contacts-in-feet", lambda d: _args(_lines_file(d, "feet.gpkg", demo_lines(), epsg=2227)),
         ("feet.gpkg", "foot", "metres")),
    Case("dem-no-crs", lambda d: _args(CONTACTS, _dem_variant(d, "nocrs.tif", lambda a, h: a, epsg=None,
                                                               nodata=DEMO_NODATA)),
         ("nocrs.tif", "no coordinate reference system", "gdal_edit.py -a_srs")),
    Case("dem-geographic", lambda d: _args(CONTACTS, write_raster(d / "ll.tif", np.ones((50, 50)),
                                                                   gt=(2.8, 0.001, 0, 47.1, 0, -0.001), epsg=4326)),
         ("ll.tif", "geographic", "reproject")),
    Case("dem-no-georeferencing", lambda d: _args(CONTACTS, write_raster(d / "plain.tif", np.ones((50, 50)),
                                                                          georeferenced=False)),
         ("plain.tif", "no georeferencing")),
    # ---- rasters that are not elevations
    Case("dem-rgb-picture", lambda d: _args(CONTACTS, write_raster(
        d / "photo.tif", [np.full((400, 400), v, np.uint8) for v in (10, 120, 200)], dtype=gdal.GDT_Byte,
        colours=(gdal.GCI_RedBand, gdal.GCI_GreenBand, gdal.GCI_BlueBand))),
        ("photo.tif", "3 bands", "red, green, blue", "single band of elevations")),
    Case("dem-two-bands", lambda d: _args(CONTACTS, write_raster(d / "two.tif", [np.ones((40, 40))] * 2)),
         ("two.tif", "2 bands", "single band of elevations", "gdal_translate -b")),
    Case("dem-byte", lambda d: _args(CONTACTS, _dem_variant(d, "hillshade.tif", lambda a, h: np.clip(a / 4, 0, 255),
                                                             dtype=gdal.GDT_Byte)),
         ("hillshade.tif", "Byte", "single band of elevations")),
    Case("dem-palette", lambda d: _args(CONTACTS, _dem_variant(d, "classes.tif", lambda a, h: np.clip(a, 0, 900),
                                                                dtype=gdal.GDT_UInt16, palette=True)),
         ("classes.tif", "colour table", "single band of elevations")),
    Case("dem-too-large-to-read", lambda d: _args(CONTACTS, _huge_vrt(d)),
         ("huge.vrt", "300000 x 300000 cells", "memory budget", "gdalwarp -te")),
    Case("dem-all-nodata", lambda d: _args(CONTACTS, _dem_variant(d, "void.tif", lambda a, h: np.full(a.shape, -1.0),
                                                                   nodata=-1.0)),
         ("void.tif", "no valid cell")),
    # ---- undeclared nodata markers
    Case("dem-undeclared-9999", lambda d: _args(CONTACTS, _dem_variant(d, "holes.tif", lambda a, h: a)),
         ("holes.tif", "-9999", "nodata", "gdal_edit.py -a_nodata -9999")),
    Case("dem-undeclared-32768-int16", lambda d: _args(CONTACTS, _dem_variant(
        d, "srtm.tif", _with_sentinel(-32768, np.int16), dtype=gdal.GDT_Int16)),
        ("srtm.tif", "-32768", "gdal_edit.py -a_nodata -32768")),
    Case("dem-undeclared-float32-lowest", lambda d: _args(CONTACTS, _dem_variant(
        d, "arc.tif", _with_sentinel(np.finfo(np.float32).min, np.float32))),
        ("arc.tif", "-3.40282e+38", "gdal_edit.py -a_nodata")),
    Case("dem-second-marker-besides-declared", lambda d: _args(CONTACTS, _dem_variant(
        d, "mixed.tif", lambda a, h: np.where(np.arange(a.shape[1]) < 3, -32768.0, a), nodata=DEMO_NODATA)),
        ("mixed.tif", "-32768", "declares -9999 as its nodata", "-a_nodata")),
    # ---- georeferencing the grid cannot use
    Case("dem-rotated", lambda d: _args(CONTACTS, _dem_variant(d, "rotated.tif", lambda a, h: a, nodata=DEMO_NODATA,
                                                                gt=(486300.0, 10.0, 1.0, 5217700.0, 1.0, -10.0))),
         ("rotated.tif", "rotated", "gdalwarp")),
    Case("dem-south-up", lambda d: _args(CONTACTS, _dem_variant(d, "southup.tif", lambda a, h: a[::-1],
                                                                 nodata=DEMO_NODATA,
                                                                 gt=(486300.0, 10.0, 0.0, 5213700.0, 0.0, 10.0))),
         ("southup.tif", "north-up")),
    # ---- geometries
    Case("contacts-nan-vertex", lambda d: _args(_nan_line(np.nan, d, "nan.gpkg")),
         ("nan.gpkg", "fid 2", "not a finite number", "fix or delete")),
    Case("contacts-inf-vertex", lambda d: _args(_nan_line(np.inf, d, "inf.gpkg")), ("inf.gpkg", "fid 2", "infinity")),
    Case("boreholes-nan-point", lambda d: _args(CONTACTS, DEM, "--boreholes", _non_finite_gpkg(
        d / "holes.gpkg", [shapely.Point(487000, 5215000), shapely.Point(_PLACEHOLDER_X, 5215000)], np.nan,
        layer="boreholes")), ("holes.gpkg", "fid 2", "not a finite number")),
    Case("contacts-only-degenerate", lambda d: _args(_only_degenerate(d)),
         ("dots.gpkg", "no usable line", "two distinct vertices")),
    Case("contacts-off-the-dem", lambda d: _args(_lines_file(d, "far.gpkg", [_shifted(g, 100000.0)
                                                                           for g in demo_lines()])),
         ("far.gpkg", "dem.tif", "outside")),
    # ---- options that cannot work together or are out of bounds
    Case("no-topography", lambda d: _args(CONTACTS, None), ("no topography", "--dem", "--contours")),
    Case("interval-zero", lambda d: _args(CONTACTS, DEM, "--interval", "0"), ("--interval", "greater than 0")),
    Case("resamples-too-few", lambda d: _args(CONTACTS, DEM, "--resamples", "5"), ("--resamples", "at least 20")),
    Case("dem-sigma-absurd", lambda d: _args(CONTACTS, DEM, "--dem-sigma", "5000"), ("--dem-sigma", "in [0, 1000]")),
    Case("model-unknown", lambda d: _args(CONTACTS, DEM, "--model", "cubic"), ("--model", "invalid choice")),
    Case("units-without-map-units", lambda d: _args(CONTACTS, DEM, "--units-above", "Kv"),
         ("--units-above", "--map-units")),
    Case("map-units-without-dem", lambda d: _args(CONTACTS, None, "--contours", CONTOURS, "--elev-field", "elev_m",
                                                  "--map-units", CONTACTS, "--unit-field", "unit",
                                                  "--units-above", "Kv"),
         ("--map-units", "needs a DEM")),
    # ---- size-driving options, checked against memory or a stated limit before any work
    Case("interval-tiny", lambda d: _args(CONTACTS, DEM, "--interval", "0.001"),
         ("--interval", "structure-contour levels", "limit of 2000", "give --interval a larger value")),
    Case("window-tiny", lambda d: _args(CONTACTS, DEM, "--window", "0.001"),
         ("--window", "local-attitude windows", "memory budget", "give --window a larger value")),
    Case("pick-spacing-tiny", lambda d: _args(CONTACTS, DEM, "--pick-spacing", "0.00001"),
         ("--pick-spacing", "DEM picks", "memory budget", "give --pick-spacing a larger value")),
    Case("cell-tiny-without-dem", lambda d: _args(CONTACTS, None, "--contours", CONTOURS, "--elev-field", "elev_m",
                                                  "--cell", "0.001"),
         ("--cell", "cells of 0.001 m", "give --cell a larger value")),
    Case("resamples-absurd", lambda d: _args(CONTACTS, DEM, "--resamples", "1000000000"),
         ("--resamples", "1e+09 resamples", "memory budget", "give --resamples a smaller value")),
    Case("resamples-too-much-work", lambda d: _args(CONTACTS, DEM, "--resamples", "6000000"),
         ("--resamples", "resample-pick operations", "limit of 1e+10", "give --resamples a smaller value")),
]

#: Inputs the tool can use after a repair it states in the log (exit 0): the words of that log line.
ACCEPTED = [
    Case("contacts-curved-compoundcurve", lambda d: [*_args(_curved_contacts(d)), *FAST],
         ("curved.gpkg", "2 curved geometries", "2 CompoundCurve", "linearised by GDAL"), code=0),
    Case("contacts-degenerate-among-good", lambda d: [*_args(_degenerate_among_good(d)), *FAST],
         ("messy.gpkg", "skipped 4 of 6 features", "1 without geometry", "2 with one vertex or zero length",
          "1 empty"), code=0),
]


def _files_of(args) -> list[Path]:
    """The input files named in ``args`` (with a shapefile's sidecars), existing before the run."""
    found = []
    for a in args:
        p = Path(str(a))
        if p.is_file():
            found += sorted(p.parent.glob(p.stem + ".*")) if p.suffix == ".shp" else [p]
    return found


def _snapshot(folder: Path) -> dict:
    return {str(p.relative_to(folder)): sha256_of(p) for p in sorted(folder.rglob("*")) if p.is_file()}


def test_the_matrix_has_the_rows_it_documents():
    # at least 40 rows of refusals, each id once (the README and this file describe them)
    ids = [c.id for c in CASES + ACCEPTED]
    assert len(CASES) >= 40 and len(ids) == len(set(ids))


@pytest.mark.parametrize("case", CASES, ids=[c.id for c in CASES])
def test_a_bad_input_is_one_line_and_exit_2(case, tmp_path):
    folder = tmp_path / "in"
    folder.mkdir()
    args = [str(a) for a in case.build(folder)]
    out = tmp_path / "out"
    inputs = {str(p): sha256_of(p) for p in _files_of(args)}
    before = sorted(os.listdir(tmp_path)), _snapshot(folder)
    r = run_cli("run", *args, "--out", out)
    lines = r.stderr.strip().splitlines()
    # Reference: exit status 2 for a usage or input error (common practice; the CLI's contract).
    assert r.returncode == 2, r.stderr
    assert len(lines) == 1 and lines[0].startswith("error: "), r.stderr
    line = lines[0].lower()
    missing = [w for w in case.words if w.lower() not in line]
    assert not missing, f"{missing} not in: {lines[0]}"
    assert "traceback" not in line and "internal failure" not in line
    # nothing written: no output folder, nothing beside it, no input changed (checksums)
    assert not out.exists()
    assert (sorted(os.listdir(tmp_path)), _snapshot(folder)) == before
    assert {p: sha256_of(p) for p in inputs} == inputs


@pytest.mark.parametrize("case", ACCEPTED, ids=[c.id for c in ACCEPTED])
def test_an_input_repaired_with_a_stated_count_runs(case, tmp_path):
    folder = tmp_path / "in"
    folder.mkdir()
    args = [str(a) for a in case.build(folder)]
    inputs = {str(p): sha256_of(p) for p in _files_of(args)}
    r = run_cli("run", *args, "--out", tmp_path / "out")
    assert r.returncode == 0, r.stderr
    said = [ln for ln in r.stderr.splitlines() if all(w.lower() in ln.lower() for w in case.words)]
    assert len(said) == 1, f"not one log line with {case.words} in:\n{r.stderr}"
    assert (tmp_path / "out").is_dir()
    assert {p: sha256_of(p) for p in inputs} == inputs


def test_attitude_refuses_resamples_beyond_memory_before_drawing(tmp_path):
    # the attitude command fits a plane to points without the whole chain: same resample check
    out = tmp_path / "a.json"
    r = run_cli("attitude", "--points", BOREHOLES, "--z-field", "base_z_m", "--resamples", "1000000000",
                "--out", out)
    lines = r.stderr.strip().splitlines()
    assert r.returncode == 2 and len(lines) == 1, r.stderr
    assert "--resamples" in lines[0] and "memory budget" in lines[0] and not out.exists()


# --------------------------------------------------------------------------- the library under the rows
#: One geometry of each curved type around the demo sheet, and the family it is read as.
CURVED = {
    "CircularString": ("CIRCULARSTRING(487000 5215000, 487500 5215500, 488000 5215000)", "line"),
    "CompoundCurve": (("COMPOUNDCURVE(CIRCULARSTRING(487000 5215000, 487500 5215500, 488000 5215000), "
                       "(488000 5215000, 488500 5215000))"), "line"),
    "MultiCurve": (("MULTICURVE(CIRCULARSTRING(487000 5215000, 487500 5215500, 488000 5215000), "
                    "(488000 5215000, 488500 5215000))"), "line"),
    "CurvePolygon": ("CURVEPOLYGON(CIRCULARSTRING(487000 5215000, 488000 5215000, 487000 5215000))", "polygon"),
    "MultiSurface": ("MULTISURFACE(CURVEPOLYGON(CIRCULARSTRING(487000 5215000, 488000 5215000, 487000 5215000)))",
                     "polygon"),
}


@pytest.mark.parametrize("kind", sorted(CURVED))
def test_curved_geometries_are_gdals_linear_approximation(kind, tmp_path):
    from strikeline.io.vector import CURVE_STEP_DEG, read_layer

    wkt, family = CURVED[kind]
    path = write_vector(tmp_path / "curved.gpkg", [wkt])
    lyr = read_layer(path, label="contacts", geometry=family, layer_option="--contacts-layer")
    # Reference: GDAL's own linearisation of the same geometry at the same angle step.
    expected = shapely.from_wkb(bytes(ogr.CreateGeometryFromWkt(wkt).GetLinearGeometry(CURVE_STEP_DEG).ExportToWkb()))
    assert len(lyr) == 1 and shapely.equals_exact(lyr.geoms[0], expected, tolerance=1e-6)
    assert any(f"1 {kind}" in n and "linearised by GDAL" in n for n in lyr.notes), lyr.notes
    # the chord error of a 1-degree step on the 500 m radius: R (1 - cos 0.5 deg) = 1.9 cm (sagitta, from memory)
    if family == "line":
        arc = shapely.LineString(shapely.get_coordinates(lyr.geoms[0]))
        centre = shapely.Point(487500, 5215000)
        radii = [centre.distance(shapely.Point(p)) for p in arc.coords if p[0] <= 488000]
        assert max(radii) - min(radii) < 500 * (1 - np.cos(np.radians(0.5))) + 1e-6


@pytest.mark.parametrize("value", [-9999.0, -32768.0, float(np.finfo(np.float32).min)])
def test_an_undeclared_marker_in_memory_is_refused_too(value):
    # the QGIS adapter hands bands already in memory to raster_from_array: same check as a file
    from strikeline.errors import InputError
    from strikeline.geometry.grid import Grid
    from strikeline.io.raster import raster_from_array

    a = np.full((4, 4), 120.0)
    a[0, 0] = value
    grid = Grid((486300.0, 10.0, 0.0, 5217700.0, 0.0, -10.0), (4, 4), srs_of(DEMO_EPSG).ExportToWkt())
    with pytest.raises(InputError, match="a common nodata marker"):
        raster_from_array(a, grid, what="DEM 'x'")
    # declared, the same cell is nodata: read as NaN, the rest kept
    arr, _ = raster_from_array(a, Grid(grid.transform, grid.shape, grid.crs_wkt, value), what="DEM 'x'")
    assert np.isnan(arr[0, 0]) and np.count_nonzero(np.isfinite(arr)) == 15


def test_the_workload_estimates_count_what_the_chain_makes():
    from types import SimpleNamespace

    from strikeline.geometry.grid import Grid
    from strikeline.pipeline.workload import MAX_CONTOUR_LEVELS, estimate_workload

    # one straight contact 1,000 m long (2 vertices) on a 100 x 200 DEM of 5 m cells, relief 0-300 m
    class Layer(SimpleNamespace):
        def __len__(self):
            return len(self.geoms)

    contact = Layer(geoms=np.array([shapely.LineString([(0, 0), (600, 800)])], dtype=object))
    dem = np.linspace(0.0, 300.0, 100 * 200).reshape(100, 200)
    grid = Grid((0.0, 5.0, 0.0, 1000.0, 0.0, -5.0), (100, 200))
    inputs = SimpleNamespace(contacts=contact, top_contacts=None, dem=dem, dem_grid=grid, paths={"dem": "d.tif"},
                             contours=None, contour_elevations_m=None, boreholes_xyz=None)
    opts = SimpleNamespace(cell_m=None, pick_spacing_m=2.0, window_m=100.0, interval_m=0.1, resamples=1000)
    est = {e.option: e for e in estimate_workload(inputs, opts)}
    # Reference: arithmetic on the figures above (length sqrt(600^2 + 800^2) = 1000 m, a 3-4-5 triangle)
    assert est["DEM 'd.tif'"].count == 100 * 200
    assert est["--pick-spacing"].count == pytest.approx(1000.0 / 2.0 + 2)
    # windows: 1000/100 along the contact + 1 per contact; grid centres (600/100 + 1) x (800/100 + 1)
    assert est["--window"].count == pytest.approx(1000.0 / 100.0 + 1 + 7 * 9)
    levels = next(e for e in estimate_workload(inputs, opts) if e.option == "--interval")
    assert levels.count == pytest.approx(300.0 / 0.1 + 1) and levels.exceeded and levels.limit == MAX_CONTOUR_LEVELS
    assert not est["DEM 'd.tif'"].exceeded and not est["--pick-spacing"].exceeded
