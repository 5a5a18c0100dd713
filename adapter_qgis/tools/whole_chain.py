"""Tool: the whole chain in one run, as ``strikeline run`` does it."""
from __future__ import annotations

import json
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
    QgsWkbTypes,
)

from strikeline import pipeline as pl
from strikeline.pipeline import RunOptions, compute

from ..base import REF_FERNANDEZ, REF_GDAL_CONTOUR, REF_PRESS, REF_STR, REF_ZT, StrikelineAlgorithm
from ..inputs import CONTACTS, add_contact_and_topography, read_contact_inputs, source_and_name
from ..layers import qgis_crs, read_vector
from ..outputs import Table, write_raster, write_sink
from ..styles import attach_style
from .common import contours_table, picks_table, trace_table
from .plane_attitude import NUMBERS, REF_EFRON, REF_WOODCOCK
from .surface_model import REF_GCV, REF_SPLINE

#: The options of ``strikeline run --model``, in enum order.
MODEL_LABELS = {"auto": "Choose by cross-validation (auto)", "plane": "Best-fit plane",
                "trend2": "Quadratic trend surface", "spline": "Thin-plate smoothing spline"}


class _FilePaths(dict):
    """``Inputs.paths`` for the library's summary: names every input, hashes only files.

    ``compute`` names inputs through ``paths[...]`` and ``build_summary`` hashes every value;
    inputs without a file (memory layers, database tables) are left out of ``values()``. Goes
    when the library hashes only files (request 2 in /work/requests-qgis.md).
    """

    def values(self):
        return [v for v in super().values() if os.path.isfile(v)]


def _p(alg, parameters, key, context, kind):
    """A parameter's value, None when unset (0 for distances and numbers means "default")."""
    if kind == "str":
        return alg.parameterAsString(parameters, key, context) or None
    v = alg.parameterAsDouble(parameters, key, context)
    return None if v == 0 else v


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
            QgsProcessingParameterFeatureSource("BOREHOLES", self.tr("Boreholes that reach the surface (points)"),
                                                [QgsProcessing.TypeVectorPoint], optional=True),
            QgsProcessingParameterField("BOREHOLE_Z_FIELD", self.tr("Borehole field: the surface's elevation (empty: Z)"),
                                        parentLayerParameterName="BOREHOLES", type=QgsProcessingParameterField.Numeric,
                                        optional=True),
            QgsProcessingParameterField("BOREHOLE_COLLAR_FIELD", self.tr("Borehole field: collar elevation"),
                                        parentLayerParameterName="BOREHOLES", type=QgsProcessingParameterField.Numeric,
                                        optional=True),
            QgsProcessingParameterField("BOREHOLE_DEPTH_FIELD", self.tr("Borehole field: depth from collar to the surface"),
                                        parentLayerParameterName="BOREHOLES", type=QgsProcessingParameterField.Numeric,
                                        optional=True),
            QgsProcessingParameterFeatureSource("ORIENTATIONS", self.tr("Dip measurements on the surface (points)"),
                                                [QgsProcessing.TypeVectorPoint], optional=True),
            QgsProcessingParameterField("DIP_FIELD", self.tr("Dip field"), defaultValue="dip",
                                        parentLayerParameterName="ORIENTATIONS",
                                        type=QgsProcessingParameterField.Numeric, optional=True),
            QgsProcessingParameterField("DIP_DIRECTION_FIELD", self.tr("Dip-direction field"), defaultValue="dip_dir",
                                        parentLayerParameterName="ORIENTATIONS",
                                        type=QgsProcessingParameterField.Numeric, optional=True),
            QgsProcessingParameterField("STRIKE_FIELD", self.tr("Strike field (right-hand rule) instead of dip direction"),
                                        parentLayerParameterName="ORIENTATIONS",
                                        type=QgsProcessingParameterField.Numeric, optional=True),
            QgsProcessingParameterFeatureSource("TOP_CONTACTS", self.tr("Top contact of the unit (lines): isopachs"),
                                                [QgsProcessing.TypeVectorLine], optional=True),
            QgsProcessingParameterField("GROUP_BY", self.tr("Also one plane per value of this contact field"),
                                        parentLayerParameterName=CONTACTS, optional=True),
        ]
        advanced = [
            QgsProcessingParameterDistance("WINDOW", self.tr("Local-attitude window radius (0: from the pick density)"),
                                           defaultValue=0.0, parentParameterName=CONTACTS, minValue=0.0, optional=True),
            QgsProcessingParameterDistance("MISFIT_FLAG", self.tr("Flag contact segments farther than (0: 3 DEM cells)"),
                                           defaultValue=0.0, parentParameterName=CONTACTS, minValue=0.0, optional=True),
            T("DEM_SIGMA", self.tr("Vertical standard error of DEM picks (m)"), T.Double,
              defaultValue=pl.DEFAULT_DEM_SIGMA_M, minValue=0.0, optional=True),
            T("CONTOUR_SIGMA", self.tr("Positional standard error of contour picks (m)"), T.Double,
              defaultValue=pl.DEFAULT_CONTOUR_SIGMA_M, minValue=0.0, optional=True),
            T("BOREHOLE_SIGMA", self.tr("Standard error of borehole elevations (m)"), T.Double,
              defaultValue=pl.DEFAULT_BOREHOLE_SIGMA_M, minValue=0.0, optional=True),
            T("ORIENTATION_SIGMA", self.tr("Standard error of measured dips (°)"), T.Double,
              defaultValue=pl.DEFAULT_ORIENTATION_SIGMA_DEG, minValue=0.0, optional=True),
            T("RESAMPLES", self.tr("Bootstrap resamples and Monte Carlo draws"), T.Integer, defaultValue=1000,
              minValue=100, optional=True),
            T("SEED", self.tr("Random seed"), T.Integer, defaultValue=0, minValue=0, optional=True),
        ]
        for p in optional:
            self.addParameter(p)
        for p in advanced:
            p.setFlags(p.flags() | QgsProcessingParameterDefinition.FlagAdvanced)
            self.addParameter(p)
        sinks = (("PICKS", "Contact picks", QgsProcessing.TypeVectorPoint, True),
                 ("STRUCTURE_CONTOURS", "Structure contours", QgsProcessing.TypeVectorLine, True),
                 ("PREDICTED_TRACE", "Predicted outcrop trace (needs a DEM)", QgsProcessing.TypeVectorLine, True),
                 ("CONTACT_MISFIT", "Contact segments and their misfit (needs a DEM)", QgsProcessing.TypeVectorLine, True),
                 ("ATTITUDES", "Local attitudes", QgsProcessing.TypeVectorPoint, True),
                 ("TOP_PICKS", "Top-contact picks (with top contacts)", QgsProcessing.TypeVectorPoint, False))
        for key, label, kind, by_default in sinks:
            self.addParameter(QgsProcessingParameterFeatureSink(key, self.tr(label), kind, optional=key != "PICKS"
                                                                and key != "STRUCTURE_CONTOURS",
                                                                createByDefault=by_default))
        rasters = (("SURFACE", "Surface elevation", True), ("DIP", "Dip (°)", True),
                   ("DIP_DIRECTION", "Dip direction (° from grid north)", True),
                   ("UNCERTAINTY", "Standard error of the surface (m)", True),
                   ("DEPTH", "Depth below ground (needs a DEM)", True),
                   ("VERTICAL_THICKNESS", "Vertical thickness (with top contacts)", False),
                   ("TRUE_THICKNESS", "True thickness (with top contacts)", False))
        for key, label, by_default in rasters:
            self.addParameter(QgsProcessingParameterRasterDestination(
                key, self.tr(label), optional=key not in ("SURFACE", "DIP", "DIP_DIRECTION"),
                createByDefault=by_default))
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

    def options(self, parameters, context, contacts_path) -> RunOptions:
        """The QGIS parameters as the command line's :class:`RunOptions`."""
        g = lambda key, kind="num": _p(self, parameters, key, context, kind)  # noqa: E731
        return RunOptions(
            contacts=contacts_path, out="", model=pl.MODELS[self.parameterAsEnum(parameters, "MODEL", context)],
            interval_m=self.parameterAsDouble(parameters, "INTERVAL", context), cell_m=g("CELL"),
            borehole_z_field=g("BOREHOLE_Z_FIELD", "str"), borehole_collar_field=g("BOREHOLE_COLLAR_FIELD", "str"),
            borehole_depth_field=g("BOREHOLE_DEPTH_FIELD", "str"),
            borehole_sigma_m=self.parameterAsDouble(parameters, "BOREHOLE_SIGMA", context),
            dip_field=g("DIP_FIELD", "str") or "dip", dip_direction_field=g("DIP_DIRECTION_FIELD", "str"),
            strike_field=g("STRIKE_FIELD", "str"),
            orientation_sigma_deg=self.parameterAsDouble(parameters, "ORIENTATION_SIGMA", context),
            misfit_flag_m=g("MISFIT_FLAG"),
            dem_sigma_m=self.parameterAsDouble(parameters, "DEM_SIGMA", context),
            contour_sigma_m=self.parameterAsDouble(parameters, "CONTOUR_SIGMA", context),
            window_m=g("WINDOW"), group_by=g("GROUP_BY", "str"),
            resamples=self.parameterAsInt(parameters, "RESAMPLES", context),
            seed=self.parameterAsInt(parameters, "SEED", context))

    def _points_layer(self, parameters, key, context, steps, label, fields, target):
        src, name = source_and_name(self, parameters, key, context, label)
        if src is None:
            return None
        return read_vector(src, name, geometry="point", fields=[f for f in fields if f and f in src.fields().names()],
                           target_crs=target, context=context, log=steps.log, is_cancelled=steps.is_cancelled)

    def process(self, parameters, context, steps):
        group_by = self.parameterAsString(parameters, "GROUP_BY", context)
        inputs = read_contact_inputs(self, parameters, context, steps, contact_fields=(group_by,))
        # The options' ranges are enforced by the parameter definitions (QGIS checks them).
        opts = self.options(parameters, context, inputs.paths["contacts"])
        target = qgis_crs(inputs.crs_wkt)
        bh = self._points_layer(parameters, "BOREHOLES", context, steps, "boreholes",
                                (opts.borehole_z_field, opts.borehole_collar_field, opts.borehole_depth_field), target)
        if bh is not None:
            inputs.boreholes_xyz = pl._borehole_points(bh, opts)
            inputs.paths["boreholes"] = bh.path
        ori = self._points_layer(parameters, "ORIENTATIONS", context, steps, "orientations",
                                 (opts.dip_field, opts.dip_direction_field, opts.strike_field), target)
        if ori is not None:
            inputs.orientations = pl._orientation_rows(ori, opts)
            inputs.paths["orientations"] = ori.path
        top_src, top_name = source_and_name(self, parameters, "TOP_CONTACTS", context, "top contacts")
        if top_src is not None:
            inputs.top_contacts = read_vector(top_src, top_name, geometry="line", target_crs=target, context=context,
                                              log=steps.log, is_cancelled=steps.is_cancelled)
            inputs.paths["top_contacts"] = top_name.path
        inputs.paths = _FilePaths(inputs.paths)
        steps.feedback.setProgress(5)
        r = compute(inputs, opts, log=steps.log, progress=steps.part(0.05, 0.8), is_cancelled=steps.is_cancelled)
        s = r.summary
        plane = s["plane"]
        steps.log(f"best-fit plane: dip {plane['dip']:.2f}° ± {plane['dip_ci95'] or 0:.2f}° toward "
                  f"{plane['dip_direction']:.1f}° (strike {plane['strike_rhr']:.1f}° RHR), quality {plane['quality']}; "
                  f"surface model {s['model']['chosen']}")
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
        if inputs.dem is None:
            steps.warn("no DEM: depth below ground, the predicted trace and the contact misfit are not made")
        return out

    def _write(self, parameters, context, inputs, r) -> dict:
        crs = qgis_crs(inputs.crs_wkt)
        out = {}

        def sink(key, table, style=None):
            out[key] = write_sink(self, parameters, key, context, table, crs)
            attach_style(context, out[key], style)

        def raster(key, array, style=None):
            if array is not None:
                out[key] = write_raster(self, parameters, key, context, array, r.grid)
                attach_style(context, out[key], style)

        sink("PICKS", picks_table(r.picks), "picks")
        sink("STRUCTURE_CONTOURS", contours_table(r.contour_geoms, r.contour_elevations_m,
                                                  extrapolated=r.contour_extrapolated), "structure_contours")
        if inputs.dem is not None:
            sink("PREDICTED_TRACE", trace_table(r.trace_geoms, extrapolated=r.trace_extrapolated), "trace")
        if r.contact_misfit is not None:
            cm = r.contact_misfit
            sink("CONTACT_MISFIT", Table(cm["geoms"], {"contact_id": cm["contact_id"], "misfit_m": cm["misfit_m"],
                                                       "flagged": cm["flagged"]}, QgsWkbTypes.LineString),
                 "contact_misfit")
        if r.attitudes is not None:
            lo = pl._attitudes_layer(r.attitudes)
            sink("ATTITUDES", Table(lo.geoms, lo.fields, QgsWkbTypes.Point), "local_attitudes")
        if r.top_picks is not None:
            sink("TOP_PICKS", picks_table(r.top_picks), "picks")
        raster("SURFACE", r.surface, "surface")
        raster("DIP", r.dip_deg, "dip")
        raster("DIP_DIRECTION", r.dip_direction_deg, "dip_direction")
        raster("UNCERTAINTY", r.uncertainty_m, "uncertainty")
        raster("DEPTH", r.depth_m, "depth")
        raster("VERTICAL_THICKNESS", r.vertical_thickness_m, "thickness")
        raster("TRUE_THICKNESS", r.true_thickness_m, "thickness")
        summary_path = self.parameterAsFileOutput(parameters, "SUMMARY", context)
        if summary_path:
            with open(summary_path, "w", encoding="utf-8") as f:
                f.write(json.dumps(r.summary, indent=2, sort_keys=True) + "\n")
            out["SUMMARY"] = summary_path
        return {k: v for k, v in out.items() if v is not None}
