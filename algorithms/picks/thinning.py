"""Spatial thinning of dense, clustered elevation picks before a surface is fitted.

Picks sampled along mapped contacts are dense along each line (one every DEM cell) and sparse
across the lines. Fitting a surface to all of them costs time and memory (a thin-plate spline is
``O(n³)``) and gives the densest stretches of line the most say. :func:`thin_picks` replaces the
picks in each square cell of a regular lattice by one representative, so that every occupied
cell counts once.

How it thins
------------
* The lattice is anchored at the smallest ``x`` and ``y`` of the picks; the cell of a pick is
  ``(floor((x - xmin) / cell_m), floor((y - ymin) / cell_m))``.
* With ``by_group=True`` (the default here) picks of different groups (contact segments) in
  one cell are kept apart: the key is ``(cell, group)``, so cross-validation folds by group
  never share a representative; but every group then keeps at least one representative and
  cells at group boundaries count twice, so a budget of ``max_points`` buys coarser cells.
  With ``by_group=False`` the key is the cell alone and a representative takes the group most
  of its picks belong to (ties: the smallest label); picks of another group sharing the cell
  then leak into that group's fold, which only happens in cells where segments meet.
* The representative is the **centroid** (mean ``x``, mean ``y``, mean ``z``) of the cell's
  picks. Where the surface is planar across a cell the centroid lies on it exactly (a mean of
  points of a plane is a point of the plane); the median of ``z`` paired with the mean position
  would not, on a sloping surface. The within-cell standard deviation of ``z`` and the number
  of picks are kept for diagnostics; every representative has the same weight in the fit.
* Cell size: given (``cell_m``), or, when there are more than ``max_points`` picks, the
  smallest size (found by bisection on a log scale, 40 steps) at which no more than
  ``max_points`` representatives remain. Fewer picks than ``max_points`` are not thinned.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from strikeline.errors import InputError

__all__ = ["ThinnedPicks", "thin_picks", "choose_cell_size"]

#: Bisection steps for the automatic cell size (a factor of 2 bracket shrinks to 2**(1/2**k)).
_BISECTION_STEPS = 40


@dataclass(frozen=True)
class ThinnedPicks:
    """Picks after spatial thinning.

    Attributes
    ----------
    xyz : ndarray, shape ``(m, 3)``
        Representatives (cell centroids), metres.
    groups : ndarray, shape ``(m,)`` or None
        The group label of each representative (same values as the input labels).
    counts : ndarray, shape ``(m,)``, int
        Number of input picks each representative stands for.
    z_std_m : ndarray, shape ``(m,)``
        Population standard deviation of ``z`` of the picks in each cell (0 for single picks).
    index : ndarray, shape ``(n,)``, int
        For every input pick, the row of its representative; ``-1`` for rows dropped because a
        coordinate was not finite.
    cell_m : float or None
        Cell size used; ``None`` when the picks were not thinned.
    """

    xyz: np.ndarray
    groups: np.ndarray | None
    counts: np.ndarray
    z_std_m: np.ndarray
    index: np.ndarray
    cell_m: float | None

    def __len__(self) -> int:
        return len(self.xyz)


def _check_xyz(xyz) -> np.ndarray:
    p = np.asarray(xyz, dtype=float)
    if p.ndim != 2 or p.shape[1] != 3:
        raise InputError(f"picks must be an (n, 3) array of x, y, z; got shape {p.shape}; "
                         "stack the coordinates with numpy.column_stack([x, y, z])")
    return p


def _group_codes(groups, n: int, name: str = "groups"):
    if groups is None:
        return None, None
    g = np.asarray(groups).reshape(-1)
    if len(g) != n:
        raise InputError(f"{name} must give one label per pick: got {len(g)} labels for {n} "
                         "picks; pass e.g. the contact segment id of every pick")
    labels, codes = np.unique(g, return_inverse=True)
    return labels, codes.astype(np.int64)


def _cell_keys(xy: np.ndarray, codes, cell_m: float) -> np.ndarray:
    ij = np.floor((xy - xy.min(axis=0)) / cell_m).astype(np.int64)
    nj = int(ij[:, 1].max()) + 1 if len(ij) else 1
    key = ij[:, 0] * nj + ij[:, 1]
    if codes is not None:
        key = key * (int(codes.max()) + 1) + codes
    return key


def _occupied(xy, codes, cell_m) -> int:
    return len(np.unique(_cell_keys(xy, codes, cell_m)))


def choose_cell_size(xy, *, max_points: int, groups=None) -> float:
    """Smallest lattice cell size that leaves no more than ``max_points`` occupied cells.

    Parameters
    ----------
    xy : array_like, shape ``(n, 2)``
        Map coordinates, metres (finite).
    max_points : int
        Largest number of representatives wanted (``>= 1``).
    groups : array_like, shape ``(n,)``, optional
        Group labels; cells are counted per group, as :func:`thin_picks` does.

    Returns
    -------
    float
        Cell size in metres. The count of occupied cells is not strictly monotone in the cell
        size (the lattice shifts against the points), so the search only ever returns a size
        whose count was checked to be ``<= max_points``.
    """
    xy = np.asarray(xy, dtype=float)
    _, codes = _group_codes(groups, len(xy))
    n_groups = 1 if codes is None else int(codes.max()) + 1
    if max_points < n_groups:
        raise InputError(f"max_points={max_points} is below the number of groups ({n_groups}); "
                         "every group keeps at least one representative, so raise max_points")
    extent = np.ptp(xy, axis=0) if len(xy) else np.zeros(2)
    span = float(max(extent.max(), 1e-9))
    area = float(max(extent[0] * extent[1], span * span / max(len(xy), 1)))
    hi = max(np.sqrt(area / max_points), span * 1e-6)
    while _occupied(xy, codes, hi) > max_points:
        hi *= 2.0
        if hi > 1e6 * span + 1.0:  # one cell holds everything: the guard above makes this fit
            break
    lo = hi / 2.0
    while _occupied(xy, codes, lo) <= max_points and lo > span * 1e-12:
        hi, lo = lo, lo / 2.0
    for _ in range(_BISECTION_STEPS):
        mid = np.sqrt(lo * hi)
        if _occupied(xy, codes, mid) <= max_points:
            hi = mid
        else:
            lo = mid
    return float(hi)


def thin_picks(xyz, *, max_points: int = 2000, cell_m: float | None = None,
               groups=None, by_group: bool = True) -> ThinnedPicks:
    """Thin picks to one representative (the centroid) per lattice cell and group.

    Parameters
    ----------
    xyz : array_like, shape ``(n, 3)``
        Picks ``x, y, z`` in metres. Rows with a non-finite value are dropped.
    max_points : int, default 2000
        When ``cell_m`` is not given and there are more picks than this, the cell size is the
        smallest that leaves at most ``max_points`` representatives (:func:`choose_cell_size`).
    cell_m : float, optional
        Fixed cell size in metres (thinning happens whatever the number of picks).
    groups : array_like, shape ``(n,)``, optional
        Group labels (e.g. contact segment ids).
    by_group : bool, default True
        Keep groups apart in shared cells (``True``), or merge them and label the
        representative with the majority group (``False``); see the module docstring.

    Returns
    -------
    ThinnedPicks

    Raises
    ------
    InputError
        Wrong shapes, ``cell_m <= 0``, ``max_points < 1``, or no finite pick.

    Notes
    -----
    See the module docstring for the lattice and the choice of the centroid. Cost is a few
    ``numpy.unique`` calls on ``n`` integer keys per bisection step: 100,000 picks thin in well
    under a second.

    Examples
    --------
    >>> import numpy as np
    >>> t = thin_picks([[0.1, 0.1, 10.0], [0.9, 0.2, 12.0], [5.5, 0.5, 20.0]], cell_m=1.0)
    >>> t.xyz.tolist(), t.counts.tolist()
    ([[0.5, 0.15000000000000002, 11.0], [5.5, 0.5, 20.0]], [2, 1])
    """
    p = _check_xyz(xyz)
    if int(max_points) < 1:
        raise InputError(f"max_points must be at least 1, got {max_points}")
    if cell_m is not None and not float(cell_m) > 0:
        raise InputError(f"cell_m must be a positive cell size in metres, got {cell_m}")
    labels, codes_all = _group_codes(groups, len(p))
    ok = np.all(np.isfinite(p), axis=1)
    if not np.any(ok):
        raise InputError(f"none of the {len(p)} picks has finite x, y and z; check the input "
                         "layers for empty or nodata elevations")
    q = p[ok]
    codes = None if codes_all is None else codes_all[ok]
    index = np.full(len(p), -1, dtype=np.int64)
    if cell_m is None and len(q) <= max_points:
        index[ok] = np.arange(len(q))
        return ThinnedPicks(q.copy(), None if labels is None else labels[codes],
                            np.ones(len(q), dtype=np.int64), np.zeros(len(q)), index, None)
    key_codes = codes if by_group else None
    if cell_m is None:
        cell_m = choose_cell_size(q[:, :2], max_points=int(max_points), groups=key_codes)
    key = _cell_keys(q[:, :2], key_codes, float(cell_m))
    _, inverse, counts = np.unique(key, return_inverse=True, return_counts=True)
    m = len(counts)
    sums = np.stack([np.bincount(inverse, weights=q[:, k], minlength=m) for k in range(3)], axis=1)
    centroid = sums / counts[:, None]
    dz = q[:, 2] - centroid[inverse, 2]
    z_std = np.sqrt(np.bincount(inverse, weights=dz * dz, minlength=m) / counts)
    rep_groups = None
    if codes is not None:
        # majority group of each cell: count (cell, group) pairs, keep the largest per cell
        pair, pair_count = np.unique(inverse * (int(codes.max()) + 1) + codes,
                                     return_counts=True)
        cell_of, code_of = np.divmod(pair, int(codes.max()) + 1)
        order = np.lexsort((code_of, -pair_count, cell_of))
        first = order[np.r_[True, np.diff(cell_of[order]) != 0]]
        rep_groups = labels[code_of[first]]
    index[ok] = inverse
    return ThinnedPicks(centroid, rep_groups, counts.astype(np.int64), z_std, index,
                        float(cell_m))
