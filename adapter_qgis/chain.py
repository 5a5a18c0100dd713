"""Library calls that the single-step tools share, in the order :func:`strikeline.pipeline.compute`
makes them, so a step run on its own gives the numbers the whole chain gives.

No numerical method lives here: each function strings together library functions for one
tool. Where the library gains a function for the same sequence (asked for in
``/work/requests-qgis.md``), the function here becomes a one-line call to it.
"""
from __future__ import annotations

import itertools

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
from strikeline.trace import distance_to_lines, trace_misfit


def grid_over(bounds, *, cell_m, crs_wkt, log) -> Grid:
    """The library's output grid over ``bounds`` (``cell_m`` None: its automatic cell size)."""
    box = np.array([shapely.box(*bounds)], dtype=object)
    holder = VectorLayer("extent", "extent", box, np.zeros(1, np.int64), {}, {}, srs_from_wkt(crs_wkt))
    return surface_grid(Inputs(contacts=holder, crs_wkt=crs_wkt),
                        RunOptions(contacts="extent", out="", cell_m=cell_m), log=log)


def surface_of_plane(plane, grid: Grid) -> np.ndarray:
    """The plane's elevation at every cell centre of ``grid`` (as ``compute`` makes it)."""
    X, Y = grid.mesh()
    return plane.elevation(X, Y)


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


def contours_by_class(surface, grid: Grid, *, interval_m: float, flags: dict):
    """Structure contours split where boolean cell classes change.

    ``flags`` maps a name to a boolean grid (e.g. ``below_ground``: ground minus surface >= 0;
    ``forecast``: beyond the reach of the data). Returns ``(geoms, elevations_m, {name: bool
    per line})``. Each part is the library's :func:`contour_lines` of the surface masked to one
    combination of the flags (NaN elsewhere), so every vertex lies on the surface and lines stop
    on the last cell centre of their class (gaps of at most one cell where the class changes).
    """
    names = list(flags)
    geoms, elev = [], []
    per = {n: [] for n in names}
    for combo in itertools.product((True, False), repeat=len(names)):
        keep = np.ones(surface.shape, dtype=bool)
        for n, value in zip(names, combo):
            keep &= flags[n] == value
        if not keep.any():
            continue
        g, z = contour_lines(np.where(keep, surface, np.nan), grid, interval_m=interval_m)
        geoms.append(g)
        elev.append(z)
        for n, value in zip(names, combo):
            per[n].append(np.full(len(g), value))
    if not geoms:
        return np.empty(0, object), np.empty(0), {n: np.empty(0, bool) for n in names}
    return (np.concatenate(geoms), np.concatenate(elev),
            {n: np.concatenate(v).astype(bool) for n, v in per.items()})


def depth_trace_misfit(dem, dem_grid: Grid, surface, contact_geoms=None):
    """Depth below ground, the predicted trace and its misfit to the mapped contacts.

    The same calls as :func:`strikeline.pipeline.compute`: depth = DEM − surface, the trace is
    its zero line, the misfit is measured from every contact vertex over valid DEM cells.
    Returns ``(depth, trace_geoms, misfit dict, vertex xy, vertex distance)``.
    """
    depth = depth_below_ground(dem, surface)
    trace, _ = contour_lines(depth, dem_grid, levels=[0.0])
    if contact_geoms is None:
        return depth, trace, None, np.empty((0, 2)), np.empty(0)
    verts = shapely.get_coordinates(contact_geoms)
    on_dem = np.isfinite(sample_bilinear(dem, dem_grid, verts[:, 0], verts[:, 1]))
    misfit = trace_misfit(verts[on_dem], trace)
    return depth, trace, misfit, verts[on_dem], distance_to_lines(verts[on_dem], trace)
