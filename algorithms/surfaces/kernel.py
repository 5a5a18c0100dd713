"""The thin-plate spline as a function: the kernel ``φ(r) = r² log r`` (:func:`tps_kernel`;
Duchon 1977), sums of kernels with their gradient at many points (blockwise in bounded memory, on
two threads) and :class:`_TPS`, a fitted spline ``s(u) = Σ w_j φ(|u − c_j|) + d₀ + d₁u + d₂v`` in
normalised coordinates.
"""
from __future__ import annotations

import os
from concurrent.futures import ThreadPoolExecutor

import numpy as np


#: Elements per kernel block during evaluation (memory per block: 8 bytes each, twice).
_BLOCK_ELEMENTS = 1 << 19


def tps_kernel(r2):
    """Thin-plate spline kernel ``φ(r) = r² log r`` evaluated from squared distances.

    Parameters
    ----------
    r2 : array_like
        Squared distances ``r²`` (``>= 0``).

    Returns
    -------
    ndarray
        ``0.5 · r² · log(r²)``, with ``φ(0) = 0``.

    References
    ----------
    Duchon, J. (1977). Splines minimizing rotation-invariant semi-norms in Sobolev spaces.
    In W. Schempp & K. Zeller (eds.), *Constructive Theory of Functions of Several Variables*,
    Lect. Notes Math. 571, Springer, Berlin, 85–100.
    https://doi.org/10.1007/BFb0086566
    """
    r2 = np.asarray(r2, dtype=float)
    out = np.log(np.maximum(r2, 1e-300))
    out *= r2
    out *= 0.5
    return out


def _pairwise_r2(a, b):
    d = np.subtract.outer(a[:, 0], b[:, 0])
    d *= d
    e = np.subtract.outer(a[:, 1], b[:, 1])
    e *= e
    d += e
    return d


def _kernel_sum(u, v, cu, cv, w, *, grad=False, by_point=False):
    """``Σ_j w_j φ(|p − c_j|)`` (and its gradient) for many points, blockwise on two threads.

    ``by_point``: each point's sum by numpy's reduction of its own row, so that its value does not
    depend on which other points are evaluated with it (BLAS's matrix-vector product, used
    otherwise, may sum a row differently by its place in a block; the two differ by rounding)."""
    n, m = len(u), len(cu)
    if n == 0:
        return (np.empty(0), np.empty(0), np.empty(0)) if grad else np.empty(0)
    rows = max(1, _BLOCK_ELEMENTS // max(m, 1))
    starts = list(range(0, n, rows))
    out = np.empty(n)
    gu = np.empty(n) if grad else None
    gv = np.empty(n) if grad else None

    def block(a):
        b = min(a + rows, n)
        du = np.subtract.outer(u[a:b], cu)
        dv = np.subtract.outer(v[a:b], cv)
        r2 = du * du
        r2 += dv * dv
        lg = np.log(np.maximum(r2, 1e-300))
        if grad:
            t = lg + 1.0
            t *= w
            t[r2 == 0.0] = 0.0
            gu[a:b] = (du * t).sum(axis=1)
            gv[a:b] = (dv * t).sum(axis=1)
        lg *= r2
        if by_point:
            lg *= w
            out[a:b] = 0.5 * lg.sum(axis=1)
        else:
            out[a:b] = 0.5 * (lg @ w)

    workers = min(2, os.cpu_count() or 1, len(starts))
    if workers > 1:
        with ThreadPoolExecutor(max_workers=workers) as ex:
            list(ex.map(block, starts))
    else:
        for a in starts:
            block(a)
    return (out, gu, gv) if grad else out


class _TPS:
    """``s(u) = Σ w_j φ(|u − c_j|) + d₀ + d₁u + d₂v`` in normalised coordinates."""

    def __init__(self, centres, w, d, info):
        self.centres = centres
        self.w = w
        self.d = d
        self.info = info

    def value_u(self, u, v, *, by_point=False):
        s = _kernel_sum(u, v, self.centres[:, 0], self.centres[:, 1], self.w, by_point=by_point)
        return s + self.d[0] + self.d[1] * u + self.d[2] * v

    def grad_u(self, u, v):
        _, gu, gv = _kernel_sum(u, v, self.centres[:, 0], self.centres[:, 1], self.w,
                                grad=True)
        return gu + self.d[1], gv + self.d[2]
