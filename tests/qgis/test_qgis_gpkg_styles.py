"""results.gpkg opens in QGIS ready to read: the styles embedded in its ``layer_styles`` table
are QGIS's default styles of its layers, equal to the adapter's own, and draw as designed.

References outside the project:
- QGIS itself: the ``layer_styles`` table that QGIS 3.22 writes when it saves a style into a
  GeoPackage (``saveStyleToDatabase``) is the reference of the table's layout and of the values
  that make a row the default; QGIS's own loading of a layer (``QgsVectorLayer`` reads its default
  style) and its map renderer (``QgsMapRendererParallelJob``) and legend model
  (``QgsLayerTreeModel``) are what is checked;
- common practice (structural geology maps): a dip direction is measured clockwise from north and
  an attitude symbol's tick points down the dip, from the middle of the strike line; forecasts are
  drawn dashed; a mapped contact is a thin solid black line.
"""
from __future__ import annotations

import shutil
import sqlite3
import sys
from pathlib import Path

import numpy as np
import pytest
from osgeo import ogr
from qgis.core import (
    QgsCategorizedSymbolRenderer,
    QgsLayerTree,
    QgsLayerTreeModel,
    QgsMapLayer,
    QgsMapRendererParallelJob,
    QgsMapSettings,
    QgsReadWriteContext,
    QgsRectangle,
    QgsRuleBasedRenderer,
    QgsSimpleMarkerSymbolLayerBase,
    QgsSymbolLayer,
    QgsVectorLayer,
)
from qgis.PyQt.QtCore import QSize, Qt
from qgis.PyQt.QtGui import QColor, QImage
from qgis.PyQt.QtXml import QDomDocument

from strikeline import vocabulary as V
from strikeline.io import gpkg_styles
from strikeline.io.vector import write_gpkg
from strikeline.pipeline import write_results
from strikeline.pipeline.outputs import contours_layer

from adapter_qgis import export_styles, styles
from adapter_qgis.tools import whole_chain

pytestmark = pytest.mark.qgis

REPO = Path(__file__).resolve().parents[2]
SIZE_PX = 600


# --------------------------------------------------------------------------- helpers
def open_layer(path, name, *, default_style=True) -> QgsVectorLayer:
    opts = QgsVectorLayer.LayerOptions()
    opts.loadDefaultStyle = default_style
    lyr = QgsVectorLayer(f"{path}|layername={name}", name, "ogr", opts)
    assert lyr.isValid(), (path, name)
    return lyr


def symbology_qml(layer) -> str:
    """The layer's symbology and labels as canonical QML, rule keys numbered in order."""
    r = layer.renderer()
    if isinstance(r, QgsRuleBasedRenderer):
        for i, rule in enumerate(r.rootRule().descendants()):
            rule.setRuleKey(str(i))
        r.rootRule().setRuleKey("root")
    doc = QDomDocument("qgis")
    assert not layer.exportNamedStyle(doc, QgsReadWriteContext(), QgsMapLayer.Symbology | QgsMapLayer.Labeling)
    return export_styles.canonical(doc.toString(1))


def rgb_of(img: QImage) -> np.ndarray:
    img = img.convertToFormat(QImage.Format_ARGB32)
    ptr = img.constBits()
    ptr.setsize(img.height() * img.bytesPerLine())
    a = np.frombuffer(ptr, np.uint8).reshape(img.height(), img.bytesPerLine() // 4, 4)[:, : img.width()]
    return a[..., [2, 1, 0, 3]].copy()  # BGRA in memory -> RGBA


def render(layers, extent, crs, png, *, dpi=96.0) -> np.ndarray:
    ms = QgsMapSettings()
    ms.setOutputDpi(dpi)
    ms.setLayers(layers)
    ms.setDestinationCrs(crs)
    ms.setExtent(extent)
    ms.setOutputSize(QSize(SIZE_PX, SIZE_PX))
    ms.setBackgroundColor(QColor("white"))
    ms.setFlag(QgsMapSettings.DrawLabeling, True)
    ms.setFlag(QgsMapSettings.Antialiasing, False)  # exact colours of the symbols
    job = QgsMapRendererParallelJob(ms)
    job.start()
    job.waitForFinished()
    img = job.renderedImage()
    assert img.save(str(png), "PNG")
    return rgb_of(QImage(str(png)))[..., :3]


def count(rgb, hex_colour, tol=12) -> int:
    c = QColor(hex_colour)
    return int((np.abs(rgb.astype(int) - [c.red(), c.green(), c.blue()]).max(axis=-1) <= tol).sum())


def legend_icons(layer) -> dict[str, np.ndarray]:
    """The layer's legend icons as QGIS's layer tree shows them (16 px), RGBA, by label."""
    root = QgsLayerTree()
    node = root.addLayer(layer)
    model = QgsLayerTreeModel(root)
    out = {}
    for ln in model.layerLegendNodes(node):
        icon = ln.data(Qt.DecorationRole)
        pm = icon.pixmap(QSize(16, 16)) if hasattr(icon, "pixmap") else icon
        out[ln.data(Qt.DisplayRole)] = rgb_of(pm.toImage())
    return out


def gaps_along_line(icon: np.ndarray) -> int:
    """Gaps in a line symbol's legend patch: breaks in the most-inked row, between its ends."""
    ink = icon[..., 3] > 60
    row = ink[ink.sum(axis=1).argmax()]
    on = np.flatnonzero(row)
    seg = row[on[0]: on[-1] + 1]
    return int((seg[:-1] & ~seg[1:]).sum())


# --------------------------------------------------------------------------- fixtures
@pytest.fixture(scope="module")
def results(tmp_path_factory, sheet, library):
    """The library's own run on the demo sheet (DEM and contours), written by write_results."""
    _inputs, r = library(sheet)
    out = tmp_path_factory.mktemp("styled") / "out"
    write_results(r, out)
    return out / V.RESULTS_FILE


# --------------------------------------------------------------------------- tests
def test_committed_style_documents_are_the_adapter_styles(tmp_path):
    """The QML shipped in the library is what export_styles.py makes from styles.py now."""
    written = export_styles.export(tmp_path)
    committed = {p.name for p in gpkg_styles.style_dir().iterdir() if p.name.endswith(".qml")}
    assert {p.name for p in written} == committed
    stale = [p.name for p in written
             if p.read_text(encoding="utf-8") != (gpkg_styles.style_dir() / p.name).read_text(encoding="utf-8")]
    assert not stale, (f"{stale} differ from adapter_qgis/styles.py: run "
                       "`QT_QPA_PLATFORM=offscreen .venv-qgis/bin/python adapter_qgis/export_styles.py`")


def test_table_is_the_one_qgis_writes(tmp_path):
    ref = tmp_path / "qgis.gpkg"
    ours = tmp_path / "ours.gpkg"
    lines = contours_layer(np.array([__import__("shapely").LineString([(0, 0, 5), (10, 10, 5)])], dtype=object),
                           [5.0], extrapolated=np.array([True]))
    for p in (ref, ours):
        write_gpkg(p, [lines], "")
    lyr = open_layer(ref, V.STRUCTURE_CONTOURS.name, default_style=False)
    assert lyr.saveStyleToDatabase("by qgis", "reference", True, "") in ("", None)
    del lyr
    gpkg_styles.write_layer_styles(ours)

    def schema(path):
        ds = ogr.Open(str(path))
        t = ds.GetLayerByName(gpkg_styles.TABLE)
        d = t.GetLayerDefn()
        fields = [(f.GetName(), f.GetType(), f.GetSubType(), f.GetWidth(), f.GetDefault())
                  for f in (d.GetFieldDefn(i) for i in range(d.GetFieldCount()))]
        return t.GetFIDColumn(), fields

    assert schema(ours) == schema(ref)
    with sqlite3.connect(ref) as a, sqlite3.connect(ours) as b:
        q = "SELECT sql FROM sqlite_master WHERE name = 'layer_styles'"
        assert a.execute(q).fetchone() == b.execute(q).fetchone()
        q = ("SELECT f_table_catalog, f_table_schema, f_table_name, f_geometry_column, useAsDefault "
             "FROM layer_styles")
        assert a.execute(q).fetchall() == b.execute(q).fetchall()


def test_results_open_with_the_adapter_styles(results):
    """Every layer of results.gpkg opens with a default style equal to the adapter's style of it."""
    ds = ogr.Open(str(results))
    names = [ds.GetLayerByIndex(i).GetName() for i in range(ds.GetLayerCount())]
    ds = None
    names.remove(gpkg_styles.TABLE)
    assert len(names) >= 5
    for name in names:
        embedded = open_layer(results, name)
        plain = open_layer(results, name, default_style=False)
        styles.STYLES[styles.LAYER_STYLES[name]](plain)
        assert type(embedded.renderer()) is type(plain.renderer()), name
        assert symbology_qml(embedded) == symbology_qml(plain), name


def test_the_whole_chain_tool_styles_its_layers_as_results_gpkg():
    assert {k: v[3] for k, v in whole_chain.LAYERS.items()} == styles.LAYER_STYLES
    assert set(styles.LAYER_STYLES) == {layer.name for layer in V.RUN_LAYERS}


def test_forecast_contours_dashed_above_ground_thin_and_pale(tmp_path):
    import shapely

    flags = np.array([True, False])
    geoms = np.array([shapely.LineString([(0, 0), (10, 0)]), shapely.LineString([(0, 5), (10, 5)])], dtype=object)
    path = tmp_path / "c.gpkg"
    write_gpkg(path, [contours_layer(geoms, [1.0, 2.0], extrapolated=flags, below_ground=flags)], "")
    gpkg_styles.write_layer_styles(path)
    lyr = open_layer(path, V.STRUCTURE_CONTOURS.name)
    rules = {r.filterExpression(): r.symbol().symbolLayer(0) for r in lyr.renderer().rootRule().children()}
    below = rules['"below_ground" AND NOT "extrapolated"']
    below_fc = rules['"below_ground" AND "extrapolated"']
    above = rules['NOT "below_ground" AND NOT "extrapolated"']
    above_fc = rules['NOT "below_ground" AND "extrapolated"']
    assert below.penStyle() == Qt.SolidLine and above.penStyle() == Qt.SolidLine
    for dashed in (below_fc, above_fc):
        assert dashed.penStyle() == Qt.DashLine and dashed.useCustomDashPattern()
    # Greyscale: above ground thinner and lighter, not another hue only.
    assert above.width() <= below.width() / 1.5
    assert QColor(above.color()).lightness() - QColor(below.color()).lightness() > 80
    icons = legend_icons(lyr)
    forecast = [k for k in icons if "forecast" in k]
    assert len(forecast) == 2 and all(gaps_along_line(icons[k]) >= 1 for k in forecast)
    assert all(gaps_along_line(icons[k]) == 0 for k in icons if "forecast" not in k)


def test_predicted_trace_legend_shows_the_dash(results):
    """The legend patch shows the dash the map draws (a 0.9 mm Qt dash with round caps, the
    former symbol, gives a solid 16 px patch)."""
    lyr = open_layer(results, V.PREDICTED_TRACE.name)
    icons = legend_icons(lyr)
    assert len(icons) == 2
    assert all(gaps_along_line(icon) >= 1 for icon in icons.values()), {k: gaps_along_line(v) for k, v in icons.items()}
    for r in lyr.renderer().rootRule().children():
        assert r.symbol().symbolLayer(0).penStyle() == Qt.DashLine
    from qgis.core import QgsLineSymbol, QgsSingleSymbolRenderer

    old = open_layer(results, V.PREDICTED_TRACE.name, default_style=False)
    old.setRenderer(QgsSingleSymbolRenderer(QgsLineSymbol.createSimple(
        {"line_color": styles.TRACE_VERMILION, "line_width": "0.9", "line_style": "dash", "capstyle": "round"})))
    assert [gaps_along_line(i) for i in legend_icons(old).values()] == [0]  # the defect this fixes


def test_flagged_misfit_strong_and_unflagged_neutral(results):
    lyr = open_layer(results, V.CONTACT_MISFIT.name)
    rules = {r.filterExpression(): r.symbol().symbolLayer(0) for r in lyr.renderer().rootRule().children()}
    flagged, ok = rules['"flagged"'], rules['NOT "flagged"']
    assert flagged.color().name() == styles.MISFIT_MAGENTA
    assert QColor(ok.color()).saturation() == 0  # neutral grey
    assert flagged.width() >= 3 * ok.width()  # and in greyscale by weight


def test_attitude_symbol_has_a_dip_tick_turned_by_the_dip_direction(results):
    lyr = open_layer(results, V.ATTITUDES.name)
    assert isinstance(lyr.renderer(), QgsRuleBasedRenderer)
    dd = V.ATTITUDES.field("dip_direction_deg").name
    dipping = [r for r in lyr.renderer().rootRule().children() if f'"{dd}" IS NOT NULL' in r.filterExpression()]
    assert len(dipping) == 2  # good and weak
    for rule in dipping:
        sym = rule.symbol()
        assert sym.symbolLayerCount() == 2
        strike, tick = sym.symbolLayer(0), sym.symbolLayer(1)
        assert tick.size() < strike.size() / 2 and tick.offset().y() < 0
        for part in (strike, tick):
            prop = part.dataDefinedProperties().property(QgsSymbolLayer.PropertyAngle)
            assert prop.isActive() and dd in (prop.field() or prop.expressionString())
    assert lyr.labelsEnabled() and V.ATTITUDES.field("dip_deg").name in lyr.labeling().settings().fieldName


@pytest.mark.parametrize("dip_direction", [0.0, 90.0, 180.0, 300.0])
def test_tick_points_down_dip_on_the_map(tmp_path, dip_direction):
    """One attitude point rendered alone: the strike line lies across the dip direction and the
    tick leaves it on the dip's side (clockwise from north: 90 east, 180 south)."""
    import shapely
    from strikeline.pipeline.outputs import vocabulary_layer

    cols = {f.name: np.full(1, 1.0) for f in V.ATTITUDES.fields if f.type == "real"}
    cols.update({f.name: np.zeros(1, np.int64) for f in V.ATTITUDES.fields if f.type == "integer"})
    cols.update({f.name: np.array(["good"]) for f in V.ATTITUDES.fields if f.type == "text"})
    cols["dip_direction_deg"] = np.array([dip_direction])
    path = tmp_path / "a.gpkg"
    write_gpkg(path, [vocabulary_layer(V.ATTITUDES, shapely.points([[500.0, 500.0]]), cols)],
               'LOCAL_CS["metre grid",UNIT["metre",1]]')
    gpkg_styles.write_layer_styles(path)
    lyr = open_layer(path, V.ATTITUDES.name)
    lyr.setLabelsEnabled(False)
    # 600 px over 50 map units, north up, 10 px a millimetre; the point is at the image's centre.
    rgb = render([lyr], QgsRectangle(475, 475, 525, 525), lyr.crs(), tmp_path / "tick.png", dpi=254.0)
    rows, cols_ = np.nonzero(rgb.max(axis=-1) < 90)
    assert len(rows) > 50
    east, north = cols_ - (SIZE_PX - 1) / 2, (SIZE_PX - 1) / 2 - rows
    # The ink's long axis (the strike line) is perpendicular to the dip direction ...
    _, v = np.linalg.eigh(np.cov(np.vstack([east, north])))
    axis = np.degrees(np.arctan2(v[0, 1], v[1, 1])) % 180.0
    assert min(abs(axis - (dip_direction + 90) % 180), 180 - abs(axis - (dip_direction + 90) % 180)) < 5
    # ... and the tick leaves it on the dip's side only: along the dip direction the ink reaches
    # the tick's 1.4 mm (14 px) past the strike line's middle, and the other way only its half width.
    along = east * np.sin(np.radians(dip_direction)) + north * np.cos(np.radians(dip_direction))
    mid = np.median(along)
    assert along.max() - mid > 11 and mid - along.min() < 5, (along.max() - mid, mid - along.min())


def test_results_render_in_their_embedded_styles(results, tmp_path):
    """results.gpkg's layers drawn by QGIS's renderer with nothing but their default styles,
    some misfit segments marked flagged: each style's colour is on the map."""
    path = tmp_path / V.RESULTS_FILE
    shutil.copyfile(results, path)
    ds = ogr.Open(str(path), 1)  # flag every third segment (the demo's contact fits)
    ds.ExecuteSQL(f"UPDATE {V.CONTACT_MISFIT.name} SET flagged = 1 WHERE fid % 3 = 0")
    ds = None
    layers = [open_layer(path, n) for n in (V.ATTITUDES.name, V.CONTACT_MISFIT.name, V.PREDICTED_TRACE.name,
                                              V.STRUCTURE_CONTOURS.name, V.PICKS.name)]
    extent = QgsRectangle(layers[0].extent())
    for lyr in layers[1:]:
        extent.combineExtentWith(lyr.extent())
    png = tmp_path / "results.png"
    rgb = render(layers, extent, layers[0].crs(), png)
    if "--keep-png" in sys.argv:
        shutil.copyfile(png, REPO / "results_styled.png")
    white = (rgb >= 250).all(axis=-1)
    assert 0.5 < white.mean() < 0.999
    assert count(rgb, styles.MISFIT_MAGENTA) > 300  # flagged segments, thick
    assert count(rgb, styles.MATCH_GREY) > 100  # the others, thin grey
    assert count(rgb, styles.TRACE_VERMILION) > 100
    assert count(rgb, styles.CONTOUR_BLUE) > 100
    assert count(rgb, "#1b1b1b") > 100  # attitude marks
    assert isinstance(layers[-1].renderer(), QgsCategorizedSymbolRenderer)



def _looks(symbol) -> dict:
    """What tells a legend class apart without colour hue: width, dash, marker shape, lightness."""
    sl = symbol.symbolLayer(0)
    dash = None
    if hasattr(sl, "penStyle") and sl.penStyle() != Qt.SolidLine:
        dash = tuple(sl.customDashVector()) if sl.useCustomDashPattern() else int(sl.penStyle())
    return {"width": getattr(sl, "width", lambda: None)(), "dash": dash,
            "shape": (int(sl.shape()), symbol.symbolLayerCount()) if hasattr(sl, "shape") else None,
            "size": getattr(sl, "size", lambda: None)(),
            "lightness": QColor(sl.strokeColor() if hasattr(sl, "shape") and (sl.color().alpha() == 0 or sl.shape() in (
                QgsSimpleMarkerSymbolLayerBase.Line, QgsSimpleMarkerSymbolLayerBase.Cross,
                QgsSimpleMarkerSymbolLayerBase.Cross2)) else sl.color()).lightness()}


def _apart_in_greyscale(a, b) -> bool:
    ratio = lambda x, y: max(x, y) / min(x, y) if x and y else 1.0  # noqa: E731
    return (a["dash"] != b["dash"] or a["shape"] != b["shape"] or ratio(a["width"], b["width"]) >= 1.5
            or ratio(a["size"], b["size"]) >= 1.5 or abs(a["lightness"] - b["lightness"]) >= 80)


@pytest.mark.parametrize("stem", [s.stem for s in gpkg_styles.STYLE_FILES])
def test_every_pair_of_classes_reads_apart_in_greyscale(stem):
    """Within each embedded style, every two legend classes differ by line weight (x1.5), dash,
    marker shape or size, or by lightness (80 of 255), not by hue alone."""
    style = next(s for s in gpkg_styles.STYLE_FILES if s.stem == stem)
    lyr = export_styles.template_layer(style)
    msg, ok = lyr.loadNamedStyle(str(gpkg_styles.style_dir() / style.file))
    assert ok, msg
    items = [(i.label(), _looks(i.symbol())) for i in lyr.renderer().legendSymbolItems() if i.symbol()]
    assert items
    # The criterion is not vacuous: a class that differs only a little in tone is not apart.
    assert not _apart_in_greyscale(items[0][1], dict(items[0][1], lightness=items[0][1]["lightness"] + 40))
    for k, (la, a) in enumerate(items):
        for lb, b in items[k + 1:]:
            assert _apart_in_greyscale(a, b), (stem, la, a, lb, b)
