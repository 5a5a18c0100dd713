"""QGIS layers in, library inputs out.

Vector features travel through WKB into shapely 2 geometries (the library's currency), read
through ``QgsProcessingFeatureSource`` so the selected-features-only option and any provider
(memory, GeoPackage, Shapefile, database) work. Rasters are read by the library through GDAL
from the layer's file, or block by block through the QGIS provider when there is no file.

The checks that decide whether an input can be used (CRS in metres, numeric elevation field,
usable cells) are the library's own, so QGIS shows the same messages as the command line.
"""
from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import shapely
from qgis.core import (
    QgsCoordinateReferenceSystem,
    QgsFeatureRequest,
    QgsGeometry,
    QgsProcessingFeatureSource,
    QgsProviderRegistry,
    QgsRasterLayer,
    QgsVectorLayer,
    QgsWkbTypes,
)
from qgis.PyQt.QtCore import QVariant

from strikeline.errors import CancelledError, InputError
from strikeline.grid import Grid
from strikeline.io.crs import crs_label, require_projected_metres, same_crs, srs_from_wkt
from strikeline.io.raster import read_raster
from strikeline.io.vector import VectorLayer

#: QVariant field types as the OGR type names that :class:`strikeline.io.vector.VectorLayer`
#: expects (it accepts ``Integer``, ``Integer64`` and ``Real`` as numeric).
_FIELD_TYPE_NAMES = {
    QVariant.Int: "Integer", QVariant.UInt: "Integer", QVariant.LongLong: "Integer64",
    QVariant.ULongLong: "Integer64", QVariant.Double: "Real", QVariant.String: "String",
    QVariant.Bool: "Boolean", QVariant.Date: "Date", QVariant.DateTime: "DateTime",
}

#: QGIS raster data types (Qgis.DataType values) as numpy dtypes, for block reading.
_BLOCK_DTYPES = {1: np.uint8, 2: np.uint16, 3: np.int16, 4: np.uint32, 5: np.int32, 6: np.float32,
                 7: np.float64}

#: Features read between two checks of ``is_cancelled``.
_CHECK_EVERY = 2000


@dataclass(frozen=True)
class LayerName:
    """How an input is named in messages: ``{label} layer '{layer}' of '{path}'`` (as the CLI)."""

    label: str
    layer: str
    path: str

    @property
    def what(self) -> str:
        return f"{self.label} layer '{self.layer}' of '{self.path}'"


def crs_to_srs(crs: QgsCoordinateReferenceSystem):
    """A QGIS CRS as the osr SpatialReference the library uses (None when invalid)."""
    if crs is None or not crs.isValid():
        return None
    return srs_from_wkt(crs.toWkt(QgsCoordinateReferenceSystem.WKT_PREFERRED))


def qgis_crs(wkt: str) -> QgsCoordinateReferenceSystem:
    """The QGIS CRS of a WKT string (the library's grids and layers carry WKT)."""
    return QgsCoordinateReferenceSystem.fromWkt(wkt) if wkt else QgsCoordinateReferenceSystem()


def vector_name(layer: QgsVectorLayer | None, source: QgsProcessingFeatureSource, label: str) -> LayerName:
    """File path and layer name of a vector input, for messages and the summary."""
    if layer is not None:
        prov = layer.providerType()
        if prov == "ogr":
            parts = QgsProviderRegistry.instance().decodeUri("ogr", layer.source())
            path = parts.get("path") or layer.source()
            lname = parts.get("layerName") or (Path(path).stem if os.path.isfile(path) else layer.name())
            return LayerName(label, lname, path)
        return LayerName(label, layer.name(), prov)
    return LayerName(label, source.sourceName() or label, "QGIS")


def _attribute_values(values: list) -> np.ndarray:
    out = np.empty(len(values), dtype=object)
    out[:] = [None if (v is None or (isinstance(v, QVariant) and v.isNull())) else v for v in values]
    return out


def _as_geos_wkb(geom: QgsGeometry) -> bytes:
    """WKB that GEOS reads: curves segmentised, M dropped (Z kept)."""
    g = geom.constGet()
    if QgsWkbTypes.isCurvedType(g.wkbType()):
        g = g.segmentize()
    elif QgsWkbTypes.hasM(g.wkbType()):
        g = g.clone()
    if QgsWkbTypes.hasM(g.wkbType()):
        g.dropMValue()
    return bytes(g.asWkb())


def read_vector(source: QgsProcessingFeatureSource, name: LayerName, *, geometry: str,
                fields=(), target_crs: QgsCoordinateReferenceSystem | None = None, context=None,
                log=None, is_cancelled=None, keep_z: bool = False) -> VectorLayer:
    """Read a Processing feature source into a library :class:`VectorLayer`.

    Parameters
    ----------
    source : QgsProcessingFeatureSource
        From ``parameterAsSource`` (selected features only when the user asked for it).
    name : LayerName
        How to name the input in messages.
    geometry : {'line', 'point', None}
        The geometry family the input must hold (None: any).
    fields : sequence of str
        Attribute fields to read (only these are fetched).
    target_crs : QgsCoordinateReferenceSystem, optional
        Features are transformed to this CRS (QGIS's transform context) when the layer's own
        CRS differs; the layer's own CRS must be projected in metres either way.
    log : callable, optional
        Receives the "reprojecting ..." line.
    keep_z : bool
        Keep Z coordinates (pick layers carry elevation as Z); default 2-D like the library.
    """
    what = name.what
    own_crs = source.sourceCrs()
    srs = crs_to_srs(own_crs)
    ext = source.sourceExtent()
    # Same order of checks as strikeline.io.vector.read_layer: emptiness, CRS, geometry family.
    if source.featureCount() == 0:
        raise InputError(f"{what} holds no feature with a geometry; give a layer with features")
    centre = None if ext.isNull() else (ext.center().x(), ext.center().y())
    require_projected_metres(srs, what=what, centre_xy=centre)

    request = QgsFeatureRequest()
    field_names = source.fields().names()
    for f in fields:
        if f not in field_names:
            have = ", ".join(field_names) or "none"
            raise InputError(f"{name.label} layer '{name.layer}' of '{name.path}' has no field '{f}' "
                             f"(fields: {have}); choose one of its fields")
    request.setSubsetOfAttributes(list(fields), source.fields())
    out_srs = srs
    if target_crs is not None and target_crs.isValid():
        tsrs = crs_to_srs(target_crs)
        if not same_crs(srs, tsrs):
            if context is not None:
                request.setDestinationCrs(target_crs, context.transformContext())
            else:
                from qgis.core import QgsCoordinateTransformContext

                request.setDestinationCrs(target_crs, QgsCoordinateTransformContext())
            if log is not None:
                log(f"reprojecting {name.label} '{name.path}' from {crs_label(srs)} to {crs_label(tsrs)}")
            out_srs = tsrs

    wkbs, fids = [], []
    values = {f: [] for f in fields}
    for i, feat in enumerate(source.getFeatures(request)):
        if is_cancelled is not None and i % _CHECK_EVERY == 0 and is_cancelled():
            raise CancelledError(f"reading {what}: cancelled; nothing was written")
        g = feat.geometry()
        if g is None or g.isNull() or g.isEmpty():
            continue
        wkbs.append(_as_geos_wkb(g))
        fids.append(feat.id())
        for f in fields:
            values[f].append(feat[f])
    if not wkbs:
        raise InputError(f"{what} holds no feature with a geometry; give a layer with features")
    geoms3 = shapely.from_wkb(wkbs)
    z = None
    if geometry == "point":  # as strikeline.io.vector.read_layer: the Z of single points
        z = np.full(len(geoms3), np.nan)
        has_z = shapely.has_z(geoms3) & (shapely.get_type_id(geoms3) == shapely.GeometryType.POINT)
        if has_z.any():
            z[has_z] = shapely.get_coordinates(geoms3[has_z], include_z=True)[:, 2]
    geoms = geoms3 if keep_z else shapely.force_2d(geoms3)
    wanted = {"line": ("LineString", "MultiLineString", "LinearRing"), "point": ("Point", "MultiPoint"),
              None: ()}[geometry]
    types = {shapely.GeometryType(t).name for t in set(shapely.get_type_id(geoms).tolist())}
    if geometry is not None and not types <= {w.upper() for w in wanted}:
        got = ", ".join(sorted(t.lower() for t in types))
        raise InputError(f"{what} holds {got} geometries; it must hold {geometry}s - give a {geometry} layer")
    qfields = source.fields()
    ftypes = {f: _FIELD_TYPE_NAMES.get(qfields.field(f).type(), qfields.field(f).typeName()) for f in fields}
    return VectorLayer(name.path, name.layer, np.asarray(geoms, dtype=object),
                       np.asarray(fids, dtype=np.int64),
                       {f: _attribute_values(v) for f, v in values.items()}, ftypes, out_srs, z)


def raster_path(layer: QgsRasterLayer) -> str | None:
    """The file GDAL can read for a raster layer, or None (then it is read through QGIS)."""
    if layer.providerType() != "gdal":
        return None
    src = layer.source()
    if os.path.isfile(src):
        return src
    parts = QgsProviderRegistry.instance().decodeUri("gdal", src)
    path = parts.get("path")
    if path and os.path.isfile(path) and not parts.get("layerName"):
        return path
    return None


def read_raster_layer(layer: QgsRasterLayer, *, label: str = "DEM", band: int = 1,
                      is_cancelled=None) -> tuple[np.ndarray, Grid]:
    """A raster layer as the library's ``(float64 array with NaN, Grid)``.

    A file that GDAL reads goes through :func:`strikeline.io.raster.read_raster` (the CLI's own
    reader and checks). Anything else (a GeoPackage raster table, a provider without a file) is
    read through the QGIS provider as one block over its native grid, with the same checks.
    """
    path = raster_path(layer)
    if path is not None:
        return read_raster(path, label=label, band=band)
    what = f"{label} '{layer.name()}' ({layer.providerType()} raster {layer.source()})"
    prov = layer.dataProvider()
    if prov is None or not layer.isValid():
        raise InputError(f"{what}: QGIS cannot read this raster layer; check that it opens in QGIS")
    ext = prov.extent()
    cols, rows = prov.xSize(), prov.ySize()
    if cols <= 0 or rows <= 0:
        raise InputError(f"{what} has no native cell grid; save it as a GeoTIFF and use that")
    transform = (ext.xMinimum(), ext.width() / cols, 0.0, ext.yMaximum(), 0.0, -ext.height() / rows)
    crs_wkt = layer.crs().toWkt(QgsCoordinateReferenceSystem.WKT_PREFERRED) if layer.crs().isValid() else ""
    grid_probe = Grid(transform, (rows, cols), crs_wkt)
    xmin, ymin, xmax, ymax = grid_probe.bounds
    require_projected_metres(srs_from_wkt(crs_wkt), what=what, centre_xy=((xmin + xmax) / 2, (ymin + ymax) / 2))
    if is_cancelled is not None and is_cancelled():
        raise CancelledError(f"reading {what}: cancelled; nothing was written")
    block = prov.block(band, ext, cols, rows)
    if block is None or not block.isValid():
        raise InputError(f"{what}: QGIS could not read band {band}; check the layer")
    dtype = _BLOCK_DTYPES.get(int(block.dataType()))
    if dtype is None:
        raise InputError(f"{what}: band {band} has data type {block.dataType()}, not a number type; "
                         "give a single-band elevation raster")
    arr = np.frombuffer(bytes(block.data()), dtype=dtype).reshape(rows, cols).astype(np.float64)
    nodata = prov.sourceNoDataValue(band) if prov.sourceHasNoDataValue(band) else None
    if nodata is not None:
        arr[arr == nodata] = np.nan
    arr[~np.isfinite(arr)] = np.nan
    if not np.isfinite(arr).any():
        raise InputError(f"{what} holds no valid cell (every cell is nodata); give a raster with data")
    return arr, Grid(transform, (rows, cols), crs_wkt, nodata)
