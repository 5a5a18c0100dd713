"""Confidence of a fitted plane by resampling: bootstrap of the picks (or of blocks of them),
Monte Carlo of the picks' stated vertical errors, and :func:`plane_confidence`, which reports the
two combined.

Every estimate is a :class:`~strikeline.attitude.confidence.PlaneConfidence` (95% half-widths of
dip and dip direction, 95% cone of the pole, covariance of the tilt; see
:mod:`strikeline.attitude.confidence` for how they are read). The resamples are never built as
point sets: the batched kernels of :mod:`strikeline.attitude.kernels` turn them into matrix
products and one stacked eigen-decomposition. All random draws come from
``numpy.random.default_rng(seed)``, so equal inputs and seeds give identical numbers.
"""
from __future__ import annotations

import numpy as np

from strikeline.attitude.confidence import PlaneConfidence, combine_confidence
from strikeline.attitude.fitting import fit_plane
from strikeline.attitude.kernels import (
    block_bootstrap_normals,
    bootstrap_normals,
    check_count,
    check_seed,
    expand_for_few_blocks,
    few_blocks_factor,
    finite_points,
    monte_carlo_normals,
    replicate_half_widths,
    replicate_tilt_cov,
)
from strikeline.errors import InputError, UndeterminedError

__all__ = [
    "MIN_BOOTSTRAP_POINTS",
    "MIN_REPLICATES",
    "MIN_BOOTSTRAP_BLOCKS",
    "bootstrap_plane",
    "monte_carlo_plane",
    "plane_confidence",
]

#: Fewest picks for which resampling the picks makes sense.
MIN_BOOTSTRAP_POINTS = 4
#: Fewest resamples or draws from which a 95th percentile is taken.
MIN_REPLICATES = 20
#: Default number of bootstrap resamples and of Monte Carlo draws: about 1000 for percentile
#: intervals (Efron, B. & Tibshirani, R. J. 1993, An Introduction to the Bootstrap, Chapman &
#: Hall, ch. 13). The command line and the QGIS tools default to it too.
DEFAULT_RESAMPLES = 1000
#: Fewest blocks for a block bootstrap; with fewer, single picks are resampled (our choice:
#: a resample of fewer blocks has too few distinct outcomes for a 95% percentile).
MIN_BOOTSTRAP_BLOCKS = 8


def bootstrap_plane(points, *, n_resamples=DEFAULT_RESAMPLES, seed=0, groups=None, progress=None,
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
    n_resamples = check_count("n_resamples", n_resamples, MIN_REPLICATES)
    seed = check_seed(seed)
    p, keep = finite_points(points)
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
        normals = bootstrap_normals(q, [len(q)], n_resamples, rng, progress, is_cancelled)
        dip_ci, dd_ci, cone = replicate_half_widths(fit.normal[None], normals)
        factor = 1.0
    else:
        method = "block_bootstrap"
        normals = block_bootstrap_normals(q, block, n_resamples, rng, progress, is_cancelled)
        dip_ci, dd_ci, cone = expand_for_few_blocks(*replicate_half_widths(fit.normal[None], normals),
                                                    block.max() + 1)
        factor = float(few_blocks_factor(block.max() + 1))
    tilt_cov = replicate_tilt_cov(fit.normal[None], normals)[0] * factor ** 2
    return PlaneConfidence(float(dip_ci[0]), float(dd_ci[0]), float(cone[0]), n_resamples,
                           method, fit.dip_deg, fit.dip_direction_deg, fit.n_points,
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


def monte_carlo_plane(points, *, sigma_z_m, seed=0, n_draws=DEFAULT_RESAMPLES, progress=None,
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
    :func:`strikeline.attitude.kernels.monte_carlo_normals`), so the draws cost matrix products
    and one stacked ``eigh``.

    References
    ----------
    JCGM (2008). *Evaluation of measurement data -- Supplement 1 to the "Guide to the expression
    of uncertainty in measurement" -- Propagation of distributions using a Monte Carlo method*.
    JCGM 101:2008, Joint Committee for Guides in Metrology.
    """
    n_draws = check_count("n_draws", n_draws, MIN_REPLICATES)
    seed = check_seed(seed)
    p, keep = finite_points(points)
    sigma = _sigma_per_pick(sigma_z_m, len(p), keep)
    p = p[keep]
    fit = fit_plane(p)
    q = p - fit.centroid
    scatter = q.T @ q
    rng = np.random.default_rng(seed)
    normals = monte_carlo_normals(q, [len(q)], scatter[None], sigma, n_draws, rng, progress,
                                  is_cancelled)
    dip_ci, dd_ci, cone = replicate_half_widths(fit.normal[None], normals)
    tilt_cov = replicate_tilt_cov(fit.normal[None], normals)[0]
    return PlaneConfidence(float(dip_ci[0]), float(dd_ci[0]), float(cone[0]), n_draws,
                           "monte_carlo", fit.dip_deg, fit.dip_direction_deg, fit.n_points,
                           tuple(float(c) for c in tilt_cov.ravel()))


def plane_confidence(points, *, sigma_z_m=None, n_resamples=DEFAULT_RESAMPLES, n_draws=DEFAULT_RESAMPLES, seed=0,
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
    mc = monte_carlo_plane(points, sigma_z_m=sigma_z_m, seed=check_seed(seed) + 1,
                           n_draws=n_draws, progress=part(0.5, 1.0), is_cancelled=is_cancelled)
    return combine_confidence(boot, mc)
