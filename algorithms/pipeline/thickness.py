"""Thickness of a planar unit, measurement by measurement: a layer's features in, one true and one
vertical thickness per feature out (the QGIS unit-thickness tool's step).

Three kinds of measurement, each with the relation of :mod:`strikeline.maps.thickness`: a line
from a point on the top contact to a point on the base (its first and last vertex, elevations from
the DEM or the line's own Z), an outcrop width with the ground slope, and a borehole's intercept
length with its azimuth and plunge. A feature that lacks a value (a null field, a line end off the
DEM's valid cells) gets no thickness and is counted, as is an outcrop width on ground parallel to
the bedding, which cannot give one.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import shapely

from strikeline.errors import InputError
from strikeline.geometry.grid import Grid
from strikeline.maps.thickness import (
    outcrop_width_gives_thickness,
    thickness_between_points,
    thickness_from_borehole,
    thickness_from_outcrop_width,
    vertical_thickness,
)
from strikeline.picks import sample_bilinear


@dataclass(frozen=True)
class FeatureThickness:
    """True and vertical thickness of every feature (NaN where none could be given)."""

    true_m: np.ndarray
    vertical_m: np.ndarray
    n_missing: int  # features lacking a value: a null field, or a line end off the DEM
    n_parallel: int = 0  # outcrop widths on ground parallel to the bedding (no thickness)

    @property
    def n_measured(self) -> int:
        """Features given a thickness."""
        return int(np.count_nonzero(np.isfinite(self.true_m)))

    @property
    def median_m(self) -> float:
        """Median true thickness over the features given one (NaN if none)."""
        return float(np.nanmedian(self.true_m)) if self.n_measured else float("nan")


def _result(t, ok, dip_deg, n_missing, n_parallel=0) -> FeatureThickness:
    v = np.full_like(t, np.nan)
    v[ok] = vertical_thickness(t[ok], dip_deg)
    return FeatureThickness(t, v, int(n_missing), int(n_parallel))


def line_ends(geoms, *, dem=None, dem_grid: Grid | None = None, what: str = "the lines"):
    """First and last vertex of every line as ``(top, base)``, (n, 3) arrays in metres.

    Elevations are the DEM's, interpolated bilinearly (NaN off its valid cells), or, without a
    DEM, the lines' own Z (every line must have Z then).
    """
    geoms = np.asarray(geoms, dtype=object)
    if dem is None and len(geoms) and not shapely.has_z(geoms).all():
        raise InputError(f"{what} has lines without Z; give the DEM for the line ends")
    coords, owner = shapely.get_coordinates(geoms, include_z=dem is None, return_index=True)
    features = np.arange(len(geoms))
    first = np.searchsorted(owner, features, side="left")
    last = np.searchsorted(owner, features, side="right") - 1
    if dem is not None:
        z = sample_bilinear(dem, dem_grid, coords[:, 0], coords[:, 1])
        coords = np.column_stack([coords[:, :2], z])
    return coords[first], coords[last]


def thickness_of_lines(geoms, *, dip_deg: float, dip_direction_deg: float, dem=None, dem_grid: Grid | None = None,
                       what: str = "the lines") -> FeatureThickness:
    """Thickness from lines drawn from the top contact (first vertex) to the base (last vertex):
    :func:`strikeline.maps.thickness.thickness_between_points` on :func:`line_ends`."""
    top, base = line_ends(geoms, dem=dem, dem_grid=dem_grid, what=what)
    ok = np.isfinite(top).all(axis=1) & np.isfinite(base).all(axis=1)
    t = np.full(len(top), np.nan)
    if ok.any():
        t[ok] = thickness_between_points(top[ok], base[ok], dip_direction_deg, dip_deg)
    return _result(t, ok, dip_deg, (~ok).sum())


def thickness_of_widths(width_m, *, dip_deg: float, ground_slope_deg=None, slope_sense: str | None = None,
                        width_kind: str = "slope") -> FeatureThickness:
    """Thickness from outcrop widths measured perpendicular to strike
    (:func:`strikeline.maps.thickness.thickness_from_outcrop_width`).

    ``ground_slope_deg`` (one per feature; None: level ground) with ``slope_sense``, which is
    ignored when no feature's ground slopes. Widths on ground parallel to the bedding (a
    horizontal bed on level ground, a dip slope) get no thickness and are counted in
    ``n_parallel``.
    """
    width = np.asarray(width_m, dtype=float)
    slope = np.zeros(len(width)) if ground_slope_deg is None else np.asarray(ground_slope_deg, dtype=float)
    ok = np.isfinite(width) & np.isfinite(slope)
    n_missing = int((~ok).sum())
    t = np.full(len(width), np.nan)
    n_parallel = 0
    if ok.any():
        sense = slope_sense if np.any(slope[ok] > 0) else None
        cuts = outcrop_width_gives_thickness(dip_deg, ground_slope_deg=slope[ok], slope_sense=sense)
        n_parallel = int((~cuts).sum())
        ok[np.flatnonzero(ok)[~cuts]] = False
        if ok.any():
            t[ok] = thickness_from_outcrop_width(width[ok], dip_deg, ground_slope_deg=slope[ok], slope_sense=sense,
                                                 width_kind=width_kind)
    return _result(t, ok, dip_deg, n_missing, n_parallel)


def thickness_of_boreholes(length_m, azimuth_deg, plunge_deg, *, dip_deg: float,
                           dip_direction_deg: float) -> FeatureThickness:
    """Thickness from the drilled length of the unit in straight holes of given azimuth and plunge
    (:func:`strikeline.maps.thickness.thickness_from_borehole`)."""
    length, az, plunge = (np.asarray(a, dtype=float) for a in (length_m, azimuth_deg, plunge_deg))
    ok = np.isfinite(length) & np.isfinite(az) & np.isfinite(plunge)
    t = np.full(len(length), np.nan)
    if ok.any():
        t[ok] = thickness_from_borehole(length[ok], az[ok], plunge[ok], dip_direction_deg, dip_deg)
    return _result(t, ok, dip_deg, (~ok).sum())


@dataclass(frozen=True)
class Isopachs:
    """A unit's thickness between its top and base surface grids (:func:`isopachs`)."""

    vertical_m: np.ndarray  # top - base, per cell
    true_m: np.ndarray  # vertical x cos(local dip of the base), per cell
    lines: np.ndarray  # isopach lines of the true thickness (empty without an interval)
    levels_m: np.ndarray  # the true thickness of each line
    n_negative: int  # cells where the top lies below the base (the surfaces cross)

    @property
    def median_true_m(self) -> float | None:
        """Median true thickness over the cells that have one (None if none)."""
        finite = self.true_m[np.isfinite(self.true_m)]
        return float(np.median(finite)) if finite.size else None


def isopachs(top_m, base_m, grid: Grid, *, interval_m: float = 0.0, progress=None,
             is_cancelled=None) -> Isopachs:
    """Vertical and true thickness grids of a unit (:func:`strikeline.maps.thickness.isopach_grids`)
    and, with ``interval_m`` > 0, isopach lines of the true thickness every ``interval_m`` metres
    (GDAL's contour generator, :func:`strikeline.io.contours.contour_lines`). The two surfaces
    must be on one grid (:func:`strikeline.pipeline.rasters.require_same_grid`)."""
    from strikeline.io.contours import contour_lines
    from strikeline.maps.thickness import isopach_grids

    vertical, true = isopach_grids(top_m, base_m, grid, progress=progress, is_cancelled=is_cancelled)
    lines, levels = np.empty(0, dtype=object), np.empty(0)
    if interval_m > 0:
        lines, levels = contour_lines(true, grid, interval_m=interval_m, is_cancelled=is_cancelled)
    return Isopachs(vertical, true, np.asarray(lines, dtype=object), np.asarray(levels, dtype=float),
                    int(np.count_nonzero(vertical < 0)))
