"""Tool: true (and vertical) thickness of a planar unit, feature by feature."""
from __future__ import annotations

import numpy as np
import shapely
from qgis.core import (
    QgsFeature,
    QgsFeatureSink,
    QgsField,
    QgsFields,
    QgsProcessing,
    QgsProcessingException,
    QgsProcessingParameterEnum,
    QgsProcessingParameterFeatureSink,
    QgsProcessingParameterFeatureSource,
    QgsProcessingParameterField,
    QgsProcessingParameterNumber,
    QgsProcessingParameterRasterLayer,
)
from qgis.PyQt.QtCore import QVariant

from strikeline.errors import InputError
from strikeline.picks import sample_bilinear
from strikeline.maps.thickness import (
    SLOPE_SENSES,
    WIDTH_KINDS,
    outcrop_width_gives_thickness,
    thickness_between_points,
    thickness_from_borehole,
    thickness_from_outcrop_width,
    vertical_thickness,
)

from ..base import StrikelineAlgorithm
from ..inputs import read_dem, to_dem_crs
from ..layers import read_vector, vector_name

REF_RAGAN = ("Ragan, D. M. (2009). Structural Geology: An Introduction to Geometrical Techniques, 4th "
             "ed. Cambridge University Press (thickness and depth; vector methods).")
REF_ROWLAND = ("Rowland, S. M., Duebendorfer, E. M. & Schiefelbein, I. M. (2007). Structural Analysis "
               "and Synthesis: A Laboratory Course in Structural Geology, 3rd ed. Blackwell, Oxford.")

#: Methods in enum order: (id, label).
METHODS = (("two_points", "Two points: a line drawn from the top contact to the base contact"),
           ("outcrop_width", "Outcrop width measured perpendicular to strike (a field)"),
           ("borehole", "Borehole intercepts (length, azimuth and plunge fields)"))
SENSE_LABELS = ("ground descends against the dip", "ground descends with the dip")
KIND_LABELS = ("along the ground (slope distance)", "horizontal, on the map")


class UnitThickness(StrikelineAlgorithm):
    NAME = "unitthickness"
    DISPLAY = "Unit thickness"
    GROUP = "thickness"
    SUMMARY = (
        "True thickness (perpendicular to bedding) and vertical thickness of a planar unit of known "
        "attitude, for every feature of a layer, by one of three methods: a line drawn from a point "
        "on the unit's top contact to a point on its base contact (elevations from the DEM, or the "
        "line's own Z); an outcrop width measured perpendicular to strike, with the ground slope; or "
        "the drilled length of the unit in a straight borehole with its azimuth and plunge. Give the "
        "attitude from Best-fit plane attitude (in a model, its outputs). The output is the input "
        "layer with the fields thickness_m and vertical_thickness_m.")
    METHOD = (
        "Two points and boreholes: the projection of the top-to-base vector (or the hole's intercept) "
        "on the unit normal. Outcrop width: t = w·sin(δ ± σ) for a slope width w on ground sloping σ "
        "against (+) or with (−) the dip, a horizontal width first divided by cos σ.")
    REFERENCES = (REF_RAGAN, REF_ROWLAND)
    METHOD_P = "METHOD"
    INPUT = "INPUT"
    DIP = "DIP_DEG"
    DIP_DIRECTION = "DIP_DIRECTION_DEG"
    DEM = "DEM"
    WIDTH_FIELD = "WIDTH_FIELD"
    SLOPE_FIELD = "SLOPE_FIELD"
    SLOPE_SENSE = "SLOPE_SENSE"
    WIDTH_KIND = "WIDTH_KIND"
    LENGTH_FIELD = "LENGTH_FIELD"
    AZIMUTH_FIELD = "AZIMUTH_FIELD"
    PLUNGE_FIELD = "PLUNGE_FIELD"
    OUTPUT = "OUTPUT"

    def initAlgorithm(self, config=None):  # noqa: N802
        self.addParameter(QgsProcessingParameterEnum(
            self.METHOD_P, self.tr("Method"), options=[self.tr(m[1]) for m in METHODS], defaultValue=0))
        self.addParameter(QgsProcessingParameterFeatureSource(
            self.INPUT, self.tr("Measurements (lines top→base, or features with width / borehole fields)"),
            [QgsProcessing.TypeVectorAnyGeometry]))
        self.addParameter(QgsProcessingParameterNumber(
            self.DIP, self.tr("Dip of the unit (°)"), QgsProcessingParameterNumber.Double,
            minValue=0.0, maxValue=90.0))
        self.addParameter(QgsProcessingParameterNumber(
            self.DIP_DIRECTION, self.tr("Dip direction of the unit (° clockwise from grid north)"),
            QgsProcessingParameterNumber.Double, minValue=0.0, maxValue=360.0))
        self.addParameter(QgsProcessingParameterRasterLayer(
            self.DEM, self.tr("DEM for the line ends (two points; empty: the lines' Z)"), optional=True))
        num = QgsProcessingParameterField.Numeric
        for key, label in ((self.WIDTH_FIELD, "Outcrop width field (m)"),
                           (self.SLOPE_FIELD, "Ground slope field (°, empty: level ground)"),
                           (self.LENGTH_FIELD, "Borehole intercept length field (m)"),
                           (self.AZIMUTH_FIELD, "Borehole azimuth field (° from grid north)"),
                           (self.PLUNGE_FIELD, "Borehole plunge field (° below horizontal)")):
            self.addParameter(QgsProcessingParameterField(key, self.tr(label), parentLayerParameterName=self.INPUT,
                                                          type=num, optional=True))
        self.addParameter(QgsProcessingParameterEnum(
            self.SLOPE_SENSE, self.tr("Ground slope sense"), options=[self.tr(x) for x in SENSE_LABELS],
            defaultValue=0))
        self.addParameter(QgsProcessingParameterEnum(
            self.WIDTH_KIND, self.tr("Width measured"), options=[self.tr(x) for x in KIND_LABELS], defaultValue=0))
        self.addParameter(QgsProcessingParameterFeatureSink(self.OUTPUT, self.tr("Thickness")))

    def _field(self, parameters, key, context, name, label, *, required=True):
        f = self.parameterAsString(parameters, key, context)
        if required and not f:
            raise InputError(f"{name.what}: choose the '{label}' for this method")
        return f or None

    def process(self, parameters, context, steps):
        method = METHODS[self.parameterAsEnum(parameters, self.METHOD_P, context)][0]
        source = self.parameterAsSource(parameters, self.INPUT, context)
        name = vector_name(self.parameterAsVectorLayer(parameters, self.INPUT, context), source, "measurements")
        dip = self.parameterAsDouble(parameters, self.DIP, context)
        dipdir = self.parameterAsDouble(parameters, self.DIP_DIRECTION, context)
        if method == "two_points":
            dem, grid, _ = read_dem(self, parameters, self.DEM, context, steps)
            lyr = read_vector(source, name, geometry="line", is_cancelled=steps.is_cancelled, keep_z=dem is None)
            if dem is not None:
                lyr = to_dem_crs(lyr, grid, label="measurement lines", log=steps.log)
            coords, owner = shapely.get_coordinates(lyr.geoms, include_z=dem is None, return_index=True)
            first = np.searchsorted(owner, np.arange(len(lyr.geoms)), side="left")
            last = np.searchsorted(owner, np.arange(len(lyr.geoms)), side="right") - 1
            if dem is not None:
                z = sample_bilinear(dem, grid, coords[:, 0], coords[:, 1])
                coords = np.column_stack([coords[:, :2], z])
            elif not shapely.has_z(lyr.geoms).all():
                raise InputError(f"{name.what} has lines without Z; give the DEM for the line ends")
            top, base = coords[first], coords[last]
            ok = np.isfinite(top).all(axis=1) & np.isfinite(base).all(axis=1)
            values = {"top": top, "base": base}
        else:
            if method == "outcrop_width":
                keys = [(self.WIDTH_FIELD, "Outcrop width field (m)", True),
                        (self.SLOPE_FIELD, "Ground slope field (°, empty: level ground)", False)]
            else:
                keys = [(self.LENGTH_FIELD, "Borehole intercept length field (m)", True),
                        (self.AZIMUTH_FIELD, "Borehole azimuth field (° from grid north)", True),
                        (self.PLUNGE_FIELD, "Borehole plunge field (° below horizontal)", True)]
            fields = {k: self._field(parameters, k, context, name, label, required=req) for k, label, req in keys}
            lyr = read_vector(source, name, geometry=None, is_cancelled=steps.is_cancelled)
            values = {k: (lyr.numeric_field(f, option=f"the '{dict((a, b) for a, b, _ in keys)[k]}'")
                          if f else np.zeros(len(lyr.geoms))) for k, f in fields.items()}
            ok = np.all([np.isfinite(v) for v in values.values()], axis=0)
        steps.check("thickness")
        t = np.full(len(lyr.geoms), np.nan)
        missing = ~ok
        if ok.any():
            sel = {k: v[ok] for k, v in values.items()}
            if method == "two_points":
                t[ok] = thickness_between_points(sel["top"], sel["base"], dipdir, dip)
            elif method == "outcrop_width":
                sense = SLOPE_SENSES[self.parameterAsEnum(parameters, self.SLOPE_SENSE, context)]
                kind = WIDTH_KINDS[self.parameterAsEnum(parameters, self.WIDTH_KIND, context)]
                slope = sel[self.SLOPE_FIELD]
                sense = sense if np.any(slope > 0) else None
                # ground parallel to the bedding (a level bed on level ground, a dip slope): no thickness
                cuts = outcrop_width_gives_thickness(dip, ground_slope_deg=slope, slope_sense=sense)
                if not cuts.all():
                    steps.warn(f"{int((~cuts).sum())} feature(s) of {name.what} lie where the ground runs parallel "
                               "to the bedding (a horizontal bed on flat ground, or a dip slope): an outcrop width "
                               "cannot give a thickness there, so theirs is left empty")
                    ok[np.flatnonzero(ok)[~cuts]] = False
                    sel = {k: v[cuts] for k, v in sel.items()}
                    slope = slope[cuts]
                if ok.any():
                    t[ok] = thickness_from_outcrop_width(sel[self.WIDTH_FIELD], dip, ground_slope_deg=slope,
                                                         slope_sense=sense, width_kind=kind)
            else:
                t[ok] = thickness_from_borehole(sel[self.LENGTH_FIELD], sel[self.AZIMUTH_FIELD],
                                                sel[self.PLUNGE_FIELD], dipdir, dip)
        v = np.full_like(t, np.nan)
        v[ok] = vertical_thickness(t[ok], dip)
        if missing.any():
            steps.warn(f"{int(missing.sum())} feature(s) of {name.what} lack a value (null field, or a line "
                       "end off the DEM); their thickness is left empty")
        steps.log(f"thickness of {int(ok.sum())} feature(s): median {np.nanmedian(t) if ok.any() else float('nan'):.2f} m")
        return {self.OUTPUT: self._write(parameters, context, source, lyr.fids, t, v), "N": int(ok.sum())}

    def _write(self, parameters, context, source, fids, t, v):
        fields = QgsFields(source.fields())
        fields.append(QgsField("thickness_m", QVariant.Double))
        fields.append(QgsField("vertical_thickness_m", QVariant.Double))
        sink, dest = self.parameterAsSink(parameters, self.OUTPUT, context, fields, source.wkbType(),
                                          source.sourceCrs())
        by_fid = {int(f): (a, b) for f, a, b in zip(fids, t, v)}
        for feat in source.getFeatures():
            a, b = by_fid.get(feat.id(), (np.nan, np.nan))
            out = QgsFeature(fields)
            out.setGeometry(feat.geometry())
            out.setAttributes(feat.attributes() + [None if not np.isfinite(a) else float(a),
                                                   None if not np.isfinite(b) else float(b)])
            if not sink.addFeature(out, QgsFeatureSink.FastInsert):
                raise QgsProcessingException(f"output 'Thickness': QGIS could not write a feature "
                                             f"({sink.lastError()}); choose another output format or folder")
        return dest
