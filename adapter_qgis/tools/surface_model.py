"""Tool: a surface grid modelled from elevation picks (the best-fit plane for now)."""
from __future__ import annotations

from qgis.core import (
    QgsProcessingParameterDistance,
    QgsProcessingParameterEnum,
    QgsProcessingParameterExtent,
    QgsProcessingParameterRasterDestination,
    QgsProcessingParameterRasterLayer,
)

from strikeline.errors import InputError
from strikeline.io.crs import same_crs, srs_from_wkt

from ..base import REF_FERNANDEZ, StrikelineAlgorithm
from ..chain import grid_over, surface_of_plane
from ..inputs import PICKS, add_picks, read_dem, read_picks
from ..layers import crs_to_srs
from ..outputs import write_raster
from ..styles import attach_style
from .plane_attitude import add_plane_outputs, fit_named, log_plane, plane_numbers

#: Surface methods offered, in enum order: (id, label). Later issues add local models here.
METHODS = (("plane", "Best-fit plane (total least squares)"),)


class SurfaceModel(StrikelineAlgorithm):
    NAME = "surfacemodel"
    DISPLAY = "Surface model from picks"
    GROUP = "surfaces"
    FORECAST = True
    SUMMARY = (
        "A grid of the contact surface's elevation (metres) modelled from the elevation picks, on "
        "the grid of a reference raster (give the DEM, so depth below ground and the predicted trace "
        "can follow) or, without one, on square cells over an extent (default: the picks' extent). "
        "The output GeoTIFF is the input of the structure-contour, dip-grid and depth tools.")
    METHOD = "Best-fit plane: total least squares through the picks, evaluated at every cell centre."
    REFERENCES = (REF_FERNANDEZ,)
    METHOD_P = "METHOD"
    REFERENCE = "REFERENCE"
    EXTENT = "EXTENT"
    CELL = "CELL"
    OUTPUT = "SURFACE"

    def initAlgorithm(self, config=None):  # noqa: N802
        add_picks(self)
        self.addParameter(QgsProcessingParameterEnum(
            self.METHOD_P, self.tr("Surface model"), options=[self.tr(m[1]) for m in METHODS],
            defaultValue=0))
        self.addParameter(QgsProcessingParameterRasterLayer(
            self.REFERENCE, self.tr("Reference grid (usually the DEM)"), optional=True))
        self.addParameter(QgsProcessingParameterExtent(
            self.EXTENT, self.tr("Extent without a reference grid (default: the picks')"), optional=True))
        self.addParameter(QgsProcessingParameterDistance(
            self.CELL, self.tr("Cell size without a reference grid (0: about 1/500 of the extent)"),
            defaultValue=0.0, parentParameterName=PICKS, minValue=0.0, optional=True))
        self.addParameter(QgsProcessingParameterRasterDestination(
            self.OUTPUT, self.tr("Surface elevation")))
        add_plane_outputs(self)

    def process(self, parameters, context, steps):
        method = METHODS[self.parameterAsEnum(parameters, self.METHOD_P, context)][0]
        xyz, source, name = read_picks(self, parameters, context, steps)
        steps.feedback.setProgress(20)
        if method != "plane":  # pragma: no cover - one method so far
            raise InputError(f"surface model {method!r} is not available")
        plane = fit_named(xyz, f"picks {name.what}")
        log_plane(steps, plane)
        _, ref_grid, _ = read_dem(self, parameters, self.REFERENCE, context, steps, label="reference grid")
        if ref_grid is not None:
            grid = ref_grid.with_nodata(None)
            if not same_crs(crs_to_srs(source.sourceCrs()), srs_from_wkt(grid.crs_wkt)):
                raise InputError(
                    f"picks {name.what} and the reference grid are in different CRSs; reproject "
                    "the picks to the reference grid's CRS (or make them from that DEM)")
        else:
            crs = source.sourceCrs()
            if self.parameterAsExtent(parameters, self.EXTENT, context).isNull():
                ext = source.sourceExtent()
            else:
                ext = self.parameterAsExtent(parameters, self.EXTENT, context, crs)
            cell = self.parameterAsDouble(parameters, self.CELL, context) or None
            wkt = crs_to_srs(crs).ExportToWkt()
            grid = grid_over((ext.xMinimum(), ext.yMinimum(), ext.xMaximum(), ext.yMaximum()),
                             cell_m=cell, crs_wkt=wkt, log=steps.log)
        steps.check("surface model")
        surface = surface_of_plane(plane, grid)
        steps.feedback.setProgress(80)
        steps.check("surface model")
        path = write_raster(self, parameters, self.OUTPUT, context, surface, grid)
        attach_style(context, path, "surface")
        return {self.OUTPUT: path, **plane_numbers(plane)}
