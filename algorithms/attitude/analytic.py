"""Analytic confidence of a fitted plane: the first-order covariance of the total-least-squares
normal and the 95% half-widths it gives, a closed-form cross-check of the bootstrap.

The half-widths are read as for every estimate (:mod:`strikeline.attitude.confidence`); the
covariance of many windows at once comes from the same kernel
(:func:`strikeline.attitude.kernels.analytic_covariance_from_eigen`).
"""
from __future__ import annotations

import numpy as np

from strikeline.attitude.confidence import PlaneConfidence
from strikeline.attitude.fitting import fit_plane
from strikeline.attitude.kernels import (
    analytic_covariance_from_eigen,
    finite_points,
    half_widths_from_covariance,
    tilt_cov_from_normal_cov,
)
from strikeline.errors import InputError, UndeterminedError

__all__ = ["analytic_plane_covariance", "analytic_plane_confidence"]


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
    p, keep = finite_points(points)
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
    cov = analytic_covariance_from_eigen(np.clip(w, 0.0, None)[None], v[None],
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
    dip_ci, dd_ci, cone = half_widths_from_covariance(fit.normal[None], cov[None])
    tilt_cov = tilt_cov_from_normal_cov(fit.normal[None], cov[None])[0]
    return PlaneConfidence(float(dip_ci[0]), float(dd_ci[0]), float(cone[0]), 0, "analytic",
                           fit.dip_deg, fit.dip_direction_deg, fit.n_points,
                           tuple(float(c) for c in tilt_cov.ravel()))
