"""Grid north versus true north: meridian convergence of a projected CRS (through pyproj)."""
from __future__ import annotations

import numpy as np

from strikeline.errors import CRSError

__all__ = ["meridian_convergence_deg", "grid_to_true_azimuth"]

#: Length of the northward step along the meridian used to find true north (degrees of latitude,
#: about 1 m): small enough that the meridian is straight over it, large enough for float64.
_STEP_DEG = 1e-5


def meridian_convergence_deg(crs_wkt: str, x, y):
    """Meridian convergence at projected points: the true azimuth of grid north (degrees).

    Parameters
    ----------
    crs_wkt : str
        The projected CRS (WKT, or anything ``pyproj.CRS`` accepts).
    x, y : float or array_like
        Projected coordinates (metres).

    Returns
    -------
    float or ndarray
        Convergence :math:`\\gamma` in degrees, positive where grid north lies clockwise (east)
        of true north — for UTM, east of the central meridian in the northern hemisphere. A
        grid azimuth :math:`A` is the true azimuth :math:`A + \\gamma`.

    Notes
    -----
    Computed, not looked up: each point is taken to longitude/latitude, stepped ~1 m north along
    its meridian and projected back; the grid azimuth of that step is true north's direction on
    the grid, :math:`-\\gamma`. For the transverse Mercator, to first order
    :math:`\\gamma \\approx \\Delta\\lambda \\sin\\varphi` (Snyder, J. P. 1987, *Map
    Projections — A Working Manual*, USGS Professional Paper 1395, ch. 8).

    Examples
    --------
    >>> abs(round(float(meridian_convergence_deg("EPSG:32631", 500000.0, 5200000.0)), 9))
    0.0
    """
    import pyproj

    try:
        crs = pyproj.CRS.from_user_input(crs_wkt)
    except pyproj.exceptions.CRSError as exc:
        raise CRSError(f"cannot interpret the CRS for the meridian convergence ({exc})") from None
    if not crs.is_projected:
        raise CRSError(f"the meridian convergence needs a projected CRS, got {crs.name}")
    to_geo = pyproj.Transformer.from_crs(crs, crs.geodetic_crs, always_xy=True)
    to_grid = pyproj.Transformer.from_crs(crs.geodetic_crs, crs, always_xy=True)
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    lon, lat = to_geo.transform(x, y)
    x0, y0 = to_grid.transform(lon, lat)
    x1, y1 = to_grid.transform(lon, np.asarray(lat) + _STEP_DEG)
    north_on_grid = np.degrees(np.arctan2(np.asarray(x1) - x0, np.asarray(y1) - y0))
    gamma = -north_on_grid
    return float(gamma) if gamma.ndim == 0 else gamma


def grid_to_true_azimuth(azimuth_deg, convergence_deg):
    """True-north azimuth from a grid azimuth: ``(A + γ) mod 360``."""
    return np.mod(np.asarray(azimuth_deg, dtype=float) + np.asarray(convergence_deg, dtype=float), 360.0)
