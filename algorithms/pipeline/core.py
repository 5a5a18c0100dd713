"""The end-to-end chain: inputs -> picks -> plane -> grids -> structure contours -> trace -> files.

Each step is a function that the command line and the QGIS adapter can call on its own; :func:`run`
chains them and writes every output atomically (into a temporary sibling of the output folder,
renamed into place at the end).
"""
from __future__ import annotations

import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import numpy as np
import shapely
from osgeo import ogr

from strikeline import CAUTION, __version__
from strikeline.stats.crossval import holdout_block_m, residual_correlation_m, segment_groups
from strikeline.defaults import (DEFAULT_BOREHOLE_SIGMA_M, DEFAULT_CONTOUR_SIGMA_M, DEFAULT_DEM_SIGMA_M,
                                 DEFAULT_ORIENTATION_SIGMA_DEG, FLAG_CELLS, MODELS, SEGMENT_CELLS,
                                 DEFAULT_CONTACT_SIGMA_M, MISFIT_Z)
from strikeline.attitude.quality import PlaneQuality, assess_plane
from strikeline.errors import CancelledError, InputError, UndeterminedError
from strikeline.attitude.fitting import PlaneFit, fit_plane
from strikeline.geometry.geodesy import grid_to_true_azimuth, meridian_convergence_deg
from strikeline.geometry.grid import Grid
from strikeline.maps.dipgrids import depth_below_ground, dip_grids
from strikeline.io.contours import contour_lines
from strikeline.io.crs import crs_label, same_crs, srs_from_wkt
from strikeline.io.files import atomic_folder, check_out_folder, dumps_stable, file_sha256, json_ready
from strikeline.io.raster import read_raster, write_geotiff
from strikeline.io.vector import LayerOut, VectorLayer, read_layer, write_gpkg
from strikeline.attitude.local import LocalAttitudes, fallback_window_m, local_attitudes
from strikeline.geometry.orientation import dip_direction_from_strike
from strikeline.picks.core import (PickSet, ground_slope_from_contours, picks_from_contours,
                              picks_from_dem, sample_bilinear)
from strikeline.surfaces.core import SurfaceModel, fit_surface
from strikeline.maps.thickness import isopach_grids
from strikeline.surfaces.units import UnitBounds, bound_violation_m, parse_unit_names, unit_bounds
from strikeline.maps.trace import (contact_misfit_segments, distance_to_lines, holdout_misfit_segments, split_lines_by_flag,
                              trace_misfit, vertex_spacing_m)
from strikeline.attitude.confidence import (PlaneConfidence, contour_sigma_to_vertical, dip_is_significant, plane_confidence,
                                   vertical_sigma_of_picks)


Log = Callable[[str], None]


def _quiet(_msg: str) -> None:
    pass


@dataclass
class RunOptions:
    """What ``strikeline run`` was asked to do (the CLI contract of issue 2)."""

    contacts: str
    out: str
    contacts_layer: str | None = None
    where: str | None = None
    dem: str | None = None
    contours: str | None = None
    contours_layer: str | None = None
    elev_field: str | None = None
    interval_m: float = 50.0
    cell_m: float | None = None
    overwrite: bool = False
    pick_spacing_m: float | None = None
    # surface model and extra constraints (issue 4)
    model: str = "auto"
    boreholes: str | None = None
    boreholes_layer: str | None = None
    borehole_z_field: str | None = None
    borehole_collar_field: str | None = None
    borehole_depth_field: str | None = None
    borehole_sigma_m: float = DEFAULT_BOREHOLE_SIGMA_M
    orientations: str | None = None
    orientations_layer: str | None = None
    dip_field: str = "dip"
    dip_direction_field: str | None = "dip_dir"
    strike_field: str | None = None
    orientation_sigma_deg: float = DEFAULT_ORIENTATION_SIGMA_DEG
    top_contacts: str | None = None
    top_contacts_layer: str | None = None
    top_where: str | None = None
    # the geological map's unit polygons as constraints (issue 8)
    map_units: str | None = None
    map_units_layer: str | None = None
    unit_field: str | None = None
    units_above: str | None = None  # comma-separated unit names
    units_below: str | None = None
    misfit_flag_m: float | None = None
    # confidence and local attitudes (issue 3)
    dem_sigma_m: float = DEFAULT_DEM_SIGMA_M
    contour_sigma_m: float = DEFAULT_CONTOUR_SIGMA_M
    contact_sigma_m: float = DEFAULT_CONTACT_SIGMA_M
    window_m: float | None = None
    group_by: str | None = None
    resamples: int = 1000
    seed: int = 0


@dataclass
class Inputs:
    """Inputs in memory, all in one projected CRS (``crs_wkt``)."""

    contacts: VectorLayer
    crs_wkt: str
    dem: np.ndarray | None = None
    dem_grid: Grid | None = None
    contours: VectorLayer | None = None
    contour_elevations_m: np.ndarray | None = None
    paths: dict = field(default_factory=dict)
    boreholes_xyz: np.ndarray | None = None  # (n, 3) x, y, surface elevation
    orientations: np.ndarray | None = None  # (n, 4) x, y, dip, dip direction
    top_contacts: VectorLayer | None = None
    unit_polygons: np.ndarray | None = None  # the map's unit polygons (DEM's CRS) ...
    unit_names: np.ndarray | None = None  # ... and the unit of each, as text


@dataclass
class Results:
    """Everything the chain computed (arrays, geometries and the summary)."""

    picks: PickSet
    plane: PlaneFit
    grid: Grid
    surface: np.ndarray
    dip_deg: np.ndarray
    dip_direction_deg: np.ndarray
    depth_m: np.ndarray | None
    contour_geoms: np.ndarray
    contour_elevations_m: np.ndarray
    trace_geoms: np.ndarray
    summary: dict
    model: SurfaceModel | None = None
    uncertainty_m: np.ndarray | None = None
    contour_extrapolated: np.ndarray | None = None
    trace_extrapolated: np.ndarray | None = None
    contact_misfit: dict | None = None
    attitudes: LocalAttitudes | None = None
    vertical_thickness_m: np.ndarray | None = None
    true_thickness_m: np.ndarray | None = None
    top_picks: PickSet | None = None
    unit_check: dict | None = None  # map units: see map_unit_check


# --------------------------------------------------------------------------- checks on options
def _positive(value, option, *, allow_zero=False):
    ok = value is not None and np.isfinite(value) and (value >= 0 if allow_zero else value > 0)
    if not ok:
        need = "zero or a positive number" if allow_zero else "a positive number"
        raise InputError(f"{option} must be {need}, got {value}")


def check_options(opts: RunOptions) -> None:
    """Refuse contradictory or incomplete options before any work is done."""
    if opts.dem is None and opts.contours is None:
        raise InputError("no topography given: give --dem PATH, --contours PATH --elev-field NAME, or both")
    if opts.model not in MODELS:
        raise InputError(f"--model must be one of {', '.join(MODELS)}; got {opts.model!r}")
    _positive(opts.interval_m, "--interval (metres)")
    if opts.cell_m is not None:
        _positive(opts.cell_m, "--cell (metres)")
    if opts.window_m is not None:
        _positive(opts.window_m, "--window (metres)")
    if opts.pick_spacing_m is not None:
        _positive(opts.pick_spacing_m, "--pick-spacing (metres)")
    if opts.misfit_flag_m is not None:
        _positive(opts.misfit_flag_m, "--misfit-flag (metres)")
    _positive(opts.dem_sigma_m, "--dem-sigma (metres)", allow_zero=True)
    _positive(opts.contour_sigma_m, "--contour-sigma (metres)", allow_zero=True)
    _positive(opts.contact_sigma_m, "--contact-sigma (metres)", allow_zero=True)
    for value, flag in ((opts.dem_sigma_m, "--dem-sigma"), (opts.contour_sigma_m, "--contour-sigma"),
                        (opts.contact_sigma_m, "--contact-sigma")):
        if value > MAX_SIGMA_M:
            raise InputError(f"{flag} {value:g} m is not a map's or a DEM's standard error (at most "
                             f"{MAX_SIGMA_M:g} m); give the error in metres, e.g. {flag} 2")
    _positive(opts.borehole_sigma_m, "--borehole-sigma (metres)", allow_zero=True)
    _positive(opts.orientation_sigma_deg, "--orientation-sigma (degrees)", allow_zero=True)
    if not (isinstance(opts.resamples, int) and opts.resamples >= 100):
        raise InputError(f"--resamples must be a whole number of at least 100, got {opts.resamples}")
    check_unit_options(opts)
    check_out_folder(opts.out, overwrite=opts.overwrite,
                     inputs=(opts.contacts, opts.dem, opts.contours, opts.boreholes, opts.orientations,
                             opts.top_contacts, opts.map_units))


def check_unit_options(opts: RunOptions, *, names: dict | None = None) -> None:
    """The map-unit options go together: a layer, its unit field, at least one unit list, no unit
    on both sides, and a DEM (``names`` says how to name the options; default the CLI's)."""
    names = names or CLI_OPTION_NAMES
    above, below = parse_unit_names(opts.units_above), parse_unit_names(opts.units_below)
    if not opts.map_units:
        if above or below or opts.unit_field:
            given = names["units_above"] if above else names["units_below"] if below else names["unit_field"]
            raise InputError(f"{given} needs {names['map_units']}: give the polygon layer of the map's units too")
        return
    if not opts.dem:
        raise InputError(f"{names['map_units']} needs a DEM (--dem): the units say whether the surface lies "
                         "below or above the ground, and the ground comes from the DEM")
    _check_unit_lists(opts, names, f"'{opts.map_units}'")


def _check_unit_lists(opts: RunOptions, names: dict, what: str) -> None:
    above, below = parse_unit_names(opts.units_above), parse_unit_names(opts.units_below)
    if not opts.unit_field:
        raise InputError(f"{names['map_units']} {what}: name the field that holds each polygon's unit with "
                         f"{names['unit_field']}")
    if not above and not below:
        raise InputError(f"{names['map_units']} {what}: say which units lie above the surface "
                         f"({names['units_above']}) and/or below it ({names['units_below']}), as comma-separated "
                         "unit names")
    both = sorted(set(above) & set(below))
    if both:
        raise InputError(f"{names['units_above']} and {names['units_below']} both name {', '.join(both)}; a unit "
                         "lies on one side of the surface only - remove it from one list")


# --------------------------------------------------------------------------- loading
def reproject_to(lyr: VectorLayer | None, target, *, label: str, log: Log = _quiet) -> VectorLayer | None:
    """``lyr`` in the CRS ``target`` (an ``osr.SpatialReference``), with a log line when it moves.

    ``label`` names the layer in the log line (``"contacts"``, ``"boreholes"``).
    """
    if lyr is None or same_crs(lyr.srs, target):
        return lyr
    log(f"reprojecting {label} '{lyr.path}' from {crs_label(lyr.srs)} to {crs_label(target)}")
    return lyr.reprojected(target)


#: How the command line names the options that messages refer to; the QGIS adapter passes the
#: labels of its own parameters instead.
CLI_OPTION_NAMES = {
    "elev_field": "--elev-field", "group_by": "--group-by",
    "borehole_z_field": "--borehole-z-field", "borehole_collar_field": "--borehole-collar-field",
    "borehole_depth_field": "--borehole-depth-field", "dip_field": "--dip-field",
    "dip_direction_field": "--dip-direction-field", "strike_field": "--strike-field",
    "map_units": "--map-units", "unit_field": "--unit-field", "units_above": "--units-above",
    "units_below": "--units-below",
}


def borehole_points(lyr: VectorLayer, opts: RunOptions, *, names: dict = CLI_OPTION_NAMES) -> np.ndarray:
    """``(n, 3)`` borehole positions and the surface's elevation in each.

    The elevation is ``opts.borehole_z_field``, or collar minus depth, or the points' Z.
    ``names`` says how to name the options in messages.
    """
    xy = shapely.get_coordinates(lyr.geoms)
    if len(xy) != len(lyr):
        raise InputError(f"{lyr.what} holds multi-point features; give one point per borehole")
    if opts.borehole_z_field:
        z = lyr.numeric_field(opts.borehole_z_field, option=names["borehole_z_field"])
    elif opts.borehole_collar_field or opts.borehole_depth_field:
        if not (opts.borehole_collar_field and opts.borehole_depth_field):
            raise InputError(
                f"boreholes '{lyr.path}': give both {names['borehole_collar_field']} and "
                f"{names['borehole_depth_field']} (collar elevation and depth down to the surface), "
                f"or {names['borehole_z_field']}"
            )
        collar = lyr.numeric_field(opts.borehole_collar_field, option=names["borehole_collar_field"])
        depth = lyr.numeric_field(opts.borehole_depth_field, option=names["borehole_depth_field"])
        if np.any(depth[np.isfinite(depth)] < 0):
            raise InputError(
                f"field '{opts.borehole_depth_field}' of {lyr.what} holds negative depths; depths are "
                "measured downward from the collar, in metres"
            )
        z = collar - depth
    else:
        z = lyr.z
        if z is None or not np.isfinite(z).any():
            raise InputError(
                f"boreholes {lyr.what} carry no elevation of the surface: name it with "
                f"{names['borehole_z_field']}, or give {names['borehole_collar_field']} and "
                f"{names['borehole_depth_field']}, or use Point Z geometries"
            )
    pts = np.column_stack([xy, z])
    pts = pts[np.isfinite(pts).all(axis=1)]
    if len(pts) == 0:
        raise InputError(f"boreholes {lyr.what} hold no borehole with a usable elevation")
    return pts


def orientation_rows(lyr: VectorLayer, opts: RunOptions, *, names: dict = CLI_OPTION_NAMES) -> np.ndarray:
    """``(n, 4)`` x, y, dip, dip direction of the dip measurements (strike by the right-hand rule
    is turned into a dip direction); ``names`` says how to name the options in messages."""
    xy = shapely.get_coordinates(lyr.geoms)
    if len(xy) != len(lyr):
        raise InputError(f"{lyr.what} holds multi-point features; give one point per measurement")
    dip = lyr.numeric_field(opts.dip_field, option=names["dip_field"])
    if opts.strike_field:
        dd = dip_direction_from_strike(lyr.numeric_field(opts.strike_field, option=names["strike_field"]))
    else:
        dd = lyr.numeric_field(opts.dip_direction_field or "dip_dir", option=names["dip_direction_field"])
    rows = np.column_stack([xy, dip, dd])
    rows = rows[np.isfinite(rows).all(axis=1)]
    bad = (rows[:, 2] < 0) | (rows[:, 2] >= 89) | (rows[:, 3] < 0) | (rows[:, 3] > 360)
    if bad.any():
        raise InputError(
            f"{lyr.what}: {int(bad.sum())} measurement(s) out of range (dip must lie in 0-89 degrees, "
            f"dip direction in 0-360); fix the values or the field names ({names['dip_field']}, "
            f"{names['dip_direction_field']})"
        )
    if len(rows) == 0:
        raise InputError(f"{lyr.what} holds no complete dip measurement")
    return rows


def load_inputs(opts: RunOptions, *, log: Log = _quiet) -> Inputs:
    """Read every input and bring it into one projected CRS (the DEM's, else the contacts')."""
    check_options(opts)
    contacts = read_layer(opts.contacts, layer=opts.contacts_layer, where=opts.where,
                          label="contacts", geometry="line", layer_option="--contacts-layer")
    dem = grid = None
    if opts.dem:
        dem, grid = read_raster(opts.dem, label="DEM")
    contours = boreholes = orientations = top = None
    if opts.contours:
        contours = read_layer(opts.contours, layer=opts.contours_layer, label="contours",
                              geometry="line", layer_option="--contours-layer")
    if opts.boreholes:
        boreholes = read_layer(opts.boreholes, layer=opts.boreholes_layer, label="boreholes",
                               geometry="point", layer_option="--boreholes-layer")
    if opts.orientations:
        orientations = read_layer(opts.orientations, layer=opts.orientations_layer, label="orientations",
                                  geometry="point", layer_option="--orientations-layer")
    if opts.top_contacts:
        top = read_layer(opts.top_contacts, layer=opts.top_contacts_layer, where=opts.top_where,
                         label="top contacts", geometry="line", layer_option="--top-contacts-layer")
    units = None
    if opts.map_units:
        units = read_layer(opts.map_units, layer=opts.map_units_layer, label="map units", geometry="polygon",
                           layer_option="--map-units-layer")
    paths = {k: v for k, v in (("contacts", opts.contacts), ("dem", opts.dem), ("contours", opts.contours),
                               ("boreholes", opts.boreholes), ("orientations", opts.orientations),
                               ("top_contacts", opts.top_contacts), ("map_units", opts.map_units)) if v}
    return assemble_inputs(contacts, opts, dem=dem, dem_grid=grid, contours=contours, boreholes=boreholes,
                           orientations=orientations, top_contacts=top, map_units=units, paths=paths,
                           log=log)


def assemble_inputs(contacts: VectorLayer, opts: RunOptions, *, dem=None, dem_grid: Grid | None = None,
                    contours: VectorLayer | None = None, boreholes: VectorLayer | None = None,
                    orientations: VectorLayer | None = None, top_contacts: VectorLayer | None = None,
                    map_units: VectorLayer | None = None, paths: dict | None = None, log: Log = _quiet, names: dict = CLI_OPTION_NAMES) -> Inputs:
    """Check layers already in memory and bring them into one CRS: the second half of
    :func:`load_inputs`, for callers that read the layers themselves (the QGIS adapter).

    The target CRS is the DEM's, else the contacts'; other layers are reprojected with a log line.
    ``paths`` (input name -> file) is used for the checksums in the summary; entries that are not
    files are left out of them.
    """
    if opts.group_by and opts.group_by not in contacts.fields:
        raise InputError(
            f"{names['group_by']}: {contacts.what} has no field '{opts.group_by}' "
            f"(fields: {', '.join(contacts.fields) or 'none'}); name one of its fields"
        )
    if dem is not None and dem_grid is None:
        raise InputError("a DEM array needs its grid")
    target = srs_from_wkt(dem_grid.crs_wkt) if dem is not None else contacts.srs
    elev = None
    if contours is not None:
        if not opts.elev_field:
            raise InputError(
                f"contours {contours.what}: the elevation field is not named; add {names['elev_field']} "
                "(the numeric field that holds each contour's elevation)"
            )
        elev = contours.numeric_field(opts.elev_field, option=names["elev_field"])
        if not np.isfinite(elev).any():
            raise InputError(
                f"field '{opts.elev_field}' of {contours.what} holds no elevation (all null); "
                f"name the field that holds the contour elevations with {names['elev_field']}"
            )
    contacts = reproject_to(contacts, target, label="contacts", log=log)
    contours = reproject_to(contours, target, label="contours", log=log)
    boreholes = reproject_to(boreholes, target, label="boreholes", log=log)
    orientations = reproject_to(orientations, target, label="orientations", log=log)
    top_contacts = reproject_to(top_contacts, target, label="top contacts", log=log)
    unit_polys = unit_labels = None
    if map_units is not None:
        if dem is None:
            raise InputError(f"{names['map_units']} {map_units.what} needs a DEM: the units say whether the "
                             "surface lies below or above the ground, and the ground comes from the DEM")
        map_units = reproject_to(map_units, target, label="map units", log=log)
        unit_polys, unit_labels = map_unit_polygons(map_units, opts, names=names)
    return Inputs(contacts=contacts, crs_wkt=target.ExportToWkt(), dem=dem, dem_grid=dem_grid,
                  contours=contours, contour_elevations_m=elev, paths=dict(paths or {}),
                  boreholes_xyz=None if boreholes is None else borehole_points(boreholes, opts, names=names),
                  orientations=None if orientations is None else orientation_rows(orientations, opts, names=names),
                  top_contacts=top_contacts, unit_polygons=unit_polys, unit_names=unit_labels)


def map_unit_polygons(lyr: VectorLayer, opts: RunOptions, *, names: dict = CLI_OPTION_NAMES):
    """``(polygons, unit names)`` of the map-units layer, checked against ``--units-above`` and
    ``--units-below`` (names not found are an error that lists the units found)."""
    _check_unit_lists(opts, names, lyr.what)
    field = opts.unit_field
    if field not in lyr.fields:
        raise InputError(f"{names['unit_field']}: map units {lyr.what} has no field '{field}' "
                         f"(fields: {', '.join(lyr.fields) or 'none'}); name the field that holds the units")
    labels = np.array([None if v is None else str(v).strip() for v in lyr.fields[field]], dtype=object)
    found = sorted({u for u in labels if u is not None})
    wanted = parse_unit_names(opts.units_above) + parse_unit_names(opts.units_below)
    missing = [u for u in wanted if u not in found]
    if missing:
        shown = ", ".join(found[:40]) + (f" and {len(found) - 40} more" if len(found) > 40 else "")
        raise InputError(f"{names['units_above']}/{names['units_below']}: unit(s) {', '.join(missing)} not found "
                         f"in field '{field}' of map units {lyr.what} (units found: {shown or 'none'}); use the "
                         "names as mapped")
    return lyr.geoms, labels


#: How the spline's smoothing is chosen: by the same blocked cross-validation as the models (hold-out
#: blocks at least twice the correlation length of the picks' errors), because generalized
#: cross-validation assumes independent errors and, with digitising errors shared along a contact,
#: interpolates the picks (Opsomer, Wang & Yang 2001); the discrepancy principle against the stated
#: error ('discrepancy') oversmooths wherever the stated error is larger than the real one.
SPLINE_SMOOTHING = "kfold"


#: Largest standard error accepted for --dem-sigma, --contour-sigma, --contact-sigma (metres).
MAX_SIGMA_M = 1000.0


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
    return LayerOut("unit_conflicts", shapely.points(check["xy"]) if len(check["xy"]) else np.empty(0, dtype=object),
                    {"unit": np.asarray(check["unit"], dtype=str), "side": np.asarray(check["side"], dtype=str),
                     "violation_m": np.asarray(check["violation_m"], dtype=float)}, ogr.wkbPoint)


# --------------------------------------------------------------------------- steps
def collect_picks(inputs: Inputs, *, contacts: VectorLayer | None = None, spacing_m: float | None = None,
                  log: Log = _quiet, progress=None, is_cancelled=None) -> PickSet:
    """Elevation picks on every contact, from the DEM (every ``spacing_m``, default the cell size)
    and/or the contour lines."""
    c = inputs.contacts if contacts is None else contacts
    sets = []
    if inputs.dem is not None:
        dem_picks = picks_from_dem(c.geoms, inputs.dem, inputs.dem_grid, contact_ids=c.fids,
                                   spacing_m=spacing_m, progress=progress, is_cancelled=is_cancelled)
        if len(dem_picks) == 0:
            dem_name = f"DEM '{inputs.paths['dem']}'" if "dem" in inputs.paths else "the DEM"
            msg = (f"contacts {c.what} lie entirely outside the valid cells of {dem_name}"
                   " (outside its extent or over nodata)")
            if inputs.contours is None:
                raise InputError(msg + "; give a DEM that covers the contacts, or check that both are "
                                       "in the CRS their files declare")
            log("warning: " + msg + "; using contour picks only")
        sets.append(dem_picks)
    if inputs.contours is not None:
        sets.append(picks_from_contours(c.geoms, inputs.contours.geoms, inputs.contour_elevations_m,
                                        contact_ids=c.fids, progress=progress, is_cancelled=is_cancelled))
    return PickSet.concat(*sets)


def fit_picks(picks: PickSet, *, what: str = "the picks") -> PlaneFit:
    """Best-fit plane of a pick set (errors name the pick set)."""
    try:
        return fit_plane(picks.xyz)
    except InputError as exc:
        raise type(exc)(f"{what}: {exc}") from None


def pick_sigmas(inputs: Inputs, picks: PickSet, opts: RunOptions) -> np.ndarray:
    """Vertical standard error of every pick: the DEM error and the contact's positional error
    through the ground slope for DEM picks; the contour's positional error through the slope
    for contour picks."""
    slope = np.full(len(picks), np.nan)
    is_contour = picks.source == "contours"
    dem_slope = None
    if inputs.dem is not None and ((is_contour.any() and opts.contour_sigma_m > 0)
                                   or (~is_contour).any() and opts.contact_sigma_m > 0):
        dem_dip, _ = dip_grids(inputs.dem, inputs.dem_grid)
        dem_slope = sample_bilinear(dem_dip.astype(float), inputs.dem_grid, picks.xyz[:, 0], picks.xyz[:, 1])
    if is_contour.any() and opts.contour_sigma_m > 0:
        xy = picks.xyz[is_contour, :2]
        s = dem_slope[is_contour] if dem_slope is not None else np.full(len(xy), np.nan)
        missing = ~np.isfinite(s)
        if missing.any() and inputs.contours is not None:
            s[missing] = ground_slope_from_contours(xy[missing, 0], xy[missing, 1], inputs.contours.geoms,
                                                    inputs.contour_elevations_m)
        # where no slope can be found, take the sheet's median slope (a neutral fallback)
        med = np.nanmedian(s) if np.isfinite(s).any() else 0.0
        slope[is_contour] = np.clip(np.where(np.isfinite(s), s, med), 0.0, 89.0)
    slope = np.where(np.isfinite(slope), slope, 0.0)
    sigma = vertical_sigma_of_picks(picks.source, slope, dem_sigma_m=opts.dem_sigma_m,
                                    contour_sigma_m=opts.contour_sigma_m)
    if dem_slope is not None and opts.contact_sigma_m > 0:
        on_dem = ~is_contour & np.isfinite(dem_slope)
        extra = contour_sigma_to_vertical(opts.contact_sigma_m, np.clip(dem_slope[on_dem], 0.0, 89.0))
        sigma = np.asarray(sigma, dtype=float).copy()
        sigma[on_dem] = np.hypot(sigma[on_dem], extra)
    return sigma


def attitude_of(xyz, sigma, *, crs_wkt: str, what: str, strict: bool, resamples: int = 1000,
                seed: int = 0, blocks=None, is_cancelled=None) -> dict:
    """Plane, 95% confidence, quality and true-north azimuth of one pick set, as a summary dict.

    With ``strict`` an undetermined pick set is an error (the sheet-wide plane); otherwise it is
    reported with ``quality: undetermined`` and no attitude (a group or window). ``blocks``
    (one label per pick, e.g. contact segments) makes the bootstrap resample whole blocks.

    A plane whose dip does not differ from zero at 95%
    (:func:`strikeline.attitude.confidence.dip_is_significant`) is horizontal within its confidence:
    ``dip_significant`` is false, ``dip`` and ``dip_ci95`` are still given, and the dip
    direction, its half-width, its true-north azimuth and the strike are ``None`` (they are
    undefined for a horizontal plane), with a ``horizontal`` sentence saying so.
    """
    xyz = np.asarray(xyz, dtype=float)
    try:
        plane = fit_plane(xyz)
    except UndeterminedError as exc:
        if strict:
            raise UndeterminedError(f"{what}: {exc}") from None
        q = assess_plane(xyz) if len(xyz) else None
        return {"quality": "undetermined", "reason": str(exc) if q is None else q.reason,
                "advice": "" if q is None else q.advice, "n_picks": int(len(xyz))}
    conf: PlaneConfidence | None = None
    if len(xyz) >= 4:
        conf = plane_confidence(xyz, sigma_z_m=sigma, n_resamples=resamples, n_draws=resamples,
                                seed=seed, groups=blocks, is_cancelled=is_cancelled)
    typical_sigma = float(np.median(sigma)) if sigma is not None and len(sigma) else None
    quality: PlaneQuality = assess_plane(xyz, sigma_z_m=typical_sigma,
                                         dip_ci95_deg=None if conf is None else conf.dip_ci95_deg)
    if quality.quality == "undetermined":
        if strict:
            raise UndeterminedError(f"{what}: the attitude is undetermined - {quality.reason}; "
                                    f"{quality.advice}")
        return {"quality": "undetermined", "reason": quality.reason, "advice": quality.advice,
                "n_picks": plane.n_points}
    gamma = meridian_convergence_deg(crs_wkt, plane.centroid[0], plane.centroid[1])
    significant = conf.dip_significant if conf is not None else dip_is_significant(plane.dip_deg, None)
    out = {
        "dip": plane.dip_deg,
        "dip_direction": plane.dip_direction_deg,
        "strike_rhr": plane.strike_rhr_deg,
        "rms_m": plane.rms_m,
        "centroid": list(plane.centroid),
        "n_picks": plane.n_points,
        "dip_ci95": None if conf is None else conf.dip_ci95_deg,
        "dip_direction_ci95": None if conf is None else conf.dip_direction_ci95_deg,
        "cone95": None if conf is None else conf.cone95_deg,
        "confidence_method": "three-point (no confidence)" if conf is None else conf.method,
        "quality": quality.quality,
        "reason": quality.reason,
        "advice": quality.advice,
        "coplanarity_M": quality.coplanarity,
        "collinearity_K": quality.collinearity,
        "meridian_convergence_deg": gamma,
        "dip_direction_true": float(grid_to_true_azimuth(plane.dip_direction_deg, gamma)),
        "dip_significant": significant,
    }
    if not significant:
        # the horizontal lies in the 95% region of the tilt, so the dip's interval reaches 0
        if conf is not None:
            out["dip_ci95"] = max(conf.dip_ci95_deg, plane.dip_deg)
        ci = "" if conf is None else f" +/- {out['dip_ci95']:.2g}"
        out.update(dip_direction=None, strike_rhr=None, dip_direction_true=None, dip_direction_ci95=None,
                   horizontal=(f"horizontal within its 95% confidence: dip {plane.dip_deg:.2g}{ci} deg does "
                               "not differ from 0, so the plane has no dip direction or strike"))
    elif out["quality"] == "good" and out["dip_direction_ci95"] is not None \
            and out["dip_direction_ci95"] >= POOR_DIRECTION_DEG:
        # a dip direction known only to a quadrant or worse is not a good attitude
        out.update(quality="weak",
                   reason=f"the dip direction is poorly fixed (+/- {out['dip_direction_ci95']:.0f} deg at 95%); "
                          + out["reason"],
                   advice="more relief along the contact, or a dip reading, fixes the direction")
    return out


#: A dip direction whose 95% half-width reaches this many degrees makes a plane at best 'weak'.
POOR_DIRECTION_DEG = 45.0


def surface_grid(inputs: Inputs, opts: RunOptions, *, log: Log = _quiet) -> Grid:
    """The output grid: the DEM's grid, else ``--cell`` metres over the contour layer's extent."""
    if inputs.dem_grid is not None:
        return inputs.dem_grid.with_nodata(None)
    geoms = inputs.contours.geoms if inputs.contours is not None else inputs.contacts.geoms
    xmin, ymin, xmax, ymax = shapely.total_bounds(geoms)
    cell = opts.cell_m
    if cell is None:
        span = max(xmax - xmin, ymax - ymin)
        raw = span / 500.0
        mag = 10 ** np.floor(np.log10(raw))
        cell = float(min((m * mag for m in (1, 2, 5, 10) if m * mag >= raw), default=raw))
        log(f"no --cell given: using {cell:g} m cells over the contour layer's extent")
    return Grid.from_bounds(xmin, ymin, xmax, ymax, cell_m=cell, crs_wkt=inputs.crs_wkt)


def contact_segments(picks: PickSet, *, cell_m: float, vertex_spacing_m: float = 0.0) -> np.ndarray:
    """Label of the contact segment of every pick: the part of one contact inside one square
    block of :func:`strikeline.stats.crossval.holdout_block_m` (about the typical distance from the
    mapped ground to the nearest pick, at least two vertex spacings of the mapped lines and three
    cells). Used for cross-validation folds and for the block bootstrap, so that neighbouring
    picks, which share their errors, stay together."""
    return segment_labels(picks.xyz, picks.contact_id, cell_m=cell_m, vertex_spacing_m=vertex_spacing_m)


def segment_labels(xyz, contact_id, *, cell_m: float = 1.0, vertex_spacing_m: float = 0.0) -> np.ndarray:
    """:func:`contact_segments` for bare arrays: ``xyz`` (n, 3) and a contact id per point
    (non-finite ids count as one contact of their own)."""
    xyz = np.asarray(xyz, dtype=float)
    cid = np.asarray(contact_id, dtype=float)
    cid = np.where(np.isfinite(cid), cid, -1).astype(np.int64)
    block_m = segment_block_m(xyz, cid, cell_m=cell_m, vertex_spacing_m=vertex_spacing_m) if len(xyz) else 1.0
    return segment_groups(xyz[:, 0], xyz[:, 1], cid, block_m=block_m)


def segment_block_m(xyz, contact_id, *, cell_m: float, vertex_spacing_m: float = 0.0, trend=None,
                    sigma=None) -> float:
    """Side of the contact-segment blocks (:func:`strikeline.stats.crossval.holdout_block_m`), with the
    correlation length of the picks' errors along the contacts
    (:func:`strikeline.stats.crossval.residual_correlation_m`; residuals from a plane, or from
    ``trend``, the elevation of a smooth fit at each pick)."""
    xyz = np.asarray(xyz, dtype=float)
    return holdout_block_m(xyz[:, :2], vertex_spacing_m=vertex_spacing_m, cell_m=cell_m,
                           correlation_m=residual_correlation_m(
                               xyz, contact_id, trend=trend,
                               sigma_m=None if sigma is None else float(np.sqrt(np.mean(np.square(sigma))))))


def smooth_trend(xyz, sigma) -> np.ndarray | None:
    """Elevation at every pick of a thin-plate spline smoothed until its residuals match the
    stated pick errors (no cross-validation): the surface's shape without the picks' errors, so
    that the errors' correlation along the contacts can be measured on a curved surface too.
    ``None`` when no spline can be fitted (too few picks)."""
    try:
        m = fit_surface(xyz, model="spline", smoothing="discrepancy", data_sigma_m=sigma,
                        cross_validate_model=False)
    except (UndeterminedError, InputError):
        return None
    return m.evaluate(xyz[:, 0], xyz[:, 1])


def model_surface(picks: PickSet, opts: RunOptions, grid: Grid, *, boreholes=None, orientations=None, bounds=None,
                  what: str, is_cancelled=None, sigma=None, vertex_spacing_m: float = 0.0) -> SurfaceModel:
    """Fit the ``--model`` surface to picks (and constraints), folds by contact segment.

    ``sigma`` (one per pick, metres) is the stated pick error the model choice is judged
    against (default: ``--dem-sigma`` for every pick).
    """
    xyz = picks.xyz
    data_sigma = opts.dem_sigma_m if sigma is None else sigma
    corr = residual_correlation_m(xyz, picks.contact_id, trend=smooth_trend(xyz, data_sigma),
                                  sigma_m=float(np.sqrt(np.mean(np.square(data_sigma)))))
    block = holdout_block_m(xyz[:, :2], vertex_spacing_m=vertex_spacing_m, cell_m=grid.cell_x_m, correlation_m=corr)
    cid = np.asarray(picks.contact_id, dtype=float)
    groups = segment_groups(xyz[:, 0], xyz[:, 1], np.where(np.isfinite(cid), cid, -1).astype(np.int64), block_m=block)
    bh = None
    if boreholes is not None:
        bh = np.column_stack([boreholes, np.full(len(boreholes), opts.borehole_sigma_m)])
    orient = None
    if orientations is not None:
        orient = np.column_stack([orientations, np.full(len(orientations), opts.orientation_sigma_deg)])
    data_sigma = opts.dem_sigma_m if sigma is None else sigma
    try:
        return fit_surface(xyz, model=opts.model, boreholes=bh, orientations=orient, groups=groups,
                           seed=opts.seed, data_sigma_m=data_sigma, block_m=block, error_correlation_m=corr, is_cancelled=is_cancelled, smoothing=SPLINE_SMOOTHING,
                           bounds=bounds)
    except UndeterminedError as exc:
        raise UndeterminedError(f"{what}: {exc}") from None


def structure_contours(surface, grid: Grid, *, interval_m: float, extrapolated_fn=None):
    """Structure contours of a surface grid, split where they leave the reach of the data.

    Returns ``(lines, elevation_m, extrapolated)``; ``extrapolated`` is all false without an
    ``extrapolated_fn(x, y)``.
    """
    geoms, levels = contour_lines(surface, grid, interval_m=interval_m)
    if extrapolated_fn is None:
        return geoms, np.asarray(levels, dtype=float), np.zeros(len(geoms), dtype=bool)
    spacing = min(grid.cell_x_m, grid.cell_y_m)
    parts, flags, src = split_lines_by_flag(geoms, extrapolated_fn, spacing_m=spacing)
    return parts, (np.asarray(levels, dtype=float)[src] if len(src) else np.empty(0)), flags


def depth_trace_misfit(dem, dem_grid: Grid, surface, contacts: VectorLayer | None = None, *,
                       extrapolated_fn=None, flag_m=None, model: SurfaceModel | None = None,
                       z_flag: float = MISFIT_Z, dem_sigma_m: float = DEFAULT_DEM_SIGMA_M,
                       contact_sigma_m: float = DEFAULT_CONTACT_SIGMA_M) -> dict:
    """Depth below ground, the predicted outcrop trace and its misfit to the mapped contacts.

    Depth = DEM − surface (positive where the surface lies below ground); the trace is its zero
    line, split where ``extrapolated_fn`` changes; the misfit of the fitted surface's trace is
    measured from every contact vertex over valid DEM cells (median, 90th percentile).

    The misfit check cuts the contacts into segments of ``SEGMENT_CELLS`` cells. With the
    fitted ``model`` every segment is compared with the surface forecast WITHOUT the picks
    near it (:meth:`strikeline.surfaces.core.SurfaceModel.holdout_prediction`), so a mistraced
    stretch or an unmapped fault cannot bend the surface it is checked against; it is flagged
    when its vertical misfit exceeds ``z_flag`` standard errors, or, with ``flag_m``, when its horizontal misfit exceeds that many
    metres (:func:`strikeline.maps.trace.holdout_misfit_segments`). Without a model (a surface
    raster only) segments are compared with that surface's trace and flagged beyond
    ``flag_m`` (default ``FLAG_CELLS`` cells). The standard error of a vertical misfit is the
    forecast's own error and the stated error of the ground there:
    ``sqrt(dem_sigma_m² + (contact_sigma_m · tan(ground slope))²)`` — the DEM's error and the
    contact's positional error taken through the slope (as for contour picks).

    Returns
    -------
    dict
        ``depth``, ``trace``, ``trace_extrapolated``, ``misfit`` (dict), ``vertices`` and
        ``vertex_distance`` (contact vertices on the DEM and their distance to the trace),
        ``segments``, ``flag_m``, ``check`` (how segments were checked).
    """
    spacing = min(dem_grid.cell_x_m, dem_grid.cell_y_m)
    depth = depth_below_ground(dem, surface)
    raw_trace, _ = contour_lines(depth, dem_grid, levels=[0.0])
    if extrapolated_fn is not None:
        trace, tflags, _ = split_lines_by_flag(raw_trace, extrapolated_fn, spacing_m=spacing)
    else:
        trace, tflags = raw_trace, np.zeros(len(raw_trace), dtype=bool)
    out = {"depth": depth, "trace": trace, "trace_extrapolated": tflags, "flag_m": flag_m,
           "misfit": {"median": None, "p90": None, "n_vertices": 0, "note": "no contacts given"},
           "vertices": np.empty((0, 2)), "vertex_distance": np.empty(0), "segments": None,
           "check": None}
    if contacts is None:
        return out
    verts = shapely.get_coordinates(contacts.geoms)
    verts = verts[np.isfinite(sample_bilinear(dem, dem_grid, verts[:, 0], verts[:, 1]))]
    out["misfit"] = trace_misfit(verts, raw_trace)
    out["vertices"] = verts
    out["vertex_distance"] = distance_to_lines(verts, raw_trace)
    segment_m = SEGMENT_CELLS * spacing
    if model is not None:
        h = spacing

        def check_fn(x, y):
            ground = sample_bilinear(dem, dem_grid, x, y)
            z, se, gx, gy = model.holdout_prediction(x, y)
            dgx = (sample_bilinear(dem, dem_grid, x + h, y) - sample_bilinear(dem, dem_grid, x - h, y)) / (2 * h)
            dgy = (sample_bilinear(dem, dem_grid, x, y + h) - sample_bilinear(dem, dem_grid, x, y - h)) / (2 * h)
            pick_var = dem_sigma_m ** 2 + (contact_sigma_m * np.hypot(dgx, dgy)) ** 2
            return ground - z, np.sqrt(se ** 2 + pick_var), np.hypot(dgx - gx, dgy - gy)

        out["segments"] = holdout_misfit_segments(contacts.geoms, contacts.fids, check_fn, segment_m=segment_m,
                                                  z_flag=z_flag, flag_m=flag_m)
        out["check"] = {
            "method": "each segment against the surface fitted without the picks near it "
                      f"(cross-validation folds of {model.n_folds}; robust refits for plane and trend2)"
                      if model.n_folds else "against the fitted surface (no cross-validation was possible)",
            "flag_rule": (f"|vertical misfit| > {z_flag:g} standard errors" if flag_m is None
                          else f"horizontal misfit > {flag_m:g} m (--misfit-flag)"),
            "dem_sigma_m": dem_sigma_m, "contact_sigma_m": contact_sigma_m,
        }
        return out

    def on_valid(x, y):
        return np.isfinite(sample_bilinear(dem, dem_grid, x, y))

    flag_m = FLAG_CELLS * spacing if flag_m is None else flag_m
    out["flag_m"] = flag_m
    out["segments"] = contact_misfit_segments(contacts.geoms, contacts.fids, raw_trace,
                                              segment_m=segment_m, flag_m=flag_m, valid_fn=on_valid)
    out["check"] = {"method": "distance to the given surface's trace", "flag_rule": f"misfit > {flag_m:g} m"}
    return out


def log_model_choice(model: SurfaceModel, *, what: str, log: Log = _quiet) -> None:
    """Say in the log which models were scored, their scores, the hold-out block and why."""
    if not model.cv_rmse_m:
        log(f"{what}: {model.kind} (fixed, not cross-validated)")
        return
    scores = ", ".join(f"{k} {v:.3g} m" if np.isfinite(v) else f"{k} not scored"
                       for k, v in model.cv_rmse_m.items())
    block = "" if model.block_m is None else f", blocks of {model.block_m:.0f} m"
    log(f"{what}: cross-validation error {scores} ({model.n_groups} held-out segments{block})")
    if model.choice is not None:
        log(f"{what}: {model.choice.reason}")
    else:
        log(f"{what}: {model.kind} as asked (--model)")
    hint = error_scale_hint(model)
    if hint:
        log(f"warning: {what}: {hint}")


def error_scale_hint(model: SurfaceModel) -> str | None:
    """A warning when the stated pick errors and the scatter of held-out picks disagree by more
    than a factor 3: the stated errors set the model choice's tolerance and the misfit check's
    threshold, so they should be the map's and the DEM's real errors."""
    if model.choice is None or not model.stated_sigma_m:
        return None
    chi = model.choice.chi2.get(model.choice.best, {})
    seen = chi.get("trimmed_rms_m")
    if seen is None:
        return None
    ratio = seen / model.stated_sigma_m
    if 1 / 3 <= ratio <= 3:
        return None
    which = "smaller" if ratio < 1 else "larger"
    return (f"held-out picks scatter by {seen:.3g} m (trimmed RMS of the best model) against a stated pick error of "
            f"{model.stated_sigma_m:.3g} m: the real errors look {1 / ratio if ratio < 1 else ratio:.0f} times {which}; "
            "state the DEM's vertical error (--dem-sigma) and the map's positional error (--contact-sigma, "
            "--contour-sigma), which set the model choice's tolerance and the misfit check's threshold")


def _no_thickness_reason(base_in, top_in, model, top_model) -> str:
    """Why no grid cell gives a unit thickness: the two surfaces' reach of data never overlap."""
    nb, nt, both = int(base_in.sum()), int(top_in.sum()), int((base_in & top_in).sum())
    if both == 0:
        return (f"no grid cell lies within reach of the data of both surfaces (base: {nb} cells within "
                f"{model.reach_m:.0f} m of its picks, top: {nt} cells within {top_model.reach_m:.0f} m of "
                "its picks, none in common), so the thickness grids there are extrapolations of one "
                "surface or both; map the top and base contacts over the same ground, or measure the "
                "thickness between two points or in a borehole (strikeline thickness)")
    return (f"the {both} grid cells within reach of both surfaces hold no thickness (a surface has no "
            "value there); check the grids' extent and the DEM's nodata")


def compute(inputs: Inputs, opts: RunOptions, *, log: Log = _quiet, progress=None,
            is_cancelled=None) -> Results:
    """Run every step of the chain in memory."""
    steps = 9.0

    def step(k):
        if is_cancelled is not None and is_cancelled():
            raise CancelledError("cancelled; nothing was written")
        if progress is not None:
            progress(min(1.0, k / steps))

    what = f"picks on contacts {inputs.contacts.what}"
    picks = collect_picks(inputs, spacing_m=opts.pick_spacing_m, log=log, is_cancelled=is_cancelled)
    step(1)
    plane = fit_picks(picks, what=what)
    sigma = pick_sigmas(inputs, picks, opts)
    conf_opts = {"crs_wkt": inputs.crs_wkt, "resamples": opts.resamples, "seed": opts.seed,
                 "is_cancelled": is_cancelled}
    grid = surface_grid(inputs, opts, log=log)
    spacing = vertex_spacing_m(inputs.contacts.geoms)
    blocks = contact_segments(picks, cell_m=grid.cell_x_m, vertex_spacing_m=spacing)
    plane_summary = attitude_of(picks.xyz, sigma, what=what, strict=True, blocks=blocks, **conf_opts)
    if plane_summary["quality"] == "weak":
        log(f"warning: the best-fit plane is weak - {plane_summary['reason']}; "
            f"{plane_summary['advice']}")
    groups = {}
    if opts.group_by:
        values = dict(zip(inputs.contacts.fids.tolist(), inputs.contacts.fields[opts.group_by].tolist()))
        labels = np.array([str(values.get(int(c))) for c in picks.contact_id], dtype=object)
        for g in sorted(set(labels.tolist())):
            m = labels == g
            groups[g] = attitude_of(picks.xyz[m], sigma[m], what=f"group {g}", strict=False, blocks=blocks[m],
                                    **conf_opts)
    step(2)
    window, window_note = ((opts.window_m, "") if opts.window_m is not None
                           else fallback_window_m(picks.xyz))
    attitudes = None
    if window_note:  # few picks: the plane was fitted, so the run goes on without the default window
        log(f"warning: local attitudes: {window_note}")
    if window is not None:
        attitudes = local_attitudes(picks.xyz, window_m=window, contact_id=picks.contact_id,
                                    sigma_z_m=sigma, seed=opts.seed, is_cancelled=is_cancelled)
    step(3)
    ub = None
    if inputs.unit_polygons is not None:
        ub = map_unit_bounds(inputs.unit_polygons, inputs.unit_names, inputs.dem, inputs.dem_grid, opts, log=log)
    model = model_surface(picks, opts, grid, boreholes=inputs.boreholes_xyz, orientations=inputs.orientations,
                          bounds=None if ub is None else ub.bounds,
                          what=what, is_cancelled=is_cancelled, sigma=sigma, vertex_spacing_m=spacing)
    log_model_choice(model, what="surface model", log=log)
    unit_check = None if ub is None else map_unit_check(model, inputs.unit_polygons, inputs.unit_names, inputs.dem,
                                                        inputs.dem_grid, opts, ub, log=log)
    surface = model.evaluate_grid(grid, is_cancelled=is_cancelled)
    uncertainty = model.standard_error_grid(grid, is_cancelled=is_cancelled)
    step(4)
    dip, dipdir = dip_grids(surface, grid, is_cancelled=is_cancelled)
    step(5)
    cparts, clevels, cflags = structure_contours(surface, grid, interval_m=opts.interval_m,
                                                 extrapolated_fn=model.is_extrapolated)
    step(6)
    depth = None
    trace = np.empty(0, dtype=object)
    tflags = np.empty(0, dtype=bool)
    misfit = {"median": None, "p90": None, "n_vertices": 0,
              "note": "needs a DEM: the predicted trace is the zero line of depth below ground"}
    segments = None
    flag_m = None
    if inputs.dem is not None:
        f = depth_trace_misfit(inputs.dem, inputs.dem_grid, surface, inputs.contacts,
                               extrapolated_fn=model.is_extrapolated, flag_m=opts.misfit_flag_m, model=model,
                               dem_sigma_m=opts.dem_sigma_m, contact_sigma_m=opts.contact_sigma_m)
        depth, trace, tflags = f["depth"], f["trace"], f["trace_extrapolated"]
        misfit, segments, flag_m = f["misfit"], f["segments"], f["check"]
    step(7)
    vth = tth = top_picks = None
    thickness = None
    if inputs.top_contacts is not None:
        twhat = f"picks on top contacts {inputs.top_contacts.what}"
        top_picks = collect_picks(inputs, contacts=inputs.top_contacts, spacing_m=opts.pick_spacing_m, log=log,
                                  is_cancelled=is_cancelled)
        fit_picks(top_picks, what=twhat)
        top_model = model_surface(top_picks, opts, grid, what=twhat, is_cancelled=is_cancelled,
                                  sigma=pick_sigmas(inputs, top_picks, opts),
                                  vertex_spacing_m=vertex_spacing_m(inputs.top_contacts.geoms))
        log_model_choice(top_model, what="top surface model", log=log)
        top_surface = top_model.evaluate_grid(grid, is_cancelled=is_cancelled)
        vth, tth = isopach_grids(top_surface, surface, grid)
        X, Y = grid.mesh()
        base_in, top_in = ~model.is_extrapolated(X, Y), ~top_model.is_extrapolated(X, Y)
        supported = base_in & top_in & np.isfinite(tth)
        del X, Y
        vals = tth[supported]
        thickness = {
            "top_model": top_model.kind,
            "true_thickness_method": "vertical thickness x cos(local dip of the base surface)",
            "n_cells": int(vals.size),
            "mean_m": float(np.mean(vals)) if vals.size else None,
            "std_m": float(np.std(vals)) if vals.size else None,
            "p10_m": float(np.percentile(vals, 10)) if vals.size else None,
            "p90_m": float(np.percentile(vals, 90)) if vals.size else None,
            "note": "statistics over cells within reach of data of both surfaces",
        }
        if vals.size and np.mean(vals) < 0:
            log("warning: the top contacts model lies below the base on average - check which "
                "contact is the top (--top-contacts) and which the base (--contacts)")
        if not vals.size:
            thickness["note"] = thickness["reason"] = _no_thickness_reason(base_in, top_in, model, top_model)
            log(f"warning: unit thickness not computed: {thickness['reason']}")
    step(8)
    summary = build_summary(inputs, opts, picks, plane_summary, misfit, n_contours=len(cparts),
                            model=model, groups=groups, attitudes=attitudes, segments=segments,
                            flag_m=flag_m, thickness=thickness, contour_flags=cflags, trace_flags=tflags,
                            n_top_picks=None if top_picks is None else len(top_picks))
    if unit_check is not None:
        summary["map_units"] = json_ready(unit_check["summary"])
    if window_note:
        summary["attitudes"] = {**summary.get("attitudes", {"n": 0}), "note": window_note}
    step(9)
    return Results(picks, plane, grid, surface, dip, dipdir, depth, cparts, clevels, trace, summary,
                   model=model, uncertainty_m=uncertainty, contour_extrapolated=cflags,
                   trace_extrapolated=tflags, contact_misfit=segments, attitudes=attitudes,
                   vertical_thickness_m=vth, true_thickness_m=tth, top_picks=top_picks,
                   unit_check=unit_check)


# --------------------------------------------------------------------------- summary
def build_summary(inputs: Inputs, opts: RunOptions, picks: PickSet, plane: dict, misfit: dict,
                  *, n_contours: int, model: SurfaceModel | None = None, groups: dict | None = None,
                  attitudes: LocalAttitudes | None = None, segments: dict | None = None,
                  flag_m: float | None = None, thickness: dict | None = None,
                  contour_flags=None, trace_flags=None, n_top_picks=None) -> dict:
    summary = {
        "version": __version__,
        "crs": crs_label(srs_from_wkt(inputs.crs_wkt)),
        "n_picks": len(picks),
        "picks_by_source": picks.counts_by_source(),
        "plane": plane,
        "trace_misfit_m": misfit,
        "structure_contours": {
            "interval_m": opts.interval_m, "n_lines": n_contours,
            "n_extrapolated": 0 if contour_flags is None else int(np.sum(contour_flags)),
        },
        "data_error": {
            "dem_sigma_m": opts.dem_sigma_m, "contour_sigma_m": opts.contour_sigma_m,
            "contact_sigma_m": opts.contact_sigma_m,
            "basis": "DEM picks: vertical standard error as given; contour picks: positional "
                     "standard error times tan(ground slope at the pick)",
            "resamples": opts.resamples, "seed": opts.seed,
        },
        "conventions": "dip direction 0-360 clockwise from grid north of the CRS; dip 0-90 from "
                       "horizontal; strike by the right-hand rule (dip to the right); "
                       "dip_direction_true is the same azimuth from true north",
        "inputs": {os.path.basename(p): file_sha256(p) for p in inputs.paths.values() if os.path.isfile(p)},
        "caution": CAUTION,
    }
    if model is not None:
        m = model.summary()
        m["uncertainty"] = ("standard error calibrated on held-out picks: kappa * sqrt(model's own standard "
                            "error^2 + excess_m2 * (distance to the nearest datum / distance_ref_m)^alpha); "
                            "see error_growth" if model.growth is not None else
                            "least-squares prediction standard error (not calibrated: no cross-validation)"
                            if model.kind in ("plane", "trend2") else
                            "cross-validation RMSE scaled by distance to the nearest datum")
        m["extrapolated_beyond_m"] = model.reach_m
        if inputs.boreholes_xyz is not None:
            bm = model.borehole_misfit_m()
            m["boreholes"] = {"n": int(len(bm)), "max_abs_misfit_m": float(np.max(np.abs(bm))) if len(bm) else None,
                              "sigma_m": opts.borehole_sigma_m}
        if inputs.orientations is not None:
            m["orientations"] = {"n": int(len(inputs.orientations)), "sigma_deg": opts.orientation_sigma_deg}
        summary["model"] = m
    if groups:
        summary["groups"] = {"field": opts.group_by, "planes": groups}
    if attitudes is not None:
        q, counts = np.unique(np.asarray(attitudes.quality, dtype=str), return_counts=True)
        summary["attitudes"] = {"n": int(len(attitudes.x)), "window_m": attitudes.window_m,
                                "method": attitudes.method,
                                "by_quality": {str(a): int(b) for a, b in zip(q, counts)}}
    if segments is not None:
        unchecked = ~np.isfinite(np.asarray(segments.get("z_score", segments["misfit_m"]), dtype=float))
        summary["contact_misfit"] = {"segment_m": SEGMENT_CELLS * min(inputs.dem_grid.cell_x_m, inputs.dem_grid.cell_y_m),
                                     "check": flag_m, "n_segments": int(len(segments["geoms"])),
                                     "n_flagged": int(np.sum(segments["flagged"])),
                                     "n_unchecked": int(np.sum(unchecked)),
                                     "unchecked_reason": "off the DEM, or only reachable by extrapolating a spline "
                                                         "fitted without them (at the edge of the mapped ground)"}
    if trace_flags is not None and len(trace_flags):
        summary["predicted_trace"] = {"n_lines": int(len(trace_flags)), "n_extrapolated": int(np.sum(trace_flags))}
    if thickness is not None:
        thickness["n_top_picks"] = n_top_picks
        summary["thickness"] = thickness
    return json_ready(summary)


# --------------------------------------------------------------------------- writing
def write_results(results: Results, out_dir, *, overwrite: bool = False) -> Path:
    """Write every output into ``out_dir`` atomically.

    Everything goes into a temporary sibling folder first; only when every file is complete is
    it renamed to ``out_dir`` (an existing ``out_dir`` is replaced only with ``overwrite``).
    """
    with atomic_folder(out_dir, overwrite=overwrite) as tmp:
        _write_all(results, tmp)
    return Path(out_dir)


def picks_layer(name: str, p: PickSet) -> LayerOut:
    """A layer of picks: PointZ with ``contact_id``, ``source`` and ``elevation_m``."""
    return LayerOut(name, shapely.points(p.xyz), {"contact_id": p.contact_id.astype(np.int64),
                                                  "source": p.source.astype(str),
                                                  "elevation_m": p.xyz[:, 2]}, ogr.wkbPoint25D)


def attitudes_layer(a: LocalAttitudes) -> LayerOut:
    """The ``attitudes`` layer of local attitudes (one point per window centre)."""
    cid = np.array([-1 if c is None else int(c) for c in a.contact_id], dtype=np.int64)
    return LayerOut("attitudes", shapely.points(np.column_stack([a.x, a.y])), {
        "dip": np.asarray(a.dip_deg, float), "dip_direction": np.asarray(a.dip_direction_deg, float),
        "strike_rhr": np.asarray(a.strike_rhr_deg, float), "dip_ci95": np.asarray(a.dip_ci95_deg, float),
        "dip_direction_ci95": np.asarray(a.dip_direction_ci95_deg, float),
        "n_picks": np.asarray(a.n_picks, np.int64), "quality": np.asarray(a.quality, str),
        "reason": np.asarray(a.reason_code, str), "window_kind": np.asarray(a.kind, str),
        "contact_id": cid, "window_m": np.full(len(a.x), float(a.window_m)),
    }, ogr.wkbPoint)


def result_rasters(r: Results) -> list[tuple[str, np.ndarray]]:
    """The grids of a run as ``(file name, array)``, in the order they are written."""
    out = [("surface.tif", r.surface), ("dip.tif", r.dip_deg), ("dip_direction.tif", r.dip_direction_deg)]
    if r.uncertainty_m is not None:
        out.append(("uncertainty.tif", r.uncertainty_m))
    if r.depth_m is not None:
        out.append(("depth.tif", r.depth_m))
    if r.vertical_thickness_m is not None:
        out += [("vertical_thickness.tif", r.vertical_thickness_m), ("true_thickness.tif", r.true_thickness_m)]
    return out


def result_layers(r: Results) -> list[LayerOut]:
    """The vector layers of a run (names and fields as in ``results.gpkg``)."""
    cflags = r.contour_extrapolated if r.contour_extrapolated is not None else np.zeros(len(r.contour_geoms), bool)
    tflags = r.trace_extrapolated if r.trace_extrapolated is not None else np.zeros(len(r.trace_geoms), bool)
    layers = [
        picks_layer("picks", r.picks),
        LayerOut("structure_contours", shapely.force_3d(r.contour_geoms, r.contour_elevations_m)
                 if len(r.contour_geoms) else r.contour_geoms,
                 {"elevation": np.asarray(r.contour_elevations_m, dtype=float),
                  "extrapolated": np.asarray(cflags, dtype=bool)}, ogr.wkbLineString25D),
        LayerOut("predicted_trace", r.trace_geoms, {"extrapolated": np.asarray(tflags, dtype=bool)},
                 ogr.wkbLineString),
    ]
    if r.contact_misfit is not None:
        cm = r.contact_misfit
        fields = {"contact_id": cm["contact_id"], "misfit_m": cm["misfit_m"]}
        for key in ("misfit_z_m", "se_m", "z_score", "flag_m"):
            if key in cm:
                fields[key] = np.asarray(cm[key], dtype=float)
        fields["flagged"] = cm["flagged"]
        layers.append(LayerOut("contact_misfit", cm["geoms"], fields, ogr.wkbLineString))
    if r.attitudes is not None:
        layers.append(attitudes_layer(r.attitudes))
    if r.top_picks is not None:
        layers.append(picks_layer("top_picks", r.top_picks))
    if r.unit_check is not None:
        layers.append(unit_conflicts_layer(r.unit_check))
    return layers


def _write_all(r: Results, folder: Path) -> None:
    for name, array in result_rasters(r):
        write_geotiff(folder / name, array, r.grid)
    write_gpkg(folder / "results.gpkg", result_layers(r), r.grid.crs_wkt)
    (folder / "summary.json").write_text(dumps_stable(r.summary))


def run(opts: RunOptions, *, log: Log = _quiet, progress=None, is_cancelled=None) -> Results:
    """Load, compute and write: the whole of ``strikeline run``."""
    inputs = load_inputs(opts, log=log)
    results = compute(inputs, opts, log=log, progress=progress, is_cancelled=is_cancelled)
    write_results(results, opts.out, overwrite=opts.overwrite)
    return results
