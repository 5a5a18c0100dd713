"""The options of strikeline's commands and QGIS tools: :class:`RunOptions` and the checks made
before any work.

The table every option is written in once (default, bounds, allowed values, help, CLI flag, QGIS
parameter) is :mod:`strikeline.pipeline.option_table`; its names are re-exported here, so callers
import options from one place. Imports neither GDAL nor QGIS.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

from strikeline.errors import InputError
from strikeline.pipeline.option_table import (  # noqa: F401  (re-exported: the options' one import place)
    CLI_OPTION_NAMES,
    FLAG_CELLS,
    MAX_SIGMA_M,
    MISFIT_Z,
    OPTIONS,
    SEGMENT_CELLS,
    SPLINE_SMOOTHING,
    UNIT_WORDS,
    Log,
    Option,
    _quiet,
    default,
    option,
    options_of,
)


# --------------------------------------------------------------------------- RunOptions
@dataclass
class RunOptions:
    """What ``strikeline run`` was asked to do; the defaults are the table's (:data:`OPTIONS`)."""

    contacts: str | list  # PATH or PATH:LAYER, or a list of them (strikeline.pipeline.inputs.layer_specs)
    out: str
    contacts_layer: str | None = default("contacts_layer")
    where: str | None = default("where")
    dem: str | None = default("dem")
    contours: str | None = default("contours")
    contours_layer: str | None = default("contours_layer")
    elev_field: str | None = default("elev_field")
    dem_unit: str | None = default("dem_unit")  # m, ft, us-ft (strikeline.pipeline.elevation_units)
    contour_unit: str | None = default("contour_unit")
    interval_m: float = default("interval_m")
    cell_m: float | None = default("cell_m")
    extent: tuple | None = default("extent")  # (xmin, ymin, xmax, ymax) of the output grid
    block_cells: int | tuple | None = default("block_cells")  # N, or (rows, cols) from the library
    overwrite: bool = default("overwrite")
    no_report: bool = default("no_report")
    pick_spacing_m: float | None = default("pick_spacing_m")
    # surface model and extra constraints
    model: str = default("model")
    boreholes: str | None = default("boreholes")
    boreholes_layer: str | None = default("boreholes_layer")
    borehole_z_field: str | None = default("borehole_z_field")
    borehole_collar_field: str | None = default("borehole_collar_field")
    borehole_depth_field: str | None = default("borehole_depth_field")
    borehole_sigma_m: float = default("borehole_sigma_m")
    orientations: str | None = default("orientations")
    orientations_layer: str | None = default("orientations_layer")
    dip_field: str = default("dip_field")
    dip_direction_field: str | None = default("dip_direction_field")
    strike_field: str | None = default("strike_field")
    orientation_sigma_deg: float = default("orientation_sigma_deg")
    top_contacts: str | list | None = default("top_contacts")
    top_contacts_layer: str | None = default("top_contacts_layer")
    top_where: str | None = default("top_where")
    # points from delimited text (CSV)
    x_field: str | None = default("x_field")
    y_field: str | None = default("y_field")
    crs: str | None = default("crs")
    # the geological map's unit polygons as constraints
    map_units: str | None = default("map_units")
    map_units_layer: str | None = default("map_units_layer")
    unit_field: str | None = default("unit_field")
    units_above: str | None = default("units_above")  # comma-separated unit names
    units_below: str | None = default("units_below")
    misfit_flag_m: float | None = default("misfit_flag_m")
    # stated errors, confidence and local attitudes
    dem_sigma_m: float = default("dem_sigma_m")
    contour_sigma_m: float = default("contour_sigma_m")
    contact_sigma_m: float = default("contact_sigma_m")
    window_m: float | None = default("window_m")
    group_by: str | None = default("group_by")
    resamples: int = default("resamples")
    seed: int = default("seed")
    # what the command line says while it works (no effect on the results)
    quiet: bool = default("quiet")
    log_json: str | None = default("log_json")


# --------------------------------------------------------------------------- checks on options
def option_called(name: str, names: dict | None = None) -> str:
    """Option ``name`` as messages call it: as ``names`` says (the caller's words: a QGIS tool's
    parameter labels, a job file's keys), else its command-line flag, else its name."""
    return (names or {}).get(name) or CLI_OPTION_NAMES.get(name) or name


def check_value(name: str, value, *, names: dict | None = None):
    """Refuse a value of option ``name`` outside the table's bounds or allowed values.

    Returns the value (an angle with ``wrap`` taken modulo it). ``None`` (unset) passes. The
    message is one line: the option as ``names`` calls it (default the command-line flag), the
    value received, the limit and the fix.
    """
    o = option(name)
    if value is None:
        return None
    what = option_called(name, names)
    if o.choices:
        if value not in o.choices:
            allowed = ", ".join(map(str, (o.cli_value(c) for c in o.choices)))
            raise InputError(f"{what} must be one of {allowed}; got {value!r}: choose one of them")
        return value
    if not o.is_number:
        return value
    if o.wrap is not None and isinstance(value, (int, float)) and math.isfinite(value):
        return value % o.wrap
    if not o.within(value):
        limit = o.limits()
        need = f"{o.kind_words()} {limit}" if limit else f"a finite {o.kind_words()[2:]}"
        shown = f"{value:g}" if isinstance(value, (int, float)) and not isinstance(value, bool) else repr(value)
        fix = (f"give for example {o.default:g} (the default)" if o.is_number and o.default not in (None, 0)
               else f"give {need}")
        raise InputError(f"{what} must be {need}, got {shown}; {fix}")
    return value


def check_options(opts: RunOptions, *, names: dict | None = None) -> None:
    """Refuse contradictory, incomplete or out-of-bounds options before any work is done.

    Every bounded or choice option of the table that ``opts`` carries is checked
    (:func:`check_value`); ``names`` says how messages name the options (default the flags).
    """
    from strikeline.io.files import check_out_folder

    if opts.dem is None and opts.contours is None:
        raise InputError("no topography given: give --dem PATH, --contours PATH --elev-field NAME, or both")
    for o in OPTIONS.values():
        if (o.bounded or o.choices) and hasattr(opts, o.name):
            check_value(o.name, getattr(opts, o.name), names=names)
    check_unit_options(opts, names=names)
    if getattr(opts, "extent", None) is not None:
        from strikeline.geometry.grid import check_extent

        check_extent(opts.extent, what=option_called("extent", names))
    check_out_folder(opts.out, overwrite=opts.overwrite, inputs=input_paths(opts))


def input_paths(opts: RunOptions) -> list:
    """Every input file of a run, for the checks that keep --out apart from the inputs
    (:func:`strikeline.io.files.check_out_folder`; None where an input is not given)."""
    return [*input_files(opts.contacts), opts.dem, opts.contours, opts.boreholes, opts.orientations,
            *input_files(opts.top_contacts), opts.map_units]


def input_files(value) -> list:
    """The files of a repeatable layer option (``PATH`` or ``PATH:LAYER``, or a list of them)."""
    from strikeline.pipeline.inputs import layer_specs

    return [path for path, _ in layer_specs(value)]


def check_unit_options(opts: RunOptions, *, names: dict | None = None) -> None:
    """The map-unit options go together: a layer, its unit field, at least one unit list, no unit
    on both sides, and a DEM (``names`` says how to name the options; default the CLI's)."""
    from strikeline.surfaces.units import parse_unit_names

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
    from strikeline.surfaces.units import parse_unit_names

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
