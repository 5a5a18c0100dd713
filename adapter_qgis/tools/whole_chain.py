"""Tool: the whole chain in one run, as ``strikeline run`` does it."""
from __future__ import annotations

import dataclasses
import os

from qgis.core import (
    QgsProcessing,
    QgsProcessingParameterFeatureSink,
    QgsProcessingParameterFileDestination,
    QgsProcessingParameterRasterDestination,
)
from strikeline import pipeline as pl
from strikeline import vocabulary as V
from strikeline.io.files import write_json_atomic
from strikeline.pipeline import compute
from strikeline.pipeline.outputs import write_report_file
from strikeline.pipeline.progress import READING, WRITING
from strikeline.pipeline.steps import surface_grid
from strikeline.pipeline.workload import check_workload
from strikeline.report.sentences import plain_answer

from ..base import (
    REF_FERNANDEZ,
    REF_GDAL_CONTOUR,
    REF_PRESS,
    REF_STR,
    REF_ZT,
    StrikelineAlgorithm,
)
from ..inputs import (
    CONSTRAINT_LAYERS,
    CONTACTS,
    MAP_UNIT_LAYERS,
    add_contact_and_topography,
    constraint_options,
    constraint_parameters,
    constraint_sigma_parameters,
    map_unit_options,
    map_unit_parameters,
    read_contact_inputs,
)
from ..layers import qgis_crs
from ..outputs import Table, add_outputs, write_raster, write_sink
from ..params import extent_value, option_names, parameter, value, values
from ..styles import attach_style
from .plane_attitude import NUMBERS, REF_EFRON, REF_WOODCOCK
from .surface_model import REF_GCV, REF_SPLINE

#: The chain's layers beyond contacts and topography: ``assemble_inputs`` keyword ->
#: (parameter, label in messages, geometry).
CHAIN_LAYERS = {**CONSTRAINT_LAYERS, "top_contacts": (pl.option("top_contacts").qgis, "top contacts", "line"),
                **MAP_UNIT_LAYERS}

#: The vector layers of ``pipeline.result_layers``, each written to the output named as the
#: layer (strikeline.vocabulary.RUN_LAYERS): output -> (label, layer type, created by default, style).
LAYERS = {
    V.PICKS.name: ("Contact picks", QgsProcessing.TypeVectorPoint, True, "picks"),
    V.STRUCTURE_CONTOURS.name: ("Structure contours", QgsProcessing.TypeVectorLine, True, "structure_contours"),
    V.PREDICTED_TRACE.name: ("Predicted outcrop trace (needs a DEM)", QgsProcessing.TypeVectorLine, True, "trace"),
    V.CONTACT_MISFIT.name: ("Contact segments and their misfit (needs a DEM)", QgsProcessing.TypeVectorLine, True,
                            "contact_misfit"),
    V.ATTITUDES.name: ("Local attitudes", QgsProcessing.TypeVectorPoint, True, "local_attitudes"),
    V.TOP_PICKS.name: ("Top-contact picks (with top contacts)", QgsProcessing.TypeVectorPoint, True, "picks"),
    V.UNIT_CONFLICTS.name: ("Where the surface still breaks the map units (with map units)",
                            QgsProcessing.TypeVectorPoint, True, "unit_conflicts"),
}
#: The grids of ``pipeline.result_rasters``, each written to the output named as the file
#: without ``.tif`` (strikeline.vocabulary.RASTERS): output -> (label, created by default, style).
RASTERS = {
    V.SURFACE.name: ("Surface elevation", True, "surface"), V.DIP.name: ("Dip (°)", True, "dip"),
    V.DIP_DIRECTION.name: ("Dip direction (° from grid north)", True, "dip_direction"),
    V.UNCERTAINTY.name: ("Standard error of the surface (m)", True, "uncertainty"),
    V.DEPTH.name: ("Depth below ground (needs a DEM)", True, "depth"),
    V.VERTICAL_THICKNESS.name: ("Vertical thickness (with top contacts)", True, "thickness"),
    V.TRUE_THICKNESS.name: ("True thickness (with top contacts)", True, "thickness"),
}
# Every output is created by default (the dialog offers each as a temporary layer); those whose
# input is not given (top contacts, map units, a DEM) are simply not written, and QGIS loads only
# what a tool wrote (an output joins the layers to load when the tool asks for its file).
#: Outputs that every run makes.
REQUIRED = {V.PICKS.name, V.STRUCTURE_CONTOURS.name, V.SURFACE.name, V.DIP.name, V.DIP_DIRECTION.name}
#: The summary JSON's destination.
SUMMARY = "summary"
#: The report page's destination (strikeline.vocabulary.REPORT_FILE of ``strikeline run``).
REPORT = "report"
#: Where QGIS's own Python gets matplotlib, said after the library's line when it is missing.
MATPLOTLIB_IN_QGIS = ("report: in QGIS, install matplotlib into the Python that QGIS runs (Debian/Ubuntu: sudo "
                      "apt-get install python3-matplotlib; Windows: python -m pip install matplotlib in the OSGeo4W "
                      "Shell; macOS: the QGIS app's bin/python3 -m pip install --user matplotlib), then restart QGIS")


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
        "summary JSON is the command line's summary.json, and the report is its report.html: the caution, the "
        "answer in plain words and the figures on one page (needs matplotlib). Contacts in several "
        "layers: the first in the contacts parameter, the others in the list of more contact layers "
        "(as the command line's contacts option given again; 'Selected features only' on the first "
        "holds for every contact layer); the log names the contacts whose "
        "segments are flagged (their contact_id in the contact misfit layer).")
    METHOD = ("Picks: bilinear DEM sampling and exact contour crossings; attitude: total least "
              "squares with bootstrap confidence and eigenvalue shape quality; surfaces: least squares "
              "and thin-plate splines with cross-validation; contours and trace: GDAL's contour "
              "generator; dip grids: central differences. See the single-step tools for details.")
    REFERENCES = (REF_PRESS, REF_STR, REF_FERNANDEZ, REF_WOODCOCK, REF_EFRON, REF_SPLINE, REF_GCV,
                  REF_GDAL_CONTOUR, REF_ZT)

    def initAlgorithm(self, config=None):  # noqa: N802
        add_contact_and_topography(self)
        for p in (parameter(self, "model"), parameter(self, "interval_m", parent=CONTACTS, optional=False),
                  parameter(self, "cell_m", parent=CONTACTS), parameter(self, "extent"), *constraint_parameters(self),
                  parameter(self, "top_contacts"), parameter(self, "group_by"), *map_unit_parameters(self),
                  parameter(self, "window_m", parent=CONTACTS), parameter(self, "misfit_flag_m", parent=CONTACTS),
                  parameter(self, "dem_sigma_m"), parameter(self, "contour_sigma_m"), parameter(self, "contact_sigma_m"),
                  *constraint_sigma_parameters(self), parameter(self, "resamples"), parameter(self, "seed"),
                  parameter(self, "no_report")):
            self.addParameter(p)
        for key, (label, kind, by_default, _) in LAYERS.items():
            self.addParameter(QgsProcessingParameterFeatureSink(
                key, self.tr(label), kind, optional=key not in REQUIRED, createByDefault=by_default))
        for key, (label, by_default, _) in RASTERS.items():
            self.addParameter(QgsProcessingParameterRasterDestination(
                key, self.tr(label), optional=key not in REQUIRED, createByDefault=by_default))
        self.addParameter(QgsProcessingParameterFileDestination(
            SUMMARY, self.tr("Summary (JSON)"), fileFilter="JSON (*.json)", optional=True,
            createByDefault=False))
        # An HTML destination is an HTML output: QGIS's results viewer opens it, a model chains its path.
        self.addParameter(QgsProcessingParameterFileDestination(
            REPORT, self.tr("Report (the caution, the answer and the figures on one page)"),
            fileFilter="HTML (*.html)", optional=True, createByDefault=True))
        add_outputs(self, {**NUMBERS, "dip_ci95_deg": "Dip, 95% half-width (°)",
                           "trace_misfit_median_m": "Median trace misfit (m)",
                           "trace_misfit_p90_m": "90th percentile trace misfit (m)",
                           "quality": "Quality of the sheet-wide plane", "model_chosen": "Surface model used",
                           "unit_check_n_violated": "Map-unit check points the surface still breaks (with map units)"})

    def options(self, parameters, context) -> dict:
        """The QGIS parameters as fields of the command line's :class:`RunOptions` (the inputs'
        parameters are read by :func:`read_contact_inputs`), each checked against the table of options."""
        return dict(**values(self, parameters, context, "model", "interval_m", "cell_m", "misfit_flag_m", "window_m",
                             "dem_sigma_m", "contour_sigma_m", "contact_sigma_m", "group_by", "resamples", "seed"),
                    **constraint_options(self, parameters, context), **map_unit_options(self, parameters, context))

    def process(self, parameters, context, steps):
        tracker = steps.tracker()  # the steps of strikeline run, named on the feedback
        tracker.step(READING)
        inputs, opts = read_contact_inputs(self, parameters, context, steps, more=CHAIN_LAYERS,
                                           **self.options(parameters, context))
        # the extent is read in the run's CRS (the DEM's, else the contacts'), known once they are read
        opts = dataclasses.replace(opts, extent=extent_value(self, parameters, "extent", context, inputs.crs_wkt))
        # compute's own size checks, first, in the words of this tool's parameters (not the command's flags);
        # the grids stay in memory here (no output folder for blocks), as compute then checks them
        names = option_names(self)
        check_workload(inputs, opts, grid=surface_grid(inputs, opts, names=names), names=names, auto_blocks=False)
        r = compute(inputs, opts, log=tracker.log, tracker=tracker, names=names)
        s = r.summary
        plane = s["plane"]
        for line in plain_answer(s):  # the caution, then the report page's sentences
            steps.log(line)
        # Last chance to stop: from here on the outputs are written, all or nothing.
        steps.check("whole chain")
        tracker.step(WRITING)
        out = self._write(parameters, context, inputs, r)
        out.update(self._report(parameters, context, steps, r))
        tracker.finish()
        tm = s["trace_misfit"]
        out.update({k: plane.get(k) for k in (*NUMBERS, "dip_ci95_deg", "quality")})
        out.update({"model_chosen": s["model"]["chosen"], "trace_misfit_median_m": tm.get("median_m"),
                    "trace_misfit_p90_m": tm.get("p90_m")})
        if "map_units" in s:
            out["unit_check_n_violated"] = s["map_units"]["check"]["n_violated"]
        if inputs.dem is None:
            steps.warn("no DEM: depth below ground, the predicted trace and the contact misfit are not made")
        return out

    def _write(self, parameters, context, inputs, r) -> dict:
        """The layers and grids of ``strikeline run`` (``pipeline.result_layers`` and
        ``result_rasters``, so the same fields), each to the output of its name."""
        crs = qgis_crs(inputs.crs_wkt)
        out = {}
        for layer in pl.result_layers(r):
            key = layer.name
            if key == V.PREDICTED_TRACE.name and inputs.dem is None:
                continue  # no trace without ground to cut the surface with
            if key == V.STRUCTURE_CONTOURS.name and r.depth_m is not None:
                layer = contours_on_ground(r)
            out[key] = write_sink(self, parameters, key, context, Table.of_layer(layer), crs)
            attach_style(context, out[key], LAYERS[key][3])
        for file_name, array in pl.result_rasters(r):
            key = os.path.splitext(file_name)[0]
            out[key] = write_raster(self, parameters, key, context, array, r.grid)
            attach_style(context, out[key], RASTERS[key][2])
        summary_path = self.parameterAsFileOutput(parameters, SUMMARY, context)
        if summary_path:
            write_json_atomic(summary_path, r.summary, overwrite=True)  # the bytes of summary.json
            out[SUMMARY] = summary_path
        return {k: v for k, v in out.items() if v is not None}

    def _report(self, parameters, context, steps, r) -> dict:
        """``report.html`` of ``strikeline run`` at the report destination, unless the "no report"
        parameter is set or no destination is given (:func:`strikeline.pipeline.outputs.write_report_file`)."""
        path = self.parameterAsFileOutput(parameters, REPORT, context)
        if not path or value(self, parameters, "no_report", context):
            return {}
        written = write_report_file(r, path, log=steps.log, is_cancelled=steps.is_cancelled)
        if written is None:  # no matplotlib: the run still succeeds, the log says how to get it
            steps.log(MATPLOTLIB_IN_QGIS)
            return {}
        steps.log(f"report: {written}")
        return {REPORT: str(written)}


def contours_on_ground(r):
    """The run's structure contours split where the surface passes from below the ground to above
    it (eroded away), with ``below_ground`` besides ``extrapolated`` - as the structure-contours
    tool splits them when given the DEM (:func:`strikeline.pipeline.split_by_flags` on the depth
    below ground, DEM - surface, interpolated bilinearly; NaN off the DEM counts as not below)."""
    below = {"below_ground": pl.raster_flag(r.depth_m, r.grid, at_least=0.0)}
    parts, src, flags = pl.split_by_flags(r.contour_geoms, list(range(len(r.contour_geoms))), below,
                                          spacing_m=min(r.grid.cell_x_m, r.grid.cell_y_m))
    extrapolated = r.contour_extrapolated[src] if r.contour_extrapolated is not None else None
    return pl.contours_layer(parts, r.contour_elevations_m[src], extrapolated=extrapolated,
                             below_ground=flags["below_ground"])
