"""The map's unit polygons as inequality constraints (strikeline.surfaces.units) and every surface model
honouring them (strikeline.surfaces.fit_surface(bounds=...)).

References: the constrained least-squares optimum is computed independently with scipy's
``minimize(method="trust-constr")`` (SciPy 1.17; Conn, Gould & Toint 2000 trust-region
interior point) on the same objective; the true surfaces of the synthetic cases are written down
here, so whether a unit crops out follows from them exactly.
"""
import numpy as np
import pytest
import shapely
from scipy.optimize import LinearConstraint, minimize

from strikeline.errors import InputError
from strikeline.geometry.grid import Grid
from strikeline.surfaces import BOUND_TOLERANCE_M, fit_surface, tps_kernel
from strikeline.surfaces.units import bound_violation_m, parse_unit_names, unit_bounds

# Tolerance of agreement with scipy's trust-constr optimum (metres): its own gtol/xtol are set
# far below this (common practice: a reference solver's tolerance well under the test's).
QP_AGREEMENT_M = 1e-4


def _grid(n=100, cell=10.0):
    return Grid((0.0, cell, 0.0, n * cell, 0.0, -cell), (n, n))


# --------------------------------------------------------------------------- unit_bounds
def test_lattice_sides_margin_and_tolerance_exact():
    g = _grid()
    dem = np.full(g.shape, 100.0)
    polys = [shapely.box(0, 0, 500, 1000), shapely.box(500, 0, 1000, 1000)]
    ub = unit_bounds(polys, ["Kv", "Jm"], dem, g, units_above="Kv", units_below=["Jm"],
                     spacing_m=100.0, tolerance_m=1.5)
    # Lattice at 50, 150, ..., 950 (anchored at multiples of the spacing); the margin (2 cells
    # = 20 m) drops nothing since every lattice point is 50 m from the outlines.
    assert ub.n_above == 50 and ub.n_below == 50
    above = ub.side == "above"
    assert np.all(ub.bounds[above, 0] < 500) and np.all(ub.bounds[~above, 0] > 500)
    assert np.all(ub.bounds[above, 2] == -np.inf) and np.allclose(ub.bounds[above, 3], 101.5)
    assert np.allclose(ub.bounds[~above, 2], 98.5) and np.all(ub.bounds[~above, 3] == np.inf)
    assert set(ub.unit[above]) == {"Kv"} and set(ub.unit[~above]) == {"Jm"}
    assert ub.margin_m == 20.0 and ub.spacing_m == 100.0


def test_margin_keeps_points_off_the_mapped_contact():
    g = _grid()
    dem = np.full(g.shape, 100.0)
    polys = [shapely.box(0, 0, 500, 1000), shapely.box(500, 0, 1000, 1000)]
    ub = unit_bounds(polys, ["A", "B"], dem, g, units_above="A", units_below="B", spacing_m=10.0,
                     margin_m=33.0, max_points=100_000)
    d = shapely.distance(shapely.points(ub.bounds[:, :2]), shapely.LineString([(500, 0), (500, 1000)]))
    assert d.min() >= 33.0
    # two units on one side merge: their shared outline is no contact and needs no margin
    polys2 = [shapely.box(0, 0, 500, 1000), shapely.box(500, 0, 1000, 1000)]
    ub2 = unit_bounds(polys2, ["A", "A2"], dem, g, units_above="A,A2", spacing_m=10.0, margin_m=33.0,
                      max_points=100_000)
    d2 = shapely.distance(shapely.points(ub2.bounds[:, :2]), shapely.LineString([(500, 0), (500, 1000)]))
    assert d2.min() == pytest.approx(5.0)  # lattice points at 495 and 505
    assert set(ub2.unit) == {"A", "A2"}


def test_ignored_units_overlaps_and_nodata_give_no_point():
    g = _grid()
    dem = np.full(g.shape, 100.0)
    dem[:, :20] = np.nan  # west 200 m without DEM
    polys = [shapely.box(0, 0, 600, 1000), shapely.box(400, 0, 1000, 1000),
             shapely.box(0, 0, 1000, 300)]
    ub = unit_bounds(polys, ["A", "B", "Alluvium"], dem, g, units_above="A", units_below="B",
                     spacing_m=50.0, margin_m=0.0, max_points=10_000)
    x, y = ub.bounds[:, 0], ub.bounds[:, 1]
    assert np.all(x > 200)  # no DEM, no bound
    assert not np.any((x > 400) & (x < 600))  # both sides: contradictory, dropped
    assert np.any(y < 300)  # the superficial polygon neither adds nor removes points


def test_count_is_bounded():
    g = _grid(200, 5.0)
    dem = np.zeros(g.shape)
    ub = unit_bounds([shapely.box(0, 0, 1000, 1000)], ["A"], dem, g, units_above="A", max_points=300)
    assert 0 < len(ub) <= 300


@pytest.mark.parametrize("kw, match", [
    ({"units_above": "A", "units_below": "A"}, "both above and below"),
    ({"units_above": "C"}, r"C not found among the polygons' units \(A, B\)"),
    ({}, "no unit named"),
    ({"units_above": "A", "tolerance_m": -1}, "tolerance_m"),
])
def test_unit_bounds_refuses_bad_lists(kw, match):
    g = _grid()
    with pytest.raises(InputError, match=match):
        unit_bounds([shapely.box(0, 0, 500, 500), shapely.box(500, 0, 900, 500)], ["A", "B"],
                    np.zeros(g.shape), g, **kw)


def test_parse_and_violation():
    assert parse_unit_names("a, b,,a ,c") == ("a", "b", "c")
    assert parse_unit_names(None) == ()
    b = np.array([[0, 0, -np.inf, 10.0], [0, 0, 5.0, np.inf], [0, 0, 1.0, 2.0]])
    assert bound_violation_m(b, [12.0, 4.0, 1.5]).tolist() == [2.0, 1.0, 0.0]


# --------------------------------------------------------------------------- fit_surface(bounds)
def _plane_picks(seed=1):
    rng = np.random.default_rng(seed)
    xy = rng.uniform(0, 1000, (200, 2))
    z = 500 - 0.2 * xy[:, 0] + 0.05 * xy[:, 1] + rng.normal(0, 1.0, 200)
    return xy, z


def _reference_lsq(A, z, B, lo, hi):
    """min ||A c - z||² s.t. lo <= B c <= hi, by scipy's trust-constr (independent reference)."""
    c0 = np.linalg.lstsq(A, z, rcond=None)[0]
    r = minimize(lambda c: np.sum((A @ c - z) ** 2), c0, jac=lambda c: 2 * A.T @ (A @ c - z),
                 hess=lambda c: 2 * A.T @ A, constraints=[LinearConstraint(B, lo, hi)],
                 method="trust-constr", options={"gtol": 1e-12, "xtol": 1e-14, "maxiter": 10_000})
    return r.x


def test_plane_ends_exactly_on_a_bound_it_would_break():
    xy, z = _plane_picks()
    free = fit_surface(np.column_stack([xy, z]), model="plane", cross_validate_model=False)
    # a bound 20 m under the unconstrained plane, outside the picks (a unit above crops out)
    p = np.array([1500.0, 500.0])
    hi = float(free.evaluate(*p)) - 20.0
    m = fit_surface(np.column_stack([xy, z]), model="plane", cross_validate_model=False,
                    bounds=[[p[0], p[1], -np.inf, hi], [200.0, 200.0, 300.0, np.inf]])
    assert float(m.evaluate(*p)) == pytest.approx(hi, abs=1e-6)
    # Source: scipy.optimize.minimize(trust-constr) on the same least squares (km coordinates)
    A = np.column_stack([np.ones(len(z)), xy / 1000.0])
    c = _reference_lsq(A, z, np.array([[1.0, p[0] / 1000, p[1] / 1000]]), -np.inf, hi)
    q = np.array([[0.0, 0.0], [1000.0, 0.0], [0.0, 1000.0], [730.0, 410.0]])
    ref = c[0] + q @ c[1:] / 1000.0
    assert np.allclose(m.evaluate(q[:, 0], q[:, 1]), ref, atol=QP_AGREEMENT_M)


def test_trend2_matches_the_constrained_least_squares_optimum():
    xy, z = _plane_picks(2)
    z = z + 2e-4 * (xy[:, 0] - 500) ** 2
    pts = np.array([[500.0, 500.0], [1200.0, 300.0], [-200.0, 800.0]])
    free = fit_surface(np.column_stack([xy, z]), model="trend2", cross_validate_model=False)
    fz = free.evaluate(pts[:, 0], pts[:, 1])
    lo = np.array([fz[0] + 3.0, -np.inf, fz[2] + 10.0])
    hi = np.array([np.inf, fz[1] - 15.0, np.inf])
    m = fit_surface(np.column_stack([xy, z]), model="trend2", cross_validate_model=False,
                    bounds=np.column_stack([pts, lo, hi]), taper_m=1e6)
    got = m.evaluate(pts[:, 0], pts[:, 1])
    assert np.all(bound_violation_m(np.column_stack([pts, lo, hi]), got) < 1e-6)

    def basis(p):
        u, v = p[:, 0] / 1000, p[:, 1] / 1000
        return np.column_stack([np.ones(len(u)), u, v, u * u, u * v, v * v])

    # Source: scipy.optimize.minimize(trust-constr), an independent solver of the same problem
    c = _reference_lsq(basis(xy), z, basis(pts), lo, hi)
    q = np.array([[100.0, 100.0], [900.0, 200.0], [400.0, 950.0]])
    assert np.allclose(m.evaluate(q[:, 0], q[:, 1]), basis(q) @ c, atol=QP_AGREEMENT_M)


def test_spline_matches_the_constrained_smoothing_spline_optimum():
    # Normalised picks (mean 0, RMS distance 1 from it) so that fit_surface works in these
    # very coordinates and its smoothing λ is the λ of the criterion below.
    rng = np.random.default_rng(5)
    xy = rng.uniform(-1, 1, (25, 2))
    xy -= xy.mean(axis=0)
    xy /= np.sqrt(np.mean(np.sum(xy ** 2, axis=1)))
    z = np.sin(2 * xy[:, 0]) + 0.5 * xy[:, 1] + rng.normal(0, 0.05, len(xy))
    lam = 1e-3
    bp = np.array([[0.3, 1.6], [1.7, -0.2], [-1.5, -1.4], [0.0, 0.1]])
    free = fit_surface(np.column_stack([xy, z]), model="spline", smoothing=lam, cross_validate_model=False,
                       taper_m=1e6, thin_cell_m=1e-6)
    fz = free.evaluate(bp[:, 0], bp[:, 1])
    lo = np.array([fz[0] + 0.5, -np.inf, fz[2] + 0.3, -np.inf])
    hi = np.array([np.inf, fz[1] - 0.4, np.inf, fz[3] + 5.0])  # the last is slack
    bounds = np.column_stack([bp, lo, hi])
    m = fit_surface(np.column_stack([xy, z]), model="spline", smoothing=lam, cross_validate_model=False,
                    taper_m=1e6, thin_cell_m=1e-6, bounds=bounds)
    assert np.all(bound_violation_m(bounds, m.evaluate(bp[:, 0], bp[:, 1])) <= BOUND_TOLERANCE_M)

    # Source: the smoothing-spline criterion (1/n) Σ (z_i − s(x_i))² + λ cᵀ K c (Wahba 1990,
    # ch. 2) with s = Σ c_j φ(|x − x_j|) + d₀ + d₁x + d₂y over picks and bound points, Tᵀc = 0,
    # minimised under the bounds by scipy's trust-constr: an independent solve of the same QP.
    nodes = np.vstack([xy, bp])
    r2 = np.sum((nodes[:, None, :] - nodes[None, :, :]) ** 2, axis=-1)
    K = tps_kernel(r2)
    T = np.column_stack([np.ones(len(nodes)), nodes])
    E = np.hstack([K, T])  # values at the nodes from (c, d)
    n, k = len(xy), len(nodes)

    def f(p):
        r = E[:n] @ p - z
        return r @ r / n + lam * p[:k] @ K @ p[:k]

    def g(p):
        gr = 2 * E[:n].T @ (E[:n] @ p - z) / n
        gr[:k] += 2 * lam * K @ p[:k]
        return gr

    H = 2 * E[:n].T @ E[:n] / n
    H[:k, :k] += 2 * lam * K
    cons = [LinearConstraint(np.hstack([T.T, np.zeros((3, 3))]), 0, 0), LinearConstraint(E[n:], lo, hi)]
    r = minimize(f, np.zeros(k + 3), jac=g, hess=lambda p: H, constraints=cons, method="trust-constr",
                 options={"gtol": 1e-12, "xtol": 1e-14, "maxiter": 20_000})
    q = np.array([[0.2, 0.3], [-0.8, 0.5], [1.0, -1.0], [0.3, 1.5]])
    rq = np.sum((q[:, None, :] - nodes[None, :, :]) ** 2, axis=-1)
    ref = np.hstack([tps_kernel(rq), np.column_stack([np.ones(len(q)), q])]) @ r.x
    assert np.allclose(m.evaluate(q[:, 0], q[:, 1]), ref, atol=1e-3)
    info = m.params
    assert info["n_bounds"] == 4 and info["n_active_bounds"] == 3  # the slack bound stays out


def _fold_case(n=120, cell=10.0):
    """A folded surface under synthetic hills, its traced contact and its unit polygons."""
    from strikeline.picks import sample_bilinear

    g = _grid(n, cell)
    X, Y = g.mesh()
    dem = 300 + 35 * np.sin(X / 170) * np.cos(Y / 230) + 0.04 * X
    truth = 300 + 0.04 * X + 25 * np.cos(2 * np.pi * Y / 700)
    above = dem > truth  # ground above the surface: the unit above it crops out
    # polygons: one box per run of equal cells along each row
    polys, units = [], []
    for r in range(n):
        row = above[r]
        edges = np.flatnonzero(np.diff(row.astype(int))) + 1
        starts = np.concatenate([[0], edges])
        ends = np.concatenate([edges, [n]])
        for a, b in zip(starts, ends):
            y1 = g.transform[3] - r * cell
            polys.append(shapely.box(a * cell, y1 - cell, b * cell, y1))
            units.append("Upper" if row[a] else "Lower")
    # the contact: zero line of depth, sampled on the DEM
    from strikeline.io.contours import contour_lines  # test-only use of GDAL's contour generator
    lines, _ = contour_lines(dem - truth, g, levels=[0.0])
    pts = shapely.get_coordinates(shapely.segmentize(lines, 2 * cell))
    # only the southern half of the map is traced: the north must come from the units
    pts = pts[pts[:, 1] < 550]
    zp = sample_bilinear(dem, g, pts[:, 0], pts[:, 1])
    ok = np.isfinite(zp)
    return g, dem, truth, np.column_stack([pts[ok], zp[ok]]), polys, units


@pytest.mark.parametrize("model", ["plane", "trend2", "spline", "auto"])
def test_every_model_honours_the_units_or_says_it_cannot(model):
    g, dem, truth, xyz, polys, units = _fold_case()
    ub = unit_bounds(polys, units, dem, g, units_above="Upper", units_below="Lower", max_points=800)
    # the truth honours its own units (the polygons were made from it)
    from strikeline.picks import sample_bilinear
    zt = sample_bilinear(truth, g, ub.bounds[:, 0], ub.bounds[:, 1])
    assert bound_violation_m(ub.bounds, zt).max() == 0.0
    free = fit_surface(xyz, model=model, cross_validate_model=False)
    assert bound_violation_m(ub.bounds, free.evaluate(ub.bounds[:, 0], ub.bounds[:, 1])).max() > 1.0
    try:
        m = fit_surface(xyz, model=model, cross_validate_model=False, bounds=ub.bounds)
    except InputError as exc:  # plane and trend2 cannot follow a fold: they must say so
        assert model in ("plane", "trend2")
        assert "cannot keep the surface below ground" in str(exc)
        return
    v = bound_violation_m(ub.bounds, m.evaluate(ub.bounds[:, 0], ub.bounds[:, 1]))
    # stated tolerance: the spline's active-set tolerance (0.01 m)
    assert v.max() <= BOUND_TOLERANCE_M
    if m.kind == "spline":
        # only the south is traced: over the map the units must bring the surface closer to
        # the truth (measured: 22.6 m -> 15.1 m RMS with 800 points)
        rms_free = np.sqrt(np.mean((free.evaluate_grid(g) - truth) ** 2))
        rms = np.sqrt(np.mean((m.evaluate_grid(g) - truth) ** 2))
        assert rms < 0.8 * rms_free


def test_bounds_stay_in_every_cross_validation_fit():
    g, dem, truth, xyz, polys, units = _fold_case()
    ub = unit_bounds(polys, units, dem, g, units_above="Upper", units_below="Lower", max_points=400)
    m = fit_surface(xyz, model="auto", bounds=ub.bounds)
    # the plane cannot honour the fold's units in any fold: it is reported, not scored
    assert "cannot keep the surface below ground" in m.cv_skipped["plane"]
    assert np.isfinite(m.cv_rmse_m["spline"])
    assert m.params["n_bounds"] == len(ub)


def test_plane_with_units_it_can_honour_keeps_its_attitude():
    # a true plane: its own units are feasible, and the constrained plane stays the plane
    g = _grid()
    X, Y = g.mesh()
    dem = 200 + 30 * np.sin(X / 150) + 0.02 * Y
    truth = 190 + 0.05 * X
    above = dem > truth
    polys = [shapely.box(c * 10, 990 - r * 10, c * 10 + 10, 1000 - r * 10) for r, c in zip(*np.nonzero(above))]
    polys_b = [shapely.box(c * 10, 990 - r * 10, c * 10 + 10, 1000 - r * 10) for r, c in zip(*np.nonzero(~above))]
    ub = unit_bounds(polys + polys_b, ["U"] * len(polys) + ["L"] * len(polys_b), dem, g, units_above="U",
                     units_below="L", max_points=500)
    rng = np.random.default_rng(3)
    xy = rng.uniform(100, 900, (150, 2))
    xyz = np.column_stack([xy, 190 + 0.05 * xy[:, 0] + rng.normal(0, 0.2, 150)])
    m = fit_surface(xyz, model="plane", cross_validate_model=False, bounds=ub.bounds)
    assert bound_violation_m(ub.bounds, m.evaluate(ub.bounds[:, 0], ub.bounds[:, 1])).max() < 1e-6
    assert m.params["dip_deg"] == pytest.approx(np.degrees(np.arctan(0.05)), abs=0.05)


def test_bounds_are_checked():
    xy, z = _plane_picks()
    with pytest.raises(InputError, match=r"\(m, 4\)"):
        fit_surface(np.column_stack([xy, z]), model="plane", bounds=np.zeros((3, 3)))
    with pytest.raises(InputError, match="lo .* above hi"):
        fit_surface(np.column_stack([xy, z]), model="plane", bounds=[[0, 0, 5.0, 1.0]])
    with pytest.raises(InputError, match="NaN"):
        fit_surface(np.column_stack([xy, z]), model="plane", bounds=[[0, 0, np.nan, 1.0]])


def test_spectral_solve_of_the_pick_system_equals_a_direct_solve():
    from strikeline.surfaces.kernel import _pairwise_r2
    from strikeline.surfaces.spline import _Spectrum, _spectral_solver

    rng = np.random.default_rng(11)
    u = rng.normal(size=(60, 2))
    z = rng.normal(size=60)
    spec = _Spectrum(u, z)
    nlam = 0.05
    K = tps_kernel(_pairwise_r2(u, u))
    T = np.column_stack([np.ones(60), u])
    M = np.block([[K + nlam * np.eye(60), T], [T.T, np.zeros((3, 3))]])
    b = rng.normal(size=(63, 4))
    # Source: numpy.linalg.solve (LAPACK gesv) on the assembled system
    assert np.allclose(_spectral_solver(spec, nlam)(b), np.linalg.solve(M, b), atol=1e-8)


def test_spline_honours_units_and_boreholes_together():
    g, dem, truth, xyz, polys, units = _fold_case()
    ub = unit_bounds(polys, units, dem, g, units_above="Upper", units_below="Lower", max_points=600)
    from strikeline.picks import sample_bilinear
    bh_xy = np.array([[300.0, 900.0], [800.0, 1000.0]])
    bh = np.column_stack([bh_xy, sample_bilinear(truth, g, bh_xy[:, 0], bh_xy[:, 1]), [0.5, 0.5]])
    m = fit_surface(xyz, model="spline", cross_validate_model=False, bounds=ub.bounds, boreholes=bh)
    assert bound_violation_m(ub.bounds, m.evaluate(ub.bounds[:, 0], ub.bounds[:, 1])).max() <= BOUND_TOLERANCE_M
    assert np.all(np.abs(m.borehole_misfit_m()) <= 0.5 + 1e-6)
