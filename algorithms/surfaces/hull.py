"""Where a point lies relative to the data: the distance to the nearest datum
(:func:`distance_to_data`), the convex hull of the data with the distance (and its gradient) of
outside points to it (:class:`_Hull`), and the smoothstep taper ``τ(d) = 1 − 3s² + 2s³``,
``s = clip(d / taper_m, 0, 1)``, that fades a model into its trend plane outside the hull
(:mod:`strikeline.surfaces.fitted`).
"""
from __future__ import annotations

import numpy as np
from scipy.spatial import ConvexHull, cKDTree
from scipy.spatial import QhullError

from strikeline.surfaces.kernel import _BLOCK_ELEMENTS


def _taper(d, taper_m):
    """Smoothstep weight 1 → 0 over ``0 <= d <= taper_m`` and its derivative in ``d``."""
    s = np.clip(np.asarray(d, float) / taper_m, 0.0, 1.0)
    tau = 1.0 - s * s * (3.0 - 2.0 * s)
    dtau = -6.0 * s * (1.0 - s) / taper_m
    return tau, dtau


def distance_to_data(x, y, data_xy):
    """Distance from points to the nearest of a set of data points (KD-tree).

    Parameters
    ----------
    x, y : array_like
        Query coordinates, metres (broadcast together).
    data_xy : array_like, shape ``(m, 2)``, or scipy.spatial.cKDTree
        Data positions (or a KD-tree built on them).

    Returns
    -------
    ndarray
        Distances in metres, shape of the broadcast ``x, y``.
    """
    x, y = np.broadcast_arrays(np.asarray(x, float), np.asarray(y, float))
    tree = data_xy if isinstance(data_xy, cKDTree) else cKDTree(np.asarray(data_xy, float))
    d, _ = tree.query(np.column_stack([x.ravel(), y.ravel()]), workers=-1)
    return d.reshape(x.shape)


class _Hull:
    """Convex hull of points with the distance (and its gradient) of outside points to it."""

    def __init__(self, xy):
        xy = np.unique(np.asarray(xy, float), axis=0)
        self.area = 0.0
        verts = None
        if len(xy) >= 3:
            try:
                h = ConvexHull(xy)
                verts = xy[h.vertices]  # counter-clockwise in 2-D
                self.area = float(h.volume)
            except QhullError:
                verts = None
        if verts is None:  # collinear or fewer than three distinct points: a segment or a point
            c = xy.mean(axis=0)
            if len(xy) > 1:
                _, _, vt = np.linalg.svd(xy - c)
                t = (xy - c) @ vt[0]
                verts = np.array([xy[np.argmin(t)], xy[np.argmax(t)]])
            else:
                verts = xy[:1]
        self.vertices = verts

    def distance(self, x, y, *, grad=False):
        x = np.asarray(x, float).ravel()
        y = np.asarray(y, float).ravel()
        a = self.vertices
        b = np.roll(a, -1, axis=0)
        e = b - a
        ee = np.maximum((e * e).sum(axis=1), 1e-300)
        d = np.zeros(len(x))
        gx = np.zeros(len(x)) if grad else None
        gy = np.zeros(len(x)) if grad else None
        rows = max(1, _BLOCK_ELEMENTS // max(len(a), 1))
        for s in range(0, len(x), rows):
            px, py = x[s:s + rows], y[s:s + rows]
            dx = px[:, None] - a[:, 0]
            dy = py[:, None] - a[:, 1]
            if len(a) >= 3:
                inside = np.all(e[:, 0] * dy - e[:, 1] * dx >= 0.0, axis=1)
            else:
                inside = np.zeros(len(px), dtype=bool)
            out = np.flatnonzero(~inside)
            if len(out) == 0:
                continue
            dx, dy = dx[out], dy[out]
            t = np.clip((dx * e[:, 0] + dy * e[:, 1]) / ee, 0.0, 1.0)
            rx = dx - t * e[:, 0]
            ry = dy - t * e[:, 1]
            d2 = rx * rx + ry * ry
            j = np.argmin(d2, axis=1)
            k = np.arange(len(out))
            dist = np.sqrt(d2[k, j])
            d[s + out] = dist
            if grad:
                safe = np.where(dist > 0, dist, 1.0)
                gx[s + out] = np.where(dist > 0, rx[k, j] / safe, 0.0)
                gy[s + out] = np.where(dist > 0, ry[k, j] / safe, 0.0)
        return (d, gx, gy) if grad else d
