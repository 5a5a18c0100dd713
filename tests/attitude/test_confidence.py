"""Confidence of fitted planes: bootstrap and Monte Carlo (strikeline.attitude.resampling), analytic
covariance (strikeline.attitude.analytic), combination and dip significance
(strikeline.attitude.confidence)."""
import dataclasses

import numpy as np
import pytest

from strikeline.errors import CancelledError, InputError, UndeterminedError
from strikeline.attitude.fitting import fit_plane
from strikeline.geometry import angle_between_normals, azimuth_difference, normal_from_dip
from strikeline.attitude import (
    PlaneConfidence,
    analytic_plane_confidence,
    analytic_plane_covariance,
    bootstrap_plane,
    combine_confidence,
    monte_carlo_plane,
    plane_confidence,
)

# common practice: the hand estimate of dip from structure contours is good to a degree or two,
# so a well-conditioned synthetic case must give a 95% half-width under 2 degrees
HAND_ESTIMATE_DEG = 2.0
# Project target: bootstrap and analytic half-widths agree within about 25%
# on a well-conditioned case
AGREEMENT = 0.25
# Project target: the true plane lies inside the reported 95% interval
# 90-99% of the time over 200 seeded synthetic sets
COVERAGE_RANGE = (0.90, 0.99)
N_COVERAGE_SETS = 200
# Source: first-order propagation (Stewart & Sun 1990; Kanatani 1996): only the error
# component along the normal matters, so a vertical error sigma_z acts as sigma_z cos(dip)
# across the plane; Monte Carlo and analytic must agree to sampling error (10% at 2,000 draws)
MC_ANALYTIC_TOLERANCE = 0.10
# Source: the normal distribution's 95% quantile of |Z| is 1.96 standard deviations; the ratio
# of half-widths for sigmas 1 m and 2 m is 2 to first order (linear propagation)
SIGMA_RATIO = 2.0

TRUE_DD, TRUE_DIP = 120.0, 26.5650511771  # a dip of atan(0.5), our own synthetic plane


def plane_picks(n=300, *, dd=TRUE_DD, dip=TRUE_DIP, noise_m=2.0, extent_m=2000.0, seed=11,
                origin=(512000.0, 6843000.0, 350.0)):
    """Picks spread over a square, on a known plane plus isotropic noise."""
    rng = np.random.default_rng(seed)
    xy = rng.uniform(0, extent_m, (n, 2))
    nrm = normal_from_dip(dd, dip)
    z = -(nrm[0] * xy[:, 0] + nrm[1] * xy[:, 1]) / nrm[2]
    p = np.column_stack([xy, z]) + rng.normal(0, noise_m, (n, 3)) if noise_m else \
        np.column_stack([xy, z])
    return p + np.asarray(origin)


# ---- bootstrap -------------------------------------------------------------------------------

def test_well_conditioned_case_is_within_the_hand_estimate():
    ci = bootstrap_plane(plane_picks(), n_resamples=500)
    assert ci.method == "bootstrap" and ci.n_resamples == 500 and ci.n_points == 300
    assert 0 < ci.dip_ci95_deg < HAND_ESTIMATE_DEG
    assert 0 < ci.dip_direction_ci95_deg < HAND_ESTIMATE_DEG
    assert abs(ci.dip_deg - TRUE_DIP) < ci.dip_ci95_deg * 2
    assert abs(float(azimuth_difference(ci.dip_direction_deg, TRUE_DD))) < 2 * \
        ci.dip_direction_ci95_deg


def test_bootstrap_and_analytic_agree_within_25_percent():
    pts = plane_picks(noise_m=5.0)
    boot = bootstrap_plane(pts, n_resamples=1000, seed=3)
    ana = analytic_plane_confidence(pts)
    assert ana.method == "analytic" and ana.n_resamples == 0
    for field in ("dip_ci95_deg", "dip_direction_ci95_deg", "cone95_deg"):
        b, a = getattr(boot, field), getattr(ana, field)
        assert abs(b - a) <= AGREEMENT * a, (field, b, a)


def test_same_seed_gives_identical_numbers_and_another_seed_does_not():
    pts = plane_picks(n=120)
    a = bootstrap_plane(pts, n_resamples=200, seed=5)
    b = bootstrap_plane(pts, n_resamples=200, seed=5)
    c = bootstrap_plane(pts, n_resamples=200, seed=6)
    assert a == b
    assert a.dip_ci95_deg != c.dip_ci95_deg
    m1 = monte_carlo_plane(pts, sigma_z_m=1.0, n_draws=200, seed=2)
    m2 = monte_carlo_plane(pts, sigma_z_m=1.0, n_draws=200, seed=2)
    assert m1 == m2


def test_coverage_of_the_95_percent_intervals():
    # 200 seeded synthetic pick sets with known plane and noise: how often is the true pole
    # inside the reported cone, the true dip inside dip +- half-width, and the true dip
    # direction inside its interval?
    true_n = normal_from_dip(TRUE_DD, TRUE_DIP)
    inside_cone = inside_dip = inside_dd = 0
    for k in range(N_COVERAGE_SETS):
        pts = plane_picks(n=100, noise_m=10.0, extent_m=1000.0, seed=1000 + k)
        ci = bootstrap_plane(pts, n_resamples=200, seed=k)
        fit_n = normal_from_dip(ci.dip_direction_deg, ci.dip_deg)
        inside_cone += float(angle_between_normals(fit_n, true_n)) <= ci.cone95_deg
        inside_dip += abs(ci.dip_deg - TRUE_DIP) <= ci.dip_ci95_deg
        inside_dd += abs(float(azimuth_difference(ci.dip_direction_deg, TRUE_DD))) <= \
            ci.dip_direction_ci95_deg
    lo, hi = COVERAGE_RANGE
    for inside in (inside_cone, inside_dip, inside_dd):
        assert lo <= inside / N_COVERAGE_SETS <= hi


def test_dip_direction_wrap_near_north():
    # a plane dipping toward 359.8 degrees: replicates fall on both sides of 0/360 and the
    # half-width must stay small, not near 360
    ci = bootstrap_plane(plane_picks(dd=359.8, dip=30.0, noise_m=3.0), n_resamples=300)
    assert ci.dip_direction_ci95_deg < HAND_ESTIMATE_DEG


def test_near_horizontal_plane_has_undetermined_dip_direction():
    ci = bootstrap_plane(plane_picks(dip=0.05, noise_m=5.0, extent_m=500.0), n_resamples=300)
    assert ci.cone95_deg >= ci.dip_deg
    assert ci.dip_direction_ci95_deg == 180.0
    ana = analytic_plane_confidence(plane_picks(dip=0.05, noise_m=5.0, extent_m=500.0))
    assert ana.dip_direction_ci95_deg == 180.0


def in_plane_picks(dd, dip, *, n=200, extent_m=1000.0, noise_m=3.0, seed=21):
    """Picks spread within a plane (along strike and down dip), plus isotropic noise."""
    rng = np.random.default_rng(seed)
    nrm = normal_from_dip(dd, dip)
    along = np.cross([0.0, 0.0, 1.0], nrm)
    along /= np.linalg.norm(along)
    down = np.cross(nrm, along)
    uv = rng.uniform(0, extent_m, (n, 2))
    return uv @ np.array([along, down]) + rng.normal(0, noise_m, (n, 3))


def test_steep_plane_replicates_beyond_vertical_do_not_fold_the_dip():
    # dip 89.8 with a half-width of about 0.5 degrees: many replicate normals point past the
    # vertical; the dip deviation must run on past 90 (matching the analytic half-width) and the
    # dip direction must not flip by 180 degrees
    pts = in_plane_picks(75.0, 89.8, noise_m=10.0)
    ci = bootstrap_plane(pts, n_resamples=400)
    ana = analytic_plane_confidence(pts)
    assert ci.dip_deg + ci.dip_ci95_deg > 90.0
    assert abs(ci.dip_ci95_deg - ana.dip_ci95_deg) <= AGREEMENT * ana.dip_ci95_deg
    assert ci.dip_direction_ci95_deg < HAND_ESTIMATE_DEG


def test_bootstrap_needs_four_picks_and_a_plane():
    with pytest.raises(UndeterminedError, match="at least 4"):
        bootstrap_plane(plane_picks(n=3, noise_m=0.0))
    x = np.linspace(0, 100, 20)
    with pytest.raises(UndeterminedError, match="one straight line"):
        bootstrap_plane(np.column_stack([x, 2 * x, 0.5 * x]))


@pytest.mark.parametrize("kwargs,match", [
    (dict(n_resamples=5), "n_resamples"),
    (dict(n_resamples=100.0), "n_resamples"),
    (dict(seed=-1), "seed"),
    (dict(seed=None), "seed"),
])
def test_bootstrap_option_errors(kwargs, match):
    with pytest.raises(InputError, match=match):
        bootstrap_plane(plane_picks(n=30), **kwargs)


def test_bad_point_shapes_are_refused():
    with pytest.raises(InputError, match=r"\(n, 3\)"):
        bootstrap_plane(np.zeros((10, 2)))


def test_nan_rows_are_ignored():
    pts = plane_picks(n=60)
    with_nan = np.vstack([pts, [[np.nan, 1.0, 2.0]]])
    assert bootstrap_plane(with_nan, n_resamples=50) == bootstrap_plane(pts, n_resamples=50)


def test_progress_and_cancel():
    seen = []
    bootstrap_plane(plane_picks(n=50), n_resamples=100, progress=seen.append)
    assert seen[-1] == 1.0 and all(0 <= f <= 1 for f in seen)
    with pytest.raises(CancelledError):
        bootstrap_plane(plane_picks(n=50), n_resamples=100, is_cancelled=lambda: True)


# ---- analytic --------------------------------------------------------------------------------

def test_analytic_covariance_is_rank_two_and_orthogonal_to_the_normal():
    pts = plane_picks(noise_m=3.0)
    cov = analytic_plane_covariance(pts)
    ci = analytic_plane_confidence(pts)
    n = normal_from_dip(ci.dip_direction_deg, ci.dip_deg)
    assert np.allclose(cov, cov.T)
    assert np.linalg.norm(cov @ n) < 1e-9 * np.linalg.norm(cov)
    w = np.linalg.eigvalsh(cov)
    assert w[0] == pytest.approx(0.0, abs=1e-12 * w[2]) and w[1] > 0


def test_analytic_isotropic_case_by_hand():
    # A square grid of picks on the horizontal plane: lambda_1 = lambda_2 = L, lambda_3 = 0;
    # with sigma_m = s, Cov(n) = s^2 / L (I - n n^T) (the formula in the docstring), so the
    # tilt in any direction has standard deviation s / sqrt(L) and the cone is
    # s / sqrt(L) * sqrt(chi2_2(0.95)) = s / sqrt(L) * sqrt(-2 ln 0.05).
    g = np.arange(-5, 6) * 10.0
    x, y = np.meshgrid(g, g)
    pts = np.column_stack([x.ravel(), y.ravel(), np.zeros(x.size)])
    lam = float(np.sum(x.ravel() ** 2))
    s = 0.5
    cov = analytic_plane_covariance(pts, sigma_m=s)
    assert np.allclose(cov, s * s / lam * np.diag([1.0, 1.0, 0.0]))
    ci = analytic_plane_confidence(pts, sigma_m=s)
    assert ci.cone95_deg == pytest.approx(np.degrees(np.arctan(s / np.sqrt(lam)
                                                               * np.sqrt(-2 * np.log(0.05)))))
    assert ci.dip_direction_ci95_deg == 180.0


def test_analytic_needs_a_sigma_for_three_picks():
    with pytest.raises(UndeterminedError, match="sigma_m"):
        analytic_plane_covariance(plane_picks(n=3, noise_m=0.0))
    assert analytic_plane_confidence(plane_picks(n=3, noise_m=0.0), sigma_m=1.0).cone95_deg > 0


# ---- Monte Carlo of data errors --------------------------------------------------------------

def test_monte_carlo_matches_analytic_propagation_of_vertical_errors():
    pts = plane_picks(noise_m=0.0)
    sigma_z = 2.0
    mc = monte_carlo_plane(pts, sigma_z_m=sigma_z, n_draws=2000, seed=4)
    ana = analytic_plane_confidence(pts, sigma_m=sigma_z * np.cos(np.radians(TRUE_DIP)))
    for field in ("dip_ci95_deg", "dip_direction_ci95_deg", "cone95_deg"):
        m, a = getattr(mc, field), getattr(ana, field)
        assert abs(m - a) <= MC_ANALYTIC_TOLERANCE * a, (field, m, a)


def test_monte_carlo_widens_with_sigma():
    pts = plane_picks(n=150, noise_m=0.0)
    widths = [monte_carlo_plane(pts, sigma_z_m=s, n_draws=400, seed=1).dip_ci95_deg
              for s in (0.5, 1.0, 2.0, 4.0)]
    assert all(a < b for a, b in zip(widths, widths[1:]))
    # same seed: the draws scale exactly with sigma, so the ratio is linear to first order
    assert widths[2] / widths[1] == pytest.approx(SIGMA_RATIO, rel=0.02)


def test_monte_carlo_zero_sigma_gives_zero_width():
    mc = monte_carlo_plane(plane_picks(n=40), sigma_z_m=0.0, n_draws=50)
    assert mc.dip_ci95_deg == pytest.approx(0.0, abs=1e-9)
    assert mc.cone95_deg == pytest.approx(0.0, abs=1e-9)


def test_monte_carlo_per_pick_sigmas():
    pts = plane_picks(n=100, noise_m=0.0)
    sigma = np.zeros(100)
    sigma[:50] = 2.0
    half = monte_carlo_plane(pts, sigma_z_m=sigma, n_draws=400).dip_ci95_deg
    full = monte_carlo_plane(pts, sigma_z_m=2.0, n_draws=400).dip_ci95_deg
    assert 0 < half < full
    with pytest.raises(InputError, match="one value per pick"):
        monte_carlo_plane(pts, sigma_z_m=np.ones(7))
    with pytest.raises(InputError, match="non-negative"):
        monte_carlo_plane(pts, sigma_z_m=-1.0)


def test_monte_carlo_works_for_the_three_point_case():
    mc = monte_carlo_plane(plane_picks(n=3, noise_m=0.0), sigma_z_m=1.0, n_draws=100)
    assert mc.dip_ci95_deg > 0


# ---- combination -----------------------------------------------------------------------------

def _conf(dip_ci, dd_ci, cone, method, dip=30.0):
    return PlaneConfidence(dip_ci, dd_ci, cone, 100, method, dip, 90.0, 50)


def test_combination_is_quadrature():
    # 3-4-5: sqrt(3^2 + 4^2) = 5 exactly
    c = combine_confidence(_conf(3.0, 6.0, 0.3, "bootstrap"), _conf(4.0, 8.0, 0.4, "monte_carlo"))
    assert (c.dip_ci95_deg, c.dip_direction_ci95_deg) == pytest.approx((5.0, 10.0))
    assert c.cone95_deg == pytest.approx(0.5)
    assert c.method == "bootstrap+monte_carlo" and c.n_resamples == 100


def test_combination_keeps_an_undetermined_dip_direction():
    c = combine_confidence(_conf(1.0, 180.0, 1.0, "bootstrap"), _conf(1.0, 2.0, 1.0, "mc"))
    assert c.dip_direction_ci95_deg == 180.0
    # a combined cone reaching the vertical makes the dip direction undetermined too
    c = combine_confidence(_conf(1.0, 20.0, 3.0, "a", dip=4.0), _conf(1.0, 20.0, 3.0, "b", dip=4.0))
    assert c.dip_direction_ci95_deg == 180.0


def test_combination_refuses_different_planes():
    with pytest.raises(InputError, match="different planes"):
        combine_confidence(_conf(1, 1, 1, "a", dip=30.0), _conf(1, 1, 1, "b", dip=31.0))


def test_plane_confidence_adds_data_error_when_stated():
    pts = plane_picks(n=200)
    boot = plane_confidence(pts, n_resamples=200)
    both = plane_confidence(pts, sigma_z_m=3.0, n_resamples=200, n_draws=200)
    assert boot == bootstrap_plane(pts, n_resamples=200)
    assert both.method == "bootstrap+monte_carlo"
    assert both.dip_ci95_deg > boot.dip_ci95_deg
    assert dataclasses.asdict(both)["n_points"] == 200


def _segment_correlated_picks(seed, n_segments=24, per_segment=40, sigma_m=3.0):
    """Picks strung along segments of a planar contact; each segment carries one shared error
    (a digitising or DEM error that runs along the line), so picks are not independent."""
    rng = np.random.default_rng(seed)
    nrm = normal_from_dip(BLOCK_TRUE_DD, BLOCK_TRUE_DIP)
    pts, labels = [], []
    for s in range(n_segments):
        x0, y0 = rng.uniform(-2000, 2000, 2)
        ang = rng.uniform(0, np.pi)
        t = np.linspace(0, 300, per_segment)
        x, y = x0 + t * np.cos(ang), y0 + t * np.sin(ang)
        z = -(nrm[0] * x + nrm[1] * y) / nrm[2] + rng.normal(0, sigma_m) + rng.normal(0, 0.2, per_segment)
        pts.append(np.column_stack([x, y, z]))
        labels.append(np.full(per_segment, s))
    return np.concatenate(pts), np.concatenate(labels)


# Source (analytic truth of the synthetic sets): a plane dipping 12 deg toward 070.
BLOCK_TRUE_DIP, BLOCK_TRUE_DD = 12.0, 70.0


def test_block_bootstrap_covers_the_truth_when_picks_share_errors():
    # Source: Kuensch 1989 / Lahiri 2003 - resampling whole blocks keeps the dependence within
    # them; resampling single picks treats one shared error as many independent ones, so its
    # 95% intervals miss the truth far more often than 5% of the time.
    from strikeline.attitude import bootstrap_plane

    hit_block = hit_pick = 0
    n_sets = 40
    for seed in range(n_sets):
        pts, lab = _segment_correlated_picks(seed)
        fit_dip = fit_plane(pts).dip_deg
        pick = bootstrap_plane(pts, n_resamples=300, seed=seed)
        block = bootstrap_plane(pts, n_resamples=300, seed=seed, groups=lab)
        assert block.method == "block_bootstrap" and pick.method == "bootstrap"
        hit_pick += abs(fit_dip - BLOCK_TRUE_DIP) <= pick.dip_ci95_deg
        hit_block += abs(fit_dip - BLOCK_TRUE_DIP) <= block.dip_ci95_deg
    assert hit_block / n_sets >= 0.75  # measured 0.825 (percentile intervals of 24 blocks run a little short)
    assert hit_pick / n_sets <= 0.5  # measured 0.225


def test_block_bootstrap_falls_back_to_picks_with_few_blocks():
    from strikeline.attitude import MIN_BOOTSTRAP_BLOCKS, bootstrap_plane

    pts, lab = _segment_correlated_picks(0, n_segments=MIN_BOOTSTRAP_BLOCKS - 1)
    assert bootstrap_plane(pts, n_resamples=100, groups=lab).method == "bootstrap"
    with pytest.raises(InputError, match="one label per pick"):
        bootstrap_plane(pts, n_resamples=100, groups=lab[:-1])


def test_dip_significance_of_horizontal_and_gently_dipping_planes():
    # Source: the meaning of a 95% confidence level (Efron & Tibshirani 1993): on a truly
    # horizontal plane the 95% interval of the dip reaches 0 in about 95% of samples (more here,
    # since bootstrap and Monte Carlo are added in quadrature), so the dip is called significant
    # in at most about 5%; a 1 degree dip, 70 times its standard error here, always is.
    from scipy.stats import chi2

    from strikeline.attitude import CHI2_2DOF_95, dip_is_significant, plane_confidence

    n_sets, hits_flat, hits_gentle = 60, 0, 0
    for seed in range(n_sets):
        rng = np.random.default_rng(seed)
        xy = rng.uniform(0, 1000, (200, 2))
        noise = rng.normal(0, 1.0, 200)
        for dip, counter in ((0.0, "flat"), (1.0, "gentle")):
            z = 300.0 - np.tan(np.radians(dip)) * xy[:, 0] + noise
            c = plane_confidence(np.column_stack([xy, z]), sigma_z_m=1.0, n_resamples=200, n_draws=200,
                                 seed=seed)
            assert c.dip_significant == dip_is_significant(c.dip_deg, c.dip_ci95_deg, c.horizontal_z2)
            if counter == "flat":
                hits_flat += c.dip_significant
            else:
                hits_gentle += c.dip_significant
    assert hits_flat / n_sets <= 0.1
    assert hits_gentle == n_sets
    # the two tests of dip_is_significant, worked by hand (chi-square 2 dof, 95%: 5.991,
    # Source: scipy.stats.chi2.ppf(0.95, 2) = -2 ln 0.05)
    assert CHI2_2DOF_95 == pytest.approx(-2.0 * np.log(0.05), rel=1e-12)
    assert CHI2_2DOF_95 == pytest.approx(chi2.ppf(0.95, 2), rel=1e-12)
    assert not dip_is_significant(0.4, 0.6, 100.0)  # interval reaches 0
    assert not dip_is_significant(0.4, 0.3, 5.9)  # horizontal inside the tilt's 95% ellipse
    assert dip_is_significant(0.4, 0.3, 6.1)
    assert not dip_is_significant(0.0, None)  # an exactly level three-point plane
    np.testing.assert_array_equal(dip_is_significant(np.array([0.4, 5.0]), np.array([0.6, 0.6]),
                                                     np.array([50.0, 50.0])), [False, True])


def test_tilt_covariance_and_its_mahalanobis_distance():
    # Source: hand-worked - a tilt (horizontal part of the unit normal) of 0.1 (dip asin 0.1 =
    # 5.74 deg toward 090) with a tilt variance of 0.02^2 along the dip and 0.5^2 across it:
    # z2 = (0.1 / 0.02)^2 = 25; the spread across the dip (a strike poorly fixed) does not make
    # the plane horizontal
    from strikeline.attitude import PlaneConfidence

    c = PlaneConfidence(0.5, 180.0, 20.0, 100, "bootstrap", float(np.degrees(np.arcsin(0.1))), 90.0, 50,
                        (0.02 ** 2, 0.0, 0.0, 0.5 ** 2))
    assert c.horizontal_z2 == pytest.approx(25.0, rel=1e-9)
    assert c.dip_significant  # although the pole's cone (20 deg) reaches the vertical
    c = PlaneConfidence(0.5, 180.0, 20.0, 100, "bootstrap", float(np.degrees(np.arcsin(0.1))), 90.0, 50,
                        (0.5 ** 2, 0.0, 0.0, 0.02 ** 2))
    assert c.horizontal_z2 == pytest.approx(0.04, rel=1e-9) and not c.dip_significant
    # replicate-based and analytic tilt covariances of the same noisy plane agree (first order)
    from strikeline.attitude import analytic_plane_confidence, bootstrap_plane

    rng = np.random.default_rng(3)
    xy = rng.uniform(0, 1000, (400, 2))
    pts = np.column_stack([xy, 100 - 0.05 * xy[:, 0] + rng.normal(0, 1.0, 400)])
    boot = np.array(bootstrap_plane(pts, n_resamples=400, seed=1).tilt_cov)
    ana = np.array(analytic_plane_confidence(pts).tilt_cov)
    assert np.allclose(boot[[0, 3]], ana[[0, 3]], rtol=0.3)
