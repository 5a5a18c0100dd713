"""Tool: structure contours of a modelled surface."""
from __future__ import annotations

from qgis.core import (
    QgsProcessing,
    QgsProcessingParameterFeatureSink,
    QgsProcessingParameterRasterLayer,
)

from strikeline import vocabulary as V
from strikeline.pipeline.rasters import raster_flag, require_same_grid, structure_contours_on_ground
from strikeline.pipeline.options import option

from ..base import REF_GDAL_CONTOUR, StrikelineAlgorithm
from ..inputs import read_dem
from ..layers import qgis_crs
from ..outputs import add_outputs, write_sink
from ..params import parameter, value
from ..styles import attach_style
from .common import contours_table


class StructureContours(StrikelineAlgorithm):
    NAME = "structurecontours"
    DISPLAY = "Structure contours"
    GROUP = "maps"
    FORECAST = True
    SUMMARY = (
        "Lines of equal elevation of the modelled surface every interval metres (levels at "
        "multiples of the interval), as LineStringZ at their elevation with the field 'elevation'. "
        "Give the forecast mask of Surface model to split every line where the surface leaves the "
        "reach of the data (field extrapolated true: a forecast, drawn dashed), as strikeline run "
        "does; give the DEM as ground to split it where the surface passes from below ground (field "
        "below_ground true, drawn solid) to above ground (eroded away, drawn pale).")
    METHOD = ("GDAL's contour generator (marching squares between cell centres) on the surface "
              "grid; the half-cell fringe GDAL extrapolates at edges and nodata is trimmed, so every "
              "vertex lies on the gridded surface.")
    REFERENCES = (REF_GDAL_CONTOUR,)
    SURFACE = "SURFACE"
    GROUND = "GROUND"
    FORECAST_MASK = "FORECAST_MASK"
    INTERVAL = option("interval_m").qgis
    OUTPUT = V.STRUCTURE_CONTOURS.name

    def initAlgorithm(self, config=None):  # noqa: N802
        self.addParameter(QgsProcessingParameterRasterLayer(
            self.SURFACE, self.tr("Surface elevation (from Surface model)")))
        self.addParameter(parameter(self, "interval_m", parent=self.SURFACE, optional=False))
        self.addParameter(QgsProcessingParameterRasterLayer(
            self.GROUND, self.tr("Ground (DEM) to mark the parts above and below ground"), optional=True))
        self.addParameter(parameter(self, "dem_unit"))  # a ground DEM in feet is turned into metres
        self.addParameter(QgsProcessingParameterRasterLayer(
            self.FORECAST_MASK, self.tr("Forecast mask (from Surface model) to mark extrapolated parts"),
            optional=True))
        self.addParameter(QgsProcessingParameterFeatureSink(
            self.OUTPUT, self.tr("Structure contours"), QgsProcessing.TypeVectorLine))
        add_outputs(self, {"n_lines": "Number of lines"})

    def process(self, parameters, context, steps):
        surface, grid, spath = read_dem(self, parameters, self.SURFACE, context, steps, label="surface")
        interval = value(self, parameters, "interval_m", context)
        dem, dem_grid, dpath = read_dem(self, parameters, self.GROUND, context, steps, label="DEM", unit=True)
        mask, mask_grid, mpath = read_dem(self, parameters, self.FORECAST_MASK, context, steps,
                                          label="forecast mask")
        steps.feedback.setProgress(30)
        steps.check("structure contours")
        extrapolated_fn = None
        if mask is not None:
            require_same_grid(grid, mask_grid, what_a=f"surface '{spath}'", what_b=f"forecast mask '{mpath}'")
            extrapolated_fn = raster_flag(mask, mask_grid, at_least=0.5)
        if dem is not None:
            require_same_grid(grid, dem_grid, what_a=f"surface '{spath}'", what_b=f"DEM '{dpath}'")
        # strikeline run's structure contours, split where they leave the reach of the data and,
        # with the ground, where the surface passes from below it to above it.
        geoms, elev, parts = structure_contours_on_ground(surface, grid, interval_m=interval,
                                                          extrapolated_fn=extrapolated_fn, dem=dem,
                                                          is_cancelled=steps.is_cancelled)
        steps.feedback.setProgress(90)
        steps.check("structure contours")
        steps.log(f"structure contours: {len(geoms)} lines every {interval:g} m")
        dest = write_sink(self, parameters, self.OUTPUT, context, contours_table(geoms, elev, **parts),
                          qgis_crs(grid.crs_wkt))
        attach_style(context, dest, "structure_contours")
        return {self.OUTPUT: dest, "n_lines": len(geoms)}
