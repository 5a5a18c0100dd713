"""Reading a run's inputs into memory, in one projected CRS: contacts, DEM, contours, boreholes,
dip readings, top contacts and the map's unit polygons.
"""
from __future__ import annotations

import os
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field, replace

import numpy as np
import shapely

from strikeline.errors import InputError
from strikeline.geometry.grid import Grid
from strikeline.io.crs import crs_label, same_crs
from strikeline.io.files import file_sha256
from strikeline.io.demfile import open_dem, raster_shape
from strikeline.io.raster import read_raster, read_vertical_unit
from strikeline.pipeline.dem_access import dem_stays_in_file
from strikeline.pipeline.elevation_units import contour_elevations_in_metres, dem_in_metres
from strikeline.io.vector import DelimitedPoints, VectorLayer, read_layer
from strikeline.geometry.orientation import dip_direction_from_strike
from strikeline.surfaces.units import parse_unit_names
from strikeline.pipeline.options import CLI_OPTION_NAMES, Log, RunOptions, _check_unit_lists, _quiet, check_options


@dataclass(frozen=True)
class ContactSources:
    """Where every contact feature of a run came from, and its own attributes.

    The contacts of several inputs (``--contacts`` given several times) are read one by one and
    joined into one layer whose feature ids are the run's contact ids (``contact_id`` of the
    picks and of the misfit segments): the first input keeps its own feature ids, each later
    input continues after the largest id before it, so ids never collide and a single input's
    picks carry its own feature ids as before.

    Attributes
    ----------
    contact_id : ndarray of int64, shape ``(n,)``
        The run's id of each contact feature (the joined layer's ``fids``).
    input_index : ndarray of int64, shape ``(n,)``
        Which input each feature came from: 0 for the first, in the order given.
    fid : ndarray of int64, shape ``(n,)``
        The feature's id in its own file.
    inputs : tuple of str
        Each input as ``path:layer``.
    attributes : dict of str -> ndarray (object)
        Every attribute field of the inputs (the union; None where an input lacks the field
        or the value is null).
    field_types : dict of str -> OGR field type name
        ``"String"`` where two inputs disagree on a field's type.
    """

    contact_id: np.ndarray
    input_index: np.ndarray
    fid: np.ndarray
    inputs: tuple
    attributes: dict
    field_types: dict

    def rows_of(self, contact_id) -> np.ndarray:
        """Row of every id of ``contact_id`` (-1 for an id that is no contact's)."""
        lookup = {int(c): i for i, c in enumerate(self.contact_id)}
        return np.array([lookup.get(int(c), -1) for c in np.asarray(contact_id).reshape(-1)], dtype=np.int64)

    def columns(self, contact_id, *, prefix: str) -> dict:
        """The provenance and attribute columns of the features ``contact_id`` (one per pick or
        segment), as arrays for a written layer: ``contact_input``, ``contact_fid``, then every
        attribute under ``prefix`` (numbers as float, NaN for null; other types as text)."""
        rows = self.rows_of(contact_id)
        known = rows >= 0
        out = {"contact_input": np.where(known, self.input_index[rows], -1).astype(np.int64),
               "contact_fid": np.where(known, self.fid[rows], -1).astype(np.int64)}
        for name, vals in self.attributes.items():
            picked = np.empty(len(rows), dtype=object)
            picked[:] = [vals[r] if r >= 0 else None for r in rows]
            if self.field_types.get(name) in ("Integer", "Integer64", "Real"):
                col = np.array([np.nan if v is None else float(v) for v in picked], dtype=float)
            else:
                col = np.empty(len(rows), dtype=object)
                col[:] = [None if v is None else str(v) for v in picked]
            out[prefix + name] = col
        return out


def _joined_type(types: list) -> str:
    """One OGR type for a field that several inputs hold: theirs when they agree, Real for mixed
    numbers, else String."""
    kinds = set(types)
    if len(kinds) == 1:
        return types[0]
    if kinds <= {"Integer", "Integer64", "Real"}:
        return "Real"
    return "String"


def join_layers(layers: list, *, label: str) -> tuple[VectorLayer, ContactSources]:
    """One layer of the features of several (already in one CRS), and where each came from.

    The joined layer's ``fids`` are the run's contact ids (see :class:`ContactSources`); its
    fields are the union of the inputs' fields. ``label`` names the layers in messages.
    """
    if not layers:
        raise InputError(f"no {label} given; give at least one layer")
    crs = layers[0].crs_wkt
    ids, index, fids, names = [], [], [], []
    next_id = None
    for k, lyr in enumerate(layers):
        f = np.asarray(lyr.fids, dtype=np.int64)
        if next_id is None or not len(f):
            cid = f
        else:
            cid = f - int(f.min()) + next_id
        if len(cid):
            next_id = int(cid.max()) + 1 if next_id is None else max(next_id, int(cid.max()) + 1)
        ids.append(cid)
        index.append(np.full(len(f), k, dtype=np.int64))
        fids.append(f)
        names.append(f"{lyr.path}:{lyr.layer_name}")
    fields, types = {}, {}
    # one field per name regardless of case (GeoPackage columns are case-insensitive): the first spelling
    spelling = {}
    for n in (n for lyr in layers for n in lyr.fields):
        spelling.setdefault(n.lower(), n)
    for key, name in spelling.items():
        cols, kinds = [], []
        for lyr in layers:
            own = next((n for n in lyr.fields if n.lower() == key), None)
            if own is not None:
                cols.append(np.asarray(lyr.fields[own], dtype=object))
                kinds.append(lyr.field_types[own])
            else:
                cols.append(np.full(len(lyr), None, dtype=object))
        fields[name] = np.concatenate(cols) if cols else np.empty(0, dtype=object)
        types[name] = _joined_type(kinds)
    contact_id = np.concatenate(ids)
    sources = ContactSources(contact_id, np.concatenate(index), np.concatenate(fids), tuple(names), fields, types)
    if len(layers) == 1:
        return layers[0], sources
    z = None
    if any(lyr.z is not None for lyr in layers):
        z = np.concatenate([lyr.z if lyr.z is not None else np.full(len(lyr), np.nan) for lyr in layers])
    # replace() keeps whatever else the first layer carries (its reading notes)
    joined = replace(layers[0], path=" + ".join(lyr.path for lyr in layers),
                     layer_name=" + ".join(lyr.layer_name for lyr in layers),
                     geoms=np.concatenate([lyr.geoms for lyr in layers]), fids=contact_id, fields=fields,
                     field_types=types, crs_wkt=crs, z=z)
    return joined, sources


@dataclass
class Inputs:
    """Inputs in memory, all in one projected CRS (``crs_wkt``).

    ``contacts`` (and ``top_contacts``) hold the features of every input given, joined; their
    ``fids`` are the run's contact ids and ``contact_sources`` (``top_contact_sources``) says
    which input and feature each came from, with its attributes. ``records`` describes every
    input by role for the summary (:func:`input_record`).
    """

    contacts: VectorLayer
    crs_wkt: str
    dem: np.ndarray | None = None  # or a DemFile read by windows (strikeline.pipeline.dem_access)
    dem_grid: Grid | None = None
    contours: VectorLayer | None = None
    contour_elevations_m: np.ndarray | None = None
    paths: dict = field(default_factory=dict)
    boreholes_xyz: np.ndarray | None = None  # (n, 3) x, y, surface elevation
    orientations: np.ndarray | None = None  # (n, 4) x, y, dip, dip direction
    top_contacts: VectorLayer | None = None
    unit_polygons: np.ndarray | None = None  # the map's unit polygons (DEM's CRS) ...
    unit_names: np.ndarray | None = None  # ... and the unit of each, as text
    contact_sources: ContactSources | None = None
    top_contact_sources: ContactSources | None = None
    records: dict = field(default_factory=dict)  # role -> record, or list of records (contacts)


# --------------------------------------------------------------------------- naming inputs
def split_layer_spec(text) -> tuple[str, str | None]:
    """``PATH`` or ``PATH:LAYER`` -> ``(path, layer or None)``.

    The rule, so that Windows paths (``C:\\maps\\c.gpkg``), URLs and folder names with colons
    stay whole: the text is a path as it stands when it is an existing file; otherwise it is
    split at its LAST colon, and only when the part before is an existing file and the part
    after is a name, not a path (non-empty, without ``/`` or ``\\``). Anything else is a path
    (and a missing one is reported as such when read).

    >>> split_layer_spec("no/such/file.gpkg:contacts")
    ('no/such/file.gpkg:contacts', None)
    """
    text = os.fspath(text)
    if os.path.isfile(text) or ":" not in text:
        return text, None
    head, _, tail = text.rpartition(":")
    if head and tail and "/" not in tail and "\\" not in tail and os.path.isfile(head):
        return head, tail
    return text, None


def layer_specs(value, layer: str | None = None) -> list[tuple[str, str | None]]:
    """The ``(path, layer)`` of every input of a repeatable layer option: ``value`` is one
    ``PATH[:LAYER]``, a list of them, or None. ``layer`` (``--contacts-layer``) is the layer of
    every input that names none itself."""
    if value is None:
        return []
    values = [value] if isinstance(value, (str, os.PathLike)) else list(value)
    out = []
    for v in values:
        path, own = split_layer_spec(v)
        out.append((path, own if own is not None else layer))
    return out


def input_record(path, *, layer: str | None = None, where: str | None = None, fields: dict | None = None,
                 sha256=None) -> dict:
    """What the summary says of one input: its path as given and absolute, layer, filter, the
    fields used (option name -> field) and the file's SHA-256 (None when it is not a file).
    ``sha256`` is a future of :func:`strikeline.io.files.file_sha256` of the file already under
    way (the DEM's, hashed while it is checked), else the file is hashed here."""
    path = os.fspath(path)
    digest = None if not os.path.isfile(path) else sha256.result() if sha256 is not None else file_sha256(path)
    return {"path": path, "path_absolute": os.path.abspath(path) if os.path.exists(path) else None,
            "layer": layer, "where": where or None, "fields": {k: v for k, v in (fields or {}).items() if v},
            "sha256": digest}


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


#: File extensions of delimited text, whose points need --x-field, --y-field and --crs.
DELIMITED_EXTENSIONS = (".csv", ".tsv", ".psv")


def delimited_points(opts, *, names: dict = CLI_OPTION_NAMES, z_field: str | None = None) -> DelimitedPoints:
    """How points from delimited text are read: the run's ``--x-field``, ``--y-field``, ``--crs``
    (and ``z_field``, the column read as the points' Z), with the option names for messages."""
    return DelimitedPoints(x_field=opts.x_field, y_field=opts.y_field, z_field=z_field, crs=opts.crs,
                           x_option=names.get("x_field", "--x-field"), y_option=names.get("y_field", "--y-field"),
                           z_option=names.get("z_field", "--z-field"), crs_option=names.get("crs", "--crs"))


def read_layers(value, *, layer: str | None, where: str | None, label: str, layer_option: str,
                where_option: str, fields: dict | None = None) -> tuple[list, list]:
    """Read every input of a repeatable line option (``PATH[:LAYER]``, or a list of them).

    ``layer`` is the layer of every input that names none; ``where`` filters every input.
    Returns the layers and their summary records (:func:`input_record`), in the order given.
    """
    layers, records = [], []
    for path, lyr_name in layer_specs(value, layer):
        lyr = read_layer(path, layer=lyr_name, where=where, label=label, geometry="line",
                         layer_option=layer_option, where_option=where_option)
        layers.append(lyr)
        records.append(input_record(path, layer=lyr.layer_name, where=where, fields=fields))
    return layers, records


def load_inputs(opts: RunOptions, *, log: Log = _quiet) -> Inputs:
    """Read every input and bring it into one projected CRS (the DEM's, else the first contacts').

    ``--contacts`` and ``--top-contacts`` may each name several inputs (``PATH[:LAYER]``, see
    :func:`split_layer_spec`); ``--contacts-layer`` is the layer of every contacts input that
    names none, ``--where`` filters every contacts input (``--top-where`` every top-contacts
    input). Points from delimited text (``.csv``) are read by OGR's CSV driver with
    ``--x-field``, ``--y-field`` and ``--crs``.
    """
    check_options(opts)
    contacts, contact_records = read_layers(
        opts.contacts, layer=opts.contacts_layer, where=opts.where, label="contacts",
        layer_option="--contacts-layer", where_option="--where", fields={"group_by": opts.group_by})
    records = {"contacts": contact_records}
    dem = grid = None
    if opts.dem:
        # the file's SHA-256 on a second thread (hashlib releases Python's lock) while it is checked
        with ThreadPoolExecutor(max_workers=1, thread_name_prefix="strikeline-dem-hash") as pool:
            digest = pool.submit(file_sha256, opts.dem) if os.path.isfile(opts.dem) else None
            shape = raster_shape(opts.dem, label="DEM")
            if shape is not None and dem_stays_in_file(shape, opts):  # read by windows (pipeline.dem_access)
                dem = open_dem(opts.dem, label="DEM")
                grid = dem.grid
            else:
                dem, grid = read_raster(opts.dem, label="DEM")
            dem = dem_in_metres(dem, read_vertical_unit(opts.dem), opts.dem_unit, what=f"DEM '{opts.dem}'",
                                log=log)
            records["dem"] = input_record(opts.dem, sha256=digest)
    contours = boreholes = orientations = top = None
    if opts.contours:
        contours = read_layer(opts.contours, layer=opts.contours_layer, label="contours",
                              geometry="line", layer_option="--contours-layer")
        records["contours"] = input_record(opts.contours, layer=contours.layer_name,
                                           fields={"elev_field": opts.elev_field})
    csv = delimited_points(opts)
    point_paths = [p for p in (opts.boreholes, opts.orientations) if p]
    if (opts.x_field or opts.y_field or opts.crs) and not any(
            os.fspath(p).lower().endswith(DELIMITED_EXTENSIONS) for p in point_paths):
        raise InputError("--x-field, --y-field and --crs describe points from delimited text; no --boreholes or "
                         f"--orientations file ends with {', '.join(DELIMITED_EXTENSIONS)} - leave them out, or "
                         "give the .csv file")
    if opts.boreholes:
        boreholes = read_layer(opts.boreholes, layer=opts.boreholes_layer, label="boreholes",
                               geometry="point", layer_option="--boreholes-layer", delimited=csv)
        records["boreholes"] = input_record(opts.boreholes, layer=boreholes.layer_name, fields={
            "x_field": opts.x_field if _is_delimited(opts.boreholes) else None,
            "y_field": opts.y_field if _is_delimited(opts.boreholes) else None,
            "borehole_z_field": opts.borehole_z_field, "borehole_collar_field": opts.borehole_collar_field,
            "borehole_depth_field": opts.borehole_depth_field})
    if opts.orientations:
        orientations = read_layer(opts.orientations, layer=opts.orientations_layer, label="orientations",
                                  geometry="point", layer_option="--orientations-layer", delimited=csv)
        records["orientations"] = input_record(opts.orientations, layer=orientations.layer_name, fields={
            "x_field": opts.x_field if _is_delimited(opts.orientations) else None,
            "y_field": opts.y_field if _is_delimited(opts.orientations) else None,
            "dip_field": opts.dip_field,
            "dip_direction_field": None if opts.strike_field else (opts.dip_direction_field or "dip_dir"),
            "strike_field": opts.strike_field})
    if opts.top_contacts:
        top, records["top_contacts"] = read_layers(
            opts.top_contacts, layer=opts.top_contacts_layer, where=opts.top_where, label="top contacts",
            layer_option="--top-contacts-layer", where_option="--top-where")
    units = None
    if opts.map_units:
        units = read_layer(opts.map_units, layer=opts.map_units_layer, label="map units", geometry="polygon",
                           layer_option="--map-units-layer")
        records["map_units"] = input_record(opts.map_units, layer=units.layer_name,
                                            fields={"unit_field": opts.unit_field})
    paths = {k: v for k, v in (("dem", opts.dem), ("contours", opts.contours),
                               ("boreholes", opts.boreholes), ("orientations", opts.orientations),
                               ("map_units", opts.map_units)) if v}
    paths["contacts"] = contacts[0].path
    if top:
        paths["top_contacts"] = top[0].path
    return assemble_inputs(contacts, opts, dem=dem, dem_grid=grid, contours=contours, boreholes=boreholes,
                           orientations=orientations, top_contacts=top, map_units=units, paths=paths,
                           records=records, log=log)


def _is_delimited(path) -> bool:
    return os.fspath(path).lower().endswith(DELIMITED_EXTENSIONS)


def assemble_inputs(contacts, opts: RunOptions, *, dem=None, dem_grid: Grid | None = None,
                    contours: VectorLayer | None = None, boreholes: VectorLayer | None = None,
                    orientations: VectorLayer | None = None, top_contacts=None,
                    map_units: VectorLayer | None = None, paths: dict | None = None, records: dict | None = None,
                    log: Log = _quiet, names: dict = CLI_OPTION_NAMES) -> Inputs:
    """Check layers already in memory and bring them into one CRS: the second half of
    :func:`load_inputs`, for callers that read the layers themselves (the QGIS adapter).

    ``contacts`` and ``top_contacts`` are a layer or a list of layers (one per input): each is
    reprojected, then they are joined (:func:`join_layers`). The target CRS is the DEM's, else
    the first contacts'; other layers are reprojected with a log line. ``paths`` (input name ->
    file) and ``records`` (role -> :func:`input_record`, or a list of them for the contacts)
    describe the inputs in the summary; without ``records`` they are made from ``paths``.
    """
    contact_list = [contacts] if isinstance(contacts, VectorLayer) else list(contacts)
    top_list = None if top_contacts is None else (
        [top_contacts] if isinstance(top_contacts, VectorLayer) else list(top_contacts))
    for lyr in (*contact_list, *(top_list or ()), contours, boreholes, orientations, map_units):
        for note in getattr(lyr, "notes", ()):  # curved geometries linearised, unusable ones skipped
            log(note)
    if dem is not None and dem_grid is None:
        raise InputError("a DEM array needs its grid")
    target = dem_grid.crs_wkt if dem is not None else contact_list[0].crs_wkt
    contact_list = [reproject_to(c, target, label="contacts", log=log) for c in contact_list]
    contacts, contact_sources = join_layers(contact_list, label="contacts")
    top_sources = None
    if top_list:
        top_list = [reproject_to(t, target, label="top contacts", log=log) for t in top_list]
        top_contacts, top_sources = join_layers(top_list, label="top contacts")
    else:
        top_contacts = None
    if records is None:
        records = {k: input_record(v) for k, v in (paths or {}).items()}
    if opts.group_by and opts.group_by not in contacts.fields:
        raise InputError(
            f"{names['group_by']}: {contacts.what} has no field '{opts.group_by}' "
            f"(fields: {', '.join(contacts.fields) or 'none'}); name one of its fields"
        )
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
    contours = reproject_to(contours, target, label="contours", log=log)
    if contours is not None:  # metres, and checked against the DEM where both exist
        elev = contour_elevations_in_metres(
            elev, contours.geoms, getattr(opts, "contour_unit", None), what=f"contours {contours.what}", dem=dem,
            dem_grid=dem_grid, dem_what=f"DEM '{paths['dem']}'" if paths and "dem" in paths else "the DEM",
            names=names, log=log)
    boreholes = reproject_to(boreholes, target, label="boreholes", log=log)
    orientations = reproject_to(orientations, target, label="orientations", log=log)
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
                  top_contacts=top_contacts, unit_polygons=unit_polys, unit_names=unit_labels,
                  contact_sources=contact_sources, top_contact_sources=top_sources, records=dict(records))


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
