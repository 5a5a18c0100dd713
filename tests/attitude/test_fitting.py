"""Best-fit planes (total least squares) and the three-point solution."""
import numpy as np
import pytest

from strikeline.errors import UndeterminedError
from strikeline.attitude.fitting import fit_plane, plane_elevation
from strikeline.geometry import dip_from_normal, normal_from_dip, three_point

# common practice: a surface falling 600 m over 1,200 m measured perpendicular to strike
# dips atan(600/1200) = atan(0.5) = 26.565 degrees.
DIP_600_OVER_1200 = np.degrees(np.arctan(0.5))
assert abs(DIP_600_OVER_1200 - 26.565) < 1e-3  # common practice: the hand value, to 3 decimals


def _plane_points(dip_direction_deg, dip_deg, n=200, seed=1, noise_m=0.0, z0=500.0):
    rng = np.random.default_rng(seed)
    xy = rng.uniform(-1000, 1000, size=(n, 2))
    nrm = normal_from_dip(dip_direction_deg, dip_deg)
    z = z0 - (nrm[0] * xy[:, 0] + nrm[1] * xy[:, 1]) / nrm[2] + rng.normal(0, noise_m, n) if noise_m else \
        z0 - (nrm[0] * xy[:, 0] + nrm[1] * xy[:, 1]) / nrm[2]
    return np.column_stack([xy, z])


def _angle_diff(a, b):
    return abs((a - b + 180.0) % 360.0 - 180.0)


def test_600_m_over_1200_m_dips_26_57():
    # Surface falls 600 m over 1,200 m toward the east (dip direction 090).
    x, y = np.meshgrid(np.linspace(0, 1200, 7), np.linspace(0, 800, 5))
    z = 900.0 - 600.0 * x / 1200.0
    fit = fit_plane(np.column_stack([x.ravel(), y.ravel(), z.ravel()]))
    assert fit.dip_deg == pytest.approx(DIP_600_OVER_1200, abs=1e-9)  # common practice
    assert fit.dip_direction_deg == pytest.approx(90.0, abs=1e-9)
    assert fit.strike_rhr_deg == pytest.approx(0.0, abs=1e-9)  # RHR: dip to the right of strike
    assert fit.rms_m == pytest.approx(0.0, abs=1e-9)


@pytest.mark.parametrize("dd,d", [(0.0, 10.0), (45.0, 30.0), (135.0, 5.0), (221.3, 18.7), (300.0, 60.0)])
def test_recovers_planes_of_every_orientation(dd, d):
    fit = fit_plane(_plane_points(dd, d))
    assert fit.dip_deg == pytest.approx(d, abs=1e-8)
    assert _angle_diff(fit.dip_direction_deg, dd) < 1e-7
    assert fit.normal[2] > 0  # normals point upward (our convention)


def test_tls_normal_matches_svd_reference():
    # Source: the TLS normal is the right singular vector of the smallest singular value of the
    # centred data matrix (Golub & Van Loan, Matrix Computations, 4th ed., 2013, §6.3);
    # numpy.linalg.svd is the general-purpose reference implementation.
    pts = _plane_points(250.0, 35.0, noise_m=5.0, seed=7)
    q = pts - pts.mean(axis=0)
    ref = np.linalg.svd(q)[2][-1]
    ref = ref if ref[2] > 0 else -ref
    fit = fit_plane(pts)
    assert np.allclose(fit.normal, ref, atol=1e-12)
    # RMS orthogonal residual equals sqrt(smallest singular value^2 / n)
    assert fit.rms_m == pytest.approx(np.linalg.svd(q, compute_uv=False)[-1] / np.sqrt(len(pts)), rel=1e-9)


def test_three_point_against_hand_worked_normal():
    # Hand-worked (common practice, three-point problem): A(0,0,100), B(100,0,100), C(0,100,50).
    # AB is a strike line (equal heights) trending 090; the plane falls 50 m over 100 m toward
    # north... C lies 100 m north and 50 m lower, so dip = atan(0.5) = 26.565 deg toward 000,
    # and the upward normal is (0, 0.5, 1)/|(0, 0.5, 1)| = (0, 0.4472136, 0.8944272).
    normal, dd, d = three_point([0, 0, 100], [100, 0, 100], [0, 100, 50])
    assert np.allclose(normal, [0.0, 0.4472136, 0.8944272], atol=1e-7)
    assert dd == pytest.approx(0.0, abs=1e-9)
    assert d == pytest.approx(DIP_600_OVER_1200, abs=1e-9)
    # fit_plane with exactly three points uses the same solution
    fit = fit_plane([[0, 0, 100], [100, 0, 100], [0, 100, 50]])
    assert np.allclose(fit.normal, normal)


def test_round_trip_dip_strike_normal():
    dd = np.array([0.0, 10.0, 90.0, 181.0, 270.0, 359.0])
    d = np.array([1.0, 20.0, 45.0, 60.0, 89.0, 30.0])
    back_dd, back_d = dip_from_normal(normal_from_dip(dd, d))
    assert np.allclose(back_dd, dd) and np.allclose(back_d, d)


@pytest.mark.parametrize("pts,match", [
    ([[0, 0, 0], [1, 1, 1]], "only 2 usable pick"),
    ([[0, 0, 0], [1, 1, 1], [2, 2, 2], [5, 5, 5]], "one straight line"),
    ([[0, 0, 0], [1, 0, 0], [2, 0, 0]], "one straight line"),
])
def test_undetermined_planes_say_why(pts, match):
    with pytest.raises(UndeterminedError, match=match):
        fit_plane(pts)


def test_plane_elevation_through_centroid():
    pts = _plane_points(120.0, 25.0)
    fit = fit_plane(pts)
    assert np.allclose(plane_elevation(fit.normal, fit.centroid, pts[:, 0], pts[:, 1]), pts[:, 2])
