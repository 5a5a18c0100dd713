"""The points where contacts meet contour lines, before sorting: crossings and the ends of
shared stretches, merged within a tolerance. Two ways that give the same points in the same
order: every intersecting pair of pieces through GEOS's overlay (:func:`by_overlay`), or the
crossings computed in bulk with numpy and only the unsettled pairs through GEOS
(:func:`by_segments`).

Order matters in one place: where picks of one contact and elevation lie within the tolerance
of each other but not on the same spot, the first one listed is kept. The overlay lists the
results of the piece pairs in the spatial index's order, single results before the parts of
multiple ones (as exploding them gives); :func:`by_segments` lists its points the same way, and
where such a group of nearby picks makes the order matter it takes the index's order and GEOS's
own order of a pair's points.
"""
from __future__ import annotations

import numpy as np
import shapely

from strikeline.picks import crossings, overlay
from strikeline.picks.lines import (_LINE_TYPES, _MULTI_TYPES, _cancel_check, _cut_into_pieces,
                                    _part_vertices, densify_lines)


def _overlap_points(lines, lc, lt, overlap_spacing):
    """Ends of (or points along) the stretches a contact shares with a contour: stretches cut
    at piece junctions are re-joined first, one group per (contact, contour)."""
    if len(lines) == 0:
        return np.empty((0, 2)), np.empty(0, np.intp), np.empty(0, np.intp)
    group_key = np.column_stack([lc, lt])
    uniq, group = np.unique(group_key, axis=0, return_inverse=True)
    group = group.reshape(-1)
    order = np.argsort(group, kind="stable")
    merged = shapely.line_merge(shapely.multilinestrings(lines[order], indices=group[order]))
    m_parts, m_group = shapely.get_parts(merged, return_index=True)
    m_parts = np.asarray(m_parts)
    if overlap_spacing is None:
        ends = np.concatenate([shapely.get_point(m_parts, 0), shapely.get_point(m_parts, -1)])
        ov_xy = shapely.get_coordinates(ends)
        g = np.concatenate([m_group, m_group])
    else:
        ov_xy, j = densify_lines(m_parts, overlap_spacing)
        g = m_group[j]
    return ov_xy, uniq[g, 0], uniq[g, 1]


def _labels(xy: np.ndarray, key: np.ndarray, tolerance_m: float) -> np.ndarray:
    """Cluster of every point: points within ``tolerance_m`` that share their ``key`` row are
    joined (KD-tree pairs and connected components: single linkage)."""
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components
    from scipy.spatial import cKDTree

    n = len(xy)
    if n < 2:
        return np.arange(n)
    pairs = cKDTree(xy).query_pairs(r=tolerance_m, output_type="ndarray")
    if len(pairs):
        pairs = pairs[np.all(key[pairs[:, 0]] == key[pairs[:, 1]], axis=1)]
    if len(pairs) == 0:
        return np.arange(n)
    graph = coo_matrix((np.ones(len(pairs), bool), (pairs[:, 0], pairs[:, 1])), shape=(n, n))
    return connected_components(graph, directed=False)[1]


def _first_of_each(labels: np.ndarray) -> np.ndarray:
    """Indices of the first member of every cluster, ascending (the first pick stays)."""
    return np.sort(np.unique(labels, return_index=True)[1])


def _finish(pt_xy, pt_contact, pt_contour, lines, lc, lt, elev, tol, overlap_spacing):
    """All points (crossings, then overlap points), their contact, elevation and cluster."""
    ov_xy, ov_contact, ov_contour = _overlap_points(lines, lc, lt, overlap_spacing)
    xy = np.concatenate([pt_xy, ov_xy])
    contact = np.concatenate([pt_contact, ov_contact]).astype(np.intp)
    z = elev[np.concatenate([pt_contour, ov_contour]).astype(np.intp)]
    labels = _labels(xy, np.column_stack([contact.astype(np.float64), z]), tol)
    return xy, contact, z, labels


def by_overlay(c_parts, c_owner, t_parts, t_owner, elev, *, tol, overlap_spacing, workers,
               progress=None, is_cancelled=None, max_segments):
    """Points by GEOS: STRtree of the contour pieces, every intersecting pair's intersection.

    Returns ``xy``, ``contact`` (index of the contact feature) and ``z`` of the points kept.
    """
    t_pieces, t_piece_owner = _cut_into_pieces(t_parts, t_owner, max_segments)
    c_pieces, c_piece_owner = _cut_into_pieces(c_parts, c_owner, max_segments)
    if progress is not None:
        progress(0.1)
    ia, ib = overlay.tree_pairs(c_pieces, t_pieces, workers=workers, is_cancelled=is_cancelled,
                                progress=progress, lo=0.1, hi=0.4)
    parts, pair, types = overlay.intersect_pairs(c_pieces, t_pieces, ia, ib, workers=workers,
                                                 is_cancelled=is_cancelled, progress=progress,
                                                 lo=0.4, hi=0.9)
    contact_of, contour_of = c_piece_owner[ia], t_piece_owner[ib]
    pt = types == 0
    ln = np.isin(types, _LINE_TYPES)
    xy, contact, z, labels = _finish(
        shapely.get_coordinates(parts[pt]), contact_of[pair[pt]], contour_of[pair[pt]],
        parts[ln], contact_of[pair[ln]], contour_of[pair[ln]], elev, tol, overlap_spacing)
    keep = _first_of_each(labels)
    return xy[keep], contact[keep], z[keep]


def _geos_parts(c_xy, c_first, c_n, t_xy, t_first, t_n, keys, n_b, *, workers, max_segments,
                is_cancelled, progress, lo, hi):
    """GEOS's results for the piece pairs ``keys`` (``a * n_b + b``), one row per single point
    or line: pair key, level (0: the pair's whole result; 1: a part of a multiple result),
    rank within the pair, type id, geometry. ``None`` if a result nests collections."""
    a, b = keys // n_b, keys % n_b
    ua, ja = np.unique(a, return_inverse=True)
    ub, jb = np.unique(b, return_inverse=True)
    c_pieces = overlay.pieces_of(c_xy, c_first, c_n, ua, max_segments)
    t_pieces = overlay.pieces_of(t_xy, t_first, t_n, ub, max_segments)
    results = overlay.run_batches(
        lambda s: shapely.intersection(c_pieces[ja.reshape(-1)[s]], t_pieces[jb.reshape(-1)[s]]),
        len(keys), workers=workers, is_cancelled=is_cancelled, progress=progress, lo=lo, hi=hi,
        what="contour intersection")
    geoms = np.concatenate(results) if results else np.empty(0, dtype=object)
    multi = np.isin(shapely.get_type_id(geoms), _MULTI_TYPES)
    sub, k = shapely.get_parts(geoms[multi], return_index=True)
    sub = np.asarray(sub)
    if np.isin(shapely.get_type_id(sub), _MULTI_TYPES).any():
        return None
    owner = np.flatnonzero(multi)[k]
    rank = np.arange(len(k)) - np.searchsorted(k, k)
    parts = np.concatenate([geoms[~multi], sub])
    row = np.concatenate([np.flatnonzero(~multi), owner])
    level = np.concatenate([np.zeros((~multi).sum(), np.int8), np.ones(len(sub), np.int8)])
    rank = np.concatenate([np.zeros((~multi).sum(), np.int64), rank])
    types = shapely.get_type_id(parts)
    ok = (types >= 0) & ~shapely.is_empty(parts)
    return keys[row[ok]], level[ok], rank[ok], types[ok], parts[ok]


def by_segments(c_parts, c_owner, t_parts, t_owner, elev, *, tol, overlap_spacing, workers,
                progress=None, is_cancelled=None, max_segments):
    """Points by bulk crossings (:func:`strikeline.picks.crossings.segment_crossings`), GEOS for
    the piece pairs they leave; the same points in the same order as :func:`by_overlay`.

    Returns ``xy``, ``contact`` and ``z`` of the points kept.
    """
    c_xy, c_first, c_n = _part_vertices(c_parts)
    t_xy, t_first, t_n = _part_vertices(t_parts)
    args = dict(tol=tol, overlap_spacing=overlap_spacing, workers=workers, progress=progress,
                is_cancelled=is_cancelled, max_segments=max_segments)
    if not (np.isfinite(c_xy).all() and np.isfinite(t_xy).all()):
        return by_overlay(c_parts, c_owner, t_parts, t_owner, elev, **args)
    a = crossings.segment_table(c_xy, c_first, c_n, max_segments)
    b = crossings.segment_table(t_xy, t_first, t_n, max_segments)
    guard = max(1.0, float(np.abs(c_xy).max()), float(np.abs(t_xy).max())) * crossings.GUARD_SHARE
    if progress is not None:
        progress(0.1)
    found = crossings.segment_crossings(a, b, guard, workers=workers)
    _cancel_check(is_cancelled, "contour intersection")
    if progress is not None:
        progress(0.6)
    n_b = np.int64(b.n_pieces)
    a_owner = c_owner[overlay.piece_parts(c_n, max_segments)]
    b_owner = t_owner[overlay.piece_parts(t_n, max_segments)]
    f_key = found.a_piece * n_b + found.b_piece
    f_start = np.searchsorted(f_key, f_key)
    f_rank = np.arange(len(f_key)) - f_start
    f_count = np.searchsorted(f_key, f_key, side="right") - f_start
    f_level = (f_count > 1).astype(np.int8)

    positions = overlay.TreeOrder(
        c_xy, c_first, c_n, lambda: _cut_into_pieces(t_parts, t_owner, max_segments)[0],
        max_segments)
    flagged = found.flagged
    done = np.empty(0, np.int64)
    g = [np.empty(0, np.int64), np.empty(0, np.int8), np.empty(0, np.int64),
         np.empty(0, np.int32), np.empty(0, dtype=object)]
    exact = False
    for _ in range(3):
        new = np.setdiff1d(flagged, done)
        if len(new):
            res = _geos_parts(c_xy, c_first, c_n, t_xy, t_first, t_n, new, n_b, workers=workers,
                              max_segments=max_segments, is_cancelled=is_cancelled,
                              progress=progress if len(done) == 0 else None, lo=0.6, hi=0.9)
            if res is None:
                return by_overlay(c_parts, c_owner, t_parts, t_owner, elev, **args)
            g = [np.concatenate([old, part]) for old, part in zip(g, res)]
            done = np.union1d(done, new)
        fast = ~np.isin(f_key, flagged)
        g_pt, g_ln = g[3] == 0, np.isin(g[3], _LINE_TYPES)
        exact = exact or bool(g_ln.any())
        # Points: fast crossings and GEOS's points, in the overlay's order.
        key = np.concatenate([f_key[fast], g[0][g_pt]])
        level = np.concatenate([f_level[fast], g[1][g_pt]])
        rank = np.concatenate([f_rank[fast], g[2][g_pt]])
        pt_xy = np.concatenate([np.column_stack([found.x[fast], found.y[fast]]),
                                shapely.get_coordinates(g[4][g_pt])])
        order = _overlay_order(key, level, rank, n_b, positions if exact else None)
        l_order = _overlay_order(g[0][g_ln], g[1][g_ln], g[2][g_ln], n_b,
                                 positions if exact else None)
        lk = g[0][g_ln][l_order]
        xy, contact, z, labels = _finish(
            pt_xy[order], a_owner[key[order] // n_b], b_owner[key[order] % n_b],
            g[4][g_ln][l_order], a_owner[lk // n_b], b_owner[lk % n_b], elev, tol,
            overlap_spacing)
        # Clusters of picks not all on one spot: the first listed is kept, so the order of
        # their members must be the overlay's own.
        mixed = _mixed_clusters(xy, labels)
        if not mixed.any():
            break
        member = mixed[labels[:len(key)]] & np.concatenate([np.ones(fast.sum(), bool),
                                                            np.zeros(g_pt.sum(), bool)])[order]
        both = np.column_stack([labels[:len(key)][member], key[order][member]])
        u, cnt = np.unique(both, axis=0, return_counts=True)
        convert = np.unique(u[cnt > 1, 1])
        if exact and len(convert) == 0:
            break
        flagged = np.union1d(flagged, convert)
        exact = True
    keep = _first_of_each(labels)
    return xy[keep], contact[keep], z[keep]


def _mixed_clusters(xy: np.ndarray, labels: np.ndarray) -> np.ndarray:
    """Per cluster label: whether its members lie on more than one spot."""
    n_labels = int(labels.max()) + 1 if len(labels) else 0
    mixed = np.zeros(n_labels, bool)
    if len(labels) == 0:
        return mixed
    o = np.argsort(labels, kind="stable")
    lo, xo = labels[o], xy[o]
    same = lo[1:] == lo[:-1]
    differ = same & np.any(xo[1:] != xo[:-1], axis=1)
    mixed[lo[1:][differ]] = True
    return mixed


def _overlay_order(key, level, rank, n_b, positions):
    """The order in which the overlay lists these results: level (a pair's whole result before
    parts of multiple results), contact piece, the contour piece's place in the spatial index's
    list for that contact piece (``positions``; its number where that is None), rank in the
    pair."""
    a, b = key // n_b, key % n_b
    if positions is not None:
        b = positions(a, b)
    return np.lexsort((rank, b, a, level))
