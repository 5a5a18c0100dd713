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
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np
import shapely
from qgis.core import (
    QgsCoordinateReferenceSystem,
    QgsGeometry,
    QgsProcessingFeatureSource,
    QgsProviderRegistry,
    QgsRasterLayer,
    QgsVectorLayer,
    QgsWkbTypes,
)
from qgis.PyQt.QtCore import QVariant

from strikeline.errors import CancelledError, InputError
from strikeline.geometry.grid import Grid
from strikeline.io.raster import raster_from_array, read_raster
from strikeline.io.vector import VectorLayer, layer_from_wkb

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


def crs_wkt(crs: QgsCoordinateReferenceSystem) -> str:
    """A QGIS CRS as the WKT text the library takes (``""`` when invalid).

    A known QGIS quirk: a CRS with an authority id (``EPSG:32631``) can come back from a
    background run with ``toWkt()`` empty, so a valid layer would look CRS-less. Then the WKT
    is made again from the authority id: by QGIS's CRS database, else by GDAL's OSR.
    """
    if crs is None or not crs.isValid():
        return ""
    wkt = crs.toWkt(QgsCoordinateReferenceSystem.WKT_PREFERRED)
    if wkt:
        return wkt
    authid = crs.authid()
    if not authid:
        return ""
    wkt = QgsCoordinateReferenceSystem(authid).toWkt(QgsCoordinateReferenceSystem.WKT_PREFERRED)
    if wkt:
        return wkt
    from osgeo import osr

    srs = osr.SpatialReference()
    try:
        srs.SetFromUserInput(authid)
    except RuntimeError:
        return ""
    return srs.ExportToWkt(["FORMAT=WKT2_2018"]) or ""


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


def _finite_xy(wkb: bytes) -> bool:
    """True when every x and y of a linear geometry's WKB (ISO, as :func:`_as_geos_wkb` gives it,
    or 2.5D/extended) is a finite number. The WKB is walked part by part and each run of coordinates checked at
    once (numpy over the buffer), so a layer of long lines costs no Python loop per vertex."""
    view = memoryview(wkb)

    def walk(pos: int) -> int:
        order = "<" if view[pos] == 1 else ">"
        kind = int.from_bytes(view[pos + 1:pos + 5], "little" if order == "<" else "big")
        pos += 5
        # ISO types add 1000 (Z), 2000 (M), 3000 (ZM); the older 2.5D/EWKB ones set high bits
        # (Z 0x80000000, M 0x40000000, an SRID following the type 0x20000000).
        flags, kind = kind & 0xF0000000, kind & 0x0FFFFFFF
        if flags & 0x20000000:
            pos += 4
        has_z = kind // 1000 in (1, 3) or bool(flags & 0x80000000)
        has_m = kind // 1000 in (2, 3) or bool(flags & 0x40000000)
        dims = 2 + has_z + has_m
        base = kind % 1000
        if base == 1:  # point
            counts = [1]
        elif base in (2, 3):  # line string, polygon (its rings)
            n = int.from_bytes(view[pos:pos + 4], "little" if order == "<" else "big")
            pos += 4
            if base == 2:
                counts = [n]
            else:
                for _ in range(n):
                    m = int.from_bytes(view[pos:pos + 4], "little" if order == "<" else "big")
                    pos = check(pos + 4, m, dims, order)
                return pos
        else:  # multi-geometries and collections: their parts are whole WKB geometries
            n = int.from_bytes(view[pos:pos + 4], "little" if order == "<" else "big")
            pos += 4
            for _ in range(n):
                pos = walk(pos)
            return pos
        for m in counts:
            pos = check(pos, m, dims, order)
        return pos

    def check(pos: int, m: int, dims: int, order: str) -> int:
        xyz = np.frombuffer(view, dtype=np.dtype(f"{order}f8"), count=m * dims, offset=pos)
        if m and not np.isfinite(xyz.reshape(m, dims)[:, :2]).all():
            raise ValueError
        return pos + 8 * m * dims

    try:
        walk(0)
    except ValueError:
        return False
    return True


def read_vector(source: QgsProcessingFeatureSource, name: LayerName, *, geometry: str | None,
                is_cancelled=None, keep_z: bool = False) -> VectorLayer:
    """Read a Processing feature source into a library :class:`VectorLayer`, in its own CRS.

    The features (with every attribute) travel as WKB into
    :func:`strikeline.io.vector.layer_from_wkb`, which makes the checks of the command line's
    reader: a layer without features, a CRS that is not projected in metres, the wrong geometry
    family. Reprojection is the library's too (:func:`strikeline.pipeline.assemble_inputs`).

    Parameters
    ----------
    source : QgsProcessingFeatureSource
        From ``parameterAsSource`` (selected features only when the user asked for it).
    name : LayerName
        How to name the input in messages.
    geometry : {'line', 'point', None}
        The geometry family the input must hold. None: any geometry, for inputs whose attributes
        alone are used; the geometries are not measured, so neither their family nor the CRS
        is checked.
    keep_z : bool
        Keep Z coordinates in ``geoms`` (pick layers carry elevation as Z); default 2-D like the
        library.
    """
    qfields = source.fields()
    names = qfields.names()
    wkbs, fids, bad = [], [], []
    values = {f: [] for f in names}
    for i, feat in enumerate(source.getFeatures()):
        if is_cancelled is not None and i % _CHECK_EVERY == 0 and is_cancelled():
            raise CancelledError(f"reading {name.what}: cancelled; nothing was written")
        g = feat.geometry()
        if g is None or g.isNull() or g.isEmpty():
            continue
        wkb = _as_geos_wkb(g)
        if not _finite_xy(wkb):
            bad.append(feat.id())
            continue
        wkbs.append(wkb)
        fids.append(feat.id())
        for k, f in enumerate(names):
            values[f].append(feat.attribute(k))
    if bad:
        shown = ", ".join(str(f) for f in bad[:10]) + (f" and {len(bad) - 10} more" if len(bad) > 10 else "")
        raise InputError(f"{name.what}: feature(s) with fid {shown} have a coordinate that is not a finite number "
                         "(NaN or infinity); fix or delete those vertices (e.g. with QGIS's vertex tool) and try again")
    fields = {f: _attribute_values(v) for f, v in values.items()}
    ftypes = {f: _FIELD_TYPE_NAMES.get(qfields.field(f).type(), qfields.field(f).typeName()) for f in names}
    wkt = crs_wkt(source.sourceCrs())
    if geometry is None:
        return VectorLayer(name.path, name.layer, _geoms(wkbs, keep_z), np.asarray(fids, dtype=np.int64),
                           fields, ftypes, wkt)
    layer = layer_from_wkb(wkbs, fids=fids, fields=fields, field_types=ftypes, crs_wkt=wkt, path=name.path,
                           layer_name=name.layer, label=name.label, geometry=geometry)
    return replace(layer, geoms=_geoms(wkbs, True)) if keep_z else layer


def _geoms(wkbs, keep_z: bool) -> np.ndarray:
    geoms = shapely.from_wkb(wkbs) if wkbs else np.empty(0, dtype=object)
    return np.asarray(geoms if keep_z else shapely.force_2d(geoms), dtype=object)


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
    wkt = crs_wkt(layer.crs())
    if is_cancelled is not None and is_cancelled():
        raise CancelledError(f"reading {what}: cancelled; nothing was written")
    block = prov.block(band, ext, cols, rows)
    if block is None or not block.isValid():
        raise InputError(f"{what}: QGIS could not read band {band}; check the layer")
    dtype = _BLOCK_DTYPES.get(int(block.dataType()))
    if dtype is None:
        raise InputError(f"{what}: band {band} has data type {block.dataType()}, not a number type; "
                         "give a single-band elevation raster")
    arr = np.frombuffer(bytes(block.data()), dtype=dtype).reshape(rows, cols)
    nodata = prov.sourceNoDataValue(band) if prov.sourceHasNoDataValue(band) else None
    return raster_from_array(arr, Grid(transform, (rows, cols), wkt, nodata), what=what)
