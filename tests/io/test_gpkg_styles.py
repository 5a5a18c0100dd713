"""Styles embedded in results.gpkg (``layer_styles``), checked without QGIS.

References outside the project:
- the table's layout is the one QGIS 3.22.16 creates when it saves a style into a GeoPackage
  (``QgsVectorLayer.saveStyleToDatabase``), read back with OGR on 2026-12-02 and written below as
  ``QGIS_TABLE_SQL``; ``tests/qgis/test_qgis_gpkg_styles.py`` compares with a table QGIS writes live;
- a table without geometry is registered in ``gpkg_contents`` with ``data_type = 'attributes'``
  (OGC GeoPackage Encoding Standard 1.2, 12-128r15, clause 2.4 "Attributes");
- each style is a well-formed XML document (W3C XML 1.0), parsed by Python's own XML parser, whose
  root is QGIS's ``<qgis>`` element.
"""
from __future__ import annotations

import re
import sqlite3
import xml.etree.ElementTree as ET

import numpy as np
import pytest
import shapely
from osgeo import ogr

from strikeline import vocabulary as V
from strikeline.errors import OutputError
from strikeline.io.gpkg_styles import (
    STYLE_FILES,
    STYLE_NAME,
    TABLE,
    style_dir,
    style_file_for,
    write_layer_styles,
)
from strikeline.io.vector import LayerOut, write_gpkg
from strikeline.picks import PickSet
from strikeline.pipeline.outputs import (
    contact_misfit_layer,
    contours_layer,
    picks_layer,
    trace_layer,
)

# Source: QGIS 3.22.16 (Debian 12), saveStyleToDatabase on a GeoPackage; `SELECT sql FROM
# sqlite_master WHERE name = 'layer_styles'` on the file it wrote (2026-12-02).
QGIS_TABLE_SQL = (
    'CREATE TABLE "layer_styles" ( "id" INTEGER PRIMARY KEY AUTOINCREMENT NOT NULL, "f_table_catalog" TEXT(256), '
    '"f_table_schema" TEXT(256), "f_table_name" TEXT(256), "f_geometry_column" TEXT(256), "styleName" TEXT(30), '
    '"styleQML" TEXT, "styleSLD" TEXT, "useAsDefault" BOOLEAN, "description" TEXT, "owner" TEXT(30), '
    '"ui" TEXT(30), "update_time" DATETIME DEFAULT (strftime(\'%Y-%m-%dT%H:%M:%fZ\',\'now\')))')
CRS = 'PROJCS["WGS 84 / UTM zone 33N",GEOGCS["WGS 84",DATUM["WGS_1984",SPHEROID["WGS 84",6378137,298.257223563]],' \
      'PRIMEM["Greenwich",0],UNIT["degree",0.0174532925199433]],PROJECTION["Transverse_Mercator"],' \
      'PARAMETER["latitude_of_origin",0],PARAMETER["central_meridian",15],PARAMETER["scale_factor",0.9996],' \
      'PARAMETER["false_easting",500000],PARAMETER["false_northing",0],UNIT["metre",1]]'
LINES = [shapely.LineString([(500000, 5200000), (500100, 5200050)]),
         shapely.LineString([(500000, 5200100), (500100, 5200150)])]


def rows(path) -> list[dict]:
    with sqlite3.connect(path) as db:
        db.row_factory = sqlite3.Row
        return [dict(r) for r in db.execute(f"SELECT * FROM {TABLE} ORDER BY id")]


def layer_fields(path) -> dict[str, tuple[str, list[str]]]:
    ds = ogr.Open(str(path))
    out = {}
    for i in range(ds.GetLayerCount()):
        lyr = ds.GetLayerByIndex(i)
        d = lyr.GetLayerDefn()
        out[lyr.GetName()] = (lyr.GetGeometryColumn(), [d.GetFieldDefn(j).GetName() for j in range(d.GetFieldCount())])
    return out


def fields_read_by(qml: str) -> set[str]:
    """The fields a style's rules, categories and labels name (quoted names in expressions)."""
    root = ET.fromstring(qml)
    names = set()
    for el in root.iter():
        for key in ("filter", "attr", "fieldName"):
            names |= set(re.findall(r'"([A-Za-z_][A-Za-z0-9_]*)"', el.get(key, "")))
        if el.tag == "renderer-v2" and el.get("attr"):
            names.add(el.get("attr"))
    for opt in root.iter("Option"):
        if opt.get("name") in ("expression", "field") and opt.get("value"):
            names |= set(re.findall(r'"([A-Za-z_][A-Za-z0-9_]*)"', opt.get("value"))) or {opt.get("value")}
    return names


def test_results_gpkg_has_one_default_style_per_layer(demo_dem_run):
    path = demo_dem_run.out / V.RESULTS_FILE
    layers = layer_fields(path)
    got = rows(path)
    with sqlite3.connect(path) as db:
        sql = db.execute("SELECT sql FROM sqlite_master WHERE name = ?", (TABLE,)).fetchone()[0]
        kind = db.execute("SELECT data_type FROM gpkg_contents WHERE table_name = ?", (TABLE,)).fetchone()[0]
    assert sql == QGIS_TABLE_SQL
    assert kind == "attributes"
    styled = {name for name in layers if name != TABLE}
    assert styled >= {V.PICKS.name, V.STRUCTURE_CONTOURS.name, V.PREDICTED_TRACE.name, V.ATTITUDES.name}
    assert sorted(r["f_table_name"] for r in got) == sorted(styled)  # every layer present, once
    for r in got:
        geom_col, fields = layers[r["f_table_name"]]
        assert r["useAsDefault"] == 1 and r["styleName"] == STYLE_NAME
        assert r["f_table_schema"] == "" and r["f_table_catalog"] == ""
        assert r["f_geometry_column"] == geom_col
        root = ET.fromstring(r["styleQML"])
        assert root.tag == "qgis" and root.find("renderer-v2") is not None
        # A rule never reads a field the layer lacks (the style made for its optional fields).
        assert fields_read_by(r["styleQML"]) <= set(fields), r["f_table_name"]
        assert re.fullmatch(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d\.\d{3}Z", r["update_time"])


def test_every_style_document_is_shipped_and_reads_only_its_fields():
    shipped = {p.name for p in style_dir().iterdir() if p.name.endswith(".qml")}
    assert shipped == {s.file for s in STYLE_FILES}  # none missing, none orphaned
    for s in STYLE_FILES:
        qml = (style_dir() / s.file).read_text(encoding="utf-8")
        assert ET.fromstring(qml).tag == "qgis"
        assert fields_read_by(qml) <= set(s.template_fields), s.stem
        for optional in s.fields:  # a style made for an optional field uses it
            assert optional in fields_read_by(qml), (s.stem, optional)


@pytest.mark.parametrize("extrapolated, below, stem", [
    (False, False, "structure_contours"), (True, False, "structure_contours_forecast"),
    (False, True, "structure_contours_ground"), (True, True, "structure_contours_forecast_ground")])
def test_a_layer_gets_the_style_made_for_its_optional_fields(tmp_path, extrapolated, below, stem):
    flags = np.array([True, False])
    layer = contours_layer(LINES, [100.0, 150.0], extrapolated=flags if extrapolated else None,
                           below_ground=flags if below else None)
    path = tmp_path / "c.gpkg"
    write_gpkg(path, [layer], CRS)
    assert write_layer_styles(path) == [V.STRUCTURE_CONTOURS.name]
    (row,) = rows(path)
    assert row["styleQML"] == (style_dir() / f"{stem}.qml").read_text(encoding="utf-8")
    assert style_file_for(V.STRUCTURE_CONTOURS.name, layer.fields).stem == stem


def test_only_layers_present_are_styled_and_others_left_alone(tmp_path):
    picks = PickSet(np.array([[500000.0, 5200000.0, 10.0], [500010.0, 5200000.0, 11.0]]), np.array([0, 0]),
                    np.array(["dem", "contours"]))
    path = tmp_path / "r.gpkg"
    other = LayerOut("my_lines", np.array(LINES, dtype=object), {"unit": np.array(["a", "b"])}, "line")
    layers = [picks_layer(V.TOP_PICKS.name, picks), trace_layer(LINES, extrapolated=np.array([False, True])), other]
    write_gpkg(path, layers, CRS)
    assert write_layer_styles(path) == [V.TOP_PICKS.name, V.PREDICTED_TRACE.name]
    got = {r["f_table_name"]: r for r in rows(path)}
    assert set(got) == {V.TOP_PICKS.name, V.PREDICTED_TRACE.name}
    # Top picks are drawn as picks; the trace with its extrapolated flag gets the dotted part.
    assert got[V.TOP_PICKS.name]["styleQML"] == (style_dir() / "picks.qml").read_text(encoding="utf-8")
    assert got[V.PREDICTED_TRACE.name]["styleQML"] == (style_dir() / "predicted_trace_forecast.qml").read_text(
        encoding="utf-8")


def test_no_styled_layer_no_table(tmp_path):
    path = tmp_path / "x.gpkg"
    ds = ogr.GetDriverByName("GPKG").CreateDataSource(str(path))
    ds.CreateLayer("someone_elses", None, ogr.wkbPoint)
    ds = None
    assert write_layer_styles(path) == []
    assert set(layer_fields(path)) == {"someone_elses"}


def test_a_second_write_keeps_one_default_per_layer(tmp_path):
    segs = {"geoms": np.array(LINES, dtype=object), "contact_id": [1, 2], "misfit_m": [3.0, 40.0],
            "flagged": [False, True]}
    path = tmp_path / "m.gpkg"
    write_gpkg(path, [contact_misfit_layer(segs)], CRS)
    write_layer_styles(path)
    write_layer_styles(path)
    got = rows(path)
    assert [r["useAsDefault"] for r in got] == [0, 1]  # the newest is the default, as QGIS does
    assert {r["f_table_name"] for r in got} == {V.CONTACT_MISFIT.name}


def test_a_file_that_cannot_be_opened_is_one_line_naming_it(tmp_path):
    path = tmp_path / "missing.gpkg"
    with pytest.raises(OutputError) as err:
        write_layer_styles(path)
    msg = str(err.value)
    assert str(path) in msg and "layer styles" in msg and "\n" not in msg
    assert not path.exists()
