"""Picks from topographic contour lines: where a contact crosses a contour, the contour's
elevation (:func:`picks_from_contours`; ``source='contours'``), found by a spatial join of
short pieces of both line sets and their intersection on a thread pool; and the ground slope
at points from the spacing of the contours (:func:`ground_slope_from_contours`).
"""
from __future__ import annotations

import os
from concurrent.futures import ThreadPoolExecutor

import numpy as np
import shapely

from strikeline.errors import InputError
from strikeline.picks.dem import _BATCH, _dedupe
from strikeline.picks.lines import (_LINE_TYPES, _as_geometries, _cancel_check, _check_callbacks,
                                    _contact_ids, _cut_into_pieces, _explode, _line_parts,
                                    _positive, densify_lines)
from strikeline.picks.pickset import PickSet


#: Lines are cut into pieces of at most this many segments before the spatial join, so the
#: index's boxes stay tight and each GEOS intersection works on small inputs. Measured on the
#: benchmark sheet (bench/bench_picks.py): 32 segments gave the lowest total time of 8-64.
_PIECE_SEGMENTS = 32


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
