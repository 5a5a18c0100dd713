"""Polynomial surfaces: the plane and the quadratic trend
``z = c₀ + c₁u + c₂v + c₃u² + c₄uv + c₅v²`` (:func:`_fit_poly`).

With picks only, the plane is the total-least-squares plane
(:func:`strikeline.attitude.fitting.fit_plane`). With boreholes, dip measurements or bounds, and
always for the trend, the fit is weighted least squares on vertical residuals, so that the
constraints enter as rows and inequalities:

- a borehole is an observation row (weighted like a pick) **and** the inequality
  ``|f(x_b) − z_b| <= σ_b``; a bound is the inequality ``lo <= f(x) <= hi``; both are solved as
  least squares with linear inequality constraints through a least-distance problem and
  non-negative least squares (:func:`_lsi`; Lawson & Hanson 1974, ch. 23). A model that cannot
  pass within the stated errors raises :class:`~strikeline.errors.UndeterminedError`.
- a dip measurement is two observations of the slope, east and north (for a polynomial the
  central difference over the footprint equals the exact gradient), weighted ``1/σ_g`` against
  ``1/σ_pick`` for picks (``σ_pick`` from the residuals of the fit without constraints unless
  given); ``sigma_deg = 0`` makes the two slopes equality constraints.

The prediction standard error of a new pick is ``se(x) = sqrt(σ̂² + a(x)ᵀ C a(x))``, ``a(x)`` the
basis at ``x``, ``C`` the coefficient covariance scaled by the a-posteriori variance factor and
``σ̂`` the residual standard error. :func:`_fit_poly_robust` fits the same models robustly, for
scoring and the misfit check only.

References
----------
Lawson, C. L. & Hanson, R. J. (1974). *Solving Least Squares Problems*. Prentice-Hall,
Englewood Cliffs (SIAM reprint 1995, https://doi.org/10.1137/1.9781611971217), ch. 23.
"""
from __future__ import annotations

import numpy as np
from scipy import linalg
from scipy.optimize import nnls

from strikeline.attitude.fitting import fit_plane
from strikeline.errors import UndeterminedError
from strikeline.stats import TRIM_FRACTION, robust_lstsq
from strikeline.surfaces.data import _Data


#: Pick standard error used when it can neither be given nor estimated (no residual freedom).
FALLBACK_PICK_SIGMA_M = 1.0
#: Floor of estimated pick standard errors (exact synthetic data would give zero weights).
PICK_SIGMA_FLOOR_M = 1e-3
#: Relative rank tolerance of least-squares designs.
_RANK_RTOL = 1e-10
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
        """Standard error of the fitted polynomial at ``(u, v)``: ``sqrt(aᵀ C a)`` with ``a`` the
        basis (1, u, v[, u², uv, v²]) and ``C`` the coefficients' covariance.

        The quadratic form is a polynomial in ``u`` and ``v`` (:meth:`_form_coefficients`),
        evaluated by Horner's rule in ``v`` with coefficients that are polynomials in ``u``
        (Horner's rule again). ``u`` and ``v`` broadcast: a grid's columns as a row ``(1, n)``
        and its rows as a column ``(m, 1)`` give the ``(m, n)`` values with the polynomials in
        ``u`` computed once per column, the same bits as the cells asked for one by one (each
        cell's operations are the same). About ten times faster on a grid than the term-by-term
        sum over the basis; its rounding error is that of the dot product ``aᵀ (C a)`` (tested
        against numpy's einsum of the quadratic form with Higham's bound).
        """
        u, v = np.asarray(u, float), np.asarray(v, float)
        by_v = [_horner(u, row) for row in self._form_coefficients()]
        q = by_v[-1]
        for p in reversed(by_v[:-1]):
            q = p + v * q
        q = np.broadcast_to(q, np.broadcast_shapes(u.shape, v.shape))
        return np.sqrt(np.maximum(q, 0.0))

    def _form_coefficients(self) -> np.ndarray:
        """``M`` with ``aᵀ C a = Σ_p Σ_k M[p, k] u^k v^p`` (the quadratic form of the basis
        expanded into monomials; ``C_ij`` and ``C_ji`` both added, as the form sums them)."""
        cached = getattr(self, "_form", None)
        if cached is None:
            powers = _POWERS[self.degree]  # (power of u, power of v) of each basis term
            top = 2 * self.degree
            cached = np.zeros((top + 1, top + 1))
            for i, (ku, kv) in enumerate(powers):
                for j, (lu, lv) in enumerate(powers):
                    cached[kv + lv, ku + lu] += self.cov[i, j]
            self._form = cached
        return cached


#: Powers of ``u`` and ``v`` of the basis terms of :data:`_TERMS`.
_POWERS = {1: ((0, 0), (1, 0), (0, 1)), 2: ((0, 0), (1, 0), (0, 1), (2, 0), (1, 1), (0, 2))}


def _horner(x, coef):
    """``Σ_k coef[k] x^k`` by Horner's rule (trailing zero coefficients skipped)."""
    nz = np.flatnonzero(coef)
    if len(nz) == 0:
        return np.zeros(np.shape(x))
    c = coef[:nz[-1] + 1]
    out = c[-1]
    for ck in c[-2::-1]:
        out = ck + x * out
    return np.asarray(out + np.zeros(np.shape(x)))


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
