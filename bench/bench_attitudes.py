"""Benchmark: attitude confidence and local attitudes on a large pick set (a script, not a test).

Workload: 50,000 picks on a synthetic gently folded surface over a 10 km square (picks strung
along 100 meandering contacts, 1 m vertical noise). Times

* :func:`strikeline.attitude.resampling.bootstrap_plane` with 1,000 resamples (target under 2 s), and
* :func:`strikeline.attitude.local.local_attitudes` with a 500 m window (target under 5 s),

best of ``--repeat`` runs, with the peak memory of each (growth of the resident high-water mark).

References measured in the same run: for the bootstrap, plain numpy - 1,000 resamples as
counts of the picks drawn (``Generator.integers``, ``numpy.bincount``), their moments by matrix products,
each plane the smallest-eigenvalue eigenvector of the resample's 3 x 3 covariance
(``numpy.linalg.eigh``, batched); for the local attitudes, plain scipy + numpy at the
same window centres - ``scipy.spatial.cKDTree.query_ball_point`` with the same radius and one
such plane fit per window (no confidence: the floor of the work, not like for like).

Run:  .venv/bin/python bench/bench_attitudes.py [--repeat 3] [--picks 50000]
"""
from __future__ import annotations

import argparse

import numpy as np
from scipy.spatial import cKDTree

from _measure import load_line, machine_line, measure, result_line
from strikeline.attitude import local_attitudes
from strikeline.attitude import bootstrap_plane

N_PICKS = 50_000
N_CONTACTS = 100


def make_picks(seed=0):
    rng = np.random.default_rng(seed)
    per = N_PICKS // N_CONTACTS
    t = np.linspace(0, 1, per)
    xs, ys, cid = [], [], []
    for c in range(N_CONTACTS):
        x0, y0 = rng.uniform(0, 10_000, 2)
        ang = rng.uniform(0, 2 * np.pi)
        wiggle = 300 * np.sin(2 * np.pi * (3 * t + rng.uniform()))
        x = x0 + 4000 * t * np.cos(ang) - wiggle * np.sin(ang)
        y = y0 + 4000 * t * np.sin(ang) + wiggle * np.cos(ang)
        xs.append(x)
        ys.append(y)
        cid.append(np.full(per, c))
    x, y, cid = np.concatenate(xs), np.concatenate(ys), np.concatenate(cid)
    z = 500 - 0.3 * x + 80 * np.cos(2 * np.pi * y / 6000) + rng.normal(0, 1.0, len(x))
    return np.column_stack([x, y, z]), cid


def numpy_bootstrap(xyz, n_resamples=1000, seed=0, chunk=100):
    """Plain numpy bootstrap of a TLS plane: each resample as counts of the picks drawn,
    its moments as one matrix product, its plane by ``eigh`` of the covariance (batched)."""
    rng = np.random.default_rng(seed)
    n = len(xyz)
    c = xyz - xyz.mean(axis=0)
    outer = (c[:, :, None] * c[:, None, :]).reshape(n, 9)
    normals = np.empty((n_resamples, 3))
    for s in range(0, n_resamples, chunk):
        k = min(chunk, n_resamples - s)
        draws = rng.integers(0, n, (k, n)) + n * np.arange(k)[:, None]
        w = np.bincount(draws.ravel(), minlength=k * n).reshape(k, n).astype(float)
        m1 = w @ c / n
        cov = (w @ outer / n).reshape(-1, 3, 3) - m1[:, :, None] * m1[:, None, :]
        normals[s:s + len(w)] = np.linalg.eigh(cov)[1][:, :, 0]
    return normals


def window_planes(xyz, centres, radius):
    """Plain scipy + numpy: the picks within ``radius`` of each centre, one TLS plane each."""
    members = cKDTree(xyz[:, :2]).query_ball_point(centres, radius)
    normals = np.full((len(centres), 3), np.nan)
    for k, m in enumerate(members):
        if len(m) >= 3:
            p = xyz[m] - xyz[m].mean(axis=0)
            normals[k] = np.linalg.eigh(p.T @ p)[1][:, 0]
    return normals


def main(argv=None):
    global N_PICKS
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--picks", type=int, default=N_PICKS)
    args = ap.parse_args(argv)
    N_PICKS = args.picks
    machine_line()
    xyz, cid = make_picks()
    print(f"workload: {len(xyz):,} picks on {N_CONTACTS} contacts over a 10 km square, 1 m noise; "
          f"best of {args.repeat}")
    _, ref = measure(lambda: numpy_bootstrap(xyz), args.repeat)
    result_line(f"plain numpy bootstrap, 1,000 resamples of {len(xyz):,} picks (reference)", ref)
    conf, m = measure(lambda: bootstrap_plane(xyz, n_resamples=1000, seed=0), args.repeat)
    result_line(f"bootstrap_plane, 1,000 resamples of {len(xyz):,} picks", m, ratio=m.wall_s / ref.wall_s,
                reference="plain numpy",
                extra=f"target < 2 s: {'met' if m.wall_s < 2 else 'NOT met'}; dip half-width "
                      f"{conf.dip_ci95_deg:.3f} deg")
    loc, m = measure(lambda: local_attitudes(xyz, window_m=500.0, contact_id=cid, seed=0), args.repeat)
    centres = np.column_stack([loc.x, loc.y])
    _, ref = measure(lambda: window_planes(xyz, centres, 500.0), args.repeat)
    result_line(f"plain scipy KD-tree + one plane fit per window, {len(centres):,} windows (reference)", ref)
    result_line(f"local_attitudes, 500 m window ({len(loc.x):,} windows, "
                f"{int(np.sum(loc.quality == 'good')):,} good)", m, ratio=m.wall_s / ref.wall_s,
                reference="plane fits without confidence", extra=f"target < 5 s: {'met' if m.wall_s < 5 else 'NOT met'}")
    load_line("at the end")


if __name__ == "__main__":
    main()
