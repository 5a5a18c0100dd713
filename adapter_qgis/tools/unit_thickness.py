"""Tool: true (and vertical) thickness of a planar unit, feature by feature."""
from __future__ import annotations

import math

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
    QgsProcessingParameterRasterLayer,
)
from qgis.PyQt.QtCore import QVariant

from strikeline import vocabulary as V
from strikeline.errors import InputError
from strikeline.maps.thickness import SLOPE_SENSES, WIDTH_KINDS
from strikeline.pipeline.thickness import thickness_of_boreholes, thickness_of_lines, thickness_of_widths

from ..base import StrikelineAlgorithm
from ..params import add_parameters, option, parameter
from ..inputs import read_dem, to_dem_crs
from ..layers import read_vector, vector_name
from ..outputs import add_outputs

REF_RAGAN = ("Ragan, D. M. (2009). Structural Geology: An Introduction to Geometrical Techniques, 4th "
             "ed. Cambridge University Press (thickness and depth; vector methods).")
REF_ROWLAND = ("Rowland, S. M., Duebendorfer, E. M. & Schiefelbein, I. M. (2007). Structural Analysis "
               "and Synthesis: A Laboratory Course in Structural Geology, 3rd ed. Blackwell, Oxford.")

#: Methods in enum order: (id, label).
METHODS = (("two_points", "Two points: a line drawn from the top contact to the base contact"),
           ("outcrop_width", "Outcrop width measured perpendicular to strike (a field)"),
           ("borehole", "Borehole intercepts (length, azimuth and plunge fields)"))
SENSE_LABELS = ("ground descends against the dip", "ground descends with the dip")


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
        "layer with the fields true_thickness_m and vertical_thickness_m.")
    METHOD = (
        "Two points and boreholes: the projection of the top-to-base vector (or the hole's intercept) "
        "on the unit normal. Outcrop width: t = w·sin(δ ± σ) for a slope width w on ground sloping σ "
        "against (+) or with (−) the dip, a horizontal width first divided by cos σ.")
    REFERENCES = (REF_RAGAN, REF_ROWLAND)
    METHOD_P = "METHOD"
    INPUT = "INPUT"
    DIP = option("dip_deg").qgis
    DIP_DIRECTION = option("dip_direction_deg").qgis
    DEM = "DEM"
    WIDTH_FIELD = "WIDTH_FIELD"
    SLOPE_FIELD = "SLOPE_FIELD"
    SLOPE_SENSE = "SLOPE_SENSE"
    WIDTH_KIND = option("width_kind").qgis
    LENGTH_FIELD = "LENGTH_FIELD"
    AZIMUTH_FIELD = "AZIMUTH_FIELD"
    PLUNGE_FIELD = "PLUNGE_FIELD"
    OUTPUT = V.UNIT_THICKNESS.name

    def initAlgorithm(self, config=None):  # noqa: N802
        self.addParameter(QgsProcessingParameterEnum(
            self.METHOD_P, self.tr("Method"), options=[self.tr(m[1]) for m in METHODS], defaultValue=0))
        self.addParameter(QgsProcessingParameterFeatureSource(
            self.INPUT, self.tr("Measurements (lines top→base, or features with width / borehole fields)"),
            [QgsProcessing.TypeVectorAnyGeometry]))
        add_parameters(self, "dip_deg", "dip_direction_deg")
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
        self.addParameter(parameter(self, "width_kind"))
        self.addParameter(QgsProcessingParameterFeatureSink(self.OUTPUT, self.tr("Thickness")))
        add_outputs(self, {"n_measurements": "Measurements given a thickness"})

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
            steps.check("thickness")
            res = thickness_of_lines(lyr.geoms, dip_deg=dip, dip_direction_deg=dipdir, dem=dem, dem_grid=grid,
                                     what=name.what)
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
            values = {k: lyr.numeric_field(f, option=f"the '{label}'") if f else None
                      for (k, label, _), f in zip(keys, fields.values())}
            steps.check("thickness")
            if method == "outcrop_width":
                res = thickness_of_widths(
                    values[self.WIDTH_FIELD], dip_deg=dip, ground_slope_deg=values[self.SLOPE_FIELD],
                    slope_sense=SLOPE_SENSES[self.parameterAsEnum(parameters, self.SLOPE_SENSE, context)],
                    width_kind=WIDTH_KINDS[self.parameterAsEnum(parameters, self.WIDTH_KIND, context)])
            else:
                res = thickness_of_boreholes(values[self.LENGTH_FIELD], values[self.AZIMUTH_FIELD],
                                             values[self.PLUNGE_FIELD], dip_deg=dip, dip_direction_deg=dipdir)
        if res.n_parallel:
            # ground parallel to the bedding (a level bed on level ground, a dip slope): no thickness
            steps.warn(f"{res.n_parallel} feature(s) of {name.what} lie where the ground runs parallel "
                       "to the bedding (a horizontal bed on flat ground, or a dip slope): an outcrop width "
                       "cannot give a thickness there, so theirs is left empty")
        if res.n_missing:
            steps.warn(f"{res.n_missing} feature(s) of {name.what} lack a value (null field, or a line "
                       "end off the DEM); their thickness is left empty")
        steps.log(f"thickness of {res.n_measured} feature(s): median {res.median_m:.2f} m")
        return {self.OUTPUT: self._write(parameters, context, source, lyr.fids, res.true_m, res.vertical_m),
                "n_measurements": res.n_measured}

    def _write(self, parameters, context, source, fids, t, v):
        fields = QgsFields(source.fields())
        for name in V.UNIT_THICKNESS.field_names:  # true_thickness_m, vertical_thickness_m
            fields.append(QgsField(name, QVariant.Double))
        sink, dest = self.parameterAsSink(parameters, self.OUTPUT, context, fields, source.wkbType(),
                                          source.sourceCrs())
        by_fid = {int(f): (a, b) for f, a, b in zip(fids, t, v)}
        for feat in source.getFeatures():
            a, b = by_fid.get(feat.id(), (None, None))
            out = QgsFeature(fields)
            out.setGeometry(feat.geometry())
            out.setAttributes(feat.attributes() + [float(x) if x is not None and math.isfinite(x) else None
                                                   for x in (a, b)])
            if not sink.addFeature(out, QgsFeatureSink.FastInsert):
                raise QgsProcessingException(f"output 'Thickness': QGIS could not write a feature "
                                             f"({sink.lastError()}); choose another output format or folder")
        return dest
