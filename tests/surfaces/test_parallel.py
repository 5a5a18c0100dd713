"""Fits two at a time on threads with one BLAS thread (strikeline.surfaces.parallel): the same
results as the loop they replace, bit for bit, in the loop's order and with its exceptions; the
OpenBLAS thread counts as OpenBLAS itself reports them, set back after the section."""
from __future__ import annotations

import ctypes
import glob
import os
import threading
import time

import numpy as np
import pytest

from strikeline.errors import CancelledError, UndeterminedError
from strikeline.stats import cross_validate, make_folds, segment_groups
from strikeline.surfaces import parallel
from strikeline.surfaces.data import _prepare
from strikeline.surfaces.fitted import _fit_kind
from strikeline.surfaces.holdout import _holdout_checks, _score_fits
from strikeline.surfaces.parallel import map_fits, one_blas_thread
from strikeline.surfaces.reduced import PickSystems
from strikeline.surfaces.spline import _kfold_lambda

needs_openblas = pytest.mark.skipif(not parallel._openblas_libraries(),
                                    reason="no OpenBLAS in this process: the fits run in a loop")


def _numpy_openblas_threads():
    """numpy's bundled OpenBLAS's own count (``openblas_get_num_threads``), read without the module."""
    import numpy
    libs = glob.glob(os.path.join(os.path.dirname(numpy.__file__) + ".libs", "libopenblas*.so*"))
    if not libs:
        pytest.skip("numpy has no bundled OpenBLAS here")
    lib = ctypes.CDLL(libs[0])
    for name in ("openblas_get_num_threads64_", "openblas_get_num_threads"):
        f = getattr(lib, name, None)
        if f is not None:
            f.restype = ctypes.c_int
            return int(f())
    pytest.skip("numpy's OpenBLAS has no openblas_get_num_threads")


def _fit_threads():
    return [t for t in threading.enumerate() if t.name.startswith("strikeline-fit")]


def _sheet(n=420, seed=11):
    """Picks on a curved surface along a few lines, with their segment groups and folds."""
    rng = np.random.default_rng(seed)
    t = rng.uniform(0, 1, n)
    line = rng.integers(0, 6, n)
    x = 100.0 + 900.0 * t
    y = 80.0 + 150.0 * line + 40.0 * np.sin(6.0 * t + line)
    z = 300.0 + 0.05 * x - 0.02 * y + 15.0 * np.sin(x / 170.0) * np.cos(y / 230.0) + rng.normal(0, 0.5, n)
    data = _prepare(np.column_stack([x, y, z]), None, 1.0, None, 5.0, None, None)
    groups = segment_groups(x, y, line, block_m=150.0)
    return data, groups, make_folds(groups, n_folds=5, seed=0)


def _same_score(a, b):
    assert (a.reason, a.n_held_out, a.n_groups) == (b.reason, b.n_held_out, b.n_groups)
    for field in ("rmse_m", "se_m", "distance_m", "fold_rmse_m", "errors_m", "distances_m"):
        assert np.asarray(getattr(a, field)).tobytes() == np.asarray(getattr(b, field)).tobytes(), field


def test_map_fits_returns_the_loops_results_in_order():
    # items that finish in the reverse of their order
    def slow_square(i):
        time.sleep(0.002 * (8 - i))
        return i * i
    # Source: the loop it replaces (common practice: a parallel map keeps the order of its items)
    assert map_fits(slow_square, range(8)) == [i * i for i in range(8)]
    assert not _fit_threads()


@needs_openblas
def test_blas_threads_are_one_inside_and_set_back_after_also_on_error():
    before = _numpy_openblas_threads()
    all_before = parallel.blas_threads()
    seen = []

    def record(i):
        seen.append(_numpy_openblas_threads())
        if i == 3:
            raise ZeroDivisionError("fold 3")
        return i

    assert map_fits(record, range(3)) == [0, 1, 2]
    # Source: OpenBLAS's own openblas_get_num_threads of numpy's bundled library
    assert seen == [1, 1, 1]
    assert _numpy_openblas_threads() == before
    with pytest.raises(ZeroDivisionError, match="fold 3"):
        map_fits(record, range(6))
    assert _numpy_openblas_threads() == before
    assert parallel.blas_threads() == all_before  # scipy's OpenBLAS too
    assert not _fit_threads()


@needs_openblas
def test_the_first_exception_in_order_propagates_and_no_thread_is_left():
    started = []

    def item(i):
        started.append(i)
        if i == 2:
            time.sleep(0.05)  # the later failure happens first in time
            raise KeyError("second")
        if i == 3:
            raise ValueError("third")
        return i

    # Source: the loop - it raises at item 2 and never starts the items after it
    with pytest.raises(KeyError, match="second"):
        map_fits(item, range(40))
    assert not _fit_threads()
    assert max(started) < 39  # the items not started when one failed were dropped


def _spline_fit(data):
    systems = PickSystems(data.u(data.p_xy), data.p_z)
    return lambda sub: _fit_kind("spline", sub, smoothing="gcv", lam=None, taper_m=200.0, systems=systems)


@needs_openblas
@pytest.mark.parametrize("kind", ["plane", "trend2", "spline"])
def test_threaded_cross_validation_equals_the_serial_one_bit_for_bit(kind):
    data, groups, folds = _sheet()
    if kind == "spline":
        fit = _spline_fit(data)
    else:
        def fit(sub):
            return _fit_kind(kind, sub, smoothing="gcv", lam=None, taper_m=200.0)
    threaded, base_t = _score_fits(fit, data, folds, groups=groups, workers=2)
    with one_blas_thread():  # the threads' own BLAS: one thread
        serial, base_s = _score_fits(fit, data, folds, groups=groups, workers=1)

    # Source: the loop of strikeline.stats.cross_validate with the fits made in it, as before
    base_r = np.full(data.n, np.nan)

    def fit_predict(train, test):
        s = fit(data.picks(train))
        x, y = data.p_xy[test, 0], data.p_xy[test, 1]
        base_r[test] = s.base_se(x, y)
        return s.value(x, y)
    with one_blas_thread():
        ref = cross_validate(fit_predict, np.column_stack([data.p_xy, data.p_z]), folds,
                             fixed_xy=data.fixed_xy(), groups=groups)
    for score, base in ((threaded, base_t), (serial, base_s)):
        _same_score(score, ref)
        assert base.tobytes() == base_r.tobytes()
    assert np.isfinite(ref.rmse_m)


@needs_openblas
def test_threaded_kfold_lambda_and_holdout_fits_equal_the_serial_ones():
    data, groups, folds = _sheet(seed=4)
    systems = PickSystems(data.u(data.p_xy), data.p_z)
    grid = systems.all_picks().lambda_grid(29) / data.n
    lam_t = _kfold_lambda(data, folds, grid, systems=systems, workers=2)
    checks = dict(growth=None, sigma_m=0.5, taper_m=200.0, smoothing="gcv", lam=lam_t, systems=systems)
    hold_t = _holdout_checks("spline", data, 260.0, **checks, workers=2)
    with one_blas_thread():
        lam_s = _kfold_lambda(data, folds, grid, systems=systems, workers=1)
        hold_s = _holdout_checks("spline", data, 260.0, **checks, workers=1)
    # Source: the serial loops (the same fits in the same order, one BLAS thread)
    assert lam_t == lam_s
    assert sorted(hold_t.surfaces) == sorted(hold_s.surfaces) and len(hold_t.surfaces) >= 4
    q = np.random.default_rng(2).uniform([100, 80], [1000, 900], (500, 2))
    for a, b in zip(hold_t.predict(q[:, 0], q[:, 1]), hold_s.predict(q[:, 0], q[:, 1])):
        assert a.tobytes() == b.tobytes()


@needs_openblas
def test_a_fold_that_cannot_be_fitted_ends_the_score_as_the_loop_does():
    data, groups, folds = _sheet(seed=6)
    bad = {int(k) for k in np.unique(folds)[1:2]}  # the second fold cannot be fitted
    later = {int(k) for k in np.unique(folds)[3:]}  # and a later one would raise something else

    def fit(sub):
        held = set(np.unique(folds[~np.isin(data.p_xy[:, 0], sub.p_xy[:, 0])]).tolist())
        if held & bad:
            raise UndeterminedError("too few picks in this fold")
        if held & later:
            raise RuntimeError("never reached by the loop")
        return _fit_kind("plane", sub, smoothing="gcv", lam=None, taper_m=200.0)

    score, base = _score_fits(fit, data, folds, groups=groups, workers=2)
    # Source: strikeline.stats.cross_validate's loop: the first fold's score, then its reason
    assert np.isnan(score.rmse_m)
    assert score.reason == f"fold 2 of {len(np.unique(folds))}: too few picks in this fold"
    first = folds == np.unique(folds)[0]
    assert np.isfinite(score.errors_m[first]).all() and np.isnan(score.errors_m[~first]).all()
    assert np.isfinite(base[first]).all() and np.isnan(base[~first]).all()
    assert not _fit_threads()


def test_a_cancel_stops_the_folds_with_the_loops_error():
    data, groups, folds = _sheet()
    calls = []

    def fit(sub):
        calls.append(1)
        return _fit_kind("plane", sub, smoothing="gcv", lam=None, taper_m=200.0)

    # Source: strikeline.stats.cross_validate's own message for a cancel before a fold
    with pytest.raises(CancelledError, match="cross-validation was cancelled"):
        _score_fits(fit, data, folds, is_cancelled=lambda: len(calls) >= 2, workers=2)
    assert not _fit_threads()
