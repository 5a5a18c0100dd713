"""Contour lines of a grid (structure contours, the zero line of a depth grid) through GDAL.

The grid is handed to GDAL's contour generator as an in-memory raster that views the numpy
array (no file), the lines are collected in an in-memory OGR layer and come back as shapely 2
LineStrings with their elevations.
"""
from __future__ import annotations

import numbers

import numpy as np
import shapely
from osgeo import gdal, gdal_array, ogr

from strikeline.errors import InputError, RasterReadError
from strikeline.geometry.grid import Grid, check_grid_array
from strikeline.io._gdal import gdal_exceptions, gdal_message

__all__ = ["contour_lines"]

_ELEV_FIELD = "elevation_m"


def _finite_number(value, name: str) -> float:
    if isinstance(value, bool) or not isinstance(value, (numbers.Real, np.floating, np.integer)):
        raise InputError(f"{name} must be a number in metres, got {value!r}; pass a float")
    v = float(value)
    if not np.isfinite(v):
        raise InputError(f"{name} must be finite, got {v}; pass a finite number of metres")
    return v


def _level_options(interval_m, levels, base_m) -> list[str]:
    if levels is not None:
        lv = np.atleast_1d(np.asarray(levels, dtype=float)) if not isinstance(levels, str) else None
        if lv is None or lv.ndim != 1 or lv.size == 0 or not np.all(np.isfinite(lv)):
            raise InputError(
                f"levels must be a non-empty list of finite elevations in metres, got {levels!r}; "
                "for example levels=[0.0]"
            )
        return ["FIXED_LEVELS=" + ",".join(f"{v:.17g}" for v in np.unique(lv))]
    if interval_m is None:
        raise InputError(
            "contour_lines needs interval_m (spacing of the levels in metres) or levels "
            "(a list of elevations); neither was given"
        )
    step = _finite_number(interval_m, "interval_m")
    if step <= 0:
        raise InputError(f"interval_m must be positive, got {step}; pass for example 50.0")
    base = _finite_number(base_m, "base_m")
    return [f"LEVEL_INTERVAL={step:.17g}", f"LEVEL_BASE={base:.17g}"]


def _supported(xy: np.ndarray, valid: np.ndarray, grid: Grid) -> np.ndarray:
    """True for vertices that are linear interpolations between valid cell centres.

    A vertex at fractional pixel position ``(c, r)`` (cell centres at integers) needs the
    centres ``floor/ceil`` of ``c`` and of ``r``; on a side between two centres that is two
    centres, inside a cell square four.
    """
    col, row = grid.xy_to_colrow(xy[:, 0], xy[:, 1])
    # Snap round-off so that vertices GDAL placed on a centre line count as on it.
    eps = 1e-7
    col = np.where(np.abs(col - np.rint(col)) < eps, np.rint(col), col)
    row = np.where(np.abs(row - np.rint(row)) < eps, np.rint(row), row)
    rows, cols = valid.shape
    ok = (col >= 0) & (col <= cols - 1) & (row >= 0) & (row <= rows - 1)
    c0 = np.floor(np.where(ok, col, 0)).astype(np.intp)
    r0 = np.floor(np.where(ok, row, 0)).astype(np.intp)
    c1 = np.ceil(np.where(ok, col, 0)).astype(np.intp)
    r1 = np.ceil(np.where(ok, row, 0)).astype(np.intp)
    ok &= valid[r0, c0] & valid[r0, c1] & valid[r1, c0] & valid[r1, c1]
    return ok


def _trim_fringe(geoms: np.ndarray, elev: np.ndarray, valid: np.ndarray, grid: Grid):
    """Cut GDAL's half-cell extrapolated stubs; split lines where they leave the data."""
    if geoms.size == 0:
        return geoms, elev
    coords, owner = shapely.get_coordinates(geoms, return_index=True)
    keep = _supported(coords, valid, grid)
    if keep.all():
        return geoms, elev
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
    return np.asarray(lines, dtype=object), elev[own[first]].astype(np.float64)


def contour_lines(array, grid: Grid, *, interval_m=None, levels=None, base_m=0.0,
                  trim_fringe=True) -> tuple[np.ndarray, np.ndarray]:
    """Contour lines of a grid, generated by GDAL's contour generator.

    Parameters
    ----------
    array : ndarray, shape ``(rows, cols)``, float
        Values in metres (a modelled surface, a depth grid), NaN for nodata.
    grid : strikeline.geometry.grid.Grid
        Georeferencing of ``array`` (its shape must match).
    interval_m : float, optional
        Spacing of the levels: contours at ``base_m + k * interval_m`` for every integer ``k``
        within the data range.
    levels : sequence of float, optional
        Fixed levels instead of an interval, e.g. ``[0.0]`` for the zero line of a depth
        grid. Takes precedence over ``interval_m`` when both are given.
    base_m : float, default 0.0
        Offset of the interval levels.
    trim_fringe : bool, default True
        Keep only the parts of the lines that are interpolated between valid cell centres
        (see Notes). ``False`` returns GDAL's lines unchanged.

    Returns
    -------
    geoms : ndarray of object, shape ``(n,)``
        shapely ``LineString`` objects, one per connected piece of line, in the grid's CRS.
    elevation_m : ndarray of float64, shape ``(n,)``
        The level of each line.

    Raises
    ------
    InputError
        The array is not 2-D float of the grid's shape; neither ``interval_m`` nor ``levels``
        is given; an interval that is not a positive finite number; non-finite levels.
    RasterReadError
        GDAL's contour generator fails (its own message is included).

    Notes
    -----
    GDAL's generator (marching squares since GDAL 2.4) treats cell values as samples at cell
    centres and interpolates linearly between neighbouring centres. Each GDAL feature is one
    ``LineString``; a closed contour has equal first and last vertices. NaN cells are
    passed to GDAL as a nodata sentinel, so no contour crosses a nodata region.

    Beyond the outermost valid centres, that is in the half-cell strip along the raster edge
    and around nodata, GDAL extends each line to the cell edge with extrapolated values; those
    end pieces are off the interpolated surface by up to half a cell times its slope. With
    ``trim_fringe`` (the default) every vertex that is not a linear interpolation between
    valid centres is dropped and a line is split where it leaves the data, so lines stop on
    the outermost line of valid centres and every returned vertex lies on the surface that the
    grid samples. A split line gives several entries with the same elevation.

    GDAL's exception mode is enabled only for the duration of the call and then restored
    (:func:`strikeline.io._gdal.gdal_exceptions`).

    References
    ----------
    GDAL/OGR contributors. *GDAL/OGR Geospatial Data Abstraction software Library*, Open
    Source Geospatial Foundation, https://gdal.org (``GDALContourGenerateEx``, alg/contour.cpp).

    Examples
    --------
    >>> import numpy as np
    >>> from strikeline.geometry.grid import Grid, check_grid_array
    >>> g = Grid((0.0, 10.0, 0.0, 100.0, 0.0, -10.0), (10, 10))
    >>> x, _ = g.mesh()
    >>> geoms, elev = contour_lines(x.copy(), g, interval_m=20.0)
    >>> elev.tolist()
    [20.0, 40.0, 60.0, 80.0]
    >>> sorted({round(x, 3) for x, _ in geoms[0].coords})   # a contour runs north-south
    [20.0]
    """
    z = check_grid_array(array, grid, "contour input")
    options = _level_options(interval_m, levels, base_m)
    if z.dtype not in (np.float32, np.float64):
        z = z.astype(np.float64)
    nan_mask = np.isnan(z)
    empty = (np.empty(0, dtype=object), np.empty(0, dtype=np.float64))
    if nan_mask.all() or z.size == 0:
        return empty
    # A sentinel below every finite value of the dtype: it cannot collide with data.
    sentinel = float(np.finfo(z.dtype).min)
    if np.any(z == sentinel):
        raise InputError(
            f"contour input contains the value {sentinel}, which is reserved as nodata; "
            "set nodata cells to NaN instead"
        )
    if nan_mask.any():
        z = np.where(nan_mask, z.dtype.type(sentinel), z)
    z = np.ascontiguousarray(z)
    options += [f"NODATA={sentinel:.17g}", "ID_FIELD=0", "ELEV_FIELD=1"]

    with gdal_exceptions():
        try:
            # GDAL's NUMPY driver: an in-memory raster that views the array (no copy).
            src = gdal_array.OpenArray(z)
            src.SetGeoTransform(grid.transform)
            band = src.GetRasterBand(1)
            band.SetNoDataValue(sentinel)
            out = ogr.GetDriverByName("Memory").CreateDataSource("strikeline_contours")
            layer = out.CreateLayer("contours", geom_type=ogr.wkbLineString)
            layer.CreateField(ogr.FieldDefn("id", ogr.OFTInteger))
            layer.CreateField(ogr.FieldDefn(_ELEV_FIELD, ogr.OFTReal))
            gdal.ContourGenerateEx(band, layer, options=options)
            wkb, elev = [], []
            layer.ResetReading()
            for feature in layer:
                geom = feature.GetGeometryRef()
                if geom is None or geom.IsEmpty():
                    continue
                wkb.append(bytes(geom.ExportToIsoWkb()))
                elev.append(feature.GetFieldAsDouble(1))
        except RuntimeError as exc:
            raise RasterReadError(
                f"contour lines ({' '.join(options[:2])}): GDAL's contour generator failed "
                f"({gdal_message(exc)}); check the grid and the levels"
            ) from None
        finally:
            layer = out = band = src = None
    if not wkb:
        return empty
    geoms = shapely.from_wkb(np.array(wkb, dtype=object))
    geoms = np.asarray(shapely.force_2d(geoms), dtype=object)
    elevation = np.asarray(elev, dtype=np.float64)
    if trim_fringe:
        geoms, elevation = _trim_fringe(geoms, elevation, ~nan_mask, grid)
    return geoms, elevation
