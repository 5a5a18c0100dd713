"""The outputs with the plugin's styles, rendered by QGIS's map renderer to a PNG that is not blank.

# Source: strikeline library result as the reference (the numerical truth is tested in tests/);
# here the check is on what QGIS draws: colours of our own styles found in the rendered pixels.
# common practice: mapped contacts are drawn as thin solid black lines, so the predicted trace
# and the structure contours must be told apart from them by colour and dash.
"""
from __future__ import annotations

import os
import shutil
from pathlib import Path

import numpy as np
import pytest
from qgis.core import (
    QgsLineSymbol,
    QgsMapRendererParallelJob,
    QgsMapSettings,
    QgsProcessingContext,
    QgsProcessingFeedback,
    QgsProcessingOutputLayerDefinition,
    QgsProject,
    QgsRasterLayer,
    QgsRuleBasedRenderer,
    QgsSingleBandPseudoColorRenderer,
    QgsSingleSymbolRenderer,
)
from qgis.PyQt.QtCore import QSize, Qt
from qgis.PyQt.QtGui import QColor, QImage
from qgis_helpers import as_layer, vector

from adapter_qgis import styles

pytestmark = pytest.mark.qgis

TMP = "TEMPORARY_OUTPUT"
SIZE_PX = 700
REPO = Path(__file__).resolve().parents[2]


@pytest.fixture(scope="module")
def outputs(tmp_path_factory, sheet):
    """Surface, dip, split structure contours, depth and trace of the demo sheet, as files."""
    import processing

    d = tmp_path_factory.mktemp("render")
    contacts, dem = sheet["contacts_uri"], sheet["dem"]
    picks = processing.run("strikeline:contactpicks", {
        "CONTACTS": contacts, "DEM": dem, "CONTOURS": sheet["contours_uri"],
        "ELEV_FIELD": "elev_m", "picks": str(d / "picks.gpkg")})["picks"]
    sm = processing.run("strikeline:surfacemodel", {"PICKS": picks, "REFERENCE": dem,
                                                    "surface": str(d / "surface.tif"),
                                                    "forecast_mask": str(d / "forecast.tif")})
    surface = sm["surface"]
    dip = processing.run("strikeline:dipgrids", {"SURFACE": surface, "dip": str(d / "dip.tif"),
                                                 "dip_direction": str(d / "dd.tif")})["dip"]
    sc = processing.run("strikeline:structurecontours", {
        "SURFACE": surface, "GROUND": dem, "FORECAST_MASK": sm["forecast_mask"], "INTERVAL": 50.0,
        "structure_contours": str(d / "contours.gpkg")})["structure_contours"]
    dt = processing.run("strikeline:depthtrace", {"SURFACE": surface, "DEM": dem, "CONTACTS": contacts,
                                                  "depth": str(d / "depth.tif"),
                                                  "predicted_trace": str(d / "trace.gpkg")})
    local = processing.run("strikeline:localattitudes", {"PICKS": picks, "WINDOW": 500.0, "ACROSS_PICKS": False,
                                                          "RESAMPLES": 50, "attitudes": str(d / "local.gpkg")})
    return {"local": local["attitudes"], "contacts": contacts, "dip": dip, "contours": sc, "depth": dt["depth"],
            "trace": dt["predicted_trace"], "dir": d}


def render(layers, extent, crs, path) -> np.ndarray:
    ms = QgsMapSettings()
    ms.setLayers(layers)
    ms.setDestinationCrs(crs)
    ms.setExtent(extent)
    ms.setOutputSize(QSize(SIZE_PX, SIZE_PX))
    ms.setBackgroundColor(QColor("white"))
    ms.setFlag(QgsMapSettings.DrawLabeling, True)
    ms.setFlag(QgsMapSettings.Antialiasing, True)
    job = QgsMapRendererParallelJob(ms)
    job.start()
    job.waitForFinished()
    img = job.renderedImage()
    assert img.save(str(path), "PNG")
    back = QImage(str(path)).convertToFormat(QImage.Format_RGB32)
    ptr = back.constBits()
    ptr.setsize(back.height() * back.bytesPerLine())
    a = np.frombuffer(ptr, np.uint8).reshape(back.height(), back.bytesPerLine() // 4, 4)[:, : back.width(), :3]
    return a[..., ::-1].copy()  # BGRA in memory -> RGB


def near(rgb: np.ndarray, hex_colour: str, tol: int = 40) -> np.ndarray:
    c = QColor(hex_colour)
    want = np.array([c.red(), c.green(), c.blue()])
    return np.abs(rgb.astype(int) - want).max(axis=-1) <= tol


def styled_layers(o, background: str):
    contacts = vector(o["contacts"], "mapped contact")
    contacts.setRenderer(QgsSingleSymbolRenderer(QgsLineSymbol.createSimple(
        {"line_color": "black", "line_width": "0.3"})))
    contours = as_layer(o["contours"])
    styles.style_structure_contours(contours)
    trace = as_layer(o["trace"])
    styles.style_trace(trace)
    grid = QgsRasterLayer(o[background], background)
    assert grid.isValid()
    (styles.style_depth if background == "depth" else styles.style_dip)(grid)
    local = as_layer(o["local"])
    styles.style_local_attitudes(local)
    assert isinstance(local.renderer(), QgsRuleBasedRenderer)
    return [local, contacts, trace, contours, grid], grid


@pytest.mark.parametrize("background", ["depth", "dip"])
def test_render_is_not_blank(outputs, tmp_path, background):
    layers, grid = styled_layers(outputs, background)
    png = tmp_path / f"strikeline_{background}.png"
    rgb = render(layers, grid.extent(), grid.crs(), png)
    assert png.stat().st_size > 10_000
    white = (rgb >= 250).all(axis=-1)
    assert white.mean() < 0.2  # the grid covers the map
    assert len(np.unique(rgb.reshape(-1, 3), axis=0)) > 50
    assert near(rgb, styles.TRACE_VERMILION).sum() > 500  # the predicted trace is drawn
    assert near(rgb, styles.CONTOUR_BLUE, tol=30).sum() > 200  # the structure contours and labels
    assert (rgb.max(axis=-1) < 40).sum() > 200  # the mapped contact in black
    target = os.environ.get("STRIKELINE_DEMO_PNG")
    if target and background == "depth":
        shutil.copyfile(png, REPO / target)


def test_styles_are_attached_to_loaded_outputs(sheet):
    """Outputs that QGIS loads on completion get the plugin's style through a post-processor."""
    import processing

    project = QgsProject.instance()
    context = QgsProcessingContext()
    context.setProject(project)
    fb = QgsProcessingFeedback()
    picks = processing.run("strikeline:contactpicks", {"CONTACTS": sheet["contacts_uri"], "DEM": sheet["dem"],
                                                      "picks": TMP})["picks"]
    sm = processing.run("strikeline:surfacemodel", {"PICKS": picks, "REFERENCE": sheet["dem"],
                                                    "surface": TMP, "forecast_mask": TMP})
    surface = sm["surface"]
    res = processing.run("strikeline:structurecontours", {
        "SURFACE": surface, "GROUND": sheet["dem"], "FORECAST_MASK": sm["forecast_mask"], "INTERVAL": 50.0,
        "structure_contours": QgsProcessingOutputLayerDefinition(TMP, project)}, context=context, feedback=fb)
    dips = processing.run("strikeline:dipgrids", {
        "SURFACE": surface, "dip": QgsProcessingOutputLayerDefinition(TMP, project),
        "dip_direction": QgsProcessingOutputLayerDefinition(TMP, project)}, context=context, feedback=fb)
    details = context.layersToLoadOnCompletion()
    assert len(details) == 3
    layer = res["structure_contours"]
    for key, det in details.items():
        pp = det.postProcessor()
        assert pp is not None
        target = layer if pp.style == "structure_contours" else QgsRasterLayer(key, "grid")
        pp.postProcessLayer(target, context, fb)
        if pp.style == "structure_contours":
            assert isinstance(target.renderer(), QgsRuleBasedRenderer)
            rules = {r.filterExpression(): r.symbol().symbolLayer(0) for r in target.renderer().rootRule().children()}
            assert len(rules) == 4
            solid = rules['"below_ground" AND NOT "extrapolated"']
            dashed = rules['"below_ground" AND "extrapolated"']
            eroded = rules['NOT "below_ground" AND NOT "extrapolated"']
            assert solid.penStyle() == Qt.SolidLine and dashed.penStyle() == Qt.DashLine
            assert eroded.color() != solid.color() and eroded.width() < solid.width()
            assert target.labelsEnabled() and "elevation" in target.labeling().settings().fieldName
        else:
            assert isinstance(target.renderer(), QgsSingleBandPseudoColorRenderer)
    assert {det.postProcessor().style for det in details.values()} == {"structure_contours", "dip", "dip_direction"}
    assert dips["dip"] and dips["dip_direction"]
