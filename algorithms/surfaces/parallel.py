"""Independent fits of one model (cross-validation folds, hold-out boards) run two at a time on
Python threads, each with one BLAS thread: :func:`map_fits`.

Why
    The fits' eigen-decompositions and Cholesky factorisations (LAPACK ``syevd``, ``potrf``) spend
    their time in OpenBLAS, which releases Python's lock. On a small machine OpenBLAS's own threads
    scale poorly on one such factorisation, worst when other work loads the machine (its threads
    spin while waiting for each other); two factorisations side by side, one thread each, keep
    both cores busy with no waiting.
Bits
    OpenBLAS's LAPACK sums in another order on another number of threads (``potrf`` and ``syevd``
    of the same matrix differ in the last bits between one and two threads), so the fits made here
    equal those made by one thread, in any order and on any machine, not those of a default
    (multi-threaded) OpenBLAS. The results come back in the order of the items, so what the
    caller adds up from them does not depend on which fit finished first.
BLAS threads
    OpenBLAS's thread count is one number per library for the whole process
    (``openblas_set_num_threads``); numpy and scipy each bundle their own OpenBLAS. Every OpenBLAS
    loaded in the process (:func:`_openblas_libraries`, from ``/proc/self/maps``) is set to one
    thread around the whole parallel section and set back after it, on error too. Where no
    OpenBLAS can be found and set (another BLAS, another system), the fits run one after the other
    on the caller's thread.
"""
from __future__ import annotations

import contextlib
import ctypes
import threading
from concurrent.futures import ThreadPoolExecutor
from typing import Callable, Sequence

#: Fits run at a time (our choice: the two cores of the machines the tool is measured on; a third
#: fit gains nothing there and holds a third system of up to ``max_points``² doubles).
FIT_WORKERS = 2

#: ``(set, get)`` names of the thread-count functions of OpenBLAS builds: plain, 64-bit integer
#: interface (numpy's wheels) and scipy's prefixed build.
_SYMBOLS = (("openblas_set_num_threads", "openblas_get_num_threads"),
            ("openblas_set_num_threads64_", "openblas_get_num_threads64_"),
            ("scipy_openblas_set_num_threads", "scipy_openblas_get_num_threads"),
            ("scipy_openblas_set_num_threads64_", "scipy_openblas_get_num_threads64_"))

_LOCK = threading.Lock()  # one parallel section at a time sets the (process-wide) thread counts
_LIBRARIES = None


def _openblas_libraries() -> list:
    """``(set, get)`` ctypes functions of every OpenBLAS loaded in this process (made once)."""
    global _LIBRARIES
    if _LIBRARIES is not None:
        return _LIBRARIES
    found, paths = [], []
    try:
        with open("/proc/self/maps", encoding="utf-8", errors="replace") as fh:
            for line in fh:
                fields = line.split(maxsplit=5)
                path = fields[5].strip() if len(fields) == 6 else ""
                if "openblas" in path.rsplit("/", 1)[-1].lower() and path not in paths:
                    paths.append(path)
    except OSError:
        paths = []
    for path in paths:
        try:
            lib = ctypes.CDLL(path)  # already loaded: the same library, not a second copy
        except OSError:
            continue
        for set_name, get_name in _SYMBOLS:
            fset, fget = getattr(lib, set_name, None), getattr(lib, get_name, None)
            if fset is not None and fget is not None:
                fset.argtypes, fset.restype = [ctypes.c_int], None
                fget.argtypes, fget.restype = [], ctypes.c_int
                found.append((fset, fget))
                break
    _LIBRARIES = found
    return found


def blas_threads() -> list:
    """The thread count of every OpenBLAS loaded in this process (empty: none found)."""
    return [int(fget()) for _, fget in _openblas_libraries()]


@contextlib.contextmanager
def one_blas_thread():
    """Every OpenBLAS of the process on one thread inside the block, set back after it (on error
    too). Yields ``False`` when no OpenBLAS was found (nothing set)."""
    libs = _openblas_libraries()
    with _LOCK:
        before = [int(fget()) for _, fget in libs]
        try:
            for fset, _ in libs:
                fset(1)
            yield bool(libs)
        finally:
            for (fset, _), n in zip(libs, before):
                fset(n)


def map_fits(fn: Callable, items: Sequence, *, workers: int | None = None) -> list:
    """``[fn(item) for item in items]``, ``workers`` (default :data:`FIT_WORKERS`, read at the
    call) at a time on threads with one BLAS thread.

    ``fn`` must be safe to call from several threads at once (numpy and scipy's LAPACK calls are)
    and return its item's result; exceptions it means as results (a fold that cannot be fitted)
    it should catch and return. An exception it raises stops the map: items not started are
    dropped, the running ones are waited for (no thread is left running), and the exception of
    the first item in order that raised one is raised - the one a loop would have raised, all
    items before it having been run. One item, one worker or no OpenBLAS found: the loop itself,
    on the caller's thread (and its BLAS threads).
    """
    items = list(items)
    workers = FIT_WORKERS if workers is None else workers
    if int(workers) <= 1 or len(items) <= 1 or not _openblas_libraries():
        return [fn(item) for item in items]
    failed = threading.Event()

    def run(item):
        # items start in order, so one not started when another failed comes after it: dropped
        if failed.is_set():
            return None
        try:
            return fn(item)
        except BaseException:
            failed.set()
            raise

    with one_blas_thread(), ThreadPoolExecutor(max_workers=int(workers),
                                               thread_name_prefix="strikeline-fit") as pool:
        futures = [pool.submit(run, item) for item in items]
        results = []
        for i, f in enumerate(futures):
            try:
                results.append(f.result())
            except BaseException:
                failed.set()
                for g in futures[i + 1:]:
                    g.cancel()
                # a later item may have raised first; this is the first in order (every earlier
                # one returned), as in a loop; the pool's exit waits for the running ones
                raise
        return results
