"""Orientation of planes: dip direction / dip, strike (right-hand rule), poles and normals.

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

All functions broadcast over numpy arrays; angles at the interface are degrees.
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
]


def _wrap360(a):
    return np.mod(a, 360.0)


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
    n = np.asarray(normal, dtype=float)
    length = np.linalg.norm(n, axis=-1, keepdims=True)
    if np.any(length == 0):
        raise InputError("a normal vector of zero length has no orientation")
    n = n / length
    n = np.where(n[..., 2:3] < 0, -n, n)  # upward
    horiz = np.hypot(n[..., 0], n[..., 1])
    dip = np.degrees(np.arctan2(horiz, n[..., 2]))
    dd = _wrap360(np.degrees(np.arctan2(n[..., 0], n[..., 1])))
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
