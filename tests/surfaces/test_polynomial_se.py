"""The polynomial's parameter standard error summed term by term equals numpy's einsum of the
quadratic form, bit for bit.

Reference: numpy.einsum('...i,ij,...j->...') of the basis and the covariance (numpy 1.26), the
definition sqrt(aᵀ C a) of the standard error of a linear predictor (common practice).
"""
from __future__ import annotations

import numpy as np
import pytest

from strikeline.surfaces.polynomial import _Poly, _basis


@pytest.mark.parametrize("degree", [1, 2])
def test_term_by_term_equals_einsum(degree):
    rng = np.random.default_rng(11)
    k = 3 if degree == 1 else 6
    A = rng.normal(0, 1, (k, k))
    cov = A @ A.T * 1e-3
    p = _Poly(degree, np.zeros(k), cov, 1.0, {})
    u, v = rng.normal(0, 1.5, 200_000), rng.normal(0, 1.5, 200_000)
    a = _basis(u, v, degree)
    # Source: numpy's einsum of the quadratic form aᵀ C a
    want = np.sqrt(np.maximum(np.einsum("...i,ij,...j->...", a, cov, a), 0.0))
    assert np.array_equal(p.param_se_u(u, v), want)
    # a grid's shape and a single point keep their shapes
    U, V = np.meshgrid(u[:30], v[:20])
    B = _basis(U, V, degree)
    assert np.array_equal(p.param_se_u(U, V), np.sqrt(np.maximum(np.einsum("...i,ij,...j->...", B, cov, B), 0.0)))
    assert np.array_equal(p.param_se_u(u[3], v[3]), want[3])
