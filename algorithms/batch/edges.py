"""Where two sheets meet: do their modelled surfaces, and so their structure contours, agree?

Two sheets that model the same contact and whose footprints touch share an edge (the common part
of their boundaries; where the footprints overlap, the boundary of the overlap). Both sheets'
surface grids are sampled along it, and two figures say how well they meet:

* the absolute elevation difference ``|za - zb|`` of the two surfaces (median and largest), and
* the horizontal offset of equal-elevation crossings: where the structure contour of elevation
  ``L`` of one sheet crosses the edge, against where the other sheet's contour of the same ``L``
  crosses it, measured along the edge (median and largest over the matched crossings). For two
  planes a constant ``dz`` apart this is ``dz`` over the slope of the surface along the edge.

The elevation difference is also split by where it is measured: within reach of both sheets' data
(each sheet's picks no farther than its model's reach, the rule that draws its structure
contours solid), where the two surfaces are interpretations of nearby data, and where
one sheet or both extrapolate (their contours dashed as forecasts), where two sheets that each fit
their own surface - a plane on one, a spline on the other - may disagree by much, the more the
farther from data; a large figure there says how uncertain the forecasts are, not that the edge
is wrong.

Arrays and shapely geometries in, numbers out; the grids come from the caller.
"""
from __future__ import annotations

import numpy as np
import shapely
from shapely.geometry import box

#: Samples per cell along an edge (of the finer of the two grids).
SAMPLES_PER_CELL = 2


def footprint(grid):
    """The rectangle a grid covers (its outer cell edges), as a shapely polygon."""
    return box(*grid.bounds)


def sample_grid(array: np.ndarray, grid, x, y) -> np.ndarray:
    """Bilinear interpolation between cell centres at points ``x, y``.

    Within half a cell outside the outer cell centres (up to the grid's own edge) the nearest two
    centres are extended linearly, so a grid is sampled along its own boundary; farther out, and
    where a neighbouring centre has no value, the result is NaN. Linear extension is exact for a
    plane and, for a curved surface, the first-order estimate of its value at the boundary.
    """
    a = np.asarray(array, dtype=float)
    return sample_cells(lambda r0, r1, c0, c1: a[r0:r1, c0:c1], grid, x, y)


def sample_cells(read, grid, x, y) -> np.ndarray:
    """:func:`sample_grid` with the grid's values fetched by ``read(r0, r1, c0, c1)`` (rows
    ``r0:r1`` and columns ``c0:c1`` as float64, NaN for nodata): one window around all the points,
    so a caller that reads a file passes points close together (e.g. a stretch of an edge) and
    never holds the whole grid. The values are those of :func:`sample_grid` on the whole array,
    bit for bit (the same four cells and the same arithmetic)."""
    x, y = np.asarray(x, dtype=float), np.asarray(y, dtype=float)
    rows, cols = grid.shape
    out = np.full(x.shape, np.nan)
    if rows < 2 or cols < 2 or not x.size:
        return out
    x0, dx, _, y0, _, dy = grid.transform
    fc = (x - x0) / dx - 0.5
    fr = (y - y0) / dy - 0.5
    eps = 1e-9
    ok = (fc >= -0.5 - eps) & (fc <= cols - 0.5 + eps) & (fr >= -0.5 - eps) & (fr <= rows - 0.5 + eps)
    if not ok.any():
        return out
    c0 = np.clip(np.floor(np.where(ok, fc, 0.0)), 0, cols - 2).astype(int)
    r0 = np.clip(np.floor(np.where(ok, fr, 0.0)), 0, rows - 2).astype(int)
    ra, ca = int(r0[ok].min()), int(c0[ok].min())
    a = read(ra, int(r0[ok].max()) + 2, ca, int(c0[ok].max()) + 2)
    tc, tr = fc - c0, fr - r0
    i, j = np.where(ok, r0 - ra, 0), np.where(ok, c0 - ca, 0)
    z = ((1 - tr) * (1 - tc) * a[i, j] + (1 - tr) * tc * a[i, j + 1]
         + tr * (1 - tc) * a[i + 1, j] + tr * tc * a[i + 1, j + 1])
    out[ok] = z[ok]
    return out


def shared_edge(fa, fb):
    """The line two footprints share (``None`` when they only touch at a point or not at all)."""
    inter = fa.intersection(fb)
    line = inter.boundary if inter.area > 0 else inter
    parts = [g for g in shapely.get_parts(shapely.line_merge(shapely.union_all(
        [g for g in shapely.get_parts(line) if g.geom_type in ("LineString", "LinearRing")] or [shapely.Point()])))
        if g.geom_type == "LineString" and g.length > 0]
    if not parts:
        return None
    return parts[0] if len(parts) == 1 else shapely.MultiLineString(parts)


def _crossings(s: np.ndarray, z: np.ndarray, interval: float) -> dict:
    """Where a sampled profile ``z(s)`` crosses each multiple of ``interval`` (linear between samples)."""
    found: dict = {}
    for i in range(len(s) - 1):
        z1, z2 = z[i], z[i + 1]
        if not (np.isfinite(z1) and np.isfinite(z2)) or z1 == z2:
            continue
        lo, hi = min(z1, z2), max(z1, z2)
        for k in range(int(np.ceil(lo / interval)), int(np.floor(hi / interval)) + 1):
            level = k * interval
            if level == z2 and i + 1 < len(s) - 1:
                continue  # counted on the next step, where it is the start
            t = (level - z1) / (z2 - z1)
            found.setdefault(k, []).append(s[i] + t * (s[i + 1] - s[i]))
    return found


def edge_mismatch(line, sample_a, sample_b, *, cell_m: float, interval_m: float, in_reach=None) -> dict:
    """The mismatch of two surfaces along ``line``.

    Parameters
    ----------
    line : shapely LineString or MultiLineString
        The shared edge.
    sample_a, sample_b : callable
        ``f(x, y) -> z`` of each sheet's surface (NaN where it has none).
    cell_m : float
        The finer grid's cell: the edge is sampled every ``cell_m / SAMPLES_PER_CELL``.
    interval_m : float
        Elevation step of the compared crossings (structure-contour interval).
    in_reach : callable, optional
        ``f(x, y) -> bool`` array: whether a point lies within reach of both sheets' data. Without
        it the split figures are None.

    Returns
    -------
    dict
        ``length_m``, ``n_samples``, ``median_dz_m``, ``max_dz_m``, ``n_levels``,
        ``median_offset_m``, ``max_offset_m``, and the split ``n_samples_in_reach``,
        ``median_dz_in_reach_m``, ``max_dz_in_reach_m``, ``max_dz_extrapolated_m`` (None where
        nothing was compared).
    """
    dz, offsets, levels, reach = [], [], 0, []
    step = cell_m / SAMPLES_PER_CELL
    for part in shapely.get_parts(line):
        n = max(int(np.ceil(part.length / step)), 1)
        s = np.linspace(0.0, part.length, n + 1)
        pts = shapely.line_interpolate_point(part, s)
        xy = shapely.get_coordinates(pts)
        za, zb = sample_a(xy[:, 0], xy[:, 1]), sample_b(xy[:, 0], xy[:, 1])
        both = np.isfinite(za) & np.isfinite(zb)
        dz.append(np.abs(za - zb)[both])
        if in_reach is not None:
            reach.append(np.asarray(in_reach(xy[:, 0], xy[:, 1]), dtype=bool)[both])
        ca = _crossings(s, np.where(both, za, np.nan), interval_m)
        cb = _crossings(s, np.where(both, zb, np.nan), interval_m)
        for k in sorted(set(ca) & set(cb)):
            levels += 1
            other = np.asarray(cb[k])
            offsets += [float(np.min(np.abs(other - sa))) for sa in ca[k]]
    dz = np.concatenate(dz) if dz else np.empty(0)
    offsets = np.asarray(offsets)
    split = {"n_samples_in_reach": None, "median_dz_in_reach_m": None, "max_dz_in_reach_m": None,
             "max_dz_extrapolated_m": None}
    if in_reach is not None:
        inside = np.concatenate(reach) if reach else np.zeros(0, dtype=bool)
        near, far = dz[inside], dz[~inside]
        split = {"n_samples_in_reach": int(near.size),
                 "median_dz_in_reach_m": float(np.median(near)) if near.size else None,
                 "max_dz_in_reach_m": float(np.max(near)) if near.size else None,
                 "max_dz_extrapolated_m": float(np.max(far)) if far.size else None}
    return {**split, "length_m": float(line.length), "n_samples": int(dz.size),
            "median_dz_m": float(np.median(dz)) if dz.size else None,
            "max_dz_m": float(np.max(dz)) if dz.size else None, "n_levels": levels,
            "median_offset_m": float(np.median(offsets)) if offsets.size else None,
            "max_offset_m": float(np.max(offsets)) if offsets.size else None}
