"""Reading and writing vector layers (GeoPackage, Shapefile, GeoJSON, ...) through OGR.

Geometries cross the boundary as WKB and come back as shapely 2 geometries, flattened to 2-D
(elevations of picks travel as attributes and as the Z of written points).
"""
from __future__ import annotations

import os
from dataclasses import dataclass, field

import numpy as np
import shapely
from osgeo import gdal, ogr, osr

from strikeline.errors import InputError, OutputError, VectorReadError
from strikeline.io._gdal import gdal_exceptions, gdal_message, quiet_close
from strikeline.io.crs import crs_label, reproject_geometries, require_projected_metres, _wkt_of

_LINE_TYPES = {"LineString", "MultiLineString", "LinearRing"}
_POINT_TYPES = {"Point", "MultiPoint"}
_POLYGON_TYPES = {"Polygon", "MultiPolygon"}
#: The geometry families a layer can be asked to hold.
_FAMILIES = {"line": _LINE_TYPES, "point": _POINT_TYPES, "polygon": _POLYGON_TYPES}
_NUMERIC_OGR = {ogr.OFTInteger, ogr.OFTInteger64, ogr.OFTReal}


@dataclass
class VectorLayer:
    """Features of one layer, in memory.

    Attributes
    ----------
    path, layer_name : str
    geoms : ndarray of shapely geometries, 2-D
    fids : ndarray of int64
    fields : dict of str -> ndarray (object arrays of Python values; None for null)
    field_types : dict of str -> OGR field type name
    crs_wkt : str
        The layer's CRS as WKT (``""`` for none).
    """

    path: str
    layer_name: str
    geoms: np.ndarray
    fids: np.ndarray
    fields: dict = field(default_factory=dict)
    field_types: dict = field(default_factory=dict)
    crs_wkt: str = ""
    #: Z of point geometries (NaN where a point has none); ``None`` for lines.
    z: np.ndarray | None = None
    #: What reading changed, one log line each: curved geometries linearised, degenerate or empty
    #: geometries skipped (with counts). The pipeline logs them.
    notes: tuple = ()

    @property
    def what(self) -> str:
        return f"layer '{self.layer_name}' of '{self.path}'"

    def __len__(self) -> int:
        return len(self.geoms)

    def numeric_field(self, name: str, *, option: str) -> np.ndarray:
        """Values of a numeric field as float64 (NaN for null), with clear errors.

        ``option`` is how the caller's user names the setting that chose the field (a command-line
        flag, a QGIS parameter label); the error tells them to change it.
        """
        if name not in self.fields:
            have = ", ".join(self.fields) or "none"
            raise InputError(
                f"{self.what} has no field '{name}' (fields: {have}); name the right field with {option}"
            )
        if self.field_types[name] not in ("Integer", "Integer64", "Real"):
            raise InputError(
                f"field '{name}' of {self.what} is of type {self.field_types[name]}, not numeric; "
                f"convert it to a number field or name a numeric one with {option}"
            )
        vals = self.fields[name]
        return np.array([np.nan if v is None else float(v) for v in vals], dtype=float)

    def reprojected(self, dst_wkt: str) -> "VectorLayer":
        """The layer in the CRS ``dst_wkt`` (WKT)."""
        geoms = reproject_geometries(self.geoms, self.crs_wkt, dst_wkt)
        # Z is carried over as is: a change between projected CRSs leaves heights alone
        return VectorLayer(self.path, self.layer_name, geoms, self.fids, self.fields,
                           self.field_types, dst_wkt, self.z, self.notes)


def _open(path: str, label: str):
    if not os.path.exists(path):
        raise InputError(f"{label} '{path}': file not found; check the path")
    try:
        ds = ogr.Open(path, 0)
    except RuntimeError as exc:
        ds = None
        msg = gdal_message(exc)
    else:
        msg = "not a vector data set"
    if ds is None:
        raise VectorReadError(
            f"{label} '{path}': OGR cannot open it as a vector layer ({msg}); give a GeoPackage, "
            "Shapefile or GeoJSON file"
        )
    return ds


@dataclass(frozen=True)
class DelimitedPoints:
    """How to read points from delimited text (CSV): the columns of x, y and (optionally) z, and
    the CRS (a CSV declares none; any text ``OSRSetFromUserInput`` takes: ``EPSG:32633``, WKT,
    PROJ). ``*_option`` name the settings in messages (flags or QGIS labels)."""

    x_field: str | None = None
    y_field: str | None = None
    z_field: str | None = None
    crs: str | None = None
    x_option: str = "--x-field"
    y_option: str = "--y-field"
    z_option: str = "--z-field"
    crs_option: str = "--crs"


def _delimited(ds, path: str, label: str, spec: DelimitedPoints | None):
    """``(data set, CRS or None)``: a file OGR reads with its CSV driver is opened again with the
    driver's open options (X/Y/Z_POSSIBLE_NAMES from ``spec``, AUTODETECT_TYPE=YES,
    KEEP_GEOM_COLUMNS=NO), after the named columns are checked against its header; other data
    sets are returned as they are. Without ``spec`` (a line or polygon input) a CSV is read as
    OGR reads it by default."""
    if spec is None or ds.GetDriver().GetName() != "CSV":
        return ds, None
    lyr = ds.GetLayer(0)
    defn = lyr.GetLayerDefn()
    header = [defn.GetFieldDefn(i).GetName() for i in range(defn.GetFieldCount())]
    # let go of this opening now: an error below must not keep the file open through its traceback
    ds = lyr = defn = None
    shown = ", ".join(header) or "none"
    what = f"{label} '{path}' (delimited text)"
    if not spec.x_field or not spec.y_field:
        raise InputError(f"{what}: name the columns of the points' coordinates with {spec.x_option} and "
                         f"{spec.y_option} (columns: {shown})")
    by_lower = {h.lower(): h for h in header}
    chosen = {}
    for name, option in ((spec.x_field, spec.x_option), (spec.y_field, spec.y_option),
                         (spec.z_field, spec.z_option)):
        if not name:
            continue
        if "," in name or name.lower() not in by_lower:
            raise InputError(f"{what} has no column '{name}' (columns: {shown}); name one of them with {option}")
        chosen[option] = by_lower[name.lower()]
    if not spec.crs:
        raise InputError(f"{what} declares no CRS; give the CRS of its coordinates with {spec.crs_option}, e.g. "
                         f"{spec.crs_option} EPSG:32633")
    srs = osr.SpatialReference()
    try:
        srs.SetFromUserInput(spec.crs)
    except RuntimeError as exc:
        raise InputError(f"{spec.crs_option} {spec.crs!r} is not a CRS OSR understands ({gdal_message(exc)}); "
                         "give an EPSG code (EPSG:32633), WKT or a PROJ string") from None
    srs.SetAxisMappingStrategy(osr.OAMS_TRADITIONAL_GIS_ORDER)
    opts = [f"X_POSSIBLE_NAMES={chosen[spec.x_option]}", f"Y_POSSIBLE_NAMES={chosen[spec.y_option]}",
            "AUTODETECT_TYPE=YES", "KEEP_GEOM_COLUMNS=NO"]
    if spec.z_option in chosen:
        opts.append(f"Z_POSSIBLE_NAMES={chosen[spec.z_option]}")
    ds = gdal.OpenEx(path, gdal.OF_VECTOR | gdal.OF_READONLY, allowed_drivers=["CSV"], open_options=opts)
    return ds, srs


def read_layer(path, *, layer: str | None = None, where: str | None = None,
               label: str = "layer", geometry: str = "line", layer_option: str,
               where_option: str = "filter", delimited: DelimitedPoints | None = None) -> VectorLayer:
    """Read the features of a vector layer.

    Parameters
    ----------
    path : str or PathLike
    layer : str, optional
        Layer name; default the first layer.
    where : str, optional
        An OGR SQL attribute filter (``"unit = 'Kv'"``).
    label : str
        How to name the input in messages (``"contacts"``).
    geometry : {'line', 'point', 'polygon'}
        The geometry family the layer must hold.
    layer_option, where_option : str
        How the caller's user names the settings that choose the layer and the filter (a
        command-line flag, a QGIS parameter label), for messages.
    delimited : DelimitedPoints, optional
        For point inputs: how to read points from delimited text (a file OGR's CSV driver
        opens), through that driver's open options; refused without its x and y columns and CRS.

    Raises
    ------
    InputError, VectorReadError, CRSError
    """
    path = os.fspath(path)
    if geometry not in _FAMILIES:
        raise InputError(f"geometry must be one of 'line', 'point', 'polygon'; got {geometry!r}")
    with gdal_exceptions():
        ds = _open(path, label)
        try:
            ds, given_srs = _delimited(ds, path, label, delimited)
            if layer is None:
                lyr = ds.GetLayer(0)
            else:
                lyr = ds.GetLayerByName(layer) if ds.GetLayerCount() else None
            names = [ds.GetLayer(i).GetName() for i in range(ds.GetLayerCount())]
            if lyr is None:
                raise InputError(
                    f"{label} '{path}' has no layer '{layer}' (layers: {', '.join(names) or 'none'}); "
                    f"name one with {layer_option}"
                )
            lname = lyr.GetName()
            what = f"{label} layer '{lname}' of '{path}'"
            if where:
                try:
                    lyr.SetAttributeFilter(where)
                except RuntimeError as exc:
                    raise InputError(
                        f"{what}: the {where_option} {where!r} is not valid OGR SQL ({gdal_message(exc)}); "
                        "fix the expression"
                    ) from None
            defn = lyr.GetLayerDefn()
            fnames = [defn.GetFieldDefn(i).GetName() for i in range(defn.GetFieldCount())]
            ftypes = {
                defn.GetFieldDefn(i).GetName(): defn.GetFieldDefn(i).GetFieldTypeName(defn.GetFieldDefn(i).GetType())
                for i in range(defn.GetFieldCount())
            }
            srs = given_srs if given_srs is not None else lyr.GetSpatialRef()
            if srs is not None:
                srs = srs.Clone()
                srs.SetAxisMappingStrategy(osr.OAMS_TRADITIONAL_GIS_ORDER)
            wkbs, fids, values = [], [], {n: [] for n in fnames}
            lyr.ResetReading()
            try:
                for feat in lyr:
                    g = feat.GetGeometryRef()
                    # null and empty geometries go on to layer_from_wkb, which skips them with a count
                    wkbs.append(None if g is None else bytes(g.ExportToIsoWkb()))
                    fids.append(feat.GetFID())
                    for i, n in enumerate(fnames):
                        values[n].append(feat.GetField(i) if feat.IsFieldSetAndNotNull(i) else None)
            except RuntimeError as exc:
                # Some drivers (GeoPackage: SQLite) check a filter only when the first feature is read.
                if where:
                    raise InputError(
                        f"{what}: the {where_option} {where!r} is not valid OGR SQL ({gdal_message(exc)}); "
                        "fix the expression"
                    ) from None
                raise VectorReadError(f"{what}: OGR could not read its features ({gdal_message(exc)}); "
                                      "check the file, e.g. with ogrinfo") from None
            extent = lyr.GetExtent() if wkbs else None
        finally:
            ds = None
    return layer_from_wkb(wkbs, fids=fids, fields=values, field_types=ftypes, crs_wkt=_wkt_of(srs), path=path,
                          layer_name=lname, label=label, geometry=geometry, where=where, extent=extent,
                          where_option=where_option)


#: Largest angle of arc (degrees) one chord may span when GDAL linearises a curved geometry
#: (``ogr.Geometry.GetLinearGeometry``). A chord over an angle ``a`` of a circle of radius ``R``
#: departs from the arc by at most ``R (1 - cos(a / 2))`` (the sagitta; from memory): 3.8e-5 R at
#: 1 degree, 4 cm on a 1 km radius, finer than any mapped line. GDAL's own default
#: (``OGR_ARC_STEPSIZE``) is 4 degrees, 0.6 m on a 1 km radius.
CURVE_STEP_DEG = 1.0
#: WKB type codes of the curved geometry types (OGC Simple Features 1.2.1 / ISO SQL/MM).
_CURVED_WKB = {8: "CircularString", 9: "CompoundCurve", 10: "CurvePolygon", 11: "MultiCurve",
               12: "MultiSurface", 13: "Curve", 14: "Surface"}
_GEOMETRY_COLLECTION_WKB = 7
#: How many feature ids a message lists before "and N more".
_SHOWN_FIDS = 10


def _wkb_type(wkb: bytes) -> int:
    """The base type code of a WKB geometry (ISO's +1000/2000/3000 for Z/M and EWKB's flag bits removed)."""
    if len(wkb) < 5:
        return 0
    code = int.from_bytes(wkb[1:5], "little" if wkb[0] == 1 else "big") & 0x0FFFFFFF
    return code % 1000


def _linearised(wkbs: list) -> tuple[list, dict]:
    """``wkbs`` with every curved geometry replaced by GDAL's linear approximation
    (``GetLinearGeometry`` at :data:`CURVE_STEP_DEG`), and how many of each curved type there were."""
    out, kinds = list(wkbs), {}
    with gdal_exceptions():
        for i, w in enumerate(wkbs):
            if w is None:
                continue
            t = _wkb_type(w)
            if t not in _CURVED_WKB and t != _GEOMETRY_COLLECTION_WKB:
                continue
            try:
                g = ogr.CreateGeometryFromWkb(w)
            except RuntimeError:
                out[i] = b""  # unreadable: counted with the unusable geometries
                continue
            if t == _GEOMETRY_COLLECTION_WKB and not g.HasCurveGeometry():
                continue
            name = _CURVED_WKB.get(t, "GeometryCollection with curves")
            kinds[name] = kinds.get(name, 0) + 1
            out[i] = bytes(g.GetLinearGeometry(CURVE_STEP_DEG).ExportToIsoWkb())
    return out, kinds


def _without_short_parts(wkb: bytes) -> tuple[bytes | None, int]:
    """A multi-line WKB without its parts of fewer than two vertices (which GEOS refuses to read), and
    how many parts were dropped; ``(None, 0)`` for anything else."""
    with gdal_exceptions():
        try:
            g = ogr.CreateGeometryFromWkb(wkb)
        except RuntimeError:
            return None, 0
        if ogr.GT_Flatten(g.GetGeometryType()) != ogr.wkbMultiLineString:
            return None, 0
        dropped = 0
        for k in reversed(range(g.GetGeometryCount())):
            if g.GetGeometryRef(k).GetPointCount() < 2:
                g.RemoveGeometry(k)
                dropped += 1
        if g.IsEmpty():
            return None, 0
        return bytes(g.ExportToIsoWkb()), dropped


def _fid_list(fids) -> str:
    fids = [int(f) for f in fids]
    shown = ", ".join(map(str, fids[:_SHOWN_FIDS]))
    return shown + (f" and {len(fids) - _SHOWN_FIDS} more" if len(fids) > _SHOWN_FIDS else "")


def _zero_length_parts_removed(geoms: np.ndarray) -> int:
    """Remove (in place) the zero-length parts of multi-lines that also hold longer parts; returns
    how many parts were removed."""
    multi = np.flatnonzero(shapely.get_type_id(geoms) == shapely.GeometryType.MULTILINESTRING)
    if not len(multi):
        return 0
    parts, idx = shapely.get_parts(geoms[multi], return_index=True)
    zero = shapely.length(parts) == 0
    removed = 0
    for j in np.unique(idx[zero]):
        keep = parts[(idx == j) & ~zero]
        if len(keep):
            geoms[multi[j]] = shapely.multilinestrings(keep)
            removed += int(((idx == j) & zero).sum())
    return removed


def layer_from_wkb(wkbs, *, fids, fields, field_types, crs_wkt, path, layer_name, label="layer",
                   geometry="line", where=None, extent=None, where_option="filter") -> VectorLayer:
    """Build a :class:`VectorLayer` from features already read (as WKB), with every check.

    This is the part of :func:`read_layer` after OGR's loop, for callers that hold features in
    memory (the QGIS adapter): curved geometries linearised by GDAL (:data:`CURVE_STEP_DEG`), the
    empty-layer error, non-finite coordinates refused with the feature ids, the CRS check, WKB to
    2-D shapely, the Z of points, the geometry-family check, and unusable geometries skipped with a
    count (``None`` or empty WKB for a feature without geometry; a line of one vertex or of zero
    length; an empty point; a polygon of no area). What was linearised or skipped is said in
    :attr:`VectorLayer.notes`. ``extent`` is ``(xmin, xmax, ymin, ymax)`` as OGR gives it, used to
    suggest a UTM zone for a geographic layer (computed from the features if omitted).
    """
    if geometry not in _FAMILIES:
        raise InputError(f"geometry must be one of 'line', 'point', 'polygon'; got {geometry!r}")
    wanted = _FAMILIES[geometry]
    what = f"{label} layer '{layer_name}' of '{path}'"
    wkbs = [None if w is None or len(w) == 0 else bytes(w) for w in wkbs]
    fids = np.asarray(fids, dtype=np.int64)
    cond = f" matching the {where_option} {where!r}" if where else ""
    if not wkbs or all(w is None for w in wkbs):
        raise InputError(f"{what} holds no feature with a geometry{cond}; give a layer with features")
    notes = []
    wkbs, curved = _linearised(wkbs)
    if curved:
        kinds = ", ".join(f"{n} {k}" for k, n in sorted(curved.items()))
        notes.append(f"{what}: {sum(curved.values())} curved geometries ({kinds}) linearised by GDAL, "
                     f"chords spanning at most {CURVE_STEP_DEG:g} degree of arc")
    null = np.array([w is None for w in wkbs])
    with np.errstate(invalid="ignore"):  # NaN coordinates are refused below, by feature
        geoms3 = shapely.from_wkb(wkbs, on_invalid="ignore")
    dropped_parts = 0
    for i in np.flatnonzero(shapely.is_missing(geoms3) & ~null):
        if geometry == "line":  # GEOS reads no line of one vertex: drop such parts of a multi-line
            repaired, n = _without_short_parts(wkbs[i])
            if repaired is not None:
                with np.errstate(invalid="ignore"):
                    geoms3[i] = shapely.from_wkb(repaired, on_invalid="ignore")
                dropped_parts += n
    present = ~shapely.is_missing(geoms3)
    coords, owner = shapely.get_coordinates(geoms3[present], return_index=True)
    bad = ~np.isfinite(coords).all(axis=1)
    if bad.any():
        bad_fids = np.unique(fids[np.flatnonzero(present)[owner[bad]]])
        raise InputError(
            f"{what}: feature(s) with fid {_fid_list(bad_fids)} have a coordinate that is not a finite number "
            "(NaN or infinity); fix or delete those vertices (e.g. with QGIS's vertex tool) and try again"
        )
    geoms = shapely.force_2d(geoms3)
    usable = present & ~shapely.is_empty(geoms)
    type_ids = set(shapely.get_type_id(geoms[usable]).tolist())
    if not {shapely.GeometryType(t).name for t in type_ids} <= {n.upper() for n in wanted}:
        got = ", ".join(sorted(shapely.GeometryType(t).name.lower() for t in type_ids))
        raise InputError(
            f"{what} holds {got} geometries; it must hold {geometry}s - give a {geometry} layer"
        )
    if geometry == "line":
        dropped_parts += _zero_length_parts_removed(geoms)
        usable &= shapely.length(geoms) > 0
    elif geometry == "polygon":
        usable &= shapely.area(geoms) > 0
    degenerate = ~usable & ~null & present & ~shapely.is_empty(geoms)
    n_skipped = int((~usable).sum())
    if not usable.any():
        kind = {"line": "line of at least two distinct vertices", "point": "point",
                "polygon": "polygon with an area"}[geometry]
        raise InputError(
            f"{what} holds no usable {geometry}{cond}: all {len(wkbs)} features are empty, have no geometry or "
            f"are degenerate (fids {_fid_list(fids)}); give a layer with at least one {kind}"
        )
    if n_skipped:
        shape = {"line": "one vertex or zero length", "point": "no coordinates",
                 "polygon": "no area"}[geometry]
        parts = [f"{int(null.sum())} without geometry" if null.any() else "",
                 f"{int((~present & ~null).sum() + degenerate.sum())} with {shape}"
                 if (~present & ~null).any() or degenerate.any() else "",
                 f"{int((present & shapely.is_empty(geoms)).sum())} empty"
                 if (present & shapely.is_empty(geoms)).any() else ""]
        notes.append(f"warning: {what}: skipped {n_skipped} of {len(wkbs)} features that hold no usable {geometry} "
                     f"({', '.join(p for p in parts if p)}; fids {_fid_list(fids[~usable])}); fix or delete them "
                     "to silence this warning")
    if dropped_parts:
        notes.append(f"warning: {what}: dropped {dropped_parts} part(s) of one vertex or zero length from "
                     f"multi-part {geometry}s")
    geoms3, geoms = geoms3[usable], geoms[usable]
    if extent is None or n_skipped:
        xmin, ymin, xmax, ymax = shapely.total_bounds(geoms)
        extent = (xmin, xmax, ymin, ymax)
    centre = ((extent[0] + extent[1]) / 2, (extent[2] + extent[3]) / 2)
    require_projected_metres(crs_wkt, what=what, centre_xy=centre)
    z = None
    if geometry == "point":
        z = np.full(len(geoms3), np.nan)
        has_z = shapely.has_z(geoms3) & (shapely.get_type_id(geoms3) == shapely.GeometryType.POINT)
        if has_z.any():
            z[has_z] = shapely.get_coordinates(geoms3[has_z], include_z=True)[:, 2]
    return VectorLayer(path, layer_name, geoms, fids[usable],
                       {n: np.array(v, dtype=object)[usable] for n, v in fields.items()}, dict(field_types),
                       crs_wkt or "", z, tuple(notes))


@dataclass
class LayerOut:
    """A layer to write: geometries (shapely, Z kept), fields and their kinds."""

    name: str
    geoms: np.ndarray
    fields: dict  # name -> ndarray; dtype decides the OGR type (float, int, bool, str)
    geometry_type: str  # one of GEOMETRY_TYPES: 'point', 'point_z', 'line', 'line_z', 'polygon'


#: The geometry types a written layer can have, and OGR's code for each.
GEOMETRY_TYPES = {"point": ogr.wkbPoint, "point_z": ogr.wkbPoint25D, "line": ogr.wkbLineString,
                  "line_z": ogr.wkbLineString25D, "polygon": ogr.wkbPolygon}


def _ogr_field_type(arr: np.ndarray):
    if arr.dtype.kind == "f":
        return ogr.OFTReal, None
    if arr.dtype.kind in "iu":
        return ogr.OFTInteger64, None
    if arr.dtype.kind == "b":
        return ogr.OFTInteger, ogr.OFSTBoolean
    return ogr.OFTString, None


def _field_column(arr: np.ndarray) -> tuple:
    """One field's values as plain Python objects, with the OGR setter that writes them.

    Returns ``(setter_name, values)``: a float column is written with ``SetField`` (a double) and its
    non-finite values become ``None`` (the field is left unset, a NULL in the file); integers and
    booleans with ``SetFieldInteger64``; anything else with ``SetFieldString``, ``None`` left unset.
    """
    if arr.dtype.kind == "f":
        vals = arr.astype(float)
        out = vals.tolist()
        for i in np.flatnonzero(~np.isfinite(vals)).tolist():
            out[i] = None
        return "SetField", out
    if arr.dtype.kind in "iub":
        return "SetFieldInteger64", arr.astype(np.int64).tolist()
    return "SetFieldString", [None if v is None else str(v) for v in arr.tolist()]


def _write_features(lyr, geoms: np.ndarray, columns: list) -> None:
    """Create one feature per geometry, its fields set by index from ``columns`` (``_field_column``)."""
    if not len(geoms):
        return
    defn = lyr.GetLayerDefn()
    wkbs = shapely.to_wkb(geoms, output_dimension=3)
    setters = [(j, getattr(ogr.Feature, name), vals) for j, (name, vals) in enumerate(columns)]
    make, from_wkb, create = ogr.Feature, ogr.CreateGeometryFromWkb, lyr.CreateFeature
    for i, wkb in enumerate(wkbs.tolist()):
        feat = make(defn)
        feat.SetGeometryDirectly(from_wkb(wkb))
        for j, setter, vals in setters:
            v = vals[i]
            if v is not None:
                setter(feat, j, v)
        create(feat)


def write_gpkg(path, layers: list[LayerOut], srs_wkt: str) -> None:
    """Write layers into a new GeoPackage (written under a temporary name, checked, then renamed).

    Each layer's features are written in one transaction whose commit is checked; the file is
    flushed and closed, GDAL's last error after the close is checked (GDAL 3.6 does not raise
    it), and the file is opened again to compare its layers and feature counts with what was
    written. Only then is it renamed to ``path``; on any failure or interruption nothing is left.

    Raises
    ------
    OutputError
        OGR could not write, commit or close the file (a full disk among others; OGR's message
        is included), or the file read back lacks features.
    """
    path = os.fspath(path)
    root, ext = os.path.splitext(path)
    tmp = f"{root}.part{ext or '.gpkg'}"  # keep the .gpkg extension GDAL expects
    srs = osr.SpatialReference()
    if srs_wkt:
        srs.ImportFromWkt(srs_wkt)
    ds = lyr = None
    with gdal_exceptions():
        try:
            drv = ogr.GetDriverByName("GPKG")
            _remove_gpkg(tmp)
            ds = drv.CreateDataSource(tmp)
            for spec in layers:
                lyr = ds.CreateLayer(spec.name, srs if srs_wkt else None, GEOMETRY_TYPES[spec.geometry_type])
                columns = []
                for fname, arr in spec.fields.items():
                    arr = np.asarray(arr)
                    ftype, subtype = _ogr_field_type(arr)
                    fd = ogr.FieldDefn(fname, ftype)
                    if subtype is not None:
                        fd.SetSubType(subtype)
                    lyr.CreateField(fd)
                    columns.append(_field_column(arr))
                lyr.StartTransaction()
                _write_features(lyr, spec.geoms, columns)
                if lyr.CommitTransaction() != ogr.OGRERR_NONE:  # raises in exception mode; checked anyway
                    raise RuntimeError(f"the commit of layer '{spec.name}' failed")
            lyr = None
            ds.FlushCache()
            gdal.ErrorReset()
            ds = None  # closes the file; GDAL 3.6 reports a failure here only as its last error
            if gdal.GetLastErrorType() >= gdal.CE_Failure:
                raise RuntimeError(gdal.GetLastErrorMsg())
            _check_gpkg(tmp, {spec.name: len(spec.geoms) for spec in layers})
        except BaseException as exc:
            with quiet_close():
                lyr = ds = None
            _remove_gpkg(tmp)
            if isinstance(exc, RuntimeError):
                raise OutputError(f"'{path}': OGR could not write it ({gdal_message(exc)}); free some space or "
                                  "choose another folder") from None
            raise
    os.replace(tmp, path)


def _remove_gpkg(path: str) -> None:
    """Remove a GeoPackage and SQLite's side files of it."""
    for p in (path, path + "-journal", path + "-wal", path + "-shm"):
        if os.path.exists(p):
            os.remove(p)


def _check_gpkg(path: str, counts: dict) -> None:
    """Open a GeoPackage just written and compare its layers' feature counts with ``counts``."""
    ds = ogr.Open(path, 0)
    try:
        got = {ds.GetLayer(i).GetName(): ds.GetLayer(i).GetFeatureCount() for i in range(ds.GetLayerCount())}
    finally:
        ds = None
    if got != counts:
        raise RuntimeError(f"the file read back holds {got}, not the {counts} features written")


__all__ = ["VectorLayer", "DelimitedPoints", "LayerOut", "read_layer", "layer_from_wkb", "write_gpkg", "crs_label"]
