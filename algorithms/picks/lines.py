"""Line inputs of the pick functions: checks of geometries, contact ids, distances and callbacks;
multi-part lines exploded into single parts, cut into pieces of a few segments, and densified
to points every ``spacing_m`` along them (:func:`densify_lines`). Vectorised with shapely 2 and
numpy, no Python loop per point.
"""
from __future__ import annotations

import numpy as np
import shapely

from strikeline.errors import CancelledError, InputError


#: Refuse to densify into more points than this (about 1.6 GB of coordinates).
_MAX_POINTS = 100_000_000

# shapely type ids
_LINE_TYPES = (1, 2)  # LineString, LinearRing
_MULTI_TYPES = (4, 5, 6, 7)  # MultiPoint, MultiLineString, MultiPolygon, GeometryCollection
_TYPE_NAMES = {0: "Point", 1: "LineString", 2: "LinearRing", 3: "Polygon", 4: "MultiPoint",
               5: "MultiLineString", 6: "MultiPolygon", 7: "GeometryCollection"}


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
