"""Batched kernels behind every confidence estimate of a plane, for one pick set or many windows.

The sheet-wide estimates (:mod:`strikeline.attitude.resampling`, :mod:`strikeline.attitude.analytic`)
and the moving-window attitudes (:mod:`strikeline.attitude.local`) share these functions. W windows
are held as one flat ``(T, 3)`` array of "slots", each window a contiguous run of ``counts[w]``
slots whose coordinates are centred on the window's own centroid (one pick set is one window).
Replicate normals come back as ``(B, W, 3)`` stacks, covariances as ``(W, 3, 3)`` or ``(W, 2, 2)``;
per-window sums are (sparse) matrix products and the eigen-decompositions of a chunk of replicates
one stacked ``eigh``; Python loops run only over chunks, whose size bounds the memory used. The methods and their references are given in
the public functions that use these kernels: :func:`~strikeline.attitude.resampling.bootstrap_plane`,
:func:`~strikeline.attitude.resampling.monte_carlo_plane` and
:func:`~strikeline.attitude.analytic.analytic_plane_covariance`.

The tilt of a plane is the horizontal part of its upward unit normal, ``sin(dip) * (sin dd, cos dd)``
(0 for a horizontal plane); its covariance decides whether a dip differs from zero
(:func:`strikeline.attitude.confidence.dip_is_significant`).
"""
from __future__ import annotations

import numpy as np
from scipy import sparse
from scipy.special import gammaincinv, stdtrit

from strikeline.attitude.eigvecs import Eigvecs
from strikeline.errors import CancelledError, InputError
from strikeline.geometry.orientation import azimuth_difference, vector_components

__all__ = [
    "Z95",
    "LEVEL",
    "finite_points",
    "check_count",
    "check_seed",
    "check_callbacks",
    "bootstrap_normals",
    "block_bootstrap_normals",
    "window_block_normals",
    "monte_carlo_normals",
    "replicate_half_widths",
    "expand_for_few_blocks",
    "few_blocks_factor",
    "combine_half_widths",
    "analytic_covariance_from_eigen",
    "half_widths_from_covariance",
    "tilt_of_normals",
    "replicate_tilt_cov",
    "tilt_cov_from_normal_cov",
    "tilt_z2",
    "chi2_quantile",
    "t_quantile",
]

#: Two-sided 95% point of the standard normal distribution.
Z95 = 1.959963984540054
#: Confidence level of every reported half-width and cone.
LEVEL = 0.95
#: Number of array elements (resamples × picks) handled per chunk; bounds memory to a few
#: tens of MB whatever the pick count.
_CHUNK_ELEMENTS = 1 << 22
#: Elements per chunk of the many-window kernels (resamples × the larger of the slots or units and
#: the windows' moments, 13 per window, or scatter matrices, 9; :func:`_replicate_chunks`), and per
#: piece of replicate normals reduced to half-widths (8 MiB as float64; our choice): their arrays
#: stop growing with the number of windows, which grows with the picks, i.e. with the DEM's
#: resolution. The draws of a generator filling an array are
#: the same whatever the chunk (numpy's ``Generator.random`` and ``standard_normal`` fill it value
#: after value), the sparse per-window sums add the same terms in the same order and each matrix
#: is decomposed alone, so the normals do not depend on it. One window (the sheet-wide plane)
#: keeps :data:`_CHUNK_ELEMENTS`: its draws (``Generator.integers``) and its dense sums do.
_WINDOW_CHUNK_ELEMENTS = 1 << 20


def chi2_quantile(p, df):
    """The ``p`` quantile of the chi-square distribution with ``df`` degrees of freedom.

    ``2 P⁻¹(df / 2, p)``, ``P⁻¹`` the inverse of the regularised lower incomplete gamma function
    (:func:`scipy.special.gammaincinv`): the expression ``scipy.stats.chi2.ppf`` evaluates for
    ``0 < p < 1`` and ``df > 0`` (scipy 1.17, ``chi2_gen._ppf``), so the values are the same,
    without importing :mod:`scipy.stats` (about 0.8 s of every process). Abramowitz & Stegun
    (1964), 26.4.1: the chi-square distribution is the gamma distribution of shape ``df / 2``
    and scale 2.

    References
    ----------
    Abramowitz, M. & Stegun, I. A. (1964). *Handbook of Mathematical Functions*. National Bureau
    of Standards, Washington, 26.4.1.

    Examples
    --------
    >>> round(float(chi2_quantile(0.95, 2)), 6)  # -2 ln 0.05
    5.991465
    """
    return 2.0 * gammaincinv(np.asarray(df, dtype=float) / 2.0, p)


def t_quantile(p, df):
    """The ``p`` quantile of Student's t distribution with ``df`` degrees of freedom
    (:func:`scipy.special.stdtrit`, which ``scipy.stats.t.ppf`` evaluates for ``df > 0``: the
    same values without importing :mod:`scipy.stats`).

    Examples
    --------
    >>> round(float(t_quantile(0.975, 10)), 4)
    2.2281
    """
    return stdtrit(np.asarray(df, dtype=float), p)


# --------------------------------------------------------------------------------------------
# Checks shared by the public functions
# --------------------------------------------------------------------------------------------

def finite_points(points):
    """Picks as a float ``(n, 3)`` array and the mask of its rows without NaN."""
    p = np.asarray(points, dtype=float)
    if p.ndim != 2 or p.shape[1] != 3:
        raise InputError(f"picks must be an (n, 3) array of x, y, z; got shape {p.shape}")
    keep = np.all(np.isfinite(p), axis=1)
    return p, keep


def check_count(name, value, minimum):
    """``value`` as an int, refused unless it is an integer of at least ``minimum``."""
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < minimum:
        raise InputError(f"{name} must be an integer of at least {minimum}, got {value!r}")
    return int(value)


def check_seed(seed):
    """``seed`` as an int, refused unless it is a non-negative integer."""
    if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or seed < 0:
        raise InputError(
            f"seed must be a non-negative integer (results are reproducible), got {seed!r}"
        )
    return int(seed)


def check_callbacks(progress, is_cancelled, fraction):
    """Stop with :class:`~strikeline.errors.CancelledError` when ``is_cancelled()`` says so,
    else report ``fraction`` (0-1) to ``progress``; either callable may be ``None``."""
    if is_cancelled is not None and is_cancelled():
        raise CancelledError("cancelled by the caller while estimating plane confidence")
    if progress is not None:
        progress(float(fraction))


# --------------------------------------------------------------------------------------------
# Replicate normals: bootstrap, block bootstrap and Monte Carlo, all windows at once
# --------------------------------------------------------------------------------------------

def _replicate_chunks(n_replicates, n_columns, n_windows, per_window):
    """The chunks of ``n_replicates`` replicates as ``(first, count)``, in order, each replicate in
    one.

    A chunk's largest arrays hold ``count`` rows of ``n_columns`` (the draws: units or slots) or,
    for several windows, of ``per_window`` values of each window (their moments: 13; their scatter
    matrices: 9): one window takes up to :data:`_CHUNK_ELEMENTS` elements of draws per chunk,
    several :data:`_WINDOW_CHUNK_ELEMENTS` of the larger of the two; one replicate at least.
    """
    if n_windows == 1:
        step = max(1, _CHUNK_ELEMENTS // max(n_columns, 1))
    else:
        step = max(1, _WINDOW_CHUNK_ELEMENTS // max(n_columns, per_window * n_windows))
    return [(b0, min(step, n_replicates - b0)) for b0 in range(0, n_replicates, step)]


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


def bootstrap_normals(q, counts, n_resamples, rng, progress=None, is_cancelled=None):
    """Normals of ``n_resamples`` bootstrap resamples of each window -> (B, W, 3).

    Each resample of a window draws ``n_w`` of its slots with replacement: the block bootstrap
    of :func:`window_block_normals` with every slot a block of its own. The draws are turned
    into a counts matrix C (B, T); the resampled first and second moments are then matrix
    products of C with the per-slot vectors ``[1, q, q⊗q]``, and the resampled scatter matrices
    ``S2 − S1 S1ᵀ / n_w`` are decomposed by one stacked ``eigh``.

    References
    ----------
    Efron, B. & Tibshirani, R. J. (1993). *An Introduction to the Bootstrap*. Chapman & Hall,
    New York. https://doi.org/10.1007/978-1-4899-4541-9
    """
    return window_block_normals(q, counts, None, n_resamples, rng, progress, is_cancelled)[0]


def block_bootstrap_normals(q, block, n_resamples, rng, progress=None, is_cancelled=None):
    """Normals of block-bootstrap resamples of one pick set -> (B, 1, 3) (see
    :func:`window_block_normals`)."""
    return window_block_normals(q, [len(q)], block, n_resamples, rng, progress, is_cancelled)[0]


def window_block_normals(q, counts, unit_of_slot, n_resamples, rng, progress=None, is_cancelled=None):
    """Normals of block-bootstrap resamples of each window -> ((B, W, 3), blocks per window (W,)).

    ``q`` (T, 3) holds the slots of W windows (``counts`` slots each, contiguous), centred on
    their window's centroid; ``unit_of_slot`` (T,) labels the block of every slot (``None``:
    every slot is a block of its own). Blocks are
    numbered per window (labels of different windows are kept apart even when equal). Per block
    the first and second moments of its picks are summed once; a resample of a window draws as
    many of that window's blocks as it has, with replacement, so its moments are counts times the
    per-block sums, and its scatter matrix ``S2 − S1 S1ᵀ / n_b`` uses its own pick count.

    References
    ----------
    Künsch, H. R. (1989). The jackknife and the bootstrap for general stationary observations.
    *The Annals of Statistics*, 17(3), 1217–1241. https://doi.org/10.1214/aos/1176347265

    Lahiri, S. N. (2003). *Resampling Methods for Dependent Data*. Springer, New York.
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
    k = feats.shape[1]
    per_unit = np.zeros((n_units, k))
    np.add.at(per_unit, unit, feats)
    del feats
    window_of_unit = np.zeros(n_units, dtype=np.int64)
    window_of_unit[unit] = window_of_slot
    n_blocks = np.bincount(window_of_unit, minlength=n_windows)
    unit_start = np.concatenate([[0], np.cumsum(n_blocks)[:-1]])
    blocks_of_unit = n_blocks[window_of_unit]
    start_of_unit = unit_start[window_of_unit]
    matrix = _window_matrix(per_unit, window_of_unit, n_windows)
    out = np.empty((n_resamples, n_windows, 3))
    with Eigvecs(out) as eig:
        _block_chunks(eig, rng, matrix, k, n_windows, n_units, blocks_of_unit, start_of_unit,
                      n_resamples, progress, is_cancelled)
    check_callbacks(progress, is_cancelled, 1.0)
    return out, n_blocks


def _block_chunks(eig, rng, matrix, k, n_windows, n_units, blocks_of_unit, start_of_unit, n_resamples,
                  progress, is_cancelled):
    """The chunks (:func:`_replicate_chunks`) of :func:`window_block_normals`' resamples: draws and
    moments here, their scatter matrices handed to ``eig`` (:class:`~strikeline.attitude.eigvecs.Eigvecs`)."""
    for b0, b in _replicate_chunks(n_resamples, n_units, n_windows, k):
        check_callbacks(progress, is_cancelled, b0 / n_resamples)
        if n_windows == 1:
            drawn = rng.integers(0, n_units, (b, n_units))
        else:
            u = rng.random((b, n_units))
            u *= blocks_of_unit
            drawn = u.astype(np.int64)
            del u
            np.minimum(drawn, blocks_of_unit - 1, out=drawn)
            drawn += start_of_unit
        drawn += n_units * np.arange(b)[:, None]
        c = np.bincount(drawn.ravel(), minlength=b * n_units)
        del drawn
        c = c.reshape(b, n_units).astype(float)
        m = _per_window_sums(c, matrix, n_windows, k)
        n_b = m[..., 0]
        s1 = m[..., 1:4]
        s2 = m[..., 4:].reshape(b, n_windows, 3, 3)
        eig.put(b0, s2 - s1[..., :, None] * s1[..., None, :] / n_b[..., None, None])


def monte_carlo_normals(q, counts, scatter, sigma_slot, n_draws, rng, progress=None,
                        is_cancelled=None):
    """Normals of each window after ``n_draws`` random vertical perturbations -> (B, W, 3).

    Perturbing pick elevations by ``e`` changes the centred scatter matrix exactly to
    ``S + a ẑᵀ + ẑ aᵀ + s ẑ ẑᵀ`` with ``a = Σ e_i q_i`` and ``s = Σ e_i² − (Σ e_i)²/n``
    (``q`` centred, so ``Σ q_i = 0``), which needs only matrix products with ``e``.

    References
    ----------
    JCGM (2008). *Evaluation of measurement data -- Supplement 1 to the "Guide to the expression
    of uncertainty in measurement" -- Propagation of distributions using a Monte Carlo method*.
    JCGM 101:2008, Joint Committee for Guides in Metrology.
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
    with Eigvecs(out) as eig:
        for b0, b in _replicate_chunks(n_draws, t, n_windows, 9):
            check_callbacks(progress, is_cancelled, b0 / n_draws)
            e = rng.standard_normal((b, t))
            e *= sigma_slot  # in place: the chunk's one array (the same products)
            m = _per_window_sums(e, lin, n_windows, 4)
            a = m[..., :3]
            se = m[..., 3]
            np.multiply(e, e, out=e)  # e is not needed past its sums: its squares take its place
            se2 = _per_window_sums(e, ones, n_windows, 1)[..., 0]
            del e
            s = se2 - se * se / counts[None, :]
            eig.put(b0, scatter[None]
                    + a[..., :, None] * zhat[None, None, None, :]
                    + zhat[None, None, :, None] * a[..., None, :]
                    + s[..., None, None] * zz)
    check_callbacks(progress, is_cancelled, 1.0)
    return out


# --------------------------------------------------------------------------------------------
# Half-widths from replicates, their widening for few blocks and their combination
# --------------------------------------------------------------------------------------------

def _dip_and_direction(n):
    """Dip (may exceed 90° for a normal pointing down) and dip direction, degrees."""
    nx, ny, nz = vector_components(n)
    horiz = np.hypot(nx, ny)
    dip = np.degrees(np.arctan2(horiz, nz))
    dd = np.mod(np.degrees(np.arctan2(nx, ny)), 360.0)
    return dip, dd


def _window_pieces(normals):
    """Slices of the window axis of replicate normals (B, W, 3) of at most a quarter of
    :data:`_WINDOW_CHUNK_ELEMENTS` elements each (2 MiB: a dozen temporaries of that size): the
    reductions below work window by window, so their temporaries stay a piece's size and the
    values are those of the whole stack."""
    b, w = normals.shape[0], normals.shape[1]
    step = max(1, (_WINDOW_CHUNK_ELEMENTS // 4) // max(3 * b, 1))
    return [slice(a, min(a + step, w)) for a in range(0, max(w, 1), step)]


def replicate_half_widths(normal_hat, normals):
    """95% half-widths (dip, dip direction, cone) of replicate normals (B, W, 3) about
    the upward estimates ``normal_hat`` (W, 3), computed a piece of windows at a time
    (:func:`_window_pieces`)."""
    pieces = _window_pieces(normals)
    if len(pieces) == 1:
        return _replicate_half_widths(normal_hat, normals)
    parts = [_replicate_half_widths(normal_hat[s], normals[:, s]) for s in pieces]
    return tuple(np.concatenate([p[k] for p in parts]) for k in range(3))


def _replicate_half_widths(normal_hat, normals):
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


def expand_for_few_blocks(dip_ci, dd_ci, cone, n_blocks):
    """Half-widths of a block bootstrap widened by :func:`few_blocks_factor` (the dip-direction
    half-width stays at most 180°)."""
    f = few_blocks_factor(n_blocks)
    return dip_ci * f, np.minimum(dd_ci * f, 180.0), cone * f


def few_blocks_factor(n_blocks):
    """Widening of percentile half-widths from a bootstrap of ``n_blocks`` blocks.

    ``sqrt(G / (G - 1)) · t(0.975, G - 1) / z(0.975)``: the bootstrap's plug-in variance is
    ``(G - 1) / G`` of the unbiased one, and with few independent blocks the spread itself is
    uncertain, so the normal 1.96 becomes Student's t with ``G - 1`` degrees of freedom (the
    correction of Hesterberg's 2015 expanded percentile interval, applied here as a factor on the
    percentile half-width, which is the same for a normal spread). Near 1 for hundreds of blocks;
    inf for ``G < 2``.

    References
    ----------
    Hesterberg, T. C. (2015). What teachers should know about the bootstrap: resampling in the
    undergraduate statistics curriculum. *The American Statistician*, 69(4), 371–386.
    https://doi.org/10.1080/00031305.2015.1089789 (expanded percentile interval; from memory)
    """
    g = np.asarray(n_blocks, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        f = np.sqrt(g / (g - 1.0)) * t_quantile(0.5 + LEVEL / 2.0, np.where(g >= 2, g - 1.0, 1.0)) / Z95
    return np.where(g >= 2, f, np.inf)


def combine_half_widths(dip_parts, dd_parts, cone_parts, dip_hat):
    """Half-widths (dip, dip direction, cone) of independent parts added in quadrature; the
    dip direction is undetermined (180) where any part's is or the cone reaches ``dip_hat``
    (see :func:`strikeline.attitude.confidence.combine_confidence`).

    References
    ----------
    JCGM (2008). *Evaluation of measurement data -- Guide to the expression of uncertainty in
    measurement*. JCGM 100:2008, Joint Committee for Guides in Metrology (section 5.1).
    """
    dip_ci = np.sqrt(sum(np.square(d) for d in dip_parts))
    cone = np.sqrt(sum(np.square(c) for c in cone_parts))
    dd_sq = sum(np.square(d) for d in dd_parts)
    undetermined = np.any([np.asarray(d) >= 180.0 for d in dd_parts], axis=0) | (cone >= dip_hat)
    dd_ci = np.where(undetermined, 180.0, np.minimum(np.sqrt(dd_sq), 180.0))
    return dip_ci, dd_ci, cone


# --------------------------------------------------------------------------------------------
# Analytic (first-order) covariance of the normal and its half-widths
# --------------------------------------------------------------------------------------------

def analytic_covariance_from_eigen(w, v, n_points, sigma2):
    """First-order covariance of the TLS normal for stacks of eigen-decompositions.

    ``w`` (W, 3) ascending eigenvalues, ``v`` (W, 3, 3) eigenvectors as columns,
    ``sigma2`` (W,) variance of the picks perpendicular to the plane.

    References
    ----------
    Stewart, G. W. & Sun, J. (1990). *Matrix Perturbation Theory*. Academic Press, Boston.

    Kanatani, K. (1996). *Statistical Optimization for Geometric Computation: Theory and
    Practice*. Elsevier, Amsterdam (reprinted Dover, 2005).
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


def half_widths_from_covariance(normal, cov):
    """95% half-widths (dip, dip direction, cone) from normal covariance stacks (W, 3, 3).

    Dip and dip direction by the delta method (their gradients with respect to the normal,
    half-widths 1.96 standard deviations); the cone by matching the normal's two variances
    ``a Z1² + b Z2²`` to a scaled chi-square by its first two moments (Satterthwaite 1946).

    References
    ----------
    Satterthwaite, F. E. (1946). An approximate distribution of estimates of variance
    components. *Biometrics Bulletin*, 2(6), 110–114. https://doi.org/10.2307/3002019
    """
    nx, ny, nz = vector_components(normal)
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
        r = np.sqrt(scale * chi2_quantile(LEVEL, dof))
        cone = np.degrees(np.arctan(r))
    dip_hat = np.degrees(np.arctan2(h, nz))
    dd_ci = np.where((cone >= dip_hat) | ~np.isfinite(dd_ci), 180.0, np.minimum(dd_ci, 180.0))
    return dip_ci, dd_ci, cone


# --------------------------------------------------------------------------------------------
# Tilt of the plane and its covariance
# --------------------------------------------------------------------------------------------

def tilt_of_normals(n):
    """Tilt vectors ``(nx, ny)`` of unit normals (..., 3): bounded, unlike the gradient
    ``(nx, ny) / nz``, whose replicates near the vertical would swamp a covariance."""
    return n[..., :2]


def replicate_tilt_cov(normal_hat, normals):
    """Covariance (W, 2, 2) of the replicate tilts about the estimate's tilt (mean square
    deviation, like the percentile half-widths about the estimate), a piece of windows at a
    time (:func:`_window_pieces`)."""
    pieces = _window_pieces(normals)
    if len(pieces) == 1:
        return _replicate_tilt_cov(normal_hat, normals)
    return np.concatenate([_replicate_tilt_cov(normal_hat[s], normals[:, s]) for s in pieces])


def _replicate_tilt_cov(normal_hat, normals):
    dots = np.sum(normals * normal_hat[None], axis=-1)
    normals = np.where(dots[..., None] < 0, -normals, normals)
    dev = tilt_of_normals(normals) - tilt_of_normals(normal_hat)[None]
    dev = np.where(np.isfinite(dev), dev, 0.0)
    return np.einsum("bwi,bwj->wij", dev, dev) / max(len(normals), 1)


def tilt_cov_from_normal_cov(normal, cov):
    """Covariance (W, 2, 2) of the tilt ``(nx, ny)`` from that of the normal (its x, y block)."""
    return np.asarray(cov, dtype=float)[..., :2, :2]


def tilt_z2(tilt, cov):
    """Squared Mahalanobis distance (W,) of tilt 0 from ``tilt`` (W, 2) under ``cov`` (W, 2, 2);
    inf where the covariance is singular and the tilt is not 0 along its null direction.

    References
    ----------
    Johnson, R. A. & Wichern, D. W. (2007). *Applied Multivariate Statistical Analysis*, 6th ed.
    Pearson Prentice Hall, Upper Saddle River (inference about a mean vector; from memory).
    """
    cov = np.asarray(cov, dtype=float)
    tilt = np.asarray(tilt, dtype=float)
    w, v = np.linalg.eigh(cov)
    proj = np.einsum("wij,wi->wj", v, tilt)
    tiny = 1e-30 + 1e-12 * np.max(np.abs(w), axis=-1, keepdims=True)
    with np.errstate(divide="ignore", invalid="ignore"):
        terms = np.where(w > tiny, proj ** 2 / np.where(w > tiny, w, 1.0),
                         np.where(np.abs(proj) > 0, np.inf, 0.0))
    return np.sum(terms, axis=-1)
