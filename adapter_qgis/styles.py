"""How strikeline's outputs look when they are loaded into QGIS.

Every style is a plain function ``style_x(layer)`` (usable on any layer holding the output)
and is attached to the tool's outputs as a Processing post-processor, so a layer loaded on
completion arrives styled:

- picks: small marks by source (DEM samples grey dots, contour crossings orange triangles);
- structure contours: labelled by elevation; solid dark blue where the surface lies below
  ground, thin and pale where it is eroded away above ground (when the tool was given the DEM),
  dashed where it is a forecast beyond the reach of the data (when given Surface model's mask);
- attitudes: a strike line with a short tick toward the dip direction, turned by the feature's
  dip direction, labelled with the dip; an open circle where the plane is horizontal;
- contact misfit: thick magenta where a segment is flagged, thin neutral grey where it matches;
- dip: a continuous ramp of our own on fixed degrees (pale sand at 0°, teal, slate blue,
  deep plum at 60° and steeper), so maps of different sheets share one legend;
- dip direction: a cyclic ramp around the compass;
- depth below ground: diverging about zero (blues where the surface is below ground, browns
  where it is eroded away above);
- predicted outcrop trace: a wide vermilion dash, unlike a mapped contact's thin black line.

Dashes are patterns in millimetres with flat caps, so a legend icon shows the gaps as the map
does. The layers of ``results.gpkg`` carry these same styles embedded (``layer_styles``): their
QML is made from :data:`LAYER_STYLES` by ``export_styles.py`` and a QGIS test checks the two agree.
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
    QgsProperty,
    QgsRasterBandStats,
    QgsRasterShader,
    QgsRendererCategory,
    QgsRuleBasedRenderer,
    QgsSimpleMarkerSymbolLayer,
    QgsSingleBandPseudoColorRenderer,
    QgsSingleSymbolRenderer,
    QgsSymbolLayer,
    QgsTextBufferSettings,
    QgsTextFormat,
    QgsVectorLayerSimpleLabeling,
)
from qgis.PyQt.QtGui import QColor

from strikeline import vocabulary as V
from strikeline.attitude.quality import QUALITIES
from strikeline.picks.pickset import SOURCES as PICK_SOURCES

#: Colours of the vector scheme (our own). Each pair that must be told apart also differs in
#: width, dash or marker shape, so the map reads in greyscale.
CONTOUR_BLUE = "#1f4e79"   # structure contour below ground: dark, 0.45 mm
CONTOUR_PALE = "#9db3c8"   # structure contour above ground (eroded): pale, 0.25 mm
TRACE_VERMILION = "#e0451f"  # predicted outcrop trace: dashed
MISFIT_MAGENTA = "#c2185b"  # flagged contact segment: 1.2 mm
MATCH_GREY = "#8c8c8c"     # unflagged contact segment: 0.35 mm

#: The optional fields the vector styles split on.
EXTRAPOLATED = V.STRUCTURE_CONTOURS.field("extrapolated").name
BELOW_GROUND = V.STRUCTURE_CONTOURS.field("below_ground").name

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
    s.setFormat(_haloed_text(halo_mm=0.8, colour=CONTOUR_BLUE))
    return QgsVectorLayerSimpleLabeling(s)


def _haloed_text(*, halo_mm: float, colour: str | None = None, size_pt: float = 8) -> QgsTextFormat:
    """Label text with a white halo of ``halo_mm`` millimetres, so it reads over any symbol."""
    fmt = QgsTextFormat()
    fmt.setSize(size_pt)
    if colour is not None:
        fmt.setColor(QColor(colour))
    buf = QgsTextBufferSettings()
    buf.setEnabled(True)
    buf.setSize(halo_mm)
    buf.setColor(QColor("white"))
    fmt.setBuffer(buf)
    return fmt


def _line(colour: str, width_mm: float, dash_mm: tuple[float, float] | None = None) -> QgsLineSymbol:
    """A simple line; dashed with a pattern in millimetres and flat caps, so the gaps stay open in
    a 16-pixel legend icon (Qt's own dash scales with the width and round caps close the gaps)."""
    props = {"line_color": colour, "line_width": f"{width_mm:g}", "capstyle": "flat" if dash_mm else "round"}
    if dash_mm:
        props.update({"line_style": "dash", "use_custom_dash": "1", "customdash_unit": "MM",
                      "customdash": ";".join(f"{v:g}" for v in dash_mm)})
    return QgsLineSymbol.createSimple(props)


def contour_symbol(*, eroded: bool = False, forecast: bool = False) -> QgsLineSymbol:
    """Structure-contour line: solid dark blue where the surface is below ground, thin and pale
    where it is eroded away above ground; dashed where it is a forecast beyond the reach of the
    data. Told apart in greyscale by width and tone, not by hue."""
    if eroded:
        return _line(CONTOUR_PALE, 0.25, (1.2, 0.8) if forecast else None)
    return _line(CONTOUR_BLUE, 0.45, (1.8, 0.9) if forecast else None)


def style_structure_contours(layer) -> None:
    """Labelled by elevation; parts by the ``below_ground`` / ``extrapolated`` fields when present."""
    flags = [f for f in (BELOW_GROUND, EXTRAPOLATED) if layer.fields().indexOf(f) >= 0]
    if flags:
        root = QgsRuleBasedRenderer.Rule(None)
        for combo in itertools.product((True, False), repeat=len(flags)):
            state = dict(zip(flags, combo))
            expr = " AND ".join(f'"{f}"' if v else f'NOT "{f}"' for f, v in state.items())
            label = ", ".join({(BELOW_GROUND, True): "below ground", (BELOW_GROUND, False): "above ground (eroded)",
                               (EXTRAPOLATED, True): "forecast (beyond the reach of the data)",
                               (EXTRAPOLATED, False): "within reach of the data"}[(f, v)] for f, v in state.items())
            sym = contour_symbol(eroded=not state.get(BELOW_GROUND, True), forecast=state.get(EXTRAPOLATED, False))
            root.appendChild(QgsRuleBasedRenderer.Rule(sym, 0, 0, expr, label))
        layer.setRenderer(QgsRuleBasedRenderer(root))
    else:
        layer.setRenderer(QgsSingleSymbolRenderer(contour_symbol()))
    layer.setLabeling(_contour_labels(V.STRUCTURE_CONTOURS.field("elevation_m").name))
    layer.setLabelsEnabled(True)
    layer.triggerRepaint()


def trace_symbol(*, beyond: bool = False) -> QgsLineSymbol:
    """Predicted outcrop: a vermilion dash (a forecast throughout, never a mapped line's thin
    solid black), finer and dotted beyond the reach of the data."""
    return _line(TRACE_VERMILION, 0.5, (0.5, 0.9)) if beyond else _line(TRACE_VERMILION, 0.8, (2.2, 1.1))


def style_trace(layer) -> None:
    """Vermilion dash; dotted where the trace is forecast beyond the data (``extrapolated``)."""
    if layer.fields().indexOf(EXTRAPOLATED) >= 0:
        root = QgsRuleBasedRenderer.Rule(None)
        root.appendChild(QgsRuleBasedRenderer.Rule(trace_symbol(), 0, 0, f'NOT "{EXTRAPOLATED}"',
                                                   "predicted outcrop"))
        root.appendChild(QgsRuleBasedRenderer.Rule(trace_symbol(beyond=True), 0, 0, f'"{EXTRAPOLATED}"',
                                                   "predicted outcrop, beyond the reach of the data"))
        layer.setRenderer(QgsRuleBasedRenderer(root))
    else:
        layer.setRenderer(QgsSingleSymbolRenderer(trace_symbol()))
    layer.triggerRepaint()


def style_contact_misfit(layer) -> None:
    """Contact segments: thin neutral grey where they match the predicted trace, thick magenta
    where flagged (in greyscale: a thick dark line against a thin mid-grey one)."""
    flagged = V.CONTACT_MISFIT.field("flagged").name
    root = QgsRuleBasedRenderer.Rule(None)
    root.appendChild(QgsRuleBasedRenderer.Rule(_line(MISFIT_MAGENTA, 1.2), 0, 0, f'"{flagged}"',
                                               "misfit above the flag distance"))
    root.appendChild(QgsRuleBasedRenderer.Rule(_line(MATCH_GREY, 0.35), 0, 0, f'NOT "{flagged}"',
                                               "matches the predicted trace"))
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
    """Picks by source: DEM samples small grey dots, contour crossings larger orange triangles
    (shape and size tell them apart in greyscale)."""
    dem = QgsMarkerSymbol.createSimple({"name": "circle", "color": "#5b5b5b", "size": "1.0",
                                        "outline_style": "no"})
    con = QgsMarkerSymbol.createSimple({"name": "triangle", "color": "#f28c28", "size": "1.8",
                                        "outline_color": "#7a3f00", "outline_width": "0.1"})
    source = V.PICKS.field("source").name
    if layer.fields().indexOf(source) >= 0:
        looks = {"dem": (dem, "DEM sample"), "contours": (con, "contour crossing")}
        cats = [QgsRendererCategory(s, looks[s][0], looks[s][1]) for s in PICK_SOURCES]
        layer.setRenderer(QgsCategorizedSymbolRenderer(source, cats))
    else:
        layer.setRenderer(QgsSingleSymbolRenderer(dem))
    layer.triggerRepaint()


def attitude_symbol(colour: str = "#1b1b1b") -> QgsMarkerSymbol:
    """An attitude mark of our own: a 4 mm strike line with a 1.4 mm tick from its middle toward
    the dip direction, both rotated by the feature's ``dip_direction_deg`` (QGIS turns markers
    clockwise from map north, as dip directions run). For features with a dip direction; a
    horizontal plane gets :func:`horizontal_symbol`."""
    dd = V.ATTITUDES.field("dip_direction_deg").name
    line = {"name": "line", "color": colour, "outline_color": colour, "outline_width": "0.5"}
    sym = QgsMarkerSymbol.createSimple({**line, "size": "4"})
    # The tick runs from the centre 1.4 mm toward the dip direction: a 1.4 mm line centred 0.7 mm
    # "up" the page (negative y), an offset QGIS turns with the marker's angle.
    sym.appendSymbolLayer(QgsSimpleMarkerSymbolLayer.create({**line, "size": "1.4", "offset": "0,-0.7"}))
    for part, angle in ((sym.symbolLayer(0), QgsProperty.fromExpression(f'"{dd}" + 90')),
                        (sym.symbolLayer(1), QgsProperty.fromField(dd))):
        part.setDataDefinedProperty(QgsSymbolLayer.PropertyAngle, angle)
    return sym


def horizontal_symbol(colour: str = "#1b1b1b") -> QgsMarkerSymbol:
    """A plane horizontal within its confidence (no dip direction): an open circle."""
    return QgsMarkerSymbol.createSimple({"name": "circle", "color": "0,0,0,0", "outline_color": colour,
                                         "outline_width": "0.4", "size": "2.2"})


def _dip_label(expression: str) -> QgsVectorLayerSimpleLabeling:
    s = QgsPalLayerSettings()
    s.fieldName = expression
    s.isExpression = True
    s.placement = QgsPalLayerSettings.OverPoint
    s.quadOffset = QgsPalLayerSettings.QuadrantBelowRight
    s.xOffset, s.yOffset = 1.2, 1.2
    s.setFormat(_haloed_text(halo_mm=0.6))
    return QgsVectorLayerSimpleLabeling(s)


def style_attitude(layer) -> None:
    """One plane (the plane-attitude tool): the attitude mark, labelled with dip and dip direction."""
    dd = V.PLANE_ATTITUDES.field("dip_direction_deg").name
    root = QgsRuleBasedRenderer.Rule(None)
    root.appendChild(QgsRuleBasedRenderer.Rule(attitude_symbol(), 0, 0, f'"{dd}" IS NOT NULL', "dipping plane"))
    root.appendChild(QgsRuleBasedRenderer.Rule(horizontal_symbol(), 0, 0, f'"{dd}" IS NULL',
                                               "horizontal within its confidence"))
    layer.setRenderer(QgsRuleBasedRenderer(root))
    layer.setLabeling(_dip_label("if(\"dip_deg\" IS NULL, \"quality\", format_number(\"dip_deg\", 1) || '° → ' || "
                                 "format_number(\"dip_direction_deg\", 0) || '°')"))
    layer.setLabelsEnabled(True)
    layer.triggerRepaint()


def style_local_attitudes(layer) -> None:
    """Local attitudes: the attitude mark (strike line and dip tick), black where the window's
    quality is good, grey where weak, an open circle where horizontal, nothing where
    undetermined; labelled with the dip. The ``attitudes`` layer of the tool and of
    ``strikeline run`` (one field list)."""
    dip, dd, quality = (V.ATTITUDES.field(f).name for f in ("dip_deg", "dip_direction_deg", "quality"))
    good, weak, undetermined = QUALITIES
    root = QgsRuleBasedRenderer.Rule(None)
    for q, colour in ((good, "#1b1b1b"), (weak, "#8a8a8a")):
        root.appendChild(QgsRuleBasedRenderer.Rule(attitude_symbol(colour), 0, 0,
                                                   f'"{quality}" = \'{q}\' AND "{dd}" IS NOT NULL', q))
        root.appendChild(QgsRuleBasedRenderer.Rule(horizontal_symbol(colour), 0, 0,
                                                   f'"{quality}" = \'{q}\' AND "{dd}" IS NULL',
                                                   f"{q}, horizontal within its 95% confidence"))
    layer.setRenderer(QgsRuleBasedRenderer(root))
    layer.setLabeling(_dip_label(f'if("{quality}" = \'{undetermined}\', \'\', round("{dip}"))'))
    layer.setLabelsEnabled(True)
    layer.triggerRepaint()


def style_unit_conflicts(layer) -> None:
    """Where the surface still breaks the map units: yellow diamonds outlined in black."""
    layer.setRenderer(QgsSingleSymbolRenderer(QgsMarkerSymbol.createSimple(
        {"name": "diamond", "color": "#f2c200", "size": "2.6", "outline_color": "#1b1b1b",
         "outline_width": "0.25"})))
    layer.triggerRepaint()


#: The style of each layer that ``strikeline run`` writes (the whole-chain tool's outputs and the
#: layers of results.gpkg, whose embedded QML is made from these by export_styles.py).
LAYER_STYLES = {
    V.PICKS.name: "picks", V.TOP_PICKS.name: "picks", V.STRUCTURE_CONTOURS.name: "structure_contours",
    V.PREDICTED_TRACE.name: "trace", V.CONTACT_MISFIT.name: "contact_misfit",
    V.ATTITUDES.name: "local_attitudes", V.UNIT_CONFLICTS.name: "unit_conflicts",
}

STYLES = {
    "local_attitudes": style_local_attitudes,
    "contact_misfit": style_contact_misfit,
    "uncertainty": style_uncertainty,
    "thickness": style_thickness,
    "picks": style_picks,
    "attitude": style_attitude,
    "structure_contours": style_structure_contours,
    "unit_conflicts": style_unit_conflicts,
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
