"""Surface models of a geological contact: :func:`fit_surface` fits a height field ``z(x, y)`` to
elevation picks, with boreholes, dip measurements and bounds, and returns a
:class:`~strikeline.surfaces.model.SurfaceModel`.

Models
------
``'plane'``, ``'trend2'``
    Plane and quadratic trend surface (:mod:`strikeline.surfaces.polynomial`).
``'spline'``
    Thin-plate smoothing spline (:mod:`strikeline.surfaces.spline`, within bounds
    :mod:`strikeline.surfaces.bounded`).
``'auto'``
    Fits all three, scores each by grouped k-fold cross-validation RMSE on held-out picks
    (:mod:`strikeline.stats`) and keeps the simplest model the data support
    (:func:`strikeline.stats.choose_model`). Every score is kept in ``cv_rmse_m``.

Steps of a fit
--------------
1. Picks are thinned to one centroid per lattice cell (:mod:`strikeline.picks.thinning`), at most
   ``max_points`` of them, each labelled with the majority group of its picks (or one per cell
   and group, ``thin_by_group=True``).
2. Picks and constraints are prepared in normalised coordinates (:mod:`strikeline.surfaces.data`);
   constraints are never held out in cross-validation.
3. The models are scored on held-out groups, the model is fitted to all data and relaxed to its
   trend plane beyond the data (:mod:`strikeline.surfaces.fitted`); the error's growth with
   distance and the misfit check's hold-out fits come from held-out picks
   (:mod:`strikeline.surfaces.holdout`).

The spline's kernel of all picks is computed once and every subset's sliced from it
(:class:`strikeline.surfaces.reduced.PickSystems`). The folds' fits (the λ search, each model's
cross-validation, the coarse hold-out) and the misfit check's fits are made two at a time on
threads with one BLAS thread each (:mod:`strikeline.surfaces.parallel`); the final fit is made on
the caller's thread as before.

The default ``reach_m`` is the ``REACH_PERCENTILE`` percentile of the distance to the nearest
datum over the data's convex hull; the default ``taper_m`` is ``TAPER_FRACTION`` of the square
root of the hull's area (at least ``reach_m``).
"""
from __future__ import annotations

from types import MappingProxyType
from typing import Callable

import numpy as np
from scipy.spatial import cKDTree

from strikeline.errors import InputError, UndeterminedError
from strikeline.geometry.orientation import dip_from_normal, strike_from_dip_direction
from strikeline.picks.thinning import thin_picks
from strikeline.stats import (SELECTION_RULES, CVScore, choose_model, fit_error_growth,
                              holdout_block_m, make_folds, segment_groups)
from strikeline.surfaces.data import DEFAULT_BOREHOLE_SIGMA_M, DEFAULT_ORIENTATION_SIGMA_DEG, _Data, _prepare
from strikeline.surfaces.fitted import _Surface, _fit_kind
from strikeline.surfaces.holdout import (CHECK_BLOCK_FACTOR, COARSE_HOLDOUT_FACTOR, _holdout_checks,
                                         _robust_surface, _score_fits)
from strikeline.surfaces.hull import _Hull
from strikeline.surfaces.model import SurfaceModel, _check_cancel
from strikeline.surfaces.polynomial import _Poly, _TERMS
from strikeline.surfaces.reduced import PickSystems
from strikeline.surfaces.spline import _kfold_lambda


#: Fitted model kinds, simplest first (the order of the one-standard-error rule).
MODELS = ("plane", "trend2", "spline")
#: Valid ``model`` values of :func:`fit_surface`: the default first, then the fitted kinds (the
#: order in which the command line and the QGIS tools list them).
MODEL_CHOICES = ("auto",) + MODELS
#: Valid string values of ``smoothing``.
SMOOTHING_CHOICES = ("gcv", "kfold", "discrepancy")
#: Percentile of the hull's distance-to-data that defines the default ``reach_m``.
REACH_PERCENTILE = 95.0
#: Default ``taper_m`` as a fraction of the square root of the data hull's area.
TAPER_FRACTION = 0.25


def _choice(value, choices, name):
    if not isinstance(value, str) or value not in choices:
        raise InputError(f"{name} must be one of {', '.join(map(repr, choices))}; got {value!r}")
    return value


def _default_reach(hull: _Hull, tree: cKDTree, xy):
    if hull.area > 0:
        lo, hi = hull.vertices.min(axis=0), hull.vertices.max(axis=0)
        side = np.sqrt(hull.area / 10_000.0)
        gx = np.arange(lo[0] + side / 2, hi[0], side)
        gy = np.arange(lo[1] + side / 2, hi[1], side)
        X, Y = np.meshgrid(gx, gy)
        X, Y = X.ravel(), Y.ravel()
        inside = hull.distance(X, Y) == 0
        if inside.sum() >= 10:
            d = tree.query(np.column_stack([X[inside], Y[inside]]))[0]
            return float(np.percentile(d, REACH_PERCENTILE))
    if len(xy) >= 2:  # degenerate hull: the largest nearest-neighbour gap
        nn = tree.query(xy, k=2)[0][:, 1]
        return float(max(nn.max(), 1e-9))
    return 1.0


def _params(surface: _Surface, data: _Data) -> dict:
    core = surface.core
    p = {"origin_m": surface.origin.copy(), "scale_m": float(surface.scale)}
    if isinstance(core, _Poly):
        p["terms"] = list(_TERMS[core.degree])
        p["coefficients"] = core.coef.copy()
        p["sigma_m"] = core.sigma_m
        p.update({k: v for k, v in core.info.items()})
    else:
        p.update(core.info)
        p["footprint_m"] = data.footprint_m
    plane = core if surface.kind == "plane" else surface.trend
    n = np.array([-plane.coef[1], -plane.coef[2], surface.scale])
    dd, d = dip_from_normal(n)
    key = "" if surface.kind == "plane" else "trend_"
    p[key + "dip_deg"] = float(d)
    p[key + "dip_direction_deg"] = float(dd)
    p[key + "strike_rhr_deg"] = float(strike_from_dip_direction(dd))
    p["_boreholes"] = np.column_stack([data.b_xy, data.b_z]) if len(data.b_z) else \
        np.empty((0, 3))
    return p


def fit_surface(xyz, *, model: str = "auto", boreholes=None, borehole_sigma_m=DEFAULT_BOREHOLE_SIGMA_M,
                orientations=None, orientation_sigma_deg=DEFAULT_ORIENTATION_SIGMA_DEG,
                orientation_footprint_m: float | None = None, groups=None,
                smoothing="gcv", n_folds: int = 5, selection: str = "data_error",
                data_sigma_m=None, error_correlation_m: float | None = None,
                block_m: float | None = None,
                check_block_m: float | None = None,
                cross_validate_model: bool = True, max_points: int = 2000,
                thin_cell_m: float | None = None, thin_by_group: bool = False,
                pick_sigma_m: float | None = None, bounds=None,
                reach_m: float | None = None, taper_m: float | None = None, seed: int = 0,
                progress: Callable | None = None,
                is_cancelled: Callable | None = None) -> SurfaceModel:
    """Fit a surface model ``z(x, y)`` to elevation picks, with constraints.

    Parameters
    ----------
    xyz : array_like, shape ``(n, 3)``
        Picks ``x, y, z`` (metres). Rows with non-finite values are dropped.
    model : {'auto', 'plane', 'trend2', 'spline'}, default 'auto'
    boreholes : array_like, shape ``(nb, 3)`` or ``(nb, 4)``, optional
        ``x, y, z`` of the surface in boreholes, optionally a 4th column ``sigma_m``.
    borehole_sigma_m : float or array_like, default 1
        Standard error of borehole elevations when ``boreholes`` has 3 columns (0: exact).
    orientations : array_like, shape ``(no, 4)`` or ``(no, 5)``, optional
        Dip measurements ``x, y, dip_deg, dip_direction_deg`` and optionally ``sigma_deg``.
        Convert strike (right-hand rule) with
        :func:`strikeline.geometry.orientation.dip_direction_from_strike`.
    orientation_sigma_deg : float or array_like, default 5
        Standard error of the measured dip when ``orientations`` has 4 columns.
    orientation_footprint_m : float, optional
        Half-baseline ``h`` of the slope observation (default half the median spacing of the
        thinned picks).
    groups : array_like, shape ``(n,)``, optional
        Cross-validation group of every pick (contact segment ids; see
        :func:`strikeline.stats.segment_groups`). Default (or fewer than two labels):
        ``4 × n_folds`` square spatial blocks.
    smoothing : {'gcv', 'kfold', 'discrepancy'} or float, default 'gcv'
        Spline smoothing λ: ``'gcv'`` minimises V(λ) on each fit's picks (nested in every
        cross-validation fold); ``'discrepancy'`` smooths until the RMS residual equals the
        stated pick error ``data_sigma_m``
        (:func:`~strikeline.surfaces.spline._discrepancy_nlam`; GCV without it); ``'kfold'``
        minimises the grouped k-fold CV error of the picks-only spline over 29 values of λ, and
        the spline's CV score then uses that λ in
        every fold (slightly optimistic: the choice saw every fold); a number is a fixed
        λ ``>= 0`` in the normalised coordinates (``0`` interpolates).
    n_folds : int, default 5
    selection : {'data_error', 'one_se', 'min'}, default 'data_error'
        Rule of ``model='auto'`` (:func:`strikeline.stats.choose_model`); ``'data_error'``
        needs ``data_sigma_m`` and otherwise acts as ``'one_se'``.
    data_sigma_m : float or array_like, optional
        Stated standard error of the picks (metres; one number or one per pick): the error
        the model choice judges the scores against.
    error_correlation_m : float, optional
        Distance along the contacts over which pick errors are shared
        (:func:`strikeline.stats.residual_correlation_m`); the parameter part of the
        standard error is inflated by the design effect ``sqrt(1 + correlation / spacing)``.
    block_m : float, optional
        Side of the square blocks that made ``groups`` (recorded; sets the misfit check's
        blocks).
    check_block_m : float, optional
        Side of the blocks the misfit check holds out
        (:meth:`~strikeline.surfaces.model.SurfaceModel.holdout_prediction`); default
        ``CHECK_BLOCK_FACTOR`` times the cross-validation block
        (:func:`strikeline.stats.holdout_block_m` of the picks when ``groups`` are not given).
    cross_validate_model : bool, default True
        Cross-validate with a single (non-auto) model too: all three models are scored, for
        the calibrated standard error and for the misfit check, which uses the model the
        ``auto`` rule would choose (:attr:`~strikeline.surfaces.model.SurfaceModel.check_kind`).
    max_points : int, default 2000
        Thinning target (:func:`strikeline.picks.thinning.thin_picks`).
    thin_cell_m : float, optional
        Fixed thinning cell instead.
    thin_by_group : bool, default False
        ``False``: one representative per cell, labelled with the majority group of its
        picks (finer cells for the same ``max_points``; picks of segments meeting in a cell can
        leak across folds there). ``True``: one per cell and group, no leakage, coarser cells
        (every group keeps a representative). See :mod:`strikeline.picks.thinning`.
    pick_sigma_m : float, optional
        Pick standard error for weighing picks against constraints in plane/trend2 (default:
        estimated from the residuals of the fit without constraints).
    bounds : array_like, shape ``(m, 4)``, optional
        Inequalities ``lo <= z(x, y) <= hi`` as rows ``x, y, lo, hi`` (``-inf``/``+inf`` for an
        open side), e.g. from the map's unit polygons (:func:`strikeline.surfaces.units.unit_bounds`).
        Never held out in cross-validation and not data (they move neither the hull, the
        reach nor the standard error). ``plane``/``trend2``: hard linear inequality
        constraints (Lawson & Hanson 1974, ch. 23; a model that cannot honour them all raises
        :class:`~strikeline.errors.UndeterminedError`); ``spline``: a primal-dual active set of
        bound points pinned to their bound (Nocedal & Wright 2006, ch. 16), at most
        ``MAX_ACTIVE_BOUNDS`` of them, broken by at most ``BOUND_TOLERANCE_M`` when it
        converges. The trend plane that ``trend2`` and ``spline`` relax to outside the data's
        hull honours the bounds too when a plane can; otherwise it ignores them, and the model
        stays untapered out to the bound points the trend breaks (the hull of the data and
        those points), so that the blend of the two still honours every bound.
    reach_m, taper_m : float, optional
        Extrapolation distance and taper length (defaults in the module docstring).
    seed : int, default 0
        Seed for fold assignment.
    progress, is_cancelled : callable, optional

    Returns
    -------
    SurfaceModel

    Raises
    ------
    InputError
        Invalid option or shape (the message lists valid choices).
    UndeterminedError
        The requested model cannot be fitted (too few or collinear picks, boreholes a plane
        cannot honour ...); with ``'auto'`` only when no model can be fitted.
    CancelledError

    References
    ----------
    Craven, P. & Wahba, G. (1979). Smoothing noisy data with spline functions: estimating the
    correct degree of smoothing by the method of generalized cross-validation. *Numerische
    Mathematik*, 31(4), 377–403. https://doi.org/10.1007/BF01404567

    Duchon, J. (1977). Splines minimizing rotation-invariant semi-norms in Sobolev spaces.
    *Lect. Notes Math.* 571, Springer, 85–100. https://doi.org/10.1007/BFb0086566

    Wahba, G. (1990). *Spline Models for Observational Data*. CBMS-NSF Regional Conference
    Series in Applied Mathematics 59, SIAM. https://doi.org/10.1137/1.9781611970128

    Hillier, M. J., Schetselaar, E. M., de Kemp, E. A. & Perron, G. (2014). Three-dimensional
    modelling of geological surfaces using generalized interpolation with radial basis
    functions. *Mathematical Geosciences*, 46(8), 931–953.
    https://doi.org/10.1007/s11004-014-9540-3

    Lawson, C. L. & Hanson, R. J. (1974). *Solving Least Squares Problems*. Prentice-Hall,
    Englewood Cliffs (SIAM reprint 1995, https://doi.org/10.1137/1.9781611971217), ch. 23.

    Fernández, O. (2005). Obtaining a best fitting plane through 3D georeferenced data.
    *Journal of Structural Geology*, 27(5), 855–858. https://doi.org/10.1016/j.jsg.2004.12.004

    Examples
    --------
    >>> import numpy as np
    >>> rng = np.random.default_rng(0)
    >>> xy = rng.uniform(0, 1000, (200, 2))
    >>> z = 500 - 0.2 * xy[:, 0] + rng.normal(0, 0.5, 200)
    >>> m = fit_surface(np.column_stack([xy, z]), model="plane")
    >>> round(float(m.evaluate(500.0, 500.0)), 0)
    400.0
    """
    _choice(model, MODEL_CHOICES, "model")
    _choice(selection, SELECTION_RULES, "selection")
    if isinstance(smoothing, str):
        _choice(smoothing, SMOOTHING_CHOICES, "smoothing")
    else:
        try:
            ok = float(smoothing) >= 0 and np.isfinite(float(smoothing))
        except (TypeError, ValueError):
            ok = False
        if not ok:
            raise InputError(f"smoothing must be one of 'gcv', 'kfold', 'discrepancy' or a number >= 0; got "
                             f"{smoothing!r}")
    if int(n_folds) < 2:
        raise InputError(f"n_folds must be at least 2, got {n_folds}")
    _check_cancel(is_cancelled, "surface fitting")
    thinned = thin_picks(xyz, max_points=max_points, cell_m=thin_cell_m, groups=groups,
                         by_group=bool(thin_by_group))
    data = _prepare(thinned.xyz, boreholes, borehole_sigma_m, orientations,
                    orientation_sigma_deg, orientation_footprint_m, pick_sigma_m, bounds=bounds)
    hull = _Hull(data.all_xy())
    tree = cKDTree(data.all_xy())
    if reach_m is None:
        reach_m = _default_reach(hull, tree, data.all_xy())
    elif not float(reach_m) > 0:
        raise InputError(f"reach_m must be a positive distance in metres, got {reach_m}")
    if taper_m is None:
        size = np.sqrt(hull.area) if hull.area > 0 else float(np.ptp(data.all_xy(), axis=0).max())
        taper_m = max(TAPER_FRACTION * size, float(reach_m), 1e-9)
    elif not float(taper_m) > 0:
        raise InputError(f"taper_m must be a positive distance in metres, got {taper_m}")

    # every model is scored whenever cross-validation runs: a fixed model's misfit check uses
    # the model the data support (the 'auto' choice), so a flexible model asked for cannot
    # absorb a mistrace it is checked against
    kinds = MODELS if (model == "auto" or cross_validate_model) else (model,)
    sigma_stated = _stated_sigma(data_sigma_m, len(np.asarray(xyz)))
    # picks that share one error: those within one correlation length along a contact
    pps = 1.0
    if error_correlation_m and len(xyz) >= 2:
        p0 = np.asarray(xyz, dtype=float)[:, :2]
        p0 = p0[np.all(np.isfinite(p0), axis=1)]
        nn = cKDTree(p0).query(p0, k=2)[0][:, 1]
        nn = nn[nn > 0]
        if len(nn):
            pps = 1.0 + float(error_correlation_m) / float(np.median(nn))
    folds = None
    if model == "auto" or cross_validate_model or smoothing == "kfold":
        labels = thinned.groups
        if labels is None or len(np.unique(labels)) < 2:
            block_m = holdout_block_m(data.p_xy)
            labels = segment_groups(data.p_xy[:, 0], data.p_xy[:, 1], np.zeros(data.n),
                                    block_m=block_m)
        if len(np.unique(labels)) >= 2:
            folds = make_folds(labels, n_folds=n_folds, seed=seed)

    if folds is None and (model == "auto" or smoothing == "kfold"):
        raise InputError(f"model={model!r} with smoothing={smoothing!r} needs cross-validation, "
                         f"but the {data.n} picks fall into fewer than two groups or blocks; "
                         "give more picks or choose a model and smoothing='gcv'")
    n_steps = len(kinds) + 1
    done = [0]

    def sub_progress(f):
        if progress is not None:
            progress(min(1.0, (done[0] + f) / n_steps))

    if smoothing == "discrepancy":
        smoothing = ("discrepancy", sigma_stated) if sigma_stated else "gcv"
    lam = None
    # the spline's pick systems: the kernel of all picks made once, every fit's sliced from it
    systems = PickSystems(data.u(data.p_xy), data.p_z)
    if "spline" in kinds and smoothing == "kfold":
        try:
            full = systems.all_picks()  # the λ grid needs only its top eigenvalue
            lam = _kfold_lambda(data, folds, full.lambda_grid(29) / full.n, systems=systems)
        except UndeterminedError:
            lam = None  # the spline's CV below reports why

    def fitted(kind, sub):
        """The model ``kind`` fitted to ``sub``, with the stated noise and shared-error count."""
        s = _fit_kind(kind, sub, smoothing=smoothing, lam=lam, taper_m=taper_m, systems=systems)
        s.noise_floor_m, s.picks_per_segment = sigma_stated or 0.0, pps
        return s

    scores: dict[str, CVScore] = {}
    base_se: dict[str, np.ndarray] = {}
    # the misfit check's model, and auto's: the simplest the data support when plane and
    # trend2 are also scored robustly (a mistraced stretch or a faulted block then counts
    # against them only where it lies), so that a blunder cannot push the choice onto a model
    # flexible enough to absorb it
    check_scores: dict[str, CVScore] = {}
    check_base: dict[str, np.ndarray] = {}
    if folds is not None and (model == "auto" or cross_validate_model):
        for kind in kinds:
            scores[kind], base_se[kind] = _score_fits(
                lambda sub, kind=kind: fitted(kind, sub), data, folds, groups=labels,
                progress=sub_progress, is_cancelled=is_cancelled)
            done[0] += 1
        check_scores, check_base = dict(scores), dict(base_se)
        for kind in ("plane", "trend2"):
            if kind in scores and np.isfinite(scores[kind].rmse_m):
                check_scores[kind], check_base[kind] = _score_fits(
                    lambda sub, kind=kind: _robust_surface(kind, sub, sigma_stated, taper_m, pps),
                    data, folds, groups=labels, is_cancelled=is_cancelled)
    check_choice = None
    if check_scores:
        try:
            check_choice = choose_model(check_scores, order=MODELS, rule=selection,
                                        sigma_m=sigma_stated, robust=True)
        except UndeterminedError:
            if model == "auto":
                raise
    if model == "auto":
        # one choice for the surface and its check
        choice, chosen = check_choice, check_choice.chosen
    else:
        chosen = model
        choice = None  # what auto would choose from the least-squares scores, for the record
        if any(np.isfinite(sc.rmse_m) for sc in scores.values()):
            try:
                choice = choose_model(scores, order=MODELS, rule=selection, sigma_m=sigma_stated,
                                      robust=True)
            except UndeterminedError:
                pass
    check_kind = check_choice.chosen if check_choice is not None else chosen
    _check_cancel(is_cancelled, "surface fitting")
    surface = fitted(chosen, data)
    surface.hull, surface.tree = hull, tree
    score = scores.get(chosen)
    if chosen == "spline":
        if score is not None and np.isfinite(score.rmse_m):
            surface.se_cv = (score.rmse_m, max(score.distance_m, 1e-9))
        else:
            nn = cKDTree(data.p_xy).query(data.p_xy, k=2)[0][:, 1]
            surface.se_cv = (float(np.sqrt(surface.core.info["gcv_score_m2"])),
                             float(max(np.median(nn), 1e-9)))
    growth = None
    holdout = None
    side = None
    if score is not None and np.isfinite(score.rmse_m) and data.n >= 10:
        errs, dists, bases = [score.errors_m], [score.distances_m], [base_se[chosen]]
        # a second, coarser hold-out probes the error farther from data (map cells in wide
        # gaps), so the growth law is fitted over the distances it is used at, not extrapolated
        coarse_m = COARSE_HOLDOUT_FACTOR * (block_m if block_m is not None else
                                            holdout_block_m(data.p_xy))
        coarse = segment_groups(data.p_xy[:, 0], data.p_xy[:, 1], np.zeros(data.n),
                                block_m=coarse_m)
        if len(np.unique(coarse)) >= 2:
            cs, cbase = _score_fits(lambda sub: fitted(chosen, sub), data,
                                    make_folds(coarse, n_folds=n_folds, seed=seed),
                                    is_cancelled=is_cancelled)
            if np.isfinite(cs.rmse_m):
                errs.append(cs.errors_m), dists.append(cs.distances_m), bases.append(cbase)
        growth = fit_error_growth(np.concatenate(errs), np.concatenate(dists),
                                  np.concatenate(bases))
        surface.growth = growth
        check_score = check_scores[check_kind]
        if check_kind == chosen == "spline":  # the same fits: use both hold-out scales
            check_growth = fit_error_growth(np.concatenate(errs), np.concatenate(dists),
                                            np.concatenate(bases), exclude_gross=True)
        else:
            check_growth = fit_error_growth(check_score.errors_m, check_score.distances_m,
                                            check_base[check_kind], exclude_gross=True)
        side = check_block_m if check_block_m is not None else \
            CHECK_BLOCK_FACTOR * (block_m if block_m is not None else holdout_block_m(data.p_xy))
        holdout = _holdout_checks(check_kind, data, side, check_growth, sigma_stated, taper_m,
                                  smoothing=smoothing, lam=lam, pps=pps, is_cancelled=is_cancelled,
                                  systems=systems)
    if progress is not None:
        progress(1.0)
    params = _params(surface, data)
    params["n_boreholes"] = int(len(data.b_z))
    params["n_orientations"] = int(len(data.o_sig))
    params["n_bounds"] = int(data.n_bounds)
    return SurfaceModel(
        kind=chosen,
        params=MappingProxyType(params),
        cv_rmse_m=MappingProxyType({k: float(s.rmse_m) for k, s in scores.items()}),
        cv_se_m=MappingProxyType({k: float(s.se_m) for k, s in scores.items()}),
        cv_skipped=MappingProxyType({k: s.reason for k, s in scores.items() if s.reason}),
        cv_distance_m=float(score.distance_m) if score is not None else float("nan"),
        selection=f"auto/{choice.rule}" if (choice is not None and model == "auto") else "fixed",
        n_picks=int(np.count_nonzero(thinned.index >= 0)),
        n_used=int(data.n),
        thin_cell_m=thinned.cell_m,
        reach_m=float(reach_m),
        taper_m=float(taper_m),
        n_folds=0 if folds is None else int(len(np.unique(folds))),
        _surface=surface,
        choice=choice,
        growth=growth,
        block_m=block_m,
        check_block_m=None if holdout is None else float(side),
        check_kind=None if holdout is None else check_kind,
        check_reason=None if (holdout is None or check_choice is None) else check_choice.reason,
        stated_sigma_m=sigma_stated,
        n_groups=0 if score is None else int(score.n_groups),
        _holdout=holdout,
    )


def _stated_sigma(data_sigma_m, n):
    """RMS of the stated pick errors (``None`` when not stated)."""
    if data_sigma_m is None:
        return None
    s = np.asarray(data_sigma_m, dtype=float).reshape(-1)
    if s.size not in (1, n):
        raise InputError(f"data_sigma_m must be one number or one per pick ({n}); got "
                         f"{s.size} values")
    s = s[np.isfinite(s)]
    if s.size == 0 or np.any(s < 0):
        raise InputError("data_sigma_m must be finite standard errors >= 0 (metres)")
    v = float(np.sqrt(np.mean(s ** 2)))
    return v if v > 0 else None
