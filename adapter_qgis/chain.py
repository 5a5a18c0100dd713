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


def contours_split_by_ground(surface, dem, grid: Grid, *, interval_m: float):
    """Structure contours in two parts: where the surface lies below ground and above it.

    Returns ``(geoms, elevations_m, below_ground)``. Each part is the library's
    :func:`contour_lines` of the surface masked to one side of the ground (NaN on the other),
    so every vertex lies on the surface and lines stop on the last cell centre of their side.
    """
    depth = depth_below_ground(dem, surface)
    parts = []
    for below in (True, False):
        side = (depth >= 0) if below else (depth < 0)
        masked = np.where(side, surface, np.nan)
        g, z = contour_lines(masked, grid, interval_m=interval_m)
        parts.append((g, z, np.full(len(g), below)))
    geoms = np.concatenate([p[0] for p in parts]) if any(len(p[0]) for p in parts) else np.empty(0, object)
    elev = np.concatenate([p[1] for p in parts])
    flag = np.concatenate([p[2] for p in parts]).astype(bool)
    return geoms, elev, flag


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
