"""The spline at one smoothing by Cholesky (strikeline.surfaces.reduced) against independent
references: scipy's RBFInterpolator (same kernel r² log r, linear part, smoothing on the
diagonal), the eigen-decomposition sums of Wahba (1990) and a dense solve of the bordered system."""
import numpy as np
import pytest
from scipy.interpolate import RBFInterpolator

from strikeline.stats import gcv_from_spectrum
from strikeline.surfaces.kernel import _pairwise_r2, tps_kernel
from strikeline.surfaces.reduced import _FixedSmoothing, _Reduced
from strikeline.surfaces.spline import _Spectrum

#: Relative agreement of two rounding orders of the same linear algebra on a 300-point system
#: (common practice: a few hundred times the double-precision unit round-off times the condition).
REL_TOL = 1e-8


def _picks(n=300, seed=3):
    rng = np.random.default_rng(seed)
    u = rng.uniform(-1, 1, (n, 2))
    z = np.sin(2.0 * u[:, 0]) + 0.5 * u[:, 1] ** 2 + rng.normal(0, 0.02, n)
    return u, z


@pytest.mark.parametrize("rel", [1e-6, 1e-3, 1.0])
def test_fixed_smoothing_matches_scipy_rbf(rel):
    u, z = _picks()
    red = _Reduced(u, z)
    nlam = rel * float(np.mean(np.diag(red.M)))
    fx = _FixedSmoothing(red, nlam)
    C, D = fx.coefficients(nlam)
    q = np.random.default_rng(9).uniform(-1.2, 1.2, (500, 2))
    ours = tps_kernel(_pairwise_r2(q, u)) @ C[:, 0] + D[0, 0] + q @ D[1:, 0]
    # Source: scipy.interpolate.RBFInterpolator, kernel 'thin_plate_spline' = r² log r, degree 1,
    # smoothing added to the kernel matrix's diagonal: the system (K + nλI)c + Td = z, Tᵀc = 0.
    ref = RBFInterpolator(u, z, kernel="thin_plate_spline", smoothing=nlam, degree=1)(q)
    assert np.max(np.abs(ours - ref)) <= REL_TOL * np.max(np.abs(ref))


@pytest.mark.parametrize("rel", [1e-6, 1e-2])
def test_fixed_smoothing_scores_match_the_spectrum(rel):
    u, z = _picks(seed=5)
    red = _Reduced(u, z)
    # Source: Wahba (1990), the GCV sums over the eigenvalues of Q₂ᵀKQ₂, here from numpy's eigh
    mu, U = np.linalg.eigh(red.M)
    b = U.T @ red.q2t(z)
    nlam = rel * float(mu.max())
    fx = _FixedSmoothing(red, nlam)
    for got, want in zip(fx.gcv(nlam), gcv_from_spectrum(mu, b, red.n, nlam)):
        assert got[0] == pytest.approx(want[0], rel=REL_TOL)
    spec = _Spectrum(u, z, reduced=red)
    assert fx.bhat(nlam) == pytest.approx(spec.bhat(nlam), rel=REL_TOL)


def test_fixed_smoothing_solver_matches_a_dense_solve():
    u, z = _picks(n=120, seed=7)
    red = _Reduced(u, z)
    nlam = 1e-3 * float(np.mean(np.diag(red.M)))
    n = red.n
    A = np.zeros((n + 3, n + 3))
    A[:n, :n] = red.K + nlam * np.eye(n)
    A[:n, n:] = red.T
    A[n:, :n] = red.T.T
    rhs = np.random.default_rng(1).normal(size=(n + 3, 2))
    # Source: numpy.linalg.solve (LAPACK gesv) of the whole bordered system
    want = np.linalg.solve(A, rhs)
    got = _FixedSmoothing(red, nlam).solver()(rhs)
    assert np.max(np.abs(got - want)) <= REL_TOL * np.max(np.abs(want))


def test_too_small_smoothing_is_refused_for_the_eigen_route():
    u, z = _picks(n=50)
    red = _Reduced(u, z)
    with pytest.raises(np.linalg.LinAlgError):
        _FixedSmoothing(red, 0.0)


def test_pick_systems_slice_the_kernel_with_the_bits_of_each_subsets_own(monkeypatch):
    import strikeline.surfaces.reduced as reduced
    from strikeline.surfaces.reduced import PickSystems
    u, z = _picks(n=200, seed=4)
    systems = PickSystems(u, z)
    assert systems.reduced(u.copy(), z.copy()) is systems.all_picks()  # made once, asked twice
    own_kernels = []
    monkeypatch.setattr(reduced, "tps_kernel", lambda r2: own_kernels.append(r2) or tps_kernel(r2))
    rng = np.random.default_rng(8)
    for keep in (rng.random(200) < 0.8, np.flatnonzero(rng.random(200) < 0.5)[::-1]):
        own_kernels.clear()
        got = systems.reduced(u[keep], z[keep], keep)
        assert not own_kernels  # sliced from the kernel of all picks, not computed again
        # Source: the subset's own system, its kernel computed from its points (tps_kernel of
        # _pairwise_r2): the same bits, not only close
        want = _Reduced(u[keep], z[keep])
        for name in ("K", "M", "Q1", "R1"):
            assert np.array_equal(getattr(got, name), getattr(want, name)), name
    other = np.vstack([u[:50], [[5.0, 5.0]]])  # a point that is not one of the picks
    got, want = systems.reduced(other, z[:51], np.arange(51)), _Reduced(other, z[:51])
    assert np.array_equal(got.M, want.M)


def test_pick_systems_refuse_a_subset_as_its_own_system_would():
    from strikeline.errors import UndeterminedError
    from strikeline.surfaces.reduced import PickSystems
    u, z = _picks(n=40, seed=2)
    u[:10, 1] = 0.25  # ten picks in one line
    systems = PickSystems(u, z)
    for sub in (slice(0, 3), slice(0, 10)):
        with pytest.raises(UndeterminedError) as own:
            _Reduced(u[sub], z[sub])
        with pytest.raises(UndeterminedError) as sliced:
            systems.reduced(u[sub], z[sub], sub)
        assert str(sliced.value) == str(own.value)
