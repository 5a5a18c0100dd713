"""The equal-area lower-hemisphere net against the textbook projection and known poles."""
import numpy as np
import pytest

from strikeline.geometry.orientation import pole_from_dip, vector_from_trend_plunge
from strikeline.report.stereonet import equal_area_xy, great_circle, small_circle


def test_radius_is_the_lambert_azimuthal_equal_area_formula():
    # Source: Snyder 1987, Map Projections - A Working Manual (USGS PP 1395), ch. 24, polar aspect:
    # rho = 2 R sin(45 deg - phi/2); with theta = 90 - phi from the pole and R = 1/sqrt(2), rho = sqrt(2) sin(theta/2)
    theta = np.array([0.0, 10.0, 30.0, 45.0, 60.0, 89.0, 90.0])
    x, y = equal_area_xy(np.full_like(theta, 0.0), 90.0 - theta)
    expected = 2 * (1 / np.sqrt(2)) * np.sin(np.radians(45.0 - (90.0 - theta) / 2))
    np.testing.assert_allclose(np.hypot(x, y), expected, atol=1e-12)
    assert np.hypot(x, y)[-1] == pytest.approx(1.0)  # a horizontal line on the rim


def test_known_pole_dip_30_toward_090():
    # Source: a plane dipping 30 toward 090 has its pole plunging 60 toward 270 (common practice:
    # pole trend = dip direction + 180, plunge = 90 - dip); r = sqrt(2) sin(15 deg) = 0.366025 (Snyder 1987)
    t, p = pole_from_dip(90.0, 30.0)
    assert (float(t), float(p)) == (270.0, 60.0)
    x, y = equal_area_xy(t, p)
    assert float(x) == pytest.approx(-np.sqrt(2) * np.sin(np.radians(15.0)), abs=1e-12)
    assert float(y) == pytest.approx(0.0, abs=1e-12)


@pytest.mark.parametrize("half_deg", [5.0, 30.0, 60.0, 90.0])
def test_equal_areas(half_deg):
    # Source: the area of a spherical cap of half-angle a on the unit sphere is 2 pi (1 - cos a)
    # (Archimedes); on the net of radius 1 (area pi for the hemisphere's 2 pi) it must be pi (1 - cos a)
    x, y = equal_area_xy(0.0, 90.0 - half_deg)
    assert np.pi * float(np.hypot(x, y)) ** 2 == pytest.approx(np.pi * (1 - np.cos(np.radians(half_deg))))


def test_small_circle_lies_at_its_angle_and_in_the_lower_hemisphere():
    t, p = small_circle(200.0, 50.0, 12.0)
    v = vector_from_trend_plunge(t, p)
    axis = vector_from_trend_plunge(200.0, 50.0)
    assert np.all(p >= 0)
    np.testing.assert_allclose(np.degrees(np.arccos(np.clip(v @ axis, -1, 1))), 12.0, atol=1e-9)


def test_small_circle_crossing_the_rim_is_folded_into_the_lower_hemisphere():
    # a cone about a gently plunging line reaches above the horizon: those lines are taken downward
    t, p = small_circle(90.0, 5.0, 20.0)
    v = vector_from_trend_plunge(t, p)
    axis = vector_from_trend_plunge(90.0, 5.0)
    assert np.all(p >= 0) and (p < 1).any()
    # as axes (either sense) every line stays 20 degrees from the cone's axis
    np.testing.assert_allclose(np.degrees(np.arccos(np.abs(v @ axis))), 20.0, atol=1e-9)


def test_great_circle_lines_are_perpendicular_to_the_pole():
    t, p = great_circle(35.0, 120.0)
    pole = vector_from_trend_plunge(*pole_from_dip(120.0, 35.0))
    np.testing.assert_allclose(vector_from_trend_plunge(t, p) @ pole, 0.0, atol=1e-12)
    # its deepest line is the dip itself (Source: definition of dip, common practice)
    assert float(p.max()) == pytest.approx(35.0)
