"""Grids derived from a modelled surface: dip, dip direction and depth below ground.

Pure numpy; no GDAL. Surfaces are 2-D arrays indexed ``[row, col]`` with row 0 at the top
(north) of a north-up :class:`strikeline.geometry.grid.Grid`, NaN marking cells without a value.
"""
from __future__ import annotations

import numpy as np

from strikeline.errors import CancelledError, InputError
from strikeline.geometry.grid import Grid, check_grid_array

__all__ = ["dip_grids", "depth_below_ground"]

#: Cells per row block (about 1 MiB of float32 per temporary), sized to stay in cache.
_BLOCK_CELLS = 1 << 18

_RAD_TO_DEG = np.float32(180.0 / np.pi)


def _one_sided_fixup(g: np.ndarray, lo: np.ndarray, hi: np.ndarray) -> None:
    """Where the central sum ``g = lo + hi`` is NaN, use ``2·hi`` or ``2·lo`` if one is valid.

    ``lo`` and ``hi`` are the backward and forward first differences of each cell (NaN past the
    grid edge); both contain the cell's own value, so a NaN cell stays NaN. Only the (usually
    few) NaN cells are touched.
    """
    r, c = np.nonzero(np.isnan(g))
    if r.size == 0:
        return
    lo_v = lo[r, c]
    hi_v = hi[r, c]
    fix = np.where(np.isnan(hi_v), lo_v, hi_v)
    fix *= 2.0
    g[r, c] = fix


def dip_grids(surface, grid: Grid, *, block_rows=None, progress=None, is_cancelled=None
              ) -> tuple[np.ndarray, np.ndarray]:
    """Dip and dip direction of a surface grid, cell by cell.

    Parameters
    ----------
    surface : ndarray, shape ``(rows, cols)``, float
        Elevation of the modelled surface (metres), NaN where it has no value. Row 0 is the
        northern edge (north-up grid).
    grid : strikeline.geometry.grid.Grid
        Georeferencing of ``surface``; only the cell sizes ``grid.cell_x_m`` and
        ``grid.cell_y_m`` (metres) are used.
    block_rows : int, optional
        Rows processed per block (default: about 2**18 cells per block). Affects speed and
        memory only, never the result.
    progress : callable, optional
        ``progress(fraction)`` with ``fraction`` in (0, 1], called after each block.
    is_cancelled : callable, optional
        Polled before each block; when it returns true, :class:`CancelledError` is raised.

    Returns
    -------
    dip_deg : ndarray, shape ``(rows, cols)``, float32
        Dip, 0–90° below horizontal; NaN where undefined.
    dip_direction_deg : ndarray, shape ``(rows, cols)``, float32
        Azimuth of steepest descent, [0, 360)° clockwise from grid north; NaN where undefined
        and where the surface is flat (dip exactly 0).

    Raises
    ------
    InputError
        ``surface`` is not a 2-D float array of the grid's shape, or ``block_rows < 1``.
    CancelledError
        ``is_cancelled()`` returned true.

    Notes
    -----
    The first derivatives are the 4-neighbour central differences of Zevenbergen & Thorne
    (1987), with :math:`x` east and :math:`y` north (row index increases southward):

    .. math::

        \\frac{\\partial z}{\\partial x} = \\frac{z_{r,c+1} - z_{r,c-1}}{2\\,\\Delta x}, \\qquad
        \\frac{\\partial z}{\\partial y} = \\frac{z_{r-1,c} - z_{r+1,c}}{2\\,\\Delta y}.

    At the grid edges, and next to NaN cells, a one-sided difference
    (:math:`(z_{r,c+1} - z_{r,c})/\\Delta x` or :math:`(z_{r,c} - z_{r,c-1})/\\Delta x`, likewise
    in :math:`y`) is used when the other neighbour is valid. A cell is NaN in both outputs when
    its own value is NaN, or when neither neighbour in :math:`x` (or neither in :math:`y`) is
    valid.

    Dip is :math:`\\arctan |\\nabla z|`. Dip direction is the azimuth of :math:`-\\nabla z`,
    :math:`\\operatorname{atan2}(-\\partial z/\\partial x, -\\partial z/\\partial y)` taken
    clockwise from grid north into [0, 360). A flat cell (gradient exactly zero) has dip 0
    and dip direction NaN, since no direction of descent exists (GDAL's ``gdaldem aspect``
    likewise writes nodata there unless asked for zero).

    The differences are formed in the input's precision and stored as float32; the work runs
    in row blocks with in-place operations, so the memory beyond the two outputs is a few
    block-sized temporaries.

    References
    ----------
    Zevenbergen, L. W., & Thorne, C. R. (1987). Quantitative analysis of land surface
    topography. *Earth Surface Processes and Landforms*, 12(1), 47–56.
    https://doi.org/10.1002/esp.3290120107

    Examples
    --------
    A plane falling 600 m over 1,200 m eastward dips atan(0.5) toward 090:

    >>> import numpy as np
    >>> from strikeline.geometry.grid import Grid
    >>> g = Grid((0.0, 100.0, 0.0, 1300.0, 0.0, -100.0), (13, 13))
    >>> x, _ = g.mesh()
    >>> dip, dd = dip_grids(1000.0 - 0.5 * x, g)
    >>> round(float(dip[6, 6]), 3), float(dd[6, 6])
    (26.565, 90.0)
    """
    z = check_grid_array(surface, grid, "surface")
    rows, cols = z.shape
    if block_rows is None:
        block_rows = max(1, _BLOCK_CELLS // max(cols, 1))
    else:
        block_rows = int(block_rows)
        if block_rows < 1:
            raise InputError(f"block_rows must be at least 1, got {block_rows}")
    dip = np.empty((rows, cols), dtype=np.float32)
    ddir = np.empty((rows, cols), dtype=np.float32)
    if rows == 0 or cols == 0:
        return dip, ddir

    sx = np.float32(0.5 / grid.cell_x_m)
    sy = np.float32(0.5 / grid.cell_y_m)
    nan = np.float32(np.nan)
    f32 = np.float32

    # Block scratch, reused: differences padded with NaN beyond the grid edges.
    bmax = min(block_rows, rows)
    ex_buf = np.empty((bmax, cols + 1), dtype=f32)   # ex[:, c] = z[:, c] - z[:, c-1]
    sy_buf = np.empty((bmax + 1, cols), dtype=f32)   # sy[i] = z[i] - z[i+1] (northward rise)
    gx_buf = np.empty((bmax, cols), dtype=f32)
    gy_buf = np.empty((bmax, cols), dtype=f32)
    ex_buf[:, 0] = nan
    ex_buf[:, cols] = nan

    n_blocks = -(-rows // block_rows)
    for k in range(n_blocks):
        if is_cancelled is not None and is_cancelled():
            raise CancelledError("dip grids: cancelled by the caller; nothing was returned")
        r0 = k * block_rows
        r1 = min(rows, r0 + block_rows)
        nb = r1 - r0
        zb = z[r0:r1]

        # x: backward/forward differences share one padded array.
        ex = ex_buf[:nb]
        if cols > 1:
            np.subtract(zb[:, 1:], zb[:, :-1], out=ex[:, 1:cols], casting="same_kind")
        gx = gx_buf[:nb]
        np.add(ex[:, :cols], ex[:, 1:], out=gx)
        _one_sided_fixup(gx, ex[:, :cols], ex[:, 1:])

        # y: rise toward the north between row i+1 (south) and row i (north).
        ey = sy_buf[: nb + 1]
        top = r0 - 1
        if top >= 0:
            np.subtract(z[top], z[r0], out=ey[0], casting="same_kind")
        else:
            ey[0] = nan
        if nb > 1:
            np.subtract(zb[:-1], zb[1:], out=ey[1:nb], casting="same_kind")
        if r1 < rows:
            np.subtract(z[r1 - 1], z[r1], out=ey[nb], casting="same_kind")
        else:
            ey[nb] = nan
        gy = gy_buf[:nb]
        # Cell i: north difference ey[i] (z[i-1] - z[i]) and south difference ey[i+1].
        np.add(ey[:nb], ey[1:], out=gy)
        _one_sided_fixup(gy, ey[1:], ey[:nb])

        gx *= sx   # dz/dx (east)
        gy *= sy   # dz/dy (north)

        # Steepest descent (-gx, -gy): azimuth = atan2(-gx, -gy) = atan2(gx, gy) + 180°.
        dd = ddir[r0:r1]
        np.arctan2(gx, gy, out=dd)
        dd *= _RAD_TO_DEG
        dd += f32(180.0)
        # atan2 lies in [-180, 180], so 360 arises only for a signed-zero gx; fold it to 0.
        np.subtract(dd, f32(360.0), out=dd, where=dd >= f32(360.0))

        np.multiply(gx, gx, out=gx)
        np.multiply(gy, gy, out=gy)
        gx += gy                      # |grad z|^2
        np.copyto(dd, nan, where=gx == f32(0.0))   # flat: no direction of descent
        dp = dip[r0:r1]
        np.sqrt(gx, out=gx)
        np.arctan(gx, out=dp)
        dp *= _RAD_TO_DEG

        if progress is not None:
            progress(r1 / rows)
    return dip, ddir


def depth_below_ground(dem, surface) -> np.ndarray:
    """Depth of a surface below the ground: ``dem − surface``.

    Parameters
    ----------
    dem, surface : ndarray, shape ``(rows, cols)``, float
        Ground elevation and surface elevation on the same grid (metres), NaN for nodata.

    Returns
    -------
    ndarray, shape ``(rows, cols)``
        Depth in metres: positive where the surface lies below the ground, negative where it
        lies above (it has been eroded there), NaN where either input is NaN. The dtype is
        the common float type of the inputs (float32 when both are float32).

    Raises
    ------
    InputError
        The inputs are not 2-D float arrays of the same shape.

    Examples
    --------
    >>> import numpy as np
    >>> depth_below_ground(np.array([[100.0, np.nan]]), np.array([[60.0, 50.0]]))
    array([[40., nan]])
    """
    d = check_grid_array(dem, None, "dem")
    s = check_grid_array(surface, None, "surface")
    if d.shape != s.shape:
        raise InputError(
            f"dem has shape {d.shape} but surface has shape {s.shape}; model the surface on "
            "the DEM's grid"
        )
    return np.subtract(d, s)
