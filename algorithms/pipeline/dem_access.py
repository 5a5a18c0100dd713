"""The DEM in memory or in its file: which, and the steps' reads of it.

A DEM whose grids would go block by block (:func:`strikeline.pipeline.tiled.block_shape_of`: more
cells than :data:`strikeline.budget.BLOCK_SWITCH_CELLS` or than half the memory budget allows at
:data:`strikeline.budget.BYTES_PER_CELL`, or ``--block-cells`` given) stays in its file (:class:`strikeline.io.demfile.DemFile`) and every step
reads the windows it needs: picks and misfit sample it by strips of rows
(:func:`strikeline.picks.sample_bilinear` hands a windowed DEM its own sampler), the pick errors'
ground slope is derived window by window with a one-cell halo, the depth grid reads the window of
each block, the map units the window under their polygons. The values are those of the DEM read
whole, bit for bit, except where a step resamples it (a window's warp) or cuts it (map units):
see :func:`ground_on_grid` and :func:`dem_for_units`.
"""
from __future__ import annotations

import numpy as np
import shapely

from strikeline.geometry.grid import Grid
from strikeline.maps.dipgrids import dip_grids
from strikeline.picks.dem import is_windowed, sample_bilinear
from strikeline.pipeline.options import Log, _quiet


def dem_stays_in_file(shape, opts) -> bool:
    """Whether a DEM of ``shape`` (rows, cols) is read by windows: with ``opts.block_cells`` given,
    or when its grids would go block by block by themselves (the same test as
    :func:`strikeline.pipeline.tiled.block_shape_of`)."""
    from strikeline.budget import grids_go_in_blocks

    if getattr(opts, "block_cells", None) is not None:
        return True
    return grids_go_in_blocks(shape[0], shape[1])


def ground_slope_at(dem, grid: Grid, x, y) -> np.ndarray:
    """The ground's slope (degrees; :func:`strikeline.maps.dipgrids.dip_grids` of the DEM, float32)
    interpolated bilinearly at the points ``(x, y)``.

    A DEM in its file gives the slope of each strip's window read with a one-cell halo (the
    slope's central differences reach one cell), which are the whole DEM's slopes for the cells
    the points use."""
    if is_windowed(dem):
        return dem.sample_bilinear(x, y, derive=lambda w, g: dip_grids(w, g)[0].astype(float), halo=1)
    dem_dip, _ = dip_grids(dem, grid)
    return sample_bilinear(dem_dip.astype(float), grid, x, y)


def same_grid(a: Grid, b: Grid) -> bool:
    """Same shape and geotransform to a millionth of a cell (the test of
    :func:`strikeline.pipeline.rasters.ground_on_grid`)."""
    return tuple(a.shape) == tuple(b.shape) and np.allclose(a.transform, b.transform, rtol=0.0,
                                                            atol=1e-6 * a.cell_x_m)


def ground_on_grid(dem, dem_grid: Grid, grid: Grid, *, what: str = "DEM", log: Log = _quiet,
                   whole: bool = False):
    """The ground on the output grid, as :func:`strikeline.pipeline.rasters.ground_on_grid`.

    A DEM in its file on the output grid itself stays in its file (the block path reads each
    block's window), unless ``whole`` asks for the array (the grids in memory). On another grid
    (``--cell``, ``--extent``) GDAL's warper resamples it (bilinear) from the window of the file
    under the output grid into an array of the output grid, which is then in memory whatever the
    block path: a 1-cell margin more or less in the window can change the last bits of a value
    from those the warp of the whole DEM in memory gives.
    """
    from strikeline.pipeline.rasters import ground_on_grid as in_memory

    if not is_windowed(dem):
        return in_memory(dem, dem_grid, grid, what=what, log=log)
    if same_grid(dem_grid, grid):
        return (dem.read() if whole else dem), dem_grid
    from strikeline.io.demfile import window_grid
    from strikeline.io.raster import resample_to_grid

    r0, r1, c0, c1 = dem.window_of_bounds(grid.bounds, margin_cells=2)
    log(f"{what} resampled (GDAL warp, bilinear) from {dem_grid.cell_x_m:g} m cells onto the output grid of "
        f"{grid.cell_x_m:g} m cells, from the window of {c1 - c0} x {r1 - r0} cells under it")
    target = grid.with_nodata(None)
    return resample_to_grid(dem.read_window(r0, r1, c0, c1), window_grid(dem, r0, r1, c0, c1), target,
                            what=what), target


def dem_for_units(dem, dem_grid: Grid, polygons):
    """The DEM (array and grid) the map units need: a DEM in its file gives the window under the
    polygons, two cells wider (its own grid: sampled at the same points, a value may differ in its
    last bits from the whole DEM's, the window's origin being rounded differently)."""
    if not is_windowed(dem):
        return dem, dem_grid
    from strikeline.io.demfile import window_grid

    geoms = np.asarray(polygons, dtype=object)
    if not len(geoms):
        return dem.read_window(0, 1, 0, 1), window_grid(dem, 0, 1, 0, 1)

    r0, r1, c0, c1 = dem.window_of_bounds(shapely.total_bounds(geoms), margin_cells=2)
    if r1 <= r0 or c1 <= c0:  # the polygons lie off the DEM: a cell of it, under none of them
        r0, r1, c0, c1 = 0, 1, 0, 1
    return dem.read_window(r0, r1, c0, c1), window_grid(dem, r0, r1, c0, c1)
