"""One fitted surface (:class:`_Surface`, made by :func:`_fit_kind`): a model relaxed to its trend
plane beyond the data, with its standard errors.

Beyond the data: relaxation to the trend
----------------------------------------
The *trend* is the plane fitted to the same data (the ``'plane'`` model; if that model cannot
honour the boreholes, the total-least-squares plane of the picks). ``trend2`` and ``spline`` are
blended into it outside the convex hull ``H`` of all data (picks, boreholes, dip measurements)::

    f(x) = t(x) + τ(d_H(x)) · (g(x) − t(x)),   τ(d) = 1 − 3s² + 2s³,  s = clip(d / taper_m, 0, 1)

where ``g`` is the fitted model, ``t`` the trend and ``d_H`` the distance to the hull (0
inside). Inside the hull the model is untouched; its departure from the trend fades smoothly
(C¹) to zero ``taper_m`` outside it; beyond that the surface *is* the trend plane. With bounds
that the trend breaks, the hull also takes in those bound points, so that the blend honours them.

Uncertainty
-----------
``plane``/``trend2``: the least-squares prediction standard error
(:mod:`strikeline.surfaces.polynomial`); where ``trend2`` is blended into the trend,
``τ se_trend2 + (1 − τ) se_plane`` (an upper bound of the blend's standard error). ``spline``:
no cheap standard error exists for a GCV spline on thousands of nodes, so the cross-validation
RMSE ``r_cv`` (measured at the median distance ``d_cv`` from held-out picks to the data that
predicted them) is scaled by the distance ``d`` to the nearest datum::

    se(x) = sqrt(σ̂² + max(r_cv² − σ̂², 0) · (d / d_cv)²)

equal to the noise level ``σ̂`` (GCV estimate) at a datum, to ``r_cv`` at ``d_cv`` and growing
linearly beyond. Without cross-validation ``r_cv = sqrt(V_GCV)`` and ``d_cv`` is the median
nearest-neighbour spacing of the picks. When the error's growth with distance was fitted to
held-out errors (:func:`strikeline.stats.fit_error_growth`), every model's standard error is
instead its parameter part and that growth, calibrated (:meth:`_Surface.standard_error`).
"""
from __future__ import annotations

import dataclasses

import numpy as np
from scipy.spatial import cKDTree

from strikeline.errors import UndeterminedError
from strikeline.surfaces.bounded import BOUND_TOLERANCE_M
from strikeline.surfaces.data import _Data
from strikeline.surfaces.hull import _Hull, _taper
from strikeline.surfaces.polynomial import _Poly, _fit_poly
from strikeline.surfaces.spline import _fit_tps


class _Surface:
    def __init__(self, kind, core, trend, data: _Data, taper_m, hull=None, tree=None):
        self.kind = kind
        self.core = core
        self.trend = trend
        self.origin = data.origin
        self.scale = data.scale
        self.taper_m = float(taper_m)
        self.hull = hull if hull is not None else _Hull(data.all_xy())
        self.tree = tree if tree is not None else cKDTree(data.all_xy())
        self.data_xy = data.all_xy()
        # The hull of the data and of the map-unit bound points the trend breaks: there the
        # model stays untapered, so that the blend honours every bound (see _fit_kind).
        self.bound_hull = None
        self.se_cv = None  # (rmse_m, distance_m): the spline's standard error without growth
        self.growth = None  # ErrorGrowth from cross-validation, when there was one
        self.noise_floor_m = 0.0  # the stated pick error: floor of the model's own error
        self.picks_per_segment = 1.0  # shared errors along contacts: the design effect's square
        self.n_fit = data.n

    def _uv(self, x, y):
        return (x - self.origin[0]) / self.scale, (y - self.origin[1]) / self.scale

    def _taper_hull(self):
        return self.hull if self.bound_hull is None else self.bound_hull

    def value(self, x, y, *, by_point=False):
        """The surface at points; ``by_point``: each value independent of the other points asked
        for (see :func:`strikeline.surfaces.kernel._kernel_sum`)."""
        u, v = self._uv(x, y)
        f = self.core.value_u(u, v, by_point=True) if by_point and not isinstance(self.core, _Poly) \
            else self.core.value_u(u, v)
        if self.trend is not None:
            tau, _ = _taper(self._taper_hull().distance(x, y), self.taper_m)
            t = self.trend.value_u(u, v)
            f = t + tau * (f - t)
        return f

    def gradient(self, x, y):
        u, v = self._uv(x, y)
        gu, gv = self.core.grad_u(u, v)
        if self.trend is not None:
            d, dx, dy = self._taper_hull().distance(x, y, grad=True)
            tau, dtau = _taper(d, self.taper_m)
            tu, tv = self.trend.grad_u(u, v)
            diff = self.core.value_u(u, v) - self.trend.value_u(u, v)
            gu = tu + tau * (gu - tu) + diff * dtau * dx * self.scale
            gv = tv + tau * (gv - tv) + diff * dtau * dy * self.scale
        return gu / self.scale, gv / self.scale

    def noise_m(self):
        """The pick noise the model carries: its own estimate, never below the stated pick
        error (a spline that interpolates noisy picks estimates no noise, yet at a pick it is
        as wrong as the pick)."""
        own = self.core.sigma_m if isinstance(self.core, _Poly) else float(self.core.info["sigma_m"])
        own = own if np.isfinite(own) else 0.0
        return max(own, self.noise_floor_m)

    def base_se(self, x, y):
        """Standard error of a NEW pick predicted by the model: noise and parameter part (no
        distance growth)."""
        return np.sqrt(self.noise_m() ** 2 + self.param_se(x, y) ** 2)

    def param_se(self, x, y):
        """Standard error of the surface itself from its parameters, inflated by the design
        effect ``sqrt(m)``, ``m`` the number of picks that share one error (those within one
        correlation length along a contact; Kish 1965, the design effect of cluster samples
        with highly correlated members). For the spline, ``noise · sqrt(edf · m / n)``, at
        most the noise (the average leverage ``edf / n`` of a linear smoother, Hastie &
        Tibshirani 1990, with the same effect).

        References
        ----------
        Kish, L. (1965). *Survey Sampling*. Wiley, New York.

        Hastie, T. J. & Tibshirani, R. J. (1990). *Generalized Additive Models*. Chapman &
        Hall, London.
        """
        if isinstance(self.core, _Poly):
            u, v = self._uv(x, y)
            se = self.core.param_se_u(u, v)  # x and y may broadcast (a grid's row and column)
            if self.trend is not None:
                x, y = np.broadcast_arrays(x, y)
                d = self._taper_hull().distance(x.ravel(), y.ravel())
                tau, _ = _taper(np.reshape(d, x.shape), self.taper_m)
                se = tau * se + (1 - tau) * self.trend.param_se_u(u, v)
            return se * np.sqrt(self.picks_per_segment)
        edf = float(self.core.info.get("edf", 0.0))
        frac = min(1.0, edf * self.picks_per_segment / max(self.n_fit, 1))
        return np.full(np.broadcast_shapes(np.shape(x), np.shape(y)), self.noise_m() * np.sqrt(frac))

    def distance(self, x, y):
        return self.tree.query(np.column_stack([np.ravel(x), np.ravel(y)]),
                               workers=-1)[0].reshape(np.shape(x))

    def needs_distance(self) -> bool:
        """Whether :meth:`standard_error` depends on the distance to the nearest datum."""
        return self.growth is not None or not isinstance(self.core, _Poly)

    def standard_error(self, x, y, *, distance=None):
        """Standard error of the SURFACE (not of a new pick): the parameter part and the
        growth with distance from data, times the calibration factor. ``distance``: the
        distance of each point to the nearest datum when already known (else a KD-tree search);
        ``x`` and ``y`` may broadcast (a grid's columns as a row and its rows as a column,
        ``distance`` of their shape), which gives the values of the cells asked for one by one."""
        shape = np.broadcast_shapes(np.shape(x), np.shape(y))
        dist = (lambda: self.distance(*np.broadcast_arrays(x, y))) if distance is None else (
            lambda: np.reshape(distance, shape))
        if self.growth is not None:
            g = self.growth
            # the calibration factor scales the growth fitted against the stated errors; the
            # parameter part comes from the fit's own residuals and is never scaled down
            return np.sqrt((max(g.kappa, 1.0) * self.param_se(x, y)) ** 2 +
                           g.kappa ** 2 * g.excess_variance(dist()))
        if isinstance(self.core, _Poly):
            return self.base_se(x, y)
        rmse, dcv = self.se_cv
        sigma = self.core.info["sigma_m"]
        d = dist()
        excess = max(rmse ** 2 - sigma ** 2, 0.0)
        return np.sqrt(sigma ** 2 + excess * (d / dcv) ** 2)

    def check_se(self, x, y):
        """The forecast's own standard error for the misfit check, without pick noise: the
        parameter part and the (robust, uncalibrated) growth with distance from the training
        data — not the calibration factor, which the misfits being looked for would inflate."""
        var = self.param_se(x, y) ** 2
        if self.growth is not None:
            var = var + self.growth.excess_variance(self.distance(x, y))
        return np.sqrt(var)


def _fit_kind(kind, data: _Data, *, smoothing, lam, taper_m, systems=None) -> _Surface:
    """The model ``kind`` fitted to ``data``; ``systems``: the spline's pick systems of a superset
    of the picks (:class:`~strikeline.surfaces.reduced.PickSystems`), whose kernel it reuses."""
    if kind == "plane":
        return _Surface(kind, _fit_poly(1, data, kind), None, data, taper_m)
    core = _fit_poly(2, data, kind) if kind == "trend2" else _fit_tps(data, smoothing, lam, systems=systems)
    try:
        trend = _fit_poly(1, data, "plane")
    except UndeterminedError:
        trend = None
    if trend is None and data.n_bounds:  # the plane cannot honour the units: the trend ignores them
        try:
            trend = _fit_poly(1, dataclasses.replace(data, c_xy=np.empty((0, 2)), c_lo=np.empty(0),
                                                     c_hi=np.empty(0)), "plane")
        except UndeterminedError:
            trend = None
    if trend is None:
        trend = _fit_poly(1, _Data(data.p_xy, data.p_z, np.empty((0, 2)), np.empty(0),
                                   np.empty(0), np.empty((0, 2)), np.empty((0, 2)), np.empty(0),
                                   data.origin, data.scale, data.footprint_m,
                                   data.pick_sigma_m), "plane")
    surface = _Surface(kind, core, trend, data, taper_m)
    if data.n_bounds:
        # Core and trend each honouring a bound makes every blend of them honour it; where the
        # trend breaks one, the core is kept untapered out to that point.
        uc = data.u(data.c_xy)
        t = trend.value_u(uc[:, 0], uc[:, 1])
        broken = (t > data.c_hi + BOUND_TOLERANCE_M) | (t < data.c_lo - BOUND_TOLERANCE_M)
        if broken.any():
            surface.bound_hull = _Hull(np.vstack([data.all_xy(), data.c_xy[broken]]))
    return surface
