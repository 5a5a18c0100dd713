"""Picks and constraints prepared for fitting (:class:`_Data`, made by :func:`_prepare`).

Coordinates are centred on the mean position of all data and divided by their RMS distance from
it (``u = (x - x₀)/L``, ``v = (y - y₀)/L``) for conditioning; results do not depend on it.

Boreholes ``(x, y, z[, sigma_m])``
    Elevations of the surface with their standard error (``0``: exact).
Dip measurements ``(x, y, dip_deg, dip_direction_deg[, sigma_deg])``
    A measurement states the gradient ``∇z = −tan(dip)·(sin dd, cos dd)``, with standard error
    ``σ_g = σ_rad / cos²(dip)`` per component (the derivative of ``tan``; it bounds the error
    from the dip direction, ``tan(dip)·σ_rad``, too). Every model observes it as the slopes
    east and north over the measurement's footprint ``p ± h·e`` (``h =
    orientation_footprint_m``, default half the median spacing of the picks). Dips steeper than
    ``MAX_DIP_DEG`` are refused: a height field cannot follow them.
Bounds ``(x, y, lo, hi)``
    Inequalities ``lo <= z(x, y) <= hi``, e.g. from the map's unit polygons
    (:mod:`strikeline.surfaces.units`).

Constraints are never held out in cross-validation; bounds are not data either (they widen
neither the hull nor the reach).
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy.spatial import cKDTree

from strikeline.errors import InputError


#: Default standard error of a dip measurement: a typical compass-clinometer repeatability.
DEFAULT_ORIENTATION_SIGMA_DEG = 5.0
#: Default standard error of a borehole's surface elevation (metres): a collar levelled by GNSS or
#: read off a DEM and a logged depth to the contact are good to about a metre (common practice).
#: The same default in the library, the command line and the QGIS tools; give 0 for an exact one.
DEFAULT_BOREHOLE_SIGMA_M = 1.0
#: Steepest dip a height field z(x, y) can follow; steeper measurements are refused.
MAX_DIP_DEG = 89.0


@dataclass(frozen=True)
class _Data:
    """Picks and constraints in normalised coordinates (internal)."""

    p_xy: np.ndarray      # (n, 2) metres
    p_z: np.ndarray       # (n,)
    b_xy: np.ndarray      # (nb, 2)
    b_z: np.ndarray
    b_sig: np.ndarray     # metres, >= 0
    o_xy: np.ndarray      # (no, 2)
    o_g: np.ndarray       # (no, 2) gradient dz/dx, dz/dy (m/m)
    o_sig: np.ndarray     # (no,) slope standard error (m/m)
    origin: np.ndarray    # (2,)
    scale: float          # metres
    footprint_m: float
    pick_sigma_m: float | None
    # Inequalities lo <= z(x, y) <= hi (unit polygons of the map; strikeline.surfaces.units); like
    # boreholes never held out, but not data: they widen neither the hull nor the reach.
    c_xy: np.ndarray = field(default_factory=lambda: np.empty((0, 2)))
    c_lo: np.ndarray = field(default_factory=lambda: np.empty(0))
    c_hi: np.ndarray = field(default_factory=lambda: np.empty(0))
    # Rows of these picks among those of the data they were taken from by :meth:`picks` (``None``:
    # they are those picks), which the spline's pick systems slice their kernel by
    # (strikeline.surfaces.reduced.PickSystems).
    rows: np.ndarray | None = None

    def u(self, xy):
        return (np.asarray(xy, float) - self.origin) / self.scale

    def all_xy(self):
        return np.vstack([self.p_xy, self.b_xy, self.o_xy])

    def fixed_xy(self):
        return np.vstack([self.b_xy, self.o_xy])

    def picks(self, index):
        return _Data(self.p_xy[index], self.p_z[index], self.b_xy, self.b_z, self.b_sig,
                     self.o_xy, self.o_g, self.o_sig, self.origin, self.scale, self.footprint_m,
                     self.pick_sigma_m, self.c_xy, self.c_lo, self.c_hi, self.pick_rows(index))

    def pick_rows(self, index):
        """Rows of the picks ``index`` (a boolean mask or indices) among those of the data these
        were taken from (:attr:`rows`)."""
        return np.arange(self.n)[index] if self.rows is None else self.rows[index]

    @property
    def n_bounds(self):
        return len(self.c_lo)

    @property
    def n(self):
        return len(self.p_z)

    @property
    def has_constraints(self):
        return len(self.b_z) > 0 or len(self.o_sig) > 0 or self.n_bounds > 0


def _as_table(value, name, columns, optional_last):
    a = np.asarray(value, dtype=float)
    if a.ndim == 1 and a.size in (columns, columns + 1):
        a = a[None, :]
    ok = a.ndim == 2 and (a.shape[1] == columns or (optional_last and a.shape[1] == columns + 1))
    if not ok:
        raise InputError(f"{name} must be an (n, {columns}) array" +
                         (f" or (n, {columns + 1}) with a last column of standard errors"
                          if optional_last else "") + f"; got shape {a.shape}")
    if not np.all(np.isfinite(a)):
        raise InputError(f"{name} contains non-finite values; remove or fill those rows")
    return a


def _per_row(value, n, name):
    v = np.broadcast_to(np.asarray(value, dtype=float), (n,)).astype(float)
    if not np.all(np.isfinite(v)) or np.any(v < 0):
        raise InputError(f"{name} must be finite and >= 0, got {value!r}")
    return v


def _bounds_table(bounds):
    """``bounds`` as ``(x, y, lo, hi)`` columns: finite positions, lo <= hi, rows with both
    sides infinite dropped."""
    if bounds is None or np.size(bounds) == 0:
        return np.empty((0, 2)), np.empty(0), np.empty(0)
    a = np.asarray(bounds, dtype=float)
    if a.ndim == 1 and a.size == 4:
        a = a[None, :]
    if a.ndim != 2 or a.shape[1] != 4:
        raise InputError(f"bounds must be an (m, 4) array of x, y, lo, hi; got shape {a.shape}")
    if not np.all(np.isfinite(a[:, :2])) or np.any(np.isnan(a[:, 2:])):
        raise InputError("bounds contain non-finite positions or NaN limits; use -inf / +inf for "
                         "an open side and remove the other rows")
    if np.any(a[:, 2] > a[:, 3]):
        k = int(np.flatnonzero(a[:, 2] > a[:, 3])[0])
        raise InputError(f"bounds row {k} has lo {a[k, 2]} above hi {a[k, 3]}; give lo <= hi")
    a = a[np.isfinite(a[:, 2]) | np.isfinite(a[:, 3])]
    return a[:, :2].copy(), a[:, 2].copy(), a[:, 3].copy()


def _prepare(picks_xyz, boreholes, borehole_sigma_m, orientations, orientation_sigma_deg,
             footprint_m, pick_sigma_m, bounds=None) -> _Data:
    p = np.asarray(picks_xyz, float)
    c_xy, c_lo, c_hi = _bounds_table(bounds)
    if boreholes is None or np.size(boreholes) == 0:
        bh = np.empty((0, 4))
    else:
        t = _as_table(boreholes, "boreholes (x, y, z[, sigma_m])", 3, True)
        sig = t[:, 3] if t.shape[1] == 4 else _per_row(borehole_sigma_m, len(t),
                                                      "borehole_sigma_m")
        if np.any(sig < 0):
            raise InputError("borehole standard errors (sigma_m) must be >= 0")
        bh = np.column_stack([t[:, :3], sig])
    if orientations is None or np.size(orientations) == 0:
        ori = np.empty((0, 5))
    else:
        t = _as_table(orientations, "orientations (x, y, dip_deg, dip_direction_deg"
                      "[, sigma_deg])", 4, True)
        sig = t[:, 4] if t.shape[1] == 5 else _per_row(orientation_sigma_deg, len(t),
                                                      "orientation_sigma_deg")
        if np.any(sig < 0):
            raise InputError("orientation standard errors (sigma_deg) must be >= 0")
        dip = t[:, 2]
        bad = (dip < 0) | (dip > MAX_DIP_DEG)
        if np.any(bad):
            raise InputError(
                f"orientation dip_deg must lie between 0 and {MAX_DIP_DEG} degrees for a "
                f"surface z(x, y); got {dip[bad][0]}; leave out vertical measurements or "
                "model that contact by its trace")
        ori = np.column_stack([t[:, :4], sig])
    all_xy = np.vstack([p[:, :2], bh[:, :2], ori[:, :2]])
    origin = all_xy.mean(axis=0)
    scale = float(np.sqrt(np.mean(np.sum((all_xy - origin) ** 2, axis=1))))
    if not scale > 0:
        scale = 1.0
    dip_r = np.radians(ori[:, 2])
    dd_r = np.radians(ori[:, 3])
    grad = -np.tan(dip_r)[:, None] * np.column_stack([np.sin(dd_r), np.cos(dd_r)])
    o_sig = np.radians(ori[:, 4]) / np.cos(dip_r) ** 2
    if footprint_m is None:
        if len(p) >= 2:
            nn = cKDTree(p[:, :2]).query(p[:, :2], k=2)[0][:, 1]
            nn = nn[nn > 0]
            footprint_m = 0.5 * float(np.median(nn)) if len(nn) else 1e-3 * scale
        else:
            footprint_m = 1e-3 * scale
    elif not float(footprint_m) > 0:
        raise InputError(f"orientation_footprint_m must be a positive length in metres, got "
                         f"{footprint_m}")
    if pick_sigma_m is not None and not float(pick_sigma_m) > 0:
        raise InputError(f"pick_sigma_m must be a positive standard error in metres, got "
                         f"{pick_sigma_m}")
    return _Data(p[:, :2].copy(), p[:, 2].copy(), bh[:, :2].copy(), bh[:, 2].copy(),
                 bh[:, 3].copy(), ori[:, :2].copy(), grad, o_sig, origin, scale,
                 float(footprint_m), None if pick_sigma_m is None else float(pick_sigma_m),
                 c_xy, c_lo, c_hi)
