"""Property-based checks (hypothesis) of the conventions every module relies on.

References: the conventions are common practice (right-hand rule, upward normals, dip direction
clockwise from north); the apparent-dip law tan(a) = tan(d) sin(b) is the published formula cited
in strikeline.geometry.orientation (Ragan 2009); numpy.linalg.svd is the reference for the TLS normal.
"""
import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from strikeline.attitude.fitting import fit_plane
from strikeline.geometry import (
    apparent_dip,
    dip_direction_from_strike,
    dip_from_normal,
    normal_from_dip,
    strike_from_dip_direction,
)
from strikeline.maps.thickness import thickness_from_outcrop_width, vertical_thickness

dip_directions = st.floats(0.0, 359.999, allow_nan=False)
dips = st.floats(0.5, 89.0, allow_nan=False)


def _adiff(a, b):
    return abs((a - b + 180.0) % 360.0 - 180.0)


@given(dip_directions, dips)
def test_normal_round_trip_and_upward(dd, d):
    n = normal_from_dip(dd, d)
    assert n[2] >= 0 and abs(np.linalg.norm(n) - 1) < 1e-12  # common practice: upward unit normals
    back_dd, back_d = dip_from_normal(n)
    assert _adiff(float(back_dd), dd) < 1e-7 and abs(float(back_d) - d) < 1e-9


@given(dip_directions)
def test_right_hand_rule_round_trip(dd):
    # common practice: RHR strike = dip direction - 90 (the plane dips to the right of strike)
    s = float(strike_from_dip_direction(dd))
    assert 0 <= s < 360 and _adiff(float(dip_direction_from_strike(s)), dd) < 1e-9


@given(dip_directions, dips, st.floats(0.0, 359.9))
def test_apparent_dip_never_exceeds_true_dip(dd, d, az):
    # Source: tan(alpha) = tan(delta) sin(beta) (Ragan 2009): |alpha| <= delta, equal down-dip
    a = float(apparent_dip(dd, d, az))
    assert abs(a) <= d + 1e-9
    assert abs(float(apparent_dip(dd, d, dd)) - d) < 1e-9


@settings(max_examples=40, deadline=None)
@given(dip_directions, st.floats(1.0, 80.0), st.integers(0, 10_000))
def test_fit_recovers_any_plane_and_matches_svd(dd, d, seed):
    rng = np.random.default_rng(seed)
    xy = rng.uniform(-500, 500, (60, 2))
    n = normal_from_dip(dd, d)
    z = 300 - (n[0] * xy[:, 0] + n[1] * xy[:, 1]) / n[2] + rng.normal(0, 0.5, 60)
    pts = np.column_stack([xy, z])
    fit = fit_plane(pts)
    # Source: numpy.linalg.svd - the right singular vector of the smallest singular value
    ref = np.linalg.svd(pts - pts.mean(axis=0))[2][-1]
    assert abs(abs(float(ref @ fit.normal)) - 1) < 1e-9
    assert abs(fit.dip_deg - d) < 1.0


@given(st.floats(1.0, 1000.0), dips)
def test_thickness_on_flat_ground_and_vertical_thickness(w, d):
    # Source: t = w sin(delta) on horizontal ground; vertical thickness t / cos(delta) (Ragan 2009)
    t = float(thickness_from_outcrop_width(w, d))
    assert abs(t - w * np.sin(np.radians(d))) < 1e-9 * w
    assert float(vertical_thickness(t, d)) >= t - 1e-9
