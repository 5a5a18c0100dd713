"""Whether points lie beyond the reach of the data, most of them settled by a coarse lattice.

:meth:`strikeline.surfaces.SurfaceModel.is_extrapolated` flags a point whose nearest datum is
farther than the model's reach. Asked of millions of points (the densified vertices of the
structure contours and of the predicted trace of a large sheet), a KD-tree search per point is
most of the work. :class:`ReachLattice` answers most points from a lattice of square cells of
side ``h`` laid over the data's bounding box widened by the reach: with ``d(c)`` the distance
from a cell's centre to the nearest datum, every point ``p`` of the cell has
``|d(p) - d(c)| <= |p - c| <= h / sqrt(2)`` (the triangle inequality), so a cell with
``d(c) + h / sqrt(2) < reach`` holds only points within reach and a cell with
``d(c) - h / sqrt(2) > reach`` only points beyond it. The points of the other cells (a ring of
width about ``sqrt(2) h`` around the reach's boundary) and any non-finite point go to the
KD-tree search itself, so the flags are exactly those of the search for every point: the
margins of both tests are far larger than the round-off of the distances.

References
----------
Friedman, J. H., Bentley, J. L. & Finkel, R. A. (1977). An algorithm for finding best matches in
logarithmic expected time. *ACM Transactions on Mathematical Software*, 3(3), 209-226.
https://doi.org/10.1145/355744.355745 (the KD-tree search, scipy's ``cKDTree``).
"""
from __future__ import annotations

import threading

import numpy as np
from scipy.spatial import cKDTree

#: Lattice cells per reach: the uncertain ring is about ``sqrt(2) / CELLS_PER_REACH`` of the
#: reach wide (our choice).
CELLS_PER_REACH = 16
#: Most lattice cells (our choice: an int8 array of 256 KiB, one bounded search of its centres).
MAX_CELLS = 1 << 18

_BUILD = threading.Lock()  # one lattice per model even when blocks ask for it on several threads

WITHIN, BEYOND, ASK = 0, 1, 2


def beyond_reach(tree: cKDTree, reach: float, x, y) -> np.ndarray:
    """``True`` where the nearest point of ``tree`` is farther than ``reach`` (a finite
    ``reach``): the KD-tree search, bounded just beyond the reach (a point with no datum within
    the bound is beyond it without finding its nearest datum)."""
    x, y = np.broadcast_arrays(np.asarray(x, float), np.asarray(y, float))
    bound = reach * (1.0 + 1e-9) + 1e-9  # a datum at exactly reach is still found
    d, _ = tree.query(np.column_stack([x.ravel(), y.ravel()]), distance_upper_bound=bound, workers=-1)
    return (d > reach).reshape(x.shape)


class ReachLattice:
    """Flags of :func:`beyond_reach`, most of them from a coarse lattice (module docstring).

    Parameters
    ----------
    tree : scipy.spatial.cKDTree
        The data's positions (metres, ``(m, 2)``).
    reach : float
        Distance beyond which a point is flagged (metres, finite, positive).
    """

    def __init__(self, tree: cKDTree, reach: float):
        self.tree, self.reach = tree, float(reach)
        lo, hi = np.asarray(tree.mins, float), np.asarray(tree.maxes, float)
        span = hi - lo + 2.0 * self.reach
        h = max(self.reach / CELLS_PER_REACH, float(np.sqrt(span[0] * span[1] / MAX_CELLS)))
        # two spare cells each side: a point outside the lattice is more than reach + h from the
        # data's box, so beyond reach whatever the round-off
        self.origin = lo - self.reach - 2.0 * h
        self.h = h
        self.shape = tuple(int(v) for v in np.ceil((span + 4.0 * h) / h))
        # round-off allowance: far above the error of a distance between coordinates of this size
        scale = self.reach + float(np.max(np.abs(np.concatenate([lo, hi]))))
        margin = 1e-9 * scale + 1e-9 + 1e-6 * h
        r = 0.5 * np.sqrt(2.0) * h + margin  # farthest a point of a cell lies from its centre
        cx = self.origin[0] + (np.arange(self.shape[0]) + 0.5) * h
        cy = self.origin[1] + (np.arange(self.shape[1]) + 0.5) * h
        X, Y = np.meshgrid(cx, cy, indexing="ij")
        d, _ = tree.query(np.column_stack([X.ravel(), Y.ravel()]),
                          distance_upper_bound=self.reach + r + 2.0 * margin, workers=-1)
        d = d.reshape(self.shape)  # inf: no datum within the bound, so beyond reach + r + 2 margin
        state = np.full(self.shape, ASK, dtype=np.int8)
        state[d + r < self.reach - margin] = WITHIN
        state[d - r > self.reach + margin] = BEYOND
        self.state = state

    @classmethod
    def of(cls, cache: dict, tree: cKDTree, reach: float) -> "ReachLattice":
        """The lattice kept in ``cache`` (a model's own dict), made on first use."""
        lattice = cache.get("reach_lattice")
        if lattice is None:
            with _BUILD:
                lattice = cache.get("reach_lattice")
                if lattice is None:
                    lattice = cache["reach_lattice"] = cls(tree, reach)
        return lattice

    def __call__(self, x, y) -> np.ndarray:
        """``beyond_reach(tree, reach, x, y)``: the same flags, shape of the broadcast ``x, y``."""
        x, y = np.broadcast_arrays(np.asarray(x, float), np.asarray(y, float))
        xf, yf = x.ravel(), y.ravel()
        with np.errstate(invalid="ignore"):
            i = np.floor((xf - self.origin[0]) / self.h)
            j = np.floor((yf - self.origin[1]) / self.h)
        finite = np.isfinite(i) & np.isfinite(j)
        inside = finite & (i >= 0) & (i < self.shape[0]) & (j >= 0) & (j < self.shape[1])
        state = np.where(finite, BEYOND, ASK).astype(np.int8)
        state[inside] = self.state[i[inside].astype(np.intp), j[inside].astype(np.intp)]
        out = state == BEYOND
        ask = np.flatnonzero(state == ASK)
        if len(ask):
            out[ask] = beyond_reach(self.tree, self.reach, xf[ask], yf[ask])
        return out.reshape(x.shape)
