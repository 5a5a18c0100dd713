"""Reading a run's inputs into memory, in one projected CRS: contacts, DEM, contours, boreholes,
dip readings, top contacts and the map's unit polygons.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import shapely

from strikeline.errors import InputError
from strikeline.geometry.grid import Grid
from strikeline.io.crs import crs_label, same_crs
from strikeline.io.raster import read_raster, read_vertical_unit
from strikeline.pipeline.elevation_units import contour_elevations_in_metres, dem_in_metres
from strikeline.io.vector import VectorLayer, read_layer
from strikeline.geometry.orientation import dip_direction_from_strike
from strikeline.surfaces.units import parse_unit_names
from strikeline.pipeline.options import CLI_OPTION_NAMES, Log, RunOptions, _check_unit_lists, _quiet, check_options


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


# --------------------------------------------------------------------------- loading
def reproject_to(lyr: VectorLayer | None, target, *, label: str, log: Log = _quiet) -> VectorLayer | None:
    """``lyr`` in the CRS ``target`` (WKT), with a log line when it moves.

    ``label`` names the layer in the log line (``"contacts"``, ``"boreholes"``).
    """
    if lyr is None or same_crs(lyr.crs_wkt, target):
        return lyr
    log(f"reprojecting {label} '{lyr.path}' from {crs_label(lyr.crs_wkt)} to {crs_label(target)}")
    return lyr.reprojected(target)


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
                          label="contacts", geometry="line", layer_option="--contacts-layer",
                          where_option="--where")
    dem = grid = None
    if opts.dem:
        dem, grid = read_raster(opts.dem, label="DEM")
        dem = dem_in_metres(dem, read_vertical_unit(opts.dem), opts.dem_unit, what=f"DEM '{opts.dem}'", log=log)
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
                         label="top contacts", geometry="line", layer_option="--top-contacts-layer",
                         where_option="--top-where")
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
    target = dem_grid.crs_wkt if dem is not None else contacts.crs_wkt
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
    if contours is not None:  # metres, and checked against the DEM where both exist
        elev = contour_elevations_in_metres(
            elev, contours.geoms, getattr(opts, "contour_unit", None), what=f"contours {contours.what}", dem=dem,
            dem_grid=dem_grid, dem_what=f"DEM '{paths['dem']}'" if paths and "dem" in paths else "the DEM",
            names=names, log=log)
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
    return Inputs(contacts=contacts, crs_wkt=target, dem=dem, dem_grid=dem_grid,
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
