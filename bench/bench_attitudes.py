"""Benchmark: attitude confidence and local attitudes on a large pick set (a script, not a test).

Workload: 50,000 picks on a synthetic gently folded surface over a 10 km square (picks strung
along 100 meandering contacts, 1 m vertical noise). Times

* :func:`strikeline.attitude.resampling.bootstrap_plane` with 1,000 resamples (target under 2 s), and
* :func:`strikeline.attitude.local.local_attitudes` with a 500 m window (target under 5 s),

best of ``--repeat`` runs, and prints the figures.

Run:  .venv/bin/python bench/bench_attitudes.py [--repeat 3]
"""
from __future__ import annotations

import argparse
import time

import numpy as np

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


def best_of(fn, repeat):
    times = []
    out = None
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return min(times), out


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args(argv)
    xyz, cid = make_picks()
    print(f"workload: {len(xyz)} picks on {N_CONTACTS} contacts over a 10 km square, 1 m noise")
    t, conf = best_of(lambda: bootstrap_plane(xyz, n_resamples=1000, seed=0), args.repeat)
    print(f"bootstrap_plane, 1,000 resamples: {t:.2f} s (target < 2 s); dip half-width "
          f"{conf.dip_ci95_deg:.3f} deg")
    t, loc = best_of(lambda: local_attitudes(xyz, window_m=500.0, contact_id=cid, seed=0), args.repeat)
    print(f"local_attitudes, 500 m window: {t:.2f} s (target < 5 s); {len(loc.x)} windows, "
          f"{int(np.sum(loc.quality == 'good'))} good")


if __name__ == "__main__":
    main()
