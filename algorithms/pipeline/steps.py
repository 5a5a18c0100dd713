"""One function per step of the chain: picks, the plane and its confidence, the output grid,
the surface model, structure contours, depth, predicted trace and contact misfit.
"""
from __future__ import annotations


import numpy as np
import shapely

from strikeline.stats import holdout_block_m, residual_correlation_m, segment_groups
from strikeline.attitude.quality import PlaneQuality, assess_plane
from strikeline.errors import InputError, UndeterminedError
from strikeline.attitude.fitting import PlaneFit, fit_plane
from strikeline.geometry.geodesy import grid_to_true_azimuth, meridian_convergence_deg
from strikeline.geometry.grid import Grid
from strikeline.maps.dipgrids import depth_below_ground
from strikeline.io.contours import contour_lines
from strikeline.io.vector import VectorLayer
from strikeline.picks import (PickSet, ground_slope_from_contours, picks_from_contours,
                              picks_from_dem, sample_bilinear)
from strikeline.surfaces import SurfaceModel, fit_surface
from strikeline.maps.trace import (contact_misfit_segments, distance_to_lines, holdout_misfit_segments, split_lines_by_flag,
                              trace_misfit)
from strikeline.attitude import (
    PlaneConfidence,
    contour_sigma_to_vertical,
    dip_is_significant,
    plane_confidence,
    vertical_sigma_of_picks,
)
from strikeline.pipeline.inputs import Inputs
from strikeline.pipeline.options import (FLAG_CELLS, MISFIT_Z, SEGMENT_CELLS, SPLINE_SMOOTHING, Log, RunOptions,
                                        _quiet, default, option_called)


# --------------------------------------------------------------------------- steps
def collect_picks(inputs: Inputs, *, contacts: VectorLayer | None = None, spacing_m: float | None = None,
                  log: Log = _quiet, progress=None, is_cancelled=None) -> PickSet:
    """Elevation picks on every contact, from the DEM (every ``spacing_m``, default the cell size)
    and/or the contour lines."""
    c = inputs.contacts if contacts is None else contacts
    sets = []
    if inputs.dem is not None:
        dem_picks = picks_from_dem(c.geoms, inputs.dem, inputs.dem_grid, contact_ids=c.fids,
                                   spacing_m=spacing_m, progress=progress, is_cancelled=is_cancelled)
        if len(dem_picks) == 0:
            dem_name = f"DEM '{inputs.paths['dem']}'" if "dem" in inputs.paths else "the DEM"
            msg = (f"contacts {c.what} lies entirely outside the valid cells of {dem_name}"
                   f" (outside its extent or over nodata): {_extents_of(c, inputs.dem_grid)}")
            if inputs.contours is None:
                raise InputError(msg + "; give a DEM that covers the contacts, or check that both are "
                                       "in the CRS their files declare")
            log("warning: " + msg + "; using contour picks only")
        sets.append(dem_picks)
    if inputs.contours is not None:
        sets.append(picks_from_contours(c.geoms, inputs.contours.geoms, inputs.contour_elevations_m,
                                        contact_ids=c.fids, progress=progress, is_cancelled=is_cancelled))
    return PickSet.concat(*sets)


def _span(bounds) -> str:
    xmin, ymin, xmax, ymax = (f"{v:.0f}" for v in bounds)
    return f"x {xmin} to {xmax} m, y {ymin} to {ymax} m"


def _extents_of(contacts: VectorLayer, grid: Grid) -> str:
    """Where the contacts lie against the DEM, both in the DEM's CRS (to which the contacts were
    reprojected), rounded to the metre: a CRS mismatch shows as extents far apart."""
    from strikeline.io.crs import crs_label

    return (f"in {crs_label(grid.crs_wkt)} the contacts span {_span(shapely.total_bounds(contacts.geoms))}, "
            f"the DEM {_span(grid.bounds)}")


def fit_picks(picks: PickSet, *, what: str = "the picks") -> PlaneFit:
    """Best-fit plane of a pick set (errors name the pick set)."""
    try:
        return fit_plane(picks.xyz)
    except InputError as exc:
        raise type(exc)(f"{what}: {exc}") from None


def pick_sigmas(inputs: Inputs, picks: PickSet, opts: RunOptions) -> np.ndarray:
    """Vertical standard error of every pick: the DEM error and the contact's positional error
    through the ground slope for DEM picks; the contour's positional error through the slope
    for contour picks."""
    slope = np.full(len(picks), np.nan)
    is_contour = picks.source == "contours"
    dem_slope = None
    if inputs.dem is not None and ((is_contour.any() and opts.contour_sigma_m > 0)
                                   or (~is_contour).any() and opts.contact_sigma_m > 0):
        from strikeline.pipeline.dem_access import ground_slope_at  # the DEM in memory or read by windows

        dem_slope = ground_slope_at(inputs.dem, inputs.dem_grid, picks.xyz[:, 0], picks.xyz[:, 1])
    if is_contour.any() and opts.contour_sigma_m > 0:
        xy = picks.xyz[is_contour, :2]
        s = dem_slope[is_contour] if dem_slope is not None else np.full(len(xy), np.nan)
        missing = ~np.isfinite(s)
        if missing.any() and inputs.contours is not None:
            s[missing] = ground_slope_from_contours(xy[missing, 0], xy[missing, 1], inputs.contours.geoms,
                                                    inputs.contour_elevations_m)
        # where no slope can be found, take the sheet's median slope (a neutral fallback)
        med = np.nanmedian(s) if np.isfinite(s).any() else 0.0
        slope[is_contour] = np.clip(np.where(np.isfinite(s), s, med), 0.0, 89.0)
    slope = np.where(np.isfinite(slope), slope, 0.0)
    sigma = vertical_sigma_of_picks(picks.source, slope, dem_sigma_m=opts.dem_sigma_m,
                                    contour_sigma_m=opts.contour_sigma_m)
    if dem_slope is not None and opts.contact_sigma_m > 0:
        on_dem = ~is_contour & np.isfinite(dem_slope)
        extra = contour_sigma_to_vertical(opts.contact_sigma_m, np.clip(dem_slope[on_dem], 0.0, 89.0))
        sigma = np.asarray(sigma, dtype=float).copy()
        sigma[on_dem] = np.hypot(sigma[on_dem], extra)
    return sigma


def attitude_of(xyz, sigma, *, crs_wkt: str, what: str, strict: bool, resamples: int = default("resamples"),
                seed: int = 0, blocks=None, is_cancelled=None) -> dict:
    """Plane, 95% confidence, quality and true-north azimuth of one pick set, as a summary dict.

    With ``strict`` an undetermined pick set is an error (the sheet-wide plane); otherwise it is
    reported with ``quality: undetermined`` and no attitude (a group or window). ``blocks``
    (one label per pick, e.g. contact segments) makes the bootstrap resample whole blocks.

    A plane whose dip does not differ from zero at 95%
    (:func:`strikeline.attitude.dip_is_significant`) is horizontal within its confidence:
    ``dip_significant`` is false, ``dip_deg`` and ``dip_ci95_deg`` are still given, and the dip
    direction, its half-width, its true-north azimuth and the strike are ``None`` (they are
    undefined for a horizontal plane), with a ``horizontal`` sentence saying so.
    """
    xyz = np.asarray(xyz, dtype=float)
    try:
        plane = fit_plane(xyz)
    except UndeterminedError as exc:
        if strict:
            raise UndeterminedError(f"{what}: {exc}") from None
        q = assess_plane(xyz) if len(xyz) else None
        return {"quality": "undetermined", "reason": str(exc) if q is None else q.reason,
                "advice": "" if q is None else q.advice, "n_picks": int(len(xyz))}
    conf: PlaneConfidence | None = None
    if len(xyz) >= 4:
        conf = plane_confidence(xyz, sigma_z_m=sigma, n_resamples=resamples, n_draws=resamples,
                                seed=seed, groups=blocks, is_cancelled=is_cancelled)
    typical_sigma = float(np.median(sigma)) if sigma is not None and len(sigma) else None
    quality: PlaneQuality = assess_plane(xyz, sigma_z_m=typical_sigma,
                                         dip_ci95_deg=None if conf is None else conf.dip_ci95_deg)
    if quality.quality == "undetermined":
        if strict:
            raise UndeterminedError(f"{what}: the attitude is undetermined - {quality.reason}; "
                                    f"{quality.advice}")
        return {"quality": "undetermined", "reason": quality.reason, "advice": quality.advice,
                "n_picks": plane.n_points}
    gamma = meridian_convergence_deg(crs_wkt, plane.centroid[0], plane.centroid[1])
    significant = conf.dip_significant if conf is not None else dip_is_significant(plane.dip_deg, None)
    # key names: strikeline.vocabulary.PLANE_KEYS
    out = {
        "dip_deg": plane.dip_deg,
        "dip_direction_deg": plane.dip_direction_deg,
        "strike_rhr_deg": plane.strike_rhr_deg,
        "rms_m": plane.rms_m,
        "centroid_m": list(plane.centroid),
        "n_picks": plane.n_points,
        "dip_ci95_deg": None if conf is None else conf.dip_ci95_deg,
        "dip_direction_ci95_deg": None if conf is None else conf.dip_direction_ci95_deg,
        "cone95_deg": None if conf is None else conf.cone95_deg,
        "confidence_method": "three-point (no confidence)" if conf is None else conf.method,
        "quality": quality.quality,
        "reason": quality.reason,
        "advice": quality.advice,
        "coplanarity": quality.coplanarity,
        "collinearity": quality.collinearity,
        "meridian_convergence_deg": gamma,
        "dip_direction_true_deg": float(grid_to_true_azimuth(plane.dip_direction_deg, gamma)),
        "dip_significant": significant,
    }
    if not significant:
        # the horizontal lies in the 95% region of the tilt, so the dip's interval reaches 0
        if conf is not None:
            out["dip_ci95_deg"] = max(conf.dip_ci95_deg, plane.dip_deg)
        ci = "" if conf is None else f" +/- {out['dip_ci95_deg']:.2g}"
        out.update(dip_direction_deg=None, strike_rhr_deg=None, dip_direction_true_deg=None,
                   dip_direction_ci95_deg=None,
                   horizontal=(f"horizontal within its 95% confidence: dip {plane.dip_deg:.2g}{ci} deg does "
                               "not differ from 0, so the plane has no dip direction or strike"))
    elif out["quality"] == "good" and out["dip_direction_ci95_deg"] is not None \
            and out["dip_direction_ci95_deg"] >= POOR_DIRECTION_DEG:
        # a dip direction known only to a quadrant or worse is not a good attitude
        out.update(quality="weak",
                   reason=f"the dip direction is poorly fixed (+/- {out['dip_direction_ci95_deg']:.0f} deg at 95%); "
                          + out["reason"],
                   advice="more relief along the contact, or a dip reading, fixes the direction")
    return out


#: A dip direction whose 95% half-width reaches this many degrees makes a plane at best 'weak'.
POOR_DIRECTION_DEG = 45.0


def surface_grid(inputs: Inputs, opts: RunOptions, *, log: Log = _quiet, names: dict | None = None) -> Grid:
    """The output grid: the DEM's grid; with ``--extent`` or ``--cell`` (or without a DEM) square
    cells of ``--cell`` over ``--extent`` (defaults: the DEM's cell and extent, else about 1/500 of
    the contour layer's extent), corners on multiples of the cell
    (:func:`strikeline.pipeline.rasters.output_grid`; ``names`` names ``cell_m`` and ``extent`` in its
    refusal, default the command line's flags)."""
    from strikeline.pipeline.rasters import output_grid  # rasters builds on these steps

    geoms = inputs.contours.geoms if inputs.contours is not None else inputs.contacts.geoms
    return output_grid(dem_grid=inputs.dem_grid, bounds=tuple(shapely.total_bounds(geoms)), cell_m=opts.cell_m,
                       extent=getattr(opts, "extent", None), crs_wkt=inputs.crs_wkt, log=log, names=names)


def contact_segments(picks: PickSet, *, cell_m: float, vertex_spacing_m: float = 0.0,
                     gap_m: float | None = None) -> np.ndarray:
    """Label of the contact segment of every pick: the part of one contact inside one square
    block of :func:`strikeline.stats.holdout_block_m` (about the typical distance from the
    mapped ground to the nearest pick, at least two vertex spacings of the mapped lines and three
    cells). Used for cross-validation folds and for the block bootstrap, so that neighbouring
    picks, which share their errors, stay together. ``gap_m``: the picks'
    :func:`strikeline.stats.typical_gap_m` when already computed."""
    return segment_labels(picks.xyz, picks.contact_id, cell_m=cell_m, vertex_spacing_m=vertex_spacing_m, gap_m=gap_m)


def segment_labels(xyz, contact_id, *, cell_m: float = 1.0, vertex_spacing_m: float = 0.0,
                   gap_m: float | None = None) -> np.ndarray:
    """:func:`contact_segments` for bare arrays: ``xyz`` (n, 3) and a contact id per point
    (non-finite ids count as one contact of their own)."""
    xyz = np.asarray(xyz, dtype=float)
    cid = np.asarray(contact_id, dtype=float)
    cid = np.where(np.isfinite(cid), cid, -1).astype(np.int64)
    block_m = segment_block_m(xyz, cid, cell_m=cell_m, vertex_spacing_m=vertex_spacing_m,
                              gap_m=gap_m) if len(xyz) else 1.0
    return segment_groups(xyz[:, 0], xyz[:, 1], cid, block_m=block_m)


def segment_block_m(xyz, contact_id, *, cell_m: float, vertex_spacing_m: float = 0.0, trend=None,
                    sigma=None, gap_m: float | None = None) -> float:
    """Side of the contact-segment blocks (:func:`strikeline.stats.holdout_block_m`), with the
    correlation length of the picks' errors along the contacts
    (:func:`strikeline.stats.residual_correlation_m`; residuals from a plane, or from
    ``trend``, the elevation of a smooth fit at each pick)."""
    xyz = np.asarray(xyz, dtype=float)
    return holdout_block_m(xyz[:, :2], vertex_spacing_m=vertex_spacing_m, cell_m=cell_m, gap_m=gap_m,
                           correlation_m=residual_correlation_m(
                               xyz, contact_id, trend=trend,
                               sigma_m=None if sigma is None else float(np.sqrt(np.mean(np.square(sigma))))))


def smooth_trend(xyz, sigma) -> np.ndarray | None:
    """Elevation at every pick of a thin-plate spline smoothed until its residuals match the
    stated pick errors (no cross-validation): the surface's shape without the picks' errors, so
    that the errors' correlation along the contacts can be measured on a curved surface too.
    ``None`` when no spline can be fitted (too few picks)."""
    try:
        m = fit_surface(xyz, model="spline", smoothing="discrepancy", data_sigma_m=sigma,
                        cross_validate_model=False)
    except (UndeterminedError, InputError):
        return None
    return m.evaluate(xyz[:, 0], xyz[:, 1])


def model_surface(picks: PickSet, opts: RunOptions, grid: Grid, *, boreholes=None, orientations=None, bounds=None,
                  what: str, is_cancelled=None, sigma=None, vertex_spacing_m: float = 0.0,
                  gap_m: float | None = None) -> SurfaceModel:
    """Fit the ``--model`` surface to picks (and constraints), folds by contact segment.

    ``sigma`` (one per pick, metres) is the stated pick error the model choice is judged
    against (default: ``--dem-sigma`` for every pick). ``gap_m``: the picks'
    :func:`strikeline.stats.typical_gap_m` when already computed (it triangulates every pick).
    """
    xyz = picks.xyz
    data_sigma = opts.dem_sigma_m if sigma is None else sigma
    corr = residual_correlation_m(xyz, picks.contact_id, trend=smooth_trend(xyz, data_sigma),
                                  sigma_m=float(np.sqrt(np.mean(np.square(data_sigma)))))
    block = holdout_block_m(xyz[:, :2], vertex_spacing_m=vertex_spacing_m, cell_m=grid.cell_x_m, correlation_m=corr,
                            gap_m=gap_m)
    cid = np.asarray(picks.contact_id, dtype=float)
    groups = segment_groups(xyz[:, 0], xyz[:, 1], np.where(np.isfinite(cid), cid, -1).astype(np.int64), block_m=block)
    bh = None
    if boreholes is not None:
        bh = np.column_stack([boreholes, np.full(len(boreholes), opts.borehole_sigma_m)])
    orient = None
    if orientations is not None:
        orient = np.column_stack([orientations, np.full(len(orientations), opts.orientation_sigma_deg)])
    data_sigma = opts.dem_sigma_m if sigma is None else sigma
    try:
        return fit_surface(xyz, model=opts.model, boreholes=bh, orientations=orient, groups=groups,
                           seed=opts.seed, data_sigma_m=data_sigma, block_m=block, error_correlation_m=corr, is_cancelled=is_cancelled, smoothing=SPLINE_SMOOTHING,
                           bounds=bounds)
    except UndeterminedError as exc:
        raise UndeterminedError(f"{what}: {exc}") from None


def structure_contours(surface, grid: Grid, *, interval_m: float, extrapolated_fn=None, is_cancelled=None,
                       lines=None):
    """Structure contours of a surface grid, split where they leave the reach of the data.

    Returns ``(lines, elevation_m, extrapolated)``; ``extrapolated`` is all false without an
    ``extrapolated_fn(x, y)``. ``is_cancelled`` is asked at each progress step of GDAL's contour
    generator, so a cancel stops it there. ``lines`` = ``(geoms, levels)`` already drawn (from a
    grid written block by block, :mod:`strikeline.pipeline.tiled`) are split instead.
    """
    geoms, levels = lines if lines is not None else contour_lines(surface, grid, interval_m=interval_m,
                                                                  is_cancelled=is_cancelled)
    if extrapolated_fn is None:
        return geoms, np.asarray(levels, dtype=float), np.zeros(len(geoms), dtype=bool)
    spacing = min(grid.cell_x_m, grid.cell_y_m)
    parts, flags, src = split_lines_by_flag(geoms, extrapolated_fn, spacing_m=spacing)
    return parts, (np.asarray(levels, dtype=float)[src] if len(src) else np.empty(0)), flags


def depth_trace_misfit(dem, dem_grid: Grid, surface, contacts: VectorLayer | None = None, *,
                       extrapolated_fn=None, flag_m=None, model: SurfaceModel | None = None,
                       z_flag: float = MISFIT_Z, dem_sigma_m: float = default("dem_sigma_m"),
                       contact_sigma_m: float = default("contact_sigma_m"), is_cancelled=None,
                       raw_trace=None) -> dict:
    """Depth below ground, the predicted outcrop trace and its misfit to the mapped contacts.

    Depth = DEM − surface (positive where the surface lies below ground); the trace is its zero
    line, split where ``extrapolated_fn`` changes; the misfit of the fitted surface's trace is
    measured from every contact vertex over valid DEM cells (median, 90th percentile).

    The misfit check cuts the contacts into segments of ``SEGMENT_CELLS`` cells. With the
    fitted ``model`` every segment is compared with the surface forecast WITHOUT the picks
    near it (:meth:`strikeline.surfaces.SurfaceModel.holdout_prediction`), so a mistraced
    stretch or an unmapped fault cannot bend the surface it is checked against; it is flagged
    when its vertical misfit exceeds ``z_flag`` standard errors, or, with ``flag_m``, when its horizontal misfit exceeds that many
    metres (:func:`strikeline.maps.trace.holdout_misfit_segments`). Without a model (a surface
    raster only) segments are compared with that surface's trace and flagged beyond
    ``flag_m`` (default ``FLAG_CELLS`` cells). The standard error of a vertical misfit is the
    forecast's own error and the stated error of the ground there:
    ``sqrt(dem_sigma_m² + (contact_sigma_m · tan(ground slope))²)`` — the DEM's error and the
    contact's positional error taken through the slope (as for contour picks).

    Returns
    -------
    dict
        ``depth``, ``trace``, ``trace_extrapolated``, ``misfit`` (dict), ``vertices`` and
        ``vertex_distance`` (contact vertices on the DEM and their distance to the trace),
        ``segments``, ``flag_m``, ``check`` (how segments were checked).

    ``raw_trace``: the zero line of the depth already drawn (from a depth grid written block by
    block, :mod:`strikeline.pipeline.tiled`); ``surface`` is not used then and ``depth`` is None.
    A run's block path draws it on a second thread during the step "structure contours"
    (:func:`strikeline.pipeline.tiled.contours_and_trace_of_blocks`), whose time then includes it.
    """
    spacing = min(dem_grid.cell_x_m, dem_grid.cell_y_m)
    depth = None
    if raw_trace is None:
        depth = depth_below_ground(dem, surface)
        raw_trace, _ = contour_lines(depth, dem_grid, levels=[0.0], is_cancelled=is_cancelled)
    if extrapolated_fn is not None:
        trace, tflags, _ = split_lines_by_flag(raw_trace, extrapolated_fn, spacing_m=spacing)
    else:
        trace, tflags = raw_trace, np.zeros(len(raw_trace), dtype=bool)
    out = {"depth": depth, "trace": trace, "trace_extrapolated": tflags, "flag_m": flag_m,
           "misfit": {"median_m": None, "p90_m": None, "n_vertices": 0, "note": "no contacts given"},
           "vertices": np.empty((0, 2)), "vertex_distance": np.empty(0), "segments": None,
           "check": None}
    if contacts is None:
        return out
    verts = shapely.get_coordinates(contacts.geoms)
    verts = verts[np.isfinite(sample_bilinear(dem, dem_grid, verts[:, 0], verts[:, 1]))]
    out["misfit"] = trace_misfit(verts, raw_trace)
    out["vertices"] = verts
    out["vertex_distance"] = distance_to_lines(verts, raw_trace)
    segment_m = SEGMENT_CELLS * spacing
    if model is not None:
        h = spacing

        def check_fn(x, y):
            # the ground at the points and at the four neighbours of its slope in one call, the
            # same values point by point: a DEM read by windows is read once instead of five times
            x, y = np.broadcast_arrays(np.asarray(x, dtype=float), np.asarray(y, dtype=float))
            ground, east, west, north, south = sample_bilinear(
                dem, dem_grid, np.stack([x, x + h, x - h, x, x]), np.stack([y, y, y, y + h, y - h]))
            z, se, gx, gy = model.holdout_prediction(x, y)
            dgx = (east - west) / (2 * h)
            dgy = (north - south) / (2 * h)
            pick_var = dem_sigma_m ** 2 + (contact_sigma_m * np.hypot(dgx, dgy)) ** 2
            return ground - z, np.sqrt(se ** 2 + pick_var), np.hypot(dgx - gx, dgy - gy)

        out["segments"] = holdout_misfit_segments(contacts.geoms, contacts.fids, check_fn, segment_m=segment_m,
                                                  z_flag=z_flag, flag_m=flag_m)
        out["check"] = {
            "method": "each segment against the surface fitted without the picks near it "
                      f"(cross-validation folds of {model.n_folds}; robust refits for plane and trend2)"
                      if model.n_folds else "against the fitted surface (no cross-validation was possible)",
            "flag_rule": (f"|vertical misfit| > {z_flag:g} standard errors" if flag_m is None
                          else f"horizontal misfit > {flag_m:g} m (--misfit-flag)"),
            "dem_sigma_m": dem_sigma_m, "contact_sigma_m": contact_sigma_m,
        }
        return out

    def on_valid(x, y):
        return np.isfinite(sample_bilinear(dem, dem_grid, x, y))

    flag_m = FLAG_CELLS * spacing if flag_m is None else flag_m
    out["flag_m"] = flag_m
    out["segments"] = contact_misfit_segments(contacts.geoms, contacts.fids, raw_trace,
                                              segment_m=segment_m, flag_m=flag_m, valid_fn=on_valid)
    out["check"] = {"method": "distance to the given surface's trace", "flag_rule": f"misfit > {flag_m:g} m"}
    return out


def log_model_choice(model: SurfaceModel, *, what: str, log: Log = _quiet, names: dict | None = None) -> None:
    """Say in the log which models were scored, their scores, the hold-out block and why (``names``:
    how the caller names the options, as :func:`strikeline.pipeline.options.check_value`; default the
    command line's flags)."""
    if not model.cv_rmse_m:
        log(f"{what}: {model.kind} (fixed, not cross-validated)")
        return
    scores = ", ".join(f"{k} {v:.3g} m" if np.isfinite(v) else f"{k} not scored"
                       for k, v in model.cv_rmse_m.items())
    block = "" if model.block_m is None else f", blocks of {model.block_m:.0f} m"
    log(f"{what}: cross-validation error {scores} ({model.n_groups} held-out segments{block})")
    if model.choice is not None:
        log(f"{what}: {model.choice.reason}")
    else:
        log(f"{what}: {model.kind} as asked ({option_called('model', names)})")
    hint = error_scale_hint(model, names=names)
    if hint:
        log(f"warning: {what}: {hint}")


def error_scale_hint(model: SurfaceModel, *, names: dict | None = None) -> str | None:
    """A warning when the stated pick errors and the scatter of held-out picks disagree by more
    than a factor 3: the stated errors set the model choice's tolerance and the misfit check's
    threshold, so they should be the map's and the DEM's real errors."""
    if model.choice is None or not model.stated_sigma_m:
        return None
    chi = model.choice.chi2.get(model.choice.best, {})
    seen = chi.get("trimmed_rms_m")
    if seen is None:
        return None
    ratio = seen / model.stated_sigma_m
    if 1 / 3 <= ratio <= 3:
        return None
    which = "smaller" if ratio < 1 else "larger"
    return (f"held-out picks scatter by {seen:.3g} m (trimmed RMS of the best model) against a stated pick error of "
            f"{model.stated_sigma_m:.3g} m: the real errors look {1 / ratio if ratio < 1 else ratio:.0f} times {which}; "
            f"state the DEM's vertical error ({option_called('dem_sigma_m', names)}) and the map's positional error "
            f"({option_called('contact_sigma_m', names)}, {option_called('contour_sigma_m', names)}), which set "
            "the model choice's tolerance and the misfit check's threshold")
