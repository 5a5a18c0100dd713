"""The table of strikeline's options, :data:`OPTIONS`, and the constants of the chain it names.

Every option exists once here - its name (the :class:`RunOptions` attribute, the argparse
``dest``, the library keyword), type, unit, default with its basis, bounds, allowed values, help
text, command-line flag, QGIS parameter name and label, and the commands and tools that take it.
The command line's parsers (``strikeline.cli.options.add_option``), :class:`RunOptions`,
:func:`check_options` and the QGIS parameter definitions (``adapter_qgis.params``) are built from
it, so a default or a bound is changed in one place.

An option whose default is ``None`` is "unset": the library then chooses (its ``unset`` text says
how). A QGIS number parameter cannot be empty, so there ``0`` stands for unset
(:attr:`Option.qgis_default`).

This module imports neither GDAL nor QGIS (the numerical families it names its allowed values
from do not either), so the command line can build its parsers without loading the I/O layer.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Callable

from strikeline.attitude import (CONFIDENCE_METHODS, DEFAULT_MIN_POINTS, DEFAULT_RESAMPLES, DEFAULT_WINDOW_RESAMPLES,
                                 MIN_REPLICATES)
from strikeline.maps import SLOPE_SENSES, WIDTH_KINDS
from strikeline.surfaces import DEFAULT_BOREHOLE_SIGMA_M, DEFAULT_ORIENTATION_SIGMA_DEG, MODEL_CHOICES
from strikeline.pipeline.elevation_units import ELEVATION_UNITS

Log = Callable[[str], None]


def _quiet(_msg: str) -> None:
    pass


# --------------------------------------------------------------------------- constants of the chain
#: Misfit QA: contact segments are this many DEM cells long, flagged beyond this many cells when
#: only a surface raster is given (no model to forecast each segment without its picks).
SEGMENT_CELLS = 10
FLAG_CELLS = 3
#: Misfit QA: a segment is flagged when its vertical misfit against the forecast made without
#: it exceeds this many standard errors (two-sided 0.27 % for normal errors; common practice).
MISFIT_Z = 3.0
#: Largest standard error accepted for --dem-sigma, --contour-sigma, --contact-sigma (metres): more
#: is not a map's or a DEM's error but a unit mistake (feet, centimetres) or a typo.
MAX_SIGMA_M = 1000.0
#: How the spline's smoothing is chosen: by the same blocked cross-validation as the models (hold-out
#: blocks at least twice the correlation length of the picks' errors), because generalized
#: cross-validation assumes independent errors and, with digitising errors shared along a contact,
#: interpolates the picks (Opsomer, Wang & Yang 2001); the discrepancy principle against the stated
#: error ('discrepancy') oversmooths wherever the stated error is larger than the real one.
SPLINE_SMOOTHING = "kfold"


# --------------------------------------------------------------------------- the table
UNIT_WORDS = {"m": "metres", "deg": "degrees", "": ""}


@dataclass(frozen=True)
class Option:
    """One option of a command or QGIS tool (see the module docstring).

    ``kind`` is the value's type: ``float``, ``int``, ``str`` (free text or a name), ``bool`` (a
    switch), ``"path"`` (a file), ``"field"`` (a field of an input layer), ``"xyz"`` (three
    numbers). ``minimum``/``maximum`` bound a number (``*_open``: the bound itself is refused);
    ``choices`` are the allowed values (``choice_labels`` their words in QGIS, ``cli_choices`` how
    the command line spells them when it differs). ``wrap`` takes an angle modulo that many degrees
    instead of bounding it. ``geometry`` is the layer type of a ``"path"`` read as vectors (or
    ``"raster"``), ``parent`` the option whose layer a ``"field"`` belongs to, ``numeric`` whether
    that field must be numeric. ``commands`` are the subcommands (``"thickness outcrop"`` for a
    case), ``tools`` the QGIS tools (their ``name()``) that take the option; ``labels`` gives a
    tool its own label where the words differ. ``basis`` is where the default comes from.
    """

    name: str
    kind: Any
    help: str
    default: Any = None
    unit: str = ""
    minimum: float | None = None
    minimum_open: bool = False
    maximum: float | None = None
    maximum_open: bool = False
    choices: tuple = ()
    choice_labels: tuple = ()
    cli_choices: tuple = ()
    wrap: float | None = None
    unset: str = ""
    basis: str = ""
    flag: str | None = None
    metavar: str | None = None
    required: bool = False
    nargs: int | None = None
    #: The option may be given several times (argparse ``action="append"``): its value is then a
    #: list, one item per time given. A QGIS parameter stays single (one layer per parameter).
    repeatable: bool = False
    dest: str | None = None
    qgis: str | None = None
    label: str | None = None
    labels: tuple = ()  # ((tool, label), ...)
    helps: tuple = ()  # ((command, help), ...): a command's own words where they differ from ``help``
    geometry: str | None = None
    parent: str | None = None
    numeric: bool = False
    advanced: bool = False
    commands: tuple = ()
    tools: tuple = ()

    # ---- derived
    @property
    def is_number(self) -> bool:
        return self.kind in (float, int)

    @property
    def bounded(self) -> bool:
        return self.minimum is not None or self.maximum is not None

    @property
    def qgis_default(self):
        """The default as the QGIS parameter holds it: 0 for an optional number left unset, the
        index of the default among ``choices`` for an enum."""
        if self.choices:
            return None if self.default is None else self.choices.index(self.default)
        if self.is_number and self.default is None and not self.required:
            return 0
        return self.default

    def label_for(self, tool: str | None = None) -> str:
        return dict(self.labels).get(tool, self.label or self.name)

    def help_for(self, command: str | None = None) -> str:
        """The help text as subcommand ``command`` gives it (``help`` unless ``helps`` says otherwise)."""
        return dict(self.helps).get(command, self.help)

    def cli_value(self, value):
        """How the command line spells the allowed value ``value`` (``choices`` -> ``cli_choices``)."""
        return self.cli_choices[self.choices.index(value)] if self.cli_choices else value

    def described_default(self) -> str:
        """The default in words for help texts: ``default 50``, ``default: the DEM cell size``."""
        if self.default is None:
            return f"default: {self.unset}" if self.unset else ""
        if isinstance(self.default, bool):
            return ""
        if isinstance(self.default, float):
            return f"default {self.default:g}"
        return f"default {self.cli_value(self.default)}"

    def limits(self) -> str:
        """The bounds in words: ``greater than 0``, ``at least 20``, ``in [0, 90)``."""
        lo, hi = self.minimum, self.maximum
        if lo is not None and hi is not None:
            return f"in {'(' if self.minimum_open else '['}{lo:g}, {hi:g}{')' if self.maximum_open else ']'}"
        parts = []
        if lo is not None:
            parts.append(f"greater than {lo:g}" if self.minimum_open else f"at least {lo:g}")
        if hi is not None:
            parts.append(f"less than {hi:g}" if self.maximum_open else f"at most {hi:g}")
        return " and ".join(parts)

    def within(self, value) -> bool:
        """Whether the number ``value`` is finite and within the bounds (and a whole number for
        an ``int`` option)."""
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
            return False
        if self.kind is int and value != int(value):
            return False
        if self.minimum is not None and (value <= self.minimum if self.minimum_open else value < self.minimum):
            return False
        if self.maximum is not None and (value >= self.maximum if self.maximum_open else value > self.maximum):
            return False
        return True

    def kind_words(self) -> str:
        """``a number of metres``, ``a whole number``, ``degrees``."""
        unit = UNIT_WORDS.get(self.unit, self.unit)
        noun = "a whole number" if self.kind is int else "a number"
        return f"{noun} of {unit}" if unit else noun


def _opt(name, kind, help, **kw) -> Option:
    return Option(name, kind, help, **kw)


def _labels(choices, words: dict) -> tuple:
    """The QGIS words of ``choices``, in their order (a KeyError names a value without words)."""
    return tuple(words[c] for c in choices)


_RUN = ("run",)
_THICKNESS = ("thickness", "thickness outcrop", "thickness points", "thickness borehole", "thickness grids")
_TOLD = ("run", "demo", "attitude", *_THICKNESS)  # the commands that take --quiet and --log-json
_CHAIN = ("modelcontact",)
_PICK_TOOLS = ("modelcontact", "contactpicks")
_PLANE = ("run", "attitude")
_SURFACE_TOOLS = ("modelcontact", "surfacemodel")
_DEM_BASIS = ("national DEMs of 5-25 m cells state vertical accuracies (RMSE) of about 1-5 m; 2 m is a middle "
              "value (common practice)")
#: The elevation units in words (QGIS's choices).
_UNIT_LABELS = {"m": "metres", "ft": "international feet (0.3048 m)", "us-ft": "US survey feet (1200/3937 m)"}
_LINEWORK_BASIS = ("half of a 5 m positional tolerance, i.e. 0.5 mm at 1:10,000 (common practice for digitised "
                   "line work)")

_OPTION_LIST = (
    # ---- inputs of the whole chain
    _opt("contacts", "path", "line layer of the mapped contact(s): GeoPackage, Shapefile, GeoJSON, ...; give it "
         "several times for several files or layers (all are used), each as PATH or PATH:LAYER",
         flag="--contacts", metavar="PATH[:LAYER]", required=True, repeatable=True, qgis="CONTACTS",
         label="Mapped contact lines", geometry="line", commands=_RUN, tools=_PICK_TOOLS),
    _opt("contacts_layer", str, "layer name inside PATH, for every --contacts that names no :LAYER",
         unset="the first", flag="--contacts-layer", metavar="NAME", commands=_RUN),
    _opt("where", str, "OGR SQL filter on the contacts (on every --contacts input), e.g. \"unit = 'Kv'\"",
         flag="--where", metavar="SQL", commands=_RUN),
    _opt("dem", "path", "DEM raster (GeoTIFF or any GDAL raster); elevations in metres unless it declares feet "
         "or --dem-unit says so", flag="--dem", metavar="PATH",
         qgis="DEM", label="DEM (ground elevation, metres)", geometry="raster", commands=_RUN, tools=_PICK_TOOLS),
    _opt("contours", "path", "line layer of topographic contours", flag="--contours", metavar="PATH",
         qgis="CONTOURS", label="Topographic contour lines", geometry="line", commands=_RUN, tools=_PICK_TOOLS),
    _opt("contours_layer", str, "layer name inside the contours file", flag="--contours-layer", metavar="NAME",
         commands=_RUN),
    _opt("elev_field", "field", "numeric field with each contour's elevation", flag="--elev-field",
         metavar="NAME", qgis="ELEV_FIELD", label="Elevation field of the contour lines", parent="contours",
         numeric=True, commands=_RUN, tools=_PICK_TOOLS),
    _opt("dem_unit", str, "unit of the DEM's elevations: m, ft (international foot, 0.3048 m) or us-ft (US "
         "survey foot, 1200/3937 m); converted to metres at load", choices=ELEVATION_UNITS,
         unset="the unit the DEM declares (band unit type or the vertical axis of a compound CRS), else metres",
         flag="--dem-unit", qgis="DEM_UNIT", choice_labels=_labels(ELEVATION_UNITS, _UNIT_LABELS),
         label="Unit of the DEM's elevations (empty: the unit the DEM declares, else metres)", advanced=True,
         commands=_RUN, tools=(*_PICK_TOOLS, "depthtrace", "structurecontours")),
    _opt("contour_unit", str, "unit of the contours' elevation field: m, ft or us-ft; converted to metres at load",
         choices=ELEVATION_UNITS, unset="metres", flag="--contour-unit", qgis="CONTOUR_UNIT",
         choice_labels=_labels(ELEVATION_UNITS, _UNIT_LABELS), label="Unit of the contours' elevation field "
         "(empty: metres)", advanced=True, commands=_RUN, tools=_PICK_TOOLS),
    # ---- outputs
    _opt("out", "path", "folder to create for the results (must not exist unless --overwrite)", flag="--out",
         metavar="DIR", required=True, commands=("run", "batch"),
         helps=(("batch", "the batch folder: one folder per sheet, index.gpkg, index.html, batch.json; a rerun into "
                          "it redoes only the sheets whose inputs or options changed"),)),
    # ---- a series of sheets (strikeline batch)
    _opt("workers", int, "sheets run at once in local processes (1: one after the other)", default=1, minimum=1,
         basis="one sheet at a time: a sheet's own grid steps already use the cores (common practice)",
         flag="--workers", metavar="N", commands=("batch",)),
    _opt("scheduler", str, "run the sheets on the dask.distributed cluster whose scheduler listens at ADDRESS "
         "(e.g. tcp://host:8786; the dask extra); every worker must see the job's paths",
         unset="the sheets run on this machine", flag="--scheduler", metavar="ADDRESS", commands=("batch",)),
    _opt("force", bool, "redo every sheet, even those unchanged since the last run", default=False, flag="--force",
         commands=("batch",)),
    _opt("overwrite", bool, "replace an existing output (the --out folder or file)", default=False,
         flag="--overwrite", commands=("run", "demo", "attitude", "thickness", "thickness grids")),
    _opt("no_report", bool, "do not write report.html, the page of figures (drawing it needs matplotlib, the plot "
         "extra)", default=False, flag="--no-report", qgis="NO_REPORT",
         label="No report (report.html, the page of figures; drawing it needs matplotlib)", commands=("run", "demo"),
         tools=_CHAIN),
    _opt("demo_out", "path", "output folder", default="demo-output", flag="--out", metavar="DIR", dest="out",
         commands=("demo",)),
    # ---- what a command says while it works (strikeline.cli.progress)
    _opt("quiet", bool, "no progress bar and no information lines on stderr; warnings, errors and the results "
         "on stdout are still printed", default=False, flag="--quiet", commands=(*_TOLD, "batch"),
         helps=(("batch", "print nothing but errors and the final line"),)),
    _opt("log_json", "path", "write the command's steps (wall and CPU seconds, peak memory), messages and final "
         "status to FILE as JSON Lines while it runs; FILE must lie outside --out and be new or an earlier "
         "strikeline log, which is replaced", unset="no log file", flag="--log-json", metavar="FILE",
         commands=_TOLD),
    _opt("interval_m", float, "structure-contour interval; levels at multiples of it", default=50.0, unit="m",
         minimum=0.0, minimum_open=True, basis="a round interval that gives a handful of lines over a map sheet's "
         "relief of a few hundred metres (common practice)", flag="--interval", metavar="METRES",
         qgis="INTERVAL", label="Structure-contour interval", commands=_RUN,
         tools=("modelcontact", "structurecontours")),
    _opt("cell_m", float, "output cell size; the grid's corners lie on multiples of it, so sheets tile; with a "
         "DEM, the DEM is resampled onto it (GDAL, bilinear) for depth and trace", unit="m", minimum=0.0,
         minimum_open=True, unset="the DEM's grid, unchanged; without a DEM about 1/500 of the contours' (or "
         "picks') extent", flag="--cell", metavar="METRES", qgis="CELL",
         label="Output cell size (0: the DEM's grid; without a DEM about 1/500 of the extent)",
         labels=(("surfacemodel", "Cell size without a reference grid (0: about 1/500 of the extent)"),),
         commands=_RUN, tools=_SURFACE_TOOLS),
    _opt("extent", float, "output grid extent XMIN YMIN XMAX YMAX in the output CRS (the DEM's, else the "
         "contacts'), widened to multiples of the cell size", unit="m", nargs=4,
         metavar=("XMIN", "YMIN", "XMAX", "YMAX"), unset="the DEM's grid, else the contours' (or contacts') "
         "extent", flag="--extent", qgis="EXTENT", label="Output grid extent (empty: the DEM's grid, else the "
         "contours' or contacts' extent)", commands=_RUN, tools=_CHAIN),
    _opt("block_cells", int, "compute and write the grids in blocks of N x N cells (one band of blocks in memory "
         "at a time, two threads); the files are the same as without it", minimum=1,
         unset="blocks of 256 x 2048 cells beyond 2048 x 2048 cells or when the grid's arrays would fill more "
         "than half the memory budget, else the whole grid in memory", flag="--block-cells", metavar="N", advanced=True, commands=_RUN),
    _opt("pick_spacing_m", float, "spacing of DEM picks along the contacts", unit="m", minimum=0.0,
         minimum_open=True, unset="the DEM cell size", flag="--pick-spacing", metavar="METRES", qgis="PICK_SPACING",
         label="Spacing of the DEM picks along the contacts (0: the DEM cell size)", commands=_RUN,
         tools=_PICK_TOOLS),
    _opt("misfit_flag_m", float, "flag contact segments whose horizontal misfit against the forecast made without "
         "them exceeds this", unit="m", minimum=0.0, minimum_open=True,
         unset=f"flag where the vertical misfit exceeds {MISFIT_Z:g} standard errors, from the stated errors and "
               f"the ground slope; from a surface raster alone (QGIS Depth tool), {FLAG_CELLS} DEM cells",
         flag="--misfit-flag", metavar="METRES", qgis="MISFIT_FLAG",
         label=f"Flag contact segments whose horizontal misfit exceeds (0: vertical misfit over {MISFIT_Z:g} "
               "standard errors)",
         labels=(("depthtrace", f"Flag contact segments farther than (0: {FLAG_CELLS} DEM cells)"),),
         advanced=True, commands=_RUN, tools=("modelcontact", "depthtrace")),
    # ---- surface model
    _opt("model", str, "plane, quadratic trend (trend2), thin-plate spline, or auto: cross-validation on held-out "
         "contact segments, keeping the simplest model within the larger of its standard error and the stated pick "
         "error of the best, unless a chi-square test says its residuals far exceed the stated errors; the reason "
         "is printed", default="auto", choices=MODEL_CHOICES,
         choice_labels=_labels(MODEL_CHOICES, {
             "auto": "Choose by cross-validation (simplest within the stated pick error of the best)",
             "plane": "Best-fit plane (total least squares)", "trend2": "Quadratic trend surface",
             "spline": "Thin-plate smoothing spline"}),
         basis="auto, in every command and tool: the model the data support, with the reason said",
         flag="--model", qgis="MODEL", label="Surface model", commands=_RUN, tools=_SURFACE_TOOLS),
    _opt("boreholes", "path", "point layer of boreholes that reach the surface", flag="--boreholes",
         metavar="PATH", qgis="BOREHOLES", label="Boreholes that reach the surface (points)", geometry="point",
         commands=_RUN, tools=_SURFACE_TOOLS),
    _opt("boreholes_layer", str, "layer name inside the boreholes file", flag="--boreholes-layer", metavar="NAME",
         commands=_RUN),
    _opt("borehole_z_field", "field", "field with the surface's elevation in each hole", unset="the points' Z",
         flag="--borehole-z-field", metavar="NAME", qgis="BOREHOLE_Z_FIELD",
         label="Borehole field: the surface's elevation (empty: Z)", parent="boreholes", numeric=True,
         commands=_RUN, tools=_SURFACE_TOOLS),
    _opt("borehole_collar_field", "field", "field with the collar elevation (with --borehole-depth-field)",
         flag="--borehole-collar-field", metavar="NAME", qgis="BOREHOLE_COLLAR_FIELD",
         label="Borehole field: collar elevation", parent="boreholes", numeric=True, commands=_RUN,
         tools=_SURFACE_TOOLS),
    _opt("borehole_depth_field", "field", "field with the vertical depth from collar to the surface",
         flag="--borehole-depth-field", metavar="NAME", qgis="BOREHOLE_DEPTH_FIELD",
         label="Borehole field: depth from collar to the surface", parent="boreholes", numeric=True,
         commands=_RUN, tools=_SURFACE_TOOLS),
    _opt("borehole_sigma_m", float, "standard error of borehole elevations (0: exact)",
         default=DEFAULT_BOREHOLE_SIGMA_M, unit="m", minimum=0.0,
         basis="a collar levelled by GNSS or read off a DEM and a logged depth to the contact are good to about "
               "a metre (common practice); the surface model's own default, "
               "strikeline.surfaces.DEFAULT_BOREHOLE_SIGMA_M", flag="--borehole-sigma", metavar="METRES",
         qgis="BOREHOLE_SIGMA", label="Standard error of the borehole elevations (m, 0: exact)", advanced=True,
         commands=_RUN, tools=_SURFACE_TOOLS),
    _opt("orientations", "path", "point layer of dip measurements on the surface", flag="--orientations",
         metavar="PATH", qgis="ORIENTATIONS", label="Dip measurements on the surface (points)", geometry="point",
         commands=_RUN, tools=_SURFACE_TOOLS),
    _opt("orientations_layer", str, "layer name inside the orientations file", flag="--orientations-layer",
         metavar="NAME", commands=_RUN),
    _opt("dip_field", "field", "dip field, degrees", default="dip", flag="--dip-field", metavar="NAME",
         qgis="DIP_FIELD", label="Dip field", parent="orientations", numeric=True, commands=_RUN,
         tools=_SURFACE_TOOLS),
    _opt("dip_direction_field", "field", "dip-direction field, degrees", default="dip_dir",
         flag="--dip-direction-field", metavar="NAME", qgis="DIP_DIRECTION_FIELD", label="Dip-direction field",
         parent="orientations", numeric=True, commands=_RUN, tools=_SURFACE_TOOLS),
    _opt("strike_field", "field", "right-hand-rule strike field instead of dip direction", flag="--strike-field",
         metavar="NAME", qgis="STRIKE_FIELD", label="Strike field (right-hand rule) instead of dip direction",
         parent="orientations", numeric=True, commands=_RUN, tools=_SURFACE_TOOLS),
    _opt("orientation_sigma_deg", float, "standard error of measured dips (0: exact)",
         default=DEFAULT_ORIENTATION_SIGMA_DEG, unit="deg", minimum=0.0,
         basis="the repeatability of compass-clinometer readings (common practice); the surface model's own "
               "default, strikeline.surfaces.DEFAULT_ORIENTATION_SIGMA_DEG",
         flag="--orientation-sigma", metavar="DEGREES", qgis="ORIENTATION_SIGMA",
         label="Standard error of the measured dips (°, 0: exact)", advanced=True, commands=_RUN,
         tools=_SURFACE_TOOLS),
    _opt("top_contacts", "path", "line layer of the unit's top contact: models it too and writes isopach grids; "
         "repeatable, each as PATH or PATH:LAYER", flag="--top-contacts", metavar="PATH[:LAYER]", repeatable=True,
         qgis="TOP_CONTACTS", label="Top contact of the unit (lines): isopachs",
         geometry="line", commands=_RUN, tools=_CHAIN),
    _opt("top_contacts_layer", str, "layer name inside the top-contacts file, for every --top-contacts that names "
         "no :LAYER", flag="--top-contacts-layer", metavar="NAME", commands=_RUN),
    _opt("top_where", str, "OGR SQL filter on the top contacts (on every --top-contacts input)", flag="--top-where",
         metavar="SQL", commands=_RUN),
    # ---- points from delimited text (CSV), read by OGR's CSV driver
    _opt("x_field", str, "points from delimited text (.csv): the column of the x (easting) coordinate, in every "
         "CSV point input", flag="--x-field", metavar="NAME", commands=("run", "attitude")),
    _opt("y_field", str, "points from delimited text (.csv): the column of the y (northing) coordinate",
         flag="--y-field", metavar="NAME", commands=("run", "attitude")),
    _opt("crs", str, "points from delimited text (.csv): their CRS, e.g. EPSG:32633 or a WKT or PROJ string "
         "(a CSV declares none)", flag="--crs", metavar="CRS", commands=("run", "attitude")),
    # ---- the geological map's units
    _opt("map_units", "path", "polygon layer of the map's units: the surface stays below ground where a unit above "
         "it crops out and above ground where a unit below it crops out", flag="--map-units", metavar="PATH",
         qgis="MAP_UNITS", label="Geological map units (polygons; needs the DEM)", geometry="polygon",
         commands=_RUN, tools=_SURFACE_TOOLS),
    _opt("map_units_layer", str, "layer name inside the map-units file", flag="--map-units-layer", metavar="NAME",
         commands=_RUN),
    _opt("unit_field", "field", "field of the map-units layer that holds each polygon's unit", flag="--unit-field",
         metavar="NAME", qgis="UNIT_FIELD", label="Map units field: the unit of each polygon", parent="map_units",
         commands=_RUN, tools=_SURFACE_TOOLS),
    _opt("units_above", str, "comma-separated units that lie above the modelled surface (e.g. \"Kv,Kl\")",
         flag="--units-above", metavar="VALUES", qgis="UNITS_ABOVE", label="Units above the surface (comma-separated)",
         commands=_RUN, tools=_SURFACE_TOOLS),
    _opt("units_below", str, "comma-separated units that lie below it; polygons of other units (superficial "
         "deposits, water) are ignored", flag="--units-below", metavar="VALUES", qgis="UNITS_BELOW",
         label="Units below the surface (comma-separated; other units are ignored)", commands=_RUN,
         tools=_SURFACE_TOOLS),
    # ---- stated errors, confidence and local attitudes
    _opt("dem_sigma_m", float, "vertical standard error of DEM elevations (picks or points); the default is a "
         "typical stated accuracy of 5-25 m national DEMs: give your DEM's, e.g. 0.2 for lidar, or 0 when it is "
         "unknown (the bootstrap of the points alone then gives the confidence). With --contact-sigma and "
         "--contour-sigma, it also sets the model choice's tolerance, the misfit check's threshold and the "
         "confidence intervals",
         helps=(("attitude", "vertical standard error of the points' elevations when they come from a DEM; the "
                 "default is a typical stated accuracy of 5-25 m national DEMs: give your DEM's, e.g. 0.2 for "
                 "lidar, or 0 when it is unknown (the bootstrap of the points alone then gives the confidence)"),),
         default=2.0, unit="m", minimum=0.0, maximum=MAX_SIGMA_M,
         basis=_DEM_BASIS + "; the same in run, attitude and every QGIS tool, so the same picks get the same "
               "confidence everywhere",
         flag="--dem-sigma", metavar="METRES", qgis="DEM_SIGMA", label="Vertical standard error of DEM elevations "
         "(m, 0: unknown)", advanced=True, commands=_PLANE,
         tools=("modelcontact", "planeattitude", "localattitudes")),
    _opt("contour_sigma_m", float, "positional standard error of contour picks, turned vertical through the "
         "ground slope", default=2.5, unit="m", minimum=0.0, maximum=MAX_SIGMA_M, basis=_LINEWORK_BASIS,
         flag="--contour-sigma", metavar="METRES", qgis="CONTOUR_SIGMA",
         label="Positional standard error of contour picks (m)", advanced=True, commands=_RUN, tools=_CHAIN),
    _opt("contact_sigma_m", float, "positional standard error of the mapped contact lines, turned vertical through "
         "the ground slope for DEM picks", default=2.5, unit="m", minimum=0.0, maximum=MAX_SIGMA_M,
         basis="as contours: linework digitised at 1:10,000 (common practice)", flag="--contact-sigma",
         metavar="METRES", qgis="CONTACT_SIGMA", label="Positional standard error of the mapped contact lines (m)",
         advanced=True, commands=_RUN, tools=_CHAIN),
    _opt("window_m", float, "radius of the moving windows of local attitudes", unit="m", minimum=0.0,
         minimum_open=True, unset="about 50 picks per window, from the pick density", flag="--window",
         metavar="METRES", qgis="WINDOW", label="Local-attitude window radius (0: about 50 picks per window)",
         labels=(("localattitudes", "Window radius (0: about 50 picks per window)"),), advanced=True,
         commands=_RUN, tools=("modelcontact", "localattitudes")),
    _opt("group_by", "field", "also fit one plane per value of this field of the contacts (a unit, a contact "
         "name, ...)", helps=(("attitude", "also fit one plane per value of this field of the points (a unit, a "
                               "contact name, ...)"),), flag="--group-by", metavar="FIELD", qgis="GROUP_BY",
         label="Also one plane per value of this field", parent="contacts", commands=_PLANE,
         tools=("modelcontact", "planeattitude")),
    _opt("resamples", int, "bootstrap resamples and Monte Carlo draws", default=DEFAULT_RESAMPLES,
         minimum=MIN_REPLICATES,
         basis=f"Efron & Tibshirani (1993, ch. 13) ask for about 1000 resamples for percentile intervals "
               f"(strikeline.attitude.DEFAULT_RESAMPLES); the library refuses fewer than {MIN_REPLICATES} "
               "(strikeline.attitude.MIN_REPLICATES), in every command and tool",
         flag="--resamples", metavar="N", qgis="RESAMPLES", label="Bootstrap resamples and Monte Carlo draws",
         advanced=True, commands=_PLANE, tools=("modelcontact", "planeattitude")),
    _opt("seed", int, "seed of the random draws (bootstrap, Monte Carlo, cross-validation folds): equal seeds "
         "give identical results",
         helps=(("attitude", "seed of the random draws (bootstrap and Monte Carlo): equal seeds give identical "
                 "results"),), default=0, minimum=0, flag="--seed", metavar="N", qgis="SEED",
         label="Random seed", advanced=True, commands=_PLANE,
         tools=("modelcontact", "planeattitude", "localattitudes", "surfacemodel")),
    # ---- strikeline attitude
    _opt("points", "path", "point layer with elevations: GeoPackage, Shapefile, GeoJSON, ...", flag="--points",
         metavar="PATH", required=True, qgis="PICKS", label="Elevation picks (points)", geometry="point",
         commands=("attitude",), tools=("planeattitude", "localattitudes", "surfacemodel")),
    _opt("points_layer", str, "layer name inside PATH", unset="the first", flag="--points-layer", metavar="NAME",
         commands=("attitude",)),
    _opt("points_where", str, "OGR SQL filter on the points, e.g. \"source = 'dem'\"", flag="--where",
         metavar="SQL", dest="where", commands=("attitude",)),
    _opt("z_field", "field", "numeric field with each point's elevation in metres (in a .csv: the column read as "
         "the points' Z)", unset="the geometries' Z",
         flag="--z-field", metavar="NAME", qgis="PICKS_ELEV_FIELD",
         label="Elevation field of the picks (empty: the points' Z)", parent="points", numeric=True,
         commands=("attitude",), tools=("planeattitude", "localattitudes", "surfacemodel")),
    _opt("json_out", "path", "also write the result as JSON (deterministic bytes)", flag="--out",
         metavar="FILE.json", dest="out", commands=("attitude",)),
    # ---- QGIS local attitudes (the whole chain uses the library's defaults for these)
    _opt("contact_field", "field", "contact id field of the picks: windows along each contact",
         default="contact_id", qgis="CONTACT_FIELD", label="Contact id field of the picks (windows along each "
         "contact)", parent="points", tools=("localattitudes",)),
    _opt("along_contacts", bool, "windows centred along each contact", default=True, qgis="ALONG_CONTACTS",
         label="Windows along each contact", tools=("localattitudes",)),
    _opt("across_picks", bool, "windows on a regular grid across all picks", default=True, qgis="ACROSS_PICKS",
         label="Windows on a grid across all picks", tools=("localattitudes",)),
    _opt("min_points", int, "fewest picks in a window for a fit", default=DEFAULT_MIN_POINTS, minimum=4,
         basis="strikeline.attitude.DEFAULT_MIN_POINTS; a bootstrap needs at least 4 points", qgis="MIN_POINTS",
         label="Fewest picks in a window", advanced=True, tools=("localattitudes",)),
    _opt("grid_spacing_m", float, "spacing of the grid of window centres", unit="m", minimum=0.0,
         minimum_open=True, unset="the window radius", qgis="GRID_SPACING",
         label="Grid spacing (0: the window radius)", advanced=True, tools=("localattitudes",)),
    _opt("confidence_method", str, "how each window's 95% confidence is computed", default="bootstrap",
         choices=CONFIDENCE_METHODS, choice_labels=_labels(CONFIDENCE_METHODS, {
             "bootstrap": "Bootstrap over the window's picks",
             "analytic": "Analytic (first-order covariance of the fit)"}),
         qgis="CONFIDENCE", label="95% confidence", advanced=True, tools=("localattitudes",)),
    _opt("window_resamples", int, "bootstrap resamples and Monte Carlo draws per window",
         default=DEFAULT_WINDOW_RESAMPLES, minimum=MIN_REPLICATES,
         basis="strikeline.attitude.DEFAULT_WINDOW_RESAMPLES: fewer than for one plane, since every window is "
               "resampled (our choice); as the whole chain's local attitudes",
         qgis="RESAMPLES", label="Bootstrap resamples per window", advanced=True, tools=("localattitudes",)),
    # ---- QGIS isopachs
    _opt("isopach_interval_m", float, "interval of the isopach lines (0: no lines)", default=10.0, unit="m",
         minimum=0.0, basis="a round interval for units tens of metres thick (common practice)", qgis="INTERVAL",
         label="Isopach interval (0: no lines)", tools=("isopachs",)),
    # ---- strikeline thickness
    _opt("width_m", float, "outcrop width between the top and base contacts, perpendicular to strike", unit="m",
         minimum=0.0, flag="--width-m", metavar="METRES", required=True, commands=("thickness outcrop",)),
    _opt("dip_deg", float, "dip of the unit", unit="deg", minimum=0.0, maximum=90.0, flag="--dip-deg",
         metavar="DEG", required=True, qgis="DIP_DEG", label="Dip of the unit (°)",
         commands=("thickness outcrop", "thickness points", "thickness borehole"), tools=("unitthickness",)),
    _opt("dip_direction_deg", float, "dip direction of the unit, clockwise from grid north (any angle, taken "
         "modulo 360)", unit="deg", wrap=360.0, flag="--dip-direction-deg", metavar="DEG", required=True,
         qgis="DIP_DIRECTION_DEG", label="Dip direction of the unit (° clockwise from grid north)",
         commands=("thickness points", "thickness borehole"), tools=("unitthickness",)),
    _opt("ground_slope_deg", float, "ground slope along the width measurement", default=0.0, unit="deg",
         minimum=0.0, maximum=90.0, maximum_open=True, basis="flat ground, where the width alone gives the "
         "thickness", flag="--ground-slope-deg", metavar="DEG", commands=("thickness outcrop",)),
    _opt("slope_sense", str, "which way the ground descends: against-dip (opposite to the dip, as on a scarp "
         "slope) or with-dip (in the dip direction, as on a dip slope); needed on sloping ground",
         choices=SLOPE_SENSES, cli_choices=tuple(s.replace("_", "-") for s in SLOPE_SENSES),
         choice_labels=_labels(SLOPE_SENSES, {"against_dip": "ground descends against the dip",
                                              "with_dip": "ground descends with the dip"}),
         flag="--slope-sense", commands=("thickness outcrop",)),
    _opt("width_kind", str, "slope: the width is measured along the ground; horizontal: on the map",
         default="slope", choices=WIDTH_KINDS, choice_labels=_labels(WIDTH_KINDS, {
             "slope": "along the ground (slope distance)", "horizontal": "horizontal, on the map"}),
         basis="a tape or pace along the ground measures the slope distance", flag="--width-kind",
         qgis="WIDTH_KIND", label="Width measured", commands=("thickness outcrop",), tools=("unitthickness",)),
    _opt("top", "xyz", "a point on the top of the unit (metres, projected CRS)", flag="--top", nargs=3,
         metavar=("X", "Y", "Z"), required=True, commands=("thickness points",)),
    _opt("base", "xyz", "a point on the base of the unit (metres, same CRS)", flag="--base", nargs=3,
         metavar=("X", "Y", "Z"), required=True, commands=("thickness points",)),
    _opt("top_grid", "path", "elevation grid of the top of the unit", flag="--top", metavar="TOP.tif", dest="top",
         required=True, commands=("thickness grids",)),
    _opt("base_grid", "path", "elevation grid of the base of the unit", flag="--base", metavar="BASE.tif",
         dest="base", required=True, commands=("thickness grids",)),
    _opt("grids", "path", "the grids case: top and base surface grids (the same as 'thickness grids')",
         flag="--grids", nargs=2, metavar=("TOP.tif", "BASE.tif"), commands=("thickness",)),
    _opt("grids_out", "path", "folder to create for vertical_thickness.tif and true_thickness.tif (with --grids "
         "or the grids case)", flag="--out", metavar="DIR", dest="out", commands=("thickness", "thickness grids")),
    _opt("length_m", float, "length of hole between the top and base of the unit, along the hole", unit="m",
         minimum=0.0, flag="--length-m", metavar="METRES", required=True, commands=("thickness borehole",)),
    _opt("hole_azimuth_deg", float, "azimuth of the hole's downward direction, clockwise from grid north (any "
         "angle, taken modulo 360)", unit="deg", wrap=360.0, flag="--hole-azimuth-deg", metavar="DEG",
         required=True, commands=("thickness borehole",)),
    _opt("hole_plunge_deg", float, "plunge of the hole below horizontal (90 = vertical hole)", unit="deg",
         minimum=0.0, maximum=90.0, flag="--hole-plunge-deg", metavar="DEG", required=True,
         commands=("thickness borehole",)),
)

#: Every option by name.
OPTIONS: dict[str, Option] = {o.name: o for o in _OPTION_LIST}
assert len(OPTIONS) == len(_OPTION_LIST), "an option is in the table twice"


def option(name: str) -> Option:
    """The table's entry ``name`` (a ``KeyError`` names the unknown option)."""
    try:
        return OPTIONS[name]
    except KeyError:
        raise KeyError(f"no option {name!r} in strikeline.pipeline.options.OPTIONS") from None


def default(name: str):
    """The default of option ``name``."""
    return option(name).default


def options_of(*, command: str | None = None, tool: str | None = None) -> list[Option]:
    """The options a command (``"run"``, ``"thickness outcrop"``) or QGIS tool takes, in table order."""
    return [o for o in _OPTION_LIST if (command is not None and command in o.commands)
            or (tool is not None and tool in o.tools)]


#: How the command line names the options that messages refer to; the QGIS adapter passes the
#: labels of its own parameters instead.
CLI_OPTION_NAMES = {o.name: o.flag for o in _OPTION_LIST if o.flag}
