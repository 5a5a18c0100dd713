"""Thickness measurement by measurement (``strikeline.pipeline.thickness``): textbook cases."""
from __future__ import annotations

import math

import numpy as np
import pytest
import shapely

from strikeline.errors import InputError
from strikeline.geometry.grid import Grid
from strikeline.pipeline.thickness import (
    line_ends,
    thickness_of_boreholes,
    thickness_of_lines,
    thickness_of_widths,
)

DIP_DEG = 30.0
DIP_DIRECTION_DEG = 90.0  # the unit dips east
TOL_M = 1e-9  # common practice: closed-form relations evaluated in double precision


def test_lines_with_z_project_on_the_pole():
    # A line from the top contact 100 m down-dip (east) at one elevation, and one 40 m straight down.
    lines = np.array([shapely.LineString([(0, 0, 100), (50, 0, 100), (100, 0, 100)]),
                      shapely.LineString([(0, 0, 100), (0, 0, 60)])], dtype=object)
    got = thickness_of_lines(lines, dip_deg=DIP_DEG, dip_direction_deg=DIP_DIRECTION_DEG)
    # Source: Ragan 2009, Structural Geology 4th ed., ch. 2 (from memory): the thickness is the
    # top-to-base vector projected on the unit's pole: 100 m horizontal down-dip gives 100 sin(dip),
    # 40 m vertical gives 40 cos(dip); vertical thickness = true / cos(dip).
    want = np.array([100 * math.sin(math.radians(DIP_DEG)), 40 * math.cos(math.radians(DIP_DEG))])
    np.testing.assert_allclose(got.true_m, want, atol=TOL_M)
    np.testing.assert_allclose(got.vertical_m, want / math.cos(math.radians(DIP_DEG)), atol=TOL_M)
    assert (got.n_measured, got.n_missing) == (2, 0)
    assert got.median_m == pytest.approx(np.median(want), abs=TOL_M)


def test_lines_on_a_dem_and_a_line_end_off_it():
    # A level DEM at 250 m, 10 m cells over 0..200 m x 0..100 m.
    grid = Grid((0.0, 10.0, 0.0, 100.0, 0.0, -10.0), (10, 20))
    dem = np.full(grid.shape, 250.0)
    lines = np.array([shapely.LineString([(20, 50), (120, 50)]), shapely.LineString([(20, 50), (500, 50)])],
                     dtype=object)
    got = thickness_of_lines(lines, dip_deg=DIP_DEG, dip_direction_deg=DIP_DIRECTION_DEG, dem=dem, dem_grid=grid)
    # Source: as above, 100 m down-dip on level ground gives 100 sin(dip) (Ragan 2009).
    assert got.true_m[0] == pytest.approx(100 * math.sin(math.radians(DIP_DEG)), abs=TOL_M)
    assert math.isnan(got.true_m[1]) and math.isnan(got.vertical_m[1])
    assert (got.n_measured, got.n_missing) == (1, 1)
    top, base = line_ends(lines, dem=dem, dem_grid=grid)
    np.testing.assert_array_equal(top, [[20, 50, 250], [20, 50, 250]])
    assert base[0].tolist() == [120, 50, 250] and math.isnan(base[1, 2])


def test_lines_without_z_and_without_a_dem_are_refused():
    with pytest.raises(InputError, match="measurement lines has lines without Z; give the DEM"):
        thickness_of_lines(np.array([shapely.LineString([(0, 0), (1, 1)])], dtype=object), dip_deg=DIP_DEG,
                           dip_direction_deg=DIP_DIRECTION_DEG, what="measurement lines")


def test_outcrop_widths():
    width = np.array([100.0, 100.0, np.nan, 100.0])
    slope = np.array([0.0, 10.0, 5.0, 0.0])
    got = thickness_of_widths(width, dip_deg=DIP_DEG, ground_slope_deg=slope, slope_sense="against_dip")
    # Source: Rowland et al. 2007, Structural Analysis and Synthesis 3rd ed. (from memory):
    # t = w sin(dip + slope) for a slope width on ground sloping against the dip; level: w sin(dip).
    s30, s40 = math.sin(math.radians(30.0)), math.sin(math.radians(40.0))
    np.testing.assert_allclose(got.true_m[[0, 1, 3]], [100 * s30, 100 * s40, 100 * s30], atol=TOL_M)
    assert math.isnan(got.true_m[2]) and got.n_missing == 1 and got.n_parallel == 0


def test_a_level_bed_on_level_ground_gives_no_thickness():
    got = thickness_of_widths(np.array([80.0, 80.0]), dip_deg=0.0)
    # common practice: a horizontal bed on level ground has an outcrop width set by the ground's
    # extent, not by the bed's thickness.
    assert got.n_parallel == 2 and got.n_measured == 0 and math.isnan(got.median_m)


def test_boreholes():
    length = np.array([100.0, 100.0, np.nan])
    azimuth = np.array([0.0, DIP_DIRECTION_DEG + 180.0, 0.0])
    plunge = np.array([90.0, 90.0 - DIP_DEG, 90.0])
    got = thickness_of_boreholes(length, azimuth, plunge, dip_deg=DIP_DEG, dip_direction_deg=DIP_DIRECTION_DEG)
    # Source: Ragan 2009 (from memory): a vertical hole drills L = t / cos(dip); a hole along the
    # pole (plunging 90 - dip opposite the dip direction) drills the true thickness.
    np.testing.assert_allclose(got.true_m[:2], [100 * math.cos(math.radians(DIP_DEG)), 100.0], atol=1e-9)
    assert got.vertical_m[0] == pytest.approx(100.0, abs=1e-9)
    assert got.n_missing == 1


def test_isopachs_of_two_parallel_planes():
    from strikeline.pipeline.thickness import isopachs

    grid = Grid((0.0, 10.0, 0.0, 500.0, 0.0, -10.0), (50, 50))
    X, Y = grid.mesh()
    base = 300.0 - math.tan(math.radians(DIP_DEG)) * X  # dips east
    top = base + 40.0
    top[0, 0] = base[0, 0] - 1.0  # one cell where the surfaces cross
    got = isopachs(top, base, grid, interval_m=10.0)
    # Source: Ragan 2009 (from memory): between parallel planes the vertical thickness is their
    # separation (40 m) and the true thickness 40 cos(dip).
    inner = np.s_[2:-2, 2:-2]
    np.testing.assert_allclose(got.vertical_m[inner], 40.0, atol=1e-9)
    np.testing.assert_allclose(got.true_m[inner], 40.0 * math.cos(math.radians(DIP_DEG)), atol=1e-6)
    assert got.n_negative == 1
    assert got.median_true_m == pytest.approx(40.0 * math.cos(math.radians(DIP_DEG)), abs=1e-6)
    # Isopach lines every 10 m of true thickness: a constant 34.64 m gives none but near the
    # crossing cell, and all lie at multiples of 10 m.
    assert np.all(np.mod(got.levels_m, 10.0) == 0.0) and len(got.lines) == len(got.levels_m)
    assert len(isopachs(top, base, grid).lines) == 0
