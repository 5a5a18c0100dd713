"""Tool: depth of the surface below ground, its predicted outcrop trace, and the trace misfit."""
from __future__ import annotations

from qgis.core import (
    QgsProcessing,
    QgsProcessingParameterFeatureSink,
    QgsProcessingParameterFeatureSource,
    QgsProcessingParameterRasterDestination,
    QgsProcessingParameterRasterLayer,
)

from strikeline import vocabulary as V
from strikeline.pipeline import contact_misfit_layer, depth_trace_misfit, trace_misfit_layer
from strikeline.pipeline.inputs import join_layers
from strikeline.pipeline.rasters import raster_flag, require_same_grid

from ..base import REF_GDAL_CONTOUR, REF_PRESS, StrikelineAlgorithm
from ..inputs import more_contacts_parameter, read_dem, read_layer, read_more_contacts, to_dem_crs
from ..layers import qgis_crs
from ..outputs import Table, add_outputs, write_raster, write_sink
from ..params import option, parameter
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
        "of every contact vertex to the predicted trace, with its median and 90th percentile, and the "
        "contacts cut into segments of ten DEM cells with each segment's misfit, flagged beyond a "
        "distance (default three cells) - where the model and the map disagree. Give the forecast "
        "mask of Surface model to mark the trace where it is extrapolated beyond the data. The "
        "surface must be on the DEM's grid (Surface model with the DEM as reference grid). Contacts "
        "in several layers: the first in the contacts parameter, the others in the list of more "
        "contact layers, numbered on as the whole chain numbers them.")
    METHOD = ("Depth is the cell-by-cell difference; the trace is the zero contour of the depth "
              "grid from GDAL's contour generator; distances use a spatial index over the trace's "
              "segments; vertices off the DEM's valid cells (bilinear support) are not counted.")
    REFERENCES = (REF_GDAL_CONTOUR, REF_PRESS)
    SURFACE = "SURFACE"
    DEM = "DEM"
    CONTACTS = "CONTACTS"
    DEPTH = V.DEPTH.name
    TRACE = V.PREDICTED_TRACE.name
    MISFIT = V.TRACE_MISFIT.name
    SEGMENTS = V.CONTACT_MISFIT.name
    FORECAST_MASK = "FORECAST_MASK"
    MISFIT_FLAG = option("misfit_flag_m").qgis

    def initAlgorithm(self, config=None):  # noqa: N802
        self.addParameter(QgsProcessingParameterRasterLayer(
            self.SURFACE, self.tr("Surface elevation (from Surface model, on the DEM's grid)")))
        self.addParameter(QgsProcessingParameterRasterLayer(self.DEM, self.tr("DEM (ground elevation)")))
        self.addParameter(parameter(self, "dem_unit"))  # a DEM in feet is turned into metres, as in the chain
        self.addParameter(QgsProcessingParameterFeatureSource(
            self.CONTACTS, self.tr("Mapped contact lines (for the misfit)"), [QgsProcessing.TypeVectorLine],
            optional=True))
        self.addParameter(more_contacts_parameter(self, "More mapped contact line layers (for the misfit, with the first)"))
        self.addParameter(QgsProcessingParameterRasterLayer(
            self.FORECAST_MASK, self.tr("Forecast mask (from Surface model) to mark extrapolated parts"),
            optional=True))
        self.addParameter(parameter(self, "misfit_flag_m", parent=self.DEM, advanced=False))
        self.addParameter(QgsProcessingParameterRasterDestination(self.DEPTH, self.tr("Depth below ground")))
        self.addParameter(QgsProcessingParameterFeatureSink(
            self.TRACE, self.tr("Predicted outcrop trace"), QgsProcessing.TypeVectorLine))
        self.addParameter(QgsProcessingParameterFeatureSink(
            self.MISFIT, self.tr("Contact vertices with their misfit"), QgsProcessing.TypeVectorPoint,
            optional=True, createByDefault=False))
        self.addParameter(QgsProcessingParameterFeatureSink(
            self.SEGMENTS, self.tr("Contact segments and their misfit"), QgsProcessing.TypeVectorLine,
            optional=True, createByDefault=True))
        add_outputs(self, {"trace_misfit_median_m": "Median misfit (m)",
                           "trace_misfit_p90_m": "90th percentile misfit (m)",
                           "trace_misfit_n_vertices": "Contact vertices measured"})

    def process(self, parameters, context, steps):
        dem, dem_grid, dpath = read_dem(self, parameters, self.DEM, context, steps, label="DEM", unit=True)
        surface, grid, spath = read_dem(self, parameters, self.SURFACE, context, steps, label="surface")
        require_same_grid(grid, dem_grid, what_a=f"surface '{spath}'", what_b=f"DEM '{dpath}'")
        mask, mask_grid, mpath = read_dem(self, parameters, self.FORECAST_MASK, context, steps,
                                          label="forecast mask")
        extrapolated_fn = None
        if mask is not None:
            require_same_grid(dem_grid, mask_grid, what_a=f"DEM '{dpath}'", what_b=f"forecast mask '{mpath}'")
            extrapolated_fn = raster_flag(mask, mask_grid, at_least=0.5)
        first = read_layer(self, parameters, self.CONTACTS, context, steps, label="contacts", geometry="line")
        layers = [c for c in (first,) if c is not None] + read_more_contacts(self, parameters, context, steps)
        contacts = None
        if layers:  # one layer of them all, contact ids numbered on as strikeline run numbers them
            contacts, _ = join_layers([to_dem_crs(c, dem_grid, label="contacts", log=steps.log) for c in layers],
                                      label="contacts")
        steps.feedback.setProgress(30)
        steps.check("depth and trace")
        flag_m = self.parameterAsDouble(parameters, self.MISFIT_FLAG, context) or None
        res = depth_trace_misfit(dem, dem_grid, surface, contacts, extrapolated_fn=extrapolated_fn, flag_m=flag_m,
                                 is_cancelled=steps.is_cancelled)
        steps.check("depth and trace")
        misfit = res["misfit"]
        out = {"trace_misfit_median_m": None, "trace_misfit_p90_m": None, "trace_misfit_n_vertices": 0}
        if misfit is not None and misfit.get("median_m") is not None:
            out = {"trace_misfit_median_m": misfit["median_m"], "trace_misfit_p90_m": misfit["p90_m"],
                   "trace_misfit_n_vertices": misfit["n_vertices"]}
            steps.log(f"trace misfit: median {misfit['median_m']:.1f} m, 90th percentile "
                      f"{misfit['p90_m']:.1f} m over {misfit['n_vertices']} contact vertices")
        elif contacts is not None:
            steps.warn(f"trace misfit not computed: {misfit.get('note', 'no predicted trace')}")
        seg = res["segments"]
        n_flagged = 0 if seg is None else sum(bool(f) for f in seg["flagged"])
        if n_flagged:
            steps.warn(f"{n_flagged} of {len(seg['geoms'])} contact segments lie farther "
                       "from the predicted trace than the flag distance: check the map or the model there")
        crs = qgis_crs(dem_grid.crs_wkt)
        out_grid = dem_grid.with_nodata(None)
        p_depth = write_raster(self, parameters, self.DEPTH, context, res["depth"], out_grid)
        d_trace = write_sink(self, parameters, self.TRACE, context,
                             trace_table(res["trace"], extrapolated=res["trace_extrapolated"]
                                         if extrapolated_fn is not None else None), crs)
        d_misfit = d_seg = None
        if contacts is not None:
            vertices = trace_misfit_layer(res["vertices"], res["vertex_distance"])
            d_misfit = write_sink(self, parameters, self.MISFIT, context, Table.of_layer(vertices), crs)
            d_seg = write_sink(self, parameters, self.SEGMENTS, context, Table.of_layer(contact_misfit_layer(seg)),
                               crs)
            attach_style(context, d_seg, "contact_misfit")
        attach_style(context, p_depth, "depth")
        attach_style(context, d_trace, "trace")
        return {self.DEPTH: p_depth, self.TRACE: d_trace, self.MISFIT: d_misfit, self.SEGMENTS: d_seg, **out}
