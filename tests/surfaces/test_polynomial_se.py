"""The polynomial's parameter standard error (Horner's rule on the expanded quadratic form)
against numpy's einsum of the quadratic form, within the rounding bound of a dot product, and
the same bits whether the cells come one by one or as a grid's row and column.

References: numpy.einsum('...i,ij,...j->...') of the basis and the covariance (numpy 1.26); the
definition sqrt(aᵀ C a) of the standard error of a linear predictor (common practice); the
forward error bound |fl(xᵀy) − xᵀy| <= γ_n |x|ᵀ|y|, γ_n = n·u/(1 − n·u) (Higham, N. J. (2002).
*Accuracy and Stability of Numerical Algorithms*, 2nd ed., SIAM, section 3.1).
"""
from __future__ import annotations

import numpy as np
import pytest

from strikeline.surfaces.polynomial import _Poly, _basis


def _einsum_q(u, v, cov, degree):
    a = _basis(u, v, degree)
    return np.einsum("...i,ij,...j->...", a, cov, a), np.einsum("...i,ij,...j->...", np.abs(a), np.abs(cov),
                                                                np.abs(a))


@pytest.mark.parametrize("degree", [1, 2])
@pytest.mark.parametrize("spread", [1.5, 40.0])  # near the data, and far out where u⁴ is large
def test_within_the_rounding_bound_of_einsum(degree, spread):
    rng = np.random.default_rng(11)
    k = 3 if degree == 1 else 6
    A = rng.normal(0, 1, (k, k))
    cov = A @ A.T * 1e-3
    cov[0, 1] += 1e-6  # not quite symmetric: the form sums C_ij and C_ji as given
    p = _Poly(degree, np.zeros(k), cov, 1.0, {})
    u, v = rng.normal(0, spread, 200_000), rng.normal(0, spread, 200_000)
    want, scale = _einsum_q(u, v, cov, degree)  # Source: numpy's einsum of the quadratic form aᵀ C a
    got = p.param_se_u(u, v) ** 2
    # Source: Higham (2002) section 3.1, γ_n for the einsum's and Horner's sums (n <= 2·36 terms),
    # plus the square of the square root (two roundings)
    gamma = 80 * np.finfo(float).eps
    assert np.all(np.abs(got - np.maximum(want, 0.0)) <= gamma * scale + 4 * np.finfo(float).eps * got)
    assert np.array_equal(p.param_se_u(u[3], v[3]), p.param_se_u(u, v)[3])


@pytest.mark.parametrize("degree", [1, 2])
def test_grid_row_and_column_give_the_bits_of_cells_one_by_one(degree):
    rng = np.random.default_rng(5)
    k = 3 if degree == 1 else 6
    A = rng.normal(0, 1, (k, k))
    p = _Poly(degree, np.zeros(k), A @ A.T, 1.0, {})
    u, v = np.linspace(-3, 4, 301), np.linspace(2, -5, 77)
    U, V = np.meshgrid(u, v)
    grid = p.param_se_u(u[None, :], v[:, None])
    assert grid.shape == U.shape
    assert np.array_equal(grid, p.param_se_u(U.ravel(), V.ravel()).reshape(U.shape))
    # a degenerate covariance (a plane known exactly): zeros, not NaN
    assert np.array_equal(_Poly(degree, np.zeros(k), np.zeros((k, k)), 1.0, {}).param_se_u(U, V), np.zeros(U.shape))
