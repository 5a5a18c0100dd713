"""Tool: dip and dip-direction grids of a modelled surface."""
from __future__ import annotations

from qgis.core import QgsProcessingParameterRasterDestination, QgsProcessingParameterRasterLayer

from strikeline import vocabulary as V
from strikeline.pipeline.rasters import surface_dip_grids

from ..base import REF_ZT, StrikelineAlgorithm
from ..inputs import read_dem
from ..outputs import write_raster
from ..styles import attach_style


class DipGrids(StrikelineAlgorithm):
    NAME = "dipgrids"
    DISPLAY = "Dip and dip-direction grids"
    GROUP = "maps"
    SUMMARY = (
        "Dip (0–90°) and dip direction (0–360° clockwise from grid north) of the modelled surface, "
        "cell by cell, as float32 GeoTIFFs. Flat cells have dip 0 and no dip direction (nodata).")
    METHOD = ("Four-neighbour central differences of the surface (one-sided at edges and next to "
              "nodata); dip = atan|∇z|, dip direction = azimuth of −∇z.")
    REFERENCES = (REF_ZT,)
    SURFACE = "SURFACE"
    DIP = V.DIP.name
    DIP_DIRECTION = V.DIP_DIRECTION.name

    def initAlgorithm(self, config=None):  # noqa: N802
        self.addParameter(QgsProcessingParameterRasterLayer(
            self.SURFACE, self.tr("Surface elevation (from Surface model)")))
        self.addParameter(QgsProcessingParameterRasterDestination(self.DIP, self.tr("Dip (°)")))
        self.addParameter(QgsProcessingParameterRasterDestination(
            self.DIP_DIRECTION, self.tr("Dip direction (° from grid north)")))

    def process(self, parameters, context, steps):
        surface, grid, _ = read_dem(self, parameters, self.SURFACE, context, steps, label="surface")
        steps.feedback.setProgress(20)
        dip, dipdir = surface_dip_grids(surface, grid, progress=steps.part(0.2, 0.9),
                                        is_cancelled=steps.is_cancelled)
        steps.check("dip grids")
        out_grid = grid.with_nodata(None)
        p_dip = write_raster(self, parameters, self.DIP, context, dip, out_grid)
        p_dd = write_raster(self, parameters, self.DIP_DIRECTION, context, dipdir, out_grid)
        attach_style(context, p_dip, "dip")
        attach_style(context, p_dd, "dip_direction")
        return {self.DIP: p_dip, self.DIP_DIRECTION: p_dd}
