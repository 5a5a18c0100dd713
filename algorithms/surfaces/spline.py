"""The thin-plate smoothing spline of the picks (kernel ``r² log r`` plus a linear polynomial;
Duchon 1977, Wahba 1990), with boreholes and dip measurements (:func:`_fit_tps`).

Smoothing
    λ by generalized cross-validation (Craven & Wahba 1979) from one eigen-decomposition of the
    pick system (:class:`_Spectrum`, :func:`_gcv_minimise`), by the discrepancy principle
    against the stated pick error (:func:`_discrepancy_nlam`), by grouped k-fold
    cross-validation over a grid (:func:`_kfold_lambda`), or fixed; without smoothing the spline
    interpolates the picks. λ is always chosen on the picks alone.
Boreholes
    Each is a datum with noise variance ``σ_b²``: weight ``σ_b²/b̂`` in the system, ``b̂ =
    σ̂²/(nλ)`` the spline's Bayesian scale from the GCV fit of the picks (the Bayesian
    interpretation of the smoothing spline, Wahba 1990). A borehole left outside its error gets
    the weight that puts it on the edge of its error band (Sherman–Morrison update of one
    diagonal entry); any still outside after that is interpolated exactly.
Dip measurements
    Two observations of the slope, east and north, as central differences over the footprint
    ``p ± h·e``: combinations of point values of the kernel (generalized Hermite–Birkhoff
    interpolation; Hillier et al. 2014 for the approach), because the point derivative of the
    ``r² log r`` kernel in both arguments is unbounded at zero distance (its second derivative
    has a logarithmic singularity). Noise variance ``σ_g²`` against ``b̂``; ``sigma_deg = 0``
    gives exact slopes.
Bounds
    The solved system is handed to :func:`strikeline.surfaces.bounded._tps_bounded`; the
    solvers of the system (:func:`_lu_solver`, :func:`_spectral_solver`) are here.

References
----------
Craven, P. & Wahba, G. (1979). Smoothing noisy data with spline functions: estimating the
correct degree of smoothing by the method of generalized cross-validation. *Numerische
Mathematik*, 31(4), 377–403. https://doi.org/10.1007/BF01404567

Wahba, G. (1990). *Spline Models for Observational Data*. CBMS-NSF Regional Conference Series in
Applied Mathematics 59, SIAM. https://doi.org/10.1137/1.9781611970128

Hillier, M. J., Schetselaar, E. M., de Kemp, E. A. & Perron, G. (2014). Three-dimensional
modelling of geological surfaces using generalized interpolation with radial basis functions.
*Mathematical Geosciences*, 46(8), 931–953. https://doi.org/10.1007/s11004-014-9540-3
"""
from __future__ import annotations

import numpy as np
from scipy import linalg, sparse
from scipy.optimize import minimize_scalar

from strikeline.errors import UndeterminedError
from strikeline.stats import gcv_from_spectrum
from strikeline.surfaces.bounded import _tps_bounded
from strikeline.surfaces.data import _Data
from strikeline.surfaces.kernel import _TPS, _pairwise_r2, tps_kernel
from strikeline.surfaces.parallel import map_fits
from strikeline.surfaces.reduced import PickSystems, _FixedSmoothing, _Reduced, bordered_solver


class _Spectrum:
    """Eigen-decomposition of a TPS pick system for GCV (Wahba 1990): the trailing block of
    ``Qᵀ K Q`` (:class:`~strikeline.surfaces.reduced._Reduced`, ``T = Q [R; 0]``) is
    ``Q₂ᵀ K Q₂ = U diag(μ) Uᵀ``.
    """

    def __init__(self, u, z, *, reduced: _Reduced | None = None):
        red = reduced if reduced is not None else _Reduced(u, z)
        self.n, self.u, self.z, self.T = red.n, red.u, red.z, red.T
        self.K = red.K
        mu, U = np.linalg.eigh(red.M)
        self.mu = np.clip(mu, 0.0, None)
        self.Q2U = red.q2(U)
        self.b = self.Q2U.T @ self.z
        self.Q1 = red.Q1
        self.R1 = red.R1

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


def _fit_tps(data: _Data, smoothing, lam=None, *, systems: PickSystems | None = None) -> _TPS:
    """Thin-plate smoothing spline with boreholes and dip-measurement functionals; ``systems``:
    the pick systems of a superset of ``data``'s picks, whose kernel is reused (exact)."""
    up = data.u(data.p_xy)
    red = _Reduced(up, data.p_z) if systems is None else systems.reduced(up, data.p_z, data.rows)
    n = red.n
    spec = None
    if lam is not None or not isinstance(smoothing, (str, tuple)):
        nlam, how = (n * float(lam), "kfold") if lam is not None else (n * float(smoothing), "fixed")
        try:  # one smoothing: a Cholesky factor does, no eigen-decomposition
            spec = _FixedSmoothing(red, nlam)
        except np.linalg.LinAlgError:
            spec = None
    if spec is None:
        spec = _Spectrum(up, data.p_z, reduced=red)
        if isinstance(smoothing, tuple) and lam is None:  # ('discrepancy', sigma_m)
            nlam, how = _discrepancy_nlam(spec, float(smoothing[1])), "discrepancy"
        elif isinstance(smoothing, str) and lam is None:  # 'gcv', or 'kfold' whose grid search could not run
            nlam, _ = _gcv_minimise(spec)
            how = "gcv" if smoothing == "gcv" else "gcv (k-fold search failed)"
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
        solver = spec.solver() if isinstance(spec, _FixedSmoothing) else _spectral_solver(spec, nlam)
        return _tps_bounded(data, solver, np.concatenate([data.p_z, n3]), up,
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
    scale = 1.0 / (spec.mu + nlam)
    return bordered_solver(spec.Q1, spec.R1, spec.K, nlam,
                           lambda v: spec.Q2U @ (scale[:, None] * (spec.Q2U.T @ v)))


def _kfold_lambda(data: _Data, folds, lam_grid, *, systems: PickSystems | None = None,
                  workers: int | None = None):
    """λ minimising grouped k-fold CV error of the picks-only spline over a grid (``systems``:
    :class:`~strikeline.surfaces.reduced.PickSystems` of ``data``'s picks, kernel reused). The
    folds' spectra are made ``workers`` at a time (:func:`strikeline.surfaces.parallel.map_fits`)
    and their squared errors added in fold order."""
    up = data.u(data.p_xy)

    def fold_sse(k):
        tr, te = folds != k, folds == k
        spec = _Spectrum(up[tr], data.p_z[tr],
                         reduced=None if systems is None else systems.reduced(up[tr], data.p_z[tr],
                                                                              data.pick_rows(tr)))
        C, D = spec.coefficients(spec.n * lam_grid)
        Kt = tps_kernel(_pairwise_r2(up[te], up[tr]))
        pred = Kt @ C + np.column_stack([np.ones(te.sum()), up[te]]) @ D
        return np.sum((pred - data.p_z[te, None]) ** 2, axis=0)

    sse = np.zeros(len(lam_grid))
    for part in map_fits(fold_sse, np.unique(folds).tolist(), workers=workers):
        sse += part
    return float(lam_grid[int(np.argmin(sse))])
