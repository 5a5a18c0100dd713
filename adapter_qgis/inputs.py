"""Shared parameters and input reading: QGIS parameters into the library's options and ``Inputs``.

The layers are read here (:mod:`.layers`); what makes them usable together - the checks on the
named fields, one working CRS with the layers reprojected into it, borehole and dip-measurement
points - is :func:`strikeline.pipeline.assemble_inputs`, the second half of the command line's
``load_inputs``. Its messages name the QGIS parameters (:func:`option_names`).
"""
from __future__ import annotations

import os
from typing import NamedTuple

from qgis.core import QgsProcessingParameterRasterLayer

from strikeline.errors import InputError, RasterReadError, StrikelineError
from strikeline.pipeline import (
    Inputs,
    RunOptions,
    assemble_inputs,
    option,
    reproject_to,
)
from strikeline.io.raster import raster_grid, read_vertical_unit
from strikeline.pipeline.elevation_units import dem_in_metres
from strikeline.pipeline.inputs import input_record
from strikeline.pipeline.points import point_values, point_xyz

from .layers import raster_path, read_raster_layer, read_vector, vector_name
from .params import option_names, parameter, value, values  # noqa: F401 - tools import option_names from here

# The parameters' names, from the table of options (strikeline.pipeline.options).
CONTACTS = option("contacts").qgis
DEM = option("dem").qgis
CONTOURS = option("contours").qgis
ELEV_FIELD = option("elev_field").qgis
PICK_SPACING = option("pick_spacing_m").qgis
GROUP_BY = option("group_by").qgis
BOREHOLES = option("boreholes").qgis
ORIENTATIONS = option("orientations").qgis
BOREHOLE_SIGMA = option("borehole_sigma_m").qgis
ORIENTATION_SIGMA = option("orientation_sigma_deg").qgis
MAP_UNITS = option("map_units").qgis
UNIT_FIELD = option("unit_field").qgis
UNITS_ABOVE = option("units_above").qgis
UNITS_BELOW = option("units_below").qgis
#: Further contact line layers, used with the first as the command line's repeated contacts option:
#: a parameter of its own beside the single contacts layer, so that models saved with that layer
#: still run and the contacts' field parameters keep a layer to list fields from.
MORE_CONTACTS = "MORE_CONTACTS"
MORE_CONTACTS_LABEL = "More mapped contact line layers (used with the first, in this order)"
#: The further layers follow the first layer's source settings: QGIS 3.22's list of layers has no
#: selection setting of its own (it takes layers, not feature-source definitions), and a user who
#: ticks "Selected features only" on the contacts means the contacts they selected, in every layer.
MORE_CONTACTS_HELP = (
    "Line layers of further mapped contacts, used after the first contacts layer in the order given "
    "(as the command line's contacts option given again; contact ids number on from one layer to the "
    "next). When the first contacts layer is set to 'Selected features only', every layer here is read "
    "with its selected features only as well (a layer with nothing selected is refused, by name; a file "
    "not open in the project has no selection: add it to the project and select its contacts), and "
    "the first layer's other source settings (feature limit, invalid geometry handling) apply to each. "
    "Otherwise every layer here is read whole.")


def optional_string(alg, parameters, key, context) -> str | None:
    """A text or field parameter, None when empty."""
    return alg.parameterAsString(parameters, key, context) or None


def optional_distance(alg, parameters, key, context) -> float | None:
    """A distance or number parameter where 0 means "the library's default" (None)."""
    return alg.parameterAsDouble(parameters, key, context) or None


def more_contacts_parameter(alg, label: str = MORE_CONTACTS_LABEL):
    """The optional list of further contact line layers (:data:`MORE_CONTACTS`), with its help
    (:data:`MORE_CONTACTS_HELP`: how the first layer's selected-features setting reaches them)."""
    from qgis.core import QgsProcessing, QgsProcessingParameterMultipleLayers

    param = QgsProcessingParameterMultipleLayers(MORE_CONTACTS, alg.tr(label), QgsProcessing.TypeVectorLine,
                                                 optional=True)
    param.setHelp(alg.tr(MORE_CONTACTS_HELP))
    return param


def read_more_contacts(alg, parameters, context, steps, *, label: str = "contacts") -> list:
    """The layers of :data:`MORE_CONTACTS` as library ``VectorLayer`` objects, in the order given
    (empty when the tool has no such parameter or it is left empty).

    Each is read with the source settings of the first contacts layer (:data:`CONTACTS`) when it
    has any: with "Selected features only" there, each layer's own selection (refused when empty),
    and its feature limit and invalid-geometry handling; else whole (:data:`MORE_CONTACTS_HELP`).
    """
    if alg.parameterDefinition(MORE_CONTACTS) is None:
        return []
    first = _source_settings(parameters.get(CONTACTS))
    out = []
    for lyr in alg.parameterAsLayerList(parameters, MORE_CONTACTS, context) or []:
        name = vector_name(lyr, lyr, label)
        source = lyr if first is None else _as_first_is_read(alg, lyr, first, context, name)
        out.append(read_vector(source, name, geometry="line", is_cancelled=steps.is_cancelled))
    return out


def _source_settings(value):
    """The ``QgsProcessingFeatureSourceDefinition`` a source parameter's value carries (what the
    dialog or a model gives when any of its source settings is used), else None."""
    from qgis.core import QgsProcessingFeatureSourceDefinition

    return value if isinstance(value, QgsProcessingFeatureSourceDefinition) else None


def _as_first_is_read(alg, layer, first, context, name):
    """``layer`` as a Processing feature source with the settings of ``first`` (a
    ``QgsProcessingFeatureSourceDefinition``), made by QGIS as it makes the first layer's."""
    from qgis.core import QgsProcessingFeatureSourceDefinition, QgsProcessingUtils

    if first.selectedFeaturesOnly and layer.selectedFeatureCount() == 0:
        more = alg.parameterDefinition(MORE_CONTACTS).description()
        contacts = alg.parameterDefinition(CONTACTS).description()
        raise InputError(
            f"{name.what} in the '{more}' has no feature selected, while the '{contacts}' is read with "
            "'Selected features only', which every contact layer follows; select the contacts to use on "
            "this layer too (a file not open in the project has no selection: add it to the project "
            "first), or untick 'Selected features only'")
    definition = QgsProcessingFeatureSourceDefinition(layer.id(), first.selectedFeaturesOnly, first.featureLimit,
                                                      first.flags, first.geometryCheck)
    source = QgsProcessingUtils.variantToSource(definition, context)
    if source is None:
        raise InputError(f"{name.what}: QGIS could not read it as a feature source; check that the layer "
                         "is valid and open in the project")
    return source


def add_contact_and_topography(alg) -> None:
    """The inputs of picks and of the whole chain: contacts (one layer, and more in a list), DEM
    and/or contours with elevations."""
    alg.addParameter(parameter(alg, "contacts"))
    alg.addParameter(more_contacts_parameter(alg))
    for name in ("dem", "contours", "elev_field"):
        alg.addParameter(parameter(alg, name))
    alg.addParameter(parameter(alg, "pick_spacing_m", parent=CONTACTS))
    for name in ("dem_unit", "contour_unit"):  # elevations in feet are converted to metres at load
        alg.addParameter(parameter(alg, name))


def constraint_parameters(alg) -> list:
    """Boreholes and dip measurements that a surface model honours (as ``strikeline run``)."""
    return [parameter(alg, name) for name in CONSTRAINT_OPTIONS]


#: The options of :func:`constraint_parameters`, in order.
CONSTRAINT_OPTIONS = ("boreholes", "borehole_z_field", "borehole_collar_field", "borehole_depth_field",
                      "orientations", "dip_field", "dip_direction_field", "strike_field")


def constraint_sigma_parameters(alg) -> list:
    """The standard errors of borehole elevations and measured dips."""
    return [parameter(alg, "borehole_sigma_m"), parameter(alg, "orientation_sigma_deg")]


def constraint_options(alg, parameters, context) -> dict:
    """The parameters of :func:`constraint_parameters` and :func:`constraint_sigma_parameters`
    as :class:`RunOptions` fields."""
    opts = values(alg, parameters, context, *CONSTRAINT_OPTIONS[1:4], *CONSTRAINT_OPTIONS[5:],
                  "borehole_sigma_m", "orientation_sigma_deg")
    opts["dip_field"] = opts["dip_field"] or RunOptions.dip_field
    return opts


def map_unit_parameters(alg) -> list:
    """The geological map's unit polygons as constraints (as ``strikeline run --map-units``)."""
    return [parameter(alg, name) for name in ("map_units", "unit_field", "units_above", "units_below")]


def map_unit_options(alg, parameters, context) -> dict:
    """The parameters of :func:`map_unit_parameters` as :class:`RunOptions` fields (the unit lists
    without their layer are an error, as on the command line)."""
    s = lambda key: optional_string(alg, parameters, key, context)  # noqa: E731
    opts = dict(unit_field=s(UNIT_FIELD), units_above=s(UNITS_ABOVE), units_below=s(UNITS_BELOW))
    if alg.parameterAsSource(parameters, MAP_UNITS, context) is None and any(opts.values()):
        given = next(alg.parameterDefinition(k).description() for k, v in
                     ((UNIT_FIELD, opts["unit_field"]), (UNITS_ABOVE, opts["units_above"]),
                      (UNITS_BELOW, opts["units_below"])) if v)
        raise InputError(f"the '{given}' needs the '{alg.parameterDefinition(MAP_UNITS).description()}': give "
                         "the polygon layer of the map's units too")
    return opts


#: The polygon layer of :func:`map_unit_parameters`, as :func:`read_layers` takes it.
MAP_UNIT_LAYERS = {"map_units": (MAP_UNITS, "map units", "polygon")}


#: The point layers of :func:`constraint_parameters`: ``assemble_inputs`` keyword ->
#: (parameter, label in messages, geometry), as :func:`read_layers` takes them.
CONSTRAINT_LAYERS = {"boreholes": (BOREHOLES, "boreholes", "point"),
                     "orientations": (ORIENTATIONS, "orientations", "point")}


def read_layer(alg, parameters, key, context, steps, *, label, geometry, keep_z=False):
    """The vector layer of parameter ``key`` as a library ``VectorLayer`` (None if unset)."""
    source = alg.parameterAsSource(parameters, key, context)
    if source is None:
        return None
    name = vector_name(alg.parameterAsVectorLayer(parameters, key, context), source, label)
    return read_vector(source, name, geometry=geometry, keep_z=keep_z, is_cancelled=steps.is_cancelled)


def read_layers(alg, parameters, context, steps, layers: dict) -> dict:
    """``{keyword: VectorLayer or None}`` for ``layers`` = ``{keyword: (parameter, label, geometry)}``."""
    return {k: read_layer(alg, parameters, p, context, steps, label=label, geometry=geom)
            for k, (p, label, geom) in layers.items()}


def unreadable_raster(alg, parameters, key, context, *, label: str) -> str | None:
    """The library's one-line refusal of raster parameter ``key`` when it names a file that
    exists but that QGIS cannot load as a raster (a text file named .tif, a truncated GeoTIFF);
    else None. QGIS's own words for it would say the file is "not found"."""
    given = parameters.get(key) if hasattr(parameters, "get") else None
    if not isinstance(given, str) or not given:
        return None
    path = given.split("|", 1)[0]
    if not os.path.isfile(path) or alg.parameterAsRasterLayer(parameters, key, context) is not None:
        return None
    try:
        raster_grid(path, label=label)  # strikeline's own opener says what GDAL makes of the file
    except StrikelineError as exc:
        return str(exc)
    return (f"{label} '{path}': QGIS cannot load it as a raster layer although GDAL opens it; "
            "give a GeoTIFF or another raster format QGIS reads")


def unreadable_rasters(alg, parameters, context) -> str | None:
    """:func:`unreadable_raster` of the first raster parameter of ``alg`` that names such a file."""
    for definition in alg.parameterDefinitions():
        if isinstance(definition, QgsProcessingParameterRasterLayer):
            key = definition.name()
            label = "DEM" if key == DEM else definition.description()
            message = unreadable_raster(alg, parameters, key, context, label=label)
            if message:
                return message
    return None


def read_dem(alg, parameters, key, context, steps, *, label="DEM", unit=False):
    """``(array, grid, path-or-name)`` of the raster parameter ``key``, or ``(None, None, None)``.

    With ``unit``, the values are turned into metres as the command line turns a DEM's
    (:func:`strikeline.pipeline.elevation_units.dem_in_metres`): the unit of the tool's
    ``dem_unit`` parameter, else the unit the file declares (band unit, vertical CRS), else metres.
    """
    layer = alg.parameterAsRasterLayer(parameters, key, context)
    if layer is None:
        unreadable = unreadable_raster(alg, parameters, key, context, label=label)
        if unreadable:
            raise RasterReadError(unreadable)
        return None, None, None
    arr, grid = read_raster_layer(layer, label=label, is_cancelled=steps.is_cancelled)
    path = raster_path(layer)
    if unit:
        declared = read_vertical_unit(path) if path else {}
        arr = dem_in_metres(arr, declared, value(alg, parameters, "dem_unit", context),
                            what=f"{label} '{path or layer.name()}'", option=option_names(alg)["dem_unit"],
                            log=steps.log)
    return arr, grid, path or layer.name()


def read_contact_inputs(alg, parameters, context, steps, *, more: dict | None = None,
                        **options) -> tuple[Inputs, RunOptions]:
    """Contacts, DEM and contours of a tool (and the layers ``more``, as for :func:`read_layers`)
    as the library's :class:`Inputs`, with the :class:`RunOptions` they were read with.

    As :func:`strikeline.pipeline.load_inputs`: at least one topography, the layers read in the
    command line's order, then :func:`strikeline.pipeline.assemble_inputs`. ``options`` are
    further :class:`RunOptions` fields (the elevation field and pick spacing come from the
    parameters of :func:`add_contact_and_topography`).
    """
    if alg.parameterAsRasterLayer(parameters, DEM, context) is None \
            and alg.parameterAsSource(parameters, CONTOURS, context) is None:
        raise InputError("no topography given: give a DEM, topographic contour lines with their "
                         "elevation field, or both")
    contacts = [read_layer(alg, parameters, CONTACTS, context, steps, label="contacts", geometry="line"),
                *read_more_contacts(alg, parameters, context, steps)]
    dem, grid, dem_path = read_dem(alg, parameters, DEM, context, steps, unit=True)
    layers = read_layers(alg, parameters, context, steps, {"contours": (CONTOURS, "contours", "line"), **(more or {})})
    opts = RunOptions(contacts=[c.path for c in contacts], out="", **values(alg, parameters, context, "elev_field", "pick_spacing_m",
                                                               "dem_unit", "contour_unit"), **options)
    # Files are hashed into the summary; other entries only name the input.
    paths = {k: lyr.path for k, lyr in {"contacts": contacts[0], **layers}.items() if lyr is not None}
    if dem_path:
        paths["dem"] = dem_path
    inputs = assemble_inputs(contacts, opts, dem=dem, dem_grid=grid, paths=paths, log=steps.log,
                             records=input_records(opts, contacts, layers, dem_path),
                             names=option_names(alg), **layers)
    return inputs, opts


def input_records(opts: RunOptions, contacts, layers: dict, dem_path) -> dict:
    """summary.json's ``inputs``: every input by role with its path, layer and the fields used,
    as :func:`strikeline.pipeline.load_inputs` records the command line's (the contacts, a list of
    layers, and top contacts as lists, one record per input)."""
    fields = {
        "contours": {"elev_field": opts.elev_field},
        "boreholes": {"borehole_z_field": opts.borehole_z_field, "borehole_collar_field": opts.borehole_collar_field,
                      "borehole_depth_field": opts.borehole_depth_field},
        "orientations": {"dip_field": opts.dip_field, "strike_field": opts.strike_field,
                         "dip_direction_field": None if opts.strike_field else (opts.dip_direction_field or "dip_dir")},
        "map_units": {"unit_field": opts.unit_field},
    }
    records = {"contacts": [input_record(c.path, layer=c.layer_name, fields={"group_by": opts.group_by})
                            for c in contacts]}
    if dem_path:
        records["dem"] = input_record(dem_path)
    for role, lyr in layers.items():
        if lyr is None:
            continue
        record = input_record(lyr.path, layer=lyr.layer_name, fields=fields.get(role))
        records[role] = [record] if role == "top_contacts" else record
    return records


def to_dem_crs(layer, dem_grid, *, label, log):
    """``layer`` in the DEM's CRS, reprojected (with its log line) by the library."""
    return reproject_to(layer, dem_grid.crs_wkt, label=label, log=log)


PICKS = option("points").qgis
PICKS_FIELD = option("z_field").qgis
PICKS_FIELD_LABEL = "Elevation field of the picks"


class Picks(NamedTuple):
    """Elevation picks read from the picks parameter."""

    xyz: object  # (n, 3) float array: x, y, elevation
    source: object  # the QgsProcessingFeatureSource (its CRS is the picks' CRS)
    layer: object  # strikeline.io.vector.VectorLayer (Z kept)
    name: object  # LayerName
    values: dict  # field -> one value per point


def add_picks(alg) -> None:
    """The picks input of the attitude and surface tools (the output of Contact elevation picks)."""
    alg.addParameter(parameter(alg, "points"))
    alg.addParameter(parameter(alg, "z_field"))


def read_picks(alg, parameters, context, steps, *, fields=(), text_fields=()) -> Picks:
    """The picks of :func:`add_picks`.

    ``z`` comes from the elevation field or, when it is empty, from the points' Z. ``values``
    maps each of ``fields`` (numeric, float64 with NaN for null) and ``text_fields`` (any type,
    as read) to one value per point.
    """
    source = alg.parameterAsSource(parameters, PICKS, context)
    name = vector_name(alg.parameterAsVectorLayer(parameters, PICKS, context), source, "picks")
    layer = read_vector(source, name, geometry="point", keep_z=True, is_cancelled=steps.is_cancelled)
    field = optional_string(alg, parameters, PICKS_FIELD, context)
    xyz, owner = point_xyz(layer, z_field=field, z_option=f"the '{PICKS_FIELD_LABEL}'", what=name.what,
                           no_z_fix=f"choose the '{PICKS_FIELD_LABEL}' or give points with elevations as Z")
    values = point_values(layer, owner, numeric=fields, text=text_fields, what=name.what)
    return Picks(xyz, source, layer, name, values)
