"""Predicted outcrop traces compared with mapped contacts (misfit QA)."""
from __future__ import annotations

import numpy as np
import shapely

__all__ = ["line_segments", "distance_to_lines", "trace_misfit"]


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
        ``{"median": m, "p90": m, "n_vertices": n}``; medians are ``None`` when there is no
        trace or no vertex.
    """
    d = distance_to_lines(xy, trace_geoms)
    d = d[np.isfinite(d)]
    if len(d) == 0:
        return {"median": None, "p90": None, "n_vertices": 0,
                "note": "no predicted trace within the DEM, or no contact vertex on it"}
    return {"median": float(np.median(d)), "p90": float(np.percentile(d, 90)), "n_vertices": int(len(d))}


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
    geoms = np.asarray(geoms, dtype=object)
    if geoms.size == 0:
        e = np.empty(0, dtype=object)
        return e, np.empty(0, dtype=bool), np.empty(0, dtype=np.int64)
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
    contacts = np.asarray(contacts, dtype=object)
    ids = np.asarray(contact_ids, dtype=np.int64)
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
    piece = np.minimum(np.floor(run / segment_m), np.inf).astype(np.int64)
    # a segment = (part, piece); the last vertex of a piece also starts the next one
    key_change = np.r_[True, (vpart[1:] != vpart[:-1]) | (piece[1:] != piece[:-1])]
    seg_id = np.cumsum(key_change) - 1
    d = distance_to_lines(xy, trace_geoms)
    if valid_fn is not None:
        d = np.where(np.asarray(valid_fn(xy[:, 0], xy[:, 1]), dtype=bool), d, np.nan)
    geoms, misfit, cid = [], [], []
    bounds = np.r_[np.flatnonzero(key_change), len(xy)]
    for a, b in zip(bounds[:-1], bounds[1:]):
        end = b + 1 if b < len(xy) and vpart[b] == vpart[a] else b
        if end - a < 2:
            continue
        geoms.append(shapely.linestrings(xy[a:end]))
        vals = d[a:end]
        vals = vals[np.isfinite(vals)]
        misfit.append(float(np.median(vals)) if len(vals) else np.nan)
        cid.append(ids[pid[vpart[a]]])
    misfit = np.array(misfit, dtype=float)
    flagged = np.where(np.isfinite(misfit), misfit > flag_m, False)
    del seg_id
    return {"geoms": np.array(geoms, dtype=object), "contact_id": np.array(cid, dtype=np.int64),
            "misfit_m": misfit, "flagged": flagged}
