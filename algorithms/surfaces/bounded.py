"""The smoothing spline held within bounds ``lo <= s(x) <= hi`` (the map's unit polygons, and the
boreholes' error bands): a primal-dual active set of bound points pinned to their bound
(:func:`_tps_bounded`; Nocedal & Wright 2006, ch. 16; Hintermüller, Ito & Kunisch 2002), at most
``MAX_ACTIVE_BOUNDS`` of them, broken by at most ``BOUND_TOLERANCE_M`` when it converges.
"""
from __future__ import annotations

import numpy as np
from scipy import linalg

from strikeline.errors import UndeterminedError
from strikeline.surfaces.data import _Data
from strikeline.surfaces.kernel import _TPS, _pairwise_r2, tps_kernel


#: Most bound points the spline's active set holds at once (each is one more node).
MAX_ACTIVE_BOUNDS = 500
#: Most rounds of the spline's active-set loop.
MAX_BOUND_ITERATIONS = 50
#: Noise standard error (metres) of a bound point pinned to its bound in the spline.
BOUND_PIN_SIGMA_M = 1e-4
#: A bound counts as broken (and enters the active set) beyond this many metres.
BOUND_TOLERANCE_M = 0.01


def _tps_bounded(data: _Data, base_solve, rhs, X, S, bhat, info) -> _TPS:
    """The smoothing spline of a system ``M`` (functionals ``S`` of point values at ``X``;
    ``base_solve(b) = M⁻¹ b``) subject to ``lo <= s(x_c) <= hi`` at the bound points of
    ``data``, by a primal-dual active-set method.

    Bound points that the current spline breaks join the active set as data pinned at their
    bound with noise ``BOUND_PIN_SIGMA_M`` (weight ``σ²/b̂``, as boreholes); pinned points
    whose kernel weight - the Lagrange multiplier up to a positive factor - has the wrong sign
    (a point of an upper bound pulling the surface up) leave it; repeat until nothing changes
    (at most ``MAX_BOUND_ITERATIONS`` rounds and ``MAX_ACTIVE_BOUNDS`` points, most broken
    first). The system with ``k`` active points is bordered: the base system is solved once
    per new active point (from the GCV spectrum when there are only picks, else one LU) and each
    round solves the ``k × k`` Schur complement.

    References: Nocedal, J. & Wright, S. J. (2006). *Numerical Optimization*, 2nd ed. Springer,
    ch. 16 (active-set methods for quadratic programs). https://doi.org/10.1007/978-0-387-40065-5;
    Hintermüller, M., Ito, K. & Kunisch, K. (2002). The primal-dual active set strategy as a
    semismooth Newton method. *SIAM J. Optim.* 13(3), 865–888.
    https://doi.org/10.1137/S1052623401383558
    """
    m = S.shape[0]
    N = m + 3
    x0 = base_solve(rhs)
    # Boreholes are bounds too (|s - z_b| <= sigma_b), so that pinning the units' points cannot
    # push the surface out of a borehole's error band.
    uc = data.u(np.vstack([data.c_xy, data.b_xy]))
    lo = np.concatenate([data.c_lo, data.b_z - data.b_sig])
    hi = np.concatenate([data.c_hi, data.b_z + data.b_sig])
    Pc = np.vstack([np.asarray(S @ tps_kernel(_pairwise_r2(X, uc))), np.ones(len(uc)), uc.T])
    pin = (BOUND_PIN_SIGMA_M ** 2 / bhat) if bhat > 0 else 0.0
    active = np.zeros(len(uc), dtype=bool)
    side = np.zeros(len(uc))  # +1 pinned at hi, -1 at lo
    weight = np.zeros(len(uc))  # kernel weight of each pinned point
    Z = {}  # A⁻¹ P column of each point that was ever active
    x, v = x0, Pc.T @ x0
    rounds = 0
    for rounds in range(1, MAX_BOUND_ITERATIONS + 1):
        over = v - hi
        under = lo - v
        new = ((over > BOUND_TOLERANCE_M) | (under > BOUND_TOLERANCE_M)) & ~active
        scale = max(float(np.max(np.abs(weight))), 1e-300)
        drop = active & (side * weight > 1e-9 * scale)
        if not new.any() and not drop.any():
            break
        active &= ~drop
        room = MAX_ACTIVE_BOUNDS - int(active.sum())
        if room > 0 and new.any():
            cand = np.flatnonzero(new)
            cand = cand[np.argsort(-np.maximum(over[cand], under[cand]), kind="stable")[:room]]
            side[cand] = np.where(over[cand] > 0, 1.0, -1.0)
            active[cand] = True
        elif not drop.any():
            break  # the active set is full
        a = np.flatnonzero(active)
        fresh = [i for i in a if i not in Z]
        if fresh:
            cols = base_solve(Pc[:, fresh])
            Z.update({i: cols[:, j] for j, i in enumerate(fresh)})
        P = Pc[:, a]
        Za = np.column_stack([Z[i] for i in a]) if len(a) else np.empty((N, 0))
        Kaa = tps_kernel(_pairwise_r2(uc[a], uc[a]))
        schur = Kaa + pin * np.eye(len(a)) - P.T @ Za
        t = np.where(side[a] > 0, hi[a], lo[a])
        try:
            y = linalg.solve(schur, t - P.T @ x0, check_finite=False)
        except (linalg.LinAlgError, ValueError) as exc:
            raise UndeterminedError(f"the spline cannot honour the bounds of the map's units "
                                    f"({exc}); check for unit polygons that contradict the picks"
                                    ) from exc
        x = x0 - Za @ y
        weight[:] = 0.0
        weight[a] = y
        v = Pc.T @ x + tps_kernel(_pairwise_r2(uc, uc[a])) @ y
    a = np.flatnonzero(active)
    broken = np.maximum(np.maximum(v - hi, lo - v), 0.0)[:data.n_bounds]
    info.update({"n_bounds": int(data.n_bounds), "n_active_bounds": int(np.count_nonzero(a < data.n_bounds)),
                 "bound_iterations": int(rounds),
                 "n_bounds_broken": int(np.count_nonzero(broken > BOUND_TOLERANCE_M)),
                 "max_bound_violation_m": float(broken.max()) if len(broken) else 0.0,
                 "bound_method": "primal-dual active set (pinned bound points)"})
    w = np.concatenate([np.asarray(S.T @ x[:m]).ravel(), weight[a]])
    centres = np.vstack([X, uc[a]])
    info["n_nodes"] = int(len(centres))
    return _TPS(centres, w, x[m:], info)
