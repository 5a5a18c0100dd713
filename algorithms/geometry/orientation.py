"""Orientation of planes and lines: dip direction / dip, strike (right-hand rule), poles, normals,
trend / plunge, and the conversions between them.

Conventions (used everywhere in strikeline)
-------------------------------------------
* Coordinates: ``x`` east, ``y`` north (grid north of the layer's projected CRS), ``z`` up,
  all in metres.
* **Dip direction** is the azimuth of the steepest descent of the plane, 0–360° clockwise
  from grid north. **Dip** is the angle of that line below horizontal, 0–90°.
* **Strike** follows the right-hand rule: facing along the strike azimuth, the plane dips to
  the right, so ``strike = dip_direction − 90° (mod 360)``.
* **Normals** are unit vectors pointing upward (``nz >= 0``). The horizontal part of the
  upward normal points down-dip.
* The **pole** is the downward normal, given as trend (0–360°) and plunge (0–90° below
  horizontal): ``trend = dip_direction + 180°``, ``plunge = 90° − dip``.

* **Lines** (borehole axes, poles) are given as trend (azimuth of the downward-pointing
  horizontal projection, 0–360°) and plunge (angle below horizontal, 0–90°); their unit
  vectors point downward.

All functions broadcast over numpy arrays; angles at the interface are degrees. Apparent dip in a
section and the spacing of structure contours are in :mod:`strikeline.geometry.apparent`.

References
----------
Ragan, D. M. (2009). *Structural Geology: An Introduction to Geometrical Techniques*, 4th ed.
Cambridge University Press.

Groshong, R. H., Jr. (2006). *3-D Structural Geology: A Practical Guide to Quantitative Surface
and Subsurface Map Interpretation*, 2nd ed. Springer, Berlin.
"""
from __future__ import annotations

import numpy as np

from strikeline.errors import InputError, UndeterminedError

__all__ = [
    "normal_from_dip",
    "dip_from_normal",
    "strike_from_dip_direction",
    "dip_direction_from_strike",
    "pole_from_dip",
    "dip_from_pole",
    "three_point",
    "vector_from_trend_plunge",
    "trend_plunge_from_vector",
    "pole_from_normal",
    "normal_from_pole",
    "angle_between_normals",
    "azimuth_difference",
    "vector_components",
]


def _wrap360(a):
    return np.mod(a, 360.0)


def vector_components(v):
    """The x, y, z components of ``(..., 3)`` vectors as contiguous arrays.

    numpy's SIMD kernels for transcendental functions (``arctan2``, ``hypot``, ...) can take a
    different code path for strided operands depending on where the operands happen to lie in
    memory, which changes results in the last bit from run to run (seen with numpy 1.26 on
    AVX-512). Contiguous operands keep results bit-for-bit reproducible.
    """
    return tuple(np.array(v[..., i], order="C", copy=True) for i in range(3))


def normal_from_dip(dip_direction_deg, dip_deg):
    """Upward unit normal of a plane given by dip direction and dip.

    Parameters
    ----------
    dip_direction_deg, dip_deg : float or array_like
        Dip direction (0–360°, clockwise from grid north) and dip (0–90°).

    Returns
    -------
    ndarray, shape ``(..., 3)``
        ``(nx, ny, nz)`` with ``nz >= 0``.

    Examples
    --------
    >>> import numpy as np
    >>> np.round(normal_from_dip(90.0, 45.0), 6)
    array([0.707107, 0.      , 0.707107])
    """
    dd = np.radians(np.asarray(dip_direction_deg, dtype=float))
    d = np.radians(np.asarray(dip_deg, dtype=float))
    if np.any((np.asarray(dip_deg) < 0) | (np.asarray(dip_deg) > 90)):
        raise InputError(f"dip must lie between 0 and 90 degrees, got {dip_deg}")
    s = np.sin(d)
    return np.stack([s * np.sin(dd), s * np.cos(dd), np.cos(d)], axis=-1)


def _unit_vectors(vectors, what: str, *, sense: str) -> np.ndarray:
    """Vectors scaled to unit length and turned to point up (``sense="up"``) or down."""
    v = np.asarray(vectors, dtype=float)
    length = np.linalg.norm(v, axis=-1, keepdims=True)
    if np.any(length == 0):
        raise InputError(f"{what} of zero length has no orientation")
    v = v / length
    flip = v[..., 2:3] < 0 if sense == "up" else v[..., 2:3] > 0
    return np.where(flip, -v, v)


def dip_from_normal(normal):
    """Dip direction and dip (degrees) of planes from their normals (either sense).

    Parameters
    ----------
    normal : array_like, shape ``(..., 3)``
        Normal vectors, any length, pointing up or down.

    Returns
    -------
    dip_direction_deg, dip_deg : ndarray
        Dip direction in [0, 360) and dip in [0, 90]. A horizontal plane has dip 0 and, by
        convention, dip direction 0.

    Examples
    --------
    >>> dd, d = dip_from_normal([0.0, -1.0, 1.0])
    >>> float(dd), round(float(d), 6)
    (180.0, 45.0)
    """
    n = _unit_vectors(normal, "a normal vector", sense="up")
    nx, ny, nz = vector_components(n)
    horiz = np.hypot(nx, ny)
    dip = np.degrees(np.arctan2(horiz, nz))
    dd = _wrap360(np.degrees(np.arctan2(nx, ny)))
    dd = np.where(horiz < 1e-15, 0.0, dd)
    return dd, dip


def strike_from_dip_direction(dip_direction_deg):
    """Right-hand-rule strike: ``dip_direction − 90°`` wrapped to [0, 360)."""
    return _wrap360(np.asarray(dip_direction_deg, dtype=float) - 90.0)


def dip_direction_from_strike(strike_rhr_deg):
    """Dip direction from a right-hand-rule strike: ``strike + 90°`` wrapped to [0, 360)."""
    return _wrap360(np.asarray(strike_rhr_deg, dtype=float) + 90.0)


def pole_from_dip(dip_direction_deg, dip_deg):
    """Trend and plunge (degrees) of the pole (downward normal) of a plane."""
    dd = np.asarray(dip_direction_deg, dtype=float)
    d = np.asarray(dip_deg, dtype=float)
    return _wrap360(dd + 180.0), 90.0 - d


def dip_from_pole(trend_deg, plunge_deg):
    """Dip direction and dip (degrees) of the plane whose pole has the given trend and plunge."""
    t = np.asarray(trend_deg, dtype=float)
    p = np.asarray(plunge_deg, dtype=float)
    return _wrap360(t + 180.0), 90.0 - p


def three_point(p1, p2, p3):
    """Attitude of the plane through three points (the classic three-point problem).

    The normal is the cross product of two edge vectors, turned upward.

    Parameters
    ----------
    p1, p2, p3 : array_like, shape ``(3,)``
        Points ``(x, y, z)`` in metres.

    Returns
    -------
    normal : ndarray, shape ``(3,)``
        Upward unit normal.
    dip_direction_deg, dip_deg : float

    Raises
    ------
    UndeterminedError
        When the three points lie on one straight line (or coincide).

    Notes
    -----
    Common practice: the solution is unique when the points are not collinear; see e.g.
    Ragan, D. M. (2009), *Structural Geology: An Introduction to Geometrical Techniques*,
    4th ed., Cambridge University Press, ch. 2 (three-point problem).
    """
    a, b, c = (np.asarray(p, dtype=float) for p in (p1, p2, p3))
    n = np.cross(b - a, c - a)
    scale = max(np.linalg.norm(b - a) * np.linalg.norm(c - a), 1e-300)
    if np.linalg.norm(n) <= 1e-12 * scale:
        raise UndeterminedError(
            "the three points lie on one straight line, so the dip is undetermined; "
            "use points that are not in line (for example a third point off the line of the others)"
        )
    n = n / np.linalg.norm(n)
    if n[2] < 0:
        n = -n
    dd, d = dip_from_normal(n)
    return n, float(dd), float(d)


def azimuth_difference(azimuth_a_deg, azimuth_b_deg):
    """Signed difference ``a − b`` of two azimuths, wrapped to [−180, 180).

    Parameters
    ----------
    azimuth_a_deg, azimuth_b_deg : float or array_like
        Azimuths in degrees (any range).

    Returns
    -------
    ndarray
        The shortest turn from ``b`` to ``a``, degrees; positive clockwise.

    Examples
    --------
    >>> float(azimuth_difference(5.0, 355.0))
    10.0
    """
    a = np.asarray(azimuth_a_deg, dtype=float)
    b = np.asarray(azimuth_b_deg, dtype=float)
    return np.mod(a - b + 180.0, 360.0) - 180.0


def vector_from_trend_plunge(trend_deg, plunge_deg):
    """Unit vector of a line given by trend and plunge.

    Parameters
    ----------
    trend_deg : float or array_like
        Azimuth of the line's downward sense (degrees clockwise from grid north).
    plunge_deg : float or array_like
        Angle below horizontal, −90–90° (negative plunges point upward).

    Returns
    -------
    ndarray, shape ``(..., 3)``
        ``(cos p sin t, cos p cos t, −sin p)`` in the x-east, y-north, z-up frame.

    Examples
    --------
    >>> import numpy as np
    >>> np.round(vector_from_trend_plunge(90.0, 30.0), 6)
    array([ 0.866025,  0.      , -0.5     ])
    """
    t = np.radians(np.asarray(trend_deg, dtype=float))
    p_deg = np.asarray(plunge_deg, dtype=float)
    if np.any(~((p_deg >= -90) & (p_deg <= 90))):
        raise InputError(f"plunge_deg must lie between -90 and 90 degrees, got {plunge_deg}")
    p = np.radians(p_deg)
    c = np.cos(p)
    return np.stack(np.broadcast_arrays(c * np.sin(t), c * np.cos(t), -np.sin(p)), axis=-1)


def trend_plunge_from_vector(vector):
    """Trend and plunge (degrees) of lines given as vectors of either sense.

    Lines are axes: a vector pointing upward is reversed first, so the plunge is 0–90°.

    Parameters
    ----------
    vector : array_like, shape ``(..., 3)``
        Direction vectors, any non-zero length.

    Returns
    -------
    trend_deg, plunge_deg : ndarray
        Trend in [0, 360) and plunge in [0, 90]. A vertical line has trend 0 by convention.

    Examples
    --------
    >>> t, p = trend_plunge_from_vector([0.0, 1.0, 1.0])
    >>> float(t), round(float(p), 6)
    (180.0, 45.0)
    """
    v = _unit_vectors(vector, "a direction vector", sense="down")
    vx, vy, vz = vector_components(v)
    horiz = np.hypot(vx, vy)
    plunge = np.degrees(np.arctan2(-vz, horiz))
    trend = _wrap360(np.degrees(np.arctan2(vx, vy)))
    trend = np.where(horiz < 1e-15, 0.0, trend)
    return trend, plunge


def pole_from_normal(normal):
    """Trend and plunge (degrees) of the pole (downward normal) of planes given by normals.

    Parameters
    ----------
    normal : array_like, shape ``(..., 3)``
        Plane normals of either sense.

    Returns
    -------
    trend_deg, plunge_deg : ndarray
        ``trend = dip_direction + 180°``, ``plunge = 90° − dip``.
    """
    return trend_plunge_from_vector(normal)


def normal_from_pole(trend_deg, plunge_deg):
    """Upward unit normal of the plane whose pole has the given trend and plunge.

    Parameters
    ----------
    trend_deg, plunge_deg : float or array_like
        Pole trend (0–360°) and plunge (0–90°).

    Returns
    -------
    ndarray, shape ``(..., 3)``
        Upward unit normal (the reversed pole vector).
    """
    return -vector_from_trend_plunge(trend_deg, plunge_deg)


def angle_between_normals(normal_a, normal_b):
    """Angle (degrees, 0–90) between planes given by their normals.

    Normals are treated as axes (either sense). The angle is computed as
    ``atan2(|a × b|, |a · b|)``, accurate for small angles as well as near 90°.

    Parameters
    ----------
    normal_a, normal_b : array_like, shape ``(..., 3)``
        Normals, any non-zero length; they broadcast against each other.

    Returns
    -------
    ndarray
        Angle between the planes in degrees.

    Examples
    --------
    >>> round(float(angle_between_normals([0, 0, 1], [0, 1, 1])), 6)
    45.0
    """
    a = np.asarray(normal_a, dtype=float)
    b = np.asarray(normal_b, dtype=float)
    if np.any(np.linalg.norm(a, axis=-1) == 0) or np.any(np.linalg.norm(b, axis=-1) == 0):
        raise InputError("a normal vector of zero length has no orientation")
    cross = np.linalg.norm(np.cross(a, b), axis=-1)
    dot = np.abs(np.sum(a * b, axis=-1))
    return np.degrees(np.arctan2(cross, dot))
