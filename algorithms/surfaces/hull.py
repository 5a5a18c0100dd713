"""Where a point lies relative to the data: the distance to the nearest datum
(:func:`distance_to_data`), the convex hull of the data with the distance (and its gradient) of
outside points to it (:class:`_Hull`), and the smoothstep taper ``τ(d) = 1 − 3s² + 2s³``,
``s = clip(d / taper_m, 0, 1)``, that fades a model into its trend plane outside the hull
(:mod:`strikeline.surfaces.fitted`).
"""
from __future__ import annotations

import numpy as np
from scipy.spatial import ConvexHull, Voronoi, cKDTree
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


def distance_grid(xs, ys, data_xy, *, tree: cKDTree | None = None) -> np.ndarray:
    """Distance from every cell centre ``(xs[j], ys[i])`` to the nearest of a set of data points.

    The same values as :func:`distance_to_data` on the mesh of ``xs`` and ``ys``, computed row
    by row from the lower envelope of the data instead of one KD-tree search per cell (which is
    slow far from data laid out along lines, where many data lie at nearly the same distance).

    Parameters
    ----------
    xs : array_like, shape ``(cols,)``
        x of the columns' cell centres, metres.
    ys : array_like, shape ``(rows,)``
        y of the rows' cell centres, metres.
    data_xy : array_like, shape ``(m, 2)``
        Data positions.
    tree : scipy.spatial.cKDTree, optional
        A KD-tree of ``data_xy``, used for a row whose envelope is degenerate (fewer than three
        distinct data, or all on one vertical line); built when needed.

    Returns
    -------
    ndarray, shape ``(rows, cols)``

    Notes
    -----
    On a row at height ``y`` the squared distance to datum ``p`` is
    ``(x − p_x)² + (y − p_y)² = x² + a_p x + b_p`` with ``a_p = −2 p_x`` and
    ``b_p = p_x² + (y − p_y)²`` (``x`` measured from a fixed reference, the data's mean x), so
    the nearest datum along the row is the lowest of the lines ``a_p x + b_p``: a vertex of the
    lower convex hull of the points ``(a_p, b_p)`` (point-line duality, de Berg et al. 2008,
    §8.2; the same envelope as Felzenszwalb & Huttenlocher's 2012 distance transform, here for
    data off the grid). Each cell takes the hull vertex whose interval between breakpoints
    holds it and both neighbouring vertices, and its distance is the least of the three
    computed as ``sqrt(dx·dx + dy·dy)``, the arithmetic of scipy's KD-tree, so a cell next to
    a breakpoint rounded the other way still gets its nearest datum. The result depends on a
    row's ``y`` and a column's ``x`` only, never on which other rows or columns are asked
    for: a window of a grid gives the values of the whole grid's call.

    References
    ----------
    de Berg, M., Cheong, O., van Kreveld, M. & Overmars, M. (2008). *Computational Geometry:
    Algorithms and Applications*, 3rd ed. Springer, Berlin, §8.2 (duality; from memory).

    Felzenszwalb, P. F. & Huttenlocher, D. P. (2012). Distance transforms of sampled functions.
    *Theory of Computing*, 8, 415–428. https://doi.org/10.4086/toc.2012.v008a019
    """
    return RowDistance(data_xy, tree=tree)(xs, ys)


class RowDistance:
    """:func:`distance_grid` with the data prepared once (the extent of their Voronoi cells), for
    many blocks of rows and columns; read-only after construction, so threads may share one.

    A row's envelope is built from the data whose Voronoi cell meets the row within the columns
    asked for (the others cannot be the nearest datum of any of those cells), so a grid asked for
    in narrow blocks costs about what it costs whole.
    """

    def __init__(self, data_xy, *, tree: cKDTree | None = None):
        self.xy = np.unique(np.asarray(data_xy, float).reshape(-1, 2), axis=0)  # a repeated datum: one distance
        self.tree = tree if tree is not None else cKDTree(self.xy)
        px = self.xy[:, 0]
        self.xref = float(np.mean(px)) if len(px) else 0.0
        self.a = -2.0 * (px - self.xref)
        self.a2 = (px - self.xref) ** 2
        (self.xlo, self.xhi), (self.ylo, self.yhi) = _voronoi_extent(self.xy)

    def __call__(self, xs, ys) -> np.ndarray:
        xs = np.asarray(xs, float).ravel()
        ys = np.asarray(ys, float).ravel()
        out = np.empty((len(ys), len(xs)))
        px, py, a, a2, ylo, yhi, tree = (self.xy[:, 0], self.xy[:, 1], self.a, self.a2, self.ylo, self.yhi,
                                         self.tree)
        xl = xs - self.xref
        cols = _Columns(xs, xl)
        if len(xs):
            # only data whose Voronoi cell reaches the columns asked for
            across = np.flatnonzero((self.xlo <= xs.max()) & (self.xhi >= xs.min()))
            if len(across) < len(px):
                px, py, a, a2, ylo, yhi = (v[across] for v in (px, py, a, a2, ylo, yhi))
        for s in range(0, len(ys), _ENVELOPE_ROWS):
            yb = ys[s:s + _ENVELOPE_ROWS]
            # the data whose Voronoi cell meets one of these rows: a superset of each row's
            # candidates (the others lie above its envelope and leave it unchanged)
            cu = np.flatnonzero((ylo <= yb.max()) & (yhi >= yb.min())) if len(yb) else np.empty(0, int)
            envelopes = _lower_envelopes(a[cu], a2[cu], py[cu], yb)
            for i, y in enumerate(yb, start=s):
                low, cb = envelopes[i - s]
                if low is None:
                    # only data whose Voronoi cell meets the row can be the nearest to one of its cells
                    c = np.flatnonzero((ylo <= y) & (yhi >= y))
                    if len(c) and len(c) * len(xs) <= (1 << 22):  # few candidates: every one of them
                        dx = xs[:, None] - px[c]
                        dy = y - py[c]
                        out[i] = np.sqrt((dx * dx + dy * dy).min(axis=1))
                        continue
                    out[i] = tree.query(np.column_stack([xs, np.full(len(xs), y)]))[0]
                    continue
                out[i] = _row_from_envelope(cols, y, cu[low], cb, a, px, py)
        return out


class _Columns:
    """The columns of a call of :class:`RowDistance`: their x (``xs``), x from the data's
    reference (``xl``), whether they increase, and the magnitudes the rounding allowance of
    :func:`_row_from_envelope` needs."""

    def __init__(self, xs, xl):
        self.xs, self.xl = xs, xl
        self.increasing = len(xl) >= 2 and bool(np.all(xl[1:] > xl[:-1]))
        self.xl_max = float(np.max(np.abs(xl))) if len(xl) else 0.0


def _row_from_envelope(cols: _Columns, y, low, cb, a, px, py) -> np.ndarray:
    """The distances along one row from its envelope's vertices ``low`` (data indices, by
    increasing ``a``) and their lines' intercepts ``cb``.

    A cell takes the vertex whose interval between breakpoints holds it, and the least of that
    vertex and its two neighbours where a breakpoint lies near (rounding may have put the cell
    on the wrong side); for columns in increasing order the vertex is constant over runs of
    columns between breakpoints, so it is spread over the runs instead of searched for each
    cell (:func:`_row_from_envelope_per_cell` gives the same values cell by cell).
    """
    xs, xl = cols.xs, cols.xl
    ca = a[low]
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        brk = -(cb[1:] - cb[:-1]) / (ca[1:] - ca[:-1])  # falling along the hull
    if not cols.increasing or not np.all(np.isfinite(brk)) or not np.all(brk[1:] <= brk[:-1]):
        return _row_from_envelope_per_cell(xs, xl, y, low, cb, a, px, py, brk)
    n, m = len(xl), len(low)
    # the vertex of column j is low[k] with k the number of breakpoints right of x_j (> x_j);
    # breakpoint i lies right of the first pos[i] columns, and pos falls as the breakpoints do
    pos = np.searchsorted(xl, brk, side="left")[::-1]
    lengths = np.diff(np.concatenate(([0], pos, [n])))
    dy = y - py[low]
    vx = np.repeat(px[low][::-1], lengths)
    vy2 = np.repeat((dy * dy)[::-1], lengths)
    d2 = np.subtract(xs, vx, out=vx)
    d2 *= d2
    d2 += vy2
    if m > 1:
        # columns where a neighbour of the run's vertex may be as near: within two columns of a
        # breakpoint, widened by how far rounding can move it (the lines' differences there are
        # |Δa| times the distance to the breakpoint, the values they are taken from at most
        # `scale`; a generous multiple of the double-precision epsilon bounds the error)
        scale = float(np.max(np.abs(cb))) + cols.xl_max * (cols.xl_max + float(np.max(np.abs(ca))))
        slack = _BREAK_SLACK * scale / np.abs(np.diff(ca))[::-1]
        b = brk[::-1]
        lo = np.maximum(np.searchsorted(xl, b - slack, side="left") - 2, 0)
        hi = np.minimum(np.searchsorted(xl, b + slack, side="right") + 2, n)
        idx = _union_of_ranges(lo, hi, n)
        if len(idx):
            k = m - 1 - np.searchsorted(pos, idx, side="right")
            d2[idx] = _nearest_of_three(xs[idx], y, k, low, px, py)
    return np.sqrt(d2, out=d2)


def _union_of_ranges(lo, hi, n) -> np.ndarray:
    """The sorted integers in any of the ranges ``lo[i] <= j < hi[i]`` (``0 <= j < n``).

    >>> _union_of_ranges(np.array([2, 3, 9]), np.array([5, 4, 11]), 12)
    array([ 2,  3,  4,  9, 10])
    """
    lengths = np.maximum(hi - lo, 0)
    total = int(lengths.sum())
    if total > n:  # wide ranges: mark the columns instead of listing them
        near = np.cumsum(np.bincount(lo, minlength=n + 1) - np.bincount(hi, minlength=n + 1))[:n] > 0
        return np.flatnonzero(near)
    starts = np.repeat(lo - np.concatenate(([0], np.cumsum(lengths)[:-1])), lengths)
    return np.unique(np.arange(total) + starts)


#: Relative rounding allowance of the envelope's breakpoints (a million times the float64
#: epsilon; our choice, far above the few epsilons the arithmetic can lose).
_BREAK_SLACK = 1e6 * np.finfo(float).eps


def _nearest_of_three(x, y, k, low, px, py) -> np.ndarray:
    """The least squared distance from ``(x, y)`` to the envelope's vertices ``k - 1, k, k + 1``."""
    best = None
    for step in (-1, 0, 1):
        j = low[np.clip(k + step, 0, len(low) - 1)]
        dx = x - px[j]
        dy = y - py[j]
        d2 = dx * dx + dy * dy
        best = d2 if best is None else np.minimum(best, d2)
    return best


def _row_from_envelope_per_cell(xs, xl, y, low, cb, a, px, py, brk) -> np.ndarray:
    """:func:`_row_from_envelope` cell by cell, for columns in any order."""
    k = np.searchsorted(-brk, -xl)  # the number of breakpoints right of x: the envelope's vertex
    return np.sqrt(_nearest_of_three(xs, y, k, low, px, py))


def _voronoi_extent(xy):
    """The least and greatest x, and the least and greatest y, of each datum's Voronoi cell (the
    region nearer to it than to any other datum): ``(xlo, xhi), (ylo, yhi)``, widened by a margin
    for qhull's rounding; ``-inf, inf`` for an unbounded cell or when there is no diagram. The diagram is computed about the data's centre (map
    coordinates of millions of metres cost qhull most of its precision), and the margin is ten
    times the worst amount by which a computed cell corner lies farther from its datum than from
    the nearest datum, plus a millimetre."""
    lo, hi = np.full(len(xy), -np.inf), np.full(len(xy), np.inf)
    xlo, xhi = lo.copy(), hi.copy()
    if len(xy) < 4:
        return (xlo, xhi), (lo, hi)
    centre = xy.mean(axis=0)
    p = xy - centre
    try:
        vor = Voronoi(p)
    except (QhullError, ValueError):
        return (xlo, xhi), (lo, hi)
    regions = [(i, vor.regions[r]) for i, r in enumerate(vor.point_region)]
    regions = [(i, r) for i, r in regions if r and -1 not in r]
    if not regions:
        return (xlo, xhi), (lo, hi)
    idx = np.array([i for i, _ in regions])
    corners = np.concatenate([r for _, r in regions])
    owner = np.repeat(idx, [len(r) for _, r in regions])
    v = vor.vertices[corners]
    nearest = cKDTree(p).query(v)[0]
    excess = float(np.max(np.hypot(v[:, 0] - p[owner, 0], v[:, 1] - p[owner, 1]) - nearest))
    pad = 10.0 * max(excess, 0.0) + 1e-9 * float(np.ptp(p, axis=0).max()) + 1e-3
    vx, vy = v[:, 0] + centre[0], v[:, 1] + centre[1]
    starts = np.concatenate([[0], np.cumsum([len(r) for _, r in regions])[:-1]])
    lo[idx] = np.minimum.reduceat(vy, starts) - pad
    hi[idx] = np.maximum.reduceat(vy, starts) + pad
    xlo[idx] = np.minimum.reduceat(vx, starts) - pad
    xhi[idx] = np.maximum.reduceat(vx, starts) + pad
    return (xlo, xhi), (lo, hi)


#: Rows whose envelopes are built together (:func:`_lower_envelopes`): numpy's work per step is
#: spread over this many rows, and the data of so many rows' Voronoi cells differ little (our choice).
_ENVELOPE_ROWS = 256


def _lower_envelopes(a, a2, py, ys):
    """For each row ``y`` of ``ys``: the lower convex hull of the points ``(a_p, b_p)`` with
    ``b_p = a2_p + (y − py_p)²``, as ``(indices, b of those vertices)`` from the least ``a`` to
    the greatest, or ``(None, None)`` when fewer than two vertices remain.

    Andrew's monotone chain (Andrew 1979) over the points sorted by ``a``, run for all rows at
    once: the ``a`` (and so the order) are the same on every row, only the ``b`` differ, so each
    step of the chain is a few array operations over the rows instead of a loop per row. A point
    that does not turn the chain counter-clockwise is dropped, so collinear points are not
    vertices; of points with one ``a`` only the lowest ``b`` is kept (the first such point in
    the data's order when they tie: both give one distance along the row).

    References
    ----------
    Andrew, A. M. (1979). Another efficient algorithm for convex hulls in two dimensions.
    *Information Processing Letters*, 9(5), 216–219. https://doi.org/10.1016/0020-0190(79)90072-3
    """
    rows = len(ys)
    if len(a) < 3:
        return [(None, None)] * rows
    order = np.argsort(a, kind="stable")
    A, starts = np.unique(a[order], return_index=True)
    B = a2[order][None, :] + (ys[:, None] - py[order][None, :]) ** 2
    pick = np.broadcast_to(order[starts], (rows, len(A))).copy()  # the datum of each distinct a, per row
    sizes = np.diff(np.append(starts, len(order)))
    Bu = B[:, starts].copy()
    for g in np.flatnonzero(sizes > 1):  # points sharing an a: the lowest b on each row
        s0, s1 = starts[g], starts[g] + sizes[g]
        k = np.argmin(B[:, s0:s1], axis=1)
        Bu[:, g] = B[np.arange(rows), s0 + k]
        pick[:, g] = order[s0 + k]
    m = len(A)
    hull = np.empty((rows, m), dtype=np.intp)
    top = np.zeros(rows, dtype=np.intp)
    all_rows = np.arange(rows)
    for i in range(m):
        ai, bi = A[i], Bu[:, i]
        act = all_rows if i >= 2 else all_rows[:0]
        while len(act):
            o = hull[act, top[act] - 2]
            p = hull[act, top[act] - 1]
            Ao, Bo = A[o], Bu[act, o]
            cross = (A[p] - Ao) * (bi[act] - Bo) - (Bu[act, p] - Bo) * (ai - Ao)
            act = act[cross <= 0]
            top[act] -= 1
            act = act[top[act] >= 2]
        hull[all_rows, top] = i
        top += 1
    out = []
    for r in range(rows):
        h = hull[r, :top[r]]
        out.append((pick[r, h], Bu[r, h]) if len(h) >= 2 else (None, None))
    return out


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
