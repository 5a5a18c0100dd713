"""Library results out to QGIS outputs: feature sinks and GeoTIFF destinations.

Outputs are created only once every number is computed, so a cancelled or failed run leaves no
output behind. Rasters are written by the library's own GeoTIFF writer (float32, DEFLATE, CRS
and nodata set, written under a temporary name and renamed into place).
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import shapely
from qgis.core import (
    QgsFeature,
    QgsFeatureSink,
    QgsField,
    QgsFields,
    QgsGeometry,
    QgsProcessingException,
    QgsProcessingOutputNumber,
    QgsProcessingOutputString,
    QgsWkbTypes,
)
from qgis.PyQt.QtCore import QVariant

from strikeline import vocabulary as V
from strikeline.io.raster import write_geotiff
from strikeline.io.vector import LayerOut

_QVARIANT = {"f": QVariant.Double, "i": QVariant.LongLong, "u": QVariant.LongLong, "b": QVariant.Bool}


@dataclass
class Table:
    """Features to write: shapely geometries and one array per field (dtype decides the type)."""

    geoms: np.ndarray
    fields: dict
    wkb_type: int
    types: dict = field(default_factory=dict)  # field name -> QVariant type, overriding the dtype's

    @classmethod
    def of_layer(cls, layer: LayerOut) -> "Table":
        """A layer the library writes (:class:`strikeline.io.vector.LayerOut`): same fields."""
        return cls(layer.geoms, layer.fields, _qgis_wkb_type(layer.geometry_type))

    def qgs_fields(self) -> QgsFields:
        out = QgsFields()
        for name, arr in self.fields.items():
            kind = self.types.get(name, _QVARIANT.get(np.asarray(arr).dtype.kind, QVariant.String))
            out.append(QgsField(name, kind))
        return out


#: QGIS's type for each geometry type the library names (:data:`strikeline.io.vector.GEOMETRY_TYPES`).
_QGIS_WKB_TYPES = {"point": QgsWkbTypes.Point, "point_z": QgsWkbTypes.PointZ, "line": QgsWkbTypes.LineString,
                   "line_z": QgsWkbTypes.LineStringZ, "polygon": QgsWkbTypes.Polygon}


def _qgis_wkb_type(geometry_type: str) -> int:
    """QGIS's type for a library layer's geometry type (``'point'``, ``'line_z'``, ...)."""
    return _QGIS_WKB_TYPES[geometry_type]


def _py(v):
    if isinstance(v, (np.floating, float)):
        return None if not np.isfinite(v) else float(v)
    if isinstance(v, (np.bool_, bool)):
        return bool(v)
    if isinstance(v, (np.integer, int)):
        return int(v)
    return None if v is None else str(v)


def write_sink(alg, parameters, name: str, context, table: Table, crs) -> str | None:
    """Create the feature sink of output ``name`` and write the table into it.

    Returns the destination id (what the next tool takes), or None when the output is skipped.
    """
    fields = table.qgs_fields()
    sink, dest_id = alg.parameterAsSink(parameters, name, context, fields, table.wkb_type, crs)
    if sink is None:
        return None
    has_z = QgsWkbTypes.hasZ(table.wkb_type)
    geoms = np.asarray(table.geoms, dtype=object)
    wkbs = shapely.to_wkb(geoms, output_dimension=3 if has_z else 2) if len(geoms) else []
    columns = [np.asarray(a) for a in table.fields.values()]
    for i, wkb in enumerate(wkbs):
        g = QgsGeometry()
        g.fromWkb(wkb)
        f = QgsFeature(fields)
        f.setGeometry(g)
        f.setAttributes([_py(c[i]) for c in columns])
        if not sink.addFeature(f, QgsFeatureSink.FastInsert):
            raise QgsProcessingException(
                f"output '{name}': QGIS could not write feature {i} ({sink.lastError()}); "
                "choose another output format or folder")
    del sink  # flush and close file-based sinks now
    return dest_id


def write_raster(alg, parameters, name: str, context, array, grid) -> str | None:
    """Write ``array`` on ``grid`` to the raster destination ``name`` (None when skipped); ``name``
    is a raster of :data:`strikeline.vocabulary.RASTERS`, whose meaning and unit the band carries."""
    path = alg.parameterAsOutputLayer(parameters, name, context)
    if not path:
        return None
    spec = V.RASTERS[name]
    write_geotiff(path, array, grid, description=spec.meaning, unit=spec.unit)
    return path


def add_outputs(alg, labels: dict) -> None:
    """Declare the numbers and strings a tool returns: ``{name: label}``, every name one of
    :data:`strikeline.vocabulary.QGIS_OUTPUTS` (a text output becomes a string, the rest numbers)."""
    specs = {n.name: n for n in V.QGIS_OUTPUTS}
    for name, label in labels.items():
        spec = specs.get(name)
        if spec is None:
            raise KeyError(f"QGIS output '{name}' is not in strikeline.vocabulary.QGIS_OUTPUTS; add it there")
        kind = QgsProcessingOutputString if spec.type == "text" else QgsProcessingOutputNumber
        alg.addOutput(kind(name, alg.tr(label)))
