"""Benchmark: the surface model step with its independent fits two at a time (a script, not a test).

Workload (deterministic, fictional): the bench sheets (:mod:`_sheets`: a 15 km square of invented
hills, N x N DEM cells) with a planar contact and with a curved one (the plunging fold); the picks
as a run collects them; then :func:`strikeline.pipeline.model_surface` alone (thinning to 2,000
picks, k-fold choice of the spline's λ, cross-validation of plane, trend2 and spline, the coarse
hold-out, the misfit check's hold-out fits, the final fit).

Reference measured in the same run: the same step with the fits in a loop on the caller's thread
and OpenBLAS's own threads (``strikeline.surfaces.parallel.FIT_WORKERS = 1``, the code before
the change). The two are run alternately ``--repeat`` times (best wall time of each printed, with
CPU seconds), so that other work on the machine weighs on both alike; the load average is printed
before and after. Also printed: whether the chosen model and the fitted surface at 4,000 points are
the same bits (they are: the final fit is made as before) and the largest relative difference of
the cross-validation scores (the folds' fits on one BLAS thread round differently).

Run:  .venv/bin/python bench/bench_fit_workers.py [--cells 4000] [--repeat 2]
"""
from __future__ import annotations

import argparse
import tempfile

import numpy as np

from _measure import load_line, machine_line, measured, result_line
from bench_surfaces import sheet_model_inputs
from strikeline.pipeline import model_surface
from strikeline.surfaces import parallel


def step(args, workers: int):
    parallel.FIT_WORKERS = workers
    kw = dict(args)
    with measured() as m:
        model = model_surface(kw.pop("picks"), kw.pop("opts"), kw.pop("grid"), **kw)
    return model, m


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cells", type=int, default=4_000, help="DEM cells a side")
    ap.add_argument("--repeat", type=int, default=2, help="alternating runs of each (best wall time printed)")
    args = ap.parse_args()
    machine_line()
    load_line("at the start")
    two = parallel.FIT_WORKERS
    with tempfile.TemporaryDirectory(prefix="strikeline-bench-fit-workers-") as tmp:
        for surface in ("plane", "fold"):
            a = sheet_model_inputs(tmp, args.cells, surface)
            print(f"workload: {surface} bench sheet, {args.cells:,}^2 DEM cells, {len(a['picks'].xyz):,} picks; "
                  f"model_surface, fits in a loop (reference) and {two} at a time, alternately x {max(1, args.repeat)}")
            best = {}
            for _ in range(max(1, args.repeat)):
                for workers in (1, two):
                    model, m = step(a, workers)
                    if workers not in best or m.wall_s < best[workers][1].wall_s:
                        best[workers] = (model, m)
            parallel.FIT_WORKERS = two
            (m1, r1), (m2, r2) = best[1], best[two]
            q = np.random.default_rng(1).uniform(m1.data_xy.min(axis=0), m1.data_xy.max(axis=0), (4000, 2))
            same = m1.kind == m2.kind and m1.evaluate(q[:, 0], q[:, 1]).tobytes() == m2.evaluate(q[:, 0], q[:, 1]).tobytes()
            rel = max(abs(m2.cv_rmse_m[k] - m1.cv_rmse_m[k]) / abs(m1.cv_rmse_m[k]) for k in m1.cv_rmse_m)
            result_line(f"model_surface {surface} {args.cells:,}^2, fits in a loop (reference)", r1,
                        extra=f"cpu {r1.cpu_s:.2f} s; model {m1.kind}")
            result_line(f"model_surface {surface} {args.cells:,}^2, fits {two} at a time", r2,
                        ratio=r2.wall_s / r1.wall_s, reference="the loop",
                        extra=f"cpu {r2.cpu_s:.2f} s; model {m2.kind}; surface same bits: {same}; "
                              f"largest relative change of a CV score {rel:.1e}")
    load_line("at the end")


if __name__ == "__main__":
    main()
