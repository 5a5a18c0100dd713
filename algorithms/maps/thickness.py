"""Thickness of a planar unit: from outcrop width, from two points, vertical, from a borehole;
isopach grids between two modelled surfaces.

Conventions: dip 0–90° from horizontal; lengths in metres; the bed is planar between its top
and base and both have the same attitude. Ground slope is an angle 0–90° below horizontal
measured on the ground along the line of the width measurement, which runs perpendicular to
strike; its *sense* says which way the ground descends along that line:

* ``"against_dip"`` -- the ground descends in the direction opposite to the dip (ground and
  bed incline in opposite directions, as on a scarp slope);
* ``"with_dip"`` -- the ground descends in the dip direction (ground and bed incline the same
  way, as on a dip slope).

References
----------
Ragan, D. M. (2009). *Structural Geology: An Introduction to Geometrical Techniques*, 4th ed.
Cambridge University Press (thickness and depth).

Rowland, S. M., Duebendorfer, E. M. & Schiefelbein, I. M. (2007). *Structural Analysis and
Synthesis: A Laboratory Course in Structural Geology*, 3rd ed. Blackwell, Oxford.
"""
from __future__ import annotations

import numpy as np

from strikeline.errors import InputError
from strikeline.geometry.grid import Grid
from strikeline.geometry.grid import check_grid_array
from strikeline.maps.dipgrids import dip_grids
from strikeline.geometry.orientation import normal_from_dip, vector_from_trend_plunge

__all__ = [
    "SLOPE_SENSES",
    "WIDTH_KINDS",
    "thickness_from_outcrop_width",
    "outcrop_width_gives_thickness",
    "thickness_between_points",
    "vertical_thickness",
    "thickness_from_vertical",
    "thickness_from_borehole",
    "isopach_grids",
]

SLOPE_SENSES = ("against_dip", "with_dip")
WIDTH_KINDS = ("slope", "horizontal")


def _angle(name, value, lo, hi, *, hi_open=False):
    a = np.asarray(value, dtype=float)
    ok = (a >= lo) & ((a < hi) if hi_open else (a <= hi))
    if np.any(~ok):
        bracket = ")" if hi_open else "]"
        raise InputError(f"{name} must lie in [{lo:g}, {hi:g}{bracket} degrees, got {value}")
    return a


def _length(name, value):
    v = np.asarray(value, dtype=float)
    if np.any(~(v >= 0)) or np.any(~np.isfinite(v)):
        raise InputError(f"{name} must be a finite length of zero or more metres, got {value}")
    return v


def _choice(name, value, choices):
    if value not in choices:
        raise InputError(f"{name} must be one of {', '.join(choices)}; got {value!r}")
    return value


def thickness_from_outcrop_width(width_m, dip_deg, *, ground_slope_deg=0.0, slope_sense=None,
                                 width_kind="slope"):
    """True thickness from the outcrop width measured perpendicular to strike.

    Parameters
    ----------
    width_m : float or array_like
        Outcrop width between the unit's top and base contacts, measured perpendicular to
        strike (metres): along the ground (``width_kind="slope"``) or horizontally on the map
        (``width_kind="horizontal"``). On horizontal ground the two are the same.
    dip_deg : float or array_like
        Dip δ of the unit (degrees).
    ground_slope_deg : float or array_like, optional
        Ground slope σ along the measurement line (degrees, 0 ≤ σ < 90); default 0.
    slope_sense : {"against_dip", "with_dip"}, optional
        Which way the ground descends (see the module notes); required when any slope is
        non-zero.
    width_kind : {"slope", "horizontal"}, optional
        Whether ``width_m`` is the slope distance (default) or the horizontal map distance.

    Returns
    -------
    ndarray
        True (perpendicular) thickness in metres.

    Raises
    ------
    InputError
        Where the ground runs parallel to the bedding along the measurement line: a horizontal
        bed on flat ground (δ = σ = 0), or a dip slope (ground descending with the dip at the
        dip, δ = σ). The unit's top and base then do not both cross the ground along the line,
        the width can take any value and :math:`\\sin(\\delta \\pm \\sigma) = 0` would give
        0 m for any unit. Also for bad options and out-of-range angles.

    Notes
    -----
    Horizontal ground: :math:`t = w \\sin\\delta`. Sloping ground, with ``w`` the slope
    distance: :math:`t = w \\sin(\\delta + \\sigma)` when the ground slopes against the dip and
    :math:`t = w\\,|\\sin(\\delta - \\sigma)|` when it slopes with the dip (the absolute value
    covers ground steeper than the dip). A horizontal width ``h`` is first turned into the slope
    distance :math:`w = h / \\cos\\sigma`. These are the textbook relations for a section
    perpendicular to strike (Ragan 2009; Rowland et al. 2007; both from memory), which also give
    the rule that a horizontal bed's thickness is the elevation difference of its contacts. The
    thickness grows with the angle :math:`\\delta \\pm \\sigma` between ground and bedding in
    the section; where that angle is 0 the width says nothing about the thickness:
    for a horizontal bed the thickness is the difference in elevation between its top and base
    contacts, and on a dip slope it must be measured between points on the top and the base
    (:func:`thickness_between_points`) or in a borehole.

    References
    ----------
    Ragan, D. M. (2009). *Structural Geology: An Introduction to Geometrical Techniques*, 4th ed.
    Cambridge University Press (thickness on horizontal and sloping ground).

    Rowland, S. M., Duebendorfer, E. M. & Schiefelbein, I. M. (2007). *Structural Analysis and
    Synthesis: A Laboratory Course in Structural Geology*, 3rd ed. Blackwell, Oxford
    (thickness of a unit on sloping ground).

    Examples
    --------
    >>> round(float(thickness_from_outcrop_width(100.0, 30.0)), 3)
    50.0
    >>> round(float(thickness_from_outcrop_width(100.0, 30.0, ground_slope_deg=20.0,
    ...                                          slope_sense="against_dip")), 3)
    76.604
    """
    w = _length("width_m", width_m)
    d = np.radians(_angle("dip_deg", dip_deg, 0, 90))
    s_deg = _angle("ground_slope_deg", ground_slope_deg, 0, 90, hi_open=True)
    _choice("width_kind", width_kind, WIDTH_KINDS)
    if slope_sense is None:
        if np.any(s_deg > 0):
            raise InputError(
                "slope_sense is needed for sloping ground: give 'against_dip' when the ground "
                "descends opposite to the dip, 'with_dip' when it descends in the dip direction"
            )
        sign = 1.0
    else:
        sign = 1.0 if _choice("slope_sense", slope_sense, SLOPE_SENSES) == "against_dip" else -1.0
    s = np.radians(s_deg)
    angle = d + sign * s  # between the ground and the bedding in the section, radians
    parallel = ~outcrop_width_gives_thickness(np.degrees(d), ground_slope_deg=s_deg,
                                              slope_sense=slope_sense)
    if np.any(parallel):
        d0 = float(np.broadcast_to(np.degrees(d), parallel.shape)[parallel].flat[0])
        if d0 == 0.0:
            case = ("a horizontal bed on flat ground (dip 0, ground slope 0) has no outcrop width: its "
                    "top and base do not both cross the ground; its thickness is the difference in "
                    "elevation between its top and base contacts")
        else:
            case = (f"on a dip slope (ground descending with the dip at the dip, {d0:g} degrees) the ground "
                    "runs parallel to the bedding, so the top and base do not both cross it")
        raise InputError(
            f"the outcrop width cannot give a thickness in this geometry: {case}; measure the "
            "thickness between a point on the top and one on the base, in a borehole, or across ground "
            "that cuts the bedding"
        )
    if width_kind == "horizontal":
        w = w / np.cos(s)
    return w * np.abs(np.sin(angle))


#: Ground and bedding closer than this (radians, about 6e-8 degrees) along the measurement line
#: are parallel: a width then gives no thickness.
_PARALLEL_RAD = 1e-9


def outcrop_width_gives_thickness(dip_deg, *, ground_slope_deg=0.0, slope_sense=None):
    """Whether an outcrop width can give a thickness: the ground must cut across the bedding.

    Parameters
    ----------
    dip_deg, ground_slope_deg : float or array_like
        Dip of the unit and ground slope along the measurement line (degrees).
    slope_sense : {"against_dip", "with_dip"}, optional
        As in :func:`thickness_from_outcrop_width` (``None``: flat ground or against the dip).

    Returns
    -------
    ndarray of bool
        False where the ground runs parallel to the bedding in the section perpendicular to
        strike: a horizontal bed on flat ground, or a dip slope (``with_dip`` and slope = dip).

    Examples
    --------
    >>> outcrop_width_gives_thickness([0.0, 30.0, 20.0], ground_slope_deg=[0.0, 0.0, 20.0],
    ...                               slope_sense="with_dip").tolist()
    [False, True, False]
    """
    d = np.radians(np.asarray(dip_deg, dtype=float))
    s = np.radians(np.asarray(ground_slope_deg, dtype=float))
    sign = -1.0 if slope_sense == "with_dip" else 1.0
    return ~(np.abs(d + sign * s) <= _PARALLEL_RAD)


def thickness_between_points(top_xyz, base_xyz, dip_direction_deg, dip_deg):
    """Exact true thickness from a point on the top and a point on the base of a unit.

    Parameters
    ----------
    top_xyz, base_xyz : array_like, shape ``(..., 3)``
        Points ``(x, y, z)`` in metres on the top and on the base (any positions on the two
        surfaces; they broadcast against each other).
    dip_direction_deg, dip_deg : float or array_like
        Attitude of the unit (degrees).

    Returns
    -------
    ndarray
        :math:`t = |(\\mathbf{p}_{base} - \\mathbf{p}_{top}) \\cdot \\hat{\\mathbf n}|` in metres,
        with :math:`\\hat{\\mathbf n}` the unit normal of the bedding.

    Notes
    -----
    The distance between two parallel planes is the projection of any vector joining them on
    their unit normal; this is the vector form of the textbook thickness constructions, exact
    for any positions of the two points and any topography.

    References
    ----------
    Ragan, D. M. (2009). *Structural Geology: An Introduction to Geometrical Techniques*, 4th ed.
    Cambridge University Press (thickness; vector methods).

    Examples
    --------
    >>> round(float(thickness_between_points([0, 0, 0], [0, 0, -10.0], 90.0, 60.0)), 6)
    5.0
    """
    a = np.asarray(top_xyz, dtype=float)
    b = np.asarray(base_xyz, dtype=float)
    if a.shape[-1:] != (3,) or b.shape[-1:] != (3,):
        raise InputError(
            f"top_xyz and base_xyz must be (x, y, z) points, got shapes {a.shape} and {b.shape}"
        )
    n = normal_from_dip(dip_direction_deg, dip_deg)
    return np.abs(np.sum((b - a) * n, axis=-1))


def vertical_thickness(thickness_m, dip_deg):
    """Vertical thickness of a unit from its true thickness: :math:`t / \\cos\\delta`.

    Parameters
    ----------
    thickness_m : float or array_like
        True (perpendicular) thickness, metres.
    dip_deg : float or array_like
        Dip (degrees); a vertical unit (90°) has infinite vertical thickness.

    Returns
    -------
    ndarray
        Thickness measured along the vertical, metres (what a vertical borehole drills).

    References
    ----------
    Ragan, D. M. (2009). *Structural Geology: An Introduction to Geometrical Techniques*, 4th ed.
    Cambridge University Press (vertical thickness).

    Examples
    --------
    >>> round(float(vertical_thickness(50.0, 30.0)), 3)
    57.735
    """
    t = _length("thickness_m", thickness_m)
    d = np.radians(_angle("dip_deg", dip_deg, 0, 90))
    with np.errstate(divide="ignore"):
        c = np.cos(d)
        return np.where(c > 1e-15, t / np.where(c > 1e-15, c, 1.0), np.inf)


def thickness_from_vertical(vertical_thickness_m, dip_deg):
    """True thickness from a vertical thickness: :math:`v \\cos\\delta`.

    Parameters
    ----------
    vertical_thickness_m : float or array_like
        Thickness along the vertical (metres), e.g. drilled in a vertical hole.
    dip_deg : float or array_like
        Dip (degrees).

    Returns
    -------
    ndarray
        True thickness in metres.

    References
    ----------
    Ragan, D. M. (2009). *Structural Geology: An Introduction to Geometrical Techniques*, 4th ed.
    Cambridge University Press (vertical thickness).
    """
    v = _length("vertical_thickness_m", vertical_thickness_m)
    d = np.radians(_angle("dip_deg", dip_deg, 0, 90))
    return v * np.cos(d)


def thickness_from_borehole(length_m, hole_azimuth_deg, hole_plunge_deg, dip_direction_deg,
                            dip_deg):
    """True thickness from the drilled length of a unit in a straight borehole.

    Parameters
    ----------
    length_m : float or array_like
        Length of hole between the top and base of the unit (metres, along the hole).
    hole_azimuth_deg : float or array_like
        Azimuth (trend) of the hole's downward direction, degrees clockwise from grid north.
    hole_plunge_deg : float or array_like
        Plunge of the hole below horizontal (degrees, 0–90; 90 is a vertical hole).
    dip_direction_deg, dip_deg : float or array_like
        Attitude of the unit (degrees).

    Returns
    -------
    ndarray
        :math:`t = L\\,|\\hat{\\mathbf b} \\cdot \\hat{\\mathbf n}|` in metres, with
        :math:`\\hat{\\mathbf b}` the hole's unit vector and :math:`\\hat{\\mathbf n}` the
        bedding's unit normal.

    Notes
    -----
    The intercept is a segment joining the two parallel bounding planes; its projection on
    their normal is the thickness (vector geometry, as for :func:`thickness_between_points`).
    A vertical hole gives :math:`L\\cos\\delta`; a hole perpendicular to bedding gives ``L``;
    a hole parallel to bedding gives 0 (the intercept is then undefined in practice).

    References
    ----------
    Ragan, D. M. (2009). *Structural Geology: An Introduction to Geometrical Techniques*, 4th ed.
    Cambridge University Press (thickness from drill holes).

    Examples
    --------
    >>> round(float(thickness_from_borehole(100.0, 45.0, 70.0, 135.0, 40.0)), 3)
    71.985
    """
    length = _length("length_m", length_m)
    _angle("hole_plunge_deg", hole_plunge_deg, 0, 90)
    b = vector_from_trend_plunge(hole_azimuth_deg, hole_plunge_deg)
    n = normal_from_dip(dip_direction_deg, dip_deg)
    return length * np.abs(np.sum(b * n, axis=-1))


def isopach_grids(top_m, base_m, grid: Grid, *, progress=None, is_cancelled=None
                  ) -> tuple[np.ndarray, np.ndarray]:
    """Vertical and true thickness of a unit between two surface grids (isopachs).

    Parameters
    ----------
    top_m, base_m : ndarray, shape ``(rows, cols)``, float
        Elevations of the unit's top and base surfaces on the same grid (metres), NaN where a
        surface has no value. Row 0 is the northern edge (north-up grid).
    grid : strikeline.geometry.grid.Grid
        Georeferencing of both arrays; its cell sizes set the dip of the base.
    progress : callable, optional
        ``progress(fraction)``, passed on to :func:`strikeline.maps.dipgrids.dip_grids`.
    is_cancelled : callable, optional
        Polled between blocks; when it returns true, :class:`~strikeline.errors.CancelledError`
        is raised.

    Returns
    -------
    vertical_m : ndarray, shape ``(rows, cols)``, float64
        ``top - base``: positive where the top lies above the base, negative where the two
        surfaces cross (a sign that the models disagree there), NaN where either is NaN.
    true_m : ndarray, shape ``(rows, cols)``, float64
        ``vertical · cos(δ_base)`` with δ_base the local dip of the base surface; the same sign
        as ``vertical_m``; NaN where either surface is NaN or the base's dip is undefined (a
        base cell with no valid neighbour in x or in y).

    Raises
    ------
    InputError
        The arrays are not 2-D float arrays of the grid's shape.
    CancelledError
        ``is_cancelled()`` returned true.

    Notes
    -----
    The true thickness is measured perpendicular to the base: it is the vertical thickness
    times the cosine of the base's local dip, the vertical-thickness relation
    :math:`t = v \\cos\\delta` (Ragan 2009; :func:`thickness_from_vertical`). For a top parallel
    to the base this is exactly the normal distance between the two surfaces; where the top
    converges on or diverges from the base it is the first-order approximation of the distance
    along the base's normal, good while the two surfaces' dips differ by a few degrees and the
    thickness is small against the wavelength of their curvature. The base's dip comes from
    :func:`strikeline.maps.dipgrids.dip_grids` (central differences of Zevenbergen & Thorne 1987, one-sided
    at edges and next to NaN cells).

    References
    ----------
    Ragan, D. M. (2009). *Structural Geology: An Introduction to Geometrical Techniques*, 4th ed.
    Cambridge University Press (vertical thickness).

    Zevenbergen, L. W., & Thorne, C. R. (1987). Quantitative analysis of land surface
    topography. *Earth Surface Processes and Landforms*, 12(1), 47–56.
    https://doi.org/10.1002/esp.3290120107

    Examples
    --------
    Two planes dipping 30° east, 80 m apart across the bedding:

    >>> import numpy as np
    >>> from strikeline.geometry.grid import Grid
    >>> g = Grid((0.0, 10.0, 0.0, 50.0, 0.0, -10.0), (5, 5))
    >>> x, _ = g.mesh()
    >>> base = 500.0 - np.tan(np.radians(30.0)) * x
    >>> top = base + 80.0 / np.cos(np.radians(30.0))
    >>> v, t = isopach_grids(top, base, g)
    >>> round(float(v[2, 2]), 3), round(float(t[2, 2]), 3)
    (92.376, 80.0)
    """
    top = check_grid_array(top_m, grid, "top_m")
    base = check_grid_array(base_m, grid, "base_m")
    vertical = np.subtract(top, base, dtype=np.float64)
    dip, _ = dip_grids(base, grid, progress=progress, is_cancelled=is_cancelled)
    cos_dip = np.cos(np.radians(dip, dtype=np.float64))
    return vertical, vertical * cos_dip
