"""Library calls that the single-step tools share, in the order :func:`strikeline.pipeline.compute`
makes them, so a step run on its own gives the numbers the whole chain gives.

No numerical method lives here: each function strings together library functions for one
tool; sequences the library offers itself (``pipeline.structure_contours``,
``pipeline.depth_trace_misfit``, ``pipeline.model_surface``) are called directly by the tools.
"""
from __future__ import annotations

import numpy as np
import shapely

from strikeline.errors import InputError
from strikeline.geometry.grid import Grid
from strikeline.io.crs import same_crs
from strikeline.io.vector import VectorLayer
from strikeline.picks import sample_bilinear
from strikeline.pipeline import Inputs, RunOptions, surface_grid
from strikeline.maps.trace import split_lines_by_flag


def grid_over(bounds, *, cell_m, crs_wkt, log) -> Grid:
    """The library's output grid over ``bounds`` (``cell_m`` None: its automatic cell size)."""
    box = np.array([shapely.box(*bounds)], dtype=object)
    holder = VectorLayer("extent", "extent", box, np.zeros(1, np.int64), {}, {}, crs_wkt)
    return surface_grid(Inputs(contacts=holder, crs_wkt=crs_wkt),
                        RunOptions(contacts="extent", out="", cell_m=cell_m), log=log)


def require_same_grid(a: Grid, b: Grid, *, what_a: str, what_b: str) -> None:
    """Refuse two rasters that are not on one grid (cell-by-cell work needs one)."""
    same = (tuple(a.shape) == tuple(b.shape)
            and np.allclose(a.transform, b.transform, rtol=0.0, atol=1e-6 * max(a.cell_x_m, 1e-9))
            and (not a.crs_wkt or not b.crs_wkt or same_crs(a.crs_wkt, b.crs_wkt)))
    if not same:
        raise InputError(
            f"{what_a} (grid {a.shape[0]}x{a.shape[1]} cells of {a.cell_x_m:g} m at "
            f"{a.transform[0]:.3f}, {a.transform[3]:.3f}) and {what_b} (grid {b.shape[0]}x{b.shape[1]} "
            f"cells of {b.cell_x_m:g} m at {b.transform[0]:.3f}, {b.transform[3]:.3f}) are not on one "
            "grid; model the surface on the DEM's grid (Surface model with the DEM as reference grid)")


def split_by_flags(geoms, values, flags: dict, *, spacing_m: float):
    """Split lines where cell flags change, with the library's :func:`split_lines_by_flag`.

    ``flags`` maps a field name to ``flag_fn(x, y) -> bool``; the lines are split by each in
    turn. Returns ``(parts, values per part, {name: bool per part})``; parts join without gaps.
    """
    parts = np.asarray(geoms, dtype=object)
    vals = np.asarray(values)
    out = {}
    for name, fn in flags.items():
        parts, f, src = split_lines_by_flag(parts, fn, spacing_m=spacing_m)
        vals = vals[src] if len(src) else vals[:0]
        out = {k: v[src] for k, v in out.items()}
        out[name] = f
    return parts, vals, out


def raster_flag(array, grid: Grid, *, at_least: float):
    """``flag_fn(x, y)``: the grid, interpolated bilinearly, is at least ``at_least`` (NaN: False)."""
    def fn(x, y):
        v = sample_bilinear(array, grid, x, y)
        return np.where(np.isfinite(v), v >= at_least, False)
    return fn
