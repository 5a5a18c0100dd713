"""Growth of the prediction error with distance from data: :func:`fit_error_growth` fits it to
held-out errors and calibrates it so that 95 % of them fall within 1.96 standard errors;
:class:`ErrorGrowth` evaluates it.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from strikeline.errors import InputError


@dataclass(frozen=True)
class ErrorGrowth:
    """How a model's prediction error grows with distance from data, from cross-validation.

    The standard error of the surface at a point ``d`` metres from the nearest datum is
    ``kappa · sqrt(s(x)² + excess_m2 · (d / distance_ref_m) ** alpha)`` where ``s(x)`` is the
    model's own standard error (noise and parameter uncertainty); see
    :func:`fit_error_growth`.

    Attributes
    ----------
    excess_m2 : float
        Error variance beyond the model's own at ``distance_ref_m`` (robust estimate).
    alpha : float
        Growth exponent (0.5–2).
    distance_ref_m : float
        Median distance of held-out picks from the data that predicted them.
    kappa : float
        Calibration factor that makes 95 % of the held-out errors fall within 1.96 standard
        errors.
    n : int
        Held-out errors used.
    """

    excess_m2: float
    alpha: float
    distance_ref_m: float
    kappa: float
    n: int

    def excess_variance(self, d):
        """Excess error variance (m²) at distances ``d`` (metres)."""
        d = np.asarray(d, dtype=float)
        return self.excess_m2 * (np.maximum(d, 0.0) / self.distance_ref_m) ** self.alpha

    def summary(self) -> dict:
        return {"excess_m2": float(self.excess_m2), "alpha": float(self.alpha),
                "distance_ref_m": float(self.distance_ref_m), "kappa": float(self.kappa),
                "n_held_out": int(self.n)}


#: Median of a chi-square variable with one degree of freedom: median(e²) / this estimates
#: the variance of normal errors robustly (Source: scipy.special.chdtri(1, 0.5) = 0.45494).
_MEDIAN_CHI2_1 = 0.454936423119572


def fit_error_growth(errors_m, distance_m, base_se_m, *, n_bins: int = 8,
                     exclude_gross: bool = False) -> ErrorGrowth:
    """Fit the growth of prediction error with distance from held-out errors, and calibrate.

    Parameters
    ----------
    errors_m : array_like, shape ``(n,)``
        Held-out prediction errors (prediction minus observation), metres.
    distance_m : array_like, shape ``(n,)``
        Distance of each held-out pick to the nearest datum that predicted it.
    base_se_m : array_like, shape ``(n,)`` or scalar
        The model's own standard error at each held-out pick (noise plus parameter
        uncertainty).
    n_bins : int, default 8
        Distance classes (equal counts).
    exclude_gross : bool, default False
        Leave out gross errors first — beyond 5 standard errors of a first fit scaled on the
        median error, so that legitimately larger errors far from data stay in: the growth of
        the error of good data, for a check that looks for the gross errors (a mistraced
        stretch, a fault) which would otherwise widen its own tolerance.

    Returns
    -------
    ErrorGrowth

    Notes
    -----
    Like an empirical variogram of the prediction errors (Cressie 1993, ch. 2): held-out
    errors are grouped into distance classes; in each, the error variance is estimated
    robustly as ``median(e²) / 0.4549`` (so that a mistraced stretch or a fault does not
    inflate it) and the model's own variance is subtracted. A power law
    ``excess(d) = excess_m2 · (d / d_ref)^alpha`` is fitted to the positive excesses by least
    squares in log–log, ``alpha`` held within 0.5–2 (1 when fewer than two classes have an
    excess). Then ``kappa`` scales the whole standard error so that 95 % of the held-out
    errors lie within ±1.96 standard errors: the empirical calibration of prediction
    intervals by cross-validation (the idea of split-conformal prediction, Vovk, Gammerman &
    Shafer 2005; here with a scale fitted on the same held-out errors).

    References
    ----------
    Cressie, N. (1993). *Statistics for Spatial Data*, revised ed. Wiley, New York.
    https://doi.org/10.1002/9781119115151

    Vovk, V., Gammerman, A. & Shafer, G. (2005). *Algorithmic Learning in a Random World*.
    Springer, New York. https://doi.org/10.1007/b106715

    Examples
    --------
    >>> import numpy as np
    >>> rng = np.random.default_rng(1)
    >>> d = rng.uniform(1, 100, 4000)
    >>> e = rng.normal(0, 1, 4000) * np.sqrt(1 + 0.04 * d)   # variance 1 + 0.04 d
    >>> g = fit_error_growth(e, d, 1.0)     # true excess at d_ref ≈ 50 m: 0.04 × 50 = 2 m²
    >>> 1.6 < g.excess_m2 < 2.5 and 0.7 < g.alpha < 1.4 and 0.9 < g.kappa < 1.1
    True
    """
    e = np.asarray(errors_m, dtype=float).reshape(-1)
    d = np.asarray(distance_m, dtype=float).reshape(-1)
    s = np.broadcast_to(np.asarray(base_se_m, dtype=float), e.shape).astype(float)
    ok = np.isfinite(e) & np.isfinite(d) & np.isfinite(s)
    e, d, s = e[ok], d[ok], s[ok]
    if exclude_gross and len(e) >= 10:
        # a first fit, scaled on the median error (robust), tells how large an error may be at
        # its distance; errors beyond 5 of those standard errors are gross and left out
        g0 = fit_error_growth(e, d, s, n_bins=n_bins)
        se0 = np.sqrt(s ** 2 + g0.excess_variance(d))
        with np.errstate(divide="ignore", invalid="ignore"):
            z0 = np.abs(e) / se0
        k0 = float(np.nanmedian(z0)) / 0.6744897501960817  # median |z| of a normal variable
        keep = ~(z0 > 5.0 * k0) if k0 > 0 else np.ones(len(e), bool)
        if keep.sum() >= 10:
            e, d, s = e[keep], d[keep], s[keep]
    if len(e) < 10:
        raise InputError(f"fit_error_growth needs at least 10 held-out errors, got {len(e)}")
    d_ref = float(np.median(d))
    if not d_ref > 0:
        d_ref = float(max(np.max(d), 1e-6))
    order = np.argsort(d, kind="stable")
    centres, excess, weights = [], [], []
    for idx in np.array_split(order, max(1, min(int(n_bins), len(e) // 5))):
        var = float(np.median(e[idx] ** 2)) / _MEDIAN_CHI2_1
        ex = var - float(np.mean(s[idx] ** 2))
        dm = float(np.median(d[idx]))
        if ex > 0 and dm > 0:
            centres.append(dm)
            excess.append(ex)
            weights.append(len(idx))
    alpha = 1.0
    if len(centres) >= 2 and np.ptp(np.log(centres)) > 0:
        A = np.column_stack([np.ones(len(centres)), np.log(np.asarray(centres) / d_ref)])
        w = np.sqrt(np.asarray(weights, float))
        coef = np.linalg.lstsq(A * w[:, None], np.log(excess) * w, rcond=None)[0]
        alpha = float(np.clip(coef[1], 0.5, 2.0))
    if centres:
        # scale at d_ref from all positive classes with the slope fixed
        c = np.asarray(centres) / d_ref
        excess_m2 = float(np.exp(np.average(np.log(excess) - alpha * np.log(c), weights=weights)))
    else:
        excess_m2 = 0.0
    se = np.sqrt(s ** 2 + excess_m2 * (d / d_ref) ** alpha)
    with np.errstate(divide="ignore", invalid="ignore"):
        z = np.abs(e) / se
    z = z[np.isfinite(z)]
    kappa = float(np.quantile(z, 0.95) / 1.959963984540054) if len(z) else 1.0
    if not kappa > 0:
        kappa = 1.0
    return ErrorGrowth(excess_m2, alpha, d_ref, kappa, int(len(e)))
