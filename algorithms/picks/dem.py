"""Picks from a DEM: the contact lines densified and the DEM sampled along them by bilinear
interpolation between cell centres (:func:`sample_bilinear`, :func:`picks_from_dem`;
``source='dem'``). Coordinates are metres in the DEM's projected CRS (the caller reprojects).
"""
from __future__ import annotations

import numpy as np

from strikeline.errors import InputError
from strikeline.picks.lines import (_as_geometries, _cancel_check, _check_callbacks, _contact_ids,
                                    _positive, densify_lines)
from strikeline.picks.pickset import PickSet


#: Geometry pairs (or query pieces) handed to one worker at a time; progress and cancellation
#: are checked between batches.
_BATCH = 8192

#: Two DEM samples of the same contact closer than this are one pick (the shared end point of
#: touching parts of a multi-part contact).
_DEM_DEDUPE_M = 1e-3


def is_windowed(dem) -> bool:
    """Whether ``dem`` is a raster read by windows (an object with its own ``sample_bilinear(x, y)``,
    e.g. :class:`strikeline.io.demfile.DemFile`) rather than an array."""
    return not isinstance(dem, np.ndarray) and callable(getattr(dem, "sample_bilinear", None))


def sample_bilinear(dem, grid, x, y, *, origin=None) -> np.ndarray:
    """Bilinear interpolation of a raster between cell centres.

    Parameters
    ----------
    dem : ndarray, shape ``grid.shape``, or a raster read by windows
        Raster values, indexed ``[row, col]``, row 0 at the top. An object with its own
        ``sample_bilinear(x, y)`` method (:func:`is_windowed`) gives the values itself; it must
        give those of this function on the whole band.
    grid : strikeline.geometry.grid.Grid
        Its georeferencing; ``grid.nodata`` (if set) marks missing cells, as does NaN.
    x, y : array_like
        Map coordinates (metres), broadcast together.
    origin : (int, int), optional
        ``dem`` is the window of the whole band ``grid`` describes whose first cell is
        ``[origin[0], origin[1]]``: positions and weights are those of the whole band (so the
        values are too), only the cells are read from the window. Every cell a point needs
        must lie in the window (:class:`IndexError` otherwise).

    Returns
    -------
    ndarray, float64, the broadcast shape of ``x`` and ``y``
        Interpolated values; NaN outside the grid, at non-finite coordinates, and where a
        neighbouring cell that carries weight is nodata or NaN.

    Raises
    ------
    InputError
        When ``dem`` is not a 2-D array of the grid's shape.

    Notes
    -----
    With fractional pixel coordinates :math:`(c, r)` (cell centre of ``[r0, c0]`` at
    :math:`(c_0, r_0)`, from :meth:`strikeline.geometry.grid.Grid.xy_to_colrow`),
    :math:`c_0 = \\lfloor c \\rfloor`, :math:`t = c - c_0`, :math:`r_0 = \\lfloor r \\rfloor`,
    :math:`u = r - r_0`, the value is (Press et al. 2007, §3.6.1, eq. 3.6.5)

    .. math:: z = (1-t)(1-u)\\,z_{r_0c_0} + t(1-u)\\,z_{r_0c_1} + (1-t)u\\,z_{r_1c_0}
              + tu\\,z_{r_1c_1}.

    It reproduces any plane :math:`z = ax + by + c` exactly. A point between the outer cell
    edge and the outermost cell centres (the half-cell border) takes the value interpolated
    along the edge, i.e. its coordinate across the edge is clamped to the centre of the edge
    cell (edge replication, common practice). Neighbours with zero weight (a point exactly on
    a cell-centre row or column) are not needed, so a nodata cell there does not spoil the
    value. Points outside the grid's outer edges give NaN.

    References
    ----------
    Press, W. H., Teukolsky, S. A., Vetterling, W. T. & Flannery, B. P. (2007). *Numerical
    Recipes: The Art of Scientific Computing*, 3rd ed., Cambridge University Press, §3.6
    "Interpolation in two or more dimensions".

    Examples
    --------
    >>> import numpy as np
    >>> from strikeline.geometry.grid import Grid
    >>> g = Grid((0.0, 10.0, 0.0, 20.0, 0.0, -10.0), (2, 2))
    >>> dem = np.array([[0.0, 1.0], [2.0, 3.0]])
    >>> float(sample_bilinear(dem, g, 10.0, 10.0))  # midway between the four centres
    1.5
    """
    if origin is None and is_windowed(dem):
        return dem.sample_bilinear(x, y)
    arr = np.asarray(dem)
    r_off, c_off = (0, 0) if origin is None else (int(origin[0]), int(origin[1]))
    if arr.ndim != 2 or (origin is None and arr.shape != tuple(grid.shape)) or (
            origin is not None and (r_off < 0 or c_off < 0 or r_off + arr.shape[0] > grid.rows
                                    or c_off + arr.shape[1] > grid.cols)):
        raise InputError(f"the DEM array has shape {arr.shape} but its grid has shape "
                         f"{tuple(grid.shape)}; pass the array and grid read together")
    mask = np.ma.getmaskarray(dem) if np.ma.isMaskedArray(dem) else None
    if mask is not None:
        arr = np.ma.getdata(dem)
    x, y = np.broadcast_arrays(np.asarray(x, dtype=float), np.asarray(y, dtype=float))
    shape = x.shape
    col, row = grid.xy_to_colrow(x.ravel(), y.ravel())
    rows, cols = grid.shape
    inside = (col >= -0.5) & (col <= cols - 0.5) & (row >= -0.5) & (row <= rows - 0.5)
    out = np.full(col.shape, np.nan)
    if not inside.any():
        return out.reshape(shape)
    col = np.clip(col[inside], 0.0, cols - 1.0)
    row = np.clip(row[inside], 0.0, rows - 1.0)
    c0 = np.floor(col).astype(np.intp)
    r0 = np.floor(row).astype(np.intp)
    t = col - c0
    u = row - r0
    c1 = np.minimum(c0 + 1, cols - 1)
    r1 = np.minimum(r0 + 1, rows - 1)
    nodata = grid.nodata
    check_nodata = nodata is not None and np.isfinite(nodata)
    value = np.zeros(len(col))
    bad = np.zeros(len(col), dtype=bool)
    for rr, cc, w in ((r0, c0, (1 - t) * (1 - u)), (r0, c1, t * (1 - u)),
                      (r1, c0, (1 - t) * u), (r1, c1, t * u)):
        wr, wc = (rr, cc) if origin is None else (rr - r_off, cc - c_off)
        if origin is not None and len(wr) and (wr.min() < 0 or wc.min() < 0):
            raise IndexError("a point needs cells before the window's first row or column")
        z = arr[wr, wc].astype(np.float64)
        missing = ~np.isfinite(z)
        if check_nodata:
            missing |= z == nodata
        if mask is not None:
            missing |= mask[wr, wc]
        used = w > 0
        bad |= used & missing
        value += np.where(used & ~missing, w * np.where(missing, 0.0, z), 0.0)
    value[bad] = np.nan
    out[inside] = value
    return out.reshape(shape)


def _dedupe(xy: np.ndarray, key: np.ndarray, tolerance_m: float) -> np.ndarray:
    """Indices of the points to keep: one per cluster of points within ``tolerance_m`` that
    share the same ``key`` row (single linkage, the first point of each cluster)."""
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components
    from scipy.spatial import cKDTree

    n = len(xy)
    if n < 2:
        return np.arange(n)
    pairs = cKDTree(xy).query_pairs(r=tolerance_m, output_type="ndarray")
    if len(pairs):
        same = np.all(key[pairs[:, 0]] == key[pairs[:, 1]], axis=1)
        pairs = pairs[same]
    if len(pairs) == 0:
        return np.arange(n)
    graph = coo_matrix((np.ones(len(pairs), bool), (pairs[:, 0], pairs[:, 1])), shape=(n, n))
    _, label = connected_components(graph, directed=False)
    _, keep = np.unique(label, return_index=True)
    return np.sort(keep)


def picks_from_dem(contacts, dem, grid, *, contact_ids=None, spacing_m=None,
                   progress=None, is_cancelled=None) -> PickSet:
    """Picks along contacts with elevations sampled from a DEM.

    Parameters
    ----------
    contacts : sequence of shapely LineString / MultiLineString
        The mapped contact lines (map coordinates in the DEM's CRS, metres). ``None`` and
        empty entries are skipped.
    dem : ndarray, shape ``grid.shape``, or a raster read by windows
        Elevations (metres); NaN or ``grid.nodata`` marks missing cells. A raster read by
        windows (:func:`is_windowed`) is sampled by its own ``sample_bilinear``.
    grid : strikeline.geometry.grid.Grid
        Georeferencing of ``dem``.
    contact_ids : array_like of int, optional
        One id per contact feature; default ``0 .. len(contacts) - 1``.
    spacing_m : float, optional
        Largest distance between picks along a contact; default the DEM cell size
        (the smaller of its width and height).
    progress : callable, optional
        Called with the fraction done (0-1).
    is_cancelled : callable, optional
        Polled between batches; when it returns true, :class:`~strikeline.errors.CancelledError`
        is raised.

    Returns
    -------
    PickSet
        ``source='dem'``, ordered by contact and along each contact. Points outside the DEM or
        next to nodata cells give no pick.

    Raises
    ------
    InputError
        A DEM array that does not match its grid, a non-finite or non-positive spacing, a
        non-line contact, contact ids of the wrong length or type.
    CancelledError
        When ``is_cancelled()`` returns true.

    Notes
    -----
    Every part of every contact is sampled at equal steps no longer than ``spacing_m``, both
    ends included (:func:`densify_lines`), and the DEM is interpolated bilinearly between
    cell centres at those points (:func:`sample_bilinear`; Press et al. 2007, §3.6). Samples
    of one contact closer than 1 mm (the shared end of touching parts) are kept once.

    References
    ----------
    Press, W. H., Teukolsky, S. A., Vetterling, W. T. & Flannery, B. P. (2007). *Numerical
    Recipes: The Art of Scientific Computing*, 3rd ed., Cambridge University Press, §3.6.
    """
    _check_callbacks(progress, is_cancelled)
    geoms = _as_geometries(contacts, "contacts")
    ids = _contact_ids(contact_ids, len(geoms))
    if not is_windowed(dem):
        arr = np.asarray(dem)
        if arr.ndim != 2 or arr.shape != tuple(grid.shape):
            raise InputError(f"the DEM array has shape {arr.shape} but its grid has shape "
                             f"{tuple(grid.shape)}; pass the array and grid read together")
    spacing = (min(grid.cell_x_m, grid.cell_y_m) if spacing_m is None
               else _positive(spacing_m, "spacing_m"))
    _cancel_check(is_cancelled, "DEM sampling")
    xy, line = densify_lines(geoms, spacing)
    if progress is not None:
        progress(0.1)
    z = np.empty(len(xy))
    n_batches = max(1, -(-len(xy) // (64 * _BATCH)))
    for b, s in enumerate(np.array_split(np.arange(len(xy)), n_batches)):
        _cancel_check(is_cancelled, "DEM sampling")
        z[s] = sample_bilinear(dem, grid, xy[s, 0], xy[s, 1])
        if progress is not None:
            progress(0.1 + 0.85 * (b + 1) / n_batches)
    ok = np.isfinite(z)
    xy, line, z = xy[ok], line[ok], z[ok]
    keep = _dedupe(xy, line[:, None], _DEM_DEDUPE_M)
    xyz = np.column_stack([xy[keep], z[keep]])
    result = PickSet(xyz, ids[line[keep]], np.full(len(keep), "dem", dtype="<U8"))
    if progress is not None:
        progress(1.0)
    return result
