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
