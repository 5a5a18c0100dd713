"""Running a job's sheets: one at a time or several at once in local worker processes, or on a dask
cluster.

Every sheet is one :func:`strikeline.pipeline.run` into ``OUT/NAME`` (atomic: a failed sheet
leaves its folder as it was). A sheet whose inputs (SHA-256 of every file, GDAL's side files
included) and options are those recorded for its intact earlier results is skipped; ``force``
redoes every sheet. A failing sheet is recorded with its one-line error and the others go on.

Where a sheet runs does not change what it writes: every sheet runs in a process of its own with
one thread of the numerical libraries (:data:`ONE_THREAD`, as on dask's workers), the sheet's
command line in summary.json is the batch's without the options that only say where and how
verbosely it runs, and GDAL dates the GeoPackages by the batch's date (``SOURCE_DATE_EPOCH`` when
set, else the batch's start), so the serial, the local-process and the dask run write the same
bytes.
"""
from __future__ import annotations

import concurrent.futures as cf
import contextlib
import multiprocessing
import os
import re
import time
from dataclasses import dataclass, field
from datetime import datetime, timezone
from pathlib import Path

from strikeline.errors import InputError, StrikelineError, one_line

#: The extra that installs dask.distributed, as pip spells it.
DASK_EXTRA = "strikeline[dask]"


@dataclass
class SheetResult:
    """What became of one sheet."""

    name: str
    status: str  # ok, failed, unchanged (strikeline.vocabulary.SHEET_STATUSES)
    error: str | None = None
    seconds: float | None = None
    inputs: dict = field(default_factory=dict)
    warnings: list = field(default_factory=list)


def file_stamp(now: float | None = None) -> str:
    """The date GDAL writes into the GeoPackages of a batch (ISO 8601, UTC): ``SOURCE_DATE_EPOCH``
    (the reproducible-builds convention, seconds since 1970) when set, else ``now``."""
    epoch = os.environ.get("SOURCE_DATE_EPOCH")
    if epoch is not None:
        try:
            now = float(int(epoch))
        except ValueError:
            raise InputError(f"SOURCE_DATE_EPOCH is {epoch!r}; set it to whole seconds since 1970 or unset it") \
                from None
    stamp = datetime.fromtimestamp(time.time() if now is None else now, tz=timezone.utc)
    return stamp.strftime("%Y-%m-%dT%H:%M:%S.000Z")


def input_checksums(opts) -> dict:
    """SHA-256 of every file of every input of a sheet (GDAL's side files included), by absolute path."""
    from strikeline.io.files import file_sha256, input_files
    from strikeline.pipeline.options import input_paths

    out = {}
    for given in input_paths(opts):
        if given is None:
            continue
        for f in input_files(given):
            p = Path(f).resolve()
            if p.is_file():
                try:
                    out[str(p)] = file_sha256(p)
                except OSError:  # unreadable: the sheet fails on it, with its reason
                    continue
    return dict(sorted(out.items()))


def sheet_warning(name: str, message: str) -> str:
    """A warning line of a sheet's run as the batch keeps it: as logged, but any temporary folder
    of the sheet's write (``.NAME.strikeline-part-*``, whose name differs between runs) named as
    the sheet's folder, so that where and when the sheet ran does not change what is kept."""
    return re.sub(rf"\.{re.escape(name)}\.strikeline-(part|old)-[0-9a-f]{{8}}", name, message)


def run_sheet(name: str, opts, command: list, stamp: str) -> dict:
    """Run one sheet as ``strikeline run`` would (SIGINT/SIGTERM as exceptions where this is a
    process's main thread, the command line recorded as ``command``, GeoPackages dated ``stamp``)
    and say how it went: ``{"name", "status", "error", "seconds", "warnings"}`` (the lines the run
    logged at warning level, :func:`sheet_warning`, in the order logged). Picklable, so it runs in
    a worker process or on a dask worker."""
    from strikeline.io._gdal import file_date
    from strikeline.io.interrupt import signals_as_exceptions
    from strikeline.batch.job import job_key_names
    from strikeline.pipeline import run
    from strikeline.pipeline.command import command_line
    from strikeline.pipeline.progress import WARNING, level_of

    start = time.perf_counter()
    status, error = "ok", None
    warnings = []

    def log(message):
        if level_of(message) == WARNING:
            warnings.append(sheet_warning(name, message))

    try:
        with signals_as_exceptions(), command_line(command), file_date(stamp):
            run(opts, log=log, names=job_key_names())  # options named by their job-file keys
    except StrikelineError as exc:
        status, error = "failed", one_line(exc)
    except Exception as exc:  # a bug, not bad input: recorded, and the other sheets go on
        status, error = "failed", (f"internal failure ({type(exc).__name__}: {one_line(exc)}); this is a bug in "
                                   "strikeline - please report it with the job file")
    return {"name": name, "status": status, "error": error, "seconds": time.perf_counter() - start,
            "warnings": warnings}


#: Threads of the numerical libraries (OpenBLAS, MKL, OpenMP) in a sheet's process: one, as
#: dask's workers set them by default (``distributed.nanny.pre-spawn-environ``). A linear solve
#: sums in another order on more threads, which moves the last bits of a result; with one thread
#: everywhere the same sheet gives the same bytes here, in a worker process and on a cluster.
ONE_THREAD = {"OMP_NUM_THREADS": "1", "MKL_NUM_THREADS": "1", "OPENBLAS_NUM_THREADS": "1"}


@contextlib.contextmanager
def _environment(values: dict):
    """``os.environ`` with ``values`` inside the block (the worker processes started in it
    inherit them), as it was after."""
    old = {k: os.environ.get(k) for k in values}
    os.environ.update(values)
    try:
        yield
    finally:
        for k, v in old.items():
            if v is None:
                os.environ.pop(k, None)
            else:
                os.environ[k] = v


def dask_client(address: str):
    """A client of the dask.distributed scheduler at ``address`` (one-line errors)."""
    try:
        from distributed import Client
    except ImportError:
        raise InputError(f"--scheduler needs dask.distributed, which is not installed; install the dask extra "
                         f"(pip install '{DASK_EXTRA}') or run without --scheduler") from None
    try:
        return Client(address, timeout="20s", set_as_default=False)
    except (OSError, TimeoutError, ValueError) as exc:
        raise InputError(f"--scheduler {address}: cannot reach a dask scheduler there ({one_line(exc)}); start one "
                         "(dask scheduler) and its workers (dask worker ADDRESS), or check the address") from None


def run_sheets(tasks: list, *, workers: int = 1, client=None, done=None) -> dict:
    """Run ``tasks`` (argument tuples of :func:`run_sheet`) in ``workers`` local processes (each
    sheet in a fresh one; 1: one sheet at a time), or on the dask ``client``'s cluster
    (:func:`dask_client`); ``done(result)`` is called as each sheet finishes. Returns the results
    by sheet name."""
    done = done or (lambda r: None)
    results = {}
    if not tasks:
        return results
    if client is not None:
        from distributed import as_completed

        with client.as_current():  # as_completed finds the client here, not in a process-wide default
            futures = [client.submit(run_sheet, *t, key=f"strikeline-sheet-{t[0]}-{os.getpid()}-{time.time_ns()}",
                                     pure=False) for t in tasks]
            try:
                for fut in as_completed(futures):
                    r = fut.result()
                    results[r["name"]] = r
                    done(r)
            except BaseException:
                client.cancel(futures)
                raise
        return results
    # every sheet in a fresh process (spawn: it starts with ONE_THREAD in its environment before
    # numpy loads its libraries), one at a time with workers=1
    with _environment(ONE_THREAD), cf.ProcessPoolExecutor(
            max_workers=min(max(workers, 1), len(tasks)), mp_context=multiprocessing.get_context("spawn")) as pool:
        futures = [pool.submit(run_sheet, *t) for t in tasks]
        try:
            for fut in cf.as_completed(futures):
                r = fut.result()
                results[r["name"]] = r
                done(r)
        except BaseException:
            for f in futures:
                f.cancel()
            raise
    return results
