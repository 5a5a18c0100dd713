"""Elevations in metres: the unit the DEM declares (band unit type, vertical axis of a compound
CRS) or the user states (``--dem-unit``, ``--contour-unit``), the conversion at load, and the check
that the DEM's and the contours' elevations agree where both exist.

strikeline works in metres. A DEM in feet read as metres, or contour values in feet with a DEM in
metres, give a wrong plane without any error (a dip near 85 degrees from a gentle one): the two
sources disagree by the ratio of the units, so that ratio is looked for and refused by name.

Imports neither GDAL nor QGIS: what a file declares is read by
:func:`strikeline.io.raster.read_vertical_unit` and handed in as text and numbers.
"""
from __future__ import annotations

import math

import numpy as np

from strikeline.errors import InputError

#: The elevation units a user can state, as the command line spells them.
ELEVATION_UNITS = ("m", "ft", "us-ft")
#: Metres in one unit. The international foot is 0.3048 m exactly and the US survey foot
#: 1200/3937 m (Source: NIST Handbook 44, Appendix C, and NIST SP 811 (2008), Appendix B.8 and
#: note on the U.S. survey foot; from memory).
METRES_PER_UNIT = {"m": 1.0, "ft": 0.3048, "us-ft": 1200.0 / 3937.0}
#: The units in words, for log lines and messages.
UNIT_WORDS = {"m": "metres", "ft": "international feet", "us-ft": "US survey feet"}

#: Unit names as GDAL bands and CRSs write them (lower case, spaces and underscores kept as
#: written; common practice in GeoTIFF band metadata and the EPSG dataset's unit names).
_UNIT_TEXT = {
    "m": "m", "metre": "m", "metres": "m", "meter": "m", "meters": "m", "metre (m)": "m",
    "ft": "ft", "foot": "ft", "feet": "ft", "international foot": "ft", "intl foot": "ft", "foot (international)": "ft",
    "ft (international)": "ft", "international feet": "ft", "ft_intl": "ft", "foot_intl": "ft",
    "us-ft": "us-ft", "us ft": "us-ft", "ftus": "us-ft", "us survey foot": "us-ft", "us survey feet": "us-ft",
    "foot_us": "us-ft", "us_survey_foot": "us-ft", "survey foot": "us-ft", "ussurveyfoot": "us-ft",
    "us-survey-foot": "us-ft", "foot (us survey)": "us-ft", "u.s. survey foot": "us-ft",
}

#: The ratios of contour to DEM elevations that betray a unit mix-up: feet per metre and metres
#: per foot (the US survey foot is within 2 parts per million of the international one, so the
#: check cannot tell them apart and names both).
UNIT_RATIOS = {
    1.0 / METRES_PER_UNIT["ft"]: ("contours", "ft"),  # contours in feet, DEM in metres
    METRES_PER_UNIT["ft"]: ("dem", "ft"),  # DEM in feet read as metres, contours in metres
}
#: A ratio within this factor of a unit ratio is taken as that unit mix-up (a tenth either way:
#: real DEM-contour disagreement in relief is a few percent; our choice).
RATIO_TOLERANCE = 1.10
#: Fewest contour vertices on the DEM for the check to say anything.
MIN_CHECK_POINTS = 20
#: The check's slope is estimated on at most this many vertices (a seeded random subset).
MAX_CHECK_POINTS = 1500


def unit_from_text(text: str | None) -> str | None:
    """The unit code (``m``, ``ft``, ``us-ft``) of a unit name as a band or CRS writes it, or
    ``None`` when the text is empty or not a length unit we know.

    >>> unit_from_text("US survey foot"), unit_from_text("metre"), unit_from_text("ft"), unit_from_text("")
    ('us-ft', 'm', 'ft', None)
    """
    if not text:
        return None
    return _UNIT_TEXT.get(" ".join(str(text).strip().lower().split()))


def unit_from_metres(metres_per_unit: float | None) -> str | None:
    """The unit code whose length in metres is ``metres_per_unit`` (to 1e-7 relative), else None."""
    if metres_per_unit is None or not math.isfinite(metres_per_unit) or metres_per_unit <= 0:
        return None
    for code, m in METRES_PER_UNIT.items():
        if abs(metres_per_unit / m - 1.0) < 1e-7:
            return code
    return None


def dem_unit(declared: dict, override: str | None, *, what: str, option: str = "--dem-unit",
             log=None) -> str:
    """The unit of a DEM's values: ``override`` when given, else what the file declares.

    Parameters
    ----------
    declared : dict
        What the file says (:func:`strikeline.io.raster.read_vertical_unit`): ``band_unit``,
        ``crs_unit``, ``crs_metres_per_unit``.
    override : str or None
        The user's unit (one of :data:`ELEVATION_UNITS`), or None.
    what : str
        The DEM in messages (``"DEM 'dem.tif'"``).

    Raises
    ------
    InputError
        The band and the CRS declare different units and no override says which is right; or
        the vertical CRS's unit is neither metres nor feet.
    """
    log = log or (lambda _m: None)
    band_text = declared.get("band_unit") or ""
    crs_text = declared.get("crs_unit") or ""
    band = unit_from_text(band_text)
    crs = unit_from_metres(declared.get("crs_metres_per_unit")) if crs_text or declared.get(
        "crs_metres_per_unit") is not None else None
    if override is not None:
        said = ([f"band unit '{band_text}'"] if band_text else []) + \
            ([f"vertical CRS unit '{crs_text}'"] if crs_text else [])
        if said and {band, crs} - {None} != {override}:
            log(f"{what} declares {' and '.join(said)}; {option} {override} overrides it")
        return override
    if declared.get("crs_metres_per_unit") is not None and crs is None:
        raise InputError(
            f"{what}: its vertical CRS is in {crs_text or 'an unknown unit'} "
            f"({declared['crs_metres_per_unit']:g} m), not metres or feet; state the unit of its values with "
            f"{option} ({', '.join(ELEVATION_UNITS)}) or convert it to metres")
    if band is not None and crs is not None and band != crs:
        raise InputError(
            f"{what}: its band unit '{band_text}' ({UNIT_WORDS[band]}) and its vertical CRS unit '{crs_text}' "
            f"({UNIT_WORDS[crs]}) disagree; say which is right with {option} {band} or {option} {crs}")
    if band_text and band is None:
        found = crs or "m"
        log(f"warning: {what}: band unit '{band_text}' is not a length unit strikeline knows; its values are read "
            f"as {UNIT_WORDS[found]}" + (" (its vertical CRS)" if crs else "") + f" - state the unit with {option} "
            f"({', '.join(ELEVATION_UNITS)}) if that is wrong")
        return found
    return band or crs or "m"


def to_metres(values, unit: str, *, what: str, log=None, source: str = "") -> np.ndarray:
    """``values`` converted from ``unit`` to metres (a float64 copy), with a log line when the
    unit is not metres. ``source`` says how the unit is known (``"its band unit 'ft'"``)."""
    if unit not in METRES_PER_UNIT:
        raise InputError(f"{what}: unknown elevation unit {unit!r}; choose one of {', '.join(ELEVATION_UNITS)}")
    out = np.array(values, dtype=np.float64)
    factor = METRES_PER_UNIT[unit]
    if factor != 1.0:
        out *= factor
        if log is not None:
            how = f" ({source})" if source else ""
            log(f"{what}: elevations in {UNIT_WORDS[unit]}{how} converted to metres (x {factor:.10g})")
    return out


def theil_sen_slope(x, y) -> float:
    """The median of the slopes between all pairs of points (Theil 1950; Sen 1968).

    Pairs with equal ``x`` are skipped. NaN when no pair has distinct ``x``.

    References
    ----------
    Theil, H. (1950). A rank-invariant method of linear and polynomial regression analysis.
    Proceedings of the Royal Netherlands Academy of Sciences 53, 386-392, 521-525, 1397-1412.
    Sen, P. K. (1968). Estimates of the regression coefficient based on Kendall's tau. Journal of
    the American Statistical Association 63(324), 1379-1389. doi:10.1080/01621459.1968.10480934
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    i, j = np.triu_indices(len(x), k=1)
    dx = x[j] - x[i]
    ok = dx != 0
    if not ok.any():
        return float("nan")
    return float(np.median((y[j] - y[i])[ok] / dx[ok]))


def elevation_ratio(dem_z, contour_z) -> dict:
    """How contour elevations compare with the DEM's at the same places.

    ``relief_ratio`` is the Theil-Sen slope of contour elevation on DEM elevation (how many times
    the contours' relief is the DEM's; a datum offset does not change it); ``level_ratio`` the
    ratio of their medians (used when the points hold too little relief for a slope).
    """
    d = np.asarray(dem_z, dtype=float)
    c = np.asarray(contour_z, dtype=float)
    ok = np.isfinite(d) & np.isfinite(c)
    d, c = d[ok], c[ok]
    out = {"n_points": int(len(d)), "relief_ratio": None, "level_ratio": None}
    if len(d) < MIN_CHECK_POINTS:
        return out
    if len(d) > MAX_CHECK_POINTS:
        keep = np.random.default_rng(0).choice(len(d), MAX_CHECK_POINTS, replace=False)
        d, c = d[keep], c[keep]
    slope = theil_sen_slope(d, c)
    if math.isfinite(slope) and np.ptp(d) > 0 and len(np.unique(c)) >= 3:
        out["relief_ratio"] = slope
    md, mc = float(np.median(d)), float(np.median(c))
    if md != 0 and (md > 0) == (mc > 0):
        out["level_ratio"] = mc / md
    return out


def unit_mixup(ratio: float | None):
    """``(ratio, (which, unit))`` of :data:`UNIT_RATIOS` that ``ratio`` lies within
    :data:`RATIO_TOLERANCE` of, or None."""
    if ratio is None or not math.isfinite(ratio) or ratio <= 0:
        return None
    for r, cause in UNIT_RATIOS.items():
        if abs(math.log(ratio / r)) < math.log(RATIO_TOLERANCE):
            return r, cause
    return None


def check_elevations_agree(dem, grid, geoms, elevations_m, *, dem_what: str, contours_what: str,
                           names: dict | None = None, log=None) -> dict:
    """Refuse DEM and contour elevations that differ by the ratio of feet to metres.

    The DEM is sampled (bilinearly) at every vertex of the contour lines (in the DEM's CRS) and
    compared with the line's elevation (:func:`elevation_ratio`). A relief ratio - or, without
    relief, a level ratio - within :data:`RATIO_TOLERANCE` of 3.2808 (feet per metre) or 0.3048
    (metres per foot) stops the run with one line that names the factor and the fix. Ratios near
    1 (the two sources agree, perhaps with an offset) pass.

    Returns the comparison (:func:`elevation_ratio`) for the log.
    """
    import shapely

    from strikeline.picks import sample_bilinear

    names = names or {}
    xy, idx = shapely.get_coordinates(np.asarray(geoms, dtype=object), return_index=True)
    z = np.asarray(elevations_m, dtype=float)[idx] if len(idx) else np.empty(0)
    d = sample_bilinear(dem, grid, xy[:, 0], xy[:, 1]) if len(xy) else np.empty(0)
    cmp = elevation_ratio(d, z)
    used = "relief_ratio" if cmp["relief_ratio"] is not None else "level_ratio"
    hit = unit_mixup(cmp[used])
    if hit is not None:
        factor, (which, unit) = hit
        dem_opt, con_opt = names.get("dem_unit", "--dem-unit"), names.get("contour_unit", "--contour-unit")
        words = "relief" if used == "relief_ratio" else "elevations"
        if which == "contours":
            cause = (f"the contours look like feet and the DEM like metres; give {con_opt} ft (international foot) "
                     f"or {con_opt} us-ft (US survey foot), or {dem_opt} if the DEM's unit is the wrong one")
        else:
            cause = (f"the DEM looks like feet read as metres; give {dem_opt} ft (international foot) or "
                     f"{dem_opt} us-ft (US survey foot), or {con_opt} if the contours' unit is the wrong one")
        raise InputError(
            f"{contours_what} and {dem_what} disagree by a unit factor: over {cmp['n_points']} contour vertices "
            f"the contours' {words} is {cmp[used]:.4g} times the DEM's, near {factor:.4f} "
            f"({'feet per metre' if factor > 1 else 'metres per foot'}): {cause}")
    if log is not None and cmp[used] is not None:
        log(f"contour elevations against the DEM: the contours' {used.split('_')[0]} is {cmp[used]:.3f} times "
            f"the DEM's over {cmp['n_points']} contour vertices (units agree)")
    return cmp


def dem_in_metres(dem, declared: dict, override: str | None, *, what: str, option: str = "--dem-unit",
                  log=None) -> np.ndarray:
    """The DEM's band in metres: its unit from ``override`` or what the file ``declared``
    (:func:`dem_unit`), converted with a log line saying how the unit is known."""
    unit = dem_unit(declared, override, what=what, option=option, log=log)
    if override is not None:
        source = f"{option} {override}"
    elif unit_from_text(declared.get("band_unit")) == unit:
        source = f"its band unit '{declared['band_unit']}'"
    elif declared.get("crs_unit"):
        source = f"its vertical CRS '{declared.get('crs_vertical') or declared['crs_unit']}'"
    else:
        source = ""
    from strikeline.picks.dem import is_windowed

    if is_windowed(dem):  # a DEM in its file: each window is multiplied as the whole array would be
        factor = to_metres(np.ones(1), unit, what=what, log=log, source=source)[0]
        return dem.in_metres(factor)
    return to_metres(dem, unit, what=what, log=log, source=source)


def contour_elevations_in_metres(elevations, geoms, override: str | None, *, what: str, dem=None, dem_grid=None,
                                 dem_what: str = "the DEM", names: dict | None = None, log=None) -> np.ndarray:
    """The contours' elevations in metres (``override``: their unit, default metres), checked
    against the DEM (already in metres, on ``dem_grid``, the contours in its CRS) where both
    exist (:func:`check_elevations_agree`)."""
    names = names or {}
    option = names.get("contour_unit", "--contour-unit")
    source = f"{option} {override}" if override else ""
    z = to_metres(elevations, override or "m", what=what, log=log, source=source)
    if dem is not None and dem_grid is not None and len(z):
        check_elevations_agree(dem, dem_grid, geoms, z, dem_what=dem_what, contours_what=what, names=names, log=log)
    return z
