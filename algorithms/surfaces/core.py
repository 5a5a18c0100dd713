"""Surface models of a geological contact: plane, quadratic trend, thin-plate spline, auto.

:func:`fit_surface` fits a height field ``z(x, y)`` to elevation picks and returns a
:class:`SurfaceModel` that evaluates it at points or on a :class:`~strikeline.geometry.grid.Grid`, with
its gradient, local dip, standard error and distance to data.

Models
------
``'plane'``
    Total-least-squares plane (:func:`strikeline.attitude.fitting.fit_plane`) when only picks are given;
    with boreholes or dip measurements a weighted least-squares plane (vertical residuals), so
    that the constraints can enter as rows and inequalities.
``'trend2'``
    Quadratic trend surface ``z = c₀ + c₁u + c₂v + c₃u² + c₄uv + c₅v²`` by weighted least
    squares.
``'spline'``
    Thin-plate smoothing spline (kernel ``r² log r`` plus a linear polynomial; Duchon 1977,
    Wahba 1990), smoothing by generalized cross-validation (Craven & Wahba 1979), by grouped
    k-fold cross-validation, or fixed. Without smoothing it interpolates the picks.
``'auto'``
    Fits all three, scores each by grouped k-fold cross-validation RMSE on held-out picks
    (:mod:`strikeline.stats`) and keeps the simplest model within one standard error of the
    best (or the best, ``selection='min'``). Every score is kept in ``cv_rmse_m``.

Pipeline of a fit
-----------------
1. Picks are thinned to one centroid per lattice cell (:mod:`strikeline.picks.thinning`), at most
   ``max_points`` of them, each labelled with the majority group of its picks (or one per
   cell and group, ``thin_by_group=True``).
2. Coordinates are centred on the mean position of all data and divided by their RMS distance
   from it (``u = (x - x₀)/L``, ``v = (y - y₀)/L``) for conditioning; results do not depend on
   it (``params['origin_m']``, ``params['scale_m']`` give ``x₀, y₀`` and ``L``).
3. Boreholes and dip measurements are added as constraints (below) and never held out in
   cross-validation.

Beyond the data: relaxation to the trend
----------------------------------------
The *trend* is the plane fitted to the same data (the ``'plane'`` model; if that model cannot
honour the boreholes, the total-least-squares plane of the picks). ``trend2`` and ``spline``
are blended into it outside the convex hull ``H`` of all data (picks, boreholes, dip
measurements)::

    f(x) = t(x) + τ(d_H(x)) · (g(x) − t(x)),   τ(d) = 1 − 3s² + 2s³,  s = clip(d / taper_m, 0, 1)

where ``g`` is the fitted model, ``t`` the trend and ``d_H`` the distance to the hull (0
inside). Inside the hull the model is untouched; its departure from the trend fades smoothly
(C¹) to zero ``taper_m`` outside it; beyond that the surface *is* the trend plane. The default
``taper_m`` is a quarter of the square root of the hull's area (at least ``reach_m``).

Constraints
-----------
Boreholes ``(x, y, z[, sigma_m])``
    Every model passes within ``sigma_m`` of every borehole (exactly when ``sigma_m = 0``).
    ``plane``/``trend2``: the boreholes are observation rows (weighted like picks) **and**
    inequality constraints ``|f(x_b) − z_b| <= σ_b``, solved as least squares with linear
    inequality constraints through a least-distance problem and non-negative least squares
    (Lawson & Hanson 1974, ch. 23); a model that cannot pass within the stated errors raises
    :class:`~strikeline.errors.UndeterminedError` (``auto`` then skips it). ``spline``: each
    borehole is a datum with noise variance ``σ_b²`` (weight ``σ_b²/b̂`` in the system, see
    below); a borehole left outside its error gets the weight that puts it on the edge of its
    error band (Sherman–Morrison update of one diagonal entry), and any still outside after
    that is interpolated exactly.
Dip measurements ``(x, y, dip_deg, dip_direction_deg[, sigma_deg])``
    A measurement states the gradient ``∇z = −tan(dip)·(sin dd, cos dd)``, with standard error
    ``σ_g = σ_rad / cos²(dip)`` per component (the derivative of ``tan``; it bounds the error
    from the dip direction, ``tan(dip)·σ_rad``, too). It enters every model as two linear
    observations of the surface's slope, east and north, taken as central differences over
    the measurement's footprint ``p ± h·e`` (``h = orientation_footprint_m``, default half the
    median spacing of the picks). For ``plane`` and ``trend2`` the central difference equals the
    exact gradient; for ``spline`` it makes the observation a combination of point values of the
    kernel (generalized Hermite–Birkhoff interpolation; Hillier et al. 2014 for the approach),
    because the point derivative of the ``r² log r`` kernel in both arguments is unbounded at
    zero distance (its second derivative has a logarithmic singularity). Weights: plane/trend2
    ``1/σ_g`` against ``1/σ_pick`` for picks (``σ_pick`` from the residuals of the fit without
    constraints unless given), and ``sigma_deg = 0`` makes the two slopes equality
    constraints; spline: noise variance ``σ_g²`` against the spline's own Bayesian scale
    ``b̂ = σ̂²/(nλ)`` from the GCV fit of the picks (the Bayesian interpretation of the
    smoothing spline, Wahba 1990), ``sigma_deg = 0`` gives exact slopes. The smoothing λ is
    always chosen on the picks alone.

Uncertainty
-----------
``plane``/``trend2``: the least-squares prediction standard error of a new pick,
``se(x) = sqrt(σ̂² + a(x)ᵀ C a(x))`` with ``a(x)`` the basis at ``x``, ``C`` the coefficient
covariance scaled by the a-posteriori variance factor and ``σ̂`` the residual standard error;
where ``trend2`` is blended into the trend, ``τ se_trend2 + (1 − τ) se_plane`` (an upper bound
of the blend's standard error). ``spline``: no cheap standard error exists for a GCV spline on
thousands of nodes, so the cross-validation RMSE ``r_cv`` (measured at the median distance
``d_cv`` from held-out picks to the data that predicted them) is scaled by the distance ``d`` to
the nearest datum::

    se(x) = sqrt(σ̂² + max(r_cv² − σ̂², 0) · (d / d_cv)²)

equal to the noise level ``σ̂`` (GCV estimate) at a datum, to ``r_cv`` at ``d_cv`` and growing
linearly beyond. Without cross-validation ``r_cv = sqrt(V_GCV)`` and ``d_cv`` is the median
nearest-neighbour spacing of the picks.

Extrapolation flag
------------------
:meth:`SurfaceModel.is_extrapolated` is ``distance_to_data(x, y) > reach_m``. The default
``reach_m`` is the 95th percentile of the distance to the nearest datum over the data's convex
hull: the biggest gaps inside the hull (5 % of its area) and everything more than that
distance outside it are flagged.
"""
from __future__ import annotations

import dataclasses
import os
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Callable, Mapping

import numpy as np
from scipy import linalg, sparse
from scipy.interpolate import RectBivariateSpline
from scipy.optimize import minimize_scalar, nnls
from scipy.spatial import ConvexHull, cKDTree
from scipy.spatial import QhullError

from strikeline.stats import (CVScore, ErrorGrowth, ModelChoice, SELECTION_RULES,
                                 choose_model, cross_validate, fit_error_growth,
                                 gcv_from_spectrum, holdout_block_m, make_folds, TRIM_FRACTION,
                                 segment_groups)
from strikeline.errors import CancelledError, InputError, UndeterminedError
from strikeline.attitude.fitting import fit_plane
from strikeline.stats.robust import robust_lstsq
from strikeline.geometry.grid import Grid
from strikeline.geometry.orientation import dip_from_normal, strike_from_dip_direction
from strikeline.picks.thinning import thin_picks

__all__ = [
    "MODELS",
    "MODEL_CHOICES",
    "SMOOTHING_CHOICES",
    "SurfaceModel",
    "GridEvaluation",
    "fit_surface",
    "distance_to_data",
    "tps_kernel",
]

#: Fitted model kinds, simplest first (the order of the one-standard-error rule).
MODELS = ("plane", "trend2", "spline")
#: Valid ``model`` values of :func:`fit_surface`.
MODEL_CHOICES = MODELS + ("auto",)
#: Valid string values of ``smoothing``.
SMOOTHING_CHOICES = ("gcv", "kfold", "discrepancy")
#: Default standard error of a dip measurement: a typical compass-clinometer repeatability.
DEFAULT_ORIENTATION_SIGMA_DEG = 5.0
#: Steepest dip a height field z(x, y) can follow; steeper measurements are refused.
MAX_DIP_DEG = 89.0
#: Default error allowed between coarse-grid interpolation and full evaluation (issue 4).
GRID_TOLERANCE_M = 0.1
#: Percentile of the hull's distance-to-data that defines the default ``reach_m``.
REACH_PERCENTILE = 95.0
#: Default ``taper_m`` as a fraction of the square root of the data hull's area.
TAPER_FRACTION = 0.25
#: Pick standard error used when it can neither be given nor estimated (no residual freedom).
FALLBACK_PICK_SIGMA_M = 1.0
#: Floor of estimated pick standard errors (exact synthetic data would give zero weights).
PICK_SIGMA_FLOOR_M = 1e-3
#: Relative rank tolerance of least-squares designs.
_RANK_RTOL = 1e-10
#: Elements per kernel block during evaluation (memory per block: 8 bytes each, twice).
_BLOCK_ELEMENTS = 1 << 19


# ============================================================================================
# Small helpers
# ============================================================================================
def _choice(value, choices, name):
    if not isinstance(value, str) or value not in choices:
        raise InputError(f"{name} must be one of {', '.join(map(repr, choices))}; got {value!r}")
    return value


def _check_cancel(is_cancelled, what):
    if is_cancelled is not None and is_cancelled():
        raise CancelledError(f"{what} was cancelled")


def tps_kernel(r2):
    """Thin-plate spline kernel ``φ(r) = r² log r`` evaluated from squared distances.

    Parameters
    ----------
    r2 : array_like
        Squared distances ``r²`` (``>= 0``).

    Returns
    -------
    ndarray
        ``0.5 · r² · log(r²)``, with ``φ(0) = 0``.

    References
    ----------
    Duchon, J. (1977). Splines minimizing rotation-invariant semi-norms in Sobolev spaces.
    In W. Schempp & K. Zeller (eds.), *Constructive Theory of Functions of Several Variables*,
    Lect. Notes Math. 571, Springer, Berlin, 85–100.
    https://doi.org/10.1007/BFb0086566
    """
    r2 = np.asarray(r2, dtype=float)
    out = np.log(np.maximum(r2, 1e-300))
    out *= r2
    out *= 0.5
    return out


def _pairwise_r2(a, b):
    d = np.subtract.outer(a[:, 0], b[:, 0])
    d *= d
    e = np.subtract.outer(a[:, 1], b[:, 1])
    e *= e
    d += e
    return d


def _kernel_sum(u, v, cu, cv, w, *, grad=False):
    """``Σ_j w_j φ(|p − c_j|)`` (and its gradient) for many points, blockwise on two threads."""
    n, m = len(u), len(cu)
    if n == 0:
        return (np.empty(0), np.empty(0), np.empty(0)) if grad else np.empty(0)
    rows = max(1, _BLOCK_ELEMENTS // max(m, 1))
    starts = list(range(0, n, rows))
    out = np.empty(n)
    gu = np.empty(n) if grad else None
    gv = np.empty(n) if grad else None

    def block(a):
        b = min(a + rows, n)
        du = np.subtract.outer(u[a:b], cu)
        dv = np.subtract.outer(v[a:b], cv)
        r2 = du * du
        r2 += dv * dv
        lg = np.log(np.maximum(r2, 1e-300))
        if grad:
            t = lg + 1.0
            t *= w
            t[r2 == 0.0] = 0.0
            gu[a:b] = (du * t).sum(axis=1)
            gv[a:b] = (dv * t).sum(axis=1)
        lg *= r2
        out[a:b] = 0.5 * (lg @ w)

    workers = min(2, os.cpu_count() or 1, len(starts))
    if workers > 1:
        with ThreadPoolExecutor(max_workers=workers) as ex:
            list(ex.map(block, starts))
    else:
        for a in starts:
            block(a)
    return (out, gu, gv) if grad else out


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


# ============================================================================================
# Convex hull of the data (for the taper)
# ============================================================================================
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


# ============================================================================================
# Prepared data
# ============================================================================================
@dataclass(frozen=True)
class _Data:
    """Picks and constraints in normalised coordinates (internal)."""

    p_xy: np.ndarray      # (n, 2) metres
    p_z: np.ndarray       # (n,)
    b_xy: np.ndarray      # (nb, 2)
    b_z: np.ndarray
    b_sig: np.ndarray     # metres, >= 0
    o_xy: np.ndarray      # (no, 2)
    o_g: np.ndarray       # (no, 2) gradient dz/dx, dz/dy (m/m)
    o_sig: np.ndarray     # (no,) slope standard error (m/m)
    origin: np.ndarray    # (2,)
    scale: float          # metres
    footprint_m: float
    pick_sigma_m: float | None
    # Inequalities lo <= z(x, y) <= hi (unit polygons of the map; strikeline.surfaces.units); like
    # boreholes never held out, but not data: they widen neither the hull nor the reach.
    c_xy: np.ndarray = field(default_factory=lambda: np.empty((0, 2)))
    c_lo: np.ndarray = field(default_factory=lambda: np.empty(0))
    c_hi: np.ndarray = field(default_factory=lambda: np.empty(0))

    def u(self, xy):
        return (np.asarray(xy, float) - self.origin) / self.scale

    def all_xy(self):
        return np.vstack([self.p_xy, self.b_xy, self.o_xy])

    def fixed_xy(self):
        return np.vstack([self.b_xy, self.o_xy])

    def picks(self, index):
        return _Data(self.p_xy[index], self.p_z[index], self.b_xy, self.b_z, self.b_sig,
                     self.o_xy, self.o_g, self.o_sig, self.origin, self.scale, self.footprint_m,
                     self.pick_sigma_m, self.c_xy, self.c_lo, self.c_hi)

    @property
    def n_bounds(self):
        return len(self.c_lo)

    @property
    def n(self):
        return len(self.p_z)

    @property
    def has_constraints(self):
        return len(self.b_z) > 0 or len(self.o_sig) > 0 or self.n_bounds > 0


def _as_table(value, name, columns, optional_last):
    a = np.asarray(value, dtype=float)
    if a.ndim == 1 and a.size in (columns, columns + 1):
        a = a[None, :]
    ok = a.ndim == 2 and (a.shape[1] == columns or (optional_last and a.shape[1] == columns + 1))
    if not ok:
        raise InputError(f"{name} must be an (n, {columns}) array" +
                         (f" or (n, {columns + 1}) with a last column of standard errors"
                          if optional_last else "") + f"; got shape {a.shape}")
    if not np.all(np.isfinite(a)):
        raise InputError(f"{name} contains non-finite values; remove or fill those rows")
    return a


def _per_row(value, n, name):
    v = np.broadcast_to(np.asarray(value, dtype=float), (n,)).astype(float)
    if not np.all(np.isfinite(v)) or np.any(v < 0):
        raise InputError(f"{name} must be finite and >= 0, got {value!r}")
    return v


def _bounds_table(bounds):
    """``bounds`` as ``(x, y, lo, hi)`` columns: finite positions, lo <= hi, rows with both
    sides infinite dropped."""
    if bounds is None or np.size(bounds) == 0:
        return np.empty((0, 2)), np.empty(0), np.empty(0)
    a = np.asarray(bounds, dtype=float)
    if a.ndim == 1 and a.size == 4:
        a = a[None, :]
    if a.ndim != 2 or a.shape[1] != 4:
        raise InputError(f"bounds must be an (m, 4) array of x, y, lo, hi; got shape {a.shape}")
    if not np.all(np.isfinite(a[:, :2])) or np.any(np.isnan(a[:, 2:])):
        raise InputError("bounds contain non-finite positions or NaN limits; use -inf / +inf for "
                         "an open side and remove the other rows")
    if np.any(a[:, 2] > a[:, 3]):
        k = int(np.flatnonzero(a[:, 2] > a[:, 3])[0])
        raise InputError(f"bounds row {k} has lo {a[k, 2]} above hi {a[k, 3]}; give lo <= hi")
    a = a[np.isfinite(a[:, 2]) | np.isfinite(a[:, 3])]
    return a[:, :2].copy(), a[:, 2].copy(), a[:, 3].copy()


def _prepare(picks_xyz, boreholes, borehole_sigma_m, orientations, orientation_sigma_deg,
             footprint_m, pick_sigma_m, bounds=None) -> _Data:
    p = np.asarray(picks_xyz, float)
    c_xy, c_lo, c_hi = _bounds_table(bounds)
    if boreholes is None or np.size(boreholes) == 0:
        bh = np.empty((0, 4))
    else:
        t = _as_table(boreholes, "boreholes (x, y, z[, sigma_m])", 3, True)
        sig = t[:, 3] if t.shape[1] == 4 else _per_row(borehole_sigma_m, len(t),
                                                      "borehole_sigma_m")
        if np.any(sig < 0):
            raise InputError("borehole standard errors (sigma_m) must be >= 0")
        bh = np.column_stack([t[:, :3], sig])
    if orientations is None or np.size(orientations) == 0:
        ori = np.empty((0, 5))
    else:
        t = _as_table(orientations, "orientations (x, y, dip_deg, dip_direction_deg"
                      "[, sigma_deg])", 4, True)
        sig = t[:, 4] if t.shape[1] == 5 else _per_row(orientation_sigma_deg, len(t),
                                                      "orientation_sigma_deg")
        if np.any(sig < 0):
            raise InputError("orientation standard errors (sigma_deg) must be >= 0")
        dip = t[:, 2]
        bad = (dip < 0) | (dip > MAX_DIP_DEG)
        if np.any(bad):
            raise InputError(
                f"orientation dip_deg must lie between 0 and {MAX_DIP_DEG} degrees for a "
                f"surface z(x, y); got {dip[bad][0]}; leave out vertical measurements or "
                "model that contact by its trace")
        ori = np.column_stack([t[:, :4], sig])
    all_xy = np.vstack([p[:, :2], bh[:, :2], ori[:, :2]])
    origin = all_xy.mean(axis=0)
    scale = float(np.sqrt(np.mean(np.sum((all_xy - origin) ** 2, axis=1))))
    if not scale > 0:
        scale = 1.0
    dip_r = np.radians(ori[:, 2])
    dd_r = np.radians(ori[:, 3])
    grad = -np.tan(dip_r)[:, None] * np.column_stack([np.sin(dd_r), np.cos(dd_r)])
    o_sig = np.radians(ori[:, 4]) / np.cos(dip_r) ** 2
    if footprint_m is None:
        if len(p) >= 2:
            nn = cKDTree(p[:, :2]).query(p[:, :2], k=2)[0][:, 1]
            nn = nn[nn > 0]
            footprint_m = 0.5 * float(np.median(nn)) if len(nn) else 1e-3 * scale
        else:
            footprint_m = 1e-3 * scale
    elif not float(footprint_m) > 0:
        raise InputError(f"orientation_footprint_m must be a positive length in metres, got "
                         f"{footprint_m}")
    if pick_sigma_m is not None and not float(pick_sigma_m) > 0:
        raise InputError(f"pick_sigma_m must be a positive standard error in metres, got "
                         f"{pick_sigma_m}")
    return _Data(p[:, :2].copy(), p[:, 2].copy(), bh[:, :2].copy(), bh[:, 2].copy(),
                 bh[:, 3].copy(), ori[:, :2].copy(), grad, o_sig, origin, scale,
                 float(footprint_m), None if pick_sigma_m is None else float(pick_sigma_m),
                 c_xy, c_lo, c_hi)


# ============================================================================================
# Polynomial surfaces (plane, trend2)
# ============================================================================================
_TERMS = {1: ("1", "u", "v"), 2: ("1", "u", "v", "u^2", "u*v", "v^2")}


def _basis(u, v, degree):
    one = np.ones_like(u)
    if degree == 1:
        return np.stack([one, u, v], axis=-1)
    return np.stack([one, u, v, u * u, u * v, v * v], axis=-1)


def _basis_du(u, v, degree):
    z, one = np.zeros_like(u), np.ones_like(u)
    if degree == 1:
        return np.stack([z, one, z], axis=-1)
    return np.stack([z, one, z, 2 * u, v, z], axis=-1)


def _basis_dv(u, v, degree):
    z, one = np.zeros_like(u), np.ones_like(u)
    if degree == 1:
        return np.stack([z, z, one], axis=-1)
    return np.stack([z, z, one, z, u, 2 * v], axis=-1)


class _Poly:
    """A polynomial height field in normalised coordinates with its coefficient covariance."""

    def __init__(self, degree, coef, cov, sigma_m, info):
        self.degree = degree
        self.coef = np.asarray(coef, float)
        self.cov = np.asarray(cov, float)
        self.sigma_m = float(sigma_m)
        self.info = info

    def value_u(self, u, v):
        c = self.coef
        z = c[0] + c[1] * u + c[2] * v
        if self.degree == 2:
            z = z + c[3] * u * u + c[4] * u * v + c[5] * v * v
        return z

    def grad_u(self, u, v):
        c = self.coef
        if self.degree == 1:
            return np.full_like(u, c[1]), np.full_like(u, c[2])
        return c[1] + 2 * c[3] * u + c[4] * v, c[2] + c[4] * u + 2 * c[5] * v

    def se_u(self, u, v):
        return np.sqrt(self.sigma_m ** 2 + self.param_se_u(u, v) ** 2)

    def param_se_u(self, u, v):
        a = _basis(u, v, self.degree)
        q = np.einsum("...i,ij,...j->...", a, self.cov, a)
        return np.sqrt(np.maximum(q, 0.0))


def _lsi(R, qty, B, lo, hi):
    """Least squares with two-sided linear inequality constraints (Lawson & Hanson 1974).

    Minimises ``||R c − qty||`` (``R`` upper triangular, invertible) subject to
    ``lo <= B c <= hi`` (``lo = -inf`` or ``hi = +inf`` leaves a side open). Returns ``None``
    when the constraints cannot all hold.
    """
    c0 = linalg.solve_triangular(R, qty)
    bc0 = B @ c0
    lims = np.concatenate([lo, hi])
    lims = lims[np.isfinite(lims)]
    tol = 1e-9 * (1.0 + (np.max(np.abs(lims)) if len(lims) else 0.0))
    if np.all(bc0 >= lo - tol) and np.all(bc0 <= hi + tol):
        return c0
    G = linalg.solve_triangular(R, B.T, trans="T").T  # B R⁻¹
    E = np.vstack([G, -G])
    f = np.concatenate([lo - bc0, -(hi - bc0)])
    closed = np.isfinite(f)  # an open side (-inf) is no constraint
    E, f = E[closed], f[closed]
    # Least-distance programming: min ||w|| s.t. E w >= f, via NNLS on [Eᵀ; fᵀ] (L&H ch. 23).
    M = np.vstack([E.T, f[None, :]])
    e = np.zeros(M.shape[0])
    e[-1] = 1.0
    sol, _ = nnls(M, e, maxiter=50 * M.shape[1] + 100)
    r = M @ sol - e
    if abs(r[-1]) < 1e-12:
        return None
    w = -r[:-1] / r[-1]
    c = c0 + linalg.solve_triangular(R, w)
    bc = B @ c
    if np.any(bc < lo - 1e-6 * (1 + np.abs(lo))) or np.any(bc > hi + 1e-6 * (1 + np.abs(hi))):
        return None
    return c


def _lsi_feasible(R, qty, B, lo, hi):
    return len(B) == 0 or _lsi(R, qty, B, lo, hi) is not None


def _fit_poly(degree, data: _Data, kind) -> _Poly:
    """Plane (degree 1) or quadratic trend (degree 2) with boreholes and dip measurements."""
    up = data.u(data.p_xy)
    n = data.n
    p = len(_TERMS[degree])
    if degree == 1 and not data.has_constraints:
        fit = fit_plane(np.column_stack([data.p_xy, data.p_z]))  # raises UndeterminedError
        nx, ny, nz = fit.normal
        if abs(nz) < 1e-9:
            raise UndeterminedError("the fitted plane is vertical, so it has no elevation "
                                    "surface z(x, y); a vertical contact is better described "
                                    "by its trace")
        cx, cy, cz = fit.centroid
        ox, oy = data.origin
        coef = np.array([cz - (nx * (ox - cx) + ny * (oy - cy)) / nz,
                         -nx * data.scale / nz, -ny * data.scale / nz])
        A = _basis(up[:, 0], up[:, 1], 1)
        res = data.p_z - A @ coef
        dof = n - 3
        s = float(np.sqrt(res @ res / dof)) if dof > 0 else np.nan
        cov = (s ** 2 if dof > 0 else 0.0) * np.linalg.inv(A.T @ A)
        return _Poly(1, coef, cov, s, {"method": "total least squares (fit_plane)"})
    Ap = _basis(up[:, 0], up[:, 1], degree)
    if data.pick_sigma_m is not None:
        sp = data.pick_sigma_m
    else:
        sol, rss, rank, _ = np.linalg.lstsq(Ap, data.p_z, rcond=None) if n else (None, [], 0, 0)
        dof = n - rank
        if n and dof > 0:
            r = data.p_z - Ap @ sol
            sp = max(float(np.sqrt(r @ r / dof)), PICK_SIGMA_FLOOR_M)
        else:
            sp = FALLBACK_PICK_SIGMA_M
    ub = data.u(data.b_xy)
    uo = data.u(data.o_xy)
    Ab = _basis(ub[:, 0], ub[:, 1], degree)
    Gu = _basis_du(uo[:, 0], uo[:, 1], degree)
    Gv = _basis_dv(uo[:, 0], uo[:, 1], degree)
    gu, gv = data.o_g[:, 0] * data.scale, data.o_g[:, 1] * data.scale  # slope per unit u
    exact = data.o_sig <= 0
    # Exact measurements (sigma 0) are equality constraints below; in the objective they
    # weigh like a pick (a slope error of one pick sigma per unit of u).
    sg = np.where(exact, sp, data.o_sig * data.scale)
    A = np.vstack([Ap / sp, Ab / sp, Gu / sg[:, None], Gv / sg[:, None]])
    y = np.concatenate([data.p_z / sp, data.b_z / sp, gu / sg, gv / sg])
    name = "plane" if degree == 1 else "trend2"
    if len(A) < p:
        raise UndeterminedError(
            f"the {name} model needs at least {p} observations (picks, boreholes, dip "
            f"components); got {len(A)}; add picks or use a simpler model")
    Q, R = np.linalg.qr(A)
    dR = np.abs(np.diag(R))
    if dR.min() <= _RANK_RTOL * dR.max():
        raise UndeterminedError(
            f"the {name} model is undetermined by these data ({n} picks"
            + (" in too few directions" if n else "") + f", {len(data.b_z)} boreholes, "
            f"{len(data.o_sig)} dip measurements); add picks spread across the area, a dip "
            "measurement or boreholes, or use a simpler model")
    qty = Q.T @ y
    uc = data.u(data.c_xy)
    B = np.vstack([Ab, Gu[exact], Gv[exact], _basis(uc[:, 0], uc[:, 1], degree)])
    lo = np.concatenate([data.b_z - data.b_sig, gu[exact], gv[exact], data.c_lo])
    hi = np.concatenate([data.b_z + data.b_sig, gu[exact], gv[exact], data.c_hi])
    if len(B):
        c = _lsi(R, qty, B, lo, hi)
        if c is None and data.n_bounds and not _lsi_feasible(R, qty, B[:-data.n_bounds],
                                                             lo[:-data.n_bounds], hi[:-data.n_bounds]):
            c = None  # the boreholes / exact dips alone already fail: say so below
        elif c is None and data.n_bounds:
            raise UndeterminedError(
                f"the {name} model cannot keep the surface below ground where the units above "
                f"it crop out and above ground where the units below crop out (at all "
                f"{data.n_bounds} constraint points of the map's units); use a more flexible "
                "model (trend2, spline, auto) or check which units lie above and below")
        if c is None:
            raise UndeterminedError(
                f"the {name} model cannot pass within the stated errors of all "
                f"{len(data.b_z)} boreholes" + (f" and {int(exact.sum())} exact dip "
                                                 "measurements" if exact.any() else "")
                + "; use a more flexible model (trend2, spline, auto) or state larger "
                "errors (sigma_m, sigma_deg)")
    else:
        c = linalg.solve_triangular(R, qty)
    res = A @ c - y
    dof = len(y) - p
    factor = float(res @ res / dof) if dof > 0 else 1.0
    Rinv = linalg.solve_triangular(R, np.eye(p))
    cov = factor * (Rinv @ Rinv.T)
    return _Poly(degree, c, cov, sp * np.sqrt(factor),
                 {"method": "weighted least squares" + (" with linear inequality constraints"
                                                        if len(B) else ""),
                  "pick_sigma_prior_m": float(sp)})


def _fit_poly_robust(degree, data: _Data, scale_floor_m: float, *, max_iter: int = 50) -> _Poly:
    """Plane or quadratic trend fitted robustly, for scoring and the misfit check only.

    A mistraced stretch or a faulted block pulls a least-squares surface towards itself and
    so hides from a check against that surface. This fits the picks (and boreholes, rows of
    full weight; dip measurements are not used) with :func:`strikeline.stats.robust.robust_lstsq`
    — least trimmed squares covering 75 % of the rows, then Tukey's biweight, the scale never
    below ``scale_floor_m`` (the stated pick error); the methods and their references are
    there. Not used for the mapped surface itself.
    """
    up, ub = data.u(data.p_xy), data.u(data.b_xy)
    A = np.vstack([_basis(up[:, 0], up[:, 1], degree), _basis(ub[:, 0], ub[:, 1], degree)])
    y = np.concatenate([data.p_z, data.b_z])
    fixed = np.r_[np.zeros(data.n, bool), np.ones(len(data.b_z), bool)]
    coef, w, scale = robust_lstsq(A, y, fixed=fixed, scale_floor=max(scale_floor_m, PICK_SIGMA_FLOOR_M),
                                  coverage=1.0 - TRIM_FRACTION)
    N = (A * w[:, None]).T @ A
    cov = scale ** 2 * np.linalg.pinv(N)
    return _Poly(degree, coef, cov, scale, {"method": "robust (LTS concentration + biweight)"})


# ============================================================================================
# Thin-plate spline
# ============================================================================================
def _householder(T):
    """Householder QR of a tall ``(n, p)`` matrix: reflectors ``(v_k, β_k)`` and ``R`` (p×p)."""
    A = np.array(T, dtype=float)
    n, p = A.shape
    vs, betas = [], []
    for k in range(p):
        x = A[k:, k]
        alpha = -np.copysign(np.linalg.norm(x), x[0] if x[0] != 0 else 1.0)
        v = x.copy()
        v[0] -= alpha
        vv = v @ v
        beta = 2.0 / vv if vv > 0 else 0.0
        A[k:, k:] -= beta * np.outer(v, v @ A[k:, k:])
        vs.append(v)
        betas.append(beta)
    return vs, betas, np.triu(A[:p])


def _apply_qt(vs, betas, X):
    """``Qᵀ X`` for the Householder ``Q = H₀H₁…`` (rows of X), in O(n·cols) per reflector."""
    X = np.array(X, dtype=float)
    for k, (v, b) in enumerate(zip(vs, betas)):
        X[k:] -= b * np.outer(v, v @ X[k:])
    return X


def _apply_q(vs, betas, X):
    """``Q X``."""
    X = np.array(X, dtype=float)
    for k in range(len(vs) - 1, -1, -1):
        v, b = vs[k], betas[k]
        X[k:] -= b * np.outer(v, v @ X[k:])
    return X


class _Spectrum:
    """Eigen-decomposition of a TPS pick system for GCV (Wahba 1990).

    ``T = Q [R; 0]`` by three Householder reflections, so ``Qᵀ K Q`` costs ``O(n²)``; its
    trailing block ``Q₂ᵀ K Q₂ = U diag(μ) Uᵀ``.
    """

    def __init__(self, u, z):
        n = len(z)
        if n < 4:
            raise UndeterminedError(f"the spline model needs at least 4 picks, got {n}; "
                                    "use the plane model")
        T = np.column_stack([np.ones(n), u])
        vs, betas, R = _householder(T)
        dR = np.abs(np.diag(R))
        if dR.min() <= 1e-9 * dR.max():
            raise UndeterminedError(
                f"the spline model needs picks that are not all in one line ({n} picks are); "
                "use the plane model with a dip measurement, or add picks off the line")
        self.n, self.u, self.z, self.T = n, u, z, T
        self.K = tps_kernel(_pairwise_r2(u, u))
        QtKQ = _apply_qt(vs, betas, _apply_qt(vs, betas, self.K).T)  # K symmetric
        M = QtKQ[3:, 3:]
        mu, U = np.linalg.eigh(0.5 * (M + M.T))
        self.mu = np.clip(mu, 0.0, None)
        self.Q2U = _apply_q(vs, betas, np.vstack([np.zeros((3, n - 3)), U]))
        self.b = self.Q2U.T @ z
        e = np.zeros((n, 3))
        e[:3] = np.eye(3)
        self.Q1 = _apply_q(vs, betas, e)
        self.R1 = R

    def gcv(self, nlam):
        return gcv_from_spectrum(self.mu, self.b, self.n, nlam)

    def bhat(self, nlam):
        """Bayesian scale ``b̂ = σ̂² / (nλ)`` of the smoothing spline (Wahba 1990), finite as
        ``λ → 0``."""
        mu, b = self.mu, self.b
        with np.errstate(divide="ignore"):
            d = mu + nlam
            num = np.sum(np.where(d > 0, b * b / np.where(d > 0, d, 1.0) ** 2, 0.0))
            den = np.sum(np.where(d > 0, 1.0 / np.where(d > 0, d, 1.0), 0.0))
        return float(num / den) if den > 0 else 0.0

    def coefficients(self, nlam):
        """Radial coefficients and linear part for one or many ``nλ`` (columns)."""
        nl = np.atleast_1d(np.asarray(nlam, float))
        C = self.Q2U @ (self.b[:, None] / (self.mu[:, None] + nl[None, :]))
        D = linalg.solve_triangular(self.R1, self.Q1.T @ (self.z[:, None] - self.K @ C
                                                          - nl[None, :] * C))
        return C, D

    def lambda_grid(self, num=61):
        top = max(float(self.mu.max()), 1e-300)
        return top * np.logspace(-12.0, 2.0, num)  # nλ values


def _gcv_minimise(spec: _Spectrum):
    """``nλ`` minimising V(λ) over a log grid, refined by bounded Brent search; 0 allowed."""
    grid = spec.lambda_grid()
    V = spec.gcv(grid)[0]
    i = int(np.nanargmin(V))
    best_nl, best_v = grid[i], V[i]
    lo, hi = np.log(grid[max(i - 1, 0)]), np.log(grid[min(i + 1, len(grid) - 1)])
    if hi > lo:
        r = minimize_scalar(lambda t: float(spec.gcv(np.exp(t))[0][0]), bounds=(lo, hi),
                            method="bounded", options={"xatol": 1e-4})
        if r.fun < best_v:
            best_nl, best_v = float(np.exp(r.x)), float(r.fun)
    v0 = float(spec.gcv(0.0)[0][0])
    exact_ok = spec.mu.min() > 1e-12 * max(spec.mu.max(), 1e-300)
    if exact_ok and np.isfinite(v0) and v0 <= best_v:
        best_nl, best_v = 0.0, v0
    return best_nl, best_v


def _discrepancy_nlam(spec: _Spectrum, sigma_m: float) -> float:
    """``nλ`` at which the spline's RMS residual equals the stated pick error.

    Morozov's discrepancy principle (Morozov 1966; Wahba 1990, sect. 4.5): with the noise
    level known, smooth until the residuals are as large as the noise, no more. Generalized
    cross-validation assumes independent errors; with digitising errors shared along a
    contact it takes the correlated part for signal and interpolates the picks (Opsomer,
    Wang & Yang 2001), which here made the spline oscillate between contacts. ``rss(nλ)`` is
    monotone in ``nλ``, so a bisection in ``log nλ`` finds the root; when even the linear part
    alone leaves residuals within the noise, the largest ``nλ`` of the grid (the spline is
    then the plane), and when the noise is zero, GCV.

    References
    ----------
    Morozov, V. A. (1966). On the solution of functional equations by the method of
    regularization. *Soviet Mathematics Doklady*, 7, 414–417.

    Opsomer, J., Wang, Y. & Yang, Y. (2001). Nonparametric regression with correlated
    errors. *Statistical Science*, 16(2), 134–153. https://doi.org/10.1214/ss/1009213287
    """
    if not sigma_m > 0:
        return _gcv_minimise(spec)[0]
    target = spec.n * sigma_m ** 2
    grid = spec.lambda_grid()
    rss = spec.gcv(grid)[1]
    if rss[-1] <= target:
        return float(grid[-1])
    if rss[0] >= target:
        return float(grid[0])
    lo, hi = np.log(grid[0]), np.log(grid[-1])
    for _ in range(60):
        mid = 0.5 * (lo + hi)
        if float(spec.gcv(np.exp(mid))[1][0]) < target:
            lo = mid
        else:
            hi = mid
    return float(np.exp(0.5 * (lo + hi)))


class _TPS:
    """``s(u) = Σ w_j φ(|u − c_j|) + d₀ + d₁u + d₂v`` in normalised coordinates."""

    def __init__(self, centres, w, d, info):
        self.centres = centres
        self.w = w
        self.d = d
        self.info = info

    def value_u(self, u, v):
        s = _kernel_sum(u, v, self.centres[:, 0], self.centres[:, 1], self.w)
        return s + self.d[0] + self.d[1] * u + self.d[2] * v

    def grad_u(self, u, v):
        _, gu, gv = _kernel_sum(u, v, self.centres[:, 0], self.centres[:, 1], self.w,
                                grad=True)
        return gu + self.d[1], gv + self.d[2]


def _fit_tps(data: _Data, smoothing, lam=None) -> _TPS:
    """Thin-plate smoothing spline with boreholes and dip-measurement functionals."""
    up = data.u(data.p_xy)
    spec = _Spectrum(up, data.p_z)
    n = spec.n
    if lam is not None:
        nlam, how = n * float(lam), "kfold"
    elif isinstance(smoothing, tuple):  # ('discrepancy', sigma_m)
        nlam, how = _discrepancy_nlam(spec, float(smoothing[1])), "discrepancy"
    elif isinstance(smoothing, str):  # 'gcv', or 'kfold' whose grid search could not run
        nlam, _ = _gcv_minimise(spec)
        how = "gcv" if smoothing == "gcv" else "gcv (k-fold search failed)"
    else:
        nlam, how = n * float(smoothing), "fixed"
    if nlam == 0.0 and spec.mu.min() <= 1e-12 * max(spec.mu.max(), 1e-300):
        raise UndeterminedError(
            "the spline cannot interpolate these picks exactly: some lie at the same place "
            "(or nearly) with different elevations; use smoothing='gcv' or a smoothing > 0, "
            "or thin the picks (thin_cell_m)")
    V, rss, tr = spec.gcv(nlam)
    bhat = spec.bhat(nlam)
    sigma = float(np.sqrt(nlam * bhat))
    info = {"smoothing": nlam / n, "smoothing_method": how, "gcv_score_m2": float(V[0]),
            "edf": float(n - tr[0]),
            "sigma_m": sigma, "bayes_scale": bhat}
    nb, no = len(data.b_z), len(data.o_sig)
    if nb == 0 and no == 0 and data.n_bounds:  # picks only: the spectrum solves the system
        n3 = np.zeros(3)
        return _tps_bounded(data, _spectral_solver(spec, nlam), np.concatenate([data.p_z, n3]), up,
                            sparse.identity(n, format="csr"), bhat, info)
    if nb == 0 and no == 0 and data.n_bounds == 0:
        C, D = spec.coefficients(nlam)
        return _TPS(up, C[:, 0], D[:, 0], info)
    # Functionals as combinations of point values: picks, boreholes, then per measurement
    # the east and north central differences over p ± h e.
    h = data.footprint_m / data.scale
    uo = data.u(data.o_xy)
    fd = np.empty((4 * no, 2))
    fd[0::4] = uo + [h, 0.0]
    fd[1::4] = uo - [h, 0.0]
    fd[2::4] = uo + [0.0, h]
    fd[3::4] = uo - [0.0, h]
    X = np.vstack([up, data.u(data.b_xy), fd])
    npt = n + nb
    rows = np.concatenate([np.arange(npt), np.repeat(npt + np.arange(2 * no), 2)])
    cols = np.concatenate([np.arange(npt), npt + np.arange(4 * no)])
    vals = np.concatenate([np.ones(npt), np.tile([0.5 / h, -0.5 / h], 2 * no)])
    S = sparse.csr_matrix((vals, (rows, cols)), shape=(npt + 2 * no, len(X)))
    Phi = tps_kernel(_pairwise_r2(X, X))
    G = np.asarray(S @ (S @ Phi).T)
    G = 0.5 * (G + G.T)
    Tf = np.asarray(S @ np.column_stack([np.ones(len(X)), X]))
    y = np.concatenate([data.p_z, data.b_z, data.o_g[:, 0] * data.scale,
                        data.o_g[:, 1] * data.scale])
    sg2 = (data.o_sig * data.scale) ** 2
    if bhat > 0:
        lam_b = data.b_sig ** 2 / bhat
        lam_g = np.tile(sg2, 2) / bhat
    else:  # the picks fit a plane exactly: no scale to weigh against; treat constraints as exact
        lam_b = np.zeros(nb)
        lam_g = np.zeros(2 * no)
    m = len(y)
    A = np.zeros((m + 3, m + 3))
    A[:m, :m] = G
    A[:m, m:] = Tf
    A[m:, :m] = Tf.T
    rhs = np.concatenate([y, np.zeros(3)])
    bidx = n + np.arange(nb)

    def solve(lam_b, unit=None):
        inverse = _lu_solver(A, np.concatenate([np.full(n, nlam), lam_b, lam_g]))
        sol = inverse(rhs)
        h = None
        if unit is not None:
            E = np.zeros((m + 3, len(unit)))
            E[unit, np.arange(len(unit))] = 1.0
            h = inverse(E)[unit, :]
        return sol, h

    def violators(sol, lam_b):
        resid = lam_b * sol[bidx]  # datum minus fitted value at each borehole
        return np.abs(resid) > data.b_sig * (1 + 1e-9) + 1e-9

    if nb == 0 and data.n_bounds:  # nothing to weigh first: straight to the bounded solve
        return _tps_bounded(data, _lu_solver(A, np.concatenate([np.full(n, nlam), lam_g])), rhs, X,
                            S, bhat, info)
    sol, _ = solve(lam_b)
    over = violators(sol, lam_b)
    if np.any(over):
        # Boreholes left outside their error: find the weight that puts each on the edge of
        # its error band. With the others fixed, c_i(Λ) = c_i(0) / (1 + Λ h_ii) (Sherman-
        # Morrison), so |Λ c_i| = σ_i at Λ = σ_i / (|c_i(0)| − σ_i h_ii). Coupled boreholes
        # still outside after that are interpolated exactly.
        k = bidx[over]
        lam0 = np.where(over, 0.0, lam_b)
        sol0, h = solve(lam0, unit=k)
        c0 = np.abs(sol0[k])
        hii = np.diag(h)
        sig = data.b_sig[over]
        with np.errstate(divide="ignore", invalid="ignore"):
            edge = np.where((sig > 0) & (c0 > sig * hii), sig / (c0 - sig * hii), 0.0)
        lam_b = lam0.copy()
        lam_b[over] = np.clip(edge, 0.0, None) * (1 - 1e-9)
        sol, _ = solve(lam_b)
        over = violators(sol, lam_b)
        if np.any(over):
            lam_b = np.where(over, 0.0, lam_b)
            sol, _ = solve(lam_b)
    if data.n_bounds:
        return _tps_bounded(data, _lu_solver(A, np.concatenate([np.full(n, nlam), lam_b, lam_g])),
                            rhs, X, S, bhat, info)
    c = sol[:m]
    w = np.asarray(S.T @ c).ravel()
    info["n_nodes"] = int(len(X))
    return _TPS(X, w, sol[m:], info)


#: Most bound points the spline's active set holds at once (each is one more node).
MAX_ACTIVE_BOUNDS = 500
#: Most rounds of the spline's active-set loop.
MAX_BOUND_ITERATIONS = 50
#: Noise standard error (metres) of a bound point pinned to its bound in the spline.
BOUND_PIN_SIGMA_M = 1e-4
#: A bound counts as broken (and enters the active set) beyond this many metres.
BOUND_TOLERANCE_M = 0.01


def _lu_solver(A, diag_add):
    """``b -> M⁻¹ b`` for the spline system ``M = A + diag(diag_add, 0, 0, 0)`` (LU once)."""
    M = A.copy()
    idx = np.arange(len(diag_add))
    M[idx, idx] += diag_add
    try:
        lu = linalg.lu_factor(M, check_finite=False)
    except (linalg.LinAlgError, ValueError) as exc:
        raise UndeterminedError(f"the spline system with constraints is singular ({exc}); check for "
                                "boreholes or dip measurements at the same place as picks with other "
                                "elevations") from exc
    if not np.all(np.isfinite(lu[0])) or np.min(np.abs(np.diag(lu[0]))) == 0.0:
        raise UndeterminedError("the spline system with constraints is singular; check for picks or "
                                "boreholes at one place with different elevations, or use smoothing > 0")
    return lambda b: linalg.lu_solve(lu, b, check_finite=False)


def _spectral_solver(spec: _Spectrum, nlam):
    """``b -> M⁻¹ b`` for the pick system ``M = [[K + nλI, T], [Tᵀ, 0]]`` from its spectrum.

    With ``T = Q₁R`` and ``Q₂ᵀKQ₂ = U diag(μ) Uᵀ`` (:class:`_Spectrum`), the solution of
    ``(K + nλI) c + T d = r``, ``Tᵀc = t`` is ``c = c₁ + Q₂U diag(1/(μ + nλ)) (Q₂U)ᵀ (r − (K + nλI) c₁)``
    with ``c₁ = Q₁R⁻ᵀt``, and ``d = R⁻¹Q₁ᵀ(r − (K + nλI) c)``: ``O(n²)`` per right-hand side,
    no factorisation beyond the one GCV already made.
    """
    n = spec.n
    scale = 1.0 / (spec.mu + nlam)

    def solve(b):
        b = np.asarray(b, dtype=float)
        flat = b.ndim == 1
        b = b.reshape(n + 3, -1)
        r, t = b[:n], b[n:]
        c = spec.Q1 @ linalg.solve_triangular(spec.R1, t, trans="T")
        c = c + spec.Q2U @ (scale[:, None] * (spec.Q2U.T @ (r - spec.K @ c - nlam * c)))
        d = linalg.solve_triangular(spec.R1, spec.Q1.T @ (r - spec.K @ c - nlam * c))
        out = np.vstack([c, d])
        return out[:, 0] if flat else out

    return solve


def _tps_bounded(data: _Data, base_solve, rhs, X, S, bhat, info) -> _TPS:
    """The smoothing spline of a system ``M`` (functionals ``S`` of point values at ``X``;
    ``base_solve(b) = M⁻¹ b``) subject to ``lo <= s(x_c) <= hi`` at the bound points of
    ``data``, by a primal-dual active-set method.

    Bound points that the current spline breaks join the active set as data pinned at their
    bound with noise ``BOUND_PIN_SIGMA_M`` (weight ``σ²/b̂``, as boreholes); pinned points
    whose kernel weight - the Lagrange multiplier up to a positive factor - has the wrong sign
    (a point of an upper bound pulling the surface up) leave it; repeat until nothing changes
    (at most ``MAX_BOUND_ITERATIONS`` rounds and ``MAX_ACTIVE_BOUNDS`` points, most broken
    first). The system with ``k`` active points is bordered: the base system is solved once
    per new active point (from the GCV spectrum when there are only picks, else one LU) and each
    round solves the ``k × k`` Schur complement.

    References: Nocedal, J. & Wright, S. J. (2006). *Numerical Optimization*, 2nd ed. Springer,
    ch. 16 (active-set methods for quadratic programs). https://doi.org/10.1007/978-0-387-40065-5;
    Hintermüller, M., Ito, K. & Kunisch, K. (2002). The primal-dual active set strategy as a
    semismooth Newton method. *SIAM J. Optim.* 13(3), 865–888.
    https://doi.org/10.1137/S1052623401383558
    """
    m = S.shape[0]
    N = m + 3
    x0 = base_solve(rhs)
    # Boreholes are bounds too (|s - z_b| <= sigma_b), so that pinning the units' points cannot
    # push the surface out of a borehole's error band.
    uc = data.u(np.vstack([data.c_xy, data.b_xy]))
    lo = np.concatenate([data.c_lo, data.b_z - data.b_sig])
    hi = np.concatenate([data.c_hi, data.b_z + data.b_sig])
    Pc = np.vstack([np.asarray(S @ tps_kernel(_pairwise_r2(X, uc))), np.ones(len(uc)), uc.T])
    pin = (BOUND_PIN_SIGMA_M ** 2 / bhat) if bhat > 0 else 0.0
    active = np.zeros(len(uc), dtype=bool)
    side = np.zeros(len(uc))  # +1 pinned at hi, -1 at lo
    weight = np.zeros(len(uc))  # kernel weight of each pinned point
    Z = {}  # A⁻¹ P column of each point that was ever active
    x, v = x0, Pc.T @ x0
    rounds = 0
    for rounds in range(1, MAX_BOUND_ITERATIONS + 1):
        over = v - hi
        under = lo - v
        new = ((over > BOUND_TOLERANCE_M) | (under > BOUND_TOLERANCE_M)) & ~active
        scale = max(float(np.max(np.abs(weight))), 1e-300)
        drop = active & (side * weight > 1e-9 * scale)
        if not new.any() and not drop.any():
            break
        active &= ~drop
        room = MAX_ACTIVE_BOUNDS - int(active.sum())
        if room > 0 and new.any():
            cand = np.flatnonzero(new)
            cand = cand[np.argsort(-np.maximum(over[cand], under[cand]), kind="stable")[:room]]
            side[cand] = np.where(over[cand] > 0, 1.0, -1.0)
            active[cand] = True
        elif not drop.any():
            break  # the active set is full
        a = np.flatnonzero(active)
        fresh = [i for i in a if i not in Z]
        if fresh:
            cols = base_solve(Pc[:, fresh])
            Z.update({i: cols[:, j] for j, i in enumerate(fresh)})
        P = Pc[:, a]
        Za = np.column_stack([Z[i] for i in a]) if len(a) else np.empty((N, 0))
        Kaa = tps_kernel(_pairwise_r2(uc[a], uc[a]))
        schur = Kaa + pin * np.eye(len(a)) - P.T @ Za
        t = np.where(side[a] > 0, hi[a], lo[a])
        try:
            y = linalg.solve(schur, t - P.T @ x0, check_finite=False)
        except (linalg.LinAlgError, ValueError) as exc:
            raise UndeterminedError(f"the spline cannot honour the bounds of the map's units "
                                    f"({exc}); check for unit polygons that contradict the picks"
                                    ) from exc
        x = x0 - Za @ y
        weight[:] = 0.0
        weight[a] = y
        v = Pc.T @ x + tps_kernel(_pairwise_r2(uc, uc[a])) @ y
    a = np.flatnonzero(active)
    broken = np.maximum(np.maximum(v - hi, lo - v), 0.0)[:data.n_bounds]
    info.update({"n_bounds": int(data.n_bounds), "n_active_bounds": int(np.count_nonzero(a < data.n_bounds)),
                 "bound_iterations": int(rounds),
                 "n_bounds_broken": int(np.count_nonzero(broken > BOUND_TOLERANCE_M)),
                 "max_bound_violation_m": float(broken.max()) if len(broken) else 0.0,
                 "bound_method": "primal-dual active set (pinned bound points)"})
    w = np.concatenate([np.asarray(S.T @ x[:m]).ravel(), weight[a]])
    centres = np.vstack([X, uc[a]])
    info["n_nodes"] = int(len(centres))
    return _TPS(centres, w, x[m:], info)


# ============================================================================================
# A fitted surface (model + trend + taper)
# ============================================================================================
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

    def value(self, x, y):
        u, v = self._uv(x, y)
        f = self.core.value_u(u, v)
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
        u, v = self._uv(x, y)
        if isinstance(self.core, _Poly):
            se = self.core.param_se_u(u, v)
            if self.trend is not None:
                tau, _ = _taper(self._taper_hull().distance(x, y), self.taper_m)
                se = tau * se + (1 - tau) * self.trend.param_se_u(u, v)
            return se * np.sqrt(self.picks_per_segment)
        edf = float(self.core.info.get("edf", 0.0))
        frac = min(1.0, edf * self.picks_per_segment / max(self.n_fit, 1))
        return np.full(np.shape(x), self.noise_m() * np.sqrt(frac))

    def distance(self, x, y):
        return self.tree.query(np.column_stack([np.ravel(x), np.ravel(y)]),
                               workers=-1)[0].reshape(np.shape(x))

    def standard_error(self, x, y):
        """Standard error of the SURFACE (not of a new pick): the parameter part and the
        growth with distance from data, times the calibration factor."""
        if self.growth is not None:
            g = self.growth
            # the calibration factor scales the growth fitted against the stated errors; the
            # parameter part comes from the fit's own residuals and is never scaled down
            return np.sqrt((max(g.kappa, 1.0) * self.param_se(x, y)) ** 2 +
                           g.kappa ** 2 * g.excess_variance(self.distance(x, y)))
        if isinstance(self.core, _Poly):
            return self.base_se(x, y)
        rmse, dcv = self.se_cv
        sigma = self.core.info["sigma_m"]
        d = self.distance(x, y)
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


def _fit_kind(kind, data: _Data, *, smoothing, lam, taper_m) -> _Surface:
    if kind == "plane":
        return _Surface(kind, _fit_poly(1, data, kind), None, data, taper_m)
    core = _fit_poly(2, data, kind) if kind == "trend2" else _fit_tps(data, smoothing, lam)
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


def _kfold_lambda(data: _Data, folds, lam_grid):
    """λ minimising grouped k-fold CV error of the picks-only spline over a grid."""
    up = data.u(data.p_xy)
    sse = np.zeros(len(lam_grid))
    for k in np.unique(folds):
        tr, te = folds != k, folds == k
        spec = _Spectrum(up[tr], data.p_z[tr])
        C, D = spec.coefficients(spec.n * lam_grid)
        Kt = tps_kernel(_pairwise_r2(up[te], up[tr]))
        pred = Kt @ C + np.column_stack([np.ones(te.sum()), up[te]]) @ D
        sse += np.sum((pred - data.p_z[te, None]) ** 2, axis=0)
    return float(lam_grid[int(np.argmin(sse))])


# ============================================================================================
# Public model object
# ============================================================================================
def _evaluate_by_rows(fn, grid: Grid, *, cells_per_chunk: int, what: str, progress=None,
                      is_cancelled=None) -> np.ndarray:
    """``fn(X, Y)`` at every cell centre of ``grid``, a block of rows at a time (bounded memory)."""
    rows, cols = grid.shape
    xs, ys = grid.cell_centres()
    out = np.empty((rows, cols))
    chunk = max(1, cells_per_chunk // max(cols, 1))
    for r0 in range(0, rows, chunk):
        _check_cancel(is_cancelled, what)
        r1 = min(rows, r0 + chunk)
        X, Y = np.meshgrid(xs, ys[r0:r1])
        out[r0:r1] = fn(X, Y)
        if progress is not None:
            progress(r1 / rows)
    return out


@dataclass(frozen=True)
class GridEvaluation:
    """How :meth:`SurfaceModel.evaluate_grid` evaluated a grid.

    Attributes
    ----------
    method : {'coarse', 'full'}
        ``'coarse'``: every ``step_cells``-th cell evaluated, bicubic spline in between;
        ``'full'``: every cell evaluated.
    step_cells : int
    max_checked_error_m : float
        Largest difference between interpolated and fully evaluated values at the check cells
        (0 for ``'full'``).
    n_checked : int
        Number of check cells (cells holding data, random cells, coarse-cell centres).
    """

    method: str
    step_cells: int
    max_checked_error_m: float
    n_checked: int


@dataclass(frozen=True)
class SurfaceModel:
    """A fitted surface ``z(x, y)`` of a contact (see the module docstring for the methods).

    Attributes
    ----------
    kind : {'plane', 'trend2', 'spline'}
        The fitted model (for ``model='auto'`` the chosen one; also :attr:`chosen`).
    params : mapping
        Model parameters: ``terms`` and ``coefficients`` in normalised coordinates
        ``u = (x - origin_m[0]) / scale_m``, ``v = (y - origin_m[1]) / scale_m`` (plane,
        trend2); for the spline ``smoothing`` (λ of Wahba's criterion in those coordinates),
        ``edf`` (equivalent degrees of freedom ``tr A(λ)``), ``gcv_score_m2``, ``sigma_m``
        (noise estimate), ``n_nodes``; the trend plane's ``dip_deg``/``dip_direction_deg``.
    cv_rmse_m, cv_se_m : mapping of str to float
        Cross-validation RMSE and its standard error per model tried (``nan`` if it failed).
    cv_skipped : mapping of str to str
        Why a model has no score.
    cv_distance_m : float
        Median distance from held-out picks to the data that predicted them (chosen model).
    selection : str
        ``'auto/one_se'``, ``'auto/min'`` or ``'fixed'``.
    n_picks, n_used : int
        Picks given (finite) and representatives used after thinning.
    thin_cell_m : float or None
        Thinning cell size (``None``: not thinned).
    reach_m, taper_m : float
        Extrapolation distance and taper length (see module docstring).
    n_folds : int
        Folds used (0: no cross-validation).
    """

    kind: str
    params: Mapping
    cv_rmse_m: Mapping
    cv_se_m: Mapping
    cv_skipped: Mapping
    cv_distance_m: float
    selection: str
    n_picks: int
    n_used: int
    thin_cell_m: float | None
    reach_m: float
    taper_m: float
    n_folds: int
    _surface: _Surface = field(repr=False, compare=False)
    choice: ModelChoice | None = None
    growth: ErrorGrowth | None = None
    block_m: float | None = None
    check_block_m: float | None = None
    check_kind: str | None = None
    check_reason: str | None = None
    stated_sigma_m: float | None = None
    n_groups: int = 0
    _holdout: object = field(default=None, repr=False, compare=False)

    @property
    def data_xy(self) -> np.ndarray:
        """Positions ``(m, 2)`` of the data the model used: thinned picks, boreholes, dips."""
        return self._surface.data_xy.copy()

    @property
    def chosen(self) -> str:
        """The fitted model kind (same as :attr:`kind`)."""
        return self.kind

    # -- point queries -----------------------------------------------------------------------
    @staticmethod
    def _xy(x, y):
        x, y = np.broadcast_arrays(np.asarray(x, float), np.asarray(y, float))
        return x.shape, x.ravel(), y.ravel()

    def evaluate(self, x, y):
        """Elevation ``z`` (metres) of the surface at map points (broadcast ``x, y``)."""
        shape, x, y = self._xy(x, y)
        return self._surface.value(x, y).reshape(shape)

    def gradient(self, x, y):
        """Gradient ``(dz/dx, dz/dy)`` (m/m) at map points."""
        shape, x, y = self._xy(x, y)
        gx, gy = self._surface.gradient(x, y)
        return gx.reshape(shape), gy.reshape(shape)

    def dip(self, x, y):
        """Local ``(dip_direction_deg, dip_deg)`` of the surface at map points.

        Dip is ``atan(|∇z|)``; dip direction the azimuth of ``−∇z`` (clockwise from grid
        north; 0 where the surface is level).
        """
        gx, gy = self.gradient(x, y)
        dip = np.degrees(np.arctan(np.hypot(gx, gy)))
        dd = np.mod(np.degrees(np.arctan2(-gx, -gy)), 360.0)
        return np.where(np.hypot(gx, gy) > 0, dd, 0.0), dip

    def standard_error(self, x, y):
        """Standard error (metres) of the surface at map points (see module docstring)."""
        shape, x, y = self._xy(x, y)
        return self._surface.standard_error(x, y).reshape(shape)

    def distance_to_data(self, x, y):
        """Distance (metres) to the nearest datum used (thinned picks, boreholes, dips)."""
        return distance_to_data(x, y, self._surface.tree)

    def is_extrapolated(self, x, y):
        """``True`` where the nearest datum is farther than :attr:`reach_m`."""
        return self.distance_to_data(x, y) > self.reach_m

    def hull_distance(self, x, y):
        """Distance (metres) outside the convex hull of the data (0 inside)."""
        shape, x, y = self._xy(x, y)
        return self._surface.hull.distance(x, y).reshape(shape)

    def holdout_prediction(self, x, y):
        """The surface at map points as predicted WITHOUT the picks near them.

        Each point takes the model refitted without a square block of picks around it (side
        ``check_block_m``; two shifted checkerboards of blocks, the point taking the one it
        lies deepest inside; robust refits for plane and trend2, see
        :func:`_fit_poly_robust`), so a contact compared with it is compared with a forecast
        it did not shape. Returns ``(z_m, se_m, dz_dx, dz_dy)``: elevation, the forecast's
        own standard error WITHOUT pick noise (parameter uncertainty and growth with distance
        from the training data; add the error of whatever it is compared with) and the
        gradient. Without cross-validation, the fitted model itself.
        """
        shape, x, y = self._xy(x, y)
        if self._holdout is None:
            gx, gy = self._surface.gradient(x, y)
            out = (self._surface.value(x, y), self._surface.check_se(x, y), gx, gy)
        else:
            out = self._holdout.predict(x, y)
        return tuple(np.asarray(a).reshape(shape) for a in out)

    def borehole_misfit_m(self):
        """Model minus borehole elevation at each borehole (metres), in input order."""
        b = self.params["_boreholes"]
        if len(b) == 0:
            return np.empty(0)
        return self.evaluate(b[:, 0], b[:, 1]) - b[:, 2]

    # -- grids -------------------------------------------------------------------------------
    def evaluate_grid(self, grid: Grid, *, tolerance_m: float = GRID_TOLERANCE_M,
                      initial_step: int | None = None, return_report: bool = False,
                      seed: int = 0, progress: Callable | None = None,
                      is_cancelled: Callable | None = None):
        """The surface at every cell centre of a grid.

        The plane is evaluated at every cell. The other models are evaluated on a coarse
        lattice of every ``step``-th cell (the last row and column included) and interpolated
        with a bicubic interpolating spline (:class:`scipy.interpolate.RectBivariateSpline`);
        the result is accepted when, at check cells (up to 2,048 cells holding data, 2,048
        random cells and 2,048 centres of coarse cells, the worst places for interpolation),
        it differs from full evaluation by less than ``tolerance_m``; otherwise the step is
        halved, down to full evaluation. The check samples the grid, so it bounds the error
        there, not at every cell.

        Parameters
        ----------
        grid : Grid
        tolerance_m : float, default 0.1
        initial_step : int, optional
            First coarse step in cells; default ``ceil(max(rows, cols) / 128)``.
        return_report : bool, default False
            Also return a :class:`GridEvaluation`.
        seed : int, default 0
            Seed for the random check cells.
        progress, is_cancelled : callable, optional

        Returns
        -------
        ndarray, shape ``grid.shape``, float64 (and a GridEvaluation if asked).
        """
        if not float(tolerance_m) > 0:
            raise InputError(f"tolerance_m must be positive, got {tolerance_m}")
        rows, cols = grid.shape
        xs, ys = grid.cell_centres()
        report = None
        step = initial_step or int(np.ceil(max(rows, cols) / 128))
        if self.kind == "plane":
            step = 1
        rng = np.random.default_rng(seed)
        while step > 1:
            _check_cancel(is_cancelled, "grid evaluation")
            ri = np.unique(np.append(np.arange(0, rows, step), rows - 1))
            ci = np.unique(np.append(np.arange(0, cols, step), cols - 1))
            if len(ri) < 4 or len(ci) < 4:
                break
            X, Y = np.meshgrid(xs[ci], ys[ri])
            zc = self.evaluate(X, Y)
            spl = RectBivariateSpline(ri, ci, zc, kx=3, ky=3, s=0)
            cr, cc = self._check_cells(grid, ri, ci, rng)
            err = np.abs(spl.ev(cr, cc) - self.evaluate(xs[cc], ys[cr]))
            emax = float(err.max()) if len(err) else 0.0
            if progress is not None:
                progress(0.5)
            if emax < tolerance_m:
                z = spl(np.arange(rows), np.arange(cols))
                report = GridEvaluation("coarse", int(step), emax, int(len(err)))
                break
            step //= 2
        if report is None:
            z = _evaluate_by_rows(self.evaluate, grid, cells_per_chunk=1 << 18, what="grid evaluation",
                                  progress=progress, is_cancelled=is_cancelled)
            report = GridEvaluation("full", 1, 0.0, 0)
        if progress is not None:
            progress(1.0)
        return (z, report) if return_report else z

    def _check_cells(self, grid, ri, ci, rng, n_each=2048):
        rows, cols = grid.shape
        xy = self._surface.data_xy
        c, r = grid.xy_to_colrow(xy[:, 0], xy[:, 1])
        c, r = np.rint(c).astype(np.int64), np.rint(r).astype(np.int64)
        ok = (c >= 0) & (c < cols) & (r >= 0) & (r < rows)
        c, r = c[ok], r[ok]
        if len(c) > n_each:
            k = rng.choice(len(c), n_each, replace=False)
            c, r = c[k], r[k]
        rr = rng.integers(0, rows, n_each)
        rc = rng.integers(0, cols, n_each)
        mr = (ri[:-1] + ri[1:]) // 2
        mc = (ci[:-1] + ci[1:]) // 2
        mr = mr[rng.integers(0, len(mr), n_each)]
        mc = mc[rng.integers(0, len(mc), n_each)]
        return np.concatenate([r, rr, mr]), np.concatenate([c, rc, mc])

    def standard_error_grid(self, grid: Grid, *, progress=None, is_cancelled=None):
        """:meth:`standard_error` at every cell centre of a grid (float64, ``grid.shape``)."""
        return _evaluate_by_rows(self.standard_error, grid, cells_per_chunk=1 << 20,
                                 what="standard error grid", progress=progress, is_cancelled=is_cancelled)

    def summary(self) -> dict:
        """A JSON-ready description: ``{"chosen": ..., "cv_rmse_m": {...}, ...}``."""
        def num(v):
            return None if v is None or not np.isfinite(v) else float(v)
        public = {k: v for k, v in self.params.items() if not k.startswith("_")}
        for k, v in public.items():
            if isinstance(v, np.ndarray):
                public[k] = v.tolist()
            elif isinstance(v, (np.floating, float)):
                public[k] = num(v)
        return {
            "chosen": self.kind,
            "cv_rmse_m": {k: num(v) for k, v in self.cv_rmse_m.items()},
            "cv_se_m": {k: num(v) for k, v in self.cv_se_m.items()},
            "cv_skipped": dict(self.cv_skipped),
            "cv_distance_m": num(self.cv_distance_m),
            "selection": self.selection,
            "choice": None if self.choice is None else self.choice.summary(),
            "holdout_block_m": num(self.block_m),
            "check_block_m": num(self.check_block_m),
            "check_model": self.check_kind,
            "check_model_reason": self.check_reason,
            "n_groups": self.n_groups,
            "stated_pick_error_m": num(self.stated_sigma_m),
            "error_growth": None if self.growth is None else self.growth.summary(),
            "n_folds": self.n_folds,
            "n_picks": self.n_picks,
            "n_used": self.n_used,
            "thin_cell_m": num(self.thin_cell_m),
            "reach_m": num(self.reach_m),
            "taper_m": num(self.taper_m),
            "params": public,
        }


# ============================================================================================
# fit_surface
# ============================================================================================
def _default_reach(hull: _Hull, tree: cKDTree, xy):
    if hull.area > 0:
        lo, hi = hull.vertices.min(axis=0), hull.vertices.max(axis=0)
        side = np.sqrt(hull.area / 10_000.0)
        gx = np.arange(lo[0] + side / 2, hi[0], side)
        gy = np.arange(lo[1] + side / 2, hi[1], side)
        X, Y = np.meshgrid(gx, gy)
        X, Y = X.ravel(), Y.ravel()
        inside = hull.distance(X, Y) == 0
        if inside.sum() >= 10:
            d = tree.query(np.column_stack([X[inside], Y[inside]]))[0]
            return float(np.percentile(d, REACH_PERCENTILE))
    if len(xy) >= 2:  # degenerate hull: the largest nearest-neighbour gap
        nn = tree.query(xy, k=2)[0][:, 1]
        return float(max(nn.max(), 1e-9))
    return 1.0


def _params(surface: _Surface, data: _Data) -> dict:
    core = surface.core
    p = {"origin_m": surface.origin.copy(), "scale_m": float(surface.scale)}
    if isinstance(core, _Poly):
        p["terms"] = list(_TERMS[core.degree])
        p["coefficients"] = core.coef.copy()
        p["sigma_m"] = core.sigma_m
        p.update({k: v for k, v in core.info.items()})
    else:
        p.update(core.info)
        p["footprint_m"] = data.footprint_m
    plane = core if surface.kind == "plane" else surface.trend
    n = np.array([-plane.coef[1], -plane.coef[2], surface.scale])
    dd, d = dip_from_normal(n)
    key = "" if surface.kind == "plane" else "trend_"
    p[key + "dip_deg"] = float(d)
    p[key + "dip_direction_deg"] = float(dd)
    p[key + "strike_rhr_deg"] = float(strike_from_dip_direction(dd))
    p["_boreholes"] = np.column_stack([data.b_xy, data.b_z]) if len(data.b_z) else \
        np.empty((0, 3))
    return p


def fit_surface(xyz, *, model: str = "auto", boreholes=None, borehole_sigma_m=0.0,
                orientations=None, orientation_sigma_deg=DEFAULT_ORIENTATION_SIGMA_DEG,
                orientation_footprint_m: float | None = None, groups=None,
                smoothing="gcv", n_folds: int = 5, selection: str = "data_error",
                data_sigma_m=None, error_correlation_m: float | None = None,
                block_m: float | None = None,
                check_block_m: float | None = None,
                cross_validate_model: bool = True, max_points: int = 2000,
                thin_cell_m: float | None = None, thin_by_group: bool = False,
                pick_sigma_m: float | None = None, bounds=None,
                reach_m: float | None = None, taper_m: float | None = None, seed: int = 0,
                progress: Callable | None = None,
                is_cancelled: Callable | None = None) -> SurfaceModel:
    """Fit a surface model ``z(x, y)`` to elevation picks, with constraints.

    Parameters
    ----------
    xyz : array_like, shape ``(n, 3)``
        Picks ``x, y, z`` (metres). Rows with non-finite values are dropped.
    model : {'auto', 'plane', 'trend2', 'spline'}, default 'auto'
    boreholes : array_like, shape ``(nb, 3)`` or ``(nb, 4)``, optional
        ``x, y, z`` of the surface in boreholes, optionally a 4th column ``sigma_m``.
    borehole_sigma_m : float or array_like, default 0
        Standard error of borehole elevations when ``boreholes`` has 3 columns.
    orientations : array_like, shape ``(no, 4)`` or ``(no, 5)``, optional
        Dip measurements ``x, y, dip_deg, dip_direction_deg`` and optionally ``sigma_deg``.
        Convert strike (right-hand rule) with
        :func:`strikeline.geometry.orientation.dip_direction_from_strike`.
    orientation_sigma_deg : float or array_like, default 5
        Standard error of the measured dip when ``orientations`` has 4 columns.
    orientation_footprint_m : float, optional
        Half-baseline ``h`` of the slope observation (default half the median spacing of the
        thinned picks).
    groups : array_like, shape ``(n,)``, optional
        Cross-validation group of every pick (contact segment ids; see
        :func:`strikeline.stats.segment_groups`). Default (or fewer than two labels):
        ``4 × n_folds`` square spatial blocks.
    smoothing : {'gcv', 'kfold', 'discrepancy'} or float, default 'gcv'
        Spline smoothing λ: ``'gcv'`` minimises V(λ) on each fit's picks (nested in every
        cross-validation fold); ``'discrepancy'`` smooths until the RMS residual equals the
        stated pick error ``data_sigma_m`` (:func:`_discrepancy_nlam`; GCV without it); ``'kfold'`` minimises the grouped k-fold CV error of the
        picks-only spline over 29 values of λ, and the spline's CV score then uses that λ in
        every fold (slightly optimistic: the choice saw every fold); a number is a fixed
        λ ``>= 0`` in the normalised coordinates (``0`` interpolates).
    n_folds : int, default 5
    selection : {'data_error', 'one_se', 'min'}, default 'data_error'
        Rule of ``model='auto'`` (:func:`strikeline.stats.choose_model`); ``'data_error'``
        needs ``data_sigma_m`` and otherwise acts as ``'one_se'``.
    data_sigma_m : float or array_like, optional
        Stated standard error of the picks (metres; one number or one per pick): the error
        the model choice judges the scores against.
    error_correlation_m : float, optional
        Distance along the contacts over which pick errors are shared
        (:func:`strikeline.stats.residual_correlation_m`); the parameter part of the
        standard error is inflated by the design effect ``sqrt(1 + correlation / spacing)``.
    block_m : float, optional
        Side of the square blocks that made ``groups`` (recorded; sets the misfit check's
        blocks).
    check_block_m : float, optional
        Side of the blocks the misfit check holds out
        (:meth:`SurfaceModel.holdout_prediction`); default ``CHECK_BLOCK_FACTOR`` times the
        cross-validation block (:func:`strikeline.stats.holdout_block_m` of the picks when
        ``groups`` are not given).
    cross_validate_model : bool, default True
        Cross-validate with a single (non-auto) model too: all three models are scored, for
        the calibrated standard error and for the misfit check, which uses the model the
        ``auto`` rule would choose (:attr:`SurfaceModel.check_kind`).
    max_points : int, default 2000
        Thinning target (:func:`strikeline.picks.thinning.thin_picks`).
    thin_cell_m : float, optional
        Fixed thinning cell instead.
    thin_by_group : bool, default False
        ``False``: one representative per cell, labelled with the majority group of its
        picks (finer cells for the same ``max_points``; picks of segments meeting in a cell can
        leak across folds there). ``True``: one per cell and group, no leakage, coarser cells
        (every group keeps a representative). See :mod:`strikeline.picks.thinning`.
    pick_sigma_m : float, optional
        Pick standard error for weighing picks against constraints in plane/trend2 (default:
        estimated from the residuals of the fit without constraints).
    bounds : array_like, shape ``(m, 4)``, optional
        Inequalities ``lo <= z(x, y) <= hi`` as rows ``x, y, lo, hi`` (``-inf``/``+inf`` for an
        open side), e.g. from the map's unit polygons (:func:`strikeline.surfaces.units.unit_bounds`).
        Never held out in cross-validation and not data (they move neither the hull, the
        reach nor the standard error). ``plane``/``trend2``: hard linear inequality
        constraints (Lawson & Hanson 1974, ch. 23; a model that cannot honour them all raises
        :class:`~strikeline.errors.UndeterminedError`); ``spline``: a primal-dual active set of
        bound points pinned to their bound (Nocedal & Wright 2006, ch. 16), at most
        ``MAX_ACTIVE_BOUNDS`` of them, broken by at most ``BOUND_TOLERANCE_M`` when it
        converges. The trend plane that ``trend2`` and ``spline`` relax to outside the data's
        hull honours the bounds too when a plane can; otherwise it ignores them, and the model
        stays untapered out to the bound points the trend breaks (the hull of the data and
        those points), so that the blend of the two still honours every bound.
    reach_m, taper_m : float, optional
        Extrapolation distance and taper length (defaults in the module docstring).
    seed : int, default 0
        Seed for fold assignment.
    progress, is_cancelled : callable, optional

    Returns
    -------
    SurfaceModel

    Raises
    ------
    InputError
        Invalid option or shape (the message lists valid choices).
    UndeterminedError
        The requested model cannot be fitted (too few or collinear picks, boreholes a plane
        cannot honour ...); with ``'auto'`` only when no model can be fitted.
    CancelledError

    References
    ----------
    Craven, P. & Wahba, G. (1979). Smoothing noisy data with spline functions: estimating the
    correct degree of smoothing by the method of generalized cross-validation. *Numerische
    Mathematik*, 31(4), 377–403. https://doi.org/10.1007/BF01404567

    Duchon, J. (1977). Splines minimizing rotation-invariant semi-norms in Sobolev spaces.
    *Lect. Notes Math.* 571, Springer, 85–100. https://doi.org/10.1007/BFb0086566

    Wahba, G. (1990). *Spline Models for Observational Data*. CBMS-NSF Regional Conference
    Series in Applied Mathematics 59, SIAM. https://doi.org/10.1137/1.9781611970128

    Hillier, M. J., Schetselaar, E. M., de Kemp, E. A. & Perron, G. (2014). Three-dimensional
    modelling of geological surfaces using generalized interpolation with radial basis
    functions. *Mathematical Geosciences*, 46(8), 931–953.
    https://doi.org/10.1007/s11004-014-9540-3

    Lawson, C. L. & Hanson, R. J. (1974). *Solving Least Squares Problems*. Prentice-Hall,
    Englewood Cliffs (SIAM reprint 1995, https://doi.org/10.1137/1.9781611971217), ch. 23.

    Fernández, O. (2005). Obtaining a best fitting plane through 3D georeferenced data.
    *Journal of Structural Geology*, 27(5), 855–858. https://doi.org/10.1016/j.jsg.2004.12.004

    Examples
    --------
    >>> import numpy as np
    >>> rng = np.random.default_rng(0)
    >>> xy = rng.uniform(0, 1000, (200, 2))
    >>> z = 500 - 0.2 * xy[:, 0] + rng.normal(0, 0.5, 200)
    >>> m = fit_surface(np.column_stack([xy, z]), model="plane")
    >>> round(float(m.evaluate(500.0, 500.0)), 0)
    400.0
    """
    _choice(model, MODEL_CHOICES, "model")
    _choice(selection, SELECTION_RULES, "selection")
    if isinstance(smoothing, str):
        _choice(smoothing, SMOOTHING_CHOICES, "smoothing")
    else:
        try:
            ok = float(smoothing) >= 0 and np.isfinite(float(smoothing))
        except (TypeError, ValueError):
            ok = False
        if not ok:
            raise InputError(f"smoothing must be one of 'gcv', 'kfold', 'discrepancy' or a number >= 0; got "
                             f"{smoothing!r}")
    if int(n_folds) < 2:
        raise InputError(f"n_folds must be at least 2, got {n_folds}")
    _check_cancel(is_cancelled, "surface fitting")
    thinned = thin_picks(xyz, max_points=max_points, cell_m=thin_cell_m, groups=groups,
                         by_group=bool(thin_by_group))
    data = _prepare(thinned.xyz, boreholes, borehole_sigma_m, orientations,
                    orientation_sigma_deg, orientation_footprint_m, pick_sigma_m, bounds=bounds)
    hull = _Hull(data.all_xy())
    tree = cKDTree(data.all_xy())
    if reach_m is None:
        reach_m = _default_reach(hull, tree, data.all_xy())
    elif not float(reach_m) > 0:
        raise InputError(f"reach_m must be a positive distance in metres, got {reach_m}")
    if taper_m is None:
        size = np.sqrt(hull.area) if hull.area > 0 else float(np.ptp(data.all_xy(), axis=0).max())
        taper_m = max(TAPER_FRACTION * size, float(reach_m), 1e-9)
    elif not float(taper_m) > 0:
        raise InputError(f"taper_m must be a positive distance in metres, got {taper_m}")

    # every model is scored whenever cross-validation runs: a fixed model's misfit check uses
    # the model the data support (the 'auto' choice), so a flexible model asked for cannot
    # absorb a mistrace it is checked against
    kinds = MODELS if (model == "auto" or cross_validate_model) else (model,)
    sigma_stated = _stated_sigma(data_sigma_m, len(np.asarray(xyz)))
    # picks that share one error: those within one correlation length along a contact
    pps = 1.0
    if error_correlation_m and len(xyz) >= 2:
        p0 = np.asarray(xyz, dtype=float)[:, :2]
        p0 = p0[np.all(np.isfinite(p0), axis=1)]
        nn = cKDTree(p0).query(p0, k=2)[0][:, 1]
        nn = nn[nn > 0]
        if len(nn):
            pps = 1.0 + float(error_correlation_m) / float(np.median(nn))
    folds = None
    if model == "auto" or cross_validate_model or smoothing == "kfold":
        labels = thinned.groups
        if labels is None or len(np.unique(labels)) < 2:
            block_m = holdout_block_m(data.p_xy)
            labels = segment_groups(data.p_xy[:, 0], data.p_xy[:, 1], np.zeros(data.n),
                                    block_m=block_m)
        if len(np.unique(labels)) >= 2:
            folds = make_folds(labels, n_folds=n_folds, seed=seed)

    if folds is None and (model == "auto" or smoothing == "kfold"):
        raise InputError(f"model={model!r} with smoothing={smoothing!r} needs cross-validation, "
                         f"but the {data.n} picks fall into fewer than two groups or blocks; "
                         "give more picks or choose a model and smoothing='gcv'")
    n_steps = len(kinds) + 1
    done = [0]

    def sub_progress(f):
        if progress is not None:
            progress(min(1.0, (done[0] + f) / n_steps))

    if smoothing == "discrepancy":
        smoothing = ("discrepancy", sigma_stated) if sigma_stated else "gcv"
    lam = None
    if "spline" in kinds and smoothing == "kfold":
        try:
            full = _Spectrum(data.u(data.p_xy), data.p_z)
            lam = _kfold_lambda(data, folds, full.lambda_grid(29) / full.n)
        except UndeterminedError:
            lam = None  # the spline's CV below reports why

    def fitted(kind, sub):
        """The model ``kind`` fitted to ``sub``, with the stated noise and shared-error count."""
        s = _fit_kind(kind, sub, smoothing=smoothing, lam=lam, taper_m=taper_m)
        s.noise_floor_m, s.picks_per_segment = sigma_stated or 0.0, pps
        return s

    scores: dict[str, CVScore] = {}
    base_se: dict[str, np.ndarray] = {}
    # the misfit check's model, and auto's: the simplest the data support when plane and
    # trend2 are also scored robustly (a mistraced stretch or a faulted block then counts
    # against them only where it lies), so that a blunder cannot push the choice onto a model
    # flexible enough to absorb it
    check_scores: dict[str, CVScore] = {}
    check_base: dict[str, np.ndarray] = {}
    if folds is not None and (model == "auto" or cross_validate_model):
        for kind in kinds:
            scores[kind], base_se[kind] = _score_fits(
                lambda sub, kind=kind: fitted(kind, sub), data, folds, groups=labels,
                progress=sub_progress, is_cancelled=is_cancelled)
            done[0] += 1
        check_scores, check_base = dict(scores), dict(base_se)
        for kind in ("plane", "trend2"):
            if kind in scores and np.isfinite(scores[kind].rmse_m):
                check_scores[kind], check_base[kind] = _score_fits(
                    lambda sub, kind=kind: _robust_surface(kind, sub, sigma_stated, taper_m, pps),
                    data, folds, groups=labels, is_cancelled=is_cancelled)
    check_choice = None
    if check_scores:
        try:
            check_choice = choose_model(check_scores, order=MODELS, rule=selection,
                                        sigma_m=sigma_stated, robust=True)
        except UndeterminedError:
            if model == "auto":
                raise
    if model == "auto":
        # one choice for the surface and its check
        choice, chosen = check_choice, check_choice.chosen
    else:
        chosen = model
        choice = None  # what auto would choose from the least-squares scores, for the record
        if any(np.isfinite(sc.rmse_m) for sc in scores.values()):
            try:
                choice = choose_model(scores, order=MODELS, rule=selection, sigma_m=sigma_stated,
                                      robust=True)
            except UndeterminedError:
                pass
    check_kind = check_choice.chosen if check_choice is not None else chosen
    _check_cancel(is_cancelled, "surface fitting")
    surface = fitted(chosen, data)
    surface.hull, surface.tree = hull, tree
    score = scores.get(chosen)
    if chosen == "spline":
        if score is not None and np.isfinite(score.rmse_m):
            surface.se_cv = (score.rmse_m, max(score.distance_m, 1e-9))
        else:
            nn = cKDTree(data.p_xy).query(data.p_xy, k=2)[0][:, 1]
            surface.se_cv = (float(np.sqrt(surface.core.info["gcv_score_m2"])),
                             float(max(np.median(nn), 1e-9)))
    growth = None
    holdout = None
    side = None
    if score is not None and np.isfinite(score.rmse_m) and data.n >= 10:
        errs, dists, bases = [score.errors_m], [score.distances_m], [base_se[chosen]]
        # a second, coarser hold-out probes the error farther from data (map cells in wide
        # gaps), so the growth law is fitted over the distances it is used at, not extrapolated
        coarse_m = COARSE_HOLDOUT_FACTOR * (block_m if block_m is not None else
                                            holdout_block_m(data.p_xy))
        coarse = segment_groups(data.p_xy[:, 0], data.p_xy[:, 1], np.zeros(data.n),
                                block_m=coarse_m)
        if len(np.unique(coarse)) >= 2:
            cs, cbase = _score_fits(lambda sub: fitted(chosen, sub), data,
                                    make_folds(coarse, n_folds=n_folds, seed=seed),
                                    is_cancelled=is_cancelled)
            if np.isfinite(cs.rmse_m):
                errs.append(cs.errors_m), dists.append(cs.distances_m), bases.append(cbase)
        growth = fit_error_growth(np.concatenate(errs), np.concatenate(dists),
                                  np.concatenate(bases))
        surface.growth = growth
        check_score = check_scores[check_kind]
        if check_kind == chosen == "spline":  # the same fits: use both hold-out scales
            check_growth = fit_error_growth(np.concatenate(errs), np.concatenate(dists),
                                            np.concatenate(bases), exclude_gross=True)
        else:
            check_growth = fit_error_growth(check_score.errors_m, check_score.distances_m,
                                            check_base[check_kind], exclude_gross=True)
        side = check_block_m if check_block_m is not None else \
            CHECK_BLOCK_FACTOR * (block_m if block_m is not None else holdout_block_m(data.p_xy))
        holdout = _holdout_checks(check_kind, data, side, check_growth, sigma_stated, taper_m,
                                  smoothing=smoothing, lam=lam, pps=pps, is_cancelled=is_cancelled)
    if progress is not None:
        progress(1.0)
    params = _params(surface, data)
    params["n_boreholes"] = int(len(data.b_z))
    params["n_orientations"] = int(len(data.o_sig))
    params["n_bounds"] = int(data.n_bounds)
    return SurfaceModel(
        kind=chosen,
        params=MappingProxyType(params),
        cv_rmse_m=MappingProxyType({k: float(s.rmse_m) for k, s in scores.items()}),
        cv_se_m=MappingProxyType({k: float(s.se_m) for k, s in scores.items()}),
        cv_skipped=MappingProxyType({k: s.reason for k, s in scores.items() if s.reason}),
        cv_distance_m=float(score.distance_m) if score is not None else float("nan"),
        selection=f"auto/{choice.rule}" if (choice is not None and model == "auto") else "fixed",
        n_picks=int(np.count_nonzero(thinned.index >= 0)),
        n_used=int(data.n),
        thin_cell_m=thinned.cell_m,
        reach_m=float(reach_m),
        taper_m=float(taper_m),
        n_folds=0 if folds is None else int(len(np.unique(folds))),
        _surface=surface,
        choice=choice,
        growth=growth,
        block_m=block_m,
        check_block_m=None if holdout is None else float(side),
        check_kind=None if holdout is None else check_kind,
        check_reason=None if (holdout is None or check_choice is None) else check_choice.reason,
        stated_sigma_m=sigma_stated,
        n_groups=0 if score is None else int(score.n_groups),
        _holdout=holdout,
    )


def _score_fits(fit, data: _Data, folds, *, groups=None, progress=None, is_cancelled=None):
    """Cross-validate the surfaces ``fit(training data)`` makes: the :class:`CVScore` and each
    fit's own standard error at the picks it predicted (for the growth of error with distance)."""
    base = np.full(data.n, np.nan)

    def fit_predict(train, test):
        s = fit(data.picks(train))
        x, y = data.p_xy[test, 0], data.p_xy[test, 1]
        base[test] = s.base_se(x, y)
        return s.value(x, y)
    score = cross_validate(fit_predict, np.column_stack([data.p_xy, data.p_z]), folds,
                           fixed_xy=data.fixed_xy(), groups=groups, progress=progress,
                           is_cancelled=is_cancelled)
    return score, base


def _stated_sigma(data_sigma_m, n):
    """RMS of the stated pick errors (``None`` when not stated)."""
    if data_sigma_m is None:
        return None
    s = np.asarray(data_sigma_m, dtype=float).reshape(-1)
    if s.size not in (1, n):
        raise InputError(f"data_sigma_m must be one number or one per pick ({n}); got "
                         f"{s.size} values")
    s = s[np.isfinite(s)]
    if s.size == 0 or np.any(s < 0):
        raise InputError("data_sigma_m must be finite standard errors >= 0 (metres)")
    v = float(np.sqrt(np.mean(s ** 2)))
    return v if v > 0 else None


#: The standard error's growth with distance is also fitted on a hold-out of blocks this many
#: times the cross-validation block.
COARSE_HOLDOUT_FACTOR = 4.0
#: The misfit check holds out square blocks this many times the cross-validation block: the same
#: size, so that its forecasts are made at the distances whose error the cross-validation measured
#: (twice as large left the spline extrapolating beyond its measured error: 6 % false flags on the
#: lidar fold sheet against 1 %).
CHECK_BLOCK_FACTOR = 1.0


class _Holdout:
    """Surfaces fitted without square blocks of the picks, for the misfit check.

    Two checkerboards of blocks of side ``side``, the second shifted by half a block; each
    colour of each board is one fit without the picks of that colour (up to 8 fits). A point
    takes the fit whose held-out block it lies deepest inside, so the nearest training data
    lie at least a quarter of a block away whatever a mistrace or fault near it does; for the
    spline only a fit whose training data surround it (inside their convex hull): its forecast
    beyond the data is an extrapolation the check cannot judge, and the point stays unchecked.
    """

    def __init__(self, origin, side, surfaces):
        self.origin = np.asarray(origin, float)
        self.side = float(side)
        self.surfaces = surfaces  # {(board, colour): _Surface}

    def cells(self, x, y, board):
        shift = 0.5 * self.side * board
        u = (x - self.origin[0] + shift) / self.side
        v = (y - self.origin[1] + shift) / self.side
        i, j = np.floor(u), np.floor(v)
        colour = (i.astype(np.int64) % 2) + 2 * (j.astype(np.int64) % 2)
        depth = np.minimum.reduce([u - i, 1 - (u - i), v - j, 1 - (v - j)])
        return colour, depth

    def predict(self, x, y):
        x = np.asarray(x, float).reshape(-1)
        y = np.asarray(y, float).reshape(-1)
        c0, d0 = self.cells(x, y, 0)
        c1, d1 = self.cells(x, y, 1)
        # a spline fit only judges points inside the hull of its training data: beyond it (at
        # the edge of the mapped ground) its forecast is an extrapolation, whose error the
        # held-out picks never measured (a polynomial's parameter error grows with distance and
        # covers it); such points take the other board, or stay unchecked (NaN)
        inside = [np.zeros(len(x), bool), np.zeros(len(x), bool)]
        for (b, c), s in self.surfaces.items():
            m = (c0 if b == 0 else c1) == c
            if m.any():
                inside[b][m] = (s.hull.distance(x[m], y[m]) <= 0.0) if s.kind == "spline" else True
        d0 = np.where(inside[0], d0, -1.0)
        d1 = np.where(inside[1], d1, -1.0)
        board = np.where(d1 > d0, 1, 0)
        colour = np.where(board == 1, c1, c0)
        usable = np.maximum(d0, d1) >= 0
        z, se, gx, gy = (np.full(len(x), np.nan) for _ in range(4))
        for (b, c), s in self.surfaces.items():
            m = usable & (board == b) & (colour == c)
            if not m.any():
                continue
            z[m] = s.value(x[m], y[m])
            se[m] = s.check_se(x[m], y[m])
            gx[m], gy[m] = s.gradient(x[m], y[m])
        return z, se, gx, gy


def _robust_surface(kind, data: _Data, sigma_m, taper_m, pps=1.0) -> _Surface:
    """Plane or trend2 fitted robustly (:func:`_fit_poly_robust`), for the misfit check."""
    floor = sigma_m if sigma_m is not None else 0.0
    core = _fit_poly_robust(1 if kind == "plane" else 2, data, floor)
    trend = None if kind == "plane" else _fit_poly_robust(1, data, floor)
    s = _Surface(kind, core, trend, data, taper_m)
    s.noise_floor_m, s.picks_per_segment = floor, pps
    return s


def _holdout_checks(kind, data: _Data, side_m, growth, sigma_m, taper_m, *, smoothing, lam,
                    pps=1.0, is_cancelled=None):
    """The fits the misfit check compares held-out contacts with (see :class:`_Holdout`).

    The spline is refitted as it was chosen; plane and trend2 are refitted robustly
    (:func:`_fit_poly_robust`), because one mistraced stretch or faulted block tilts a global
    least-squares surface everywhere, far outside any held-out block.
    """
    origin = data.p_xy.min(axis=0)
    holdout = _Holdout(origin, side_m, {})
    floor = sigma_m if sigma_m is not None else 0.0
    for board in (0, 1):
        colour, _ = holdout.cells(data.p_xy[:, 0], data.p_xy[:, 1], board)
        for c in range(4):
            out = colour == c
            if not out.any() or out.all():
                continue
            _check_cancel(is_cancelled, "misfit check")
            sub = data.picks(~out)
            try:
                if kind in ("plane", "trend2"):
                    try:
                        s = _robust_surface(kind, sub, sigma_m, taper_m, pps)
                    except (UndeterminedError, np.linalg.LinAlgError):
                        s = _fit_kind(kind, sub, smoothing=smoothing, lam=lam, taper_m=taper_m)
                else:
                    s = _fit_kind(kind, sub, smoothing=smoothing, lam=lam, taper_m=taper_m)
            except UndeterminedError:
                continue  # points of this colour fall back to no check (NaN)
            s.growth = growth
            s.noise_floor_m, s.picks_per_segment = floor, pps
            holdout.surfaces[(board, c)] = s
    return holdout if holdout.surfaces else None
