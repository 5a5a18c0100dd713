"""``strikeline batch``: a series of sheets from one job file into one output folder.

:func:`run_batch` checks the job file and the output folder before anything is written, locks the
folder, skips the sheets whose inputs and options are unchanged since their intact results were
written, runs the others (here, in worker processes or on a dask cluster), then writes
``index.gpkg``, ``index.html`` and ``batch.json`` (:mod:`strikeline.batch.index`) and the folder's
manifest (:mod:`strikeline.batch.folder`).
"""
from __future__ import annotations

import contextlib
import json
import time
from dataclasses import dataclass
from pathlib import Path

from strikeline import CAUTION, __version__
from strikeline import vocabulary as V
from strikeline.batch import folder as bf
from strikeline.batch.index import PLANE_SHOWN, compare_edges, index_layers, index_page, read_sheet
from strikeline.batch.job import Job, options_record, read_job
from strikeline.batch.runner import dask_client, file_stamp, input_checksums, run_sheets
from strikeline.pipeline.options import input_paths

#: Options of ``strikeline batch`` that say only where and how verbosely sheets run: left out of
#: the command line each sheet records, so that where it ran does not change what it wrote.
EXECUTION_FLAGS = {"--workers": 1, "--scheduler": 1, "--quiet": 0, "--force": 0}


@dataclass(frozen=True)
class BatchResult:
    """What a batch did: the path of batch.json's data and each sheet's status."""

    record: dict
    statuses: dict

    @property
    def n_failed(self) -> int:
        return sum(s == "failed" for s in self.statuses.values())


def sheet_command(argv) -> list:
    """The batch's arguments without :data:`EXECUTION_FLAGS` (``--workers 2``, ``--workers=2``)."""
    out, skip = [], 0
    for a in map(str, argv):
        if skip:
            skip -= 1
            continue
        flag = a.split("=", 1)[0]
        if flag in EXECUTION_FLAGS:
            skip = EXECUTION_FLAGS[flag] if "=" not in a else 0
            continue
        out.append(a)
    return out


def _previous(out: Path) -> dict:
    try:
        data = json.loads((out / V.BATCH_FILE).read_text(encoding="utf-8"))
        return data.get("sheets", {}) if isinstance(data, dict) else {}
    except (OSError, ValueError):
        return {}


def _unchanged(prev: dict | None, *, options: dict, inputs: dict, folder: Path) -> bool:
    from strikeline.io.files import _complete

    return (isinstance(prev, dict) and prev.get("status") in ("ok", "unchanged") and prev.get("options") == options
            and prev.get("inputs") == inputs and prev.get("version") == __version__ and _complete(folder))


def _earlier_results(folder: Path) -> str | None:
    """When the results in a failed sheet's folder were written (ISO 8601, UTC, to the second:
    the time the file system gives the folder's manifest, the last file a run writes there), or
    None when the folder holds no results. A failed run leaves the folder as it was, so these
    are an earlier run's."""
    from datetime import datetime, timezone

    try:
        when = (folder / V.MANIFEST_FILE).stat().st_mtime
    except OSError:
        return None
    return datetime.fromtimestamp(int(when), tz=timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")


def _kept_warnings(prev: dict) -> list:
    """The warnings of the run that made a skipped sheet's results (its earlier record's)."""
    kept = prev.get("warnings")
    return [w for w in kept if isinstance(w, str)] if isinstance(kept, list) else []


def run_batch(job_path, out, *, argv=(), workers: int = 1, scheduler: str | None = None, force: bool = False,
              log=lambda m: None, done=lambda name, status, text, n_warnings: None) -> BatchResult:
    """Run every sheet of a job file into ``out`` and write the batch's index files.

    Parameters
    ----------
    job_path, out : str or PathLike
        The job file (:mod:`strikeline.batch.job`) and the batch folder (``out/NAME`` per sheet).
    argv : sequence of str
        The batch's command line after the program name, ``batch`` included (recorded, without
        the execution options, in every sheet's summary; default ``batch JOB --out OUT``).
    workers : int
        Sheets run at once in local worker processes (1: one at a time, each in a fresh process).
    scheduler : str, optional
        Address of a dask.distributed scheduler to run the sheets on instead.
    force : bool
        Redo every sheet, even those whose inputs and options are unchanged.
    log, done : callable
        ``log(message)``; ``done(name, status, text, n_warnings)`` as each sheet finishes or is
        skipped (``n_warnings``: the lines its run logged at warning level; a skipped sheet's are
        those of the run that made its results).

    Raises
    ------
    InputError, OutputError
        A bad job file or an unusable ``out``: before anything is written.
    """
    from strikeline.io._gdal import file_date
    from strikeline.io.files import json_ready, read_manifest, write_json_atomic, write_text_checked
    from strikeline.io.vector import write_gpkg

    start = time.perf_counter()
    job: Job = read_job(job_path, out=out)
    names = [s.name for s in job.sheets]
    out = bf.check_batch_folder(out, inputs=[input_paths(s.options) for s in job.sheets], sheets=names)
    # the cluster is reached before anything is written: no scheduler there, nothing changed here
    with contextlib.closing(dask_client(scheduler)) if scheduler else contextlib.nullcontext() as client, \
            bf.BatchLock(out):
        bf.check_batch_folder(out, inputs=[input_paths(s.options) for s in job.sheets], sheets=names)
        manifest = read_manifest(out) if out.exists() else None
        known = set((manifest or {}).get("sheets", [])) | set(names)
        written = dict((manifest or {}).get("files", {}))
        out.mkdir(exist_ok=True)
        bf.write_manifest(out, sheets=known, files_written=written)
        previous = _previous(out)
        stamp = file_stamp()
        command = sheet_command(argv) if argv else ["batch", str(job_path), "--out", str(out)]
        records, tasks = {}, []
        for s in job.sheets:
            rec = {"status": None, "error": None, "folder": s.name, "contact": s.contact,
                   "inputs": input_checksums(s.options), "options": options_record(s.options), "seconds": None,
                   "version": __version__, "warnings": []}
            records[s.name] = rec
            prev = previous.get(s.name)
            if s.problem is not None:  # an input missing or unreadable: failed, not run
                rec.update(status="failed", error=s.problem)
                done(s.name, "failed", s.problem, 0)
            elif not force and _unchanged(prev, options=rec["options"], inputs=rec["inputs"], folder=out / s.name):
                rec.update(status="unchanged", warnings=_kept_warnings(prev))
                done(s.name, "unchanged", "inputs and options unchanged; earlier results kept", len(rec["warnings"]))
            else:
                tasks.append((s.name, s.options, command, stamp))

        def finished(r):
            rec = records[r["name"]]
            rec.update(status=r["status"], error=r["error"], seconds=r["seconds"], warnings=list(r["warnings"]))
            done(r["name"], r["status"], r["error"] or f"{r['seconds']:.1f} s", len(rec["warnings"]))

        run_sheets(tasks, workers=workers, client=client, done=finished)
        for name, rec in records.items():
            rec["earlier_results_utc"] = _earlier_results(out / name) if rec["status"] == "failed" else None
            rec["earlier_results"] = rec["earlier_results_utc"] is not None
        sheets = [read_sheet(out / s.name, s.name, records[s.name]["status"], s.contact, records[s.name]["error"],
                             s.options, log, warnings=records[s.name]["warnings"],
                             earlier_utc=records[s.name]["earlier_results_utc"]) for s in job.sheets]
        for s in sheets:
            pl = s.summary.get("plane")
            if pl:
                records[s.name]["plane"] = {k: pl.get(k) for k in PLANE_SHOWN}
        edges = compare_edges(sheets, {s.name: s.options.interval_m for s in job.sheets})
        crs = next((s.crs_wkt for s in sheets if s.crs_wkt), "")
        indexed = [s for s in sheets if not s.crs_wkt or s.crs_wkt == crs]
        for s in sheets:
            if s not in indexed:
                log(f"sheet {s.name}: in another CRS than the first sheet; left out of {V.INDEX_FILE}")
        statuses = {n: r["status"] for n, r in records.items()}
        record = {"version": __version__, "job_file": str(Path(job.path).resolve()), "caution": CAUTION,
                  "n_ok": sum(v == "ok" for v in statuses.values()),
                  "n_failed": sum(v == "failed" for v in statuses.values()),
                  "n_unchanged": sum(v == "unchanged" for v in statuses.values()),
                  "sheets": records,
                  "edges": {f"{e['sheet_a']}/{e['sheet_b']}": {k: v for k, v in e.items() if k != "geometry"}
                            for e in edges}}
        pending = {f: {"pending": True} for f in (V.INDEX_FILE, V.INDEX_PAGE, V.BATCH_FILE)}
        bf.write_manifest(out, sheets=known, files_written={**written, **pending})
        with file_date(stamp):
            write_gpkg(out / V.INDEX_FILE, index_layers(indexed, [e for e in edges if e["sheet_a"] in
                                                                   {s.name for s in indexed}]), crs)
        page = out / f".{V.INDEX_PAGE}.part-{time.time_ns() % (1 << 32):08x}"
        write_text_checked(page, index_page(sheets, out, edges))
        page.replace(out / V.INDEX_PAGE)
        record["seconds"] = time.perf_counter() - start
        write_json_atomic(out / V.BATCH_FILE, json_ready(record), overwrite=True)
        bf.write_manifest(out, sheets=known, files_written={
            **written, **{f: bf.file_record(out / f) for f in (V.INDEX_FILE, V.INDEX_PAGE, V.BATCH_FILE)}})
    return BatchResult(record, statuses)
