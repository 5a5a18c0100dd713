"""Robust linear least squares: fits that ignore gross errors (FAST-LTS, then Tukey's biweight)."""
from __future__ import annotations

import numpy as np

from strikeline.errors import UndeterminedError

__all__ = ["robust_lstsq", "BIWEIGHT_C", "MAD_TO_SIGMA"]


#: Tuning constant of Tukey's biweight: 95 % efficiency at normal errors (Source: Holland &
#: Welsch 1977, Table 1; from memory).
BIWEIGHT_C = 4.685
#: Consistency factor of the median absolute deviation at normal errors (common practice).
MAD_TO_SIGMA = 1.4826


def robust_lstsq(A, y, *, fixed=None, scale_floor: float = 0.0, max_iter: int = 50,
                 n_starts: int = 50, coverage: float = 0.5):
    """Linear least squares that ignores gross errors: LTS concentration steps, then biweight.

    First the fit is found by least trimmed squares with the FAST-LTS algorithm — from
    ``n_starts`` seeded elemental subsets and the least-squares fit, concentration steps refit
    to the half of the rows with the smallest residuals until that half no longer changes
    (Rousseeuw & Van Driessen 2006) — which survives up to half the rows being wrong (a faulted block, a
    mistraced stretch); then it is polished by iteratively reweighted least squares with
    Tukey's biweight (Beaton & Tukey 1974), the scale being the median absolute deviation of
    the free rows, never below ``scale_floor``.

    Parameters
    ----------
    A : array_like, shape ``(n, p)``
        Design matrix.
    y : array_like, shape ``(n,)``
    fixed : array_like of bool, shape ``(n,)``, optional
        Rows that always keep full weight (e.g. boreholes).
    scale_floor : float, default 0
        Smallest residual scale (e.g. the stated error of the data).
    max_iter : int, default 50
        Biweight iterations.
    n_starts : int, default 50
        Elemental starts of FAST-LTS.
    coverage : float, default 0.5
        Share of the rows the trimmed fit must explain (0.5: the highest breakdown; larger
        values keep a model from fitting only half of a curved surface).

    Returns
    -------
    coef : ndarray, shape ``(p,)``
    weights : ndarray, shape ``(n,)``
        Final biweights (0 for rows judged gross errors).
    scale : float
        Final residual scale.

    Raises
    ------
    UndeterminedError
        Fewer rows than ``p + 1`` or a rank-deficient design.

    References
    ----------
    Beaton, A. E. & Tukey, J. W. (1974). The fitting of power series, meaning polynomials,
    illustrated on band-spectroscopic data. *Technometrics*, 16(2), 147–185.
    https://doi.org/10.1080/00401706.1974.10489171

    Rousseeuw, P. J. & Van Driessen, K. (2006). Computing LTS regression for large data sets.
    *Data Mining and Knowledge Discovery*, 12(1), 29–45.
    https://doi.org/10.1007/s10618-005-0024-4

    Examples
    --------
    >>> import numpy as np
    >>> x = np.arange(100.0)
    >>> y = 2.0 + 0.5 * x
    >>> y[70:] += 40.0                              # 30 % of the rows offset (a faulted block)
    >>> coef, w, s = robust_lstsq(np.column_stack([np.ones(100), x]), y, scale_floor=0.1)
    >>> np.round(coef, 6).tolist(), int((w == 0).sum())
    ([2.0, 0.5], 30)
    """
    A = np.asarray(A, dtype=float)
    y = np.asarray(y, dtype=float)
    n, p = A.shape
    fixed = np.zeros(n, bool) if fixed is None else np.asarray(fixed, bool)
    if n < p + 1 or np.linalg.matrix_rank(A) < p:
        raise UndeterminedError("too few or collinear data for a robust fit")
    h = max(p + 1, (n + p + 1) // 2, int(np.ceil(float(coverage) * n)))
    h = min(h, n)

    def c_steps(coef, steps):
        keep = None
        for _ in range(steps):
            r = np.abs(y - A @ coef)
            r[fixed] = -1.0
            new = np.sort(np.argpartition(r, h - 1)[:h])
            if keep is not None and np.array_equal(new, keep):
                break
            keep = new
            if np.linalg.matrix_rank(A[keep]) < p:
                break
            coef = np.linalg.lstsq(A[keep], y[keep], rcond=None)[0]
        r = y - A @ coef
        return coef, float(np.sum(np.sort(r[~fixed] ** 2)[:max(1, h - int(fixed.sum()))]))

    # FAST-LTS: elemental starts (seeded, so the result is reproducible) plus the least-squares
    # fit, two concentration steps each, then the best few to convergence
    rng = np.random.default_rng(20060101)
    starts = [np.linalg.lstsq(A, y, rcond=None)[0]]
    for _ in range(n_starts):
        idx = rng.choice(n, p, replace=False)
        if np.linalg.matrix_rank(A[idx]) == p:
            starts.append(np.linalg.solve(A[idx], y[idx]))
    trial = sorted((c_steps(c, 2) for c in starts), key=lambda t: t[1])[:5]
    coef = min((c_steps(c, 100) for c, _ in trial), key=lambda t: t[1])[0]
    w = np.ones(n)
    free = ~fixed
    scale = float(scale_floor)
    for _ in range(max_iter):
        r = y - A @ coef
        scale = max(MAD_TO_SIGMA * float(np.median(np.abs(r[free]))) if free.any() else 0.0,
                    float(scale_floor), 1e-12)
        t = r / (BIWEIGHT_C * scale)
        w_new = np.where(np.abs(t) < 1, (1 - t * t) ** 2, 0.0)
        w_new[fixed] = 1.0
        if np.count_nonzero(w_new) < p or np.linalg.matrix_rank(A[w_new > 0]) < p:
            break
        sw = np.sqrt(w_new)
        coef_new = np.linalg.lstsq(A * sw[:, None], y * sw, rcond=None)[0]
        done = np.max(np.abs(w_new - w)) < 1e-6
        coef, w = coef_new, w_new
        if done:
            break
    return coef, w, scale
