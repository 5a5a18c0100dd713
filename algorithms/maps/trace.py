"""Predicted outcrop traces compared with mapped contacts (misfit QA)."""
from __future__ import annotations

import numpy as np
import shapely

__all__ = ["line_segments", "distance_to_lines", "trace_misfit", "vertex_spacing_m", "split_into_segments",
           "contact_misfit_segments", "holdout_misfit_segments"]


def line_segments(geoms) -> np.ndarray:
    """Split (multi)line geometries into their two-point segments (a shapely array)."""
    geoms = np.asarray(geoms, dtype=object)
    if geoms.size == 0:
        return np.empty(0, dtype=object)
    parts = shapely.get_parts(geoms)
    coords, idx = shapely.get_coordinates(parts, return_index=True)
    same = idx[1:] == idx[:-1]
    a, b = coords[:-1][same], coords[1:][same]
    return shapely.linestrings(np.stack([a, b], axis=1))


def distance_to_lines(xy, geoms) -> np.ndarray:
    """Distance of every point to the nearest of the lines (NaN when there are no lines).

    Uses a spatial index over the lines' segments (``shapely.STRtree.query_nearest``), so it
    scales to many points and long traces.
    """
    xy = np.asarray(xy, dtype=float).reshape(-1, 2)
    segs = line_segments(geoms)
    if len(segs) == 0 or len(xy) == 0:
        return np.full(len(xy), np.nan)
    tree = shapely.STRtree(segs)
    pts = shapely.points(xy)
    (ip, _), dist = tree.query_nearest(pts, return_distance=True, all_matches=False)
    out = np.full(len(xy), np.nan)
    out[ip] = dist
    return out


def trace_misfit(xy, trace_geoms) -> dict:
    """Median and 90th percentile of the distance from mapped contact vertices to a predicted trace.

    Parameters
    ----------
    xy : array_like, shape ``(n, 2)``
        Vertices of the mapped contacts (metres).
    trace_geoms : array of shapely lines
        The predicted outcrop trace.

    Returns
    -------
    dict
        ``{"median_m": m, "p90_m": m, "n_vertices": n}``; both are ``None`` when there is no
        trace or no vertex.
    """
    d = distance_to_lines(xy, trace_geoms)
    d = d[np.isfinite(d)]
    if len(d) == 0:
        return {"median_m": None, "p90_m": None, "n_vertices": 0,
                "note": "no predicted trace within the DEM, or no contact vertex on it"}
    return {"median_m": float(np.median(d)), "p90_m": float(np.percentile(d, 90)), "n_vertices": int(len(d))}


def split_lines_by_flag(geoms, flag_fn, *, spacing_m):
    """Split lines into runs where a per-point flag is constant (e.g. "extrapolated").

    Parameters
    ----------
    geoms : array of shapely (Multi)LineStrings
    flag_fn : callable ``(x, y) -> bool array``
        Evaluated at the lines' points after densifying them to ``spacing_m``.
    spacing_m : float
        Densification step, so that a change of flag is located to within this distance.

    Returns
    -------
    parts : ndarray of LineString
    flags : ndarray of bool
    source_index : ndarray of int
        Index into ``geoms`` of the line each part came from.

    Notes
    -----
    A part boundary is placed at the point where the flag changes, and that point belongs to
    both neighbouring parts, so the parts join without gaps.
    """
    geoms = np.asarray(geoms, dtype=object).ravel()
    if geoms.size == 0:
        e = np.empty(0, dtype=object)
        return e, np.empty(0, dtype=bool), np.empty(0, dtype=np.int64)
    # whole lines at a time, about _SPLIT_VERTICES vertices each: the densified points and their
    # flags take memory in proportion to the chunk, not to all lines (a sheet of 16,000^2 cells
    # has millions of contour vertices); each line's parts depend on that line only
    group = np.cumsum(shapely.get_num_coordinates(geoms)) // _SPLIT_VERTICES
    cuts = np.concatenate(([0], np.flatnonzero(np.diff(group)) + 1, [len(geoms)]))
    parts, flags, src = [], [], []
    for a, b in zip(cuts[:-1], cuts[1:]):
        p, f, s = _split_chunk(geoms[a:b], flag_fn, spacing_m)
        parts.append(p)
        flags.append(f)
        src.append(s + a)
    return np.concatenate(parts), np.concatenate(flags), np.concatenate(src)


#: Vertices of the lines :func:`split_lines_by_flag` densifies and flags at once (our choice:
#: a few tens of MiB of points and flags).
_SPLIT_VERTICES = 1 << 19


def _split_chunk(geoms, flag_fn, spacing_m):
    """:func:`split_lines_by_flag` of some whole lines."""
    dense = shapely.segmentize(geoms, max_segment_length=float(spacing_m))
    parts, src = shapely.get_parts(dense, return_index=True)
    coords, pidx = shapely.get_coordinates(parts, return_index=True)
    flags = np.asarray(flag_fn(coords[:, 0], coords[:, 1]), dtype=bool)
    # a new run starts at the first vertex of each part and wherever the flag changes
    starts = np.ones(len(coords), dtype=bool)
    starts[1:] = (pidx[1:] != pidx[:-1]) | (flags[1:] != flags[:-1])
    run = np.cumsum(starts) - 1
    out_parts, out_flags, out_src = [], [], []
    # runs are contiguous slices; extend each one vertex back so runs of one part connect
    bounds = np.flatnonzero(starts).tolist() + [len(coords)]
    for k in range(len(bounds) - 1):
        a, b = bounds[k], bounds[k + 1]
        if a > 0 and pidx[a - 1] == pidx[a]:
            a -= 1
        if b - a >= 2:
            out_parts.append(shapely.linestrings(coords[a:b]))
            out_flags.append(bool(flags[bounds[k]]))
            out_src.append(int(src[pidx[bounds[k]]]))
    del run
    return (np.array(out_parts, dtype=object), np.array(out_flags, dtype=bool),
            np.array(out_src, dtype=np.int64))


def vertex_spacing_m(geoms) -> float:
    """Median distance between consecutive vertices of (multi)lines (0 when there is none).

    Examples
    --------
    >>> import shapely
    >>> vertex_spacing_m([shapely.LineString([(0, 0), (10, 0), (30, 0)])])
    15.0
    """
    geoms = np.asarray(geoms, dtype=object)
    if geoms.size == 0:
        return 0.0
    parts = shapely.get_parts(geoms)
    xy, idx = shapely.get_coordinates(parts, return_index=True)
    same = idx[1:] == idx[:-1]
    step = np.hypot(*(xy[1:] - xy[:-1]).T)[same]
    step = step[step > 0]
    return float(np.median(step)) if len(step) else 0.0


def split_into_segments(contacts, contact_ids, *, segment_m):
    """Cut mapped contacts into segments of ``segment_m`` and densify each to ``segment_m / 10``.

    Returns
    -------
    list of (ndarray (k, 2), int)
        The points of every segment (its ends included: neighbouring segments share a point)
        and the id of its contact. Segments with fewer than two points are left out.
    """
    contacts = np.asarray(contacts, dtype=object)
    ids = np.asarray(contact_ids, dtype=np.int64)
    if contacts.size == 0:
        return []
    parts, pid = shapely.get_parts(contacts, return_index=True)
    # densify, then cut each part where its running length passes a multiple of segment_m
    dense = shapely.segmentize(parts, max_segment_length=segment_m / 10.0)
    xy, vpart = shapely.get_coordinates(dense, return_index=True)
    step = np.zeros(len(xy))
    same = vpart[1:] == vpart[:-1]
    step[1:] = np.where(same, np.hypot(*(xy[1:] - xy[:-1]).T), 0.0)
    run = np.cumsum(step)
    run -= np.repeat(run[np.r_[0, np.flatnonzero(~same) + 1]], np.bincount(vpart, minlength=len(parts))[
        np.unique(vpart)])
    piece = np.floor(run / segment_m).astype(np.int64)
    # a segment = (part, piece); the last vertex of a piece also starts the next one
    key_change = np.r_[True, (vpart[1:] != vpart[:-1]) | (piece[1:] != piece[:-1])]
    out = []
    bounds = np.r_[np.flatnonzero(key_change), len(xy)]
    for a, b in zip(bounds[:-1], bounds[1:]):
        end = b + 1 if b < len(xy) and vpart[b] == vpart[a] else b
        if end - a >= 2:
            out.append((xy[a:end], int(ids[pid[vpart[a]]])))
    return out


def contact_misfit_segments(contacts, contact_ids, trace_geoms, *, segment_m, flag_m,
                            valid_fn=None):
    """Split mapped contacts into segments and measure each one's distance to a predicted trace.

    Parameters
    ----------
    contacts : array of shapely (Multi)LineStrings
    contact_ids : array of int
    trace_geoms : array of shapely lines
        The predicted outcrop trace.
    segment_m : float
        Length of the segments (the last one of a part may be shorter).
    flag_m : float
        A segment whose misfit exceeds this is flagged.
    valid_fn : callable ``(x, y) -> bool``, optional
        Where the comparison is possible (e.g. on valid DEM cells); segments with no valid
        point get a NaN misfit and no flag.

    Returns
    -------
    dict of arrays
        ``geoms`` (LineString segments), ``contact_id``, ``misfit_m`` (median distance of the
        segment's points, spaced ``segment_m / 10``, to the trace) and ``flagged``.
    """
    geoms, misfit, cid = [], [], []
    for pts, c in split_into_segments(contacts, contact_ids, segment_m=segment_m):
        d = distance_to_lines(pts, trace_geoms)
        if valid_fn is not None:
            d = np.where(np.asarray(valid_fn(pts[:, 0], pts[:, 1]), dtype=bool), d, np.nan)
        d = d[np.isfinite(d)]
        geoms.append(shapely.linestrings(pts))
        misfit.append(float(np.median(d)) if len(d) else np.nan)
        cid.append(c)
    misfit = np.array(misfit, dtype=float)
    flagged = np.where(np.isfinite(misfit), misfit > flag_m, False)
    return {"geoms": np.array(geoms, dtype=object), "contact_id": np.array(cid, dtype=np.int64),
            "misfit_m": misfit, "flagged": flagged}


#: Slope of the depth field below which a vertical misfit has no meaningful horizontal
#: equivalent (ground parallel to the surface): tan 1°.
MIN_DEPTH_SLOPE = float(np.tan(np.radians(1.0)))


def holdout_misfit_segments(contacts, contact_ids, check_fn, *, segment_m, z_flag,
                            flag_m=None):
    """Misfit of every stretch of mapped contact against a forecast that did not see it.

    Parameters
    ----------
    contacts : array of shapely (Multi)LineStrings
    contact_ids : array of int
    check_fn : callable ``(x, y) -> (residual_m, se_m, depth_slope)``
        At points on the contact: the vertical misfit ``ground − forecast surface`` (positive
        where the ground stands above the surface that was forecast without these picks), its
        standard error, and the slope ``|∇(ground − surface)|`` (m/m). NaN where no
        comparison is possible (off the DEM).
    segment_m : float
        Length of the segments.
    z_flag : float
        A segment is flagged when ``|median residual| > z_flag × median standard error``.
    flag_m : float, optional
        Instead, flag where the horizontal misfit exceeds this many metres.

    Returns
    -------
    dict of arrays
        ``geoms``, ``contact_id``, ``misfit_m`` (horizontal: median of
        ``|residual| / depth slope``, NaN where the ground runs parallel to the surface),
        ``misfit_z_m`` (median vertical misfit, signed), ``se_m``, ``z_score``, ``flag_m``
        (the horizontal misfit at which this segment would be flagged:
        ``z_flag × se / slope``) and ``flagged``.

    Notes
    -----
    At a point on the mapped contact the ground *is* the contact, so ``ground − surface`` is
    the forecast's error there; divided by the slope of ``ground − surface`` it is, to first
    order, the distance from the point to the forecast's outcrop trace (the zero line of
    depth below ground). The test is made on the vertical misfit, whose error is known (the
    stated pick error and the forecast's own standard error), so the horizontal threshold
    follows from the errors and the ground slope: wide where ground and surface run nearly
    parallel, narrow on steep ground.
    """
    geoms, cid, r_med, se_med, h_med, slope_med = [], [], [], [], [], []
    segs = split_into_segments(contacts, contact_ids, segment_m=segment_m)
    if segs:
        allpts = np.vstack([p for p, _ in segs])
        r, se, slope = (np.asarray(a, dtype=float) for a in check_fn(allpts[:, 0], allpts[:, 1]))
        k = 0
        for pts, c in segs:
            sl = slice(k, k + len(pts))
            k += len(pts)
            ok = np.isfinite(r[sl]) & np.isfinite(se[sl]) & np.isfinite(slope[sl])
            geoms.append(shapely.linestrings(pts))
            cid.append(c)
            if not ok.any():
                r_med.append(np.nan), se_med.append(np.nan), h_med.append(np.nan)
                slope_med.append(np.nan)
                continue
            rr, ss, gg = r[sl][ok], se[sl][ok], slope[sl][ok]
            r_med.append(float(np.median(rr)))
            se_med.append(float(np.median(ss)))
            slope_med.append(float(np.median(gg)))
            h = np.where(gg >= MIN_DEPTH_SLOPE, np.abs(rr) / np.maximum(gg, MIN_DEPTH_SLOPE), np.nan)
            h_med.append(float(np.median(h[np.isfinite(h)])) if np.isfinite(h).any() else np.nan)
    r_med, se_med, h_med, slope_med = (np.array(a, dtype=float) for a in (r_med, se_med, h_med, slope_med))
    with np.errstate(divide="ignore", invalid="ignore"):
        z = np.abs(r_med) / se_med
        fm = np.where(slope_med >= MIN_DEPTH_SLOPE, z_flag * se_med / slope_med, np.nan)
    if flag_m is None:
        flagged = np.where(np.isfinite(z), z > z_flag, False)
    else:
        flagged = np.where(np.isfinite(h_med), h_med > flag_m, False)
        fm = np.full(len(h_med), float(flag_m))
    return {"geoms": np.array(geoms, dtype=object), "contact_id": np.array(cid, dtype=np.int64),
            "misfit_m": h_med, "misfit_z_m": r_med, "se_m": se_med, "z_score": z, "flag_m": fm,
            "flagged": flagged}
