"""Tool: the whole chain in one run, as ``strikeline run`` does it."""
from __future__ import annotations

import json
import os

from qgis.core import (
    QgsProcessing,
    QgsProcessingOutputNumber,
    QgsProcessingParameterDistance,
    QgsProcessingParameterFeatureSink,
    QgsProcessingParameterFileDestination,
    QgsProcessingParameterRasterDestination,
)

from strikeline.pipeline import RunOptions, compute

from ..base import REF_FERNANDEZ, REF_GDAL_CONTOUR, REF_PRESS, REF_STR, REF_ZT, StrikelineAlgorithm
from ..inputs import CONTACTS, add_contact_and_topography, read_contact_inputs
from ..layers import qgis_crs
from ..outputs import write_raster, write_sink
from ..styles import attach_style
from .common import contours_table, picks_table, trace_table
from .plane_attitude import add_plane_outputs, log_plane, plane_numbers


class _FilePaths(dict):
    """``Inputs.paths`` for the library's summary: names every input, hashes only files.

    ``compute`` names inputs through ``paths[...]`` and ``build_summary`` hashes every value;
    inputs without a file (memory layers, database tables) are left out of ``values()``. Goes
    when the library hashes only files (request 2 in /work/requests-qgis.md).
    """

    def values(self):
        return [v for v in super().values() if os.path.isfile(v)]


class WholeChain(StrikelineAlgorithm):
    NAME = "modelcontact"
    DISPLAY = "Model a contact (whole chain)"
    GROUP = "chain"
    FORECAST = True
    SUMMARY = (
        "Everything ``strikeline run`` makes, in one tool: elevation picks on the mapped contacts "
        "(from the DEM and/or topographic contour lines), the best-fit plane, its surface grid (on "
        "the DEM's grid, or square cells over the contours' extent), structure contours, dip and "
        "dip-direction grids, and, with a DEM, depth below ground, the predicted outcrop trace and "
        "its misfit to the mapped contacts. The summary JSON is the command line's summary.json.")
    METHOD = ("Picks: bilinear DEM sampling and exact contour crossings; plane: total least "
              "squares; contours and trace: GDAL's contour generator; dip grids: central "
              "differences. See the single-step tools for details.")
    REFERENCES = (REF_PRESS, REF_STR, REF_FERNANDEZ, REF_GDAL_CONTOUR, REF_ZT)
    INTERVAL = "INTERVAL"
    CELL = "CELL"
    PICKS = "PICKS"
    CONTOURS_OUT = "STRUCTURE_CONTOURS"
    TRACE = "PREDICTED_TRACE"
    SURFACE = "SURFACE"
    DIP = "DIP"
    DIP_DIRECTION = "DIP_DIRECTION"
    DEPTH = "DEPTH"
    SUMMARY_OUT = "SUMMARY"

    def initAlgorithm(self, config=None):  # noqa: N802
        add_contact_and_topography(self)
        self.addParameter(QgsProcessingParameterDistance(
            self.INTERVAL, self.tr("Structure-contour interval"), defaultValue=50.0,
            parentParameterName=CONTACTS, minValue=0.001))
        self.addParameter(QgsProcessingParameterDistance(
            self.CELL, self.tr("Cell size without a DEM (0: about 1/500 of the contours' extent)"),
            defaultValue=0.0, parentParameterName=CONTACTS, minValue=0.0, optional=True))
        self.addParameter(QgsProcessingParameterFeatureSink(
            self.PICKS, self.tr("Contact picks"), QgsProcessing.TypeVectorPoint))
        self.addParameter(QgsProcessingParameterFeatureSink(
            self.CONTOURS_OUT, self.tr("Structure contours"), QgsProcessing.TypeVectorLine))
        self.addParameter(QgsProcessingParameterFeatureSink(
            self.TRACE, self.tr("Predicted outcrop trace (needs a DEM)"), QgsProcessing.TypeVectorLine,
            optional=True))
        self.addParameter(QgsProcessingParameterRasterDestination(self.SURFACE, self.tr("Surface elevation")))
        self.addParameter(QgsProcessingParameterRasterDestination(self.DIP, self.tr("Dip (°)")))
        self.addParameter(QgsProcessingParameterRasterDestination(
            self.DIP_DIRECTION, self.tr("Dip direction (° from grid north)")))
        self.addParameter(QgsProcessingParameterRasterDestination(
            self.DEPTH, self.tr("Depth below ground (needs a DEM)"), optional=True))
        self.addParameter(QgsProcessingParameterFileDestination(
            self.SUMMARY_OUT, self.tr("Summary (JSON)"), fileFilter="JSON (*.json)", optional=True,
            createByDefault=False))
        add_plane_outputs(self)
        for key, label in (("MISFIT_MEDIAN_M", "Median trace misfit (m)"),
                           ("MISFIT_P90_M", "90th percentile trace misfit (m)")):
            self.addOutput(QgsProcessingOutputNumber(key, self.tr(label)))

    def process(self, parameters, context, steps):
        inputs = read_contact_inputs(self, parameters, context, steps)
        inputs.paths = _FilePaths(inputs.paths)
        steps.feedback.setProgress(5)
        interval = self.parameterAsDouble(parameters, self.INTERVAL, context)
        cell = self.parameterAsDouble(parameters, self.CELL, context) or None
        opts = RunOptions(contacts=inputs.paths["contacts"], out="", interval_m=interval, cell_m=cell)
        r = compute(inputs, opts, log=steps.log, progress=steps.part(0.05, 0.8),
                    is_cancelled=steps.is_cancelled)
        log_plane(steps, r.plane)
        steps.feedback.setProgress(85)
        # Last chance to stop: from here on the outputs are written, all or nothing.
        steps.check("whole chain")
        crs = qgis_crs(inputs.crs_wkt)
        out = {**plane_numbers(r.plane)}
        tm = r.summary["trace_misfit_m"]
        out["MISFIT_MEDIAN_M"], out["MISFIT_P90_M"] = tm.get("median"), tm.get("p90")
        if inputs.dem is None:
            steps.warn("no DEM: depth below ground and the predicted trace are not made")
        out[self.PICKS] = write_sink(self, parameters, self.PICKS, context, picks_table(r.picks), crs)
        out[self.CONTOURS_OUT] = write_sink(self, parameters, self.CONTOURS_OUT, context,
                                            contours_table(r.contour_geoms, r.contour_elevations_m), crs)
        if inputs.dem is not None:
            out[self.TRACE] = write_sink(self, parameters, self.TRACE, context, trace_table(r.trace_geoms), crs)
        g = r.grid
        out[self.SURFACE] = write_raster(self, parameters, self.SURFACE, context, r.surface, g)
        out[self.DIP] = write_raster(self, parameters, self.DIP, context, r.dip_deg, g)
        out[self.DIP_DIRECTION] = write_raster(self, parameters, self.DIP_DIRECTION, context,
                                               r.dip_direction_deg, g)
        if r.depth_m is not None:
            out[self.DEPTH] = write_raster(self, parameters, self.DEPTH, context, r.depth_m, g)
        summary_path = self.parameterAsFileOutput(parameters, self.SUMMARY_OUT, context)
        if summary_path:
            with open(summary_path, "w", encoding="utf-8") as f:
                f.write(json.dumps(r.summary, indent=2, sort_keys=True) + "\n")
            out[self.SUMMARY_OUT] = summary_path
        for key, style in ((self.PICKS, "picks"), (self.CONTOURS_OUT, "structure_contours"),
                           (self.TRACE, "trace"), (self.SURFACE, "surface"), (self.DIP, "dip"),
                           (self.DIP_DIRECTION, "dip_direction"), (self.DEPTH, "depth")):
            attach_style(context, out.get(key), style)
        return out
