"""Steps on grids (the QGIS single-step tools chain them through GeoTIFFs): the output grid (its
extent, cell and aligned origin) and the DEM resampled onto it, the length of contact off the DEM,
the check that two rasters share one grid, flags read from a raster, and structure contours split
where the surface passes above or below the ground.
"""
from __future__ import annotations

import numpy as np
import shapely

from strikeline.errors import InputError
from strikeline.geometry.grid import Grid, auto_cell_m, check_extent, check_grid_size
from strikeline.io.crs import same_crs
from strikeline.maps.dipgrids import depth_below_ground
from strikeline.maps.trace import split_lines_by_flag
from strikeline.picks import sample_bilinear
from strikeline.pipeline.options import CLI_OPTION_NAMES, Log, _quiet
from strikeline.pipeline.steps import structure_contours


def grid_over(bounds, *, cell_m: float | None, crs_wkt: str, log: Log = _quiet, names: dict | None = None) -> Grid:
    """The output grid of :func:`strikeline.pipeline.surface_grid` over ``bounds`` = (xmin, ymin,
    xmax, ymax) without a DEM (``cell_m`` None: its automatic cell size, about 1/500 of the extent),
    its corners on multiples of the cell; ``names`` as for :func:`output_grid`."""
    return output_grid(dem_grid=None, bounds=bounds, cell_m=cell_m, extent=None, crs_wkt=crs_wkt, log=log,
                       names=names)


def output_grid(*, dem_grid: Grid | None, bounds, cell_m: float | None, extent, crs_wkt: str,
                log: Log = _quiet, names: dict | None = None) -> Grid:
    """The grid the surface and every output raster are made on.

    With a DEM and neither ``extent`` nor ``cell_m``: the DEM's own grid, unchanged. Otherwise
    square cells of ``cell_m`` (default: the DEM's cell width, else :func:`auto_cell_m` of the
    extent) over ``extent`` (default: the DEM's extent, else ``bounds``, the data's), widened to
    multiples of the cell (:meth:`Grid.aligned`), so that grids of neighbouring sheets made with
    the same cell share their cell edges. Refuses a grid of more than
    :func:`~strikeline.geometry.grid.max_grid_cells` cells in one line whose fix names the cell and
    extent options as ``names`` does (``cell_m``, ``extent``; default the command line's flags, a QGIS
    tool passes its parameters' labels).
    """
    names = {**CLI_OPTION_NAMES, **(names or {})}
    cell_name, extent_name = names["cell_m"], names["extent"]
    if dem_grid is not None and cell_m is None and extent is None:
        return dem_grid.with_nodata(None)
    box = check_extent(extent) if extent is not None else dem_grid.bounds if dem_grid is not None else tuple(bounds)
    whose = extent_name if extent is not None else "the DEM's extent" if dem_grid is not None else \
        "the contour layer's extent"
    cell = cell_m
    if cell is None:
        if dem_grid is not None:
            cell = dem_grid.cell_x_m
        else:
            cell = auto_cell_m(box)
            log(f"cell size not given ({cell_name}): using {cell:g} m cells over {whose}")
    grid = Grid.aligned(*box, cell_m=float(cell), crs_wkt=crs_wkt)
    # "give <name> a larger value": reads as a sentence with a flag and with a QGIS "the '<label>'"
    check_grid_size(grid, fix=f"give {cell_name} a larger value or {extent_name} a smaller one")
    x0, y0 = grid.transform[0], grid.transform[3]
    log(f"output grid: {grid.rows} x {grid.cols} cells of {grid.cell_x_m:g} m over {whose}, top-left corner "
        f"({x0:.10g}, {y0:.10g}) on multiples of the cell")
    return grid


def ground_on_grid(dem, dem_grid: Grid, grid: Grid, *, what: str = "DEM", log: Log = _quiet):
    """The DEM on the output grid: itself when the grids are one, else resampled by GDAL's warper
    (bilinear; :func:`strikeline.io.raster.resample_to_grid`). Returns ``(array, grid)``."""
    if tuple(dem_grid.shape) == tuple(grid.shape) and np.allclose(dem_grid.transform, grid.transform, rtol=0.0,
                                                                  atol=1e-6 * dem_grid.cell_x_m):
        return dem, dem_grid
    from strikeline.io.raster import resample_to_grid

    log(f"{what} resampled (GDAL warp, bilinear) from {dem_grid.cell_x_m:g} m cells onto the output grid of "
        f"{grid.cell_x_m:g} m cells for depth, predicted trace and misfit")
    return resample_to_grid(dem, dem_grid, grid.with_nodata(None), what=what), grid.with_nodata(None)


def length_off_raster(geoms, array, grid: Grid) -> dict:
    """How much of the lines lies where a raster has no value (outside it, or over nodata).

    Every line is cut into pieces of at most a quarter cell (``shapely.segmentize``); a piece whose
    midpoint the raster cannot give a bilinear value for
    (:func:`strikeline.picks.sample_bilinear`: NaN outside the outer cell edges and next to
    nodata) is off. These are the stretches where no DEM pick can be made.

    Returns ``{"length_m", "total_length_m", "percent", "n_lines"}`` (``n_lines``: lines with
    any length off).
    """
    g = shapely.segmentize(np.asarray(geoms, dtype=object), max(0.25 * min(grid.cell_x_m, grid.cell_y_m), 1e-9))
    xy, idx = shapely.get_coordinates(g, return_index=True)
    total = float(np.sum(shapely.length(np.asarray(geoms, dtype=object))))
    if len(xy) < 2:
        return {"length_m": 0.0, "total_length_m": total, "percent": 0.0, "n_lines": 0}
    same = idx[1:] == idx[:-1]
    a, b = xy[:-1][same], xy[1:][same]
    mid = 0.5 * (a + b)
    seg = np.hypot(*(b - a).T)
    off = ~np.isfinite(sample_bilinear(array, grid, mid[:, 0], mid[:, 1]))
    length = float(np.sum(seg[off]))
    return {"length_m": length, "total_length_m": total,
            "percent": 100.0 * length / total if total > 0 else 0.0,
            "n_lines": int(len(np.unique(idx[:-1][same][off])))}


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


def structure_contours_on_ground(surface, grid: Grid, *, interval_m: float, extrapolated_fn=None, dem=None,
                                 is_cancelled=None):
    """Structure contours of a surface grid (:func:`strikeline.pipeline.structure_contours`), split
    where they leave the reach of the data (with ``extrapolated_fn``) and, with the ground's
    ``dem`` on the surface's grid, where the surface passes from below the ground to above it
    (eroded away).

    Returns ``(lines, elevation_m, flags)``; ``flags`` holds ``extrapolated`` (with
    ``extrapolated_fn``) and ``below_ground`` (with ``dem``: true where the depth below ground,
    DEM − surface interpolated bilinearly, is at least 0), one bool per line.
    """
    geoms, elev, extrapolated = structure_contours(surface, grid, interval_m=interval_m,
                                                   extrapolated_fn=extrapolated_fn, is_cancelled=is_cancelled)
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
