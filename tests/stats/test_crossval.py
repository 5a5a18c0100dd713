"""Cross-validation and GCV (strikeline.stats, and the spline's smoothing choice).

Exact fold assignments on hand-made groups first; then the GCV function against the formula
of Craven & Wahba (1979) computed directly from the influence matrix, and leave-one-out
cross-validation of the quadratic trend against the PRESS identity of least squares.
"""
from __future__ import annotations

import numpy as np
import pytest

from strikeline.stats import (CVScore, cross_validate, gcv_from_spectrum, make_folds,
                                 segment_groups, select_model, spatial_block_groups)
from strikeline.errors import InputError
from strikeline.surfaces import fit_surface, tps_kernel

#: Source: analytic -- greedy balancing of groups of sizes 3, 2, 1 into 2 folds: {3}, {2, 1}.
FOLDS_321 = [0, 0, 0, 1, 1, 1]
#: Relative agreement of the library's GCV score with the direct formula (float64 rounding
#: of two different computations of the same number).
GCV_RTOL = 1e-7
#: Agreement of the LOO RMSE with PRESS (both exact least squares; float64 rounding).
PRESS_RTOL = 1e-8


def _score(rmse, se):
    return CVScore(rmse, np.array([rmse]), se, 1, 1.0, np.zeros(1))


# --- folds and groups --------------------------------------------------------------------

def test_make_folds_balances_whole_groups():
    assert make_folds([1, 1, 1, 2, 2, 3], n_folds=2).tolist() == FOLDS_321


def test_make_folds_never_splits_a_group_and_is_deterministic():
    rng = np.random.default_rng(0)
    g = rng.integers(0, 40, 1000)
    f1 = make_folds(g, n_folds=5, seed=3)
    f2 = make_folds(g, n_folds=5, seed=3)
    assert np.array_equal(f1, f2)
    for lab in np.unique(g):
        assert len(np.unique(f1[g == lab])) == 1
    sizes = np.bincount(f1)
    assert len(sizes) == 5 and sizes.max() - sizes.min() <= np.bincount(g).max()


def test_make_folds_needs_two_groups():
    with pytest.raises(InputError, match="at least two groups"):
        make_folds([7, 7, 7])


def test_spatial_blocks_of_four_corners():
    # Source: analytic -- a 100 m square cut into 4 blocks of 50 m.
    x = np.array([1.0, 99.0, 1.0, 99.0, 100.0])
    y = np.array([1.0, 1.0, 99.0, 99.0, 100.0])
    lab = spatial_block_groups(x, y, n_blocks=4)
    assert len(np.unique(lab[:4])) == 4 and lab[4] != lab[0]


def test_segment_groups_split_contacts_by_block():
    x = np.array([0.0, 10.0, 60.0, 0.0, 10.0])
    y = np.zeros(5)
    lab = segment_groups(x, y, [1, 1, 1, 2, 2], block_m=50.0)
    assert lab[0] == lab[1] and lab[1] != lab[2]      # one contact, two blocks
    assert lab[3] == lab[4] and lab[3] != lab[0]      # same block, other contact
    assert len(np.unique(lab)) == 3


def test_select_model_one_se_rule_prefers_the_simpler_model():
    scores = {"plane": _score(1.05, 0.2), "trend2": _score(1.2, 0.2), "spline": _score(1.0, 0.1)}
    order = ("plane", "trend2", "spline")
    assert select_model(scores, order=order, rule="min") == "spline"
    assert select_model(scores, order=order, rule="one_se") == "plane"  # 1.05 <= 1.0 + 0.1
    scores["plane"] = _score(1.2, 0.2)
    assert select_model(scores, order=order, rule="one_se") == "spline"
    with pytest.raises(InputError, match="one_se, min"):
        select_model(scores, order=order, rule="best")
    with pytest.raises(InputError, match="no surface model"):
        select_model({"plane": _score(np.nan, np.nan)}, order=order)


def test_cross_validate_reports_failed_fits():
    from strikeline.errors import UndeterminedError

    def fails(train, test):
        raise UndeterminedError("too few picks")
    s = cross_validate(fails, np.zeros((4, 3)), [0, 0, 1, 1])
    assert np.isnan(s.rmse_m) and "too few picks" in s.reason


# --- GCV ---------------------------------------------------------------------------------

def _small_noisy_case(n=40, seed=2):
    rng = np.random.default_rng(seed)
    xy = rng.uniform(0, 500, (n, 2))
    z = 100 + 0.1 * xy[:, 0] + 5 * np.sin(xy[:, 1] / 80) + rng.normal(0, 0.8, n)
    return np.column_stack([xy, z])


def _direct_gcv(u, z, lam):
    """V(λ) of Craven & Wahba (1979) from the influence matrix built explicitly.

    Source: Craven & Wahba (1979), Numer. Math. 31, 377-403 -- V(λ) = (1/n)||(I-A)z||² /
    [(1/n) tr(I-A)]², with A(λ) the influence matrix of the spline minimising
    (1/n)Σ(z_i - f(x_i))² + λJ(f): here from the inverse of the bordered TPS system.
    """
    n = len(z)
    K = tps_kernel(((u[:, None, :] - u[None, :, :]) ** 2).sum(-1))
    T = np.column_stack([np.ones(n), u])
    M = np.block([[K + n * lam * np.eye(n), T], [T.T, np.zeros((3, 3))]])
    C = np.linalg.inv(M)[:n, :n]  # z -> radial coefficients
    A = np.eye(n) - n * lam * C   # fitted values = z - nλ c
    r = (np.eye(n) - A) @ z
    return (r @ r / n) / (np.trace(np.eye(n) - A) / n) ** 2, np.trace(A)


def test_gcv_score_and_minimum_agree_with_the_direct_formula():
    p = _small_noisy_case()
    m = fit_surface(p, model="spline", smoothing="gcv", cross_validate_model=False)
    u = (p[:, :2] - m.params["origin_m"]) / m.params["scale_m"]
    lam = m.params["smoothing"]
    assert lam > 0  # noisy data: GCV smooths
    v_direct, edf_direct = _direct_gcv(u, p[:, 2], lam)
    assert m.params["gcv_score_m2"] == pytest.approx(v_direct, rel=GCV_RTOL)
    assert m.params["edf"] == pytest.approx(edf_direct, rel=GCV_RTOL)
    # brute force over a fine λ grid: nothing beats the library's choice
    brute = [_direct_gcv(u, p[:, 2], l)[0] for l in lam * np.logspace(-2, 2, 41)]
    assert min(brute) >= v_direct * (1 - 1e-6)
    assert max(brute) > v_direct * 1.01  # the grid spans a real minimum


def test_gcv_limit_at_zero_smoothing_matches_tiny_smoothing():
    p = _small_noisy_case(n=25, seed=5)
    m = fit_surface(p, model="spline", smoothing=0.0, cross_validate_model=False)
    u = (p[:, :2] - m.params["origin_m"]) / m.params["scale_m"]
    v_tiny, edf = _direct_gcv(u, p[:, 2], 1e-11)
    assert m.params["gcv_score_m2"] == pytest.approx(v_tiny, rel=1e-5)
    assert m.params["edf"] == pytest.approx(25.0)
    assert edf == pytest.approx(25.0, rel=1e-6)


def test_gcv_from_spectrum_of_identity_kernel():
    # Source: analytic -- with μ_j = 1 and b_j = 1 (m of them), nλ = 1 gives
    # RSS = m/4, tr(I - A) = m/2, V = n (m/4) / (m/2)^2 = n/m.
    V, rss, tr = gcv_from_spectrum(np.ones(7), np.ones(7), 10, 1.0)
    assert rss[0] == pytest.approx(7 / 4) and tr[0] == pytest.approx(7 / 2)
    assert V[0] == pytest.approx(10 / 7)


# --- leave-one-out vs PRESS --------------------------------------------------------------

def test_leave_one_out_of_trend2_equals_press():
    rng = np.random.default_rng(11)
    n = 30
    xy = rng.uniform(0, 1000, (n, 2))
    z = 50 + 0.02 * xy[:, 0] - 3e-5 * xy[:, 1] ** 2 + rng.normal(0, 1.5, n)
    m = fit_surface(np.column_stack([xy, z]), model="trend2", groups=np.arange(n),
                    n_folds=n, taper_m=1e12)
    # Source: Allen, D. M. (1974), Technometrics 16(1), 125-127 -- the PRESS residual of
    # ordinary least squares is e_i / (1 - h_ii), h the hat matrix.
    X = np.column_stack([np.ones(n), xy[:, 0], xy[:, 1], xy[:, 0] ** 2, xy[:, 0] * xy[:, 1],
                         xy[:, 1] ** 2])
    H = X @ np.linalg.pinv(X)
    e = z - H @ z
    press_rmse = np.sqrt(np.mean((e / (1 - np.diag(H))) ** 2))
    assert m.n_folds == n
    assert m.cv_rmse_m["trend2"] == pytest.approx(press_rmse, rel=PRESS_RTOL)


# --- hold-out blocks sized from the map ----------------------------------------------------
#: Source: analytic -- between two parallel lines 400 m apart, cells lie uniformly 0-200 m from
#: the nearer line, so the median distance is 100 m (the lattice sampling adds a few metres).
TWO_LINES_GAP_M = 100.0


def test_typical_gap_between_two_parallel_lines_is_a_quarter_of_their_spacing():
    from strikeline.stats import typical_gap_m
    x = np.linspace(0, 2000, 801)
    xy = np.r_[np.c_[x, np.zeros_like(x)], np.c_[x, np.full_like(x, 400.0)]]
    assert typical_gap_m(xy) == pytest.approx(TWO_LINES_GAP_M, rel=0.05)


def test_holdout_block_is_the_largest_of_gap_vertex_spacing_correlation_and_cells():
    from strikeline.stats import holdout_block_m, typical_gap_m
    x = np.linspace(0, 2000, 801)
    xy = np.r_[np.c_[x, np.zeros_like(x)], np.c_[x, np.full_like(x, 400.0)]]
    gap = typical_gap_m(xy)
    assert holdout_block_m(xy) == pytest.approx(gap)
    assert holdout_block_m(xy, vertex_spacing_m=80.0) == pytest.approx(160.0)
    assert holdout_block_m(xy, correlation_m=150.0) == pytest.approx(300.0)
    assert holdout_block_m(xy, cell_m=50.0) == pytest.approx(150.0)


def test_holdout_block_takes_a_gap_already_computed_for_the_same_picks():
    from strikeline.stats import holdout_block_m
    x = np.linspace(0, 2000, 801)
    xy = np.r_[np.c_[x, np.zeros_like(x)], np.c_[x, np.full_like(x, 400.0)]]
    # Source: the two-line gap above (a quarter of the spacing) given in place of its triangulation
    assert holdout_block_m(xy, gap_m=TWO_LINES_GAP_M) == TWO_LINES_GAP_M
    assert holdout_block_m(xy, gap_m=TWO_LINES_GAP_M, correlation_m=150.0) == 300.0
    assert holdout_block_m(xy, gap_m=holdout_block_m(xy), vertex_spacing_m=1.0) == holdout_block_m(xy)


def _moving_average_line(width_steps, n=4000, step_m=5.0, seed=0):
    rng = np.random.default_rng(seed)
    s = np.arange(n) * step_m
    e = np.convolve(rng.normal(size=n + width_steps), np.ones(width_steps) / width_steps,
                    "valid")[:n]
    # a winding line in map view, on a dipping plane, with the correlated error added
    x, y = s * 0.8 + 30 * np.sin(s / 300.0), s * 0.6
    return np.column_stack([x, y, 500 - 0.05 * x + 0.02 * y + 5.0 * e]), s


def test_residual_correlation_matches_the_moving_average_formula():
    from strikeline.stats import residual_correlation_m
    # Source: textbook autocorrelation of a moving average of W white-noise terms,
    # rho(h) = 1 - h/W for h < W (Box & Jenkins, Time Series Analysis, 1976; from memory), so
    # rho = 1/e at h = W (1 - 1/e): 40 steps of 5 m -> 126.4 m. Steps along the line are
    # slightly longer than 5 m, so lags come out a little longer.
    xyz, _ = _moving_average_line(40)
    expected = 40 * 5.0 * (1 - np.exp(-1))
    assert residual_correlation_m(xyz) == pytest.approx(expected, rel=0.25)


def test_residual_correlation_is_not_stretched_by_a_mistraced_stretch():
    from strikeline.stats import residual_correlation_m
    xyz, s = _moving_average_line(40, seed=1)
    clean = residual_correlation_m(xyz)
    bad = xyz.copy()
    bad[(s > 8000) & (s < 9500), 2] += 25.0  # 7.5 % of the line 25 m off: a gross blunder
    assert residual_correlation_m(bad) == pytest.approx(clean, rel=0.3)


# --- model choice against the stated pick error --------------------------------------------
def _cv(rmse, se=0.1, n=400, groups=40, seed=0, gross=0.0):
    rng = np.random.default_rng(seed)
    e = rng.normal(0, rmse, n)
    if gross:
        e[: n // 10] += gross
    r = float(np.sqrt(np.mean(e * e)))
    return CVScore(r, np.array([r, r]), se, n, 10.0, e, n_groups=groups)


def test_choose_model_keeps_the_plane_when_the_gain_is_below_the_stated_error():
    from strikeline.stats import choose_model
    scores = {"plane": _cv(2.4), "trend2": _cv(2.3, seed=1), "spline": _cv(1.5, seed=2)}
    c = choose_model(scores, order=["plane", "trend2", "spline"], sigma_m=2.0)
    assert c.chosen == "plane" and "within" in c.reason and c.chi2["plane"]["consistent"]
    # without a stated error the one-standard-error rule applies: spline is better by > SE
    assert choose_model(scores, order=["plane", "trend2", "spline"]).chosen == "spline"


def test_choose_model_refuses_a_plane_whose_residuals_are_many_times_the_stated_error():
    from strikeline.stats import choose_model
    from scipy.stats import chi2
    # plane 35 m, spline 2.1 m against sigma 2 m: the chi-square test rejects the plane
    scores = {"plane": _cv(35.0, se=8.0), "spline": _cv(2.1, seed=3)}
    c = choose_model(scores, order=["plane", "spline"], sigma_m=2.0)
    assert c.chosen == "spline"
    # Source: scipy.stats.chi2.ppf as the reference for the critical value (scipy.special.chdtri)
    assert c.chi2["plane"]["critical"] == pytest.approx(chi2.ppf(0.999, 40), rel=1e-10)
    assert not c.chi2["plane"]["consistent"] and c.chi2["spline"]["consistent"]
    # within the tolerance (plane - best < max(SE, sigma)) yet inconsistent: moved to spline
    scores = {"plane": _cv(3.6, se=0.5), "spline": _cv(1.9, seed=4)}
    c = choose_model(scores, order=["plane", "spline"], sigma_m=2.0)
    assert c.chosen == "spline" and "chi-square" in c.reason


def test_choose_model_robust_ignores_a_few_gross_errors():
    from strikeline.stats import choose_model
    # 10 % of the plane's held-out errors are 60 m off (a mistraced stretch): by RMSE the
    # spline wins, by the robust RMS the plane fits the bulk of the picks
    scores = {"plane": _cv(1.0, gross=60.0), "spline": _cv(0.9, seed=5, gross=5.0)}
    order = ["plane", "spline"]
    assert choose_model(scores, order=order, sigma_m=1.0).chosen == "spline"
    assert choose_model(scores, order=order, sigma_m=1.0, robust=True).chosen == "plane"


def test_error_growth_calibrates_intervals_on_fresh_errors():
    from strikeline.stats import fit_error_growth
    rng = np.random.default_rng(7)

    def draw(n):
        d = rng.uniform(0, 200, n)
        # Source: the model itself -- variance 1 + (d/50)^1.5 m^2 with normal errors
        return d, rng.normal(0, 1, n) * np.sqrt(1 + (d / 50.0) ** 1.5)
    d, e = draw(3000)
    g = fit_error_growth(e, d, 1.0)
    d2, e2 = draw(20000)
    se = g.kappa * np.sqrt(1 + g.excess_variance(d2))
    cover = np.mean(np.abs(e2) <= 1.959963984540054 * se)
    assert 0.93 <= cover <= 0.97  # 95 % intervals hold 95 % of fresh errors
    assert 1.0 <= g.alpha <= 2.0


def test_trimmed_score_scales_by_the_truncated_normal_variance():
    from scipy.stats import norm, truncnorm

    from strikeline.stats.choice import TRIM_FRACTION, _TRIMMED_NORMAL_VAR, trimmed_mean_square

    q = norm.ppf(1.0 - TRIM_FRACTION / 2.0)
    # Source: scipy.stats.truncnorm, the variance of a standard normal truncated to (-q, q)
    assert _TRIMMED_NORMAL_VAR == pytest.approx(float(truncnorm.var(-q, q)), rel=1e-12)
    # the scaled trimmed mean square of many normal errors estimates their variance (common practice:
    # a consistent scale estimate); 400,000 draws put its sampling error near 0.2 % (1 sigma)
    e = np.random.default_rng(11).normal(0.0, 3.0, 400_000)
    assert trimmed_mean_square(e) == pytest.approx(9.0, rel=0.006)
