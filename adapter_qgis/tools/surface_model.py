"""Tool: a surface grid modelled from elevation picks (plane, quadratic trend, thin-plate spline)."""
from __future__ import annotations

from qgis.core import (
    QgsProcessing,
    QgsProcessingParameterFeatureSink,
    QgsProcessingParameterExtent,
    QgsProcessingParameterRasterDestination,
    QgsProcessingParameterRasterLayer,
)

from strikeline import vocabulary as V
from strikeline.errors import InputError
from strikeline.io.crs import same_crs
from strikeline.pipeline.points import pick_set_of_points
from strikeline.pipeline.picks_surface import surface_from_picks
from strikeline.pipeline.rasters import grid_over, points_bounds
from strikeline.pipeline.options import option
from strikeline.pipeline import (RunOptions, borehole_points, map_unit_polygons, orientation_rows, reproject_to,
                                 unit_conflicts_layer)

from ..base import REF_FERNANDEZ, StrikelineAlgorithm
from ..inputs import (CONSTRAINT_LAYERS, MAP_UNIT_LAYERS, MAP_UNITS, PICKS, add_picks, constraint_options,
                      constraint_parameters, constraint_sigma_parameters, map_unit_options, map_unit_parameters,
                      option_names, read_dem, read_layers, read_picks)
from ..layers import crs_wkt
from ..layers import qgis_crs
from ..outputs import Table, add_outputs, write_raster, write_sink
from ..params import parameter, value
from ..styles import attach_style

REF_SPLINE = ("Duchon, J. (1977). Splines minimizing rotation-invariant semi-norms in Sobolev spaces. "
              "Lect. Notes Math. 571, 85–100. doi:10.1007/BFb0086566; Wahba, G. (1990). "
              "Spline Models for Observational Data. SIAM. doi:10.1137/1.9781611970128")
REF_GCV = ("Craven, P. & Wahba, G. (1979). Smoothing noisy data with spline functions. Numerische "
           "Mathematik 31(4), 377–403. doi:10.1007/BF01404567")
REF_LSI = ("Lawson, C. L. & Hanson, R. J. (1974). Solving Least Squares Problems. Prentice-Hall, "
           "ch. 23 (least squares with inequality constraints).")
REF_HILLIER = ("Hillier, M. J., Schetselaar, E. M., de Kemp, E. A. & Perron, G. (2014). Three-dimensional "
               "modelling of geological surfaces using generalized interpolation with radial basis "
               "functions. Mathematical Geosciences 46(8), 931–953. doi:10.1007/s11004-014-9540-3")


class SurfaceModel(StrikelineAlgorithm):
    NAME = "surfacemodel"
    DISPLAY = "Surface model from picks"
    GROUP = "surfaces"
    FORECAST = True
    SUMMARY = (
        "A grid of the contact surface's elevation (metres) modelled from the elevation picks, "
        "optionally honouring boreholes (points where the surface was drilled) and dip "
        "measurements. The grid is that of a reference raster (give the DEM, so depth below ground "
        "and the predicted trace can follow) or square cells over an extent (default: the picks'). "
        "Optional outputs: the model's standard error and a mask of the cells beyond the reach of "
        "the data (1 = extrapolated: a forecast), which Structure contours uses to dash forecast "
        "parts. The surface GeoTIFF is the input of the structure-contour, dip-grid and depth tools. "
        "Boreholes (the surface's elevation as a field or Z, or collar elevation and depth) and dip "
        "measurements are read as strikeline run reads them, reprojected to the picks' CRS; dip "
        "directions are from grid north of that CRS.")
    METHOD = (
        "Plane: total least squares. Quadratic trend: weighted least squares. Spline: thin-plate "
        "smoothing spline with the smoothing chosen by blocked cross-validation. Choose: cross-validation "
        "of all three on held-out contact segments (blocks sized from the map and from the correlation of "
        "the picks' errors), the simplest within the larger of its standard error and the stated pick error "
        "of the best, unless a chi-square test says its residuals far exceed the stated errors. "
        "Boreholes enter as observations and inequality constraints (least squares with inequality "
        "constraints); dip measurements as slope observations. Outside the data's convex hull the "
        "trend and spline relax smoothly to the plane.")
    REFERENCES = (REF_FERNANDEZ, REF_SPLINE, REF_GCV, REF_LSI, REF_HILLIER)
    METHOD_P = option("model").qgis
    REFERENCE = "REFERENCE"
    EXTENT = "EXTENT"
    CELL = option("cell_m").qgis
    SEED = option("seed").qgis
    OUTPUT = V.SURFACE.name
    STANDARD_ERROR = V.UNCERTAINTY.name
    EXTRAPOLATED = V.FORECAST_MASK.name
    UNIT_CONFLICTS = V.UNIT_CONFLICTS.name

    def initAlgorithm(self, config=None):  # noqa: N802
        add_picks(self)
        self.addParameter(parameter(self, "model"))
        self.addParameter(QgsProcessingParameterRasterLayer(
            self.REFERENCE, self.tr("Reference grid (usually the DEM)"), optional=True))
        self.addParameter(QgsProcessingParameterExtent(
            self.EXTENT, self.tr("Extent without a reference grid (default: the picks')"), optional=True))
        self.addParameter(parameter(self, "cell_m", parent=PICKS))
        for param in (*constraint_parameters(self), *constraint_sigma_parameters(self), *map_unit_parameters(self)):
            self.addParameter(param)
        self.addParameter(parameter(self, "seed"))
        self.addParameter(QgsProcessingParameterRasterDestination(self.OUTPUT, self.tr("Surface elevation")))
        self.addParameter(QgsProcessingParameterRasterDestination(
            self.STANDARD_ERROR, self.tr("Standard error of the surface (m)"), optional=True,
            createByDefault=False))
        self.addParameter(QgsProcessingParameterRasterDestination(
            self.EXTRAPOLATED, self.tr("Forecast mask (1: beyond the reach of the data)"), optional=True,
            createByDefault=False))
        self.addParameter(QgsProcessingParameterFeatureSink(
            self.UNIT_CONFLICTS, self.tr("Where the surface still breaks the map units (with map units)"),
            QgsProcessing.TypeVectorPoint, optional=True, createByDefault=False))
        add_outputs(self, {"unit_check_n_violated": "Map-unit check points the surface still breaks (with map units)",
                           "model_chosen": "Model used",
                           "cv_rmse_m": "Cross-validation RMSE of the model used (m)",
                           "reach_m": "Reach of the data (m)", "dip_deg": "Dip of the (trend) plane (°)",
                           "dip_direction_deg": "Dip direction of the (trend) plane (°)"})

    def _grid(self, parameters, context, steps, source, xyz):
        _, ref_grid, _ = read_dem(self, parameters, self.REFERENCE, context, steps, label="reference grid")
        if ref_grid is not None:
            if not same_crs(crs_wkt(source.sourceCrs()), ref_grid.crs_wkt):
                raise InputError("the picks and the reference grid are in different CRSs; reproject the "
                                 "picks to the reference grid's CRS (or make them from that DEM)")
            return ref_grid.with_nodata(None)
        crs = source.sourceCrs()
        if self.parameterAsExtent(parameters, self.EXTENT, context).isNull():
            bounds = points_bounds(xyz)
        else:
            ext = self.parameterAsExtent(parameters, self.EXTENT, context, crs)
            bounds = (ext.xMinimum(), ext.yMinimum(), ext.xMaximum(), ext.yMaximum())
        cell = value(self, parameters, "cell_m", context)
        names = {**option_names(self), "extent": f"the '{self.parameterDefinition(self.EXTENT).description()}'"}
        return grid_over(bounds, cell_m=cell, crs_wkt=crs_wkt(crs), log=steps.log, names=names)

    def process(self, parameters, context, steps):
        model, seed = (value(self, parameters, name, context) for name in ("model", "seed"))
        picks_src = self.parameterAsSource(parameters, PICKS, context)
        text = tuple(f for f in ("contact_id", "source") if f in picks_src.fields().names())
        xyz, source, layer, name, vals = read_picks(self, parameters, context, steps, text_fields=text)
        opts = RunOptions(contacts=name.path, out="", model=model, seed=seed,
                          **constraint_options(self, parameters, context),
                          **map_unit_options(self, parameters, context))
        # Boreholes and dip measurements as strikeline run takes them (the library's checks and
        # conversions), brought into the picks' CRS.
        extra = read_layers(self, parameters, context, steps, CONSTRAINT_LAYERS)
        names = option_names(self)
        bh = reproject_to(extra.get("boreholes"), layer.crs_wkt, label="boreholes", log=steps.log)
        ori = reproject_to(extra.get("orientations"), layer.crs_wkt, label="dip readings", log=steps.log)
        boreholes_xyz = None if bh is None else borehole_points(bh, opts, names=names)
        orientations = None if ori is None else orientation_rows(ori, opts, names=names)
        grid = self._grid(parameters, context, steps, source, xyz)
        # The map's units as strikeline run takes them: polygons and unit lists checked by the
        # library, the bounds built from the reference grid (the DEM), in the picks' CRS.
        units = read_layers(self, parameters, context, steps, MAP_UNIT_LAYERS)["map_units"]
        polys = labels = dem = dem_grid = None
        if units is not None:
            dem, dem_grid, _ = read_dem(self, parameters, self.REFERENCE, context, steps, label="reference grid")
            if dem is None:
                raise InputError(f"the '{self.parameterDefinition(MAP_UNITS).description()}' need the reference "
                                 "grid: give the DEM as the reference grid, so the units can say where the surface "
                                 "lies below or above the ground")
            units = reproject_to(units, layer.crs_wkt, label="map units", log=steps.log)
            polys, labels = map_unit_polygons(units, opts, names=names)
        steps.feedback.setProgress(10)
        # As strikeline run: cross-validation folds hold out contact segments (the picks'
        # contact_id; all one contact without it). The source only labels picks, it is not used.
        picks = pick_set_of_points(xyz, contact_id=vals.get("contact_id"), source=vals.get("source"))
        res = surface_from_picks(
            picks, opts, grid, boreholes=boreholes_xyz, orientations=orientations, unit_polygons=polys,
            unit_names=labels, dem=dem, dem_grid=dem_grid, what=f"picks {name.what}",
            standard_error=bool(self.parameterAsOutputLayer(parameters, self.STANDARD_ERROR, context)),
            mask=bool(self.parameterAsOutputLayer(parameters, self.EXTRAPOLATED, context)),
            log=steps.log, progress=steps.part(0.1, 0.85), is_cancelled=steps.is_cancelled)
        surf, z, se, ex, check = res.model, res.elevation_m, res.standard_error_m, res.forecast_mask, res.unit_check
        steps.feedback.setProgress(90)
        steps.check("surface model")
        out = {"model_chosen": surf.kind, "cv_rmse_m": res.cv_rmse_m, "reach_m": surf.reach_m, "dip_deg": res.dip_deg,
               "dip_direction_deg": res.dip_direction_deg}
        out[self.OUTPUT] = write_raster(self, parameters, self.OUTPUT, context, z, grid)
        if se is not None:
            out[self.STANDARD_ERROR] = write_raster(self, parameters, self.STANDARD_ERROR, context, se, grid)
        if ex is not None:
            out[self.EXTRAPOLATED] = write_raster(self, parameters, self.EXTRAPOLATED, context, ex, grid)
        attach_style(context, out[self.OUTPUT], "surface")
        if check is not None:
            out["unit_check_n_violated"] = check["summary"]["check"]["n_violated"]
            dest = write_sink(self, parameters, self.UNIT_CONFLICTS, context,
                              Table.of_layer(unit_conflicts_layer(check)), qgis_crs(grid.crs_wkt))
            if dest is not None:
                out[self.UNIT_CONFLICTS] = dest
        return out
