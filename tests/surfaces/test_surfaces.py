"""Surface models (strikeline.surfaces): plane, trend2, thin-plate spline, auto.

Analytic cases first (a plane and a quadratic recovered exactly, the TPS against scipy's
RBFInterpolator), then realistic synthetic cases with stated tolerances: a fold with analytic
truth sampled along contact lines, planar noisy data, boreholes, dip measurements,
extrapolation, grid evaluation and uncertainty.
"""
from __future__ import annotations

import json

import numpy as np
import pytest
import scipy
from scipy.interpolate import RBFInterpolator

from strikeline.errors import CancelledError, InputError, UndeterminedError
from strikeline.geometry.grid import Grid
from strikeline.surfaces import MODELS, fit_surface

#: Source: scipy.interpolate.RBFInterpolator(kernel="thin_plate_spline") (general-purpose
#: reference library, version below) -- the agreement the project requires.
SCIPY_VERSION = scipy.__version__
SCIPY_TPS_TOL_M = 1e-6
#: Project target (acceptance criterion of the surface models).
FOLD_RMS_TOL_M = 2.0
PLANE_EQUIVALENT_TOL_M = 0.5
GRID_TOL_M = 0.1
#: common practice: a plane falling 600 m over 1,200 m dips atan(0.5) = 26.565°.
DIP_ATAN_HALF_DEG = 26.565051177077990


# --- synthetic data ----------------------------------------------------------------------

def _contact_lines(rng, n_lines, extent, step=10.0, length=(1000.0, 2500.0)):
    """Meandering map lines (like mapped contacts), clipped to the square; (xy, line id)."""
    xy, ids = [], []
    for i in range(n_lines):
        n = int(rng.uniform(*length) / step)
        x0, y0 = rng.uniform(0.1 * extent, 0.9 * extent, 2)
        h = rng.uniform(0, 2 * np.pi) + np.cumsum(rng.normal(0, 0.03, n))
        x, y = x0 + np.cumsum(step * np.cos(h)), y0 + np.cumsum(step * np.sin(h))
        k = (x > 0) & (x < extent) & (y > 0) & (y < extent)
        xy.append(np.column_stack([x[k], y[k]]))
        ids.append(np.full(k.sum(), i))
    return np.vstack(xy), np.concatenate(ids)


FOLD_EXTENT_M = 3000.0


def fold_truth(x, y):
    """Source: analytic truth of the test -- z = z0 + a x + A sin(2π y / λ)."""
    return 200.0 + 0.05 * x + 30.0 * np.sin(2 * np.pi * y / 2500.0)


@pytest.fixture(scope="module")
def fold():
    rng = np.random.default_rng(1)
    xy, g = _contact_lines(rng, 20, FOLD_EXTENT_M)
    z = fold_truth(xy[:, 0], xy[:, 1]) + rng.normal(0, 0.5, len(xy))
    picks = np.column_stack([xy, z])
    model = fit_surface(picks, model="auto", groups=g, max_points=400)
    return picks, g, model


@pytest.fixture(scope="module")
def planar():
    rng = np.random.default_rng(2)
    xy, g = _contact_lines(rng, 15, 2000.0, length=(600.0, 1500.0))
    truth = lambda x, y: 640.0 - 0.12 * x + 0.05 * y  # noqa: E731 - Source: analytic plane
    z = truth(xy[:, 0], xy[:, 1]) + rng.normal(0, 1.0, len(xy))
    return np.column_stack([xy, z]), g, truth


def _inside_lattice(model, extent, n=41):
    X, Y = np.meshgrid(np.linspace(0, extent, n), np.linspace(0, extent, n))
    inside = model.hull_distance(X, Y) == 0
    return X[inside], Y[inside]


def _normal(gx, gy):
    n = np.array([-gx, -gy, 1.0])
    return n / np.linalg.norm(n)


def _angle_deg(a, b):
    return np.degrees(np.arctan2(np.linalg.norm(np.cross(a, b)), abs(a @ b)))


# --- analytic cases ----------------------------------------------------------------------

def test_plane_model_recovers_an_exact_plane_everywhere():
    x, y = np.meshgrid(np.linspace(0, 1200, 7), np.linspace(0, 800, 5))
    z = 900.0 - 600.0 * x / 1200.0  # falls 600 m over 1,200 m to the east
    m = fit_surface(np.column_stack([x.ravel(), y.ravel(), z.ravel()]), model="plane")
    qx, qy = np.array([-5000.0, 600.0, 9000.0]), np.array([3000.0, 400.0, -7000.0])
    np.testing.assert_allclose(m.evaluate(qx, qy), 900.0 - 0.5 * qx, atol=1e-8)
    assert m.params["dip_deg"] == pytest.approx(DIP_ATAN_HALF_DEG, abs=1e-9)
    assert m.params["dip_direction_deg"] == pytest.approx(90.0, abs=1e-9)
    dd, d = m.dip(qx, qy)
    np.testing.assert_allclose(d, DIP_ATAN_HALF_DEG, atol=1e-9)
    np.testing.assert_allclose(dd, 90.0, atol=1e-9)


def test_trend2_recovers_an_exact_quadratic_inside_the_hull():
    rng = np.random.default_rng(3)
    xy = rng.uniform(0, 1000, (80, 2))

    def quad(x, y):  # Source: analytic quadratic
        return 100 + 0.2 * x - 0.1 * y + 2e-4 * x * x - 1e-4 * x * y + 3e-4 * y * y
    m = fit_surface(np.column_stack([xy, quad(xy[:, 0], xy[:, 1])]), model="trend2")
    X, Y = _inside_lattice(m, 1000.0, 21)
    np.testing.assert_allclose(m.evaluate(X, Y), quad(X, Y), atol=1e-8)
    gx, gy = m.gradient(X, Y)
    np.testing.assert_allclose(gx, 0.2 + 4e-4 * X - 1e-4 * Y, atol=1e-10)
    np.testing.assert_allclose(gy, -0.1 - 1e-4 * X + 6e-4 * Y, atol=1e-10)


def test_spline_without_smoothing_matches_scipy_and_interpolates_exactly():
    rng = np.random.default_rng(4)
    xy = rng.uniform(0, 2000, (120, 2))
    z = fold_truth(xy[:, 0], xy[:, 1]) + rng.normal(0, 2.0, 120)
    m = fit_surface(np.column_stack([xy, z]), model="spline", smoothing=0.0,
                    cross_validate_model=False)
    np.testing.assert_allclose(m.evaluate(xy[:, 0], xy[:, 1]), z, atol=1e-9)
    X, Y = _inside_lattice(m, 2000.0, 31)
    ref = RBFInterpolator(xy, z, kernel="thin_plate_spline")(np.column_stack([X, Y]))
    assert np.max(np.abs(m.evaluate(X, Y) - ref)) < SCIPY_TPS_TOL_M
    assert m.params["edf"] == pytest.approx(120.0)


# --- the fold and planar data ------------------------------------------------------------

def test_spline_on_a_fold_is_within_2_m_rms_of_truth_and_auto_chooses_it(fold):
    picks, g, m = fold
    assert m.kind == "spline" and m.chosen == "spline"
    assert set(m.cv_rmse_m) == set(MODELS)
    assert m.cv_rmse_m["spline"] < min(m.cv_rmse_m["plane"], m.cv_rmse_m["trend2"])
    X, Y = _inside_lattice(m, FOLD_EXTENT_M)
    err = m.evaluate(X, Y) - fold_truth(X, Y)
    assert np.sqrt(np.mean(err ** 2)) < FOLD_RMS_TOL_M
    # the plane cannot follow the fold: the comparison can fail
    plane = fit_surface(picks, model="plane", cross_validate_model=False)
    assert np.sqrt(np.mean((plane.evaluate(X, Y) - fold_truth(X, Y)) ** 2)) > 5 * FOLD_RMS_TOL_M


def test_auto_on_planar_data_chooses_the_plane_or_a_surface_within_half_a_metre(planar):
    picks, g, truth = planar
    m = fit_surface(picks, model="auto", groups=g, max_points=300)
    plane = fit_surface(picks, model="plane", cross_validate_model=False, max_points=300)
    X, Y = _inside_lattice(m, 2000.0)
    if m.kind != "plane":
        assert np.max(np.abs(m.evaluate(X, Y) - plane.evaluate(X, Y))) < PLANE_EQUIVALENT_TOL_M
    assert np.max(np.abs(plane.evaluate(X, Y) - truth(X, Y))) < PLANE_EQUIVALENT_TOL_M
    assert all(np.isfinite(v) for v in m.cv_rmse_m.values())


def test_summary_is_json_ready(fold):
    s = fold[2].summary()
    text = json.dumps(s)
    assert '"chosen": "spline"' in text
    assert set(s["cv_rmse_m"]) == set(MODELS)


# --- boreholes ---------------------------------------------------------------------------

@pytest.mark.parametrize("kind", MODELS)
def test_boreholes_are_honoured_within_their_stated_error(planar, kind):
    picks, g, truth = planar
    # three boreholes off the picks' plane by more than their stated errors
    bh = np.array([[400.0, 500.0, truth(400, 500) + 6.0, 1.0],
                   [1500.0, 700.0, truth(1500, 700) + 4.0, 0.0],
                   [900.0, 1500.0, truth(900, 1500) - 3.0, 0.5]])
    free = fit_surface(picks, model=kind, max_points=300, cross_validate_model=False)
    free_misfit = free.evaluate(bh[:, 0], bh[:, 1]) - bh[:, 2]
    assert np.any(np.abs(free_misfit) > bh[:, 3] + 1.0)  # without them they are missed
    m = fit_surface(picks, model=kind, boreholes=bh, max_points=300,
                    cross_validate_model=False)
    misfit = m.borehole_misfit_m()
    assert np.all(np.abs(misfit) <= bh[:, 3] + 1e-6)
    assert abs(misfit[1]) < 1e-6  # sigma 0: exact


def test_a_plane_cannot_honour_five_exact_boreholes_on_a_dome_and_auto_skips_it(planar):
    picks, g, truth = planar
    cx, cy = 1000.0, 1000.0
    pts = [(cx, cy), (cx - 400, cy), (cx + 400, cy), (cx, cy - 400), (cx, cy + 400)]
    bh = np.array([[x, y, truth(x, y) + (15.0 if (x, y) == (cx, cy) else 0.0)] for x, y in pts])
    with pytest.raises(UndeterminedError, match="cannot pass within the stated errors"):
        fit_surface(picks, model="plane", boreholes=bh, borehole_sigma_m=0.0, max_points=300,
                    cross_validate_model=False)
    m = fit_surface(picks, model="auto", boreholes=bh, borehole_sigma_m=0.0, groups=g, max_points=300)
    assert m.kind != "plane" and np.isnan(m.cv_rmse_m["plane"])
    assert "boreholes" in m.cv_skipped["plane"]
    assert np.all(np.abs(m.borehole_misfit_m()) < 1e-6)


# --- dip measurements --------------------------------------------------------------------

def _narrow_band(seed=7):
    """Picks along a strip 30 m wide striking east: the dip is only weakly determined."""
    rng = np.random.default_rng(seed)
    x, y = rng.uniform(0, 2000, 60), rng.uniform(-15, 15, 60)
    z = 500 + np.tan(np.radians(10.0)) * y + rng.normal(0, 2.0, 60)  # dips 10° south
    return np.column_stack([x, y, z])


@pytest.mark.parametrize("kind", MODELS)
def test_a_dip_measurement_pulls_the_local_dip_toward_it(kind):
    picks = _narrow_band()
    at = (1000.0, 0.0)
    measured_dip, measured_dd = 16.0, 180.0
    # common practice: the upward normal of a plane dipping d toward dd
    n_meas = np.array([np.sin(np.radians(measured_dip)) * np.sin(np.radians(measured_dd)),
                       np.sin(np.radians(measured_dip)) * np.cos(np.radians(measured_dd)),
                       np.cos(np.radians(measured_dip))])
    before = fit_surface(picks, model=kind, cross_validate_model=False)
    after = fit_surface(picks, model=kind, cross_validate_model=False,
                        orientations=[[*at, measured_dip, measured_dd]],
                        orientation_sigma_deg=2.0)
    a0 = _angle_deg(_normal(*(float(g) for g in before.gradient(*at))), n_meas)
    a1 = _angle_deg(_normal(*(float(g) for g in after.gradient(*at))), n_meas)
    assert a1 < a0 - 0.5, (a0, a1)


@pytest.mark.parametrize("kind", MODELS)
def test_an_exact_dip_measurement_fixes_the_mean_slope_over_its_footprint(kind):
    picks = _narrow_band(seed=8)
    dip, dd, h = 20.0, 150.0, 12.0
    m = fit_surface(picks, model=kind, cross_validate_model=False,
                    orientations=[[1000.0, 0.0, dip, dd, 0.0]], orientation_footprint_m=h)
    # Source: analytic -- gradient of a plane dipping d toward dd is -tan(d)(sin dd, cos dd)
    gx, gy = -np.tan(np.radians(dip)) * np.sin(np.radians(dd)), \
        -np.tan(np.radians(dip)) * np.cos(np.radians(dd))
    sx = (m.evaluate(1000.0 + h, 0.0) - m.evaluate(1000.0 - h, 0.0)) / (2 * h)
    sy = (m.evaluate(1000.0, h) - m.evaluate(1000.0, -h)) / (2 * h)
    assert float(sx) == pytest.approx(gx, abs=1e-6)
    assert float(sy) == pytest.approx(gy, abs=1e-6)


def test_collinear_picks_with_a_dip_measurement_determine_a_plane():
    x = np.linspace(0, 1000, 50)
    picks = np.column_stack([x, np.zeros(50), 300 - 0.1 * x])  # one straight line
    with pytest.raises(UndeterminedError, match="one straight line"):
        fit_surface(picks, model="plane", cross_validate_model=False)
    dip = np.degrees(np.arctan(np.hypot(0.1, 0.2)))
    dd = np.degrees(np.arctan2(0.1, 0.2))  # Source: analytic -- descent toward (+0.1, +0.2)
    m = fit_surface(picks, model="plane", cross_validate_model=False,
                    orientations=[[500.0, 0.0, dip, dd]])
    assert m.params["dip_deg"] == pytest.approx(dip, abs=0.05)
    assert float(m.evaluate(500.0, 100.0)) == pytest.approx(300 - 50 - 20, abs=0.5)


# --- extrapolation -----------------------------------------------------------------------

@pytest.mark.parametrize("kind", ["trend2", "spline"])
def test_far_from_data_the_surface_is_the_trend_plane(fold, kind):
    picks, g, _ = fold
    m = fit_surface(picks, model=kind, max_points=300, cross_validate_model=False)
    plane = fit_surface(picks, model="plane", max_points=300, cross_validate_model=False)
    far_x = np.array([-3 * m.taper_m, FOLD_EXTENT_M + 2 * m.taper_m, 1500.0])
    far_y = np.array([1500.0, 800.0, FOLD_EXTENT_M + 1.5 * m.taper_m])
    assert np.all(m.hull_distance(far_x, far_y) > m.taper_m)
    np.testing.assert_allclose(m.evaluate(far_x, far_y), plane.evaluate(far_x, far_y),
                               atol=1e-8)
    # and it is continuous across the hull: no step at the boundary
    X, Y = _inside_lattice(m, FOLD_EXTENT_M, 21)
    edge = np.argmax(X)  # an inside point near the hull edge, then step out east
    z_in = m.evaluate(X[edge], Y[edge])
    z_out = m.evaluate(X[edge] + 1.0, Y[edge])
    assert abs(float(z_out - z_in)) < 1.0  # slope well below 1 m per m
    assert m.is_extrapolated(far_x, far_y).all()


def test_gradient_matches_finite_differences_across_the_taper(fold):
    picks, g, m = fold
    x = np.array([1500.0, -200.0, FOLD_EXTENT_M + 300.0])
    y = np.array([1500.0, 1000.0, 2000.0])
    h = 1e-3
    gx, gy = m.gradient(x, y)
    fx = (m.evaluate(x + h, y) - m.evaluate(x - h, y)) / (2 * h)
    fy = (m.evaluate(x, y + h) - m.evaluate(x, y - h)) / (2 * h)
    np.testing.assert_allclose(gx, fx, atol=1e-6)
    np.testing.assert_allclose(gy, fy, atol=1e-6)


# --- grids -------------------------------------------------------------------------------

def test_evaluate_grid_agrees_with_full_evaluation(fold):
    m = fold[2]
    grid = Grid((-300.0, 12.0, 0.0, 3300.0, 0.0, -12.0), (300, 300))
    z, rep = m.evaluate_grid(grid, return_report=True)
    assert rep.method == "coarse" and rep.step_cells > 1
    X, Y = grid.mesh()
    full = m.evaluate(X, Y)
    assert np.max(np.abs(z - full)) < GRID_TOL_M
    # a tolerance no interpolation can meet falls back to full evaluation
    z2, rep2 = m.evaluate_grid(Grid((0.0, 50.0, 0.0, 3000.0, 0.0, -50.0), (60, 60)),
                               tolerance_m=1e-12, return_report=True)
    assert rep2.method == "full"


def test_plane_grid_is_evaluated_exactly():
    pts = np.array([[0, 0, 10.0], [100, 0, 20.0], [0, 100, 5.0], [100, 100, 15.0]])
    m = fit_surface(pts, model="plane", cross_validate_model=False)
    grid = Grid((0.0, 10.0, 0.0, 100.0, 0.0, -10.0), (10, 10))
    X, Y = grid.mesh()
    np.testing.assert_allclose(m.evaluate_grid(grid), 10 + 0.1 * X - 0.05 * Y, atol=1e-9)


def test_cancelled_grid_evaluation_raises(fold):
    with pytest.raises(CancelledError):
        fold[2].evaluate_grid(Grid((0.0, 10.0, 0.0, 100.0, 0.0, -10.0), (10, 10)),
                              is_cancelled=lambda: True)


# --- uncertainty and distance ------------------------------------------------------------

def test_trend2_standard_error_is_the_least_squares_prediction_error():
    rng = np.random.default_rng(9)
    n = 50
    xy = rng.uniform(0, 800, (n, 2))
    z = 20 + 0.01 * xy[:, 0] + 1e-5 * xy[:, 1] ** 2 + rng.normal(0, 0.7, n)
    m = fit_surface(np.column_stack([xy, z]), model="trend2", taper_m=1e12,
                    cross_validate_model=False)
    # Source: Draper, N. R. & Smith, H. (1998), Applied Regression Analysis, 3rd ed., Wiley,
    # ch. 3 (from memory): se of a new observation at x0 is s·sqrt(1 + x0ᵀ(XᵀX)⁻¹x0),
    # s² = RSS / (n − p).
    X = np.column_stack([np.ones(n), xy[:, 0], xy[:, 1], xy[:, 0] ** 2, xy[:, 0] * xy[:, 1],
                         xy[:, 1] ** 2])
    beta, rss, *_ = np.linalg.lstsq(X, z, rcond=None)
    s2 = rss[0] / (n - 6)
    q = np.array([[100.0, 700.0], [400.0, 400.0], [1500.0, -300.0]])
    X0 = np.column_stack([np.ones(3), q[:, 0], q[:, 1], q[:, 0] ** 2, q[:, 0] * q[:, 1],
                          q[:, 1] ** 2])
    ref = np.sqrt(s2 * (1 + np.einsum("ij,jk,ik->i", X0, np.linalg.inv(X.T @ X), X0)))
    np.testing.assert_allclose(m.standard_error(q[:, 0], q[:, 1]), ref, rtol=1e-6)
    np.testing.assert_allclose(m.evaluate(q[:, 0], q[:, 1]), X0 @ beta, rtol=1e-9)


def test_spline_standard_error_grows_with_distance_as_documented(fold):
    m = fold[2]
    s = m.params["sigma_m"]
    g = m.growth
    x = np.array([1500.0, 1500.0, 1500.0])
    y = np.array([1500.0, 1700.0, FOLD_EXTENT_M + 2000.0])
    d = m.distance_to_data(x, y)
    # the documented formula: sqrt((max(kappa, 1) param)² + kappa² excess (d/d_ref)^alpha), where the spline's
    # parameter part is its noise times sqrt(min(1, edf / segments)), at most the noise σ̂
    param = m._surface.param_se(x, y)
    assert np.all(param <= s + 1e-12)
    ref = np.sqrt((max(g.kappa, 1.0) * param) ** 2
                  + g.kappa ** 2 * g.excess_m2 * (d / g.distance_ref_m) ** g.alpha)
    np.testing.assert_allclose(m.standard_error(x, y), ref, rtol=1e-12)
    assert 0.5 <= g.alpha <= 2.0 and g.kappa > 0
    order = np.argsort(d)
    assert np.all(np.diff(m.standard_error(x, y)[order]) >= 0)
    grid = Grid((0.0, 100.0, 0.0, 3000.0, 0.0, -100.0), (30, 30))
    X, Y = grid.mesh()
    np.testing.assert_allclose(m.standard_error_grid(grid), m.standard_error(X, Y))


def test_distance_to_data_is_the_euclidean_distance_to_the_nearest_datum(fold):
    picks, g, m = fold
    rng = np.random.default_rng(10)
    q = rng.uniform(-500, 3500, (200, 2))
    data = m.data_xy  # the thinned picks the model used
    # Source: definition of Euclidean nearest-neighbour distance (brute force)
    ref = np.sqrt(((q[:, None, :] - data[None, :, :]) ** 2).sum(-1)).min(axis=1)
    np.testing.assert_allclose(m.distance_to_data(q[:, 0], q[:, 1]), ref, rtol=1e-12)
    np.testing.assert_array_equal(m.is_extrapolated(q[:, 0], q[:, 1]), ref > m.reach_m)


# --- inputs ------------------------------------------------------------------------------

@pytest.mark.parametrize("kwargs,match", [
    ({"model": "kriging"}, "'auto'"),
    ({"smoothing": "loo"}, "'gcv', 'kfold'"),
    ({"smoothing": -1.0}, "smoothing must be"),
    ({"selection": "best"}, "'one_se', 'min'"),
    ({"orientations": [[0, 0, 90.0, 10.0]]}, "between 0 and 89"),
    ({"boreholes": [[0, 0]]}, r"\(n, 3\)"),
    ({"n_folds": 1}, "n_folds must be at least 2"),
])
def test_bad_options_are_refused_with_the_valid_choices(kwargs, match):
    pts = np.random.default_rng(0).uniform(0, 100, (20, 3))
    with pytest.raises(InputError, match=match):
        fit_surface(pts, **kwargs)


def test_too_few_picks_for_each_model():
    pts = np.array([[0, 0, 1.0], [1, 0, 2.0]])
    for kind in MODELS:
        with pytest.raises(UndeterminedError):
            fit_surface(pts, model=kind, cross_validate_model=False)


def test_exact_interpolation_of_two_elevations_at_one_place_is_refused():
    pts = np.array([[0, 0, 1.0], [0, 0, 2.0], [10, 0, 3.0], [0, 10, 4.0], [10, 10, 5.0]])
    with pytest.raises(UndeterminedError, match="same place"):
        fit_surface(pts, model="spline", smoothing=0.0, cross_validate_model=False)
    m = fit_surface(pts, model="spline", cross_validate_model=False)  # GCV smooths instead
    assert 1.0 < float(m.evaluate(0.0, 0.0)) < 2.0


def test_kfold_smoothing_and_cancellation():
    rng = np.random.default_rng(12)
    xy, g = _contact_lines(rng, 8, 2000.0, step=25.0)
    z = fold_truth(xy[:, 0], xy[:, 1]) + rng.normal(0, 0.5, len(xy))
    m = fit_surface(np.column_stack([xy, z]), model="spline", smoothing="kfold", groups=g,
                    max_points=200)
    assert m.params["smoothing"] >= 0 and np.isfinite(m.cv_rmse_m["spline"])
    with pytest.raises(CancelledError):
        fit_surface(np.column_stack([xy, z]), model="auto", is_cancelled=lambda: True)
