"""Elevation picks along mapped contacts, from topographic contour lines and from a DEM.

A *pick* is a 3D point ``(x, y, z)`` on a mapped contact whose elevation ``z`` comes from the
topography: either where the contact crosses a topographic contour line (``source='contours'``,
``z`` = the contour's elevation) or from the DEM sampled along the contact
(``source='dem'``, ``z`` = bilinear interpolation between cell centres). Picks from both
sources go into one :class:`PickSet` that carries, for every pick, the id of the contact
feature it lies on and its source.

Everything here is vectorised: shapely 2 array functions and numpy, no Python loop per point
or per geometry pair. Coordinates are metres in one projected CRS (the caller reprojects).
"""
from __future__ import annotations

import os
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass

import numpy as np
import shapely

from strikeline.errors import CancelledError, InputError

__all__ = [
    "PickSet",
    "SOURCES",
    "picks_from_contours",
    "picks_from_dem",
    "sample_bilinear",
    "densify_lines",
    "ground_slope_from_contours",
]

#: The values of :attr:`PickSet.source`.
SOURCES = ("dem", "contours")

#: Lines are cut into pieces of at most this many segments before the spatial join, so the
#: index's boxes stay tight and each GEOS intersection works on small inputs. Measured on the
#: benchmark sheet (bench/bench_picks.py): 32 segments gave the lowest total time of 8-64.
_PIECE_SEGMENTS = 32

#: Geometry pairs (or query pieces) handed to one worker at a time; progress and cancellation
#: are checked between batches.
_BATCH = 8192

#: Refuse to densify into more points than this (about 1.6 GB of coordinates).
_MAX_POINTS = 100_000_000

#: Two DEM samples of the same contact closer than this are one pick (the shared end point of
#: touching parts of a multi-part contact).
_DEM_DEDUPE_M = 1e-3

# shapely type ids
_LINE_TYPES = (1, 2)  # LineString, LinearRing
_MULTI_TYPES = (4, 5, 6, 7)  # MultiPoint, MultiLineString, MultiPolygon, GeometryCollection
_TYPE_NAMES = {0: "Point", 1: "LineString", 2: "LinearRing", 3: "Polygon", 4: "MultiPoint",
               5: "MultiLineString", 6: "MultiPolygon", 7: "GeometryCollection"}


# --------------------------------------------------------------------------------------------
# The pick set
# --------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class PickSet:
    """Elevation picks: 3D points on mapped contacts, with the contact id and the source.

    Attributes
    ----------
    xyz : ndarray, shape ``(n, 3)``, float64
        ``x, y`` (map coordinates) and ``z`` (elevation) of every pick, metres.
    contact_id : ndarray, shape ``(n,)``, int64
        The id the caller gave for the contact feature each pick lies on.
    source : ndarray, shape ``(n,)``, ``'<U8'``
        ``'dem'`` or ``'contours'``.

    Examples
    --------
    >>> import numpy as np
    >>> a = PickSet(np.zeros((2, 3)), np.array([7, 7]), np.array(["dem", "dem"]))
    >>> len(PickSet.concat(a, PickSet.empty())), a.counts_by_source()
    (2, {'dem': 2, 'contours': 0})
    """

    xyz: np.ndarray
    contact_id: np.ndarray
    source: np.ndarray

    def __post_init__(self):
        xyz = np.asarray(self.xyz, dtype=np.float64)
        if xyz.size == 0:
            xyz = xyz.reshape(0, 3)
        cid = np.asarray(self.contact_id).reshape(-1)
        src = np.asarray(self.source, dtype="<U8").reshape(-1)
        if xyz.ndim != 2 or xyz.shape[1] != 3:
            raise InputError(f"pick coordinates must be an (n, 3) array of x, y, z; got shape "
                             f"{xyz.shape}")
        if len(cid) != len(xyz) or len(src) != len(xyz):
            raise InputError(f"pick arrays differ in length: {len(xyz)} points, {len(cid)} "
                             f"contact ids, {len(src)} sources; give one of each per pick")
        if len(cid) and not np.issubdtype(cid.dtype, np.integer):
            raise InputError(f"contact ids must be integers, got dtype {cid.dtype}")
        bad = ~np.isin(src, SOURCES)
        if np.any(bad):
            raise InputError(f"pick source must be one of {', '.join(SOURCES)}; got "
                             f"{src[bad][0]!r}")
        object.__setattr__(self, "xyz", xyz)
        object.__setattr__(self, "contact_id", cid.astype(np.int64, copy=False))
        object.__setattr__(self, "source", src)

    def __len__(self) -> int:
        return len(self.xyz)

    @classmethod
    def empty(cls) -> "PickSet":
        """A pick set with no picks."""
        return cls(np.empty((0, 3)), np.empty(0, np.int64), np.empty(0, "<U8"))

    @classmethod
    def concat(cls, *sets: "PickSet") -> "PickSet":
        """All picks of several sets, in the order given (zero sets give an empty set)."""
        if not sets:
            return cls.empty()
        return cls(np.concatenate([s.xyz for s in sets]),
                   np.concatenate([s.contact_id for s in sets]),
                   np.concatenate([s.source for s in sets]))

    def counts_by_source(self) -> dict:
        """Number of picks per source: ``{'dem': n, 'contours': n}`` (both keys always present)."""
        return {s: int(np.count_nonzero(self.source == s)) for s in SOURCES}


# --------------------------------------------------------------------------------------------
# Input checks
# --------------------------------------------------------------------------------------------
def _as_geometries(values, name: str) -> np.ndarray:
    """A 1-D object array of shapely geometries (None allowed) from a sequence or one geometry."""
    if values is None:
        return np.empty(0, dtype=object)
    if isinstance(values, shapely.Geometry):
        values = [values]
    values = list(values)
    arr = np.empty(len(values), dtype=object)
    arr[:] = values
    ok = shapely.is_valid_input(arr)
    if not ok.all():
        i = int(np.flatnonzero(~ok)[0])
        raise InputError(f"{name}[{i}] is a {type(arr[i]).__name__}, not a shapely geometry; "
                         "give shapely LineString or MultiLineString objects")
    return arr


def _explode(geoms: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Single-part, non-empty geometries of ``geoms`` (multi-parts and collections exploded
    recursively), the index of the input each came from, and their type ids."""
    parts = geoms
    owner = np.arange(len(geoms))
    while True:
        types = shapely.get_type_id(parts)
        multi = np.isin(types, _MULTI_TYPES)
        if not multi.any():
            break
        sub, j = shapely.get_parts(parts[multi], return_index=True)
        parts = np.concatenate([parts[~multi], sub])
        owner = np.concatenate([owner[~multi], owner[multi][j]])
    keep = (types >= 0) & ~shapely.is_empty(parts)
    return parts[keep], owner[keep], types[keep]


def _line_parts(geoms: np.ndarray, name: str) -> tuple[np.ndarray, np.ndarray]:
    """Non-empty single-part lines of ``geoms`` and the index of the geometry each came from.

    Multi-part geometries and collections are exploded (recursively); None and empty
    geometries give no part. Anything that is not a line is refused.
    """
    parts, owner, types = _explode(geoms)
    bad = ~np.isin(types, _LINE_TYPES)
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        raise InputError(f"{name}[{owner[i]}] contains a {_TYPE_NAMES.get(int(types[i]), '?')}; "
                         "only LineString and MultiLineString geometries can be used - give a "
                         "line layer (convert polygons to their boundary first)")
    order = np.argsort(owner, kind="stable")
    return parts[order], owner[order]


def _positive(value, name: str, *, allow_zero: bool = False) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{name} must be a number of metres, got {value!r}") from None
    if not np.isfinite(v) or v < 0 or (v == 0 and not allow_zero):
        need = "a finite number >= 0" if allow_zero else "a finite number > 0"
        raise InputError(f"{name} must be {need} (metres), got {value!r}; give for example "
                         f"the DEM cell size or the map's digitising precision")
    return v


def _contact_ids(contact_ids, n: int) -> np.ndarray:
    if contact_ids is None:
        return np.arange(n, dtype=np.int64)
    ids = np.asarray(contact_ids).reshape(-1)
    if len(ids) != n:
        raise InputError(f"contact_ids has {len(ids)} values but there are {n} contacts; give "
                         "one id per contact feature (or leave contact_ids out)")
    if n and not np.issubdtype(ids.dtype, np.integer):
        try:
            as_int = ids.astype(np.int64)
            same = np.all(as_int == ids)
        except (TypeError, ValueError):
            same = False
        if not same:
            raise InputError(f"contact_ids must be whole numbers (feature ids), got dtype "
                             f"{ids.dtype}; pass the layer's integer feature ids")
        ids = as_int
    return ids.astype(np.int64, copy=False)


def _check_callbacks(progress, is_cancelled):
    for name, f in (("progress", progress), ("is_cancelled", is_cancelled)):
        if f is not None and not callable(f):
            raise InputError(f"{name} must be a callable or None, got {type(f).__name__}")


def _cancel_check(is_cancelled, what: str):
    if is_cancelled is not None and is_cancelled():
        raise CancelledError(f"{what} cancelled by the caller")


# --------------------------------------------------------------------------------------------
# Vertex-array helpers
# --------------------------------------------------------------------------------------------
def _part_vertices(parts: np.ndarray):
    """Coordinates of all parts, first vertex index and vertex count per part."""
    xy, vidx = shapely.get_coordinates(parts, return_index=True)
    n = np.bincount(vidx, minlength=len(parts))
    first = np.cumsum(n) - n
    return xy, first, n


def _cut_into_pieces(parts: np.ndarray, owner: np.ndarray, max_segments: int):
    """Cut single-part lines into consecutive pieces of at most ``max_segments`` segments.

    Neighbouring pieces share their junction vertex, so the pieces cover the line exactly.
    Returns ``(pieces, owner of each piece)``.
    """
    if len(parts) == 0:
        return np.empty(0, dtype=object), np.empty(0, dtype=np.int64)
    xy, first, n = _part_vertices(parts)
    n_seg = n - 1
    n_pieces = np.maximum(1, -(-n_seg // max_segments))
    piece_part = np.repeat(np.arange(len(parts)), n_pieces)
    rank = np.arange(len(piece_part)) - np.repeat(np.cumsum(n_pieces) - n_pieces, n_pieces)
    start = first[piece_part] + rank * max_segments
    stop = np.minimum(start + max_segments, first[piece_part] + n[piece_part] - 1)
    count = stop - start + 1
    vertex = np.repeat(start - (np.cumsum(count) - count), count) + np.arange(count.sum())
    pieces = shapely.linestrings(xy[vertex], indices=np.repeat(np.arange(len(start)), count))
    return pieces, owner[piece_part]


def densify_lines(lines, spacing_m) -> tuple[np.ndarray, np.ndarray]:
    """Points at equal steps along lines, both ends of every part included.

    Parameters
    ----------
    lines : sequence of shapely LineString / MultiLineString (or one geometry)
        ``None`` and empty entries give no point.
    spacing_m : float
        Largest distance between neighbouring points along a line, metres (> 0).

    Returns
    -------
    xy : ndarray, shape ``(m, 2)``
        The points, part by part in line order, each part from its first to its last vertex.
    line_index : ndarray, shape ``(m,)``, int64
        Index into ``lines`` of the line each point came from.

    Raises
    ------
    InputError
        Non-finite or non-positive spacing; a geometry that is not a line; a spacing so small
        that more than 100 million points would be made.

    Notes
    -----
    Each part of length :math:`L > 0` is divided into :math:`k = \\lceil L / s \\rceil` equal
    steps of :math:`L / k \\le s`, which gives :math:`k + 1` points including both ends; the
    points are spread evenly instead of leaving a short last step. A part of zero length gives
    one point. Positions are found for all points at once by a binary search in the cumulative
    along-line distance of all vertices (numpy segment arithmetic, no loop per point or line);
    zero-length segments (duplicate vertices) are skipped by the search.

    Examples
    --------
    >>> from shapely import LineString
    >>> xy, i = densify_lines([LineString([(0, 0), (10, 0)])], 4.0)
    >>> xy[:, 0].round(3).tolist(), i.tolist()
    ([0.0, 3.333, 6.667, 10.0], [0, 0, 0, 0])
    """
    spacing = _positive(spacing_m, "spacing_m")
    parts, owner = _line_parts(_as_geometries(lines, "lines"), "lines")
    if len(parts) == 0:
        return np.empty((0, 2)), np.empty(0, dtype=np.int64)
    xy, first, n = _part_vertices(parts)
    last = first + n - 1
    seg_len = np.hypot(*np.diff(xy, axis=0).T)
    seg_len[first[1:] - 1] = 0.0  # the "segment" from one part's end to the next part's start
    cum = np.concatenate([[0.0], np.cumsum(seg_len)])
    length = cum[last] - cum[first]
    ratio = length / spacing
    n_steps = np.where(length > 0, np.maximum(1, np.ceil(ratio - 1e-9)), 0)
    total = float(np.sum(n_steps + 1))
    if total > _MAX_POINTS:
        raise InputError(f"spacing_m={spacing_m} would make {total:.3g} points along "
                         f"{length.sum():.6g} m of lines (limit {_MAX_POINTS:.0e}); use a larger "
                         "spacing, for example the DEM cell size")
    n_steps = n_steps.astype(np.int64)
    n_pts = n_steps + 1
    pp = np.repeat(np.arange(len(parts)), n_pts)
    k = np.arange(n_pts.sum()) - np.repeat(np.cumsum(n_pts) - n_pts, n_pts)
    step = np.where(n_steps > 0, length / np.maximum(n_steps, 1), 0.0)
    d = cum[first][pp] + k * step[pp]
    seg = np.searchsorted(cum, d, side="right") - 1
    seg = np.clip(seg, first[pp], np.maximum(first[pp], last[pp] - 1))
    sl = seg_len[seg]
    with np.errstate(invalid="ignore", divide="ignore"):
        t = np.where(sl > 0, (d - cum[seg]) / sl, 0.0)
    t = np.clip(t, 0.0, 1.0)[:, None]
    nxt = np.minimum(seg + 1, last[pp])
    out = xy[seg] * (1.0 - t) + xy[nxt] * t
    # Ends exactly at the vertices, free of rounding in the cumulative sum.
    is_first = k == 0
    is_last = k == n_steps[pp]
    out[is_first] = xy[first[pp[is_first]]]
    out[is_last] = xy[last[pp[is_last]]]
    return out, owner[pp].astype(np.int64)


# --------------------------------------------------------------------------------------------
# DEM sampling
# --------------------------------------------------------------------------------------------
def sample_bilinear(dem, grid, x, y) -> np.ndarray:
    """Bilinear interpolation of a raster between cell centres.

    Parameters
    ----------
    dem : ndarray, shape ``grid.shape``
        Raster values, indexed ``[row, col]``, row 0 at the top.
    grid : strikeline.geometry.grid.Grid
        Its georeferencing; ``grid.nodata`` (if set) marks missing cells, as does NaN.
    x, y : array_like
        Map coordinates (metres), broadcast together.

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
    arr = np.asarray(dem)
    if arr.ndim != 2 or arr.shape != tuple(grid.shape):
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
        z = arr[rr, cc].astype(np.float64)
        missing = ~np.isfinite(z)
        if check_nodata:
            missing |= z == nodata
        if mask is not None:
            missing |= mask[rr, cc]
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
    dem : ndarray, shape ``grid.shape``
        Elevations (metres); NaN or ``grid.nodata`` marks missing cells.
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


# --------------------------------------------------------------------------------------------
# Contour crossings
# --------------------------------------------------------------------------------------------
def _elevations(elevations_m, n: int) -> np.ndarray:
    try:
        z = np.asarray(elevations_m, dtype=np.float64).reshape(-1)
    except (TypeError, ValueError):
        raise InputError("contour elevations must be numbers (metres); check that the "
                         "elevation field is numeric") from None
    if len(z) != n:
        raise InputError(f"elevations_m has {len(z)} values but there are {n} contour lines; "
                         "give one elevation per contour feature")
    return z


def _run_batches(fn, n_items: int, *, workers: int, is_cancelled, progress, lo: float,
                 hi: float, what: str) -> list:
    """``fn(slice)`` over consecutive batches of ``range(n_items)`` on a thread pool.

    shapely's array functions release the GIL, so batches run in parallel. Cancellation is
    checked and progress reported as batches finish; results come back in order.
    """
    bounds = list(range(0, n_items, _BATCH)) + [n_items]
    slices = [slice(a, b) for a, b in zip(bounds[:-1], bounds[1:])]
    results = [None] * len(slices)
    if not slices:
        return []
    with ThreadPoolExecutor(max_workers=workers) as pool:
        # Submit a window of batches at a time so cancellation takes effect promptly.
        window = 2 * workers
        for w0 in range(0, len(slices), window):
            _cancel_check(is_cancelled, what)
            futures = {i: pool.submit(fn, slices[i])
                       for i in range(w0, min(w0 + window, len(slices)))}
            for i, f in futures.items():
                results[i] = f.result()
            if progress is not None:
                progress(lo + (hi - lo) * min(len(slices), w0 + window) / len(slices))
    return results


def picks_from_contours(contacts, contours, elevations_m, *, contact_ids=None,
                        tolerance_m=1e-3, overlap_spacing_m=None, workers=None,
                        progress=None, is_cancelled=None) -> PickSet:
    """Picks where contacts cross topographic contour lines.

    Parameters
    ----------
    contacts : sequence of shapely LineString / MultiLineString
        The mapped contact lines (metres, same CRS as the contours). ``None`` and empty
        entries are skipped.
    contours : sequence of shapely LineString / MultiLineString
        Topographic contour lines.
    elevations_m : array_like, shape ``(len(contours),)``
        Elevation of each contour line (metres). NaN skips that contour.
    contact_ids : array_like of int, optional
        One id per contact feature; default ``0 .. len(contacts) - 1``.
    tolerance_m : float, default 1e-3
        Picks of the same contact at the same elevation closer than this are one pick.
    overlap_spacing_m : float, optional
        Where a contact runs along a contour for a stretch: ``None`` (default) takes the two
        ends of the shared stretch; a number also takes points along it at that spacing.
    workers : int, optional
        Threads for the geometry work; default the number of CPUs. ``1`` runs serially.
    progress : callable, optional
        Called with the fraction done (0-1).
    is_cancelled : callable, optional
        Polled between batches; when it returns true, :class:`~strikeline.errors.CancelledError`
        is raised.

    Returns
    -------
    PickSet
        ``source='contours'``, ``z`` the contour's elevation; ordered by contact (input order),
        then elevation, then ``x``, ``y``.

    Raises
    ------
    InputError
        Elevations of the wrong length or not numeric; non-line geometries; a negative or
        non-finite tolerance or spacing; contact ids of the wrong length or type.
    CancelledError
        When ``is_cancelled()`` returns true.

    Notes
    -----
    Method (all steps vectorised over arrays of geometries):

    1. Contacts and contours are exploded into single parts (multi-part lines and
       collections), and every part is cut into pieces of at most 32 segments that share
       their junction vertices, so the bounding boxes in the index are tight and each exact
       intersection is computed on small inputs.
    2. The contour pieces go into a ``shapely.STRtree`` (Sort-Tile-Recursive R-tree;
       Leutenegger et al. 1997); one bulk ``query(..., predicate="intersects")`` with all
       contact pieces gives the pairs that really meet, and ``shapely.intersection`` (GEOS
       overlay) computes each pair's intersection exactly.
    3. Point results (crossings, and touches of a contact tangent to a contour or ending on
       it) become picks at the contour's elevation. Line results (a contact running along a
       contour) are first re-joined per contact and contour with ``shapely.line_merge``, then
       give their end points (and, with ``overlap_spacing_m``, points along them).
    4. Picks of the same contact and elevation within ``tolerance_m`` are merged (KD-tree
       pairs and connected components, single linkage; the first pick of each group stays).
       This removes the copies made where a crossing falls on a piece junction, on a
       duplicated vertex, or where a contour is split into several features at that point.

    A touch counts once: GEOS returns one point per touch, and any copies from neighbouring
    pieces are merged in step 4. Picks a contact makes at two different elevations at one
    place (contours that meet on a cliff) are both kept.

    References
    ----------
    Leutenegger, S. T., Lopez, M. A. & Edgington, J. (1997). STR: a simple and efficient
    algorithm for R-tree packing. *Proceedings of the 13th International Conference on Data
    Engineering*, 497-506. https://doi.org/10.1109/ICDE.1997.582015

    Examples
    --------
    >>> from shapely import LineString
    >>> contact = LineString([(0, 0), (100, 0)])
    >>> contours = [LineString([(30, -5), (30, 5)]), LineString([(60, -5), (60, 5)])]
    >>> p = picks_from_contours([contact], contours, [110.0, 120.0])
    >>> p.xyz.tolist()
    [[30.0, 0.0, 110.0], [60.0, 0.0, 120.0]]
    """
    _check_callbacks(progress, is_cancelled)
    tol = _positive(tolerance_m, "tolerance_m", allow_zero=True)
    overlap_spacing = (None if overlap_spacing_m is None
                       else _positive(overlap_spacing_m, "overlap_spacing_m"))
    n_workers = (os.cpu_count() or 1) if workers is None else int(workers)
    if n_workers < 1:
        raise InputError(f"workers must be a whole number >= 1, got {workers!r}")
    c_geoms = _as_geometries(contacts, "contacts")
    ids = _contact_ids(contact_ids, len(c_geoms))
    t_geoms = _as_geometries(contours, "contours")
    elev = _elevations(elevations_m, len(t_geoms))
    _cancel_check(is_cancelled, "contour intersection")

    usable = np.isfinite(elev)
    t_parts, t_owner = _line_parts(t_geoms[usable], "contours")
    t_owner = np.flatnonzero(usable)[t_owner]
    c_parts, c_owner = _line_parts(c_geoms, "contacts")
    if len(t_parts) == 0 or len(c_parts) == 0:
        if progress is not None:
            progress(1.0)
        return PickSet.empty()
    t_pieces, t_piece_owner = _cut_into_pieces(t_parts, t_owner, _PIECE_SEGMENTS)
    c_pieces, c_piece_owner = _cut_into_pieces(c_parts, c_owner, _PIECE_SEGMENTS)
    if progress is not None:
        progress(0.1)

    tree = shapely.STRtree(t_pieces)

    def query(s):
        a, b = tree.query(c_pieces[s], predicate="intersects")
        return a + s.start, b

    found = _run_batches(query, len(c_pieces), workers=n_workers, is_cancelled=is_cancelled,
                         progress=progress, lo=0.1, hi=0.4, what="contour intersection")
    ia = np.concatenate([f[0] for f in found]).astype(np.intp)
    ib = np.concatenate([f[1] for f in found]).astype(np.intp)

    def intersect(s):
        return shapely.intersection(c_pieces[ia[s]], t_pieces[ib[s]])

    inter = _run_batches(intersect, len(ia), workers=n_workers, is_cancelled=is_cancelled,
                         progress=progress, lo=0.4, hi=0.9, what="contour intersection")
    inter = np.concatenate(inter) if inter else np.empty(0, dtype=object)
    contact_of = c_piece_owner[ia]
    contour_of = t_piece_owner[ib]

    # Explode results into single points and single lines, remembering the pair.
    parts, pair, types = _explode(inter)

    is_point = types == 0
    pt_xy = shapely.get_coordinates(parts[is_point])
    pt_contact = contact_of[pair[is_point]]
    pt_contour = contour_of[pair[is_point]]

    is_line = np.isin(types, _LINE_TYPES)
    ov_xy = np.empty((0, 2))
    ov_contact = np.empty(0, dtype=np.intp)
    ov_contour = np.empty(0, dtype=np.intp)
    if is_line.any():
        lines = parts[is_line]
        lc, lt = contact_of[pair[is_line]], contour_of[pair[is_line]]
        # Re-join stretches cut at piece junctions: one group per (contact, contour).
        group_key = np.column_stack([lc, lt])
        uniq, group = np.unique(group_key, axis=0, return_inverse=True)
        group = group.reshape(-1)
        order = np.argsort(group, kind="stable")
        merged = shapely.line_merge(
            shapely.multilinestrings(lines[order], indices=group[order]))
        m_parts, m_group = shapely.get_parts(merged, return_index=True)
        m_parts = np.asarray(m_parts)
        if overlap_spacing is None:
            ends = np.concatenate([shapely.get_point(m_parts, 0), shapely.get_point(m_parts, -1)])
            ov_xy = shapely.get_coordinates(ends)
            g = np.concatenate([m_group, m_group])
        else:
            ov_xy, j = densify_lines(m_parts, overlap_spacing)
            g = m_group[j]
        ov_contact, ov_contour = uniq[g, 0], uniq[g, 1]

    xy = np.concatenate([pt_xy, ov_xy])
    contact = np.concatenate([pt_contact, ov_contact]).astype(np.intp)
    z = elev[np.concatenate([pt_contour, ov_contour]).astype(np.intp)]
    if len(xy) == 0:
        if progress is not None:
            progress(1.0)
        return PickSet.empty()
    keep = _dedupe(xy, np.column_stack([contact.astype(np.float64), z]), tol)
    xy, contact, z = xy[keep], contact[keep], z[keep]
    order = np.lexsort((xy[:, 1], xy[:, 0], z, contact))
    result = PickSet(np.column_stack([xy[order], z[order]]), ids[contact[order]],
                     np.full(len(order), "contours", dtype="<U8"))
    if progress is not None:
        progress(1.0)
    return result


def ground_slope_from_contours(x, y, contours, elevations_m, *, spacing_m=None, k=64):
    """Ground slope (degrees) at points, from the spacing of topographic contour lines.

    Parameters
    ----------
    x, y : array_like, shape ``(n,)``
        Points (metres), typically contour picks on a contact.
    contours : sequence of shapely (Multi)LineStrings
    elevations_m : array_like
        Elevation of each contour (NaN skipped).
    spacing_m : float, optional
        Densification step of the contours; default a tenth of the median contour spacing
        estimate (the sheet's extent over the number of contour levels), at least 1 m.
    k : int
        Neighbours searched for a point of another elevation.

    Returns
    -------
    ndarray
        ``atan(dz / d)`` where ``d`` is the distance from the point to the nearest contour
        vertex at a different elevation and ``dz`` that elevation difference; NaN where no
        such vertex lies among the ``k`` nearest.

    Notes
    -----
    Common practice: the ground slope between two contours is the contour interval over their
    horizontal separation (the hand method of reading slope off a topographic map).
    """
    from scipy.spatial import cKDTree

    x = np.asarray(x, dtype=float).ravel()
    y = np.asarray(y, dtype=float).ravel()
    elev = np.asarray(elevations_m, dtype=float)
    geoms = np.asarray(contours, dtype=object)
    keep = np.isfinite(elev) & ~shapely.is_missing(geoms)
    geoms, elev = geoms[keep], elev[keep]
    if len(x) == 0 or len(geoms) == 0:
        return np.full(len(x), np.nan)
    if spacing_m is None:
        xmin, ymin, xmax, ymax = shapely.total_bounds(geoms)
        levels = max(len(np.unique(elev)), 1)
        spacing_m = max(1.0, max(xmax - xmin, ymax - ymin) / levels / 10.0)
    xy, idx = densify_lines(geoms, spacing_m)
    z = elev[idx]
    tree = cKDTree(xy)
    k = int(min(k, len(xy)))
    dist, nb = tree.query(np.column_stack([x, y]), k=k)
    dist = dist.reshape(len(x), k)
    nb = nb.reshape(len(x), k)
    zq = z[nb[:, 0]]  # the point's own contour: the nearest vertex
    other = np.abs(z[nb] - zq[:, None]) > 1e-9
    has = other.any(axis=1)
    first = np.argmax(other, axis=1)
    rows = np.arange(len(x))
    d = dist[rows, first]
    dz = np.abs(z[nb[rows, first]] - zq)
    with np.errstate(divide="ignore", invalid="ignore"):
        slope = np.degrees(np.arctan2(dz, d))
    return np.where(has, slope, np.nan)
