"""The surface step on its own: a surface model of a pick set on a grid, with the map's units as
bounds and the grids a surface tool writes (the QGIS surface-model tool; the whole chain makes the
same calls inside :func:`strikeline.pipeline.compute`).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from strikeline.geometry.grid import Grid
from strikeline.picks import PickSet
from strikeline.pipeline.options import Log, RunOptions, _quiet
from strikeline.pipeline.rasters import forecast_mask
from strikeline.pipeline.steps import model_surface
from strikeline.pipeline.units import map_unit_bounds, map_unit_check


@dataclass
class PicksSurface:
    """A surface modelled from picks and its grids (:func:`surface_from_picks`)."""

    model: object  # strikeline.surfaces.SurfaceModel
    elevation_m: np.ndarray  # the surface on the grid
    standard_error_m: np.ndarray | None = None  # its standard error, when asked for
    forecast_mask: np.ndarray | None = None  # 1 beyond the reach of the data, when asked for
    unit_check: dict | None = None  # with map units: strikeline.pipeline.map_unit_check

    @property
    def dip_deg(self) -> float | None:
        """Dip of the plane, or of the trend's plane part for the other models."""
        p = self.model.summary()["params"]
        return p.get("dip_deg", p.get("trend_dip_deg"))

    @property
    def dip_direction_deg(self) -> float | None:
        """Dip direction of the plane (or of the trend's plane part)."""
        p = self.model.summary()["params"]
        return p.get("dip_direction_deg", p.get("trend_dip_direction_deg"))

    @property
    def cv_rmse_m(self) -> float | None:
        """Cross-validation RMSE of the model used (None when it was not cross-validated)."""
        return self.model.summary()["cv_rmse_m"].get(self.model.kind)


def surface_from_picks(picks: PickSet, opts: RunOptions, grid: Grid, *, boreholes=None, orientations=None,
                       unit_polygons=None, unit_names=None, dem=None, dem_grid: Grid | None = None,
                       standard_error: bool = False, mask: bool = False, what: str = "the picks",
                       log: Log = _quiet, progress=None, is_cancelled=None) -> PicksSurface:
    """Model the ``opts.model`` surface of ``picks`` on ``grid``, as the whole chain does.

    Boreholes (x, y, z rows) and dip readings (x, y, dip, dip direction rows) are honoured with
    the stated errors of ``opts``; the map's unit polygons (with their names and the ``dem`` on
    ``dem_grid``) bound the surface above or below the ground
    (:func:`strikeline.pipeline.map_unit_bounds`) and are checked afterwards
    (:func:`strikeline.pipeline.map_unit_check`). The surface is evaluated on ``grid``, with its
    standard error and the forecast mask when asked for; the model and its choice are logged.
    """
    ub = None
    if unit_polygons is not None:
        ub = map_unit_bounds(unit_polygons, unit_names, dem, dem_grid, opts, log=log)
    model = model_surface(picks, opts, grid, boreholes=boreholes, orientations=orientations,
                          bounds=None if ub is None else ub.bounds, what=what, is_cancelled=is_cancelled)
    check = None if ub is None else map_unit_check(model, unit_polygons, unit_names, dem, dem_grid, opts, ub,
                                                   log=log)
    out = PicksSurface(model, np.empty(0), unit_check=check)
    s = model.summary()
    rmse, dip, dipdir = out.cv_rmse_m, out.dip_deg, out.dip_direction_deg
    log(f"surface model: {model.kind} ({s['selection']}) from {model.n_used} of {model.n_picks} picks"
        + (f", cross-validation RMSE {rmse:.2f} m" if rmse is not None else "")
        + f"; plane dip {dip:.2f}° toward {dipdir:.1f}°; reach of the data {model.reach_m:.0f} m")
    out.elevation_m = model.evaluate_grid(grid, progress=progress, is_cancelled=is_cancelled)
    if standard_error:
        out.standard_error_m = model.standard_error_grid(grid, is_cancelled=is_cancelled)
    if mask:
        out.forecast_mask = forecast_mask(model, grid)
    return out
