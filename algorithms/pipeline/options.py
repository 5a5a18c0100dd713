"""What a run is asked to do: :class:`RunOptions`, the checks made before any work, and how
messages name the options.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from strikeline.defaults import (DEFAULT_BOREHOLE_SIGMA_M, DEFAULT_CONTOUR_SIGMA_M, DEFAULT_DEM_SIGMA_M,
                                 DEFAULT_ORIENTATION_SIGMA_DEG, MODELS, DEFAULT_CONTACT_SIGMA_M)
from strikeline.errors import InputError
from strikeline.io.files import check_out_folder
from strikeline.surfaces.units import parse_unit_names


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



#: How the spline's smoothing is chosen: by the same blocked cross-validation as the models (hold-out
#: blocks at least twice the correlation length of the picks' errors), because generalized
#: cross-validation assumes independent errors and, with digitising errors shared along a contact,
#: interpolates the picks (Opsomer, Wang & Yang 2001); the discrepancy principle against the stated
#: error ('discrepancy') oversmooths wherever the stated error is larger than the real one.
SPLINE_SMOOTHING = "kfold"


#: Largest standard error accepted for --dem-sigma, --contour-sigma, --contact-sigma (metres).
MAX_SIGMA_M = 1000.0
