"""Can a set of picks define a plane at all? Eigenvalue shape measures and a quality verdict.

The eigenvalues :math:`\\lambda_1 \\ge \\lambda_2 \\ge \\lambda_3` of the scatter matrix of the
centred picks describe the shape of the pick cloud: a line (one large eigenvalue), a plane (two
large, one small) or a blob. Two measures of Woodcock (1977), applied to point coordinates by
Fernández (2005) (see also Jones et al. 2016 on best-fit planes from geospatial data; the
content of both papers is cited from memory here and should be checked), summarise it:

* **coplanarity** :math:`M = \\ln(\\lambda_1/\\lambda_3)` -- large when the picks lie close to a
  plane compared with their spread;
* **collinearity** :math:`K = \\ln(\\lambda_1/\\lambda_2) / \\ln(\\lambda_2/\\lambda_3)` -- small
  for picks spread in two directions within the plane, large for picks strung along a line
  (Woodcock's K > 1 are cluster-type, K < 1 girdle-type fabrics).

Both are ratios, so they do not depend on units or on the size of the area.

Quality verdict (:func:`assess_plane`)
--------------------------------------
``good``
    :math:`M > 4` and :math:`K < 0.8`, the limits Fernández (2005) gives for a reliable
    best-fit plane (values from memory of the paper; check
    against the paper), and, when a confidence is given, a 95% dip half-width of at most 5°.
``undetermined``
    Fewer than three picks; or :math:`K \\ge 2` (the picks are strung along a line: twice
    Woodcock's line/plane boundary K = 1 in log-ratio terms, our choice); or :math:`M < 2`
    (:math:`\\lambda_1/\\lambda_3 < e^2 \\approx 7.4`: the picks scatter off any plane about as
    much as they spread along it, our choice); or the picks span less elevation than
    ``min_relief_m`` (our choice of 1 m default, or 4 vertical standard errors) *and* lie close
    to one straight line in map view (RMS distance from their map-view best-fit line below
    ``STRAIGHT_MAX_MAP_SPREAD`` = 5% of their RMS spread along it, our choice): a straight
    contact on flat ground, which every plane through that line fits, from horizontal to
    vertical.
``weak``
    Everything in between.

Horizontal beds
---------------
Picks at one height that wind about in map view (a contact that follows one contour around
hills and valleys) are not undetermined: only a horizontal plane passes through a level curve
that is not straight, so they define a horizontal plane (reason code ``"level"`` when nothing
else makes the plane weak). Whether its small fitted dip differs from zero, and so whether a
dip direction and strike exist, is for the dip's confidence to say
(:func:`strikeline.attitude.confidence.dip_is_significant`).

References
----------
Woodcock, N. H. (1977). Specification of fabric shapes using an eigenvalue method.
*Geological Society of America Bulletin*, 88(9), 1231–1236.
https://doi.org/10.1130/0016-7606(1977)88<1231:SOFSUA>2.0.CO;2

Fernández, O. (2005). Obtaining a best fitting plane through 3D georeferenced data.
*Journal of Structural Geology*, 27(5), 855–858. https://doi.org/10.1016/j.jsg.2004.12.004

Jones, R. R., Pearce, M. A., Jacquemyn, C. & Watson, F. E. (2016). Robust best-fit planes from
geospatial data. *Geosphere*, 12(1), 196–202. https://doi.org/10.1130/GES01247.1
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from strikeline.errors import InputError
from strikeline.geometry.orientation import vector_components

__all__ = [
    "PlaneQuality",
    "QUALITIES",
    "shape_measures",
    "classify_planes",
    "assess_plane",
    "GOOD_MIN_COPLANARITY",
    "GOOD_MAX_COLLINEARITY",
    "UNDETERMINED_MIN_COLLINEARITY",
    "UNDETERMINED_MAX_COPLANARITY",
    "DEFAULT_MIN_RELIEF_M",
    "STRAIGHT_MAX_MAP_SPREAD",
    "map_spread",
    "RELIEF_SIGMAS",
    "MISFIT_SIGMAS",
    "GOOD_MAX_DIP_CI95_DEG",
]

QUALITIES = ("good", "weak", "undetermined")

#: Fernández (2005): a reliable best-fit plane needs M > 4 ... (from memory)
GOOD_MIN_COPLANARITY = 4.0
#: ... and K < 0.8 (Fernández 2005; same caveat).
GOOD_MAX_COLLINEARITY = 0.8
#: Our choice: K at or above twice Woodcock's (1977) line/plane boundary K = 1 is a line.
UNDETERMINED_MIN_COLLINEARITY = 2.0
#: Our choice: M below 2 (λ1/λ3 < 7.4) is a blob, not a plane.
UNDETERMINED_MAX_COPLANARITY = 2.0
#: Our choice: picks spanning less than this elevation (metres) are level: with a trace that
#: winds in map view they fix a horizontal plane, with a straight one no plane at all.
DEFAULT_MIN_RELIEF_M = 1.0
#: Our choice: level picks whose RMS distance from their map-view best-fit line is below this
#: fraction of their RMS spread along it lie on one straight line (a straight contact on flat
#: ground); the dip is then undetermined.
STRAIGHT_MAX_MAP_SPREAD = 0.05
#: Our choice: the relief must also exceed this many vertical standard errors of the picks.
RELIEF_SIGMAS = 4.0
#: Our choice: picks scattering about their plane by more than this many vertical standard
#: errors (RMS orthogonal residual) come from a surface that is not planar - at best "weak".
MISFIT_SIGMAS = 3.0
#: Our choice: a 95% dip half-width above this (degrees) makes a plane at best "weak"; the hand
#: estimate from structure contours is good to a degree or two (common practice).
GOOD_MAX_DIP_CI95_DEG = 5.0

#: Eigenvalues below this fraction of the largest are treated as rounding noise.
_EIG_FLOOR = 1e-12

_ADVICE = ("more relief along the contact (a stretch that crosses valleys or ridges), a second "
           "contact of the same surface, or a borehole that reaches it")


@dataclass(frozen=True)
class PlaneQuality:
    """Whether a pick set defines a plane, and why.

    Attributes
    ----------
    quality : str
        ``"good"``, ``"weak"`` or ``"undetermined"``.
    reason : str
        Plain-words explanation, with the measures that led to the verdict.
    advice : str
        What data would help (empty for ``"good"``).
    reason_code : str
        Machine-readable reason: ``"ok"``, ``"too_few_picks"``, ``"collinear"``,
        ``"not_planar"``, ``"flat"`` (level picks on one straight line in map view),
        ``"level"`` (level picks winding in map view: a horizontal plane, otherwise good),
        ``"marginal_shape"``, ``"curved"`` (residuals beyond ``MISFIT_SIGMAS`` vertical
        errors), ``"three_points"`` (exactly three
        picks: at best ``"weak"``) or ``"wide_confidence"``.
    collinearity : float
        Woodcock's K (``inf`` for picks exactly on a line).
    coplanarity : float
        Woodcock's M.
    eigenvalues : tuple of 3 float
        Scatter-matrix eigenvalues λ1 ≥ λ2 ≥ λ3 (m²).
    n_points : int
        Number of picks (0 when only eigenvalues were given).
    relief_m : float
        Elevation range of the picks (NaN when only eigenvalues were given).
    map_spread : float
        RMS distance of the picks from their map-view best-fit line over their RMS spread
        along it (:func:`map_spread`; NaN when only eigenvalues were given).
    """

    quality: str
    reason: str
    advice: str
    reason_code: str
    collinearity: float
    coplanarity: float
    eigenvalues: tuple
    n_points: int
    relief_m: float
    map_spread: float = float("nan")


def map_spread(scatter):
    """How far picks depart from one straight line in map view.

    Parameters
    ----------
    scatter : array_like, shape ``(..., 3, 3)`` or ``(..., 2, 2)``
        Scatter matrices of centred picks (only the x, y block is used).

    Returns
    -------
    ndarray, shape ``(...)``
        :math:`\\sqrt{\\mu_2/\\mu_1}` for the eigenvalues :math:`\\mu_1 \\ge \\mu_2` of the
        map-view (x, y) scatter: the RMS distance of the picks from their map-view best-fit line
        over their RMS spread along it. 0 for picks on one straight line, 1 for a round cloud or
        a circle; NaN for picks at one map position.

    Examples
    --------
    >>> import numpy as np
    >>> t = np.linspace(0.0, 2.0 * np.pi, 400, endpoint=False)
    >>> q = np.column_stack([np.cos(t), np.sin(t), np.zeros_like(t)])
    >>> round(float(map_spread(q.T @ q)), 6)
    1.0
    """
    s = np.asarray(scatter, dtype=float)
    if s.shape[-2:] not in ((3, 3), (2, 2)):
        raise InputError(f"scatter matrices must be 3 x 3 or 2 x 2, got shape {s.shape}")
    mu = np.clip(np.linalg.eigvalsh(s[..., :2, :2]), 0.0, None)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(mu[..., 1] > 0, np.sqrt(mu[..., 0] / np.where(mu[..., 1] > 0, mu[..., 1], 1.0)),
                        np.nan)


def shape_measures(eigenvalues):
    """Coplanarity M and collinearity K of scatter-matrix eigenvalues (Woodcock 1977).

    Parameters
    ----------
    eigenvalues : array_like, shape ``(..., 3)``
        Eigenvalues of the scatter (orientation) matrix, any order, non-negative.

    Returns
    -------
    coplanarity, collinearity : ndarray
        :math:`M = \\ln(\\lambda_1/\\lambda_3)` and
        :math:`K = \\ln(\\lambda_1/\\lambda_2)/\\ln(\\lambda_2/\\lambda_3)` with
        :math:`\\lambda_1 \\ge \\lambda_2 \\ge \\lambda_3`. Eigenvalues below ``1e-12 λ1``
        (spreads under a millionth of the main spread: rounding noise) are raised to that
        floor, so a noise-free plane has M = ln(1e12) = 27.6 and a small K (0 when
        λ1 = λ2), and a noise-free line has K = inf. All three equal (a blob) gives M = 0 and
        K = nan (undefined); all zero gives nan for both.

    References
    ----------
    Woodcock, N. H. (1977). Specification of fabric shapes using an eigenvalue method.
    *Geological Society of America Bulletin*, 88(9), 1231–1236.
    https://doi.org/10.1130/0016-7606(1977)88<1231:SOFSUA>2.0.CO;2

    Fernández, O. (2005). Obtaining a best fitting plane through 3D georeferenced data.
    *Journal of Structural Geology*, 27(5), 855–858. https://doi.org/10.1016/j.jsg.2004.12.004

    Examples
    --------
    >>> m, k = shape_measures([100.0, 100.0, 1.0])
    >>> round(float(m), 3), float(k)
    (4.605, 0.0)
    """
    w = np.asarray(eigenvalues, dtype=float)
    if w.shape[-1:] != (3,):
        raise InputError(f"eigenvalues must have 3 values per plane, got shape {w.shape}")
    if np.any(w < -1e-9 * np.max(np.abs(w), initial=0.0)) or np.any(~np.isfinite(w)):
        raise InputError("eigenvalues of a scatter matrix must be finite and non-negative")
    w = -np.sort(-w, axis=-1)
    with np.errstate(divide="ignore", invalid="ignore"):
        floor = w[..., :1] * _EIG_FLOOR
        w = np.maximum(w, floor)
        l1, l2, l3 = vector_components(w)
        m = np.log(l1 / l3)
        num = np.log(l1 / l2)
        den = np.log(l2 / l3)
        k = np.where(den > 0, num / np.where(den > 0, den, 1.0),
                     np.where(num > 0, np.inf, np.nan))
    return m, k


def _check_nonneg(name, value):
    v = float(np.median(np.asarray(value, dtype=float)))
    if not (np.isfinite(v) and v >= 0):
        raise InputError(f"{name} must be a non-negative number, got {value!r}")
    return v


def classify_planes(eigenvalues, *, n_points, relief_m=None, sigma_z_m=None,
                    min_relief_m=DEFAULT_MIN_RELIEF_M, dip_ci95_deg=None,
                    max_good_dip_ci95_deg=GOOD_MAX_DIP_CI95_DEG, map_spread=None):
    """Quality and reason codes for many planes at once (vectorised :func:`assess_plane`).

    Parameters
    ----------
    eigenvalues : array_like, shape ``(W, 3)``
        Scatter-matrix eigenvalues of each pick set.
    n_points : array_like of int, shape ``(W,)``
        Picks in each set (``-1``: unknown, which skips the count rules).
    relief_m : array_like, shape ``(W,)``, optional
        Elevation range of each pick set; the flat-ground test is skipped when omitted.
    sigma_z_m : float or array_like, optional
        Vertical standard error of the picks (metres; the median of an array is used); the
        relief must exceed ``RELIEF_SIGMAS`` times it as well as ``min_relief_m``.
    min_relief_m : float, optional
        Least elevation range that can show a dip (default 1 m).
    dip_ci95_deg : array_like, shape ``(W,)``, optional
        95% dip half-widths; above ``max_good_dip_ci95_deg`` a plane is at best ``"weak"``.
    max_good_dip_ci95_deg : float, optional
        Default 5°.
    map_spread : array_like, shape ``(W,)``, optional
        :func:`map_spread` of each pick set. Level pick sets (relief below the limit) are
        undetermined only when they lie on one straight line in map view (``map_spread`` below
        ``STRAIGHT_MAX_MAP_SPREAD``); otherwise they define a horizontal plane. Without it every
        level pick set is undetermined.

    Returns
    -------
    quality, reason_code, coplanarity, collinearity : ndarray, shape ``(W,)``
        Strings (see :class:`PlaneQuality`) and the two shape measures.

    Notes
    -----
    Thresholds and their sources are given in the module notes (Woodcock 1977;
    Fernández 2005; Jones et al. 2016).
    """
    w = np.asarray(eigenvalues, dtype=float).reshape(-1, 3)
    n = np.broadcast_to(np.asarray(n_points), (len(w),))
    m, k = shape_measures(w)
    min_relief = _check_nonneg("min_relief_m", min_relief_m)
    if sigma_z_m is not None:
        min_relief = max(min_relief, RELIEF_SIGMAS * _check_nonneg("sigma_z_m", sigma_z_m))
    code = np.full(len(w), "ok", dtype=object)
    quality = np.full(len(w), "good", dtype=object)

    marginal = ~((m > GOOD_MIN_COPLANARITY) & (k < GOOD_MAX_COLLINEARITY))
    code[marginal] = "marginal_shape"
    quality[marginal] = "weak"
    if dip_ci95_deg is not None:
        wide = (np.broadcast_to(np.asarray(dip_ci95_deg, dtype=float), (len(w),))
                > _check_nonneg("max_good_dip_ci95_deg", max_good_dip_ci95_deg)) & ~marginal
        code[wide] = "wide_confidence"
        quality[wide] = "weak"
    if sigma_z_m is not None:
        # RMS orthogonal residual from the smallest eigenvalue: sqrt(lambda_min / n)
        sig = _check_nonneg("sigma_z_m", sigma_z_m)
        with np.errstate(divide="ignore", invalid="ignore"):
            rms = np.sqrt(np.min(w, axis=1) / np.where(n > 0, n, np.nan))
        curved = (quality == "good") & (n > 3) & (sig > 0) & (rms > MISFIT_SIGMAS * sig)
        code[curved] = "curved"
        quality[curved] = "weak"
    # Three picks always fit a plane exactly: no scatter is left to show how good it is.
    three = (n == 3) & (quality == "good")
    code[three] = "three_points"
    quality[three] = "weak"
    # Undetermined causes, in increasing priority (the last assignment wins).
    rules = [(~(m >= UNDETERMINED_MAX_COPLANARITY), "not_planar")]
    if relief_m is not None:
        relief = np.broadcast_to(np.asarray(relief_m, dtype=float), (len(w),))
        level = ~(relief >= min_relief)
        if map_spread is None:
            straight = np.ones(len(w), dtype=bool)
        else:
            spread = np.broadcast_to(np.asarray(map_spread, dtype=float), (len(w),))
            straight = ~(spread >= STRAIGHT_MAX_MAP_SPREAD)
        # a level curve that is not straight fixes a horizontal plane (see the module notes)
        code[level & ~straight & (code == "ok")] = "level"
        rules.append((level & straight, "flat"))
    rules.append((~(k < UNDETERMINED_MIN_COLLINEARITY) & (m >= UNDETERMINED_MAX_COPLANARITY),
                  "collinear"))
    rules.append(((n >= 0) & (n < 3), "too_few_picks"))
    for mask, name in rules:
        code[mask] = name
        quality[mask] = "undetermined"
    return quality.astype(str), code.astype(str), m, k


def _words(code, m, k, n, relief, min_relief, dip_ci, max_ci, spread=np.nan):
    def f(x):
        return "infinite" if np.isinf(x) else ("undefined" if np.isnan(x) else f"{x:.2f}")

    shape = f"coplanarity M = {f(m)}, collinearity K = {f(k)}"
    if code == "ok":
        count = f"{n} " if n else ""
        return (f"the {count}picks spread in two directions and lie close to one plane ({shape}; "
                f"a reliable plane needs M > {GOOD_MIN_COPLANARITY:g} and "
                f"K < {GOOD_MAX_COLLINEARITY:g})")
    if code == "too_few_picks":
        return f"only {n} pick(s): a plane needs at least three picks that are not in one line"
    if code == "collinear":
        return (f"the picks lie close to one line ({shape}, K >= "
                f"{UNDETERMINED_MIN_COLLINEARITY:g}), so the plane can turn about that line and "
                "the dip is undetermined; this happens for example when a contact is traced "
                "along a strike line at about constant height")
    if code == "not_planar":
        return (f"the picks scatter off any plane about as much as they spread along it "
                f"({shape}, M < {UNDETERMINED_MAX_COPLANARITY:g}), so no plane is defined")
    if code == "flat":
        line = ("" if np.isnan(spread) else
                f" (their RMS distance from it is {100 * spread:.1f}% of their spread along it, "
                f"less than {100 * STRAIGHT_MAX_MAP_SPREAD:g}%)")
        return (f"the picks span only {relief:.2f} m of elevation (less than {min_relief:.2f} m) "
                f"and lie close to one straight line in map view{line}, as a straight contact on "
                "flat ground does: every plane through that line fits them, from horizontal to "
                "vertical, so the dip is undetermined")
    if code == "level":
        return (f"the picks span only {relief:.2f} m of elevation (less than {min_relief:.2f} m) "
                "while they wind about in map view, as a contact that follows one height around "
                "hills and valleys does: a level curve that is not straight lies in a horizontal "
                f"plane, and the dip's confidence says whether this one dips at all ({shape})")
    if code == "marginal_shape":
        return (f"the picks define a plane only loosely ({shape}; a reliable plane needs "
                f"M > {GOOD_MIN_COPLANARITY:g} and K < {GOOD_MAX_COLLINEARITY:g})")
    if code == "curved":
        return (f"the picks have a good spread ({shape}) but scatter about the plane by more than "
                f"{MISFIT_SIGMAS:g} times their vertical error, so the surface is not planar")
    if code == "three_points":
        return ("three picks fit a plane exactly (the three-point solution), leaving no scatter to "
                f"show how well it is determined ({shape})")
    if code == "wide_confidence":
        return (f"the pick set has a good shape ({shape}) but the 95% dip half-width is "
                f"{dip_ci:.1f} degrees, more than {max_ci:g}")
    raise AssertionError(code)  # pragma: no cover


def assess_plane(data, *, relief_m=None, sigma_z_m=None, min_relief_m=DEFAULT_MIN_RELIEF_M,
                 dip_ci95_deg=None, max_good_dip_ci95_deg=GOOD_MAX_DIP_CI95_DEG) -> PlaneQuality:
    """Judge whether picks (or their scatter eigenvalues) define a plane.

    Parameters
    ----------
    data : array_like
        Either picks, shape ``(n, 3)`` (x, y, z in metres; NaN rows ignored), or the three
        eigenvalues of their scatter matrix, shape ``(3,)``.
    relief_m : float, optional
        Elevation range of the picks; computed from the picks when they are given. With
        eigenvalues alone and no ``relief_m`` the flat-ground test is skipped.
    sigma_z_m : float, optional
        Typical vertical standard error of the picks (metres).
    min_relief_m : float, optional
        Least elevation range that can show a dip (default 1 m).
    dip_ci95_deg : float, optional
        95% dip half-width of the fitted plane (e.g. from
        :func:`strikeline.attitude.resampling.plane_confidence`).
    max_good_dip_ci95_deg : float, optional
        Largest half-width still ``"good"`` (default 5°).

    Returns
    -------
    PlaneQuality

    Notes
    -----
    The verdict rules and thresholds are in the module notes. ``"undetermined"`` always
    carries advice on what data would help: more relief along the contact, a second contact
    of the same surface, or a borehole.

    References
    ----------
    Woodcock, N. H. (1977). Specification of fabric shapes using an eigenvalue method.
    *Geological Society of America Bulletin*, 88(9), 1231–1236.
    https://doi.org/10.1130/0016-7606(1977)88<1231:SOFSUA>2.0.CO;2

    Fernández, O. (2005). Obtaining a best fitting plane through 3D georeferenced data.
    *Journal of Structural Geology*, 27(5), 855–858. https://doi.org/10.1016/j.jsg.2004.12.004

    Jones, R. R., Pearce, M. A., Jacquemyn, C. & Watson, F. E. (2016). Robust best-fit planes
    from geospatial data. *Geosphere*, 12(1), 196–202. https://doi.org/10.1130/GES01247.1

    Examples
    --------
    >>> import numpy as np
    >>> x = np.linspace(0.0, 1000.0, 50)
    >>> line = np.column_stack([x, 0.5 * x, np.full(50, 120.0)])
    >>> assess_plane(line).quality
    'undetermined'
    """
    arr = np.asarray(data, dtype=float)
    if arr.ndim == 1:
        if arr.shape != (3,):
            raise InputError(f"eigenvalues must be three numbers, got shape {arr.shape}")
        w = arr
        n = 0
        relief = np.nan if relief_m is None else float(relief_m)
        spread = None
    elif arr.ndim == 2 and arr.shape[1] == 3:
        p = arr[np.all(np.isfinite(arr), axis=1)]
        n = len(p)
        if n:
            q = p - p.mean(axis=0)
            w = np.clip(np.linalg.eigvalsh(q.T @ q), 0.0, None)
        else:
            w = np.zeros(3)
            q = np.zeros((0, 3))
        relief = float(np.ptp(p[:, 2])) if n else 0.0
        spread = float(map_spread(q.T @ q)) if n else np.nan
        if relief_m is not None:
            relief = float(relief_m)
    else:
        raise InputError(
            f"assess_plane needs picks of shape (n, 3) or three eigenvalues, got shape {arr.shape}"
        )
    n_for_rules = n if arr.ndim == 2 else -1  # -1: count unknown (eigenvalues alone)
    quality, code, m, k = classify_planes(
        w[None], n_points=np.array([n_for_rules]),
        relief_m=None if np.isnan(relief) else np.array([relief]), sigma_z_m=sigma_z_m,
        min_relief_m=min_relief_m,
        dip_ci95_deg=None if dip_ci95_deg is None else np.array([float(dip_ci95_deg)]),
        max_good_dip_ci95_deg=max_good_dip_ci95_deg,
        map_spread=None if spread is None else np.array([spread]))
    min_relief = float(min_relief_m)
    if sigma_z_m is not None:
        min_relief = max(min_relief, RELIEF_SIGMAS * _check_nonneg("sigma_z_m", sigma_z_m))
    spread = np.nan if spread is None else spread
    reason = _words(code[0], float(m[0]), float(k[0]), n, relief, min_relief,
                    np.nan if dip_ci95_deg is None else float(dip_ci95_deg),
                    max_good_dip_ci95_deg, spread)
    if quality[0] == "good":
        advice = ""
    elif code[0] == "curved":
        advice = ("a curved surface model (--model auto, trend2 or spline) and the local attitudes "
                  "describe it better than one plane")
    else:
        advice = f"data that would help: {_ADVICE}"
    return PlaneQuality(
        quality=str(quality[0]), reason=reason, advice=advice, reason_code=str(code[0]),
        collinearity=float(k[0]), coplanarity=float(m[0]),
        eigenvalues=tuple(float(v) for v in -np.sort(-w)), n_points=n, relief_m=relief,
        map_spread=float(spread),
    )
