"""Best-fit planes through 3D picks.

The fit is total least squares: the plane passes through the centroid, and its normal is the
eigenvector of the smallest eigenvalue of the centred points' scatter (orientation) matrix.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from strikeline.errors import InputError, UndeterminedError
from strikeline.orientation import dip_from_normal, strike_from_dip_direction, three_point

__all__ = ["PlaneFit", "fit_plane", "plane_elevation", "scatter_eigen", "robust_lstsq"]

#: Collinearity guard: the picks are taken to lie on one line when the spread across the
#: line (square root of the middle eigenvalue) is below this fraction of the spread along it.
#: The finer graded shape measures of issue 3 decide "weak" vs "good"; this only refuses
#: picks whose dip is undetermined in floating point.
COLLINEAR_RATIO = 1e-4


@dataclass(frozen=True)
class PlaneFit:
    """A plane fitted to picks.

    Attributes
    ----------
    normal : ndarray, shape (3,)
        Upward unit normal.
    centroid : ndarray, shape (3,)
        Centroid of the picks, a point on the plane (metres).
    dip_deg, dip_direction_deg, strike_rhr_deg : float
        Attitude (see :mod:`strikeline.orientation` for conventions).
    rms_m : float
        Root-mean-square orthogonal distance of the picks from the plane (metres).
    n_points : int
    eigenvalues : ndarray, shape (3,)
        Eigenvalues of the scatter matrix in ascending order (m²), for shape diagnostics.
    """

    normal: np.ndarray
    centroid: np.ndarray
    dip_deg: float
    dip_direction_deg: float
    strike_rhr_deg: float
    rms_m: float
    n_points: int
    eigenvalues: np.ndarray

    def elevation(self, x, y):
        """Elevation of the plane at map coordinates ``x, y`` (broadcasting)."""
        return plane_elevation(self.normal, self.centroid, x, y)


def scatter_eigen(points):
    """Eigen-decomposition of the scatter matrix of centred points.

    Returns ``(centroid, eigenvalues ascending, eigenvectors as columns)``.
    """
    p = np.asarray(points, dtype=float)
    centroid = p.mean(axis=0)
    q = p - centroid
    scatter = q.T @ q
    w, v = np.linalg.eigh(scatter)
    return centroid, np.clip(w, 0.0, None), v


def fit_plane(points) -> PlaneFit:
    """Fit a plane to 3D points by total least squares.

    Parameters
    ----------
    points : array_like, shape ``(n, 3)``
        ``(x, y, z)`` picks in metres, ``n >= 3``.

    Returns
    -------
    PlaneFit

    Raises
    ------
    UndeterminedError
        Fewer than three points, or all points on one straight line (the dip is then
        undetermined).

    Notes
    -----
    The normal is the eigenvector of the smallest eigenvalue of
    :math:`S = \\sum_i (p_i - \\bar p)(p_i - \\bar p)^T`; it minimises the sum of squared
    orthogonal distances. With exactly three points the fit is the three-point solution (the
    plane through them), computed directly. The RMS orthogonal residual is
    :math:`\\sqrt{\\lambda_{min} / n}`.

    References
    ----------
    Fernández, O. (2005). Obtaining a best fitting plane through 3D georeferenced data.
    *Journal of Structural Geology*, 27(5), 855–858. https://doi.org/10.1016/j.jsg.2004.12.004

    Examples
    --------
    >>> import numpy as np
    >>> x, y = np.meshgrid(np.arange(5.0), np.arange(5.0))
    >>> pts = np.column_stack([x.ravel(), y.ravel(), (-0.5 * x).ravel()])
    >>> fit = fit_plane(pts)
    >>> round(fit.dip_deg, 2), round(fit.dip_direction_deg, 2)
    (26.57, 90.0)
    """
    p = np.asarray(points, dtype=float)
    if p.ndim != 2 or p.shape[1] != 3:
        raise InputError(f"picks must be an (n, 3) array of x, y, z; got shape {p.shape}")
    p = p[np.all(np.isfinite(p), axis=1)]
    n = len(p)
    if n < 3:
        raise UndeterminedError(
            f"only {n} usable pick(s); a plane needs at least three picks not in one line - "
            "add contour lines or a DEM that the contact crosses, or a longer contact"
        )
    centroid, w, v = scatter_eigen(p)
    if w[2] <= 0 or np.sqrt(w[1] / w[2]) < COLLINEAR_RATIO:
        raise UndeterminedError(
            f"all {n} picks lie on one straight line, so the dip is undetermined - "
            "add picks off that line: a contact that crosses more relief, a second contact "
            "of the same surface, or a borehole"
        )
    if n == 3:
        normal, dd, d = three_point(*p)
    else:
        normal = v[:, 0]
        if normal[2] < 0:
            normal = -normal
        dd, d = (np.asarray(a).item() for a in dip_from_normal(normal))
    rms = float(np.sqrt(np.mean(((p - centroid) @ normal) ** 2)))
    return PlaneFit(
        normal=normal,
        centroid=centroid,
        dip_deg=float(d),
        dip_direction_deg=float(dd),
        strike_rhr_deg=float(strike_from_dip_direction(dd)),
        rms_m=rms,
        n_points=n,
        eigenvalues=w,
    )


def plane_elevation(normal, centroid, x, y):
    """Elevation ``z(x, y)`` of the plane with the given normal through ``centroid``.

    Raises
    ------
    UndeterminedError
        For a vertical plane, which has no single elevation at a map point.
    """
    nx, ny, nz = (float(c) for c in normal)
    if abs(nz) < 1e-9:
        raise UndeterminedError(
            "the fitted plane is vertical, so it has no elevation surface; "
            "a vertical contact is better described by its trace"
        )
    cx, cy, cz = (float(c) for c in centroid)
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    return cz - (nx * (x - cx) + ny * (y - cy)) / nz


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
