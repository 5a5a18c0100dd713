"""Tool: the whole chain in one run, as ``strikeline run`` does it."""
from __future__ import annotations

import os

from qgis.core import (
    QgsProcessing,
    QgsProcessingOutputNumber,
    QgsProcessingOutputString,
    QgsProcessingParameterDefinition,
    QgsProcessingParameterDistance,
    QgsProcessingParameterEnum,
    QgsProcessingParameterFeatureSink,
    QgsProcessingParameterFeatureSource,
    QgsProcessingParameterField,
    QgsProcessingParameterFileDestination,
    QgsProcessingParameterNumber,
    QgsProcessingParameterRasterDestination,
)

from strikeline import pipeline as pl
from strikeline.io.files import write_json_atomic
from strikeline.pipeline import compute

from ..base import REF_FERNANDEZ, REF_GDAL_CONTOUR, REF_PRESS, REF_STR, REF_ZT, StrikelineAlgorithm
from ..inputs import (CONSTRAINT_LAYERS, CONTACTS, GROUP_BY, MAP_UNIT_LAYERS, add_contact_and_topography,
                      constraint_options, constraint_parameters, constraint_sigma_parameters, map_unit_options,
                      map_unit_parameters, optional_distance, optional_string, read_contact_inputs)
from ..layers import qgis_crs
from ..outputs import Table, write_raster, write_sink
from ..styles import attach_style
from .plane_attitude import NUMBERS, REF_EFRON, REF_WOODCOCK
from .surface_model import REF_GCV, REF_SPLINE

#: The options of ``strikeline run --model``, in enum order.
MODEL_LABELS = {"auto": "Choose by cross-validation (auto)", "plane": "Best-fit plane",
                "trend2": "Quadratic trend surface", "spline": "Thin-plate smoothing spline"}

#: The chain's layers beyond contacts and topography: ``assemble_inputs`` keyword ->
#: (parameter, label in messages, geometry).
CHAIN_LAYERS = {**CONSTRAINT_LAYERS, "top_contacts": ("TOP_CONTACTS", "top contacts", "line"), **MAP_UNIT_LAYERS}

#: The vector layers of ``pipeline.result_layers``, each written to the output named as the
#: layer in upper case: output -> (label, layer type, created by default, style).
LAYERS = {
    "PICKS": ("Contact picks", QgsProcessing.TypeVectorPoint, True, "picks"),
    "STRUCTURE_CONTOURS": ("Structure contours", QgsProcessing.TypeVectorLine, True, "structure_contours"),
    "PREDICTED_TRACE": ("Predicted outcrop trace (needs a DEM)", QgsProcessing.TypeVectorLine, True, "trace"),
    "CONTACT_MISFIT": ("Contact segments and their misfit (needs a DEM)", QgsProcessing.TypeVectorLine, True,
                       "contact_misfit"),
    "ATTITUDES": ("Local attitudes", QgsProcessing.TypeVectorPoint, True, "local_attitudes"),
    "TOP_PICKS": ("Top-contact picks (with top contacts)", QgsProcessing.TypeVectorPoint, False, "picks"),
    "UNIT_CONFLICTS": ("Where the surface still breaks the map units (with map units)", QgsProcessing.TypeVectorPoint,
                       False, ""),
}
#: The grids of ``pipeline.result_rasters``, each written to the output named as the file
#: without ``.tif`` in upper case: output -> (label, created by default, style).
RASTERS = {
    "SURFACE": ("Surface elevation", True, "surface"), "DIP": ("Dip (°)", True, "dip"),
    "DIP_DIRECTION": ("Dip direction (° from grid north)", True, "dip_direction"),
    "UNCERTAINTY": ("Standard error of the surface (m)", True, "uncertainty"),
    "DEPTH": ("Depth below ground (needs a DEM)", True, "depth"),
    "VERTICAL_THICKNESS": ("Vertical thickness (with top contacts)", False, "thickness"),
    "TRUE_THICKNESS": ("True thickness (with top contacts)", False, "thickness"),
}
#: Outputs that every run makes.
REQUIRED = {"PICKS", "STRUCTURE_CONTOURS", "SURFACE", "DIP", "DIP_DIRECTION"}


class WholeChain(StrikelineAlgorithm):
    NAME = "modelcontact"
    DISPLAY = "Model a contact (whole chain)"
    GROUP = "chain"
    FORECAST = True
    SUMMARY = (
        "Everything `strikeline run` makes, in one tool: elevation picks on the mapped contacts "
        "(from the DEM and/or topographic contour lines), the sheet-wide attitude with 95% confidence "
        "and quality (and one per group of contacts), local attitudes in moving windows, a surface "
        "model (plane, quadratic trend, thin-plate spline or the best by cross-validation, honouring "
        "boreholes and dip measurements), its uncertainty grid, structure contours and the predicted "
        "outcrop trace flagged where they are extrapolated beyond the data, dip and dip-direction "
        "grids, and, with a DEM, depth below ground, the trace misfit and the contact segments that "
        "misfit; with the unit's top contacts also isopachs (vertical and true thickness). The "
        "summary JSON is the command line's summary.json.")
    METHOD = ("Picks: bilinear DEM sampling and exact contour crossings; attitude: total least "
              "squares with bootstrap confidence and eigenvalue shape quality; surfaces: least squares "
              "and thin-plate splines with cross-validation; contours and trace: GDAL's contour "
              "generator; dip grids: central differences. See the single-step tools for details.")
    REFERENCES = (REF_PRESS, REF_STR, REF_FERNANDEZ, REF_WOODCOCK, REF_EFRON, REF_SPLINE, REF_GCV,
                  REF_GDAL_CONTOUR, REF_ZT)

    def initAlgorithm(self, config=None):  # noqa: N802
        add_contact_and_topography(self)
        T = QgsProcessingParameterNumber  # noqa: N806
        self.addParameter(QgsProcessingParameterEnum(
            "MODEL", self.tr("Surface model"), options=[self.tr(MODEL_LABELS[m]) for m in pl.MODELS],
            defaultValue=0))
        self.addParameter(QgsProcessingParameterDistance(
            "INTERVAL", self.tr("Structure-contour interval"), defaultValue=50.0,
            parentParameterName=CONTACTS, minValue=0.001))
        optional = [
            QgsProcessingParameterDistance("CELL", self.tr("Cell size without a DEM (0: about 1/500 of the contours' extent)"),
                                           defaultValue=0.0, parentParameterName=CONTACTS, minValue=0.0, optional=True),
            *constraint_parameters(self),
            QgsProcessingParameterFeatureSource("TOP_CONTACTS", self.tr("Top contact of the unit (lines): isopachs"),
                                                [QgsProcessing.TypeVectorLine], optional=True),
            QgsProcessingParameterField(GROUP_BY, self.tr("Also one plane per value of this contact field"),
                                        parentLayerParameterName=CONTACTS, optional=True),
            *map_unit_parameters(self),
        ]
        advanced = [
            QgsProcessingParameterDistance("WINDOW", self.tr("Local-attitude window radius (0: from the pick density)"),
                                           defaultValue=0.0, parentParameterName=CONTACTS, minValue=0.0, optional=True),
            QgsProcessingParameterDistance("MISFIT_FLAG", self.tr("Flag contact segments whose horizontal misfit "
                                                                  "exceeds (0: vertical misfit over 3 standard errors)"),
                                           defaultValue=0.0, parentParameterName=CONTACTS, minValue=0.0, optional=True),
            T("DEM_SIGMA", self.tr("Vertical standard error of DEM picks (m)"), T.Double,
              defaultValue=pl.DEFAULT_DEM_SIGMA_M, minValue=0.0, optional=True),
            T("CONTOUR_SIGMA", self.tr("Positional standard error of contour picks (m)"), T.Double,
              defaultValue=pl.DEFAULT_CONTOUR_SIGMA_M, minValue=0.0, optional=True),
            T("CONTACT_SIGMA", self.tr("Positional standard error of the mapped contact lines (m)"), T.Double,
              defaultValue=pl.DEFAULT_CONTACT_SIGMA_M, minValue=0.0, optional=True),
            *constraint_sigma_parameters(self),
            T("RESAMPLES", self.tr("Bootstrap resamples and Monte Carlo draws"), T.Integer, defaultValue=1000,
              minValue=100, optional=True),
            T("SEED", self.tr("Random seed"), T.Integer, defaultValue=0, minValue=0, optional=True),
        ]
        for p in optional:
            self.addParameter(p)
        for p in advanced:
            p.setFlags(p.flags() | QgsProcessingParameterDefinition.FlagAdvanced)
            self.addParameter(p)
        for key, (label, kind, by_default, _) in LAYERS.items():
            self.addParameter(QgsProcessingParameterFeatureSink(
                key, self.tr(label), kind, optional=key not in REQUIRED, createByDefault=by_default))
        for key, (label, by_default, _) in RASTERS.items():
            self.addParameter(QgsProcessingParameterRasterDestination(
                key, self.tr(label), optional=key not in REQUIRED, createByDefault=by_default))
        self.addParameter(QgsProcessingParameterFileDestination(
            "SUMMARY", self.tr("Summary (JSON)"), fileFilter="JSON (*.json)", optional=True,
            createByDefault=False))
        for key, label in NUMBERS:
            self.addOutput(QgsProcessingOutputNumber(key, self.tr(label)))
        for key, label in (("DIP_CI95_DEG", "Dip, 95% half-width (°)"),
                           ("MISFIT_MEDIAN_M", "Median trace misfit (m)"),
                           ("MISFIT_P90_M", "90th percentile trace misfit (m)")):
            self.addOutput(QgsProcessingOutputNumber(key, self.tr(label)))
        self.addOutput(QgsProcessingOutputString("QUALITY", self.tr("Quality of the sheet-wide plane")))
        self.addOutput(QgsProcessingOutputString("MODEL_USED", self.tr("Surface model used")))
        self.addOutput(QgsProcessingOutputNumber("UNIT_CHECK_VIOLATED", self.tr(
            "Map-unit check points the surface still breaks (with map units)")))

    def options(self, parameters, context) -> dict:
        """The QGIS parameters as fields of the command line's :class:`RunOptions` (the inputs'
        parameters are read by :func:`read_contact_inputs`; their ranges are enforced by the
        parameter definitions, QGIS checks them)."""
        d = lambda key: optional_distance(self, parameters, key, context)  # noqa: E731
        return dict(
            model=pl.MODELS[self.parameterAsEnum(parameters, "MODEL", context)],
            interval_m=self.parameterAsDouble(parameters, "INTERVAL", context), cell_m=d("CELL"),
            misfit_flag_m=d("MISFIT_FLAG"), window_m=d("WINDOW"),
            dem_sigma_m=self.parameterAsDouble(parameters, "DEM_SIGMA", context),
            contour_sigma_m=self.parameterAsDouble(parameters, "CONTOUR_SIGMA", context),
            contact_sigma_m=self.parameterAsDouble(parameters, "CONTACT_SIGMA", context),
            group_by=optional_string(self, parameters, GROUP_BY, context),
            resamples=self.parameterAsInt(parameters, "RESAMPLES", context),
            seed=self.parameterAsInt(parameters, "SEED", context),
            **constraint_options(self, parameters, context), **map_unit_options(self, parameters, context))

    def process(self, parameters, context, steps):
        inputs, opts = read_contact_inputs(self, parameters, context, steps, more=CHAIN_LAYERS,
                                           **self.options(parameters, context))
        steps.feedback.setProgress(5)
        r = compute(inputs, opts, log=steps.log, progress=steps.part(0.05, 0.8), is_cancelled=steps.is_cancelled)
        s = r.summary
        plane = s["plane"]
        toward = (f"toward {plane['dip_direction']:.1f}° (strike {plane['strike_rhr']:.1f}° RHR)"
                  if plane.get("dip_direction") is not None else
                  "horizontal within its 95% confidence (no dip direction or strike)")
        steps.log(f"best-fit plane: dip {plane['dip']:.2f}° ± {plane['dip_ci95'] or 0:.2f}° {toward}, quality "
                  f"{plane['quality']}; surface model {s['model']['chosen']}")
        steps.feedback.setProgress(85)
        # Last chance to stop: from here on the outputs are written, all or nothing.
        steps.check("whole chain")
        out = self._write(parameters, context, inputs, r)
        tm = s["trace_misfit_m"]
        out.update({"DIP_DEG": plane.get("dip"), "DIP_DIRECTION_DEG": plane.get("dip_direction"),
                    "STRIKE_RHR_DEG": plane.get("strike_rhr"), "RMS_M": plane.get("rms_m"),
                    "N_PICKS": plane.get("n_picks"), "DIP_CI95_DEG": plane.get("dip_ci95"),
                    "QUALITY": plane.get("quality"), "MODEL_USED": s["model"]["chosen"],
                    "MISFIT_MEDIAN_M": tm.get("median"), "MISFIT_P90_M": tm.get("p90")})
        if "map_units" in s:
            out["UNIT_CHECK_VIOLATED"] = s["map_units"]["check"]["n_violated"]
        if inputs.dem is None:
            steps.warn("no DEM: depth below ground, the predicted trace and the contact misfit are not made")
        return out

    def _write(self, parameters, context, inputs, r) -> dict:
        """The layers and grids of ``strikeline run`` (``pipeline.result_layers`` and
        ``result_rasters``, so the same fields), each to the output of its name."""
        crs = qgis_crs(inputs.crs_wkt)
        out = {}
        for layer in pl.result_layers(r):
            key = layer.name.upper()
            if key == "PREDICTED_TRACE" and inputs.dem is None:
                continue  # no trace without ground to cut the surface with
            out[key] = write_sink(self, parameters, key, context, Table.of_layer(layer), crs)
            attach_style(context, out[key], LAYERS[key][3])
        for file_name, array in pl.result_rasters(r):
            key = os.path.splitext(file_name)[0].upper()
            out[key] = write_raster(self, parameters, key, context, array, r.grid)
            attach_style(context, out[key], RASTERS[key][2])
        summary_path = self.parameterAsFileOutput(parameters, "SUMMARY", context)
        if summary_path:
            write_json_atomic(summary_path, r.summary, overwrite=True)  # the bytes of summary.json
            out["SUMMARY"] = summary_path
        return {k: v for k, v in out.items() if v is not None}
