"""Hold-out groups for cross-validation on maps.

Picks along one contact are strongly correlated: a neighbour on the same line predicts a
held-out pick almost perfectly, whatever the model. So folds are made of whole groups (contact
segments), never single picks (:func:`make_folds`); without groups, square spatial blocks play
that part (:func:`spatial_block_groups`), and :func:`segment_groups` cuts contacts into stretches
by such blocks. The side of the blocks comes from the map: the typical distance from a map cell
to the nearest pick (:func:`typical_gap_m`) and the distance along the contacts over which the
picks' errors are shared (:func:`residual_correlation_m`), combined in :func:`holdout_block_m`.
"""
from __future__ import annotations

import numpy as np
import shapely
from scipy.spatial import Delaunay, QhullError, cKDTree

from strikeline.errors import InputError, UndeterminedError
from strikeline.stats.robust import robust_lstsq
from strikeline.stats.growth import _MEDIAN_CHI2_1


#: Smallest hold-out block, in grid cells.
MIN_BLOCK_CELLS = 3


def make_folds(groups, *, n_folds: int = 5, seed: int = 0) -> np.ndarray:
    """Assign whole groups to ``k`` folds of nearly equal numbers of picks.

    Parameters
    ----------
    groups : array_like, shape ``(n,)``
        A label per pick (contact segment id, block id ...). At least two distinct labels.
    n_folds : int, default 5
        Wanted number of folds; fewer when there are fewer labels (``k = min(n_folds,
        number of labels)``).
    seed : int, default 0
        Seed of ``numpy.random.default_rng`` that breaks ties between groups of equal size.

    Returns
    -------
    ndarray of int, shape ``(n,)``
        Fold index ``0 .. k-1`` of every pick. All picks of a group share one fold.

    Raises
    ------
    InputError
        Fewer than two distinct labels or ``n_folds < 2``.

    Notes
    -----
    Greedy balancing: groups in a seeded random order, then stably sorted by decreasing size,
    each go to the fold holding the fewest picks so far (ties: the lowest fold index).

    Examples
    --------
    >>> make_folds([1, 1, 1, 2, 2, 3], n_folds=2).tolist()
    [0, 0, 0, 1, 1, 1]
    """
    g = np.asarray(groups).reshape(-1)
    if int(n_folds) < 2:
        raise InputError(f"n_folds must be at least 2, got {n_folds}")
    labels, inverse, counts = np.unique(g, return_inverse=True, return_counts=True)
    if len(labels) < 2:
        raise InputError(f"cross-validation needs at least two groups of picks, got "
                         f"{len(labels)}; pass contact segment ids as groups or leave groups "
                         "unset to use spatial blocks")
    k = min(int(n_folds), len(labels))
    rng = np.random.default_rng(seed)
    order = rng.permutation(len(labels))
    order = order[np.argsort(-counts[order], kind="stable")]
    load = np.zeros(k, dtype=np.int64)
    fold_of_label = np.empty(len(labels), dtype=np.int64)
    for lab in order:
        f = int(np.argmin(load))
        fold_of_label[lab] = f
        load[f] += counts[lab]
    return fold_of_label[inverse]


def spatial_block_groups(x, y, *, n_blocks: int) -> np.ndarray:
    """Labels of square spatial blocks, for cross-validation when no groups are known.

    Parameters
    ----------
    x, y : array_like, shape ``(n,)``
        Map coordinates, metres.
    n_blocks : int
        Approximate number of blocks over the bounding box: the block side is
        ``sqrt(width * height / n_blocks)`` (the longer side when the box is a line).

    Returns
    -------
    ndarray of int, shape ``(n,)``
        Block label of every point (labels are compact, ``0 .. b-1``).

    References
    ----------
    Roberts, D. R., Bahn, V., Ciuti, S., Boyce, M. S., Elith, J., Guillera-Arroita, G.,
    Hauenstein, S., Lahoz-Monfort, J. J., Schröder, B., Thuiller, W., Warton, D. I., Wintle,
    B. A., Hartig, F. & Dormann, C. F. (2017). Cross-validation strategies for data with
    temporal, spatial, hierarchical, or phylogenetic structure. *Ecography*, 40(8), 913–929.
    https://doi.org/10.1111/ecog.02881
    """
    x = np.asarray(x, dtype=float).reshape(-1)
    y = np.asarray(y, dtype=float).reshape(-1)
    if int(n_blocks) < 1:
        raise InputError(f"n_blocks must be at least 1, got {n_blocks}")
    w, h = float(np.ptp(x)) if len(x) else 0.0, float(np.ptp(y)) if len(y) else 0.0
    side = np.sqrt(w * h / n_blocks) if w * h > 0 else max(w, h) / n_blocks
    if not side > 0:
        return np.zeros(len(x), dtype=np.int64)
    i = np.floor((x - x.min()) / side).astype(np.int64)
    j = np.floor((y - y.min()) / side).astype(np.int64)
    _, lab = np.unique(i * (int(j.max()) + 1) + j, return_inverse=True)
    return lab.astype(np.int64)


def segment_groups(x, y, contact_id, *, block_m: float) -> np.ndarray:
    """Split contacts into segments for grouped cross-validation.

    A segment is the part of one contact inside one square block of side ``block_m``; the
    label is unique per ``(contact_id, block)``. Use it when a sheet has few long contacts, so
    that folds hold out stretches of contact rather than whole contacts.

    Parameters
    ----------
    x, y : array_like, shape ``(n,)``
        Pick coordinates, metres.
    contact_id : array_like, shape ``(n,)``
        Contact (feature) id of every pick.
    block_m : float
        Block side, metres.

    Returns
    -------
    ndarray of int, shape ``(n,)``
    """
    x = np.asarray(x, dtype=float).reshape(-1)
    y = np.asarray(y, dtype=float).reshape(-1)
    cid = np.asarray(contact_id).reshape(-1)
    if not (len(x) == len(y) == len(cid)):
        raise InputError(f"x, y and contact_id differ in length ({len(x)}, {len(y)}, "
                         f"{len(cid)}); give one of each per pick")
    if not float(block_m) > 0:
        raise InputError(f"block_m must be a positive length in metres, got {block_m}")
    if len(x) == 0:
        return np.zeros(0, dtype=np.int64)
    i = np.floor((x - x.min()) / block_m).astype(np.int64)
    j = np.floor((y - y.min()) / block_m).astype(np.int64)
    _, c = np.unique(cid, return_inverse=True)
    key = (c * (int(i.max()) + 1) + i) * (int(j.max()) + 1) + j
    _, lab = np.unique(key, return_inverse=True)
    return lab.astype(np.int64)


def typical_gap_m(xy, *, n_samples: int = 10_000) -> float:
    """Typical distance from the mapped ground to the nearest pick.

    The median, over a square lattice of about ``n_samples`` points inside the convex hull of
    the picks, of the distance to the nearest pick: how far a map cell between the contacts
    usually lies from data. Cross-validation that holds out blocks of about this size asks
    each model the same question the map asks of it (Roberts et al. 2017, who size blocks
    from the range of spatial dependence for the same reason).

    Parameters
    ----------
    xy : array_like, shape ``(n, 2)``
        Pick positions, metres.
    n_samples : int, default 10000

    Returns
    -------
    float
        Metres. When the picks span no area (a single line) the median nearest-neighbour
        spacing of the picks; 0 for fewer than two distinct picks.

    Examples
    --------
    >>> import numpy as np
    >>> x = np.linspace(0, 1000, 201)
    >>> two_lines = np.r_[np.c_[x, np.zeros(201)], np.c_[x, np.full(201, 400.0)]]
    >>> 90 < typical_gap_m(two_lines) < 110   # cells lie 0-200 m from a line: median 100 m
    True
    """
    p = np.unique(np.asarray(xy, dtype=float).reshape(-1, 2), axis=0)
    p = p[np.all(np.isfinite(p), axis=1)]
    if len(p) < 2:
        return 0.0
    tree = cKDTree(p)
    try:
        tri = Delaunay(p)
    except QhullError:
        tri = None
    if tri is not None:
        lo, hi = p.min(axis=0), p.max(axis=0)
        side = float(np.sqrt(np.prod(hi - lo) / max(int(n_samples), 1)))
        if side > 0:
            gx = np.arange(lo[0] + side / 2, hi[0], side)
            gy = np.arange(lo[1] + side / 2, hi[1], side)
            q = np.stack(np.meshgrid(gx, gy), axis=-1).reshape(-1, 2)
            q = q[inside_triangulation(tri, q)]
            if len(q) >= 10:
                return float(np.median(tree.query(q)[0]))
    nn = tree.query(p, k=2)[0][:, 1]
    return float(np.median(nn))


#: Points farther than this fraction of the picks' diagonal from the edge of the triangulated
#: region are judged by the region alone (Delaunay.find_simplex widens its test by at most about
#: 1e-7 of a triangle's size).
_EDGE_MARGIN = 1e-6
#: Triangles whose reciprocal condition number (1-norm) is under this are flat: find_simplex
#: never reports them (scipy gives them no barycentric transform below machine epsilon), so
#: the points near them go to find_simplex itself.
_FLAT_RCOND = 1e-12


def inside_triangulation(tri, q) -> np.ndarray:
    """``tri.find_simplex(q) >= 0`` for a 2-D :class:`scipy.spatial.Delaunay` ``tri``: which
    points ``q`` (``(m, 2)``) lie in one of its triangles.

    The triangles that are not flat are merged into one region (``shapely.coverage_union_all``:
    they tile it without overlaps), and a point farther than ``_EDGE_MARGIN`` of the diagonal
    from the region's edge and from every flat triangle is inside exactly when the region
    contains it; only the (rare) others go to ``find_simplex``, whose tolerance this margin far
    exceeds. So the answer is ``find_simplex``'s, except for a point within rounding error of an
    edge between two triangles, where ``find_simplex``'s own answer depends on the rounding of
    the thinner triangle's transform (and this one says inside). ``find_simplex`` first
    computes the barycentric transform of every triangle (``Delaunay.transform``): seconds for
    the 20,000 long thin triangles of 10,000 picks along mapped lines, where the region takes a
    tenth of that. Where GEOS refuses the union (a topology conflict among nearly flat
    triangles, as on the demo sheet's picks), the answer is ``find_simplex``'s for every point.

    Examples
    --------
    >>> import numpy as np
    >>> from scipy.spatial import Delaunay
    >>> tri = Delaunay(np.array([[0.0, 0.0], [4.0, 0.0], [0.0, 4.0], [1.0, 1.0]]))
    >>> inside_triangulation(tri, np.array([[1.0, 2.0], [3.0, 3.0], [-0.5, 1.0]])).tolist()
    [True, False, False]
    """
    q = np.asarray(q, dtype=float).reshape(-1, 2)
    pts = tri.points
    corners = pts[tri.simplices]  # (n, 3, 2)
    # T = [[x0 - x2, x1 - x2], [y0 - y2, y1 - y2]]; 2 x 2 inverse in closed form
    a, b = corners[:, 0, 0] - corners[:, 2, 0], corners[:, 1, 0] - corners[:, 2, 0]
    c, d = corners[:, 0, 1] - corners[:, 2, 1], corners[:, 1, 1] - corners[:, 2, 1]
    with np.errstate(divide="ignore", invalid="ignore"):
        norm = np.maximum(np.abs(a) + np.abs(c), np.abs(b) + np.abs(d))
        norm_inv = np.maximum(np.abs(d) + np.abs(c), np.abs(b) + np.abs(a)) / np.abs(a * d - b * c)
        rcond = 1.0 / (norm * norm_inv)
    flat = ~(rcond >= _FLAT_RCOND)
    try:
        region = shapely.coverage_union_all(shapely.polygons(corners[~flat]))
    except shapely.errors.GEOSException:
        # The coverage union trusts its triangles to meet edge to edge; nearly flat ones that
        # pass the rcond test can still make GEOS see a conflict. The exact answer stays.
        return tri.find_simplex(q) >= 0
    shapely.prepare(region)
    inside = np.asarray(shapely.contains_xy(region, q[:, 0], q[:, 1]), dtype=bool)
    tol = _EDGE_MARGIN * float(np.hypot(*(pts.max(axis=0) - pts.min(axis=0))))
    near = shapely.dwithin(region.boundary, shapely.points(q), tol)
    if flat.any():
        rings = shapely.linestrings(corners[flat][:, [0, 1, 2, 0]])
        near |= shapely.dwithin(shapely.multilinestrings(rings), shapely.points(q), tol)
    if near.any():
        inside[near] = tri.find_simplex(q[near]) >= 0
    return inside


def residual_correlation_m(xyz, contact_id=None, *, trend=None, sigma_m=None,
                           max_lag_steps: int = 400) -> float:
    """Distance along the contacts over which the residuals of a plane stay correlated.

    Digitising errors are shared by neighbouring picks along a mapped line; a hold-out block
    shorter than their correlation lets a flexible model predict a held-out pick from its
    neighbours' errors and look better than it is. This takes the residuals of ``trend`` or
    else of a plane fitted robustly (:func:`strikeline.stats.robust.robust_lstsq`, so that a
    faulted block or a mistraced stretch does not tilt it; vertical residuals), walks each
    contact in pick order (picks as taken along the line) and estimates the semivariogram of the residuals along the line robustly,
    ``γ(h) = median((r_{i+h} − r_i)²) / (2 · 0.4549)``, against the robust variance
    ``median((r − median r)²) / 0.4549`` as sill (medians, so that a mistraced stretch or a
    fault — a few large, locally shared residuals — does not stretch the estimate). It
    returns the e-folding distance: the first lag at which ``γ(h) / sill`` exceeds
    ``1 − 1/e`` (linear interpolation between lags; lags in steps of the median pick
    spacing). On a surface that is not a plane the residuals also carry the unmodelled
    shape, and the length grows with it: a conservative estimate.

    Parameters
    ----------
    xyz : array_like, shape ``(n, 3)``
        Picks in the order they were taken along their contacts.
    contact_id : array_like, shape ``(n,)``, optional
        Contact of every pick (lags never cross contacts).
    trend : array_like, shape ``(n,)``, optional
        The surface's elevation at every pick from a smooth fit (e.g. a spline smoothed to the
        stated error), whose residuals are then used instead of a plane's: on a curved surface
        they are the picks' errors, not the unmodelled shape.
    sigma_m : float, optional
        The stated pick error: residuals whose robust RMS is under a quarter of it are too
        small for their correlation to matter, and the length is 0.
    max_lag_steps : int, default 400

    Returns
    -------
    float
        Metres (0 when it cannot be estimated: fewer than 20 picks).

    References
    ----------
    Cressie, N. (1993). *Statistics for Spatial Data*, revised ed. Wiley, New York, sect. 2.4
    (robust estimation of the variogram). https://doi.org/10.1002/9781119115151

    Examples
    --------
    >>> import numpy as np
    >>> rng = np.random.default_rng(0)
    >>> s = np.arange(0.0, 5000.0, 5.0)                      # picks every 5 m along a line
    >>> e = np.convolve(rng.normal(size=s.size + 40), np.ones(40) / 40, "valid")[:s.size]
    >>> xyz = np.column_stack([s, 0.3 * s, 0.1 * s + 10 * e])
    >>> 80 < residual_correlation_m(xyz) < 160                 # moving average over 200 m
    True
    """
    p = np.asarray(xyz, dtype=float)
    n = len(p)
    if n < 20:
        return 0.0
    cid = np.zeros(n) if contact_id is None else np.asarray(contact_id, dtype=float).reshape(-1)
    if trend is not None:
        r = p[:, 2] - np.asarray(trend, dtype=float).reshape(-1)
    else:
        A = np.column_stack([np.ones(n), p[:, 0] - p[:, 0].mean(), p[:, 1] - p[:, 1].mean()])
        try:
            coef = robust_lstsq(A, p[:, 2])[0]
        except UndeterminedError:  # picks along one straight line: an ordinary fit will do
            coef = np.linalg.lstsq(A, p[:, 2], rcond=None)[0]
        r = p[:, 2] - A @ coef
    if not np.all(np.isfinite(r)):
        return 0.0
    sill = float(np.median((r - np.median(r)) ** 2)) / _MEDIAN_CHI2_1
    if sigma_m is not None and sill < (0.25 * float(sigma_m)) ** 2:
        return 0.0
    step = np.hypot(*np.diff(p[:, :2], axis=0).T)
    same = cid[1:] == cid[:-1]
    if not sill > 0 or not same.any():
        return 0.0
    ds = float(np.median(step[same]))
    if not ds > 0:
        return 0.0
    target = 1.0 - np.exp(-1.0)
    prev_lag, prev_g = 0.0, 0.0
    for k in range(1, min(int(max_lag_steps), n - 1) + 1):
        ok = cid[k:] == cid[:-k]
        if ok.sum() < 10:
            break
        g = float(np.median((r[k:][ok] - r[:-k][ok]) ** 2)) / (2 * _MEDIAN_CHI2_1) / sill
        lag = k * ds
        if g > target:
            return float(prev_lag + (target - prev_g) / (g - prev_g) * (lag - prev_lag))
        prev_lag, prev_g = lag, g
    return float(prev_lag)


def holdout_block_m(xy, *, vertex_spacing_m: float = 0.0, cell_m: float = 0.0,
                    correlation_m: float = 0.0, gap_m: float | None = None) -> float:
    """Side of the square blocks that cut contacts into hold-out segments.

    ``max(typical_gap_m(xy), 2 × vertex_spacing_m, 2 × correlation_m, MIN_BLOCK_CELLS ×
    cell_m)``: about the typical distance from a map cell to the nearest pick, so a held-out
    pick lies about as far from the training data as a map cell lies from the picks; never
    shorter than two vertex spacings of the mapped lines nor than twice the correlation length
    of the picks' errors along the contacts (:func:`residual_correlation_m`) — otherwise a
    held-out pick is predicted by its own digitising neighbours, whose errors it shares — nor
    than a few grid cells.

    Parameters
    ----------
    xy : array_like, shape ``(n, 2)``
        Pick positions, metres.
    vertex_spacing_m : float, default 0
        Median spacing of the vertices of the mapped lines, metres.
    cell_m : float, default 0
        Grid cell size, metres.
    correlation_m : float, default 0
        Correlation length of the pick errors along the contacts, metres.
    gap_m : float, optional
        ``typical_gap_m(xy)`` when already computed for these picks (it triangulates them all).

    Returns
    -------
    float
        Metres (at least 1e-6).
    """
    gap = typical_gap_m(xy) if gap_m is None else float(gap_m)
    return float(max(gap, 2.0 * float(vertex_spacing_m), 2.0 * float(correlation_m),
                     MIN_BLOCK_CELLS * float(cell_m), 1e-6))
