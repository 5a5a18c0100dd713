"""Fits without some of the picks: :func:`_score_fits` cross-validates the fits of one model (the
score and each fit's own standard error at the picks it predicted, for the growth of error with
distance); :func:`_holdout_checks` makes the fits the misfit check compares contacts with, each
without one colour of two shifted checkerboards of square blocks (:class:`_Holdout`), plane and
trend2 refitted robustly (:func:`_robust_surface`).
"""
from __future__ import annotations

import numpy as np

from strikeline.errors import UndeterminedError
from strikeline.stats import cross_validate
from strikeline.surfaces.data import _Data
from strikeline.surfaces.fitted import _Surface, _fit_kind
from strikeline.surfaces.model import _check_cancel
from strikeline.surfaces.parallel import map_fits
from strikeline.surfaces.polynomial import _fit_poly_robust


#: The standard error's growth with distance is also fitted on a hold-out of blocks this many
#: times the cross-validation block.
COARSE_HOLDOUT_FACTOR = 4.0
#: The misfit check holds out square blocks this many times the cross-validation block: the same
#: size, so that its forecasts are made at the distances whose error the cross-validation measured
#: (twice as large left the spline extrapolating beyond its measured error: 6 % false flags on the
#: lidar fold sheet against 1 %).
CHECK_BLOCK_FACTOR = 1.0


def _score_fits(fit, data: _Data, folds, *, groups=None, progress=None, is_cancelled=None,
                workers: int | None = None):
    """Cross-validate the surfaces ``fit(training data)`` makes: the
    :class:`~strikeline.stats.CVScore` and each fit's own standard error at the picks it
    predicted (for the growth of error with distance).

    The folds' fits (and their forecasts) are made first, ``workers`` at a time
    (:func:`strikeline.surfaces.parallel.map_fits`; ``fit`` must be thread-safe), then scored in
    fold order by :func:`strikeline.stats.cross_validate`: a fold's exception is kept as its
    result and raised there in fold order, so a fold that cannot be fitted ends the score (and any
    other error propagates) as in that loop, whatever the folds after it did."""
    folds = np.asarray(folds).reshape(-1)
    base = np.full(data.n, np.nan)

    def one(k):
        _check_cancel(is_cancelled, "cross-validation")
        train, test = np.flatnonzero(folds != k), np.flatnonzero(folds == k)
        try:
            s = fit(data.picks(train))
            x, y = data.p_xy[test, 0], data.p_xy[test, 1]
            return s.base_se(x, y), s.value(x, y)
        except Exception as exc:  # raised in fold order below
            return exc

    ks = np.unique(folds)
    made = dict(zip(ks.tolist(), map_fits(one, ks.tolist(), workers=workers)))

    def fit_predict(train, test):
        out = made[folds[test[0]].item()]
        if isinstance(out, Exception):
            raise out
        base[test] = out[0]
        return out[1]
    score = cross_validate(fit_predict, np.column_stack([data.p_xy, data.p_z]), folds,
                           fixed_xy=data.fixed_xy(), groups=groups, progress=progress,
                           is_cancelled=is_cancelled)
    return score, base


class _Holdout:
    """Surfaces fitted without square blocks of the picks, for the misfit check.

    Two checkerboards of blocks of side ``side``, the second shifted by half a block; each
    colour of each board is one fit without the picks of that colour (up to 8 fits). A point
    takes the fit whose held-out block it lies deepest inside, so the nearest training data
    lie at least a quarter of a block away whatever a mistrace or fault near it does; for the
    spline only a fit whose training data surround it (inside their convex hull): its forecast
    beyond the data is an extrapolation the check cannot judge, and the point stays unchecked.
    """

    def __init__(self, origin, side, surfaces):
        self.origin = np.asarray(origin, float)
        self.side = float(side)
        self.surfaces = surfaces  # {(board, colour): _Surface}

    def cells(self, x, y, board):
        shift = 0.5 * self.side * board
        u = (x - self.origin[0] + shift) / self.side
        v = (y - self.origin[1] + shift) / self.side
        i, j = np.floor(u), np.floor(v)
        colour = (i.astype(np.int64) % 2) + 2 * (j.astype(np.int64) % 2)
        depth = np.minimum.reduce([u - i, 1 - (u - i), v - j, 1 - (v - j)])
        return colour, depth

    def predict(self, x, y):
        x = np.asarray(x, float).reshape(-1)
        y = np.asarray(y, float).reshape(-1)
        c0, d0 = self.cells(x, y, 0)
        c1, d1 = self.cells(x, y, 1)
        # a spline fit only judges points inside the hull of its training data: beyond it (at
        # the edge of the mapped ground) its forecast is an extrapolation, whose error the
        # held-out picks never measured (a polynomial's parameter error grows with distance and
        # covers it); such points take the other board, or stay unchecked (NaN)
        inside = [np.zeros(len(x), bool), np.zeros(len(x), bool)]
        for (b, c), s in self.surfaces.items():
            m = (c0 if b == 0 else c1) == c
            if m.any():
                inside[b][m] = (s.hull.distance(x[m], y[m]) <= 0.0) if s.kind == "spline" else True
        d0 = np.where(inside[0], d0, -1.0)
        d1 = np.where(inside[1], d1, -1.0)
        board = np.where(d1 > d0, 1, 0)
        colour = np.where(board == 1, c1, c0)
        usable = np.maximum(d0, d1) >= 0
        z, se, gx, gy = (np.full(len(x), np.nan) for _ in range(4))
        for (b, c), s in self.surfaces.items():
            m = usable & (board == b) & (colour == c)
            if not m.any():
                continue
            z[m] = s.value(x[m], y[m])
            se[m] = s.check_se(x[m], y[m])
            gx[m], gy[m] = s.gradient(x[m], y[m])
        return z, se, gx, gy


def _robust_surface(kind, data: _Data, sigma_m, taper_m, pps=1.0) -> _Surface:
    """Plane or trend2 fitted robustly
    (:func:`~strikeline.surfaces.polynomial._fit_poly_robust`), for the misfit check."""
    floor = sigma_m if sigma_m is not None else 0.0
    core = _fit_poly_robust(1 if kind == "plane" else 2, data, floor)
    trend = None if kind == "plane" else _fit_poly_robust(1, data, floor)
    s = _Surface(kind, core, trend, data, taper_m)
    s.noise_floor_m, s.picks_per_segment = floor, pps
    return s


def _holdout_checks(kind, data: _Data, side_m, growth, sigma_m, taper_m, *, smoothing, lam,
                    pps=1.0, is_cancelled=None, systems=None, workers: int | None = None):
    """The fits the misfit check compares held-out contacts with (see :class:`_Holdout`).

    The spline is refitted as it was chosen; plane and trend2 are refitted robustly
    (:func:`~strikeline.surfaces.polynomial._fit_poly_robust`), because one mistraced stretch
    or faulted block tilts a global least-squares surface everywhere, far outside any held-out
    block. ``systems``: the spline's pick systems of ``data`` (kernel reused). The fits are made
    ``workers`` at a time (:func:`strikeline.surfaces.parallel.map_fits`).
    """
    origin = data.p_xy.min(axis=0)
    holdout = _Holdout(origin, side_m, {})
    floor = sigma_m if sigma_m is not None else 0.0
    outs = []  # ((board, colour), picks held out): the fits to make, in the loop's order
    for board in (0, 1):
        colour, _ = holdout.cells(data.p_xy[:, 0], data.p_xy[:, 1], board)
        for c in range(4):
            out = colour == c
            if out.any() and not out.all():
                outs.append(((board, c), out))

    def one(item):
        _check_cancel(is_cancelled, "misfit check")
        sub = data.picks(~item[1])
        try:
            if kind in ("plane", "trend2"):
                try:
                    return _robust_surface(kind, sub, sigma_m, taper_m, pps)
                except (UndeterminedError, np.linalg.LinAlgError):
                    pass
            return _fit_kind(kind, sub, smoothing=smoothing, lam=lam, taper_m=taper_m, systems=systems)
        except UndeterminedError:
            return None  # points of this colour fall back to no check (NaN)

    # the fits are independent: made two at a time (strikeline.surfaces.parallel)
    for (key, _), s in zip(outs, map_fits(one, outs, workers=workers)):
        if s is None:
            continue
        s.growth = growth
        s.noise_floor_m, s.picks_per_segment = floor, pps
        holdout.surfaces[key] = s
    return holdout if holdout.surfaces else None
