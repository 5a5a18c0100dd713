"""Reading and writing vector layers (GeoPackage, Shapefile, GeoJSON, ...) through OGR.

Geometries cross the boundary as WKB and come back as shapely 2 geometries, flattened to 2-D
(elevations of picks travel as attributes and as the Z of written points).
"""
from __future__ import annotations

import os
from dataclasses import dataclass, field

import numpy as np
import shapely
from osgeo import ogr, osr

from strikeline.errors import InputError, OutputError, VectorReadError
from strikeline.io._gdal import gdal_exceptions, gdal_message
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
                           self.field_types, dst_wkt, self.z)


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


def read_layer(path, *, layer: str | None = None, where: str | None = None,
               label: str = "layer", geometry: str = "line", layer_option: str,
               where_option: str = "filter") -> VectorLayer:
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
            srs = lyr.GetSpatialRef()
            if srs is not None:
                srs = srs.Clone()
                srs.SetAxisMappingStrategy(osr.OAMS_TRADITIONAL_GIS_ORDER)
            wkbs, fids, values = [], [], {n: [] for n in fnames}
            lyr.ResetReading()
            try:
                for feat in lyr:
                    g = feat.GetGeometryRef()
                    if g is None or g.IsEmpty():
                        continue
                    wkbs.append(bytes(g.ExportToIsoWkb()))
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


def layer_from_wkb(wkbs, *, fids, fields, field_types, crs_wkt, path, layer_name, label="layer",
                   geometry="line", where=None, extent=None, where_option="filter") -> VectorLayer:
    """Build a :class:`VectorLayer` from features already read (as WKB), with every check.

    This is the part of :func:`read_layer` after OGR's loop, for callers that hold features in
    memory (the QGIS adapter): the empty-layer error, the CRS check, WKB to 2-D shapely, the Z of
    points, and the geometry-family check. ``extent`` is ``(xmin, xmax, ymin, ymax)`` as OGR gives
    it, used to suggest a UTM zone for a geographic layer (computed from the features if omitted).
    """
    if geometry not in _FAMILIES:
        raise InputError(f"geometry must be one of 'line', 'point', 'polygon'; got {geometry!r}")
    wanted = _FAMILIES[geometry]
    what = f"{label} layer '{layer_name}' of '{path}'"
    wkbs = [bytes(w) for w in wkbs]
    if not wkbs:
        cond = f" matching the {where_option} {where!r}" if where else ""
        raise InputError(f"{what} holds no feature with a geometry{cond}; give a layer with features")
    geoms3 = shapely.from_wkb(wkbs)
    if extent is None:
        xmin, ymin, xmax, ymax = shapely.total_bounds(geoms3)
        extent = (xmin, xmax, ymin, ymax)
    centre = ((extent[0] + extent[1]) / 2, (extent[2] + extent[3]) / 2)
    require_projected_metres(crs_wkt, what=what, centre_xy=centre)
    z = None
    if geometry == "point":
        z = np.full(len(geoms3), np.nan)
        has_z = shapely.has_z(geoms3) & (shapely.get_type_id(geoms3) == shapely.GeometryType.POINT)
        if has_z.any():
            z[has_z] = shapely.get_coordinates(geoms3[has_z], include_z=True)[:, 2]
    geoms = shapely.force_2d(geoms3)
    type_ids = set(shapely.get_type_id(geoms).tolist())
    if not {shapely.GeometryType(t).name for t in type_ids} <= {n.upper() for n in wanted}:
        got = ", ".join(sorted(shapely.GeometryType(t).name.lower() for t in type_ids))
        raise InputError(
            f"{what} holds {got} geometries; it must hold {geometry}s - give a {geometry} layer"
        )
    return VectorLayer(path, layer_name, geoms, np.asarray(fids, dtype=np.int64),
                       {n: np.array(v, dtype=object) for n, v in fields.items()}, dict(field_types), crs_wkt or "", z)


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


def write_gpkg(path, layers: list[LayerOut], srs_wkt: str) -> None:
    """Write layers into a new GeoPackage (written under a temporary name, then renamed)."""
    path = os.fspath(path)
    root, ext = os.path.splitext(path)
    tmp = f"{root}.part{ext or '.gpkg'}"  # keep the .gpkg extension GDAL expects
    srs = osr.SpatialReference()
    if srs_wkt:
        srs.ImportFromWkt(srs_wkt)
    with gdal_exceptions():
        try:
            drv = ogr.GetDriverByName("GPKG")
            if os.path.exists(tmp):
                os.remove(tmp)
            ds = drv.CreateDataSource(tmp)
            for spec in layers:
                lyr = ds.CreateLayer(spec.name, srs if srs_wkt else None, GEOMETRY_TYPES[spec.geometry_type])
                kinds = {}
                for fname, arr in spec.fields.items():
                    arr = np.asarray(arr)
                    ftype, subtype = _ogr_field_type(arr)
                    fd = ogr.FieldDefn(fname, ftype)
                    if subtype is not None:
                        fd.SetSubType(subtype)
                    lyr.CreateField(fd)
                    kinds[fname] = arr
                defn = lyr.GetLayerDefn()
                lyr.StartTransaction()
                wkbs = shapely.to_wkb(spec.geoms, output_dimension=3) if len(spec.geoms) else []
                for i, wkb in enumerate(wkbs):
                    feat = ogr.Feature(defn)
                    feat.SetGeometry(ogr.CreateGeometryFromWkb(wkb))
                    for fname, arr in kinds.items():
                        v = arr[i]
                        if arr.dtype.kind == "f":
                            if np.isfinite(v):
                                feat.SetField(fname, float(v))
                        elif arr.dtype.kind in "iub":
                            feat.SetField(fname, int(v))
                        elif v is not None:
                            feat.SetField(fname, str(v))
                    lyr.CreateFeature(feat)
                lyr.CommitTransaction()
            ds = None
        except RuntimeError as exc:
            ds = None
            if os.path.exists(tmp):
                os.remove(tmp)
            raise OutputError(f"'{path}': OGR could not write it ({gdal_message(exc)})") from None
    os.replace(tmp, path)


__all__ = ["VectorLayer", "LayerOut", "read_layer", "layer_from_wkb", "write_gpkg", "crs_label"]
