"""Picks from topographic contour lines: where a contact crosses a contour, the contour's
elevation (:func:`picks_from_contours`; ``source='contours'``), found segment by segment with
numpy (:mod:`strikeline.picks.crossings`) and, where that cannot settle a piece pair, by GEOS's
overlay (:mod:`strikeline.picks.overlay`); and the ground slope at points from the spacing of the
contours (:func:`ground_slope_from_contours`).
"""
from __future__ import annotations

import os

import numpy as np
import shapely

from strikeline.errors import InputError
from strikeline.picks import contour_points
from strikeline.picks.lines import (_as_geometries, _cancel_check, _check_callbacks, _contact_ids,
                                    _line_parts, _positive, densify_lines)
from strikeline.picks.pickset import PickSet


#: Lines are cut into pieces of at most this many segments: the unit of GEOS's overlay where it
#: is needed (and of the order in which crossings are listed before merging). Measured on the
#: benchmark sheet (bench/bench_picks.py) when every piece pair went through GEOS: 32 segments
#: gave the lowest total time of 8-64.
_PIECE_SEGMENTS = 32

#: ``'segments'``: crossings computed in bulk with numpy, GEOS only for the piece pairs that
#: needs; ``'overlay'``: every intersecting piece pair through GEOS (the method the numpy one
#: reproduces bit for bit; also taken for inputs with non-finite coordinates).
_ENGINE = "segments"


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
    What is computed (all steps vectorised over arrays):

    1. Contacts and contours are exploded into single parts (multi-part lines and
       collections), and every part is cut into pieces of at most 32 segments that share
       their junction vertices.
    2. The picks are the intersection of every contact piece with every contour piece, as
       GEOS's overlay (``shapely.intersection``) gives it: point results (crossings, and
       touches of a contact tangent to a contour or ending on it) become picks at the
       contour's elevation; line results (a contact running along a contour) are re-joined per
       contact and contour with ``shapely.line_merge`` and give their end points (and, with
       ``overlap_spacing_m``, points along them).
    3. Picks of the same contact and elevation within ``tolerance_m`` are merged (KD-tree
       pairs and connected components, single linkage; the first pick of each group in the
       overlay's order stays). This removes the copies made where a crossing falls on a piece
       junction, on a duplicated vertex, or where a contour is split into several features at
       that point.

    How step 2 is computed: all segments at once with numpy
    (:func:`strikeline.picks.crossings.segment_crossings`). Pairs of contact and contour
    segments whose boxes overlap come from a grid of buckets; the four orientation signs of a
    pair are taken where a floating-point filter proves them (Shewchuk 1997), and a proper
    crossing's point is the crossing of the two lines in homogeneous coordinates (O'Rourke
    1998, §7.2) evaluated in double-double arithmetic (Dekker 1971) in the same operations as
    GEOS, so it is GEOS's point to the last bit. A piece pair with anything else - a touch, a
    vertex on or within a guard distance of the other line, a collinear stretch, two crossings
    of one segment at nearly one point - goes to GEOS's overlay whole, which handles every
    case. The points are listed in the overlay's order (``shapely.STRtree`` of the contour
    pieces, Sort-Tile-Recursive R-tree, Leutenegger et al. 1997): it matters only within a
    group of picks merged in step 3 that do not all lie on one spot, and there the index's
    own order and GEOS's order of a pair's points are taken. The picks are those of the
    overlay of every piece pair, byte for byte. Inputs with non-finite coordinates go through
    the overlay whole.

    A touch counts once: GEOS returns one point per touch, and any copies from neighbouring
    pieces are merged in step 3. Picks a contact makes at two different elevations at one
    place (contours that meet on a cliff) are both kept.

    References
    ----------
    Dekker, T. J. (1971). A floating-point technique for extending the available precision.
    *Numerische Mathematik* 18, 224-242. https://doi.org/10.1007/BF01397083

    Leutenegger, S. T., Lopez, M. A. & Edgington, J. (1997). STR: a simple and efficient
    algorithm for R-tree packing. *Proceedings of the 13th International Conference on Data
    Engineering*, 497-506. https://doi.org/10.1109/ICDE.1997.582015

    O'Rourke, J. (1998). *Computational Geometry in C*, 2nd ed., Cambridge University Press,
    §7.2 (segment-segment intersection).

    Shewchuk, J. R. (1997). Adaptive precision floating-point arithmetic and fast robust
    geometric predicates. *Discrete & Computational Geometry* 18, 305-363.
    https://doi.org/10.1007/PL00009321

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
    engine = {"segments": contour_points.by_segments,
              "overlay": contour_points.by_overlay}[_ENGINE]
    xy, contact, z = engine(c_parts, c_owner, t_parts, t_owner, elev, tol=tol,
                            overlap_spacing=overlap_spacing, workers=n_workers,
                            progress=progress, is_cancelled=is_cancelled,
                            max_segments=_PIECE_SEGMENTS)
    if len(xy) == 0:
        if progress is not None:
            progress(1.0)
        return PickSet.empty()
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
