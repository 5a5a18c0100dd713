"""How strikeline's outputs look when they are loaded into QGIS.

Every style is a plain function ``style_x(layer)`` (usable on any layer holding the output)
and is attached to the tool's outputs as a Processing post-processor, so a layer loaded on
completion arrives styled:

- picks: small marks by source (DEM samples grey dots, contour crossings orange triangles);
- structure contours: labelled by elevation; blue where the surface lies below ground, thin
  and pale where it is eroded away above ground (when the tool was given the DEM), dashed
  where it is a forecast beyond the reach of the data (when given Surface model's mask);
- dip: a continuous ramp of our own on fixed degrees (pale sand at 0°, teal, slate blue,
  deep plum at 60° and steeper), so maps of different sheets share one legend;
- dip direction: a cyclic ramp around the compass;
- depth below ground: diverging about zero (blues where the surface is below ground, browns
  where it is eroded away above);
- predicted outcrop trace: a wide vermilion dash, unlike a mapped contact's thin black line.
"""
from __future__ import annotations

import itertools

from qgis.core import (
    QgsCategorizedSymbolRenderer,
    QgsColorRampShader,
    QgsLineSymbol,
    QgsMarkerSymbol,
    QgsPalLayerSettings,
    QgsProcessingLayerPostProcessorInterface,
    QgsRasterBandStats,
    QgsRasterShader,
    QgsRendererCategory,
    QgsRuleBasedRenderer,
    QgsSingleBandPseudoColorRenderer,
    QgsSingleSymbolRenderer,
    QgsTextBufferSettings,
    QgsTextFormat,
    QgsVectorLayerSimpleLabeling,
)
from qgis.PyQt.QtGui import QColor

CONTOUR_BLUE = "#1f4e79"
TRACE_VERMILION = "#e0451f"

#: Dip ramp stops (degrees, colour): our own, on fixed values so legends compare across sheets.
DIP_RAMP = ((0.0, "#f6efd6"), (5.0, "#cfe3b0"), (15.0, "#4fa89b"), (30.0, "#2c5d8f"),
            (60.0, "#3d1f54"), (90.0, "#1a0b24"))

#: Dip-direction ramp around the compass (cyclic: 0 and 360 share a colour).
DIP_DIRECTION_RAMP = ((0.0, "#c0392b"), (90.0, "#e9b440"), (180.0, "#3f8f5a"), (270.0, "#3a5fa8"),
                      (360.0, "#c0392b"))


def _ramp_renderer(layer, stops, *, band=1):
    items = [QgsColorRampShader.ColorRampItem(v, QColor(c), f"{v:g}") for v, c in stops]
    ramp = QgsColorRampShader(stops[0][0], stops[-1][0])
    ramp.setColorRampType(QgsColorRampShader.Interpolated)
    ramp.setColorRampItemList(items)
    ramp.setClip(False)
    shader = QgsRasterShader()
    shader.setRasterShaderFunction(ramp)
    r = QgsSingleBandPseudoColorRenderer(layer.dataProvider(), band, shader)
    r.setClassificationMin(stops[0][0])
    r.setClassificationMax(stops[-1][0])
    return r


def style_dip(layer) -> None:
    layer.setRenderer(_ramp_renderer(layer, DIP_RAMP))
    layer.triggerRepaint()


def style_dip_direction(layer) -> None:
    layer.setRenderer(_ramp_renderer(layer, DIP_DIRECTION_RAMP))
    layer.triggerRepaint()


def _band_range(layer):
    stats = layer.dataProvider().bandStatistics(1, QgsRasterBandStats.Min | QgsRasterBandStats.Max)
    return float(stats.minimumValue), float(stats.maximumValue)


def style_depth(layer) -> None:
    lo, hi = _band_range(layer)
    m = max(abs(lo), abs(hi), 1.0)
    stops = ((-m, "#7a4a1e"), (-m / 4, "#d9b38c"), (0.0, "#f7f7f2"), (m / 4, "#9ec3df"), (m, "#143d6b"))
    layer.setRenderer(_ramp_renderer(layer, stops))
    layer.triggerRepaint()


def style_surface(layer) -> None:
    lo, hi = _band_range(layer)
    if not hi > lo:
        hi = lo + 1.0
    stops = ((lo, "#f3e6c4"), ((lo + hi) / 2, "#8fa6b8"), (hi, "#2b3a55"))
    layer.setRenderer(_ramp_renderer(layer, stops))
    layer.triggerRepaint()


def _contour_labels(field: str = "elevation_m") -> QgsVectorLayerSimpleLabeling:
    s = QgsPalLayerSettings()
    s.fieldName = f'round("{field}")'
    s.isExpression = True
    s.placement = QgsPalLayerSettings.Line
    fmt = QgsTextFormat()
    fmt.setSize(8)
    fmt.setColor(QColor(CONTOUR_BLUE))
    buf = QgsTextBufferSettings()
    buf.setEnabled(True)
    buf.setSize(0.8)
    buf.setColor(QColor("white"))
    fmt.setBuffer(buf)
    s.setFormat(fmt)
    return QgsVectorLayerSimpleLabeling(s)


def contour_symbol(*, eroded: bool = False, forecast: bool = False) -> QgsLineSymbol:
    """Structure-contour line: blue where the surface is below ground, pale where it is eroded
    away above ground; dashed where it is a forecast beyond the reach of the data."""
    props = {"line_color": "#9db3c8" if eroded else CONTOUR_BLUE, "line_width": "0.25" if eroded else "0.45"}
    if forecast:
        props["line_style"] = "dash"
    return QgsLineSymbol.createSimple(props)


def style_structure_contours(layer) -> None:
    """Labelled by elevation; parts by the ``below_ground`` / ``extrapolated`` fields when present."""
    flags = [f for f in ("below_ground", "extrapolated") if layer.fields().indexOf(f) >= 0]
    if flags:
        root = QgsRuleBasedRenderer.Rule(None)
        for combo in itertools.product((True, False), repeat=len(flags)):
            state = dict(zip(flags, combo))
            expr = " AND ".join(f'"{f}"' if v else f'NOT "{f}"' for f, v in state.items())
            label = ", ".join({("below_ground", True): "below ground", ("below_ground", False): "above ground (eroded)",
                               ("extrapolated", True): "forecast (beyond the reach of the data)",
                               ("extrapolated", False): "within reach of the data"}[(f, v)] for f, v in state.items())
            sym = contour_symbol(eroded=not state.get("below_ground", True), forecast=state.get("extrapolated", False))
            root.appendChild(QgsRuleBasedRenderer.Rule(sym, 0, 0, expr, label))
        layer.setRenderer(QgsRuleBasedRenderer(root))
    else:
        layer.setRenderer(QgsSingleSymbolRenderer(contour_symbol()))
    layer.setLabeling(_contour_labels("elevation_m"))
    layer.setLabelsEnabled(True)
    layer.triggerRepaint()


def style_trace(layer) -> None:
    """Wide vermilion: dotted where the trace is forecast beyond the data (``extrapolated``),
    dashed elsewhere (it is a prediction throughout, never a mapped line)."""
    near = QgsLineSymbol.createSimple({"line_color": TRACE_VERMILION, "line_width": "0.9",
                                       "line_style": "dash", "capstyle": "round"})
    if layer.fields().indexOf("extrapolated") >= 0:
        far = QgsLineSymbol.createSimple({"line_color": TRACE_VERMILION, "line_width": "0.6",
                                          "line_style": "dot", "capstyle": "round"})
        root = QgsRuleBasedRenderer.Rule(None)
        root.appendChild(QgsRuleBasedRenderer.Rule(near, 0, 0, 'NOT "extrapolated"', "predicted outcrop"))
        root.appendChild(QgsRuleBasedRenderer.Rule(far, 0, 0, '"extrapolated"',
                                                   "predicted outcrop, beyond the reach of the data"))
        layer.setRenderer(QgsRuleBasedRenderer(root))
    else:
        layer.setRenderer(QgsSingleSymbolRenderer(near))
    layer.triggerRepaint()


def style_contact_misfit(layer) -> None:
    """Contact segments: thin green where they match the predicted trace, thick magenta where flagged."""
    ok = QgsLineSymbol.createSimple({"line_color": "#2e7d32", "line_width": "0.4"})
    bad = QgsLineSymbol.createSimple({"line_color": "#c2185b", "line_width": "1.2"})
    root = QgsRuleBasedRenderer.Rule(None)
    root.appendChild(QgsRuleBasedRenderer.Rule(bad, 0, 0, '"flagged"', "misfit above the flag distance"))
    root.appendChild(QgsRuleBasedRenderer.Rule(ok, 0, 0, 'NOT "flagged"', "matches the predicted trace"))
    layer.setRenderer(QgsRuleBasedRenderer(root))
    layer.triggerRepaint()


def style_uncertainty(layer) -> None:
    lo, hi = _band_range(layer)
    hi = max(hi, lo + 1e-3, 0.0)
    stops = ((0.0, "#fff7ec"), (hi / 2, "#fc8d59"), (hi, "#7f0000"))
    layer.setRenderer(_ramp_renderer(layer, stops))
    layer.triggerRepaint()


def style_thickness(layer) -> None:
    lo, hi = _band_range(layer)
    hi = max(hi, 1.0)
    stops = ((min(lo, 0.0), "#d7191c"), (0.0, "#ffffbf"), (hi / 2, "#a6d96a"), (hi, "#1a5e2a"))
    layer.setRenderer(_ramp_renderer(layer, stops))
    layer.triggerRepaint()


def style_picks(layer) -> None:
    dem = QgsMarkerSymbol.createSimple({"name": "circle", "color": "#5b5b5b", "size": "1.0",
                                        "outline_style": "no"})
    con = QgsMarkerSymbol.createSimple({"name": "triangle", "color": "#f28c28", "size": "1.8",
                                        "outline_color": "#7a3f00", "outline_width": "0.1"})
    if layer.fields().indexOf("source") >= 0:
        cats = [QgsRendererCategory("dem", dem, "DEM sample"),
                QgsRendererCategory("contours", con, "contour crossing")]
        layer.setRenderer(QgsCategorizedSymbolRenderer("source", cats))
    else:
        layer.setRenderer(QgsSingleSymbolRenderer(dem))
    layer.triggerRepaint()


def style_attitude(layer) -> None:
    sym = QgsMarkerSymbol.createSimple({"name": "cross2", "color": "#1b1b1b", "size": "4",
                                        "outline_width": "0.6"})
    layer.setRenderer(QgsSingleSymbolRenderer(sym))
    s = QgsPalLayerSettings()
    s.fieldName = ("if(\"dip_deg\" IS NULL, \"quality\", format_number(\"dip_deg\", 1) || '° → ' || "
                   "format_number(\"dip_direction_deg\", 0) || '°')")
    s.isExpression = True
    layer.setLabeling(QgsVectorLayerSimpleLabeling(s))
    layer.setLabelsEnabled(True)
    layer.triggerRepaint()


def style_local_attitudes(layer) -> None:
    """A strike line rotated to the local strike (RHR), labelled with the dip; grey where the
    window's quality is weak, nothing where it is undetermined (no attitude); the ``attitudes``
    layer of the tool and of ``strikeline run`` (one field list)."""
    from qgis.core import QgsProperty, QgsSymbolLayer

    strike, dip = "strike_rhr_deg", "dip_deg"
    root = QgsRuleBasedRenderer.Rule(None)
    for expr, colour, label in (('"quality" = \'good\'', "#1b1b1b", "good"),
                                ('"quality" = \'weak\'', "#8a8a8a", "weak")):
        sym = QgsMarkerSymbol.createSimple({"name": "line", "color": colour, "outline_color": colour,
                                            "size": "4", "outline_width": "0.5"})
        sym.symbolLayer(0).setDataDefinedProperty(QgsSymbolLayer.PropertyAngle, QgsProperty.fromField(strike))
        root.appendChild(QgsRuleBasedRenderer.Rule(sym, 0, 0, expr, label))
    layer.setRenderer(QgsRuleBasedRenderer(root))
    s = QgsPalLayerSettings()
    s.fieldName = f'if("quality" = \'undetermined\', \'\', round("{dip}"))'
    s.isExpression = True
    layer.setLabeling(QgsVectorLayerSimpleLabeling(s))
    layer.setLabelsEnabled(True)
    layer.triggerRepaint()


STYLES = {
    "local_attitudes": style_local_attitudes,
    "contact_misfit": style_contact_misfit,
    "uncertainty": style_uncertainty,
    "thickness": style_thickness,
    "picks": style_picks,
    "attitude": style_attitude,
    "structure_contours": style_structure_contours,
    "trace": style_trace,
    "dip": style_dip,
    "dip_direction": style_dip_direction,
    "depth": style_depth,
    "surface": style_surface,
}


class StylePostProcessor(QgsProcessingLayerPostProcessorInterface):
    """Applies one of :data:`STYLES` to an output layer when QGIS loads it."""

    def __init__(self, style: str):
        super().__init__()
        self.style = style

    def postProcessLayer(self, layer, context, feedback):  # noqa: N802 (QGIS's name)
        if layer is not None and layer.isValid():
            STYLES[self.style](layer)


# QGIS holds post-processors by raw pointer; the Python objects must outlive the run.
_ALIVE: list = []


def attach_style(context, dest_id, style: str) -> None:
    """Style output ``dest_id`` with ``STYLES[style]`` when it is loaded on completion."""
    if not style or not dest_id or not context.willLoadLayerOnCompletion(dest_id):
        return
    pp = StylePostProcessor(style)
    _ALIVE.append(pp)
    context.layerToLoadOnCompletionDetails(dest_id).setPostProcessor(pp)
