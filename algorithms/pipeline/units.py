"""The map's unit polygons as a step: constraint points for the surface, the check of the fitted
surface against them and the ``unit_conflicts`` layer.
"""
from __future__ import annotations


import numpy as np
import shapely

from strikeline.geometry.grid import Grid
from strikeline.io.vector import LayerOut
from strikeline.vocabulary import UNIT_CONFLICTS
from strikeline.surfaces import SurfaceModel
from strikeline.surfaces.units import UnitBounds, bound_violation_m, parse_unit_names, unit_bounds
from strikeline.pipeline.dem_access import dem_for_units
from strikeline.pipeline.options import Log, RunOptions, _quiet


#: A map-unit bound counts as broken by the final surface beyond this many metres.
UNIT_VIOLATION_M = 0.01
#: Constraint points stay this many positional standard errors of the mapped contacts
#: (``--contact-sigma``) inside the units' outlines, at least two DEM cells: 3 sigma keeps 99.7 %
#: of normal digitising errors out (common practice), so the outlines' error makes no contradiction.
UNIT_MARGIN_SIGMAS = 3.0


def map_unit_bounds(polygons, labels, dem, dem_grid: Grid, opts: RunOptions, *, log: Log = _quiet,
                    spacing_m: float | None = None, max_points: int = 2000) -> UnitBounds:
    """The inequality constraints of the map's units (:func:`strikeline.surfaces.units.unit_bounds`): the
    DEM loosened by ``--dem-sigma``, points ``UNIT_MARGIN_SIGMAS`` times ``--contact-sigma`` (at least
    two DEM cells) inside the units' outlines."""
    margin = max(2.0 * max(dem_grid.cell_x_m, dem_grid.cell_y_m), UNIT_MARGIN_SIGMAS * opts.contact_sigma_m)
    dem, dem_grid = dem_for_units(dem, dem_grid, polygons)
    ub = unit_bounds(polygons, labels, dem, dem_grid, units_above=opts.units_above, units_below=opts.units_below,
                     tolerance_m=opts.dem_sigma_m, spacing_m=spacing_m, margin_m=margin, max_points=max_points)
    log(f"map units: {len(ub)} constraint points every {ub.spacing_m:.4g} m ({ub.n_above} under units above "
        f"the surface, {ub.n_below} under units below it), {ub.margin_m:.4g} m inside the units' outlines")
    if len(ub) == 0:
        log("warning: no constraint point from the map units: their polygons lie off the DEM or are "
            "narrower than twice the margin")
    return ub


def map_unit_check(model: SurfaceModel, polygons, labels, dem, dem_grid: Grid, opts: RunOptions,
                   ub: UnitBounds, *, log: Log = _quiet) -> dict:
    """Where the fitted surface still breaks the map's units, checked on a lattice twice as dense
    as the constraint points (so also between them).

    Returns ``{"xy", "unit", "side", "violation_m"}`` of the check points broken by more than
    ``UNIT_VIOLATION_M`` and ``"summary"`` (the ``map_units`` entry of summary.json).
    """
    spacing = ub.spacing_m / 2 if np.isfinite(ub.spacing_m) else None
    dem, dem_grid = dem_for_units(dem, dem_grid, polygons)
    chk = unit_bounds(polygons, labels, dem, dem_grid, units_above=opts.units_above, units_below=opts.units_below,
                      tolerance_m=opts.dem_sigma_m, spacing_m=spacing, margin_m=ub.margin_m,
                      max_points=4 * max(len(ub), 1) + 100)
    z = model.evaluate(chk.bounds[:, 0], chk.bounds[:, 1]) if len(chk) else np.empty(0)
    v = bound_violation_m(chk.bounds, z)
    bad = v > UNIT_VIOLATION_M
    above, below = parse_unit_names(opts.units_above), parse_unit_names(opts.units_below)
    found = sorted({u for u in labels if u is not None})
    summary = {
        "field": opts.unit_field, "units_above": list(above), "units_below": list(below),
        "units_ignored": [u for u in found if u not in above + below],
        "n_points": len(ub), "n_above": ub.n_above, "n_below": ub.n_below, "spacing_m": ub.spacing_m,
        "margin_m": ub.margin_m, "tolerance_m": ub.tolerance_m,
        "check": {"n_points": len(chk), "spacing_m": chk.spacing_m, "threshold_m": UNIT_VIOLATION_M,
                  "n_violated": int(bad.sum()), "share_violated": float(bad.mean()) if len(chk) else None,
                  "max_violation_m": float(v.max()) if len(v) else None,
                  "n_violated_above": int(np.count_nonzero(bad & (chk.side == "above"))),
                  "n_violated_below": int(np.count_nonzero(bad & (chk.side == "below")))},
        "meaning": "where a unit above the surface crops out the surface lies below ground (z <= DEM + "
                   "tolerance); where a unit below crops out it lies above ground (z >= DEM - tolerance)",
    }
    if len(chk):
        log(f"map units: the surface breaks {int(bad.sum())} of {len(chk)} check points "
            f"({100 * bad.mean():.1f}%), by at most {float(v.max()):.2f} m" + (" (layer unit_conflicts)" if bad.any() else ""))
    return {"xy": chk.bounds[bad, :2], "unit": chk.unit[bad], "side": chk.side[bad], "violation_m": v[bad],
            "summary": summary}


def unit_conflicts_layer(check: dict) -> LayerOut:
    """The ``unit_conflicts`` layer: check points where the surface breaks the map's units."""
    from strikeline.pipeline.outputs import vocabulary_layer  # outputs imports this module

    return vocabulary_layer(UNIT_CONFLICTS, shapely.points(check["xy"]) if len(check["xy"]) else np.empty(0, dtype=object),
                            {"unit": np.asarray(check["unit"], dtype=str), "side": np.asarray(check["side"], dtype=str),
                             "violation_m": np.asarray(check["violation_m"], dtype=float)})
