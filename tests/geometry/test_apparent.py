"""Apparent dip, true dip from apparent and structure-contour spacing (strikeline.geometry.apparent)."""
import numpy as np
import pytest

from strikeline.errors import InputError
from strikeline.geometry import (
    apparent_dip,
    apparent_dip_from_strike_angle,
    contour_spacing_from_dip,
    dip_from_contour_spacing,
    normal_from_dip,
    true_dip_from_apparent,
)

# common practice: a surface falling 600 m over 1,200 m perpendicular to strike dips atan(0.5)
FALL_M, RUN_M = 600.0, 1200.0
DIP_FALL_600_OVER_1200_DEG = 26.5650511771  # = degrees(atan(0.5))

# Source: tan(alpha) = tan(delta) * sin(beta) (Ragan 2009; Rowland et al. 2007); worked values of
# the planning review, recomputed by hand here:
#   atan(tan 30 deg * sin 45 deg) = atan(0.577350 * 0.707107) = atan(0.408248) = 22.208 deg
#   atan(tan 60 deg * sin 30 deg) = atan(1.732051 * 0.5)      = atan(0.866025) = 40.893 deg
APPARENT_30_45_DEG = 22.208
APPARENT_60_30_DEG = 40.893

# Source: Groshong (2006), 3-D Structural Geology, 2nd ed., eq. 2.21, spacing = dz / tan(dip);
# recomputed by hand: 10 / tan 30 = 17.321, 10 / tan 45 = 10.000, 10 / tan 10 = 56.713 m
INTERVAL_M = 10.0
SPACING_AT_30_M = 17.321
SPACING_AT_45_M = 10.000
SPACING_AT_10_M = 56.713


# ---- apparent dip ----------------------------------------------------------------------------

def test_apparent_dip_worked_values():
    assert float(apparent_dip_from_strike_angle(30.0, 45.0)) == pytest.approx(
        APPARENT_30_45_DEG, abs=5e-4)
    assert float(apparent_dip_from_strike_angle(60.0, 30.0)) == pytest.approx(
        APPARENT_60_30_DEG, abs=5e-4)


def test_apparent_dip_by_section_azimuth():
    # dip direction 135 -> RHR strike 045; a section toward 090 is 45 degrees from strike
    assert float(apparent_dip(135.0, 30.0, 90.0)) == pytest.approx(APPARENT_30_45_DEG, abs=5e-4)
    # read the other way it rises
    assert float(apparent_dip(135.0, 30.0, 270.0)) == pytest.approx(-APPARENT_30_45_DEG, abs=5e-4)
    # along strike no dip, along the dip direction the true dip
    assert float(apparent_dip(135.0, 30.0, 45.0)) == pytest.approx(0.0, abs=1e-12)
    assert float(apparent_dip(135.0, 30.0, 135.0)) == pytest.approx(30.0, abs=1e-12)


def test_apparent_dip_matches_vector_geometry():
    # independent check: slope of the plane along a horizontal unit vector u is
    # -(n_x u_x + n_y u_y) / n_z for the plane's normal n (analytic geometry)
    rng = np.random.default_rng(7)
    dd = rng.uniform(0, 360, 50)
    dip = rng.uniform(0, 85, 50)
    az = rng.uniform(0, 360, 50)
    n = normal_from_dip(dd, dip)
    ux, uy = np.sin(np.radians(az)), np.cos(np.radians(az))
    descent = (n[:, 0] * ux + n[:, 1] * uy) / n[:, 2]
    assert np.allclose(apparent_dip(dd, dip, az), np.degrees(np.arctan(descent)), atol=1e-9)


def test_true_dip_from_apparent_inverts():
    assert float(true_dip_from_apparent(APPARENT_60_30_DEG, 30.0)) == pytest.approx(60.0, abs=2e-3)
    beta = np.array([20.0, 60.0, 200.0, 300.0])
    alpha = apparent_dip_from_strike_angle(35.0, beta)
    assert np.allclose(true_dip_from_apparent(alpha, beta), 35.0)


def test_true_dip_from_apparent_along_strike_is_refused():
    with pytest.raises(InputError, match="along strike"):
        true_dip_from_apparent(10.0, 180.0)


def test_vertical_plane_apparent_dip():
    assert float(apparent_dip_from_strike_angle(90.0, 30.0)) == pytest.approx(90.0)
    assert float(apparent_dip_from_strike_angle(90.0, 0.0)) == pytest.approx(0.0)


@pytest.mark.parametrize("dd", [0.0, 90.0, 123.4, 270.0, 359.9])
def test_vertical_plane_along_strike_is_exactly_zero(dd):
    # Source: tan(alpha) = tan(delta) sin(beta) (Ragan 2009): along the strike (beta = 0 or 180
    # degrees) sin(beta) = 0, so the apparent dip is 0 whatever the dip - also at exactly 90
    # degrees, where the formula is 0 / 0 and atan2 of the round-off residues sin(180 deg) ~ 1e-16
    # and cos(90 deg) ~ 6e-17 gave +-63.4 degrees.
    strike = (dd - 90.0) % 360.0
    for azimuth in (strike, (strike + 180.0) % 360.0, strike - 360.0):
        assert float(apparent_dip(dd, 90.0, azimuth)) == 0.0
    for beta in (0.0, 180.0, -180.0, 360.0, 540.0):
        assert float(apparent_dip_from_strike_angle(90.0, beta)) == 0.0
    # across the strike a vertical plane shows its full dip, with the sign of the side
    assert float(apparent_dip(dd, 90.0, dd)) == 90.0
    assert float(apparent_dip(dd, 90.0, dd + 180.0)) == -90.0
    # and a plane of any other dip is still 0 along its strike
    assert float(apparent_dip(dd, 37.0, strike + 180.0)) == 0.0


# ---- structure-contour spacing ---------------------------------------------------------------

def test_structure_contour_spacing_worked_values():
    got = contour_spacing_from_dip([30.0, 45.0, 10.0], INTERVAL_M)
    assert np.allclose(got, [SPACING_AT_30_M, SPACING_AT_45_M, SPACING_AT_10_M], atol=5e-4)


def test_structure_contour_spacing_limits_and_inverse():
    assert np.isinf(contour_spacing_from_dip(0.0, INTERVAL_M))
    assert float(contour_spacing_from_dip(90.0, INTERVAL_M)) == pytest.approx(0.0, abs=1e-12)
    assert float(dip_from_contour_spacing(RUN_M, FALL_M)) == pytest.approx(
        DIP_FALL_600_OVER_1200_DEG, abs=1e-9)
    dips = np.array([1.0, 17.0, 45.0, 88.0])
    assert np.allclose(dip_from_contour_spacing(contour_spacing_from_dip(dips, 25.0), 25.0), dips)


@pytest.mark.parametrize("interval", [0.0, -5.0, np.nan])
def test_structure_contour_spacing_rejects_bad_interval(interval):
    with pytest.raises(InputError, match="interval_m"):
        contour_spacing_from_dip(30.0, interval)


def test_dip_out_of_range_is_refused():
    with pytest.raises(InputError, match="between 0 and 90"):
        contour_spacing_from_dip(95.0, 10.0)
