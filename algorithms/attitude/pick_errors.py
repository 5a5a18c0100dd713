"""Vertical standard errors of picks from their sources, for the Monte Carlo of a plane's
confidence (:func:`strikeline.attitude.resampling.monte_carlo_plane`).

Data-error basis (for the defaults a caller states)
---------------------------------------------------
* DEM picks: the vertical standard error of the DEM is used directly (``sigma_z_m``). Producers
  state DEM accuracy as an RMSE or a 90% linear error; an RMSE is the standard deviation for
  unbiased errors, a 90% linear error is about 1.645 standard deviations (common practice).
* Contour picks: a contour line displaced horizontally by ``s`` on ground of slope ``σ`` changes
  the elevation read at a fixed point by ``s·tan σ``; so a horizontal (positional) standard error
  of the contour and contact lines becomes a vertical standard error ``s·tan σ``
  (:func:`contour_sigma_to_vertical`). The basis for ``s`` is half the positional tolerance of
  the map; the U.S. National Map Accuracy Standards (U.S. Bureau of the Budget, 1947) set the
  horizontal tolerance at 1/50 inch at publication scale (maps at 1:20,000 and smaller) and the
  vertical one at half the contour interval, both for 90% of tested points (from memory).
"""
from __future__ import annotations

import numpy as np

from strikeline.errors import InputError

__all__ = ["PICK_SOURCES", "contour_sigma_to_vertical", "vertical_sigma_of_picks"]

#: Where a pick's elevation comes from: read from the DEM, or from the map's contour lines.
PICK_SOURCES = ("dem", "contours")


def contour_sigma_to_vertical(sigma_xy_m, slope_deg):
    """Vertical standard error of a contour pick from its horizontal positional error.

    Parameters
    ----------
    sigma_xy_m : float or array_like
        Horizontal (positional) standard error of the contour and contact lines at the pick
        (metres, ≥ 0); the usual basis is half the map's positional tolerance (module notes).
    slope_deg : float or array_like
        Ground slope at the pick (degrees, 0 ≤ slope < 90), e.g. from the DEM or from
        ``atan(contour interval / contour spacing)``.

    Returns
    -------
    ndarray
        ``sigma_xy_m · tan(slope)`` in metres.

    Notes
    -----
    On ground of slope σ, shifting a contour line horizontally by ``s`` changes the elevation
    at a fixed point by ``s·tan σ``; to first order the standard errors scale the same way.
    The U.S. National Map Accuracy Standards use the same trade-off in reverse, allowing a
    tested contour to be shifted by the horizontal tolerance before its vertical error is
    judged (U.S. Bureau of the Budget 1947; from memory). On flat ground the positional error
    costs no elevation, on steep ground it dominates.

    References
    ----------
    U.S. Bureau of the Budget (1947). *United States National Map Accuracy Standards*.
    Washington, D.C.

    Examples
    --------
    >>> round(float(contour_sigma_to_vertical(5.0, 45.0)), 6)
    5.0
    """
    s = np.asarray(sigma_xy_m, dtype=float)
    a = np.asarray(slope_deg, dtype=float)
    if np.any(~(s >= 0)) or np.any(~np.isfinite(s)):
        raise InputError(f"sigma_xy_m must be finite and non-negative (metres), got {sigma_xy_m}")
    if np.any(~((a >= 0) & (a < 90))):
        raise InputError(
            f"slope_deg must lie in [0, 90) degrees, got {slope_deg}; compute the ground slope "
            "from the DEM or the contour spacing"
        )
    return s * np.tan(np.radians(a))


def vertical_sigma_of_picks(source, slope_deg=None, *, dem_sigma_m=0.0, contour_sigma_m=0.0):
    """Per-pick vertical standard errors from the picks' sources.

    Parameters
    ----------
    source : array_like of str, shape ``(n,)``
        ``"dem"`` or ``"contours"`` for each pick.
    slope_deg : array_like, shape ``(n,)``, optional
        Ground slope at each pick (degrees); needed when any contour pick has a non-zero
        ``contour_sigma_m``.
    dem_sigma_m : float, optional
        Vertical standard error of the DEM (metres), used as is for DEM picks.
    contour_sigma_m : float, optional
        Horizontal positional standard error of contour picks (metres), turned into a vertical
        one by :func:`contour_sigma_to_vertical`.

    Returns
    -------
    ndarray, shape ``(n,)``
        Vertical standard errors (metres) for :func:`monte_carlo_plane`.
    """
    src = np.asarray(source).astype(str)
    bad = ~np.isin(src, PICK_SOURCES)
    if np.any(bad):
        raise InputError(
            f"pick source must be one of {', '.join(PICK_SOURCES)}; got {sorted(set(src[bad]))}"
        )
    for name, val in (("dem_sigma_m", dem_sigma_m), ("contour_sigma_m", contour_sigma_m)):
        if not (np.isfinite(val) and val >= 0):
            raise InputError(f"{name} must be a non-negative number of metres, got {val!r}")
    out = np.where(src == "dem", float(dem_sigma_m), 0.0)
    is_contour = src == "contours"
    if contour_sigma_m > 0 and np.any(is_contour):
        if slope_deg is None:
            raise InputError(
                "slope_deg is needed to turn contour_sigma_m into a vertical error; pass the "
                "ground slope at each pick"
            )
        slope = np.broadcast_to(np.asarray(slope_deg, dtype=float), src.shape)
        out = out.copy()
        out[is_contour] = contour_sigma_to_vertical(contour_sigma_m, slope[is_contour])
    return out
