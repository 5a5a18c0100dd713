"""Dip seen in sections and on maps: apparent dip in a vertical section of any azimuth, true dip
from an apparent one, and the horizontal spacing of structure contours on a dipping plane.

Angles and conventions are those of :mod:`strikeline.geometry.orientation` (dip direction
clockwise from grid north, right-hand-rule strike, degrees at the interface); all functions
broadcast over numpy arrays.
"""
from __future__ import annotations

import numpy as np

from strikeline.errors import InputError
from strikeline.geometry.orientation import strike_from_dip_direction

__all__ = [
    "apparent_dip",
    "apparent_dip_from_strike_angle",
    "true_dip_from_apparent",
    "contour_spacing_from_dip",
    "dip_from_contour_spacing",
]


def _check_dip(dip_deg, name="dip_deg"):
    d = np.asarray(dip_deg, dtype=float)
    if np.any(~((d >= 0) & (d <= 90))):
        raise InputError(
            f"{name} must lie between 0 and 90 degrees, got {dip_deg}; give the dip as an angle "
            "below horizontal"
        )
    return d


def apparent_dip_from_strike_angle(dip_deg, angle_from_strike_deg):
    """Apparent dip in a vertical section at an angle β from the strike.

    Parameters
    ----------
    dip_deg : float or array_like
        True dip δ, 0–90°.
    angle_from_strike_deg : float or array_like
        Angle β (degrees) measured from the right-hand-rule strike clockwise to the section
        line. β = 90° is the dip direction (apparent dip = true dip), β = 0° or 180° the strike.

    Returns
    -------
    ndarray
        Apparent dip α in degrees, signed: positive when the plane descends in the direction of
        the section line, negative when it rises (β between 180° and 360°).

    Notes
    -----
    :math:`\\tan\\alpha = \\tan\\delta \\, \\sin\\beta`, evaluated as
    :math:`\\alpha = \\operatorname{atan2}(\\sin\\delta\\sin\\beta, \\cos\\delta)` so that a
    vertical plane (δ = 90°) gives ±90° except along its strike, where it gives 0°. Sines and
    cosines below ``1e-12`` are taken as exactly 0: ``sin(180°)`` and ``cos(90°)`` are round-off
    residues of about 1e-16 in floating point, and ``atan2`` of two such residues would give an
    arbitrary angle (±63.4° for a vertical plane along its strike) instead of 0°.

    References
    ----------
    Ragan, D. M. (2009). *Structural Geology: An Introduction to Geometrical Techniques*, 4th ed.
    Cambridge University Press (apparent dip, chapter on structural planes).

    Rowland, S. M., Duebendorfer, E. M. & Schiefelbein, I. M. (2007). *Structural Analysis and
    Synthesis: A Laboratory Course in Structural Geology*, 3rd ed. Blackwell, Oxford.

    Examples
    --------
    >>> round(float(apparent_dip_from_strike_angle(30.0, 45.0)), 3)
    22.208
    """
    d = np.radians(_check_dip(dip_deg))
    b = np.radians(np.mod(np.asarray(angle_from_strike_deg, dtype=float), 360.0))
    sin_b = _snap_zero(np.sin(b))
    cos_d = _snap_zero(np.cos(d))
    # + 0.0 turns atan2's -0.0 (a section read against the strike) into 0.0
    return np.degrees(np.arctan2(np.sin(d) * sin_b, cos_d)) + 0.0


#: Sines and cosines smaller than this are round-off residues of exact zeros (sin 180°, cos 90°).
_TRIG_ZERO = 1e-12


def _snap_zero(v):
    return np.where(np.abs(v) < _TRIG_ZERO, 0.0, v)


def apparent_dip(dip_direction_deg, dip_deg, section_azimuth_deg):
    """Apparent dip of a plane in a vertical section of a given azimuth.

    Parameters
    ----------
    dip_direction_deg, dip_deg : float or array_like
        Attitude of the plane (degrees).
    section_azimuth_deg : float or array_like
        Azimuth of the section line (degrees clockwise from grid north), in the sense in which
        the section is read.

    Returns
    -------
    ndarray
        Apparent dip in degrees, positive when the plane descends toward ``section_azimuth_deg``,
        negative when it rises that way (the same plane read toward the opposite azimuth).

    Notes
    -----
    With the right-hand-rule strike :math:`s = \\text{dip direction} - 90°` and
    :math:`\\beta = \\text{azimuth} - s`, :math:`\\tan\\alpha = \\tan\\delta\\sin\\beta`
    (see :func:`apparent_dip_from_strike_angle`). Equivalently the descent per unit horizontal
    distance along the azimuth is
    :math:`\\tan\\delta\\cos(\\text{azimuth} - \\text{dip direction})`.

    References
    ----------
    Ragan, D. M. (2009). *Structural Geology: An Introduction to Geometrical Techniques*, 4th ed.
    Cambridge University Press (apparent dip).

    Examples
    --------
    >>> round(float(apparent_dip(135.0, 30.0, 90.0)), 3)
    22.208
    """
    strike = strike_from_dip_direction(dip_direction_deg)
    beta = np.asarray(section_azimuth_deg, dtype=float) - strike
    return apparent_dip_from_strike_angle(dip_deg, beta)


def true_dip_from_apparent(apparent_dip_deg, angle_from_strike_deg):
    """True dip from one apparent dip and the angle of its section from the strike.

    Parameters
    ----------
    apparent_dip_deg : float or array_like
        Apparent dip α (degrees), signed as returned by :func:`apparent_dip_from_strike_angle`.
    angle_from_strike_deg : float or array_like
        Angle β from the right-hand-rule strike to the section line (degrees); must not be 0°
        or 180° (a section along strike shows no dip).

    Returns
    -------
    ndarray
        True dip δ in degrees, from :math:`\\tan\\delta = \\tan\\alpha / \\sin\\beta`.

    Raises
    ------
    InputError
        When the section runs along strike, or α and β disagree in sign (the plane would
        have to dip beyond vertical).

    References
    ----------
    Ragan, D. M. (2009). *Structural Geology: An Introduction to Geometrical Techniques*, 4th ed.
    Cambridge University Press (apparent dip).

    Examples
    --------
    >>> round(float(true_dip_from_apparent(22.208, 45.0)), 2)
    30.0
    """
    a = np.radians(np.asarray(apparent_dip_deg, dtype=float))
    b = np.radians(np.asarray(angle_from_strike_deg, dtype=float))
    sb = np.sin(b)
    if np.any(np.abs(sb) < 1e-12):
        raise InputError(
            "angle_from_strike_deg is 0 or 180 degrees: a section along strike shows no dip; "
            "use a section at an angle to the strike"
        )
    t = np.tan(a) / sb
    if np.any(t < -1e-12):
        raise InputError(
            "apparent_dip_deg and angle_from_strike_deg disagree in sign: a plane that descends "
            "along the section must have the section on its down-dip side (0 < beta < 180)"
        )
    return np.degrees(np.arctan(np.clip(t, 0.0, None)))


def contour_spacing_from_dip(dip_deg, interval_m):
    """Horizontal spacing of structure contours on a plane: :math:`\\Delta z / \\tan\\delta`.

    Parameters
    ----------
    dip_deg : float or array_like
        Dip δ (degrees, 0–90).
    interval_m : float or array_like
        Contour interval Δz (metres, positive).

    Returns
    -------
    ndarray
        Spacing in metres measured horizontally in the dip direction; ``inf`` for a
        horizontal plane, 0 for a vertical one.

    References
    ----------
    Groshong, R. H., Jr. (2006). *3-D Structural Geology: A Practical Guide to Quantitative
    Surface and Subsurface Map Interpretation*, 2nd ed. Springer, Berlin, eq. 2.21.

    Examples
    --------
    >>> round(float(contour_spacing_from_dip(30.0, 10.0)), 3)
    17.321
    """
    d = np.radians(_check_dip(dip_deg))
    dz = np.asarray(interval_m, dtype=float)
    if np.any(~(dz > 0)):
        raise InputError(f"interval_m must be positive, got {interval_m}")
    with np.errstate(divide="ignore"):
        return dz * np.cos(d) / np.sin(d)


def dip_from_contour_spacing(spacing_m, interval_m):
    """Dip (degrees) of a plane from the horizontal spacing of its structure contours.

    The inverse of :func:`contour_spacing_from_dip`: :math:`\\delta = \\arctan(\\Delta z / s)`.

    Parameters
    ----------
    spacing_m : float or array_like
        Horizontal spacing s measured perpendicular to strike (metres, ≥ 0; ``inf`` gives 0°).
    interval_m : float or array_like
        Contour interval Δz (metres, positive).

    References
    ----------
    Groshong, R. H., Jr. (2006). *3-D Structural Geology*, 2nd ed. Springer, eq. 2.21.

    Examples
    --------
    >>> round(float(dip_from_contour_spacing(1200.0, 600.0)), 2)
    26.57
    """
    s = np.asarray(spacing_m, dtype=float)
    dz = np.asarray(interval_m, dtype=float)
    if np.any(~(s >= 0)):
        raise InputError(f"spacing_m must be zero or positive, got {spacing_m}")
    if np.any(~(dz > 0)):
        raise InputError(f"interval_m must be positive, got {interval_m}")
    return np.degrees(np.arctan2(dz, s))
