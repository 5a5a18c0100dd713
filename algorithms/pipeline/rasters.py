"""Steps on grids made by an earlier step (the QGIS single-step tools chain them through GeoTIFFs):
the output grid over an extent, the check that two rasters share one grid, flags read from a
raster, and structure contours split where the surface passes above or below the ground.
"""
from __future__ import annotations

import numpy as np
import shapely

from strikeline.errors import InputError
from strikeline.geometry.grid import Grid
from strikeline.io.crs import same_crs
from strikeline.io.vector import VectorLayer
from strikeline.maps.dipgrids import depth_below_ground
from strikeline.maps.trace import split_lines_by_flag
from strikeline.picks import sample_bilinear
from strikeline.pipeline.inputs import Inputs
from strikeline.pipeline.options import Log, RunOptions, _quiet
from strikeline.pipeline.steps import structure_contours, surface_grid


def grid_over(bounds, *, cell_m: float | None, crs_wkt: str, log: Log = _quiet) -> Grid:
    """The output grid of :func:`strikeline.pipeline.surface_grid` over ``bounds`` = (xmin, ymin,
    xmax, ymax) without a DEM (``cell_m`` None: its automatic cell size, about 1/500 of the extent)."""
    box = np.array([shapely.box(*bounds)], dtype=object)
    holder = VectorLayer("extent", "extent", box, np.zeros(1, np.int64), {}, {}, crs_wkt)
    return surface_grid(Inputs(contacts=holder, crs_wkt=crs_wkt),
                        RunOptions(contacts="extent", out="", cell_m=cell_m), log=log)


def points_bounds(xyz) -> tuple[float, float, float, float]:
    """(xmin, ymin, xmax, ymax) of points, the default extent of a surface grid from picks."""
    xyz = np.asarray(xyz, dtype=float)
    return (float(xyz[:, 0].min()), float(xyz[:, 1].min()), float(xyz[:, 0].max()), float(xyz[:, 1].max()))


def require_same_grid(a: Grid, b: Grid, *, what_a: str, what_b: str) -> None:
    """Refuse two rasters that are not on one grid (cell-by-cell work needs one): same shape, same
    geotransform to a millionth of a cell, and the same CRS when both declare one."""
    same = (tuple(a.shape) == tuple(b.shape)
            and np.allclose(a.transform, b.transform, rtol=0.0, atol=1e-6 * max(a.cell_x_m, 1e-9))
            and (not a.crs_wkt or not b.crs_wkt or same_crs(a.crs_wkt, b.crs_wkt)))
    if not same:
        raise InputError(
            f"{what_a} (grid {a.shape[0]}x{a.shape[1]} cells of {a.cell_x_m:g} m at "
            f"{a.transform[0]:.3f}, {a.transform[3]:.3f}) and {what_b} (grid {b.shape[0]}x{b.shape[1]} "
            f"cells of {b.cell_x_m:g} m at {b.transform[0]:.3f}, {b.transform[3]:.3f}) are not on one "
            "grid; model the surface on the DEM's grid (Surface model with the DEM as reference grid)")


def raster_flag(array, grid: Grid, *, at_least: float):
    """``flag_fn(x, y)``: the grid, interpolated bilinearly, is at least ``at_least`` (NaN: False).

    A forecast mask (1 beyond the reach of the data) read back from its GeoTIFF is
    ``raster_flag(mask, grid, at_least=0.5)``.
    """
    def fn(x, y):
        v = sample_bilinear(array, grid, x, y)
        return np.where(np.isfinite(v), v >= at_least, False)
    return fn


def split_by_flags(geoms, values, flags: dict, *, spacing_m: float):
    """Split lines where cell flags change, with :func:`strikeline.maps.trace.split_lines_by_flag`.

    ``values`` holds one row per line (carried to its parts); ``flags`` maps a name to
    ``flag_fn(x, y) -> bool``; the lines are split by each in turn. Returns ``(parts, values per
    part, {name: bool per part})``; the parts join without gaps.
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


def structure_contours_on_ground(surface, grid: Grid, *, interval_m: float, extrapolated_fn=None, dem=None):
    """Structure contours of a surface grid (:func:`strikeline.pipeline.structure_contours`), split
    where they leave the reach of the data (with ``extrapolated_fn``) and, with the ground's
    ``dem`` on the surface's grid, where the surface passes from below the ground to above it
    (eroded away).

    Returns ``(lines, elevation_m, flags)``; ``flags`` holds ``extrapolated`` (with
    ``extrapolated_fn``) and ``below_ground`` (with ``dem``: true where the depth below ground,
    DEM − surface interpolated bilinearly, is at least 0), one bool per line.
    """
    geoms, elev, extrapolated = structure_contours(surface, grid, interval_m=interval_m,
                                                   extrapolated_fn=extrapolated_fn)
    flags = {"extrapolated": extrapolated} if extrapolated_fn is not None else {}
    if dem is None:
        return geoms, elev, flags
    below = {"below_ground": raster_flag(depth_below_ground(dem, surface), grid, at_least=0.0)}
    keyed = np.column_stack([elev, *flags.values()]) if flags else np.asarray(elev, dtype=float)[:, None]
    geoms, keyed, more = split_by_flags(geoms, keyed, below, spacing_m=min(grid.cell_x_m, grid.cell_y_m))
    out = {name: keyed[:, i + 1].astype(bool) for i, name in enumerate(flags)}
    out.update(more)
    return geoms, keyed[:, 0], out


def forecast_mask(model, grid: Grid) -> np.ndarray:
    """1 in the cells beyond the reach of the model's data (a forecast), 0 elsewhere, float32
    (:meth:`strikeline.surfaces.SurfaceModel.is_extrapolated` at the cell centres)."""
    X, Y = grid.mesh()
    return model.is_extrapolated(X, Y).astype(np.float32)


def surface_dip_grids(surface, grid: Grid, *, progress=None, is_cancelled=None):
    """Dip and dip-direction grids (degrees) of a modelled surface read back from its GeoTIFF, as
    the whole chain makes them (:func:`strikeline.maps.dipgrids.dip_grids`); the surface's nodata
    cells are NaN already, so the grid is taken without a nodata value."""
    from strikeline.maps.dipgrids import dip_grids

    return dip_grids(surface, grid.with_nodata(None), progress=progress, is_cancelled=is_cancelled)
