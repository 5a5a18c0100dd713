"""The 95% confidence of a plane's attitude: the record every estimate returns, whether the dip
differs from zero, and the combination of independent estimates.

Every attitude strikeline reports carries 95% half-widths of its dip and dip direction and the
95% cone of its pole, in a :class:`PlaneConfidence`. Three estimates give one:

* :func:`~strikeline.attitude.resampling.bootstrap_plane` -- resampling the picks (or blocks of
  them) with replacement: how well the picks, as scattered as they are, pin the plane down;
* :func:`~strikeline.attitude.analytic.analytic_plane_confidence` -- the first-order covariance
  of the total-least-squares normal, a closed-form cross-check of the bootstrap;
* :func:`~strikeline.attitude.resampling.monte_carlo_plane` -- propagation of stated vertical
  errors of the picks (:mod:`strikeline.attitude.pick_errors` turns DEM accuracy and contour
  positional tolerance into those errors).

:func:`combine_confidence` adds independent estimates in quadrature, and
:func:`~strikeline.attitude.resampling.plane_confidence` reports bootstrap and Monte Carlo
together.

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
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from strikeline.attitude.kernels import LEVEL, Z95, chi2_quantile, combine_half_widths, tilt_z2
from strikeline.errors import InputError

__all__ = [
    "Z95",
    "LEVEL",
    "CHI2_2DOF_95",
    "PlaneConfidence",
    "dip_is_significant",
    "combine_confidence",
]


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
        return float(tilt_z2(t, np.asarray(self.tilt_cov, dtype=float).reshape(1, 2, 2))[0])

    @property
    def dip_significant(self) -> bool:
        """Whether the dip differs from zero at 95% (see :func:`dip_is_significant`)."""
        return bool(dip_is_significant(self.dip_deg, self.dip_ci95_deg, self.horizontal_z2))


#: 95% point of chi-square with 2 degrees of freedom (-2 ln 0.05): the 95% region of a 2-D tilt.
CHI2_2DOF_95 = float(chi2_quantile(LEVEL, 2))


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
    dip_ci, dd_ci, cone = combine_half_widths([c.dip_ci95_deg for c in parts],
                                              [c.dip_direction_ci95_deg for c in parts],
                                              [c.cone95_deg for c in parts], first.dip_deg)
    # independent parts: their tilt covariances add (unknown when any part's is)
    tilt_cov = (tuple(float(sum(c.tilt_cov[i] for c in parts)) for i in range(4))
                if all(len(c.tilt_cov) == 4 for c in parts) else ())
    return PlaneConfidence(float(dip_ci), float(dd_ci), float(cone), first.n_resamples,
                           "+".join(c.method for c in parts), first.dip_deg,
                           first.dip_direction_deg, first.n_points, tuple(tilt_cov))
