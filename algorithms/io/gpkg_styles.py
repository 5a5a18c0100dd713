"""Styles embedded in a GeoPackage, so QGIS opens the layers ready to read.

QGIS keeps a layer's styles in a table ``layer_styles`` of the GeoPackage itself and draws a layer
with the row marked ``useAsDefault`` when it opens it. strikeline ships one QGIS style document
(QML) per layer of ``results.gpkg`` in ``strikeline/styles/`` (made from the QGIS adapter's styles by
``adapter_qgis/export_styles.py``, so the scheme is written once) and :func:`write_layer_styles`
inserts those of the layers a GeoPackage holds through OGR; QGIS is not needed.

A style whose rules read optional fields (``extrapolated``, ``below_ground``) exists once per set of
those fields (:data:`STYLE_FILES`); a layer gets the style made for exactly the optional fields it
has, so no rule reads a field the layer lacks.

The table has the columns and types QGIS itself creates (checked in
``tests/qgis/test_qgis_gpkg_styles.py`` against a table QGIS wrote): ``f_table_catalog``,
``f_table_schema``, ``f_table_name``, ``f_geometry_column``, ``styleName``, ``styleQML``,
``styleSLD``, ``useAsDefault``, ``description``, ``owner``, ``ui``, ``update_time``.
"""
from __future__ import annotations

import os
from dataclasses import dataclass
from importlib import resources

from osgeo import gdal, ogr

from strikeline import vocabulary as V
from strikeline.errors import OutputError
from strikeline.io._gdal import gdal_exceptions, gdal_message

#: Name of the table of styles (QGIS's name).
TABLE = V.STYLES_TABLE
#: ``styleName`` of strikeline's rows.
STYLE_NAME = "strikeline"

#: The table's fields as QGIS creates them: (name, OGR type, OGR subtype, width).
FIELDS = (
    ("f_table_catalog", ogr.OFTString, ogr.OFSTNone, 256),
    ("f_table_schema", ogr.OFTString, ogr.OFSTNone, 256),
    ("f_table_name", ogr.OFTString, ogr.OFSTNone, 256),
    ("f_geometry_column", ogr.OFTString, ogr.OFSTNone, 256),
    ("styleName", ogr.OFTString, ogr.OFSTNone, 30),
    ("styleQML", ogr.OFTString, ogr.OFSTNone, 0),
    ("styleSLD", ogr.OFTString, ogr.OFSTNone, 0),
    ("useAsDefault", ogr.OFTInteger, ogr.OFSTBoolean, 0),
    ("description", ogr.OFTString, ogr.OFSTNone, 0),
    ("owner", ogr.OFTString, ogr.OFSTNone, 30),
    ("ui", ogr.OFTString, ogr.OFSTNone, 30),
    ("update_time", ogr.OFTDateTime, ogr.OFSTNone, 0),
)


@dataclass(frozen=True)
class StyleFile:
    """One QML document of the package: the layer it styles and the optional fields it reads."""

    stem: str
    layer: V.Layer
    fields: tuple[str, ...] = ()

    @property
    def file(self) -> str:
        return f"{self.stem}.qml"

    @property
    def template_fields(self) -> tuple[str, ...]:
        """The fields of the layer the style was made on: the required ones and :attr:`fields`."""
        return tuple(f for f in self.layer.field_names if f not in self.layer.optional or f in self.fields)


_EXTRAPOLATED, _BELOW = "extrapolated", "below_ground"
for _layer, _names in ((V.STRUCTURE_CONTOURS, (_EXTRAPOLATED, _BELOW)), (V.PREDICTED_TRACE, (_EXTRAPOLATED,))):
    for _name in _names:
        _layer.field(_name)  # a renamed field fails here, not in QGIS

#: Every style document, one per layer and set of optional fields its rules read.
STYLE_FILES = (
    StyleFile("picks", V.PICKS),
    StyleFile("structure_contours", V.STRUCTURE_CONTOURS),
    StyleFile("structure_contours_forecast", V.STRUCTURE_CONTOURS, (_EXTRAPOLATED,)),
    StyleFile("structure_contours_ground", V.STRUCTURE_CONTOURS, (_BELOW,)),
    StyleFile("structure_contours_forecast_ground", V.STRUCTURE_CONTOURS, (_EXTRAPOLATED, _BELOW)),
    StyleFile("predicted_trace", V.PREDICTED_TRACE),
    StyleFile("predicted_trace_forecast", V.PREDICTED_TRACE, (_EXTRAPOLATED,)),
    StyleFile("contact_misfit", V.CONTACT_MISFIT),
    StyleFile("attitudes", V.ATTITUDES),
    StyleFile("unit_conflicts", V.UNIT_CONFLICTS),
)
#: Layers drawn with another layer's style (top-contact picks look like picks).
STYLED_AS = {V.TOP_PICKS.name: V.PICKS.name}

#: One line for the ``description`` of each layer's row.
DESCRIPTIONS = {
    V.PICKS.name: "picks by source: DEM samples grey dots, contour crossings orange triangles",
    V.STRUCTURE_CONTOURS.name: "solid dark blue below ground, thin pale above ground (eroded), dashed where "
                               "forecast beyond the reach of the data; labelled by elevation",
    V.PREDICTED_TRACE.name: "predicted outcrop: vermilion dash, dotted beyond the reach of the data",
    V.CONTACT_MISFIT.name: "contact segments: thick magenta where flagged, thin grey where they match",
    V.ATTITUDES.name: "strike line with a dip tick toward the dip direction, labelled with the dip; an "
                      "open circle where the plane is horizontal within its confidence",
    V.UNIT_CONFLICTS.name: "where the surface breaks the map units: yellow diamonds",
}


def style_dir():
    """The folder of the QML documents (package data of ``strikeline``)."""
    return resources.files("strikeline") / "styles"


def style_file_for(layer: str, fields) -> StyleFile | None:
    """The style document for a layer named ``layer`` with ``fields``: the one made for exactly the
    optional fields it has (``None`` for a layer strikeline has no style for)."""
    name = STYLED_AS.get(layer, layer)
    present = set(fields)
    fits = [s for s in STYLE_FILES if s.layer.name == name and set(s.fields) <= present]
    return max(fits, key=lambda s: len(s.fields)) if fits else None


def style_qml(style: StyleFile) -> str:
    """The QML text of ``style``."""
    return (style_dir() / style.file).read_text(encoding="utf-8")


def _layers_of(ds) -> list[tuple[str, str, list[str]]]:
    out = []
    for i in range(ds.GetLayerCount()):
        lyr = ds.GetLayerByIndex(i)
        defn = lyr.GetLayerDefn()
        fields = [defn.GetFieldDefn(j).GetName() for j in range(defn.GetFieldCount())]
        out.append((lyr.GetName(), lyr.GetGeometryColumn(), fields))
    return out


def _styles_table(ds):
    lyr = ds.GetLayerByName(TABLE)
    if lyr is not None:
        defn = lyr.GetLayerDefn()
        have = {defn.GetFieldDefn(j).GetName() for j in range(defn.GetFieldCount())}
        missing = [f[0] for f in FIELDS if f[0] not in have]
        if missing:
            raise OutputError(f"'{ds.GetDescription()}': its table '{TABLE}' lacks the fields {missing}; "
                              f"remove the table or write to a new GeoPackage")
        return lyr
    lyr = ds.CreateLayer(TABLE, None, ogr.wkbNone, ["FID=id"])  # QGIS's key column
    for name, ftype, subtype, width in FIELDS:
        fd = ogr.FieldDefn(name, ftype)
        fd.SetSubType(subtype)
        if width:
            fd.SetWidth(width)
        if name == "update_time":
            fd.SetDefault("CURRENT_TIMESTAMP")
        lyr.CreateField(fd)
    return lyr


def _insert(ds, table, rows) -> None:
    ds.StartTransaction()
    styled = {r[0] for r in rows}
    table.ResetReading()
    for feat in list(table):
        if feat.GetField("f_table_name") in styled and feat.GetField("useAsDefault"):
            feat.SetField("useAsDefault", 0)
            table.SetFeature(feat)
    defn = table.GetLayerDefn()
    for name, geom_col, style in rows:
        feat = ogr.Feature(defn)
        values = {"f_table_catalog": "", "f_table_schema": "", "f_table_name": name,
                  "f_geometry_column": geom_col, "styleName": STYLE_NAME, "styleQML": style_qml(style),
                  "styleSLD": "", "useAsDefault": 1, "description": DESCRIPTIONS[STYLED_AS.get(name, name)],
                  "owner": ""}
        for key, value in values.items():
            feat.SetField(key, value)
        stamp = gdal.GetConfigOption("OGR_CURRENT_DATE")
        if stamp:  # a fixed date asked for (strikeline.io._gdal.file_date): not SQLite's clock either
            feat.SetField("update_time", stamp)
        table.CreateFeature(feat)
    ds.CommitTransaction()


def _check(path: str, layers: list[str]) -> None:
    """Read the table back: each styled layer has exactly one default style, strikeline's."""
    ds = ogr.Open(path, 0)
    try:
        table = ds.GetLayerByName(TABLE)
        got = sorted((f.GetField("f_table_name"), f.GetField("styleName")) for f in table
                     if f.GetField("useAsDefault") and f.GetField("f_table_name") in layers)
    finally:
        ds = None
    if got != sorted((name, STYLE_NAME) for name in layers):
        raise RuntimeError(f"the table read back holds the default styles {got}")


def write_layer_styles(path) -> list[str]:
    """Insert strikeline's style of every layer of the GeoPackage ``path`` that has one into its
    ``layer_styles`` table, as the layer's default style; return the names of the styled layers.

    Layers without a strikeline style are left as they are; a default style the table already
    holds for a styled layer stops being the default (as when QGIS saves a new default).
    """
    path = os.fspath(path)
    ds = None
    with gdal_exceptions():
        try:
            ds = ogr.Open(path, 1)
            if ds is None or ds.GetDriver().GetName() != "GPKG":
                raise OutputError(f"'{path}': not a GeoPackage that can be opened for writing; give the "
                                  "GeoPackage strikeline wrote")
            rows = [(name, geom_col, style) for name, geom_col, fields in _layers_of(ds) if name != TABLE
                    for style in [style_file_for(name, fields)] if style is not None]
            if rows:
                _insert(ds, _styles_table(ds), rows)
            ds.FlushCache()
            gdal.ErrorReset()
            ds = None  # closes the file; GDAL 3.6 reports a failure here only as its last error
            if gdal.GetLastErrorType() >= gdal.CE_Failure:
                raise RuntimeError(gdal.GetLastErrorMsg())
            if rows:
                _check(path, [r[0] for r in rows])
        except (RuntimeError, OSError) as exc:
            raise OutputError(f"'{path}': could not write its layer styles ({gdal_message(exc)}); "
                              "check that the folder is writable and has space") from None
        finally:
            ds = None  # an early exit leaves the transaction uncommitted: SQLite rolls it back
    return [r[0] for r in rows]


__all__ = ["STYLE_FILES", "StyleFile", "style_file_for", "style_qml", "write_layer_styles"]
