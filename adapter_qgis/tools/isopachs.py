"""Tool: isopachs, the thickness of a unit between its top and base surface grids."""
from __future__ import annotations

from qgis.core import (
    QgsProcessing,
    QgsProcessingParameterFeatureSink,
    QgsProcessingParameterRasterDestination,
    QgsProcessingParameterRasterLayer,
)

from strikeline import vocabulary as V
from strikeline.pipeline import vocabulary_layer
from strikeline.pipeline.rasters import require_same_grid
from strikeline.pipeline.thickness import isopachs

from ..base import REF_GDAL_CONTOUR, REF_ZT, StrikelineAlgorithm
from ..inputs import read_dem
from ..layers import qgis_crs
from ..outputs import Table, add_outputs, write_raster, write_sink
from ..params import option, parameter
from ..styles import attach_style
from .unit_thickness import REF_RAGAN


class Isopachs(StrikelineAlgorithm):
    NAME = "isopachs"
    DISPLAY = "Isopachs from two surfaces"
    GROUP = "thickness"
    FORECAST = True
    SUMMARY = (
        "Thickness of a unit between the surface grid of its top and that of its base (both from "
        "Surface model, on one grid): the vertical thickness (top − base) and the true thickness "
        "(vertical × cos of the base's local dip), as GeoTIFFs, and isopach lines of the true "
        "thickness every interval metres. Negative values mark where the two models cross - check "
        "which contact is the top there.")
    METHOD = ("Cell by cell; the base's dip from central differences of its grid; isopach lines from "
              "GDAL's contour generator.")
    REFERENCES = (REF_RAGAN, REF_ZT, REF_GDAL_CONTOUR)
    TOP = "TOP"
    BASE = "BASE"
    INTERVAL = option("isopach_interval_m").qgis
    VERTICAL = V.VERTICAL_THICKNESS.name
    TRUE = V.TRUE_THICKNESS.name
    LINES = V.ISOPACHS.name

    def initAlgorithm(self, config=None):  # noqa: N802
        self.addParameter(QgsProcessingParameterRasterLayer(self.TOP, self.tr("Top surface of the unit")))
        self.addParameter(QgsProcessingParameterRasterLayer(self.BASE, self.tr("Base surface of the unit")))
        self.addParameter(parameter(self, "isopach_interval_m", parent=self.BASE))
        self.addParameter(QgsProcessingParameterRasterDestination(self.VERTICAL, self.tr("Vertical thickness")))
        self.addParameter(QgsProcessingParameterRasterDestination(self.TRUE, self.tr("True thickness")))
        self.addParameter(QgsProcessingParameterFeatureSink(
            self.LINES, self.tr("Isopachs (true thickness)"), QgsProcessing.TypeVectorLine, optional=True))
        add_outputs(self, {"true_thickness_median_m": "Median true thickness (m)",
                           "n_negative_cells": "Cells where the top lies below the base"})

    def process(self, parameters, context, steps):
        top, tgrid, tpath = read_dem(self, parameters, self.TOP, context, steps, label="top surface")
        base, bgrid, bpath = read_dem(self, parameters, self.BASE, context, steps, label="base surface")
        require_same_grid(tgrid, bgrid, what_a=f"top surface '{tpath}'", what_b=f"base surface '{bpath}'")
        steps.feedback.setProgress(20)
        interval = self.parameterAsDouble(parameters, self.INTERVAL, context)
        iso = isopachs(top, base, bgrid, interval_m=interval, progress=steps.part(0.2, 0.7),
                       is_cancelled=steps.is_cancelled)
        steps.check("isopachs")
        if iso.n_negative:
            steps.warn(f"the top lies below the base in {iso.n_negative} cells: check which surface is the top")
        grid = bgrid.with_nodata(None)
        out = {self.VERTICAL: write_raster(self, parameters, self.VERTICAL, context, iso.vertical_m, grid),
               self.TRUE: write_raster(self, parameters, self.TRUE, context, iso.true_m, grid)}
        if interval > 0:
            lines = vocabulary_layer(V.ISOPACHS, iso.lines, {"true_thickness_m": iso.levels_m})
            out[self.LINES] = write_sink(self, parameters, self.LINES, context, Table.of_layer(lines),
                                         qgis_crs(bgrid.crs_wkt))
        for key in (self.VERTICAL, self.TRUE):
            attach_style(context, out[key], "thickness")
        out.update({"true_thickness_median_m": iso.median_true_m, "n_negative_cells": iso.n_negative})
        return out
