"""Best-fit planes through 3D picks.

The fit is total least squares: the plane passes through the centroid, and its normal is the
eigenvector of the smallest eigenvalue of the centred points' scatter (orientation) matrix.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from strikeline.errors import InputError, UndeterminedError
from strikeline.geometry.orientation import dip_from_normal, strike_from_dip_direction, three_point

__all__ = ["PlaneFit", "fit_plane", "plane_elevation", "scatter_eigen"]

#: Collinearity guard: the picks are taken to lie on one line when the spread across the
#: line (square root of the middle eigenvalue) is below this fraction of the spread along it.
#: The graded shape measures of strikeline.attitude.quality decide "weak" vs "good"; this only refuses
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
        Attitude (see :mod:`strikeline.geometry.orientation` for conventions).
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
