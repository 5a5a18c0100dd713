"""Confidence of fitted planes: bootstrap of the picks, analytic covariance, data-error Monte Carlo.

Every attitude strikeline reports carries 95% half-widths of its dip and dip direction and the
95% cone of its pole. Three estimates are available and can be combined:

* :func:`bootstrap_plane` -- resampling the picks with replacement (how well the picks, as
  scattered as they are, pin the plane down);
* :func:`analytic_plane_covariance` / :func:`analytic_plane_confidence` -- the first-order
  covariance of the total-least-squares normal, a closed-form cross-check of the bootstrap;
* :func:`monte_carlo_plane` -- propagation of stated vertical errors of the picks (DEM
  accuracy; contour positional tolerance turned into a vertical error through the ground slope
  with :func:`contour_sigma_to_vertical`).

:func:`combine_confidence` adds independent estimates in quadrature and :func:`plane_confidence`
runs bootstrap and Monte Carlo together. All random draws come from
``numpy.random.default_rng(seed)``, so equal inputs and seeds give identical numbers.

Half-widths
-----------
A half-width ``h`` is the 95th percentile of the absolute deviation of the replicate values
from the estimate from all picks (for the dip direction the shortest angular difference, so the
0/360° wrap is handled); the interval is ``estimate ± h``. The pole cone is the 95th percentile
of the angle between replicate normals and the estimated normal. When the cone reaches the
vertical (``cone95_deg >= dip_deg``) the dip direction is undetermined within the confidence and
its half-width is 180°. Replicates are compared with the estimate in the sense of the estimated
normal, so a steep plane whose replicates pass beyond vertical gives a dip deviation that runs
on past 90° instead of folding back.

Nearly horizontal planes
------------------------
The dip of a nearly horizontal plane is the length of a small tilt whose direction the data may
not fix. :func:`dip_is_significant` calls the dip significant only when its 95% interval
``dip ± h`` stays above zero *and* the horizontal lies outside the 95% ellipse of the tilt
(the covariance of the replicates' tilts, kept in :attr:`PlaneConfidence.tilt_cov`); otherwise
the plane is horizontal within its confidence, and its dip direction and strike are undefined
(their half-widths mean nothing there, and a reported direction would be noise).

Data-error basis (for the defaults a caller states)
---------------------------------------------------
* DEM picks: the vertical standard error of the DEM is used directly (``sigma_z_m``). Producers
  state DEM accuracy as an RMSE or a 90% linear error; an RMSE is the standard deviation for
  unbiased errors, a 90% linear error is about 1.645 standard deviations (common practice).
* Contour picks: a contour line displaced horizontally by ``s`` on ground of slope ``σ`` changes
  the elevation read at a fixed point by ``s·tan σ``; so a horizontal (positional) standard error
  of the contour and contact lines becomes a vertical standard error ``s·tan σ``
  (:func:`contour_sigma_to_vertical`). The issue's basis for ``s`` is half the positional
  tolerance of the map; the U.S. National Map Accuracy Standards (U.S. Bureau of the Budget,
  1947) set the horizontal tolerance at 1/50 inch at publication scale (maps at 1:20,000 and
  smaller) and the vertical one at half the contour interval, both for 90% of tested points
  (from memory).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import sparse
from scipy.stats import chi2
from scipy.stats import t as student_t

from strikeline.errors import CancelledError, InputError, UndeterminedError
from strikeline.attitude.fitting import fit_plane
from strikeline.geometry.orientation import _components, azimuth_difference

__all__ = [
    "PlaneConfidence",
    "bootstrap_plane",
    "analytic_plane_covariance",
    "analytic_plane_confidence",
    "monte_carlo_plane",
    "combine_confidence",
    "plane_confidence",
    "contour_sigma_to_vertical",
    "vertical_sigma_of_picks",
    "dip_is_significant",
]

#: Two-sided 95% point of the standard normal distribution.
Z95 = 1.959963984540054
#: Confidence level of every reported half-width and cone.
LEVEL = 0.95
#: Number of array elements (resamples × picks) handled per chunk; bounds memory to a few
#: tens of MB whatever the pick count.
_CHUNK_ELEMENTS = 1 << 22
#: Fewest picks for which resampling the picks makes sense.
MIN_BOOTSTRAP_POINTS = 4
#: Fewest resamples or draws from which a 95th percentile is taken.
MIN_REPLICATES = 20
#: Fewest blocks for a block bootstrap; with fewer, single picks are resampled (our choice:
#: a resample of fewer blocks has too few distinct outcomes for a 95% percentile).
MIN_BOOTSTRAP_BLOCKS = 8

PICK_SOURCES = ("dem", "contours")


@dataclass(frozen=True)
class PlaneConfidence:
    """95% confidence of a plane's attitude.

    Attributes
    ----------
    dip_ci95_deg : float
        Half-width of the 95% interval of the dip (degrees): dip ± this.
    dip_direction_ci95_deg : float
        Half-width of the 95% interval of the dip direction (degrees, at most 180; 180 means
        the dip direction is undetermined, as for a nearly horizontal plane).
    cone95_deg : float
        Half-apex angle of the 95% confidence cone of the pole (degrees).
    n_resamples : int
        Bootstrap resamples, or Monte Carlo draws for ``method == "monte_carlo"``; 0 for
        ``"analytic"``; for a combination, the value of its first part.
    method : str
        ``"bootstrap"``, ``"analytic"``, ``"monte_carlo"`` or a ``"+"``-joined combination.
    dip_deg, dip_direction_deg : float
        The estimate (fit to all picks) the half-widths refer to.
    n_points : int
        Number of picks used.
    """

    dip_ci95_deg: float
    dip_direction_ci95_deg: float
    cone95_deg: float
    n_resamples: int
    method: str
    dip_deg: float
    dip_direction_deg: float
    n_points: int
    #: Covariance of the plane's tilt - the horizontal part of its unit normal,
    #: ``sin(dip) * (sin dd, cos dd)``, which is 0 for a horizontal plane - flattened
    #: ``(c_xx, c_xy, c_yx, c_yy)``; empty when unknown.
    tilt_cov: tuple = ()

    @property
    def horizontal_z2(self) -> float:
        """Squared Mahalanobis distance of the horizontal (tilt 0) from the fitted tilt under
        ``tilt_cov`` (NaN when unknown); see :func:`dip_is_significant`."""
        if len(self.tilt_cov) != 4:
            return float("nan")
        t = _tilt_of(self.dip_deg, self.dip_direction_deg)
        return float(_tilt_z2(t, np.asarray(self.tilt_cov, dtype=float).reshape(1, 2, 2))[0])

    @property
    def dip_significant(self) -> bool:
        """Whether the dip differs from zero at 95% (see :func:`dip_is_significant`)."""
        return bool(dip_is_significant(self.dip_deg, self.dip_ci95_deg, self.horizontal_z2))


#: 95% point of chi-square with 2 degrees of freedom (-2 ln 0.05): the 95% region of a 2-D tilt.
CHI2_2DOF_95 = float(chi2.ppf(LEVEL, 2))


def dip_is_significant(dip_deg, dip_ci95_deg, horizontal_z2=None):
    """Whether a fitted dip differs from zero at the 95% level.

    Parameters
    ----------
    dip_deg : float or array_like
        Fitted dip (degrees, 0-90).
    dip_ci95_deg : float or array_like
        95% half-width of the dip (degrees); NaN or ``None`` when no confidence is known.
    horizontal_z2 : float or array_like, optional
        Squared Mahalanobis distance of the horizontal (tilt 0) from the fitted tilt, under
        the covariance of the tilt (:attr:`PlaneConfidence.horizontal_z2`).

    Returns
    -------
    bool or ndarray of bool
        True where the 95% interval of the dip stays above zero (``dip - dip_ci95 > 0``) and
        the horizontal lies outside the 95% confidence ellipse of the tilt
        (``horizontal_z2 > 5.991``, the 95% point of chi-square with 2 degrees of freedom).
        False where the plane is horizontal within its confidence; its dip direction and strike
        are then undefined. Without a confidence (NaN), the dip is significant when it is above
        zero.

    Notes
    -----
    A fitted dip is the size of a 2-D tilt vector (the horizontal part of the plane's unit
    normal, ``sin(dip) * (sin dd, cos dd)``, bounded and 0 for a horizontal plane), so it is biased
    upward near zero: picks on a truly horizontal plane give a small positive dip in a random
    direction, and a 1-D interval of that length excludes zero too often (about 15% of the
    time at a nominal 5%, for an isotropic spread). Whether the tilt is zero is a 2-D question:
    the horizontal must lie outside the 95% ellipse of the tilt, whose covariance comes from the
    same bootstrap and Monte Carlo replicates as the half-widths (Hotelling's test of a mean
    vector, with the covariance taken as known: Johnson & Wichern 2007, ch. 5). An isotropic
    stand-in such as the pole's cone would call steep but poorly oriented planes horizontal.

    References
    ----------
    Johnson, R. A. & Wichern, D. W. (2007). *Applied Multivariate Statistical Analysis*, 6th ed.
    Pearson Prentice Hall, Upper Saddle River (inference about a mean vector; from memory).

    Examples
    --------
    >>> bool(dip_is_significant(0.4, 0.6, 9.0)), bool(dip_is_significant(5.0, 0.6, 3.0))
    (False, False)
    >>> bool(dip_is_significant(5.0, 0.6, 70.0))
    True
    """
    dip = np.asarray(dip_deg, dtype=float)
    h = np.asarray(np.nan if dip_ci95_deg is None else dip_ci95_deg, dtype=float)
    z2 = np.asarray(np.nan if horizontal_z2 is None else horizontal_z2, dtype=float)
    h = np.where(np.isfinite(h), h, 0.0)
    out = (dip - h > 0) & ~(z2 <= CHI2_2DOF_95)
    return out if out.ndim else bool(out)


def _tilt_of(dip_deg, dip_direction_deg):
    """Tilt vectors (W, 2): ``sin(dip) * (sin dd, cos dd)``, the horizontal part of the upward
    unit normal."""
    d = np.radians(np.atleast_1d(np.asarray(dip_deg, dtype=float)))
    a = np.radians(np.atleast_1d(np.asarray(dip_direction_deg, dtype=float)))
    return np.sin(d)[:, None] * np.stack([np.sin(a), np.cos(a)], axis=-1)


def _tilt_of_normals(n):
    """Tilt vectors ``(nx, ny)`` of unit normals (..., 3): bounded, unlike the gradient
    ``(nx, ny) / nz``, whose replicates near the vertical would swamp a covariance."""
    return n[..., :2]


def _replicate_tilt_cov(normal_hat, normals):
    """Covariance (W, 2, 2) of the replicate tilts about the estimate's tilt (mean square
    deviation, like the percentile half-widths about the estimate)."""
    dots = np.sum(normals * normal_hat[None], axis=-1)
    normals = np.where(dots[..., None] < 0, -normals, normals)
    dev = _tilt_of_normals(normals) - _tilt_of_normals(normal_hat)[None]
    dev = np.where(np.isfinite(dev), dev, 0.0)
    return np.einsum("bwi,bwj->wij", dev, dev) / max(len(normals), 1)


def _tilt_cov_from_normal_cov(normal, cov):
    """Covariance (W, 2, 2) of the tilt ``(nx, ny)`` from that of the normal (its x, y block)."""
    return np.asarray(cov, dtype=float)[..., :2, :2]


def _tilt_z2(tilt, cov):
    """Squared Mahalanobis distance (W,) of tilt 0 from ``tilt`` (W, 2) under ``cov`` (W, 2, 2);
    inf where the covariance is singular and the tilt is not 0 along its null direction."""
    cov = np.asarray(cov, dtype=float)
    tilt = np.asarray(tilt, dtype=float)
    w, v = np.linalg.eigh(cov)
    proj = np.einsum("wij,wi->wj", v, tilt)
    tiny = 1e-30 + 1e-12 * np.max(np.abs(w), axis=-1, keepdims=True)
    with np.errstate(divide="ignore", invalid="ignore"):
        terms = np.where(w > tiny, proj ** 2 / np.where(w > tiny, w, 1.0),
                         np.where(np.abs(proj) > 0, np.inf, 0.0))
    return np.sum(terms, axis=-1)


# --------------------------------------------------------------------------------------------
# Batched machinery shared with strikeline.attitude.local: W windows, each a contiguous run of "slots"
# in a flat (T, 3) array of coordinates centred on the window's own centroid.
# --------------------------------------------------------------------------------------------

def _check_callbacks(progress, is_cancelled, fraction):
    if is_cancelled is not None and is_cancelled():
        raise CancelledError("cancelled by the caller while estimating plane confidence")
    if progress is not None:
        progress(float(fraction))


def _window_matrix(values, window_of_slot, n_windows):
    """Per-slot vectors arranged for per-window sums.

    One window: the dense ``values`` (T, k). Several: a sparse (W*k, T) matrix whose row
    ``w*k + j`` holds component ``j`` of the slots of window ``w``.
    """
    t, k = values.shape
    if n_windows == 1:
        return values
    cols = np.repeat(np.arange(t), k)
    rows = (window_of_slot[:, None] * k + np.arange(k)[None, :]).ravel()
    return sparse.csr_matrix((values.ravel(), (rows, cols)), shape=(n_windows * k, t))


def _per_window_sums(weights, matrix, n_windows, k):
    """``sum over slots of window w of weights[b, slot] * values[slot]`` -> (b, W, k)."""
    if sparse.issparse(matrix):
        out = (matrix @ weights.T).T
    else:
        out = weights @ matrix
    return np.asarray(out).reshape(weights.shape[0], n_windows, k)


def _smallest_eigvec(scatter):
    _, v = np.linalg.eigh(scatter)
    return v[..., :, 0]


def _bootstrap_normals(q, counts, n_resamples, rng, progress=None, is_cancelled=None):
    """Normals of ``n_resamples`` bootstrap resamples of each window -> (B, W, 3).

    Each resample of a window draws ``n_w`` of its slots with replacement: the block bootstrap
    of :func:`_window_block_normals` with every slot a block of its own. The draws are turned
    into a counts matrix C (B, T); the resampled first and second moments are then matrix
    products of C with the per-slot vectors ``[1, q, q⊗q]``, and the resampled scatter matrices
    ``S2 − S1 S1ᵀ / n_w`` are decomposed by one stacked ``eigh``.
    """
    return _window_block_normals(q, counts, None, n_resamples, rng, progress, is_cancelled)[0]


def _monte_carlo_normals(q, counts, scatter, sigma_slot, n_draws, rng, progress=None,
                         is_cancelled=None):
    """Normals of each window after ``n_draws`` random vertical perturbations -> (B, W, 3).

    Perturbing pick elevations by ``e`` changes the centred scatter matrix exactly to
    ``S + a ẑᵀ + ẑ aᵀ + s ẑ ẑᵀ`` with ``a = Σ e_i q_i`` and ``s = Σ e_i² − (Σ e_i)²/n``
    (``q`` centred, so ``Σ q_i = 0``), which needs only matrix products with ``e``.
    """
    counts = np.asarray(counts, dtype=np.int64)
    n_windows = len(counts)
    t = len(q)
    window_of_slot = np.repeat(np.arange(n_windows), counts)
    lin = _window_matrix(np.concatenate([q, np.ones((t, 1))], axis=1), window_of_slot, n_windows)
    ones = _window_matrix(np.ones((t, 1)), window_of_slot, n_windows)
    zhat = np.array([0.0, 0.0, 1.0])
    zz = np.outer(zhat, zhat)
    out = np.empty((n_draws, n_windows, 3))
    chunk = max(1, _CHUNK_ELEMENTS // max(t, 1))
    for b0 in range(0, n_draws, chunk):
        _check_callbacks(progress, is_cancelled, b0 / n_draws)
        b = min(chunk, n_draws - b0)
        e = rng.standard_normal((b, t)) * sigma_slot
        m = _per_window_sums(e, lin, n_windows, 4)
        a = m[..., :3]
        se = m[..., 3]
        se2 = _per_window_sums(e * e, ones, n_windows, 1)[..., 0]
        s = se2 - se * se / counts[None, :]
        pert = (scatter[None]
                + a[..., :, None] * zhat[None, None, None, :]
                + zhat[None, None, :, None] * a[..., None, :]
                + s[..., None, None] * zz)
        out[b0:b0 + b] = _smallest_eigvec(pert)
    _check_callbacks(progress, is_cancelled, 1.0)
    return out


def _dip_and_direction(n):
    """Dip (may exceed 90° for a normal pointing down) and dip direction, degrees."""
    nx, ny, nz = _components(n)
    horiz = np.hypot(nx, ny)
    dip = np.degrees(np.arctan2(horiz, nz))
    dd = np.mod(np.degrees(np.arctan2(nx, ny)), 360.0)
    return dip, dd


def _replicate_half_widths(normal_hat, normals):
    """95% half-widths (dip, dip direction, cone) of replicate normals (B, W, 3) about
    the upward estimates ``normal_hat`` (W, 3)."""
    dots = np.sum(normals * normal_hat[None], axis=-1)
    normals = np.where(dots[..., None] < 0, -normals, normals)
    dots = np.abs(dots)
    dip_hat, dd_hat = _dip_and_direction(normal_hat)
    dip_b, dd_b = _dip_and_direction(normals)
    cross = np.linalg.norm(np.cross(normals, normal_hat[None]), axis=-1)
    angle = np.degrees(np.arctan2(cross, dots))
    dip_ci = np.quantile(np.abs(dip_b - dip_hat[None]), LEVEL, axis=0)
    dd_ci = np.quantile(np.abs(azimuth_difference(dd_b, dd_hat[None])), LEVEL, axis=0)
    cone = np.quantile(angle, LEVEL, axis=0)
    dd_ci = np.where(cone >= dip_hat, 180.0, np.minimum(dd_ci, 180.0))
    return dip_ci, dd_ci, cone


def _analytic_covariance_from_eigen(w, v, n_points, sigma2):
    """First-order covariance of the TLS normal for stacks of eigen-decompositions.

    ``w`` (W, 3) ascending eigenvalues, ``v`` (W, 3, 3) eigenvectors as columns,
    ``sigma2`` (W,) variance of the picks perpendicular to the plane.
    """
    lam3 = w[:, 0]
    cov = np.zeros(v.shape)
    with np.errstate(divide="ignore", invalid="ignore"):
        for k in (1, 2):
            gap = w[:, k] - lam3
            factor = sigma2 * w[:, k] / (gap * gap)
            vk = v[:, :, k]
            cov += factor[:, None, None] * vk[:, :, None] * vk[:, None, :]
    return cov


def _confidence_from_covariance(normal, cov):
    """95% half-widths (dip, dip direction, cone) from normal covariance stacks (W, 3, 3)."""
    nx, ny, nz = _components(normal)
    h2 = nx * nx + ny * ny
    h = np.sqrt(h2)
    with np.errstate(divide="ignore", invalid="ignore"):
        g_dip = np.stack([nz * nx / h, nz * ny / h, -h], axis=-1)
        g_dd = np.stack([ny / h2, -nx / h2, np.zeros_like(nx)], axis=-1)
        var_dip = np.sum(g_dip[:, :, None] * cov * g_dip[:, None, :], axis=(1, 2))
        var_dd = np.sum(g_dd[:, :, None] * cov * g_dd[:, None, :], axis=(1, 2))
        # A horizontal normal has no dip gradient direction; its dip variance is the
        # variance of the normal's tilt in any direction: take the larger one.
        ev = np.linalg.eigvalsh(cov)
        var_dip = np.where(h < 1e-12, ev[:, 2], var_dip)
        dip_ci = np.degrees(Z95 * np.sqrt(np.clip(var_dip, 0.0, None)))
        dd_ci = np.degrees(Z95 * np.sqrt(np.clip(var_dd, 0.0, None)))
        # 95% point of |δn|² = a Z1² + b Z2² by Satterthwaite's two-moment chi-square match
        # (exact for a = b and for b = 0).
        a = np.clip(ev[:, 2], 0.0, None)
        b = np.clip(ev[:, 1], 0.0, None)
        tot = a + b
        sq = a * a + b * b
        scale = np.where(tot > 0, sq / tot, 0.0)
        dof = np.where(sq > 0, tot * tot / sq, 2.0)
        r = np.sqrt(scale * chi2.ppf(LEVEL, dof))
        cone = np.degrees(np.arctan(r))
    dip_hat = np.degrees(np.arctan2(h, nz))
    dd_ci = np.where((cone >= dip_hat) | ~np.isfinite(dd_ci), 180.0, np.minimum(dd_ci, 180.0))
    return dip_ci, dd_ci, cone


# --------------------------------------------------------------------------------------------
# Public functions
# --------------------------------------------------------------------------------------------

def _finite_points(points):
    p = np.asarray(points, dtype=float)
    if p.ndim != 2 or p.shape[1] != 3:
        raise InputError(f"picks must be an (n, 3) array of x, y, z; got shape {p.shape}")
    keep = np.all(np.isfinite(p), axis=1)
    return p, keep


def _check_count(name, value, minimum):
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < minimum:
        raise InputError(f"{name} must be an integer of at least {minimum}, got {value!r}")
    return int(value)


def _check_seed(seed):
    if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or seed < 0:
        raise InputError(
            f"seed must be a non-negative integer (results are reproducible), got {seed!r}"
        )
    return int(seed)


def bootstrap_plane(points, *, n_resamples=1000, seed=0, groups=None, progress=None,
                    is_cancelled=None) -> PlaneConfidence:
    """95% confidence of the best-fit plane by bootstrap resampling of the picks (or of blocks).

    Parameters
    ----------
    points : array_like, shape ``(n, 3)``
        Picks ``(x, y, z)`` in metres; rows with NaN are ignored; at least 4 picks.
    n_resamples : int, optional
        Number of bootstrap resamples (at least 20), default 1000.
    seed : int, optional
        Seed of ``numpy.random.default_rng``; equal seeds give identical results.
    groups : array_like of int, shape ``(n,)``, optional
        Block label of every pick (e.g. contact segments). With at least
        ``MIN_BOOTSTRAP_BLOCKS`` blocks, whole blocks are resampled (a block bootstrap) instead
        of single picks; with fewer, single picks are resampled.
    progress : callable, optional
        ``progress(fraction)`` called between chunks of resamples.
    is_cancelled : callable, optional
        ``is_cancelled()``; when it returns true the computation stops with
        :class:`~strikeline.errors.CancelledError`.

    Returns
    -------
    PlaneConfidence
        With ``method == "bootstrap"`` (single picks) or ``"block_bootstrap"``.

    Raises
    ------
    UndeterminedError
        Fewer than four picks, or picks on one straight line (see
        :func:`strikeline.attitude.fitting.fit_plane`).

    Notes
    -----
    Nonparametric bootstrap (Efron & Tibshirani 1993): each resample draws ``n`` picks with
    replacement and refits the total-least-squares plane. The resamples are never built as
    point sets: the draws become a counts matrix ``C`` (resamples × picks), the resampled
    moments are ``C @ [q, q⊗q]`` for the centred picks ``q``, and the normals of all resampled
    scatter matrices come from one stacked ``numpy.linalg.eigh``. The half-widths are
    percentile half-widths about the full-data estimate (see the module notes). Below about
    ten picks the bootstrap understates the spread; prefer the shape diagnostics then.

    Picks along a mapped contact are not independent: a digitising or DEM error runs along the
    line for tens to hundreds of metres, so resampling single picks treats one error as many
    and gives intervals that are too narrow. With ``groups``, each resample draws as many blocks
    as there are, with replacement, and takes every pick of a drawn block (the block bootstrap
    for dependent data, Künsch 1989; Lahiri 2003); the counts matrix is then built per block
    and spread to its picks, and the moments are weighted by each resample's own pick count.
    With ``G`` blocks the percentile half-widths are widened by
    :math:`\\sqrt{G/(G-1)}\\, t_{0.975,\\,G-1} / z_{0.975}` (1.29 for 8 blocks, 1.08 for 24):
    a bootstrap of few independent blocks understates the spread, and Hesterberg's (2015)
    expanded percentile interval corrects both the plug-in variance and the normal quantile.

    References
    ----------
    Efron, B. & Tibshirani, R. J. (1993). *An Introduction to the Bootstrap*. Chapman & Hall,
    New York. https://doi.org/10.1007/978-1-4899-4541-9

    Künsch, H. R. (1989). The jackknife and the bootstrap for general stationary observations.
    *The Annals of Statistics*, 17(3), 1217–1241. https://doi.org/10.1214/aos/1176347265

    Lahiri, S. N. (2003). *Resampling Methods for Dependent Data*. Springer, New York.

    Hesterberg, T. C. (2015). What teachers should know about the bootstrap: resampling in the
    undergraduate statistics curriculum. *The American Statistician*, 69(4), 371–386.
    https://doi.org/10.1080/00031305.2015.1089789 (expanded percentile interval; from memory)

    Fernández, O. (2005). Obtaining a best fitting plane through 3D georeferenced data.
    *Journal of Structural Geology*, 27(5), 855–858. https://doi.org/10.1016/j.jsg.2004.12.004

    Examples
    --------
    >>> import numpy as np
    >>> rng = np.random.default_rng(1)
    >>> xy = rng.uniform(0, 1000, (200, 2))
    >>> z = -np.tan(np.radians(30)) * xy[:, 0] + rng.normal(0, 2, 200)
    >>> ci = bootstrap_plane(np.column_stack([xy, z]), n_resamples=200)
    >>> ci.dip_ci95_deg < 1.0
    True
    """
    n_resamples = _check_count("n_resamples", n_resamples, MIN_REPLICATES)
    seed = _check_seed(seed)
    p, keep = _finite_points(points)
    p = p[keep]
    fit = fit_plane(p)
    if fit.n_points < MIN_BOOTSTRAP_POINTS:
        raise UndeterminedError(
            f"only {fit.n_points} picks: a bootstrap confidence needs at least "
            f"{MIN_BOOTSTRAP_POINTS}; use monte_carlo_plane with the picks' stated errors instead"
        )
    q = p - fit.centroid
    rng = np.random.default_rng(seed)
    method = "bootstrap"
    block = None
    if groups is not None:
        g = np.asarray(groups).reshape(-1)
        if len(g) != len(keep):
            raise InputError(f"groups has {len(g)} labels for {len(keep)} picks; give one label per pick")
        _, block = np.unique(g[keep], return_inverse=True)
        if block.max() + 1 < MIN_BOOTSTRAP_BLOCKS:
            block = None
    if block is None:
        normals = _bootstrap_normals(q, [len(q)], n_resamples, rng, progress, is_cancelled)
        dip_ci, dd_ci, cone = _replicate_half_widths(fit.normal[None], normals)
        factor = 1.0
    else:
        method = "block_bootstrap"
        normals = _block_bootstrap_normals(q, block, n_resamples, rng, progress, is_cancelled)
        dip_ci, dd_ci, cone = _expand_for_few_blocks(*_replicate_half_widths(fit.normal[None], normals),
                                                     block.max() + 1)
        factor = float(_few_blocks_factor(block.max() + 1))
    tilt_cov = _replicate_tilt_cov(fit.normal[None], normals)[0] * factor ** 2
    return PlaneConfidence(float(dip_ci[0]), float(dd_ci[0]), float(cone[0]), n_resamples,
                           method, fit.dip_deg, fit.dip_direction_deg, fit.n_points,
                           tuple(float(c) for c in tilt_cov.ravel()))


def _block_bootstrap_normals(q, block, n_resamples, rng, progress=None, is_cancelled=None):
    """Normals of block-bootstrap resamples of one pick set -> (B, 1, 3) (see
    :func:`_window_block_normals`)."""
    return _window_block_normals(q, [len(q)], block, n_resamples, rng, progress, is_cancelled)[0]


def _window_block_normals(q, counts, unit_of_slot, n_resamples, rng, progress=None, is_cancelled=None):
    """Normals of block-bootstrap resamples of each window -> ((B, W, 3), blocks per window (W,)).

    ``q`` (T, 3) holds the slots of W windows (``counts`` slots each, contiguous), centred on
    their window's centroid; ``unit_of_slot`` (T,) labels the block of every slot (``None``:
    every slot is a block of its own). Blocks are
    numbered per window (labels of different windows are kept apart even when equal). Per block
    the first and second moments of its picks are summed once; a resample of a window draws as
    many of that window's blocks as it has, with replacement, so its moments are counts times the
    per-block sums, and its scatter matrix ``S2 − S1 S1ᵀ / n_b`` uses its own pick count.
    """
    counts = np.asarray(counts, dtype=np.int64)
    n_windows = len(counts)
    t = len(q)
    window_of_slot = np.repeat(np.arange(n_windows), counts)
    if unit_of_slot is None:  # every slot a block of its own: the ordinary bootstrap
        unit = np.arange(t)
    else:
        label = np.asarray(unit_of_slot).reshape(-1)
        _, unit = np.unique(np.column_stack([window_of_slot, label]), axis=0, return_inverse=True)
        unit = unit.reshape(-1)
    n_units = int(unit.max()) + 1 if t else 0
    feats = np.concatenate([np.ones((t, 1)), q, (q[:, :, None] * q[:, None, :]).reshape(t, 9)], axis=1)
    per_unit = np.zeros((n_units, feats.shape[1]))
    np.add.at(per_unit, unit, feats)
    window_of_unit = np.zeros(n_units, dtype=np.int64)
    window_of_unit[unit] = window_of_slot
    n_blocks = np.bincount(window_of_unit, minlength=n_windows)
    unit_start = np.concatenate([[0], np.cumsum(n_blocks)[:-1]])
    blocks_of_unit = n_blocks[window_of_unit]
    start_of_unit = unit_start[window_of_unit]
    matrix = _window_matrix(per_unit, window_of_unit, n_windows)
    out = np.empty((n_resamples, n_windows, 3))
    chunk = max(1, _CHUNK_ELEMENTS // max(n_units, 1))
    for b0 in range(0, n_resamples, chunk):
        _check_callbacks(progress, is_cancelled, b0 / n_resamples)
        b = min(chunk, n_resamples - b0)
        if n_windows == 1:
            drawn = rng.integers(0, n_units, (b, n_units))
        else:
            u = rng.random((b, n_units))
            u *= blocks_of_unit
            drawn = np.minimum(u.astype(np.int64), blocks_of_unit - 1)
            drawn += start_of_unit
        drawn += n_units * np.arange(b)[:, None]
        c = np.bincount(drawn.ravel(), minlength=b * n_units).reshape(b, n_units).astype(float)
        m = _per_window_sums(c, matrix, n_windows, feats.shape[1])
        n_b = m[..., 0]
        s1 = m[..., 1:4]
        s2 = m[..., 4:].reshape(b, n_windows, 3, 3)
        scatter = s2 - s1[..., :, None] * s1[..., None, :] / n_b[..., None, None]
        out[b0:b0 + b] = _smallest_eigvec(scatter)
    _check_callbacks(progress, is_cancelled, 1.0)
    return out, n_blocks


def _expand_for_few_blocks(dip_ci, dd_ci, cone, n_blocks):
    """Half-widths of a block bootstrap widened by :func:`_few_blocks_factor` (the dip-direction
    half-width stays at most 180°)."""
    f = _few_blocks_factor(n_blocks)
    return dip_ci * f, np.minimum(dd_ci * f, 180.0), cone * f


def _few_blocks_factor(n_blocks):
    """Widening of percentile half-widths from a bootstrap of ``n_blocks`` blocks.

    ``sqrt(G / (G - 1)) · t(0.975, G - 1) / z(0.975)``: the bootstrap's plug-in variance is
    ``(G - 1) / G`` of the unbiased one, and with few independent blocks the spread itself is
    uncertain, so the normal 1.96 becomes Student's t with ``G - 1`` degrees of freedom (the
    correction of Hesterberg's 2015 expanded percentile interval, applied here as a factor on the
    percentile half-width, which is the same for a normal spread). Near 1 for hundreds of blocks;
    inf for ``G < 2``.
    """
    g = np.asarray(n_blocks, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        f = np.sqrt(g / (g - 1.0)) * student_t.ppf(0.5 + LEVEL / 2.0, g - 1.0) / Z95
    return np.where(g >= 2, f, np.inf)


def analytic_plane_covariance(points, *, sigma_m=None):
    """First-order covariance matrix of the total-least-squares plane normal.

    Parameters
    ----------
    points : array_like, shape ``(n, 3)``
        Picks in metres (NaN rows ignored); more than three unless ``sigma_m`` is given.
    sigma_m : float, optional
        Standard deviation of the picks' errors perpendicular to the plane (metres). By default
        it is estimated from the residuals as :math:`\\hat\\sigma^2 = \\lambda_3 / (n - 3)`.

    Returns
    -------
    ndarray, shape ``(3, 3)``
        Covariance of the unit normal (dimensionless, radians² for small angles); rank 2,
        with the normal itself in its null space.

    Raises
    ------
    UndeterminedError
        Too few picks or picks on one line; or exactly three picks without ``sigma_m``.

    Notes
    -----
    With centred picks :math:`q_i`, scatter matrix :math:`S = \\sum q_i q_i^T` with
    eigenvalues :math:`\\lambda_1 \\ge \\lambda_2 \\ge \\lambda_3` and eigenvectors
    :math:`v_1, v_2, n`, first-order eigenvector perturbation gives
    :math:`\\delta n = \\sum_{k=1,2} v_k (v_k^T\\,\\delta S\\,n)/(\\lambda_3 - \\lambda_k)`
    with :math:`\\delta S\\,n \\approx \\sum_i q_i (\\varepsilon_i \\cdot n)` for errors
    :math:`\\varepsilon_i`. For independent errors of variance :math:`\\sigma^2` across the
    plane, :math:`\\operatorname{Var}(v_k^T\\delta S n) = \\sigma^2 \\lambda_k` and the two
    terms are uncorrelated, so

    .. math:: \\operatorname{Cov}(n) = \\sigma^2 \\sum_{k=1,2}
              \\frac{\\lambda_k}{(\\lambda_k - \\lambda_3)^2}\\, v_k v_k^T .

    This is the standard first-order (perturbation) result for the covariance of a
    total-least-squares / principal-component plane normal, derived here from the eigenvector
    perturbation formula (e.g. Stewart & Sun 1990, ch. V); Kanatani (1996) treats the same
    covariance for plane fitting. Only the errors' component along the normal enters, so for
    vertical errors ``sigma_z`` use ``sigma_m = sigma_z · cos(dip)``.

    References
    ----------
    Stewart, G. W. & Sun, J. (1990). *Matrix Perturbation Theory*. Academic Press, Boston.

    Kanatani, K. (1996). *Statistical Optimization for Geometric Computation: Theory and
    Practice*. Elsevier, Amsterdam (reprinted Dover, 2005).
    """
    fit, cov = _analytic(points, sigma_m)
    return cov


def _analytic(points, sigma_m):
    p, keep = _finite_points(points)
    p = p[keep]
    fit = fit_plane(p)
    n = fit.n_points
    if sigma_m is None:
        if n <= 3:
            raise UndeterminedError(
                "three picks leave no residual to estimate their scatter from; give sigma_m "
                "(the picks' error across the plane) or use more picks"
            )
        sigma2 = fit.eigenvalues[0] / (n - 3)
    else:
        s = float(sigma_m)
        if not (np.isfinite(s) and s >= 0):
            raise InputError(f"sigma_m must be a non-negative number of metres, got {sigma_m!r}")
        sigma2 = s * s
    q = p - fit.centroid
    w, v = np.linalg.eigh(q.T @ q)
    cov = _analytic_covariance_from_eigen(np.clip(w, 0.0, None)[None], v[None],
                                          np.array([n]), np.array([sigma2]))[0]
    return fit, cov


def analytic_plane_confidence(points, *, sigma_m=None) -> PlaneConfidence:
    """95% half-widths of a best-fit plane from its analytic normal covariance.

    Parameters
    ----------
    points : array_like, shape ``(n, 3)``
        Picks in metres.
    sigma_m : float, optional
        Error of the picks perpendicular to the plane; see :func:`analytic_plane_covariance`.

    Returns
    -------
    PlaneConfidence
        With ``method == "analytic"`` and ``n_resamples == 0``.

    Notes
    -----
    The covariance of :func:`analytic_plane_covariance` is mapped to dip and dip direction by
    their gradients with respect to the normal (delta method); half-widths are
    :math:`1.96\\,\\sigma`. The cone is the 95% point of the angle of a two-dimensional normal
    deviation with the covariance's two variances ``a, b``: :math:`a Z_1^2 + b Z_2^2` is
    matched to :math:`c\\chi^2_\\nu` by its first two moments (Satterthwaite 1946; exact when
    ``a = b`` or ``b = 0``).

    References
    ----------
    Satterthwaite, F. E. (1946). An approximate distribution of estimates of variance
    components. *Biometrics Bulletin*, 2(6), 110–114. https://doi.org/10.2307/3002019

    See :func:`analytic_plane_covariance` for the covariance itself.
    """
    fit, cov = _analytic(points, sigma_m)
    dip_ci, dd_ci, cone = _confidence_from_covariance(fit.normal[None], cov[None])
    tilt_cov = _tilt_cov_from_normal_cov(fit.normal[None], cov[None])[0]
    return PlaneConfidence(float(dip_ci[0]), float(dd_ci[0]), float(cone[0]), 0, "analytic",
                           fit.dip_deg, fit.dip_direction_deg, fit.n_points,
                           tuple(float(c) for c in tilt_cov.ravel()))


def _sigma_per_pick(sigma_z_m, n_total, keep):
    s = np.asarray(sigma_z_m, dtype=float)
    if s.ndim == 0:
        s = np.full(n_total, float(s))
    elif s.shape != (n_total,):
        raise InputError(
            f"sigma_z_m must be one number or one value per pick ({n_total}), got shape {s.shape}"
        )
    s = s[keep]
    if np.any(~np.isfinite(s)) or np.any(s < 0):
        raise InputError(
            "sigma_z_m must be finite and non-negative (metres); check the DEM or contour "
            "error settings"
        )
    return s


def monte_carlo_plane(points, *, sigma_z_m, seed=0, n_draws=1000, progress=None,
                      is_cancelled=None) -> PlaneConfidence:
    """95% confidence of the best-fit plane from stated vertical errors of the picks.

    Parameters
    ----------
    points : array_like, shape ``(n, 3)``
        Picks in metres (NaN rows ignored; their ``sigma_z_m`` entries are ignored too).
    sigma_z_m : float or array_like, shape ``(n,)``
        Vertical standard error of each pick (metres): the DEM's for DEM picks, and
        :func:`contour_sigma_to_vertical` of the positional error for contour picks
        (see :func:`vertical_sigma_of_picks`).
    seed : int, optional
        Seed of ``numpy.random.default_rng``.
    n_draws : int, optional
        Number of Monte Carlo draws (at least 20), default 1000.
    progress, is_cancelled : callable, optional
        As in :func:`bootstrap_plane`.

    Returns
    -------
    PlaneConfidence
        With ``method == "monte_carlo"``; all half-widths are 0 when every sigma is 0.

    Notes
    -----
    Each draw adds independent normal errors :math:`N(0, \\sigma_i^2)` to the elevations and
    refits the plane (Monte Carlo propagation of distributions, JCGM 2008). Perturbing
    elevations changes the centred scatter matrix by an exact low-rank update (see
    ``_monte_carlo_normals``), so the draws cost matrix products and one stacked ``eigh``.

    References
    ----------
    JCGM (2008). *Evaluation of measurement data -- Supplement 1 to the "Guide to the expression
    of uncertainty in measurement" -- Propagation of distributions using a Monte Carlo method*.
    JCGM 101:2008, Joint Committee for Guides in Metrology.
    """
    n_draws = _check_count("n_draws", n_draws, MIN_REPLICATES)
    seed = _check_seed(seed)
    p, keep = _finite_points(points)
    sigma = _sigma_per_pick(sigma_z_m, len(p), keep)
    p = p[keep]
    fit = fit_plane(p)
    q = p - fit.centroid
    scatter = q.T @ q
    rng = np.random.default_rng(seed)
    normals = _monte_carlo_normals(q, [len(q)], scatter[None], sigma, n_draws, rng, progress,
                                   is_cancelled)
    dip_ci, dd_ci, cone = _replicate_half_widths(fit.normal[None], normals)
    tilt_cov = _replicate_tilt_cov(fit.normal[None], normals)[0]
    return PlaneConfidence(float(dip_ci[0]), float(dd_ci[0]), float(cone[0]), n_draws,
                           "monte_carlo", fit.dip_deg, fit.dip_direction_deg, fit.n_points,
                           tuple(float(c) for c in tilt_cov.ravel()))


def _combine_arrays(dip_parts, dd_parts, cone_parts, dip_hat):
    dip_ci = np.sqrt(sum(np.square(d) for d in dip_parts))
    cone = np.sqrt(sum(np.square(c) for c in cone_parts))
    dd_sq = sum(np.square(d) for d in dd_parts)
    undetermined = np.any([np.asarray(d) >= 180.0 for d in dd_parts], axis=0) | (cone >= dip_hat)
    dd_ci = np.where(undetermined, 180.0, np.minimum(np.sqrt(dd_sq), 180.0))
    return dip_ci, dd_ci, cone


def combine_confidence(*parts: PlaneConfidence) -> PlaneConfidence:
    """Combine independent confidence estimates of the same plane in quadrature.

    Parameters
    ----------
    *parts : PlaneConfidence
        Estimates for the same picks (same ``dip_deg``), e.g. a bootstrap (sampling scatter of
        the picks about the plane) and a Monte Carlo of the picks' stated errors.

    Returns
    -------
    PlaneConfidence
        Half-widths ``sqrt(h1² + h2² + ...)``; the dip-direction half-width is 180 when any
        part's is 180 or when the combined cone reaches the vertical. ``method`` joins the
        parts' methods with ``"+"``; ``n_resamples`` is the first part's.

    Notes
    -----
    Independent error sources add in variance (JCGM 100:2008, section 5.1), and the
    half-widths, being proportional to standard deviations, add in quadrature. Where the
    picks' stated errors are also what scatters them about the plane, the bootstrap already
    contains part of that error and the sum is conservative.

    References
    ----------
    JCGM (2008). *Evaluation of measurement data -- Guide to the expression of uncertainty in
    measurement*. JCGM 100:2008, Joint Committee for Guides in Metrology.
    """
    if not parts:
        raise InputError("combine_confidence needs at least one PlaneConfidence")
    first = parts[0]
    for other in parts[1:]:
        if other.n_points != first.n_points or abs(other.dip_deg - first.dip_deg) > 1e-9:
            raise InputError(
                "combine_confidence got estimates of different planes (different picks or "
                "estimates); combine only estimates computed from the same picks"
            )
    dip_ci, dd_ci, cone = _combine_arrays([c.dip_ci95_deg for c in parts],
                                          [c.dip_direction_ci95_deg for c in parts],
                                          [c.cone95_deg for c in parts], first.dip_deg)
    # independent parts: their tilt covariances add (unknown when any part's is)
    tilt_cov = (tuple(float(sum(c.tilt_cov[i] for c in parts)) for i in range(4))
                if all(len(c.tilt_cov) == 4 for c in parts) else ())
    return PlaneConfidence(float(dip_ci), float(dd_ci), float(cone), first.n_resamples,
                           "+".join(c.method for c in parts), first.dip_deg,
                           first.dip_direction_deg, first.n_points, tuple(tilt_cov))


def plane_confidence(points, *, sigma_z_m=None, n_resamples=1000, n_draws=1000, seed=0,
                     groups=None, progress=None, is_cancelled=None) -> PlaneConfidence:
    """Reported 95% confidence of a best-fit plane: bootstrap, plus data error when stated.

    Parameters
    ----------
    points : array_like, shape ``(n, 3)``
        Picks in metres.
    sigma_z_m : float or array_like, optional
        Vertical standard error of the picks (see :func:`monte_carlo_plane`). ``None`` or all
        zeros: bootstrap only.
    groups : array_like of int, shape ``(n,)``, optional
        Block labels for a block bootstrap (see :func:`bootstrap_plane`).
    n_resamples, n_draws : int, optional
        Bootstrap resamples and Monte Carlo draws.
    seed : int, optional
        Seed of the bootstrap; the Monte Carlo uses ``seed + 1`` so the two are independent.
    progress, is_cancelled : callable, optional
        As in :func:`bootstrap_plane`.

    Returns
    -------
    PlaneConfidence
        ``method`` ``"bootstrap"`` or ``"bootstrap+monte_carlo"``, combined by
        :func:`combine_confidence`.

    References
    ----------
    See :func:`bootstrap_plane`, :func:`monte_carlo_plane` and :func:`combine_confidence`.
    """
    with_mc = sigma_z_m is not None and np.any(np.asarray(sigma_z_m, dtype=float) > 0)

    def part(lo, hi):
        if progress is None:
            return None
        return lambda f: progress(lo + (hi - lo) * f)

    boot = bootstrap_plane(points, n_resamples=n_resamples, seed=seed, groups=groups,
                           progress=part(0.0, 0.5 if with_mc else 1.0), is_cancelled=is_cancelled)
    if not with_mc:
        return boot
    mc = monte_carlo_plane(points, sigma_z_m=sigma_z_m, seed=_check_seed(seed) + 1,
                           n_draws=n_draws, progress=part(0.5, 1.0), is_cancelled=is_cancelled)
    return combine_confidence(boot, mc)


def contour_sigma_to_vertical(sigma_xy_m, slope_deg):
    """Vertical standard error of a contour pick from its horizontal positional error.

    Parameters
    ----------
    sigma_xy_m : float or array_like
        Horizontal (positional) standard error of the contour and contact lines at the pick
        (metres, ≥ 0); the issue's basis is half the map's positional tolerance.
    slope_deg : float or array_like
        Ground slope at the pick (degrees, 0 ≤ slope < 90), e.g. from the DEM or from
        ``atan(contour interval / contour spacing)``.

    Returns
    -------
    ndarray
        ``sigma_xy_m · tan(slope)`` in metres.

    Notes
    -----
    On ground of slope σ, shifting a contour line horizontally by ``s`` changes the elevation
    at a fixed point by ``s·tan σ``; to first order the standard errors scale the same way.
    The U.S. National Map Accuracy Standards use the same trade-off in reverse, allowing a
    tested contour to be shifted by the horizontal tolerance before its vertical error is
    judged (U.S. Bureau of the Budget 1947; from memory). On flat ground the positional error
    costs no elevation, on steep ground it dominates.

    References
    ----------
    U.S. Bureau of the Budget (1947). *United States National Map Accuracy Standards*.
    Washington, D.C.

    Examples
    --------
    >>> round(float(contour_sigma_to_vertical(5.0, 45.0)), 6)
    5.0
    """
    s = np.asarray(sigma_xy_m, dtype=float)
    a = np.asarray(slope_deg, dtype=float)
    if np.any(~(s >= 0)) or np.any(~np.isfinite(s)):
        raise InputError(f"sigma_xy_m must be finite and non-negative (metres), got {sigma_xy_m}")
    if np.any(~((a >= 0) & (a < 90))):
        raise InputError(
            f"slope_deg must lie in [0, 90) degrees, got {slope_deg}; compute the ground slope "
            "from the DEM or the contour spacing"
        )
    return s * np.tan(np.radians(a))


def vertical_sigma_of_picks(source, slope_deg=None, *, dem_sigma_m=0.0, contour_sigma_m=0.0):
    """Per-pick vertical standard errors from the picks' sources.

    Parameters
    ----------
    source : array_like of str, shape ``(n,)``
        ``"dem"`` or ``"contours"`` for each pick.
    slope_deg : array_like, shape ``(n,)``, optional
        Ground slope at each pick (degrees); needed when any contour pick has a non-zero
        ``contour_sigma_m``.
    dem_sigma_m : float, optional
        Vertical standard error of the DEM (metres), used as is for DEM picks.
    contour_sigma_m : float, optional
        Horizontal positional standard error of contour picks (metres), turned into a vertical
        one by :func:`contour_sigma_to_vertical`.

    Returns
    -------
    ndarray, shape ``(n,)``
        Vertical standard errors (metres) for :func:`monte_carlo_plane`.
    """
    src = np.asarray(source).astype(str)
    bad = ~np.isin(src, PICK_SOURCES)
    if np.any(bad):
        raise InputError(
            f"pick source must be one of {', '.join(PICK_SOURCES)}; got {sorted(set(src[bad]))}"
        )
    for name, val in (("dem_sigma_m", dem_sigma_m), ("contour_sigma_m", contour_sigma_m)):
        if not (np.isfinite(val) and val >= 0):
            raise InputError(f"{name} must be a non-negative number of metres, got {val!r}")
    out = np.where(src == "dem", float(dem_sigma_m), 0.0)
    is_contour = src == "contours"
    if contour_sigma_m > 0 and np.any(is_contour):
        if slope_deg is None:
            raise InputError(
                "slope_deg is needed to turn contour_sigma_m into a vertical error; pass the "
                "ground slope at each pick"
            )
        slope = np.broadcast_to(np.asarray(slope_deg, dtype=float), src.shape)
        out = out.copy()
        out[is_contour] = contour_sigma_to_vertical(contour_sigma_m, slope[is_contour])
    return out
