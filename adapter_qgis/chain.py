"""Library calls that the single-step tools share, in the order :func:`strikeline.pipeline.compute`
makes them, so a step run on its own gives the numbers the whole chain gives.

No numerical method lives here: each function strings together library functions for one
tool. Where the library gains a function for the same sequence (asked for in
``/work/requests-qgis.md``), the function here becomes a one-line call to it.
"""
from __future__ import annotations

import numpy as np
import shapely

from strikeline.errors import InputError
from strikeline.grid import Grid
from strikeline.grids import depth_below_ground
from strikeline.io.contours import contour_lines
from strikeline.io.crs import same_crs, srs_from_wkt
from strikeline.io.vector import VectorLayer
from strikeline.picks import sample_bilinear
from strikeline.pipeline import Inputs, RunOptions, surface_grid
from strikeline.trace import contact_misfit_segments, distance_to_lines, split_lines_by_flag, trace_misfit


def grid_over(bounds, *, cell_m, crs_wkt, log) -> Grid:
    """The library's output grid over ``bounds`` (``cell_m`` None: its automatic cell size)."""
    box = np.array([shapely.box(*bounds)], dtype=object)
    holder = VectorLayer("extent", "extent", box, np.zeros(1, np.int64), {}, {}, srs_from_wkt(crs_wkt))
    return surface_grid(Inputs(contacts=holder, crs_wkt=crs_wkt),
                        RunOptions(contacts="extent", out="", cell_m=cell_m), log=log)


def require_same_grid(a: Grid, b: Grid, *, what_a: str, what_b: str) -> None:
    """Refuse two rasters that are not on one grid (cell-by-cell work needs one)."""
    same = (tuple(a.shape) == tuple(b.shape)
            and np.allclose(a.transform, b.transform, rtol=0.0, atol=1e-6 * max(a.cell_x_m, 1e-9))
            and (not a.crs_wkt or not b.crs_wkt or same_crs(srs_from_wkt(a.crs_wkt), srs_from_wkt(b.crs_wkt))))
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


def depth_trace_misfit(dem, dem_grid: Grid, surface, contacts=None, *, extrapolated_fn=None,
                       flag_m=None):
    """Depth below ground, the predicted trace and its misfit to the mapped contacts.

    The same calls as :func:`strikeline.pipeline.compute`: depth = DEM − surface; the trace is
    its zero line, split where ``extrapolated_fn`` changes; the misfit is measured from every
    contact vertex over valid DEM cells, and along contact segments of ``SEGMENT_CELLS`` cells,
    flagged beyond ``flag_m`` (default ``FLAG_CELLS`` cells). ``contacts`` is a VectorLayer.
    Returns a dict: ``depth``, ``trace``, ``trace_extrapolated``, ``misfit``, ``vertices``,
    ``vertex_distance``, ``segments``.
    """
    from strikeline.pipeline import FLAG_CELLS, SEGMENT_CELLS

    spacing = min(dem_grid.cell_x_m, dem_grid.cell_y_m)
    depth = depth_below_ground(dem, surface)
    raw_trace, _ = contour_lines(depth, dem_grid, levels=[0.0])
    if extrapolated_fn is not None:
        trace, tflags, _ = split_lines_by_flag(raw_trace, extrapolated_fn, spacing_m=spacing)
    else:
        trace, tflags = raw_trace, None
    out = {"depth": depth, "trace": trace, "trace_extrapolated": tflags, "misfit": None,
           "vertices": np.empty((0, 2)), "vertex_distance": np.empty(0), "segments": None}
    if contacts is None:
        return out
    verts = shapely.get_coordinates(contacts.geoms)
    on_dem = np.isfinite(sample_bilinear(dem, dem_grid, verts[:, 0], verts[:, 1]))
    out["misfit"] = trace_misfit(verts[on_dem], raw_trace)
    out["vertices"] = verts[on_dem]
    out["vertex_distance"] = distance_to_lines(verts[on_dem], raw_trace)

    def on_valid(x, y):
        return np.isfinite(sample_bilinear(dem, dem_grid, x, y))

    out["segments"] = contact_misfit_segments(
        contacts.geoms, contacts.fids, raw_trace, segment_m=SEGMENT_CELLS * spacing,
        flag_m=FLAG_CELLS * spacing if flag_m is None else flag_m, valid_fn=on_valid)
    return out
