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

from dataclasses import dataclass, field
from typing import Callable, Mapping

import numpy as np
from scipy.interpolate import RectBivariateSpline

from strikeline.errors import CancelledError, InputError
from strikeline.geometry.grid import Grid
from strikeline.stats import ErrorGrowth, ModelChoice
from strikeline.surfaces.fitted import _Surface
from strikeline.surfaces.hull import distance_to_data


#: Default error allowed between coarse-grid interpolation and full evaluation.
GRID_TOLERANCE_M = 0.1


def _check_cancel(is_cancelled, what):
    if is_cancelled is not None and is_cancelled():
        raise CancelledError(f"{what} was cancelled")


def _evaluate_by_rows(fn, grid: Grid, *, cells_per_chunk: int, what: str, progress=None,
                      is_cancelled=None) -> np.ndarray:
    """``fn(X, Y)`` at every cell centre of ``grid``, a block of rows at a time (bounded memory)."""
    rows, cols = grid.shape
    xs, ys = grid.cell_centres()
    out = np.empty((rows, cols))
    chunk = max(1, cells_per_chunk // max(cols, 1))
    for r0 in range(0, rows, chunk):
        _check_cancel(is_cancelled, what)
        r1 = min(rows, r0 + chunk)
        X, Y = np.meshgrid(xs, ys[r0:r1])
        out[r0:r1] = fn(X, Y)
        if progress is not None:
            progress(r1 / rows)
    return out


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
    """

    method: str
    step_cells: int
    max_checked_error_m: float
    n_checked: int


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
        """``True`` where the nearest datum is farther than :attr:`reach_m`."""
        return self.distance_to_data(x, y) > self.reach_m

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
                      initial_step: int | None = None, return_report: bool = False,
                      seed: int = 0, progress: Callable | None = None,
                      is_cancelled: Callable | None = None):
        """The surface at every cell centre of a grid.

        The plane is evaluated at every cell. The other models are evaluated on a coarse
        lattice of every ``step``-th cell (the last row and column included) and interpolated
        with a bicubic interpolating spline (:class:`scipy.interpolate.RectBivariateSpline`);
        the result is accepted when, at check cells (up to 2,048 cells holding data, 2,048
        random cells and 2,048 centres of coarse cells, the worst places for interpolation),
        it differs from full evaluation by less than ``tolerance_m``; otherwise the step is
        halved, down to full evaluation. The check samples the grid, so it bounds the error
        there, not at every cell.

        Parameters
        ----------
        grid : Grid
        tolerance_m : float, default 0.1
        initial_step : int, optional
            First coarse step in cells; default ``ceil(max(rows, cols) / 128)``.
        return_report : bool, default False
            Also return a :class:`GridEvaluation`.
        seed : int, default 0
            Seed for the random check cells.
        progress, is_cancelled : callable, optional

        Returns
        -------
        ndarray, shape ``grid.shape``, float64 (and a GridEvaluation if asked).
        """
        if not float(tolerance_m) > 0:
            raise InputError(f"tolerance_m must be positive, got {tolerance_m}")
        rows, cols = grid.shape
        xs, ys = grid.cell_centres()
        report = None
        step = initial_step or int(np.ceil(max(rows, cols) / 128))
        if self.kind == "plane":
            step = 1
        rng = np.random.default_rng(seed)
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
                z = spl(np.arange(rows), np.arange(cols))
                report = GridEvaluation("coarse", int(step), emax, int(len(err)))
                break
            step //= 2
        if report is None:
            z = _evaluate_by_rows(self.evaluate, grid, cells_per_chunk=1 << 18, what="grid evaluation",
                                  progress=progress, is_cancelled=is_cancelled)
            report = GridEvaluation("full", 1, 0.0, 0)
        if progress is not None:
            progress(1.0)
        return (z, report) if return_report else z

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

    def standard_error_grid(self, grid: Grid, *, progress=None, is_cancelled=None):
        """:meth:`standard_error` at every cell centre of a grid (float64, ``grid.shape``)."""
        return _evaluate_by_rows(self.standard_error, grid, cells_per_chunk=1 << 20,
                                 what="standard error grid", progress=progress, is_cancelled=is_cancelled)

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
