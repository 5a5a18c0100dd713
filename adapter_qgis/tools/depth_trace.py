"""Tool: depth of the surface below ground, its predicted outcrop trace, and the trace misfit."""
from __future__ import annotations

import numpy as np
import shapely
from qgis.core import (
    QgsProcessing,
    QgsProcessingOutputNumber,
    QgsProcessingParameterFeatureSink,
    QgsProcessingParameterFeatureSource,
    QgsProcessingParameterRasterDestination,
    QgsProcessingParameterRasterLayer,
    QgsWkbTypes,
)

from ..base import REF_GDAL_CONTOUR, REF_PRESS, StrikelineAlgorithm
from ..chain import depth_trace_misfit, require_same_grid
from ..inputs import read_dem, source_and_name
from ..layers import qgis_crs, read_vector
from ..outputs import Table, write_raster, write_sink
from ..styles import attach_style
from .common import trace_table


class DepthTrace(StrikelineAlgorithm):
    NAME = "depthtrace"
    DISPLAY = "Depth below ground, predicted trace and misfit"
    GROUP = "maps"
    FORECAST = True
    SUMMARY = (
        "Depth of the modelled surface below the ground (DEM − surface, metres; positive where the "
        "surface lies below ground, negative where it has been eroded away), the predicted outcrop "
        "trace (where the depth is zero) and, given the mapped contacts, the misfit: the distance "
        "of every contact vertex to the predicted trace, with its median and 90th percentile. The "
        "surface must be on the DEM's grid (Surface model with the DEM as reference grid).")
    METHOD = ("Depth is the cell-by-cell difference; the trace is the zero contour of the depth "
              "grid from GDAL's contour generator; distances use a spatial index over the trace's "
              "segments; vertices off the DEM's valid cells (bilinear support) are not counted.")
    REFERENCES = (REF_GDAL_CONTOUR, REF_PRESS)
    SURFACE = "SURFACE"
    DEM = "DEM"
    CONTACTS = "CONTACTS"
    DEPTH = "DEPTH"
    TRACE = "PREDICTED_TRACE"
    MISFIT = "MISFIT"

    def initAlgorithm(self, config=None):  # noqa: N802
        self.addParameter(QgsProcessingParameterRasterLayer(
            self.SURFACE, self.tr("Surface elevation (from Surface model, on the DEM's grid)")))
        self.addParameter(QgsProcessingParameterRasterLayer(self.DEM, self.tr("DEM (ground elevation)")))
        self.addParameter(QgsProcessingParameterFeatureSource(
            self.CONTACTS, self.tr("Mapped contact lines (for the misfit)"), [QgsProcessing.TypeVectorLine],
            optional=True))
        self.addParameter(QgsProcessingParameterRasterDestination(self.DEPTH, self.tr("Depth below ground")))
        self.addParameter(QgsProcessingParameterFeatureSink(
            self.TRACE, self.tr("Predicted outcrop trace"), QgsProcessing.TypeVectorLine))
        self.addParameter(QgsProcessingParameterFeatureSink(
            self.MISFIT, self.tr("Contact vertices with their misfit"), QgsProcessing.TypeVectorPoint,
            optional=True, createByDefault=False))
        for key, label in (("MISFIT_MEDIAN_M", "Median misfit (m)"), ("MISFIT_P90_M", "90th percentile misfit (m)"),
                           ("MISFIT_N", "Contact vertices measured")):
            self.addOutput(QgsProcessingOutputNumber(key, self.tr(label)))

    def process(self, parameters, context, steps):
        dem, dem_grid, dpath = read_dem(self, parameters, self.DEM, context, steps, label="DEM")
        surface, grid, spath = read_dem(self, parameters, self.SURFACE, context, steps, label="surface")
        require_same_grid(grid, dem_grid, what_a=f"surface '{spath}'", what_b=f"DEM '{dpath}'")
        contacts_src, contacts_name = source_and_name(self, parameters, self.CONTACTS, context, "contacts")
        geoms = None
        if contacts_src is not None:
            geoms = read_vector(contacts_src, contacts_name, geometry="line",
                                target_crs=qgis_crs(dem_grid.crs_wkt), context=context, log=steps.log,
                                is_cancelled=steps.is_cancelled).geoms
        steps.feedback.setProgress(30)
        steps.check("depth and trace")
        depth, trace, misfit, vxy, vdist = depth_trace_misfit(dem, dem_grid, surface, geoms)
        steps.check("depth and trace")
        out = {"MISFIT_MEDIAN_M": None, "MISFIT_P90_M": None, "MISFIT_N": 0}
        if misfit is not None and misfit.get("median") is not None:
            out = {"MISFIT_MEDIAN_M": misfit["median"], "MISFIT_P90_M": misfit["p90"],
                   "MISFIT_N": misfit["n_vertices"]}
            steps.log(f"trace misfit: median {misfit['median']:.1f} m, 90th percentile "
                      f"{misfit['p90']:.1f} m over {misfit['n_vertices']} contact vertices")
        elif misfit is not None:
            steps.warn(f"trace misfit not computed: {misfit.get('note', 'no predicted trace')}")
        crs = qgis_crs(dem_grid.crs_wkt)
        out_grid = dem_grid.with_nodata(None)
        p_depth = write_raster(self, parameters, self.DEPTH, context, depth, out_grid)
        d_trace = write_sink(self, parameters, self.TRACE, context, trace_table(trace), crs)
        d_misfit = None
        if geoms is not None:
            table = Table(shapely.points(vxy) if len(vxy) else np.empty(0, object),
                          {"distance_m": np.asarray(vdist, dtype=float)}, QgsWkbTypes.Point)
            d_misfit = write_sink(self, parameters, self.MISFIT, context, table, crs)
        attach_style(context, p_depth, "depth")
        attach_style(context, d_trace, "trace")
        return {self.DEPTH: p_depth, self.TRACE: d_trace, self.MISFIT: d_misfit, **out}
