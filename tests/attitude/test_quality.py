"""Shape diagnostics and the quality verdict (strikeline.attitude.quality)."""
import numpy as np
import pytest

from strikeline.attitude.quality import (
    GOOD_MAX_COLLINEARITY,
    GOOD_MIN_COPLANARITY,
    STRAIGHT_MAX_MAP_SPREAD,
    UNDETERMINED_MIN_COLLINEARITY,
    assess_plane,
    classify_planes,
    map_spread,
    shape_measures,
)
from strikeline.errors import InputError
from strikeline.geometry import normal_from_dip

# Source: Woodcock (1977), GSA Bulletin 88, 1231-1236: M = ln(l1/l3), K = ln(l1/l2)/ln(l2/l3)
# (definitions from memory). Hand-worked: eigenvalues (e^6, e^3, 1)
# give M = 6 and K = 3/3 = 1; (e^5, e^4, 1) give M = 5 and K = 1/4.
EIG_M6_K1 = (np.e ** 6, np.e ** 3, 1.0)
EIG_M5_K025 = (np.e ** 5, np.e ** 4, 1.0)
# Source: Fernandez (2005), J. Struct. Geol. 27, 855-858 -- a reliable plane needs about M > 4
# and K < 0.8 (from memory)
FERNANDEZ_M, FERNANDEZ_K = 4.0, 0.8

HELPFUL_DATA = ("relief", "second contact", "borehole")


def dipping_picks(n=200, *, noise_m=2.0, seed=0, dd=140.0, dip=20.0):
    rng = np.random.default_rng(seed)
    xy = rng.uniform(0, 1000, (n, 2))
    nrm = normal_from_dip(dd, dip)
    z = 400.0 - (nrm[0] * xy[:, 0] + nrm[1] * xy[:, 1]) / nrm[2]
    return np.column_stack([xy, z + rng.normal(0, noise_m, n)])


def test_thresholds_are_fernandez_values():
    assert (GOOD_MIN_COPLANARITY, GOOD_MAX_COLLINEARITY) == (FERNANDEZ_M, FERNANDEZ_K)


def test_shape_measures_hand_worked():
    m, k = shape_measures([EIG_M6_K1, EIG_M5_K025])
    assert np.allclose(m, [6.0, 5.0])
    assert np.allclose(k, [1.0, 0.25])


def test_shape_measures_do_not_depend_on_order_or_scale():
    a = shape_measures(EIG_M5_K025)
    b = shape_measures(np.array(EIG_M5_K025)[::-1] * 1e6)
    assert np.allclose(a, b)


def test_shape_measures_of_exact_line_and_plane():
    m_line, k_line = shape_measures([100.0, 0.0, 0.0])
    assert np.isinf(k_line)
    # a noise-free plane: l3 is floored at 1e-12 l1, so M = ln(1e12) and
    # K = ln(2) / ln(0.5e12) by hand
    m_plane, k_plane = shape_measures([100.0, 50.0, 0.0])
    assert m_plane == pytest.approx(np.log(1e12))
    assert k_plane == pytest.approx(np.log(2.0) / np.log(0.5e12))
    m_disc, k_disc = shape_measures([100.0, 100.0, 0.0])
    assert k_disc == 0.0


def test_shape_measures_reject_bad_input():
    with pytest.raises(InputError, match="3 values"):
        shape_measures([1.0, 2.0])
    with pytest.raises(InputError, match="non-negative"):
        shape_measures([1.0, 2.0, -5.0])


def test_well_spread_picks_are_good():
    q = assess_plane(dipping_picks())
    assert q.quality == "good" and q.reason_code == "ok" and q.advice == ""
    assert q.coplanarity > FERNANDEZ_M and q.collinearity < FERNANDEZ_K
    assert q.n_points == 200 and "200 picks" in q.reason


def test_contact_along_a_strike_line_at_constant_height_is_undetermined():
    x = np.linspace(0, 2000, 120)
    picks = np.column_stack([x, 0.4 * x + 30, np.full_like(x, 215.0)])
    q = assess_plane(picks)
    assert q.quality == "undetermined" and q.reason_code == "collinear"
    assert "one line" in q.reason and "strike line" in q.reason
    assert all(word in q.advice for word in HELPFUL_DATA)


def test_sloping_straight_line_is_undetermined():
    x = np.linspace(0, 2000, 120)
    rng = np.random.default_rng(1)
    picks = np.column_stack([x, -0.2 * x, 100 - 0.3 * x]) + rng.normal(0, 0.5, (120, 3))
    q = assess_plane(picks)
    assert q.quality == "undetermined" and q.reason_code == "collinear"
    assert q.collinearity >= UNDETERMINED_MIN_COLLINEARITY


def test_near_collinear_picks_are_undetermined():
    # a 2 km trace whose sideways wiggle (2 m) is about the picks' scatter (1 m)
    rng = np.random.default_rng(2)
    x = np.linspace(0, 2000, 200)
    picks = np.column_stack([x, 2.0 * np.sin(x / 50.0), 300 + 0.01 * x])
    picks += rng.normal(0, 1.0, picks.shape)
    q = assess_plane(picks)
    assert q.quality == "undetermined" and q.reason_code == "collinear"


def test_curved_trace_at_one_height_is_a_horizontal_plane():
    # Geometry (common practice): a plane meets a level surface in a straight line unless the
    # plane is itself level, so a level trace that bends in map view fixes a horizontal plane.
    t = np.linspace(0, 5, 300)
    picks = np.column_stack([800 * np.cos(t), 500 * np.sin(t), np.full_like(t, 12.0)])
    q = assess_plane(picks)
    assert q.quality == "good" and q.reason_code == "level" and q.advice == ""
    assert "one height" in q.reason and "lies in a horizontal plane" in q.reason
    assert q.map_spread > STRAIGHT_MAX_MAP_SPREAD


def test_straight_trace_on_flat_ground_is_undetermined():
    # a straight contact on flat ground: every plane through the line fits, horizontal to vertical
    rng = np.random.default_rng(4)
    x = np.linspace(0, 1500, 300)
    picks = np.column_stack([x, 0.7 * x + rng.normal(0, 2.0, 300), 12.0 + rng.normal(0, 0.05, 300)])
    q = assess_plane(picks)
    assert q.quality == "undetermined" and q.reason_code == "flat"
    assert "straight line in map view" in q.reason and "flat ground" in q.reason
    assert all(word in q.advice for word in HELPFUL_DATA)
    # hand-worked: the map-view RMS distance from the line (about 2 m / sqrt(1 + 0.7^2)) over the
    # RMS spread along it (1500 * sqrt(1 + 0.7^2) / sqrt(12)) is about 0.3%
    assert q.map_spread == pytest.approx(2.0 / np.hypot(1, 0.7) / (1500 * np.hypot(1, 0.7) / np.sqrt(12)),
                                         rel=0.2)


def test_map_spread_hand_worked():
    # Source: hand-worked - a circle has equal map-view spreads (ratio 1); a grid of 401 x 101
    # points at one spacing has variances h^2 (N^2 - 1) / 12 along each side (discrete uniform),
    # so the ratio of RMS spreads is sqrt((101^2 - 1) / (401^2 - 1))
    t = np.linspace(0, 2 * np.pi, 720, endpoint=False)
    q = np.column_stack([np.cos(t), np.sin(t), np.zeros_like(t)])
    assert map_spread(q.T @ q) == pytest.approx(1.0, abs=1e-9)
    g = np.stack(np.meshgrid(np.linspace(-2, 2, 401), np.linspace(-0.5, 0.5, 101)), -1).reshape(-1, 2)
    assert map_spread(g.T @ g) == pytest.approx(np.sqrt((101 ** 2 - 1) / (401 ** 2 - 1)), rel=1e-9)
    assert np.isnan(map_spread(np.zeros((3, 3))))
    with pytest.raises(InputError, match="3 x 3 or 2 x 2"):
        map_spread(np.zeros((4, 4)))


def test_relief_threshold_scales_with_the_vertical_error():
    x = np.linspace(0, 1500, 300)
    picks = np.column_stack([x, 0.7 * x, 12.0 + 3.0 * np.sin(x / 100.0)])
    assert assess_plane(picks).reason_code != "flat"  # 6 m relief > 1 m default
    assert assess_plane(picks, sigma_z_m=2.0).reason_code == "flat"  # needs 4 x 2 = 8 m


def test_blob_is_not_planar():
    rng = np.random.default_rng(3)
    q = assess_plane(rng.normal(0, 100, (300, 3)))
    assert q.quality == "undetermined" and q.reason_code == "not_planar"


def test_too_few_picks():
    q = assess_plane(dipping_picks(n=2))
    assert q.quality == "undetermined" and q.reason_code == "too_few_picks"
    assert "only 2" in q.reason


def test_elongated_set_is_weak():
    # a 2 km by 60 m strip of picks with 1 m scatter: plane-like but elongated (0.8 <= K < 2)
    rng = np.random.default_rng(4)
    u = rng.uniform(0, 2000, 300)
    v = rng.uniform(0, 60, 300)
    picks = np.column_stack([u, v, 0.5 * v + rng.normal(0, 1.0, 300)])
    q = assess_plane(picks)
    assert q.quality == "weak" and q.reason_code == "marginal_shape"
    assert GOOD_MAX_COLLINEARITY <= q.collinearity < UNDETERMINED_MIN_COLLINEARITY


def test_wide_confidence_makes_a_good_shape_weak():
    picks = dipping_picks()
    assert assess_plane(picks, dip_ci95_deg=1.0).quality == "good"
    q = assess_plane(picks, dip_ci95_deg=12.0)
    assert q.quality == "weak" and q.reason_code == "wide_confidence" and "12.0" in q.reason


def test_eigenvalues_alone():
    q = assess_plane(np.array(EIG_M5_K025))
    assert q.quality == "good" and np.isnan(q.relief_m)
    assert q.eigenvalues == pytest.approx(EIG_M5_K025)
    assert assess_plane(np.array(EIG_M6_K1)).quality == "weak"


def test_batch_classification_matches_single_assessments():
    sets = [dipping_picks(seed=s) for s in range(3)]
    x = np.linspace(0, 2000, 120)
    sets.append(np.column_stack([x, 0.4 * x, np.full_like(x, 215.0)]))
    eig = []
    for p in sets:
        q = p - p.mean(axis=0)
        eig.append(np.linalg.eigvalsh(q.T @ q))
    relief = [np.ptp(p[:, 2]) for p in sets]
    quality, code, m, k = classify_planes(np.array(eig), n_points=[len(p) for p in sets],
                                          relief_m=relief)
    singles = [assess_plane(p) for p in sets]
    assert list(quality) == [s.quality for s in singles]
    assert list(code) == [s.reason_code for s in singles]


def test_bad_shapes_are_refused():
    with pytest.raises(InputError, match=r"\(n, 3\)"):
        assess_plane(np.zeros((4, 2)))


def test_three_points_are_at_best_weak():
    # common practice: three points always fit a plane exactly (the three-point problem), so
    # their fit leaves no scatter to judge it by; well spread points are still not "good".
    from strikeline.attitude.quality import assess_plane

    q = assess_plane(np.array([[0.0, 0.0, 100.0], [1000.0, 0.0, 100.0], [0.0, 1000.0, 50.0]]))
    assert q.quality == "weak" and q.reason_code == "three_points"
    assert "three-point" in q.reason


def test_curved_surface_with_small_pick_error_is_weak():
    # Analytic: picks of a cylindrical fold (amplitude 50 m) with a stated 1 m error scatter far
    # more than 3 errors about any plane, so one plane cannot describe them (common practice:
    # residuals well beyond the data error mean the model is wrong, not the data).
    from strikeline.attitude.quality import MISFIT_SIGMAS, assess_plane

    x, y = np.meshgrid(np.linspace(0, 2000, 30), np.linspace(0, 2000, 30))
    z = 300 - 0.1 * x + 50 * np.cos(2 * np.pi * y / 1500)
    pts = np.column_stack([x.ravel(), y.ravel(), z.ravel()])
    q = assess_plane(pts, sigma_z_m=1.0)
    assert q.quality == "weak" and q.reason_code == "curved" and "not planar" in q.reason
    assert MISFIT_SIGMAS == 3.0
    # the same picks with a stated error larger than their scatter are not flagged
    assert assess_plane(pts, sigma_z_m=100.0).reason_code != "curved"
