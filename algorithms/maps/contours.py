"""Contour lines of a grid before and after tracing: the levels asked for, and the lines cut back
to the part of the grid that the data support.

Tracing itself is GDAL's contour generator (:func:`strikeline.io.contours.contour_lines`); what
it needs checked beforehand and what it returns trimmed is here, free of GDAL, so that it can be
tested on hand-made lines. A grid's values are samples at cell centres: a point of a contour line
lies on the surface the grid samples only where it is a linear interpolation between valid
centres (:func:`supported_vertices`); :func:`trim_contour_fringe` keeps those parts of the lines.
"""
from __future__ import annotations

import numbers

import numpy as np
import shapely

from strikeline.errors import InputError
from strikeline.geometry.grid import Grid

__all__ = ["check_contour_levels", "supported_vertices", "trim_contour_fringe"]

#: Vertices within this many cells of a line of cell centres count as on it (GDAL's round-off).
_ON_CENTRE_LINE = 1e-7


def _finite_number(value, name: str) -> float:
    if isinstance(value, bool) or not isinstance(value, (numbers.Real, np.floating, np.integer)):
        raise InputError(f"{name} must be a number in metres, got {value!r}; pass a float")
    v = float(value)
    if not np.isfinite(v):
        raise InputError(f"{name} must be finite, got {v}; pass a finite number of metres")
    return v


def check_contour_levels(*, interval_m=None, levels=None, base_m=0.0):
    """The levels of contour lines, checked: fixed levels, or an interval and its base.

    Parameters
    ----------
    interval_m : float, optional
        Spacing of the levels (metres, positive): contours at ``base_m + k * interval_m``.
    levels : sequence of float, optional
        Fixed levels (metres, finite, at least one). Take precedence over ``interval_m``.
    base_m : float, default 0.0
        Offset of the interval levels (metres, finite); not used with fixed levels.

    Returns
    -------
    levels : ndarray of float or None
        The fixed levels, sorted and without repeats; ``None`` when an interval is used.
    interval_m, base_m : float or None
        The interval and its base; ``None`` when fixed levels are used.

    Raises
    ------
    InputError
        Neither ``interval_m`` nor ``levels``; an interval that is not a positive finite
        number; a base that is not finite; empty or non-finite levels.

    Examples
    --------
    >>> check_contour_levels(interval_m=50)
    (None, 50.0, 0.0)
    >>> check_contour_levels(levels=[20.0, 0.0, 20.0], interval_m=50)[0].tolist()
    [0.0, 20.0]
    """
    if levels is not None:
        lv = np.atleast_1d(np.asarray(levels, dtype=float)) if not isinstance(levels, str) else None
        if lv is None or lv.ndim != 1 or lv.size == 0 or not np.all(np.isfinite(lv)):
            raise InputError(
                f"levels must be a non-empty list of finite elevations in metres, got {levels!r}; "
                "for example levels=[0.0]"
            )
        return np.unique(lv), None, None
    if interval_m is None:
        raise InputError(
            "contour_lines needs interval_m (spacing of the levels in metres) or levels "
            "(a list of elevations); neither was given"
        )
    step = _finite_number(interval_m, "interval_m")
    if step <= 0:
        raise InputError(f"interval_m must be positive, got {step}; pass for example 50.0")
    return None, step, _finite_number(base_m, "base_m")


#: Rows of the bands of the grid whose vertices :func:`trim_contour_fringe` checks at once (our
#: choice: the height of the windows :class:`strikeline.io.gridfiles.FileMask` reads).
_CHECK_BAND_ROWS = 256
#: Vertices checked at once below which they are not grouped by bands (our choice).
_CHECK_VERTICES = 1 << 18


def _supported_by_bands(xy: np.ndarray, valid, grid: Grid) -> np.ndarray:
    """:func:`supported_vertices` of many points, a band of :data:`_CHECK_BAND_ROWS` grid rows
    at a time: the look-up's temporaries (corner indices, their sorting) grow with a band's
    points, not with all lines' (millions of vertices on a large sheet), and a mask read from a
    file reads each window about once. The test is point by point, so the result is the same."""
    if len(xy) <= _CHECK_VERTICES:
        return supported_vertices(xy, valid, grid)
    _, row = grid.xy_to_colrow(xy[:, 0], xy[:, 1])
    band = np.floor(np.clip(np.nan_to_num(row, nan=-1.0), -1.0, grid.rows) / _CHECK_BAND_ROWS).astype(np.int32)
    del row
    order = np.argsort(band, kind="stable")
    cuts = np.flatnonzero(np.diff(band[order])) + 1
    keep = np.empty(len(xy), dtype=bool)
    for idx in np.split(order, cuts):
        keep[idx] = supported_vertices(xy[idx], valid, grid)
    return keep


def supported_vertices(xy: np.ndarray, valid: np.ndarray, grid: Grid) -> np.ndarray:
    """Which points are linear interpolations between valid cell centres of a grid.

    Parameters
    ----------
    xy : ndarray, shape ``(n, 2)``
        Map coordinates (metres, the grid's CRS).
    valid : ndarray of bool, shape ``grid.shape``
        True for cells with data; or an object indexed like one, ``valid[rows, cols]`` with
        integer arrays (:class:`strikeline.io.gridfiles.FileMask`), asked once for all corners.
    grid : strikeline.geometry.grid.Grid
        Georeferencing of ``valid``.

    Returns
    -------
    ndarray of bool, shape ``(n,)``
        True where every cell centre the point interpolates between holds data: at fractional
        pixel position ``(c, r)`` (cell centres at integers) the centres ``floor/ceil`` of ``c``
        and of ``r`` - one centre on a centre, two on a line between two centres, four inside a
        square of centres. False outside the outermost centres.

    Examples
    --------
    >>> import numpy as np
    >>> g = Grid((0.0, 10.0, 0.0, 30.0, 0.0, -10.0), (3, 3))   # centres at 5, 15, 25
    >>> valid = np.ones(g.shape, dtype=bool)
    >>> valid[0, 2] = False                                   # the north-east cell
    >>> supported_vertices(np.array([[10.0, 20.0], [20.0, 20.0], [2.0, 20.0]]), valid, g).tolist()
    [True, False, False]
    """
    col, row = grid.xy_to_colrow(xy[:, 0], xy[:, 1])
    # Snap round-off so that vertices GDAL placed on a centre line count as on it.
    eps = _ON_CENTRE_LINE
    col = np.where(np.abs(col - np.rint(col)) < eps, np.rint(col), col)
    row = np.where(np.abs(row - np.rint(row)) < eps, np.rint(row), row)
    rows, cols = valid.shape
    ok = (col >= 0) & (col <= cols - 1) & (row >= 0) & (row <= rows - 1)
    c0 = np.floor(np.where(ok, col, 0)).astype(np.intp)
    r0 = np.floor(np.where(ok, row, 0)).astype(np.intp)
    c1 = np.ceil(np.where(ok, col, 0)).astype(np.intp)
    r1 = np.ceil(np.where(ok, row, 0)).astype(np.intp)
    # One look-up of the four corners together: a mask that reads the cells from a file
    # (strikeline.io.gridfiles.FileMask) then reads each tile once, not once per corner.
    corners = valid[np.concatenate([r0, r0, r1, r1]), np.concatenate([c0, c1, c0, c1])]
    ok &= np.asarray(corners, dtype=bool).reshape(4, -1).all(axis=0)
    return ok


def trim_contour_fringe(geoms: np.ndarray, elevation_m: np.ndarray, valid: np.ndarray, grid: Grid):
    """Contour lines cut back to the part of a grid its valid cell centres support.

    Parameters
    ----------
    geoms : ndarray of object, shape ``(n,)``
        shapely ``LineString`` objects (a closed contour has equal first and last vertices).
    elevation_m : ndarray of float, shape ``(n,)``
        Level of each line.
    valid : ndarray of bool, shape ``grid.shape``
        True for cells with data.
    grid : strikeline.geometry.grid.Grid
        Georeferencing of ``valid``.

    Returns
    -------
    geoms : ndarray of object
        The runs of at least two consecutive supported vertices (:func:`supported_vertices`)
        of every line, each a ``LineString``; a line that leaves the data and comes back gives
        several. Lines supported throughout come back unchanged, lines without two consecutive
        supported vertices are dropped.
    elevation_m : ndarray of float64
        The level of each returned line.

    Notes
    -----
    GDAL's contour generator extends each line over the half-cell strip beyond the outermost
    valid centres (along the raster edge and around nodata) with extrapolated values, which are
    off the sampled surface by up to half a cell times its slope; those end pieces are what this
    removes. A closed ring is first rotated to start at an unsupported vertex, so that a ring cut
    once comes back as one open line, not two.

    Examples
    --------
    >>> import numpy as np, shapely
    >>> g = Grid((0.0, 10.0, 0.0, 30.0, 0.0, -10.0), (3, 3))   # centres at 5, 15, 25
    >>> line = shapely.LineString([(0.0, 15.0), (5.0, 15.0), (15.0, 15.0), (25.0, 15.0), (30.0, 15.0)])
    >>> geoms, elev = trim_contour_fringe(np.array([line], dtype=object), np.array([7.0]),
    ...                                   np.ones(g.shape, dtype=bool), g)
    >>> geoms[0].coords[:], elev.tolist()
    ([(5.0, 15.0), (15.0, 15.0), (25.0, 15.0)], [7.0])
    """
    if geoms.size == 0:
        return geoms, elevation_m
    coords, owner = shapely.get_coordinates(geoms, return_index=True)
    keep = _supported_by_bands(coords, valid, grid)
    if keep.all():
        return geoms, elevation_m
    parts_xy, parts_owner = [], []
    starts = np.r_[0, np.flatnonzero(np.diff(owner)) + 1]
    ends = np.r_[starts[1:], owner.size]
    closed = shapely.is_closed(geoms)
    for g_i, (s, e) in enumerate(zip(starts, ends)):
        k = keep[s:e]
        if k.all():
            parts_xy.append(coords[s:e])
            parts_owner.append(np.full(e - s, g_i))
            continue
        if not k.any():
            continue
        xy = coords[s:e]
        if closed[g_i]:
            # Rotate a ring to start outside the data, so that the piece running through its
            # start/end point comes back as one line, not two.
            shift = int(np.flatnonzero(~k[:-1])[0])
            xy = np.roll(xy[:-1], -shift, axis=0)
            k = np.roll(k[:-1], -shift)
        # Runs of consecutive supported vertices with at least two vertices.
        edges = np.diff(np.r_[0, k.astype(np.int8), 0])
        run_s = np.flatnonzero(edges == 1)
        run_e = np.flatnonzero(edges == -1)
        for a, b in zip(run_s, run_e):
            if b - a >= 2:
                parts_xy.append(xy[a:b])
                parts_owner.append(np.full(b - a, g_i))
    if not parts_xy:
        return np.empty(0, dtype=object), np.empty(0, dtype=np.float64)
    xy = np.concatenate(parts_xy)
    own = np.concatenate(parts_owner)
    run_len = np.array([len(p) for p in parts_xy])
    part_id = np.repeat(np.arange(len(parts_xy)), run_len)
    lines = shapely.linestrings(xy, indices=part_id)
    first = np.r_[0, np.cumsum(run_len)[:-1]]
    return np.asarray(lines, dtype=object), elevation_m[own[first]].astype(np.float64)
