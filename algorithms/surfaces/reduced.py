"""The thin-plate spline's pick system reduced to the null space of its linear part, and the
spline at one given smoothing solved by a Cholesky factorisation instead of an eigen-decomposition.

Reduction
    ``T = [1 u v] = Q [R; 0]`` by three Householder reflections (:func:`_householder`). Written
    as ``Q = I − V W Vᵀ`` (the compact WY form; Schreiber & Van Loan 1989), ``Qᵀ K Q = K − V Aᵀ −
    A Vᵀ`` with ``A = K V W − ½ V (Wᵀ Vᵀ K V W)``: one rank-6 update of ``K``
    (:func:`_reduce`), whose trailing block ``M = Q₂ᵀ K Q₂`` the smoothing works on.
One smoothing (:class:`_FixedSmoothing`)
    With ``nλ`` given (k-fold choice, or a fixed λ), everything the fit reports comes from the
    Cholesky factor of ``B = M + nλI`` (Golub & Van Loan 2013, sect. 4.2), about a sixth of the
    cost of the eigen-decomposition that generalized cross-validation needs for many λ: with
    ``z₂ = Q₂ᵀ z`` and ``y = B⁻¹ z₂``, the residual sum of squares ``||(I − A)z||² = (nλ)²
    ||y||²``, ``tr(I − A) = nλ tr(B⁻¹)`` (``tr(B⁻¹) = ||L⁻¹||²``, LAPACK ``trtri``), the Bayesian
    scale ``b̂ = ||y||² / tr(B⁻¹)`` and the radial coefficients ``c = Q₂ y`` — the same sums
    :func:`strikeline.stats.gcv_from_spectrum` takes over the eigenvalues (Wahba 1990), rounded
    differently (they agree to about 1e-12 relative).

References
----------
Schreiber, R. & Van Loan, C. (1989). A storage-efficient WY representation for products of
Householder transformations. *SIAM Journal on Scientific and Statistical Computing*, 10(1),
53–57. https://doi.org/10.1137/0910005

Golub, G. H. & Van Loan, C. F. (2013). *Matrix Computations*, 4th ed. Johns Hopkins University
Press, Baltimore.

Wahba, G. (1990). *Spline Models for Observational Data*. CBMS-NSF Regional Conference Series in
Applied Mathematics 59, SIAM. https://doi.org/10.1137/1.9781611970128
"""
from __future__ import annotations

import threading

import numpy as np
from scipy import linalg

from strikeline.errors import UndeterminedError
from strikeline.surfaces.kernel import _pairwise_r2, tps_kernel


#: Below this reciprocal condition number of ``M + nλI`` (LAPACK ``pocon``'s estimate) the
#: Cholesky route is not trusted (its relative error may reach the condition number times the
#: unit round-off) and the eigen-decomposition, which clips eigenvalues below zero, is used
#: instead. On the 1,750 picks of an invented fold sheet (condition 6e7 down to nλ = 1e-12 of the
#: top eigenvalue) the two routes agreed to 1e-9 m in the surface and 1e-9 relative in V(λ).
CHOLESKY_MIN_RCOND = 1e-10


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


def _wy(vs, betas, n):
    """Compact WY form ``Q = H₀H₁… = I − V W Vᵀ``: ``V`` (n×p, reflector k from row k) and the
    upper-triangular ``W`` (LAPACK ``larft``'s recurrence)."""
    p = len(vs)
    V = np.zeros((n, p))
    W = np.zeros((p, p))
    for k, (v, b) in enumerate(zip(vs, betas)):
        V[k:, k] = v
        W[:k, k] = -b * (W[:k, :k] @ (V[:, :k].T @ V[:, k]))
        W[k, k] = b
    return V, W


def _reduce(K, vs, betas):
    """``M = Q₂ᵀ K Q₂`` (symmetric ``K``) by one rank-``2p`` update (module docstring)."""
    n = len(K)
    p = len(vs)
    V, W = _wy(vs, betas, n)
    P = K @ V @ W
    A = P - 0.5 * V @ (W.T @ (V.T @ P))
    M = K[p:, p:] - np.hstack([V[p:], A[p:]]) @ np.hstack([A[p:], V[p:]]).T
    return 0.5 * (M + M.T)


class _Reduced:
    """The pick system of a thin-plate spline at ``u`` (normalised, ``(n, 2)``) with data ``z``:
    kernel ``K``, the QR of the linear part (``Q₁``, ``R₁``, reflectors) and ``M = Q₂ᵀ K Q₂``.

    ``K``: the kernel matrix of ``u`` when already known (:class:`PickSystems` slices it from the
    kernel of a superset of the picks); it must equal ``tps_kernel(_pairwise_r2(u, u))``."""

    def __init__(self, u, z, *, K=None):
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
        self.vs, self.betas = vs, betas
        self.K = tps_kernel(_pairwise_r2(u, u)) if K is None else K
        self.M = _reduce(self.K, vs, betas)
        e = np.zeros((n, 3))
        e[:3] = np.eye(3)
        self.Q1 = _apply_q(vs, betas, e)
        self.R1 = R

    def q2t(self, X):
        """``Q₂ᵀ X`` (rows of X; a vector gives a vector)."""
        X = np.asarray(X, dtype=float)
        return _apply_qt(self.vs, self.betas, X.reshape(len(X), -1))[3:].reshape((len(X) - 3,) + X.shape[1:])

    def q2(self, Y):
        """``Q₂ Y``."""
        Y = np.asarray(Y, dtype=float)
        Y2 = Y.reshape(len(Y), -1)
        out = _apply_q(self.vs, self.betas, np.concatenate([np.zeros((3, Y2.shape[1])), Y2]))
        return out.reshape((len(Y) + 3,) + Y.shape[1:])

    def top_eigenvalue(self) -> float:
        """Largest eigenvalue of ``M`` (LAPACK ``syevr`` for that one only; at least 0)."""
        m = len(self.M)
        top = linalg.eigh(self.M, eigvals_only=True, subset_by_index=[m - 1, m - 1], driver="evr",
                          check_finite=False)
        return max(float(top[0]), 0.0)

    def lambda_grid(self, num=61):
        """``nλ`` values spanning the spectrum of ``M`` (as :meth:`_Spectrum.lambda_grid`)."""
        top = max(self.top_eigenvalue(), 1e-300)
        return top * np.logspace(-12.0, 2.0, num)


class PickSystems:
    """The pick systems (:class:`_Reduced`) of one fit's picks and of its subsets (the
    cross-validation folds, the coarser hold-out, the misfit check's checkerboards): the kernel
    matrix of all picks is computed once and each subset's is sliced from it, and the system of
    all picks is made once however often it is asked for (the λ grid, then the final fit).

    Exact: a kernel entry ``φ(|u_i − u_j|)`` depends only on the two points (``_pairwise_r2`` and
    :func:`~strikeline.surfaces.kernel.tps_kernel` work element by element), and a subset's
    normalised coordinates are the rows of all picks' (:meth:`strikeline.surfaces.data._Data.picks`
    keeps the origin and scale), so the sliced matrix has the bits the subset's own would have.
    The caller names a subset's rows (the mask or indices it took them by); points given without
    them, or that are not those rows of ``u``, get their own kernel. Fits on several threads share one
    (:mod:`strikeline.surfaces.parallel`): what is made on first use is made once, under a lock.
    """

    def __init__(self, u, z):
        self.u = np.asarray(u, dtype=float)
        self.z = np.asarray(z, dtype=float)
        self._all = None
        self._lock = threading.Lock()

    def all_picks(self) -> _Reduced:
        """The system of all picks (made on first use)."""
        with self._lock:
            if self._all is None:
                self._all = _Reduced(self.u, self.z)
            return self._all

    def reduced(self, u, z, rows=None) -> _Reduced:
        """The system of the picks ``u`` with data ``z``: ``rows`` (a boolean mask or indices) of this
        fit's picks, or (``None``) any picks."""
        u = np.asarray(u, dtype=float)
        z = np.asarray(z, dtype=float)
        if u.shape == self.u.shape and np.array_equal(u, self.u) and np.array_equal(z, self.z):
            return self.all_picks()
        if rows is None or len(z) < 4:
            return _Reduced(u, z)
        idx = np.arange(len(self.u))[rows]
        if len(idx) != len(u) or not np.array_equal(self.u[idx], u):
            return _Reduced(u, z)
        try:
            K = self.all_picks().K
        except UndeterminedError:  # all picks in one line: the subset says so in its own words
            return _Reduced(u, z)
        return _Reduced(u, z, K=K[np.ix_(idx, idx)])


class _FixedSmoothing:
    """The spline of a :class:`_Reduced` system at one ``nλ > 0`` by Cholesky (module docstring).

    Offers what :func:`strikeline.surfaces.spline._fit_tps` asks of a :class:`_Spectrum` at that
    ``nλ``: :meth:`gcv`, :meth:`bhat`, :meth:`coefficients` and :meth:`solver`. Raises
    ``numpy.linalg.LinAlgError`` when ``nλ <= 0`` or ``M + nλI`` is not numerically positive
    definite or is worse conditioned than ``1 / CHOLESKY_MIN_RCOND``: the caller decomposes instead.
    """

    def __init__(self, red: _Reduced, nlam: float):
        nlam = float(nlam)
        if not nlam > 0:
            raise np.linalg.LinAlgError("no smoothing: the spline interpolates, by the spectrum")
        B = red.M.copy()
        B[np.diag_indices_from(B)] += nlam
        anorm = float(np.max(np.sum(np.abs(B), axis=0)))
        c, info = linalg.lapack.dpotrf(B, lower=1, overwrite_a=1, clean=1)
        if info != 0:
            raise np.linalg.LinAlgError("M + nλI is not positive definite")
        rcond, info = linalg.lapack.dpocon(c, anorm, uplo="L")
        if info != 0 or not rcond >= CHOLESKY_MIN_RCOND:
            raise np.linalg.LinAlgError(f"M + nλI is too ill-conditioned for a Cholesky factor (rcond {rcond:.1e})")
        self.red, self.nlam, self.chol = red, nlam, c
        # tr(B⁻¹) = ||L⁻¹||²_F for B = LLᵀ: one triangular inverse (LAPACK trtri), half of potri
        inv, info = linalg.lapack.dtrtri(c, lower=1, overwrite_c=0)
        if info != 0:
            raise np.linalg.LinAlgError("M + nλI could not be inverted")
        self.trace_inv = float(np.einsum("ij,ij->", inv, inv))
        self.n = red.n
        self.y = self._solve(red.q2t(red.z))

    def _solve(self, b):
        return linalg.cho_solve((self.chol, True), b, check_finite=False)

    def _check(self, nlam):
        if float(np.atleast_1d(nlam)[0]) != self.nlam:
            raise ValueError(f"this factorisation is for nλ = {self.nlam}, not {nlam}")

    def gcv(self, nlam):
        """``(V, rss, tr)`` as one-element arrays (:func:`strikeline.stats.gcv_from_spectrum`)."""
        self._check(nlam)
        rss = self.nlam ** 2 * float(self.y @ self.y)
        tr = self.nlam * self.trace_inv
        return np.array([self.n * rss / tr ** 2]), np.array([rss]), np.array([tr])

    def bhat(self, nlam):
        """Bayesian scale ``b̂ = σ̂² / (nλ)`` (Wahba 1990)."""
        self._check(nlam)
        return float(self.y @ self.y) / self.trace_inv if self.trace_inv > 0 else 0.0

    def coefficients(self, nlam):
        """Radial coefficients ``c`` and linear part ``d`` (one column each)."""
        self._check(nlam)
        red = self.red
        C = red.q2(self.y)[:, None]
        D = linalg.solve_triangular(red.R1, red.Q1.T @ (red.z[:, None] - red.K @ C - self.nlam * C))
        return C, D

    def solver(self):
        """``b -> M⁻¹ b`` for the bordered pick system ``[[K + nλI, T], [Tᵀ, 0]]``
        (:func:`bordered_solver`, with ``B⁻¹`` from the factor)."""
        red = self.red
        return bordered_solver(red.Q1, red.R1, red.K, self.nlam,
                               lambda v: red.q2(self._solve(red.q2t(v))))


def bordered_solver(Q1, R1, K, nlam, null_solve):
    """``b -> M⁻¹ b`` for the pick system ``M = [[K + nλI, T], [Tᵀ, 0]]`` with ``T = Q₁R``.

    The solution of ``(K + nλI) c + T d = r``, ``Tᵀc = t`` is ``c = c₁ + Q₂B⁻¹Q₂ᵀ (r − (K + nλI)
    c₁)`` with ``c₁ = Q₁R⁻ᵀt`` and ``B = Q₂ᵀ(K + nλI)Q₂``, and ``d = R⁻¹Q₁ᵀ(r − (K + nλI) c)``;
    ``null_solve(v)`` applies ``Q₂B⁻¹Q₂ᵀ`` (from the spectrum or from a Cholesky factor):
    ``O(n²)`` per right-hand side, no factorisation beyond the one already made.
    """
    n = K.shape[0]

    def solve(b):
        b = np.asarray(b, dtype=float)
        flat = b.ndim == 1
        b = b.reshape(n + 3, -1)
        r, t = b[:n], b[n:]
        c = Q1 @ linalg.solve_triangular(R1, t, trans="T")
        c = c + null_solve(r - K @ c - nlam * c)
        d = linalg.solve_triangular(R1, Q1.T @ (r - K @ c - nlam * c))
        out = np.vstack([c, d])
        return out[:, 0] if flat else out

    return solve
