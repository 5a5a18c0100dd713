"""The steps of a run: inputs, picks, attitude, surface, maps, summary and written outputs.
The CLI and the QGIS adapter call these; they hold no maths of their own.

The table of options (:mod:`strikeline.pipeline.options`) is imported at once; the steps, which
read and write through GDAL (:mod:`strikeline.io`), on first use of one of their names, so that
the command line builds its parsers from the table without loading GDAL.
"""
import sys as _sys
from importlib import import_module as _import_module
from types import ModuleType as _ModuleType

from strikeline.pipeline.options import (  # noqa: F401
    FLAG_CELLS,
    MAX_SIGMA_M,
    MISFIT_Z,
    OPTIONS,
    SEGMENT_CELLS,
    SPLINE_SMOOTHING,
    CLI_OPTION_NAMES,
    Option,
    RunOptions,
    check_options,
    check_unit_options,
    check_value,
    default,
    option,
    options_of,
)

#: Names of the steps' modules, imported on first use: module -> names.
_LAZY = {
    "inputs": (
        "Inputs",
        "reproject_to",
        "borehole_points",
        "orientation_rows",
        "load_inputs",
        "assemble_inputs",
        "map_unit_polygons",
    ),
    "units": (
        "UNIT_VIOLATION_M",
        "UNIT_MARGIN_SIGMAS",
        "map_unit_bounds",
        "map_unit_check",
        "unit_conflicts_layer",
    ),
    "steps": (
        "collect_picks",
        "fit_picks",
        "pick_sigmas",
        "attitude_of",
        "POOR_DIRECTION_DEG",
        "surface_grid",
        "contact_segments",
        "segment_labels",
        "segment_block_m",
        "smooth_trend",
        "model_surface",
        "structure_contours",
        "depth_trace_misfit",
        "log_model_choice",
        "error_scale_hint",
    ),
    "compute": (
        "Results",
        "compute",
    ),
    "summary": (
        "build_summary",
    ),
    "outputs": (
        "write_results",
        "vocabulary_layer",
        "picks_layer",
        "attitudes_layer",
        "contours_layer",
        "trace_layer",
        "contact_misfit_layer",
        "result_rasters",
        "result_layers",
        "trace_misfit_layer",
        "plane_attitudes_layer",
    ),
    "planes": (
        "group_labels",
        "planes_by_group",
        "PointPlanes",
        "point_planes",
        "point_local_attitudes",
    ),
    "points": (
        "point_xyz",
        "point_values",
        "pick_set_of_points",
    ),
    "rasters": (
        "grid_over",
        "points_bounds",
        "require_same_grid",
        "raster_flag",
        "split_by_flags",
        "structure_contours_on_ground",
        "forecast_mask",
        "surface_dip_grids",
    ),
    "picks_surface": (
        "PicksSurface",
        "surface_from_picks",
    ),
    "thickness": (
        "FeatureThickness",
        "line_ends",
        "thickness_of_lines",
        "thickness_of_widths",
        "thickness_of_boreholes",
        "Isopachs",
        "isopachs",
    ),
    "run": (
        "run",
    ),
}
_MODULE_OF = {name: module for module, names in _LAZY.items() for name in names}

#: The package's public names (the option table's and every step's), so ``help()`` lists them.
__all__ = sorted({n for n in globals() if not n.startswith("_") and n.isidentifier()
                  and n not in ("annotations",)} | set(_MODULE_OF))


def __getattr__(name):
    module = _MODULE_OF.get(name)
    if module is None:
        raise AttributeError(f"module 'strikeline.pipeline' has no attribute {name!r}")
    value = getattr(_import_module(f"strikeline.pipeline.{module}"), name)
    globals()[name] = value
    return value


def __dir__():
    return sorted(set(globals()) | set(_MODULE_OF))


class _Package(_ModuleType):
    """The package's ``run`` and ``compute`` are the functions: importing the submodules of the
    same names must not bind the package attributes to the submodules."""

    def __setattr__(self, name, value):
        if isinstance(value, _ModuleType) and name in _MODULE_OF:
            return
        super().__setattr__(name, value)


_sys.modules[__name__].__class__ = _Package
