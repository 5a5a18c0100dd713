"""The fitted model :func:`~strikeline.surfaces.fit.fit_surface` returns: :class:`SurfaceModel`
evaluates the surface at points or on a :class:`~strikeline.geometry.grid.Grid` (a coarse lattice
and bicubic interpolation checked against full evaluation, :class:`GridEvaluation`), with its
gradient, local dip, standard error, distance to data, the forecast made without the picks near a
point (for the misfit check) and a JSON-ready summary.

Extrapolation flag
------------------
:meth:`SurfaceModel.is_extrapolated` is ``distance_to_data(x, y) > reach_m``. The default
``reach_m`` is the 95th percentile of the distance to the nearest datum over the data's convex
hull: the biggest gaps inside the hull (5 % of its area) and everything more than that distance
outside it are flagged.
"""
from __future__ import annotations

import os
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from typing import Callable, Mapping

import numpy as np
from scipy.interpolate import RectBivariateSpline

from strikeline.errors import CancelledError, InputError
from strikeline.geometry.grid import Grid
from strikeline.stats import ErrorGrowth, ModelChoice
from strikeline.surfaces.fitted import _Surface
from strikeline.surfaces.hull import _ENVELOPE_ROWS, RowDistance, distance_to_data
from strikeline.surfaces.reach import ReachLattice, beyond_reach


#: Default error allowed between coarse-grid interpolation and full evaluation.
GRID_TOLERANCE_M = 0.1
#: A check cell may also differ by up to this fraction of the model's standard error there: added
#: in quadrature, an error of a tenth of the standard error changes the stated uncertainty by at
#: most 0.5 % (sqrt(1 + 0.1²) = 1.005), far below what the error itself is known to.
GRID_SE_FRACTION = 0.1
#: Cells of one evaluation of the standard error's formula (its temporaries; our choice).
_SE_CELLS = 1 << 18
#: Points below which :meth:`SurfaceModel.is_extrapolated` searches the KD-tree for each without
#: the lattice of :mod:`strikeline.surfaces.reach` (our choice: the lattice's own cost).
_LATTICE_POINTS = 1 << 14


def _check_cancel(is_cancelled, what):
    if is_cancelled is not None and is_cancelled():
        raise CancelledError(f"{what} was cancelled")


def _window(grid: Grid, window) -> tuple[int, int, int, int]:
    """``(row0, row1, col0, col1)`` of a window of ``grid`` (the whole grid for ``None``)."""
    rows, cols = grid.shape
    if window is None:
        return 0, rows, 0, cols
    r0, r1, c0, c1 = (int(v) for v in window)
    if not (0 <= r0 < r1 <= rows and 0 <= c0 < c1 <= cols):
        raise InputError(f"window {tuple(window)} is not (row0, row1, col0, col1) inside a grid of {rows} x {cols} "
                         "cells with row0 < row1 and col0 < col1")
    return r0, r1, c0, c1


def _grid_workers(workers) -> int:
    return max(1, int(workers)) if workers is not None else max(1, min(4, os.cpu_count() or 1))


def _by_rows(fn, xs, ys, *, cells_per_chunk: int, what: str, workers: int = 1, progress=None,
             is_cancelled=None) -> np.ndarray:
    """``fn(xs, ys_block)`` (an array ``(len(ys_block), len(xs))``) for blocks of rows (bounded
    memory), ``workers`` blocks at a time in threads (numpy, scipy's KD-tree and qhull release
    Python's lock for most of their work); each block fills its own rows, so the result does not
    depend on the order in which blocks finish."""
    rows = len(ys)
    out = np.empty((rows, len(xs)))
    chunk = max(1, cells_per_chunk // max(len(xs), 1))
    starts = list(range(0, rows, chunk))

    def one(r0):
        _check_cancel(is_cancelled, what)
        r1 = min(rows, r0 + chunk)
        out[r0:r1] = fn(xs, ys[r0:r1])
        return r1

    if workers <= 1 or len(starts) < 2:
        for r0 in starts:
            r1 = one(r0)
            if progress is not None:
                progress(r1 / rows)
        return out
    with ThreadPoolExecutor(max_workers=workers) as pool:
        futures = [pool.submit(one, r0) for r0 in starts]
        try:
            for f in futures:
                r1 = f.result()
                if progress is not None:
                    progress(r1 / rows)
        except BaseException:
            for f in futures:
                f.cancel()
            raise
    return out


@dataclass(frozen=True)
class _GridPlan:
    """How a grid is evaluated: the checked coarse spline (``None``: every cell) and the report."""

    spline: object
    report: "GridEvaluation"


@dataclass(frozen=True)
class GridEvaluation:
    """How :meth:`SurfaceModel.evaluate_grid` evaluated a grid.

    Attributes
    ----------
    method : {'coarse', 'full'}
        ``'coarse'``: every ``step_cells``-th cell evaluated, bicubic spline in between;
        ``'full'``: every cell evaluated.
    step_cells : int
    max_checked_error_m : float
        Largest difference between interpolated and fully evaluated values at the check cells
        (0 for ``'full'``).
    n_checked : int
        Number of check cells (cells holding data, random cells, coarse-cell centres).
    max_error_per_se : float
        Largest ratio of that difference to the model's standard error at the check cells, when
        the lattice was accepted by the standard-error bound (``se_fraction``); 0 when every
        check cell was within ``tolerance_m``.
    """

    method: str
    step_cells: int
    max_checked_error_m: float
    n_checked: int
    max_error_per_se: float = 0.0


@dataclass(frozen=True)
class SurfaceModel:
    """A fitted surface ``z(x, y)`` of a contact (the methods: :mod:`strikeline.surfaces.fit` and the
    modules it names).

    Attributes
    ----------
    kind : {'plane', 'trend2', 'spline'}
        The fitted model (for ``model='auto'`` the chosen one; also :attr:`chosen`).
    params : mapping
        Model parameters: ``terms`` and ``coefficients`` in normalised coordinates
        ``u = (x - origin_m[0]) / scale_m``, ``v = (y - origin_m[1]) / scale_m`` (plane,
        trend2); for the spline ``smoothing`` (λ of Wahba's criterion in those coordinates),
        ``edf`` (equivalent degrees of freedom ``tr A(λ)``), ``gcv_score_m2``, ``sigma_m``
        (noise estimate), ``n_nodes``; the trend plane's ``dip_deg``/``dip_direction_deg``.
    cv_rmse_m, cv_se_m : mapping of str to float
        Cross-validation RMSE and its standard error per model tried (``nan`` if it failed).
    cv_skipped : mapping of str to str
        Why a model has no score.
    cv_distance_m : float
        Median distance from held-out picks to the data that predicted them (chosen model).
    selection : str
        ``'auto/one_se'``, ``'auto/min'`` or ``'fixed'``.
    n_picks, n_used : int
        Picks given (finite) and representatives used after thinning.
    thin_cell_m : float or None
        Thinning cell size (``None``: not thinned).
    reach_m, taper_m : float
        Extrapolation distance (the module docstring) and taper length
        (:mod:`strikeline.surfaces.fitted`).
    n_folds : int
        Folds used (0: no cross-validation).
    """

    kind: str
    params: Mapping
    cv_rmse_m: Mapping
    cv_se_m: Mapping
    cv_skipped: Mapping
    cv_distance_m: float
    selection: str
    n_picks: int
    n_used: int
    thin_cell_m: float | None
    reach_m: float
    taper_m: float
    n_folds: int
    _surface: _Surface = field(repr=False, compare=False)
    choice: ModelChoice | None = None
    growth: ErrorGrowth | None = None
    block_m: float | None = None
    check_block_m: float | None = None
    check_kind: str | None = None
    check_reason: str | None = None
    stated_sigma_m: float | None = None
    n_groups: int = 0
    _holdout: object = field(default=None, repr=False, compare=False)
    _grid_plans: dict = field(default_factory=dict, init=False, repr=False, compare=False)
    _prepared: dict = field(default_factory=dict, init=False, repr=False, compare=False)

    @property
    def data_xy(self) -> np.ndarray:
        """Positions ``(m, 2)`` of the data the model used: thinned picks, boreholes, dips."""
        return self._surface.data_xy.copy()

    @property
    def chosen(self) -> str:
        """The fitted model kind (same as :attr:`kind`)."""
        return self.kind

    # -- point queries -----------------------------------------------------------------------
    @staticmethod
    def _xy(x, y):
        x, y = np.broadcast_arrays(np.asarray(x, float), np.asarray(y, float))
        return x.shape, x.ravel(), y.ravel()

    def evaluate(self, x, y):
        """Elevation ``z`` (metres) of the surface at map points (broadcast ``x, y``)."""
        shape, x, y = self._xy(x, y)
        return self._surface.value(x, y).reshape(shape)

    def gradient(self, x, y):
        """Gradient ``(dz/dx, dz/dy)`` (m/m) at map points."""
        shape, x, y = self._xy(x, y)
        gx, gy = self._surface.gradient(x, y)
        return gx.reshape(shape), gy.reshape(shape)

    def dip(self, x, y):
        """Local ``(dip_direction_deg, dip_deg)`` of the surface at map points.

        Dip is ``atan(|∇z|)``; dip direction the azimuth of ``−∇z`` (clockwise from grid
        north; 0 where the surface is level).
        """
        gx, gy = self.gradient(x, y)
        dip = np.degrees(np.arctan(np.hypot(gx, gy)))
        dd = np.mod(np.degrees(np.arctan2(-gx, -gy)), 360.0)
        return np.where(np.hypot(gx, gy) > 0, dd, 0.0), dip

    def standard_error(self, x, y):
        """Standard error (metres) of the surface at map points (:mod:`strikeline.surfaces.fitted`)."""
        shape, x, y = self._xy(x, y)
        return self._surface.standard_error(x, y).reshape(shape)

    def distance_to_data(self, x, y):
        """Distance (metres) to the nearest datum used (thinned picks, boreholes, dips)."""
        return distance_to_data(x, y, self._surface.tree)

    def is_extrapolated(self, x, y):
        """``True`` where the nearest datum is farther than :attr:`reach_m`.

        The KD-tree search is bounded just beyond the reach (a point with no datum within the
        bound is extrapolated without finding its nearest datum, much the most of the work far
        from the data); a point within the bound gets the same distance as
        :meth:`distance_to_data`, so the flags are those of ``distance_to_data(x, y) > reach_m``.
        Most points are settled without a search by a coarse lattice of distances made on first
        use (:class:`strikeline.surfaces.reach.ReachLattice`; the same flags).
        """
        reach = float(self.reach_m)
        if not np.isfinite(reach):
            return self.distance_to_data(x, y) > reach
        tree = self._surface.tree
        if not reach > 0 or np.broadcast(np.asarray(x), np.asarray(y)).size < _LATTICE_POINTS:
            return beyond_reach(tree, reach, x, y)
        return ReachLattice.of(self._prepared, tree, reach)(x, y)

    def hull_distance(self, x, y):
        """Distance (metres) outside the convex hull of the data (0 inside)."""
        shape, x, y = self._xy(x, y)
        return self._surface.hull.distance(x, y).reshape(shape)

    def holdout_prediction(self, x, y):
        """The surface at map points as predicted WITHOUT the picks near them.

        Each point takes the model refitted without a square block of picks around it (side
        ``check_block_m``; two shifted checkerboards of blocks, the point taking the one it
        lies deepest inside; robust refits for plane and trend2, see
        :func:`~strikeline.surfaces.polynomial._fit_poly_robust`), so a contact compared with
        it is compared with a forecast it did not shape. Returns ``(z_m, se_m, dz_dx,
        dz_dy)``: elevation, the forecast's own standard error WITHOUT pick noise (parameter
        uncertainty and growth with distance from the training data; add the error of whatever
        it is compared with) and the gradient. Without cross-validation, the fitted model
        itself.
        """
        shape, x, y = self._xy(x, y)
        if self._holdout is None:
            gx, gy = self._surface.gradient(x, y)
            out = (self._surface.value(x, y), self._surface.check_se(x, y), gx, gy)
        else:
            out = self._holdout.predict(x, y)
        return tuple(np.asarray(a).reshape(shape) for a in out)

    def borehole_misfit_m(self):
        """Model minus borehole elevation at each borehole (metres), in input order."""
        b = self.params["_boreholes"]
        if len(b) == 0:
            return np.empty(0)
        return self.evaluate(b[:, 0], b[:, 1]) - b[:, 2]

    # -- grids -------------------------------------------------------------------------------
    def evaluate_grid(self, grid: Grid, *, tolerance_m: float = GRID_TOLERANCE_M,
                      se_fraction: float = GRID_SE_FRACTION, initial_step: int | None = None, return_report: bool = False,
                      seed: int = 0, window=None, workers: int | None = None,
                      progress: Callable | None = None, is_cancelled: Callable | None = None):
        """The surface at every cell centre of a grid (or of a window of it).

        The plane is evaluated at every cell. The other models are evaluated on a coarse
        lattice of every ``step``-th cell (the last row and column included) and interpolated
        with a bicubic interpolating spline (:class:`scipy.interpolate.RectBivariateSpline`);
        the result is accepted when, at check cells (up to 2,048 cells holding data, 2,048
        random cells and 2,048 centres of coarse cells, the worst places for interpolation),
        it differs from full evaluation by less than ``tolerance_m`` or by at most
        ``se_fraction`` times the model's standard error at that cell; otherwise the step is
        halved, down to full evaluation. The check samples the grid, so it bounds the error
        there, not at every cell.

        The standard-error bound matters where the spline nearly interpolates its picks: each
        pick's kernel ``r² log r`` then carries a large weight, and its logarithmic curvature at
        the pick is what a bicubic spline cannot follow within a few centimetres (0.23 m at a
        50 m lattice on an invented fold sheet of 25 m cells, its standard error there 3.3 m or
        more); without the bound the step halves to full evaluation, a kernel sum per cell.

        Parameters
        ----------
        grid : Grid
        tolerance_m : float, default 0.1
        se_fraction : float, default 0.1
            ``0``: the tolerance alone.
        initial_step : int, optional
            First coarse step in cells; default ``ceil(max(rows, cols) / 128)``.
        return_report : bool, default False
            Also return a :class:`GridEvaluation`.
        seed : int, default 0
            Seed for the random check cells.
        window : tuple of 4 int, optional
            ``(row0, row1, col0, col1)``: only these rows and columns of ``grid``. The lattice,
            the check and the spline are those of the whole grid (made once per grid and kept
            with the model), and each cell's value depends on that cell only, so a window holds
            exactly the values of the same cells of the whole grid's call (a grid made for the
            window alone would have its own lattice and cell-centre rounding). Where every cell is
            evaluated, a spline's kernel sum is reduced point by point for the same reason.
        workers : int, optional
            Threads over blocks of rows where every cell is evaluated (default: the CPUs, at
            most 4); the values do not depend on it.
        progress, is_cancelled : callable, optional

        Returns
        -------
        ndarray, shape ``grid.shape`` (or of the window), float64 (and a GridEvaluation if asked).
        """
        if not float(tolerance_m) > 0:
            raise InputError(f"tolerance_m must be positive, got {tolerance_m}")
        if not float(se_fraction) >= 0:
            raise InputError(f"se_fraction must be 0 or more, got {se_fraction}")
        r0, r1, c0, c1 = _window(grid, window)
        plan = self._grid_plan(grid, float(tolerance_m), initial_step, seed, progress, is_cancelled,
                               se_fraction=float(se_fraction))
        if plan.spline is not None:
            z = plan.spline(np.arange(r0, r1), np.arange(c0, c1))
        else:
            xs, ys = grid.cell_centres()

            def values(x, y):
                X, Y = np.meshgrid(x, y)
                return self._surface.value(X.ravel(), Y.ravel(), by_point=True).reshape(X.shape)
            z = _by_rows(values, xs[c0:c1], ys[r0:r1], cells_per_chunk=1 << 18, what="grid evaluation",
                         workers=_grid_workers(workers) if self.kind == "plane" else 1,
                         progress=progress, is_cancelled=is_cancelled)
        if progress is not None:
            progress(1.0)
        return (z, plan.report) if return_report else z

    def _grid_plan(self, grid: Grid, tolerance_m, initial_step, seed, progress, is_cancelled, *,
                   se_fraction=GRID_SE_FRACTION) -> _GridPlan:
        """The coarse lattice's checked spline for ``grid`` (or full evaluation), made once per
        grid and options."""
        key = (grid.transform, grid.shape, tolerance_m, se_fraction, initial_step, seed)
        plan = self._grid_plans.get(key)
        if plan is not None:
            return plan
        rows, cols = grid.shape
        xs, ys = grid.cell_centres()
        step = initial_step or int(np.ceil(max(rows, cols) / 128))
        if self.kind == "plane":
            step = 1
        rng = np.random.default_rng(seed)
        plan = _GridPlan(None, GridEvaluation("full", 1, 0.0, 0))
        while step > 1:
            _check_cancel(is_cancelled, "grid evaluation")
            ri = np.unique(np.append(np.arange(0, rows, step), rows - 1))
            ci = np.unique(np.append(np.arange(0, cols, step), cols - 1))
            if len(ri) < 4 or len(ci) < 4:
                break
            X, Y = np.meshgrid(xs[ci], ys[ri])
            zc = self.evaluate(X, Y)
            spl = RectBivariateSpline(ri, ci, zc, kx=3, ky=3, s=0)
            cr, cc = self._check_cells(grid, ri, ci, rng)
            err = np.abs(spl.ev(cr, cc) - self.evaluate(xs[cc], ys[cr]))
            emax = float(err.max()) if len(err) else 0.0
            if progress is not None:
                progress(0.5)
            if emax < tolerance_m:
                plan = _GridPlan(spl, GridEvaluation("coarse", int(step), emax, int(len(err))))
                break
            if se_fraction > 0:
                se = self.standard_error(xs[cc], ys[cr])
                over = err >= tolerance_m  # only these need the standard-error bound
                if np.all(err[over] <= se_fraction * se[over]):
                    ratio = float(np.max(err[over] / se[over]))
                    plan = _GridPlan(spl, GridEvaluation("coarse", int(step), emax, int(len(err)), ratio))
                    break
            step //= 2
        if len(self._grid_plans) >= 4:
            self._grid_plans.clear()
        self._grid_plans[key] = plan
        return plan

    def _check_cells(self, grid, ri, ci, rng, n_each=2048):
        rows, cols = grid.shape
        xy = self._surface.data_xy
        c, r = grid.xy_to_colrow(xy[:, 0], xy[:, 1])
        c, r = np.rint(c).astype(np.int64), np.rint(r).astype(np.int64)
        ok = (c >= 0) & (c < cols) & (r >= 0) & (r < rows)
        c, r = c[ok], r[ok]
        if len(c) > n_each:
            k = rng.choice(len(c), n_each, replace=False)
            c, r = c[k], r[k]
        rr = rng.integers(0, rows, n_each)
        rc = rng.integers(0, cols, n_each)
        mr = (ri[:-1] + ri[1:]) // 2
        mc = (ci[:-1] + ci[1:]) // 2
        mr = mr[rng.integers(0, len(mr), n_each)]
        mc = mc[rng.integers(0, len(mc), n_each)]
        return np.concatenate([r, rr, mr]), np.concatenate([c, rc, mc])

    def standard_error_grid(self, grid: Grid, *, window=None, workers: int | None = None, progress=None,
                            is_cancelled=None):
        """:meth:`standard_error` at every cell centre of a grid (float64, ``grid.shape``), or of
        a window ``(row0, row1, col0, col1)`` of it (the same values as those cells of the whole
        grid's call).

        Blocks of rows in ``workers`` threads (default: the CPUs, at most 4). The distance to the
        nearest datum comes from :func:`strikeline.surfaces.hull.distance_grid` (row by row, the
        values of a KD-tree search per cell, several times faster), the rest is the formula of
        :meth:`standard_error` cell by cell.
        """
        r0, r1, c0, c1 = _window(grid, window)
        xs, ys = grid.cell_centres()
        s = self._surface

        rows_distance = None
        if s.needs_distance():
            # the data's Voronoi extents, made once per model (a grid in blocks asks many times);
            # two threads racing here build the same object twice, harmlessly
            rows_distance = self._prepared.get("row_distance")
            if rows_distance is None:
                rows_distance = self._prepared["row_distance"] = RowDistance(s.tree.data, tree=s.tree)

        def formula(x, y, d):
            # the cells' columns as a row and rows as a column: the formula's parts that depend
            # on one coordinate only are computed once per row or column (the same values)
            out = s.standard_error(x[None, :], y[:, None], distance=d)
            return np.broadcast_to(out, (len(y), len(x)))

        sub = max(1, _SE_CELLS // max(c1 - c0, 1))  # rows of one evaluation of the formula

        def block(x, y):
            # the distances of the whole block in one call: the rows' envelopes are built
            # _ENVELOPE_ROWS at a time, and building them for a few rows costs nearly as much
            d = rows_distance(x, y) if rows_distance is not None else None
            out = np.empty((len(y), len(x)))
            for i in range(0, len(y), sub):
                out[i:i + sub] = formula(x, y[i:i + sub], None if d is None else d[i:i + sub])
            return out

        chunk = _ENVELOPE_ROWS * (c1 - c0) if rows_distance is not None else _SE_CELLS
        return _by_rows(block, xs[c0:c1], ys[r0:r1], cells_per_chunk=chunk, what="standard error grid",
                        workers=_grid_workers(workers), progress=progress, is_cancelled=is_cancelled)

    def summary(self) -> dict:
        """A JSON-ready description: ``{"chosen": ..., "cv_rmse_m": {...}, ...}``."""
        def num(v):
            return None if v is None or not np.isfinite(v) else float(v)
        public = {k: v for k, v in self.params.items() if not k.startswith("_")}
        for k, v in public.items():
            if isinstance(v, np.ndarray):
                public[k] = v.tolist()
            elif isinstance(v, (np.floating, float)):
                public[k] = num(v)
        return {
            "chosen": self.kind,
            "cv_rmse_m": {k: num(v) for k, v in self.cv_rmse_m.items()},
            "cv_se_m": {k: num(v) for k, v in self.cv_se_m.items()},
            "cv_skipped": dict(self.cv_skipped),
            "cv_distance_m": num(self.cv_distance_m),
            "selection": self.selection,
            "choice": None if self.choice is None else self.choice.summary(),
            "holdout_block_m": num(self.block_m),
            "check_block_m": num(self.check_block_m),
            "check_model": self.check_kind,
            "check_model_reason": self.check_reason,
            "n_groups": self.n_groups,
            "stated_pick_error_m": num(self.stated_sigma_m),
            "error_growth": None if self.growth is None else self.growth.summary(),
            "n_folds": self.n_folds,
            "n_picks": self.n_picks,
            "n_used": self.n_used,
            "thin_cell_m": num(self.thin_cell_m),
            "reach_m": num(self.reach_m),
            "taper_m": num(self.taper_m),
            "params": public,
        }
