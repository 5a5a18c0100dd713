"""Orientation conventions and conversions (strikeline.geometry.orientation)."""
import numpy as np
import pytest

from strikeline.errors import InputError, UndeterminedError
from strikeline.geometry import (
    angle_between_normals,
    azimuth_difference,
    dip_direction_from_strike,
    dip_from_normal,
    dip_from_pole,
    normal_from_dip,
    normal_from_pole,
    pole_from_dip,
    pole_from_normal,
    strike_from_dip_direction,
    three_point,
    trend_plunge_from_vector,
    vector_from_trend_plunge,
)

# common practice: a surface falling 600 m over 1,200 m perpendicular to strike dips atan(0.5)
FALL_M, RUN_M = 600.0, 1200.0
DIP_FALL_600_OVER_1200_DEG = 26.5650511771  # = degrees(atan(0.5))

SQRT_HALF = np.sqrt(0.5)  # exact normal components of a 45-degree plane


# ---- existing conventions ------------------------------------------------------------------

def test_normal_of_45_degree_plane_dipping_east_is_exact():
    assert np.allclose(normal_from_dip(90.0, 45.0), [SQRT_HALF, 0.0, SQRT_HALF], atol=1e-15)


@pytest.mark.parametrize("dd", [0.0, 37.0, 90.0, 179.0, 181.0, 270.0, 359.5])
@pytest.mark.parametrize("dip", [0.5, 10.0, 45.0, 80.0, 89.9])
def test_dip_normal_round_trip(dd, dip):
    got_dd, got_dip = dip_from_normal(normal_from_dip(dd, dip))
    assert float(got_dip) == pytest.approx(dip, abs=1e-9)
    assert float(azimuth_difference(got_dd, dd)) == pytest.approx(0.0, abs=1e-9)


def test_downward_normal_gives_the_same_attitude():
    n = normal_from_dip(200.0, 35.0)
    assert np.allclose(dip_from_normal(-n), dip_from_normal(n))


def test_strike_right_hand_rule_round_trip():
    dd = np.array([0.0, 45.0, 90.0, 300.0])
    assert np.allclose(strike_from_dip_direction(dd), [270.0, 315.0, 0.0, 210.0])
    assert np.allclose(dip_direction_from_strike(strike_from_dip_direction(dd)), dd)


def test_three_point_hand_worked_normal():
    # plane z = -x * FALL/RUN through the origin: normal (0.5, 0, 1)/|.|, dipping east
    p = [(0.0, 0.0, 0.0), (RUN_M, 0.0, -FALL_M), (0.0, 500.0, 0.0)]
    n, dd, dip = three_point(*p)
    assert np.allclose(n, np.array([0.5, 0.0, 1.0]) / np.sqrt(1.25))
    assert dd == pytest.approx(90.0)
    assert dip == pytest.approx(DIP_FALL_600_OVER_1200_DEG, abs=1e-9)


def test_three_point_collinear_is_undetermined():
    with pytest.raises(UndeterminedError, match="one straight line"):
        three_point((0, 0, 0), (1, 1, 1), (2, 2, 2))


# ---- lines, poles, angles --------------------------------------------------------------------

def test_trend_plunge_vector_exact():
    assert np.allclose(vector_from_trend_plunge(90.0, 30.0), [np.sqrt(3) / 2, 0.0, -0.5])
    assert np.allclose(vector_from_trend_plunge(0.0, 90.0), [0.0, 0.0, -1.0], atol=1e-15)


@pytest.mark.parametrize("trend", [0.0, 10.0, 135.0, 250.0, 359.0])
@pytest.mark.parametrize("plunge", [0.0, 5.0, 45.0, 89.0])
def test_trend_plunge_round_trip(trend, plunge):
    t, p = trend_plunge_from_vector(vector_from_trend_plunge(trend, plunge))
    assert float(p) == pytest.approx(plunge, abs=1e-9)
    if plunge > 0:
        assert float(azimuth_difference(t, trend)) == pytest.approx(0.0, abs=1e-9)


def test_upward_vector_is_read_as_its_downward_axis():
    t, p = trend_plunge_from_vector([0.0, 1.0, 1.0])
    assert (float(t), float(p)) == pytest.approx((180.0, 45.0))


def test_pole_normal_conversions_agree_with_dip_conventions():
    dd, dip = 123.0, 37.0
    n = normal_from_dip(dd, dip)
    t, p = pole_from_normal(n)
    assert (float(t), float(p)) == pytest.approx(tuple(float(v) for v in pole_from_dip(dd, dip)))
    assert np.allclose(normal_from_pole(t, p), n)
    assert np.allclose(dip_from_pole(t, p), (dd, dip))


def test_angle_between_normals():
    assert float(angle_between_normals([0, 0, 1], [0, 1, 1])) == pytest.approx(45.0)
    # axes: the reversed normal is the same plane
    assert float(angle_between_normals([0, 0.3, 1], [0, -0.3, -1])) == pytest.approx(0.0, abs=1e-12)
    # small angles stay accurate (atan2 form), 1e-7 rad
    tiny = 1e-7
    got = float(angle_between_normals([0, 0, 1], [np.sin(tiny), 0, np.cos(tiny)]))
    assert got == pytest.approx(np.degrees(tiny), rel=1e-6)
    # broadcasting
    many = normal_from_dip(np.zeros(4), [0.0, 10.0, 20.0, 30.0])
    assert np.allclose(angle_between_normals(many, [0, 0, 1]), [0.0, 10.0, 20.0, 30.0])


def test_azimuth_difference_wraps():
    assert np.allclose(azimuth_difference([5.0, 355.0, 180.0], [355.0, 5.0, 0.0]),
                       [10.0, -10.0, -180.0])


def test_zero_vectors_are_refused():
    with pytest.raises(InputError, match="zero length"):
        trend_plunge_from_vector([0.0, 0.0, 0.0])
    with pytest.raises(InputError, match="zero length"):
        angle_between_normals([0.0, 0.0, 0.0], [0.0, 0.0, 1.0])
