"""``strikeline batch`` on a small invented series (tests/batch/batch_series.py): the mismatch along
shared edges against the analytic planes, the index files read back with OGR, reruns, a failing
sheet, bad job files, and byte-identical outputs from local worker processes and a dask cluster."""
from __future__ import annotations

import contextlib
import hashlib
import json
import math
import os
import re
import shutil
from pathlib import Path

import pytest

from batch_series import A, B, RAISED_M, contacts_off_dem, make_series
from helpers import run_cli
from strikeline import CAUTION
from strikeline import vocabulary as V

#: A fixed date for the GeoPackages (reproducible-builds' SOURCE_DATE_EPOCH), so that two batches run
#: at different times are comparable byte for byte.
EPOCH = "1700000000"


@contextlib.contextmanager
def source_date():
    old = os.environ.get("SOURCE_DATE_EPOCH")
    os.environ["SOURCE_DATE_EPOCH"] = EPOCH
    try:
        yield
    finally:
        if old is None:
            del os.environ["SOURCE_DATE_EPOCH"]
        else:
            os.environ["SOURCE_DATE_EPOCH"] = old


def batch(*args):
    with source_date():
        return run_cli("batch", *args)


@pytest.fixture(scope="module")
def series(tmp_path_factory):
    """The five sheets run once: A B E in a row, C D above A B; E's contact 10 m higher."""
    base = tmp_path_factory.mktemp("series")
    job = make_series(base)
    out = base / "out"
    proc = batch(job, "--out", out)
    assert proc.returncode == 0, proc.stderr
    return proc, out, json.loads((out / V.BATCH_FILE).read_text())


# --------------------------------------------------------------------------- shared edges
def test_edges_of_one_surface_meet_and_a_raised_contact_does_not(series):
    _, _, record = series
    edges = record["edges"]
    # A and D touch at a corner only: no edge
    assert sorted(edges) == ["A/B", "A/C", "B/D", "B/E", "C/D"]
    for name in ("A/B", "A/C", "B/D", "C/D"):
        e = edges[name]
        assert e["length_m"] == pytest.approx(600.0) and e["n_samples"] > 100
        assert e["max_dz_m"] < 1e-3 and e["max_offset_m"] < 1e-2, (name, e)
    e = edges["B/E"]
    # Source: the contact plane z = Z0 + A u + B v (batch_series); E's lies RAISED_M higher, so the two
    # surfaces differ by RAISED_M everywhere, and along the edge u = 1200 m (z changes by B per metre
    # of v) equal elevations lie RAISED_M / |B| apart - the plane equation of any textbook (e.g. Ragan
    # 2009, Structural Geology: An Introduction to Geometrical Techniques, ch. 2).
    assert e["median_dz_m"] == pytest.approx(RAISED_M, abs=1e-3)
    assert e["max_dz_m"] == pytest.approx(RAISED_M, abs=1e-3)
    assert e["median_offset_m"] == pytest.approx(RAISED_M / abs(B), abs=0.05)
    assert e["n_levels"] >= 10
    # split by the reach of each sheet's picks: the contacts cross every sheet, so the edges lie
    # within reach of both sheets' data along much of their length, and the figures there are
    # those of the plane equation again (0 m for one surface, RAISED_M for B/E)
    for name, want in (("A/B", 0.0), ("A/C", 0.0), ("B/D", 0.0), ("C/D", 0.0), ("B/E", RAISED_M)):
        e = edges[name]
        assert 0 < e["n_samples_in_reach"] <= e["n_samples"], (name, e)
        assert e["max_dz_in_reach_m"] == pytest.approx(want, abs=1e-3), (name, e)
        if e["n_samples_in_reach"] < e["n_samples"]:
            assert e["max_dz_extrapolated_m"] == pytest.approx(want, abs=1e-3), (name, e)
        else:
            assert e["max_dz_extrapolated_m"] is None


def test_each_sheet_recovers_the_plane(series):
    _, _, record = series
    # Source: dip of the plane z = a x + b y is atan(sqrt(a^2 + b^2)), its dip direction the azimuth
    # of the downhill gradient (-a, -b) from north (textbook plane geometry, as above)
    dip = math.degrees(math.atan(math.hypot(A, B)))
    azimuth = math.degrees(math.atan2(-A, -B)) % 360
    for name, sheet in record["sheets"].items():
        assert sheet["status"] == "ok" and sheet["error"] is None, name
        assert sheet["plane"]["dip_deg"] == pytest.approx(dip, abs=0.01)
        assert sheet["plane"]["dip_direction_deg"] == pytest.approx(azimuth, abs=0.05)


# --------------------------------------------------------------------------- the index files
def _ogr_layers(path):
    from osgeo import ogr  # Source: OGR reads the file back, independent of strikeline's writer

    ds = ogr.Open(str(path))
    got = {}
    for i in range(ds.GetLayerCount()):
        lyr = ds.GetLayerByIndex(i)
        defn = lyr.GetLayerDefn()
        got[lyr.GetName()] = ([defn.GetFieldDefn(k).GetName() for k in range(defn.GetFieldCount())],
                              [(f.items(), f.GetGeometryRef() and f.GetGeometryRef().ExportToIsoWkt()) for f in lyr])
    ds = None
    return got


def test_index_gpkg_holds_every_sheet(series):
    _, out, _ = series
    got = _ogr_layers(out / V.INDEX_FILE)
    assert list(got) == [layer.name for layer in V.INDEX_LAYERS]
    fields, feats = got["sheets"]
    assert sorted(f["sheet"] for f, _ in feats) == ["A", "B", "C", "D", "E"]
    assert {f["status"] for f, _ in feats} == {"ok"}
    assert any("500600 4000000" in wkt for _, wkt in feats)
    # every sheet's structure contours and attitudes, as many as its own results.gpkg holds
    for layer, own in (("sheet_structure_contours", "structure_contours"), ("sheet_attitudes", "attitudes")):
        fields, feats = got[layer]
        assert fields[0] == "sheet" and fields[1:] == [f for f in V.LAYERS[own].field_names if f in fields]
        for name in "ABCDE":
            n = len(_ogr_layers(out / name / V.RESULTS_FILE)[own][1])
            assert sum(f["sheet"] == name for f, _ in feats) == n > 0, (layer, name)
    _, feats = got["sheet_planes"]
    assert len(feats) == 5 and all(wkt.startswith("POINT Z") for _, wkt in feats)
    _, feats = got["shared_edges"]
    assert sorted((f["sheet_a"], f["sheet_b"]) for f, _ in feats) == [("A", "B"), ("A", "C"), ("B", "D"),
                                                                       ("B", "E"), ("C", "D")]


def test_index_page_and_batch_json(series):
    proc, out, record = series
    page = (out / V.INDEX_PAGE).read_text()
    assert page.index(CAUTION[:40]) < page.index("<h1>")
    for name in "ABCDE":
        assert f"<td>{name}</td>" in page or f">{name}</a>" in page
    assert sorted(V.json_paths(record, V.BATCH_KEYS) - V.summary_path_names(V.BATCH_KEYS)) == []
    assert "within reach of both sheets' data / where extrapolated" in page and "extrapolated: max" in page
    assert record["n_ok"] == 5 and record["n_failed"] == 0
    a = record["sheets"]["A"]
    assert all(len(h) == 64 for h in a["inputs"].values()) and any(p.endswith("dem_A.tif") for p in a["inputs"])
    assert a["options"]["model"] == "plane" and "out" not in a["options"]
    assert proc.stdout.count("sheet ") == 5 and "5 ok" in proc.stdout
    summary = json.loads((out / "A" / V.SUMMARY_FILE).read_text())
    assert summary["command_line"][:2] == ["strikeline", "batch"]


# --------------------------------------------------------------------------- reruns and failures
def test_rerun_skips_unchanged_sheets_and_redoes_changed_ones(tmp_path):
    job = make_series(tmp_path, ("A", "B"))
    out = tmp_path / "out"
    assert batch(job, "--out", out).returncode == 0
    before = {p: p.stat().st_mtime_ns for p in (out / "A").iterdir()}
    again = batch(job, "--out", out, "--quiet")
    assert again.returncode == 0, again.stderr
    rec = json.loads((out / V.BATCH_FILE).read_text())
    assert {n: s["status"] for n, s in rec["sheets"].items()} == {"A": "unchanged", "B": "unchanged"}
    assert {p: p.stat().st_mtime_ns for p in (out / "A").iterdir()} == before
    # a GDAL side file of A's DEM is an input too (GDAL lists it): A is redone, B is not
    (tmp_path / "data" / "dem_A.tif.aux.xml").write_text(
        '<PAMDataset><Metadata><MDI key="NOTE">invented</MDI></Metadata></PAMDataset>\n')
    assert batch(job, "--out", out).returncode == 0
    rec = json.loads((out / V.BATCH_FILE).read_text())
    assert {n: s["status"] for n, s in rec["sheets"].items()} == {"A": "ok", "B": "unchanged"}
    assert any(p.endswith("dem_A.tif.aux.xml") for p in rec["sheets"]["A"]["inputs"])
    assert batch(job, "--out", out, "--force").returncode == 0
    rec = json.loads((out / V.BATCH_FILE).read_text())
    assert {s["status"] for s in rec["sheets"].values()} == {"ok"}


def test_a_failing_sheet_is_reported_and_the_others_run(tmp_path):
    job = make_series(tmp_path, ("A", "B"))
    (tmp_path / "data" / "contacts_B.gpkg").write_bytes(b"not a vector file")
    out = tmp_path / "out"
    proc = batch(job, "--out", out)
    assert proc.returncode == 1
    rec = json.loads((out / V.BATCH_FILE).read_text())
    assert rec["sheets"]["A"]["status"] == "ok" and rec["sheets"]["B"]["status"] == "failed"
    err = rec["sheets"]["B"]["error"]
    assert "contacts_B.gpkg" in err and "\n" not in err and "sheet B: failed" in proc.stderr
    assert not (out / "B").exists() and (out / "A" / V.SUMMARY_FILE).is_file()
    # B's footprint comes from its DEM: the edge is listed, not compared
    assert rec["edges"]["A/B"]["note"] == "not compared: no surface of sheet B"
    # no earlier results: nothing to link, nothing said of them
    assert rec["sheets"]["B"]["earlier_results"] is False and rec["sheets"]["B"]["earlier_results_utc"] is None
    assert 'href="B/' not in (out / V.INDEX_PAGE).read_text()


def test_a_failed_sheets_earlier_results_are_named_as_such(tmp_path):
    from datetime import datetime, timezone

    job = make_series(tmp_path, ("A", "B"))
    out = tmp_path / "out"
    assert batch(job, "--out", out).returncode == 0
    before = _files(out / "B")
    # Source: the file system's own time of the manifest the earlier run wrote into B's folder
    # (os.stat, outside strikeline's records), to the second, in UTC
    written = datetime.fromtimestamp(int((out / "B" / V.MANIFEST_FILE).stat().st_mtime), tz=timezone.utc)
    (tmp_path / "data" / "contacts_B.gpkg").write_bytes(b"not a vector file")
    proc = batch(job, "--out", out)
    assert proc.returncode == 1, proc.stderr
    assert _files(out / "B") == before  # the earlier results are kept as they were
    rec = json.loads((out / V.BATCH_FILE).read_text())["sheets"]
    assert rec["B"]["status"] == "failed" and rec["B"]["earlier_results"] is True
    assert rec["B"]["earlier_results_utc"] == written.strftime("%Y-%m-%dT%H:%M:%SZ")
    assert rec["A"]["earlier_results"] is False and rec["A"]["earlier_results_utc"] is None
    page = (out / V.INDEX_PAGE).read_text()
    row = next(line for line in page.splitlines() if line.startswith("<tr><td>B"))
    # the sheet's name is not a link to the old report as if it were this run's
    assert row.startswith("<tr><td>B</td><td>failed</td>"), row
    assert f"results of an earlier run, written {written:%Y-%m-%d %H:%M:%S} UTC" in row
    if (out / "B" / V.REPORT_FILE).is_file():
        assert '<a href="B/report.html">the earlier report</a>' in row


def _standalone_warnings(job: Path, name: str, tmp_path: Path) -> list:
    """The warning lines of ``strikeline run`` on one sheet of a job, given the options the job
    file gives it (paths made absolute as the job file's folder makes them)."""
    from strikeline.batch.job import read_job

    opts = {s.name: s.options for s in read_job(job, out=tmp_path / "unused").sheets}[name]
    contacts = [a for c in opts.contacts for a in ("--contacts", c)]
    proc = run_cli("run", *contacts, "--dem", opts.dem, "--model", opts.model, "--resamples", str(opts.resamples), "--interval", str(opts.interval_m),
                   "--out", tmp_path / f"alone_{name}")
    assert proc.returncode == 0, proc.stderr
    return [line for line in proc.stderr.splitlines() if line.startswith("warning:")]


def _as_job_keys(lines: list) -> list:
    """Warning lines of ``strikeline run`` with every option flag written as a job file's key
    (``--dem-sigma`` -> ``dem_sigma``), as a batch names the options; longest flags first."""
    from strikeline.batch.job import key_of
    from strikeline.pipeline.options import CLI_OPTION_NAMES

    flags = sorted(set(CLI_OPTION_NAMES.values()), key=len, reverse=True)
    out = []
    for line in lines:
        for flag in flags:
            line = re.sub(re.escape(flag) + r"(?![\w-])", key_of(flag), line)
        out.append(line)
    return out


def test_a_sheets_warnings_are_kept_counted_and_shown(tmp_path):
    job = make_series(tmp_path, ("A", "B"))
    contacts_off_dem(tmp_path, "A", 400.0)
    out = tmp_path / "out"
    proc = batch(job, "--out", out)
    assert proc.returncode == 0, proc.stderr
    rec = json.loads((out / V.BATCH_FILE).read_text())
    kept = rec["sheets"]["A"]["warnings"]
    # Source: the outside reference is the standalone `strikeline run` of the same sheet: the batch
    # keeps exactly the warning lines that run prints, in the same order
    alone = _standalone_warnings(job, "A", tmp_path)
    assert kept == _as_job_keys(alone) and len(alone) >= 1
    # the run names options by their flags and the batch by the job file's keys: the exact series draws
    # the hint to state the errors (--dem-sigma ...), so the renaming is exercised here
    assert any("--dem-sigma" in w for w in alone) and any("(dem_sigma)" in w for w in kept), (alone, kept)
    assert not any(re.search(r"--[a-z]", w) for w in kept), kept
    # and the sheet's own summary says the contacts it warns of lie off the DEM
    off = json.loads((out / "A" / V.SUMMARY_FILE).read_text())["contacts_off_dem"]
    assert any(f"{off['length_m']:.0f} m of the contacts" in w for w in kept), (off, kept)
    assert rec["sheets"]["B"]["warnings"] == _as_job_keys(_standalone_warnings(job, "B", tmp_path))
    n = len(kept)
    assert f"sheet A: ok with {n} warning{'s' if n != 1 else ''} (" in proc.stdout, proc.stdout
    page = (out / V.INDEX_PAGE).read_text()
    import html

    for w in kept:
        assert f"<li>{html.escape(w)}</li>" in page
    assert f"{n} warning{'s' if n != 1 else ''}<ul>" in page
    # a sheet skipped as unchanged keeps the warnings of the run that made its results
    again = batch(job, "--out", out)
    assert again.returncode == 0, again.stderr
    rec2 = json.loads((out / V.BATCH_FILE).read_text())
    assert rec2["sheets"]["A"]["status"] == "unchanged" and rec2["sheets"]["A"]["warnings"] == kept
    assert f"sheet A: unchanged with {n} warning" in again.stdout
    page2 = (out / V.INDEX_PAGE).read_text()
    assert all(f"<li>{html.escape(w)}</li>" in page2 for w in kept)


@pytest.mark.parametrize("unreadable", [False, True])
def test_a_sheet_whose_input_is_missing_fails_alone(tmp_path, monkeypatch, unreadable):
    job = make_series(tmp_path, ("A", "B", "E"))
    dem = tmp_path / "data" / ("dem_B.tif" if unreadable else "dem_B_missing.tif")
    job.write_text(job.read_text().replace('dem = "data/dem_B.tif"', f'dem = "data/{dem.name}"'))
    if unreadable:  # root reads every file: the permission is taken away by os.access's answer alone
        real = os.access
        monkeypatch.setattr(os, "access", lambda p, mode, **kw: False if Path(p) == dem else real(p, mode, **kw))
    out = tmp_path / "out"
    proc = batch(job, "--out", out)
    assert proc.returncode == 1, proc.stderr  # some failed, not a refused job
    rec = json.loads((out / V.BATCH_FILE).read_text())
    assert {n: s["status"] for n, s in rec["sheets"].items()} == {"A": "ok", "B": "failed", "E": "ok"}
    err = rec["sheets"]["B"]["error"]
    assert "\n" not in err and err.startswith(f"dem: '{dem}'")
    assert ("cannot be read" if unreadable else "not found") in err
    assert f"sheet B: failed ({err})" in proc.stderr and rec["n_failed"] == 1 and rec["n_ok"] == 2
    assert not (out / "B").exists() and (out / "A" / V.SUMMARY_FILE).is_file()
    import html

    assert f"<td>B</td><td>failed</td><td>{html.escape(err)}</td>" in (out / V.INDEX_PAGE).read_text()
    if not unreadable:
        # Source: the standalone `strikeline run` of the same sheet refuses the same file (the outside
        # reference for what the batch reports of that sheet)
        alone = run_cli("run", "--contacts", tmp_path / "data" / "contacts_B.gpkg", "--dem", dem,
                        "--out", tmp_path / "alone")
        assert alone.returncode == 2 and str(dem) in alone.stderr and "not found" in alone.stderr, alone.stderr


def test_an_option_error_still_refuses_the_whole_job(tmp_path):
    """A missing input does not hide a bad option elsewhere: the job is refused before anything runs."""
    job = make_series(tmp_path, ("A", "B"))
    job.write_text(job.read_text().replace('dem = "data/dem_B.tif"', 'dem = "data/dem_B_missing.tif"\nintervall = 5'))
    proc = batch(job, "--out", tmp_path / "out")
    assert proc.returncode == 2 and "unknown key 'intervall'" in proc.stderr and proc.stderr.count("\n") == 1
    assert not (tmp_path / "out").exists()


@pytest.mark.parametrize("change, words", [
    ('[[sheet]\n', "not valid TOML"),
    ('[[sheet]]\nname = "F"\ncontacts = "data/contacts_A.gpkg"\ndem = "data/dem_A.tif"\nintervall = 5\n',
     "sheet 'F': unknown key 'intervall' - did you mean interval?"),
    ('[[sheet]]\nname = "F"\ncontacts = "data/contacts_A.gpkg"\ndem = "data/dem_A.tif"\ninterval = -5\n',
     "sheet 'F': interval:"),
    ('[[sheet]]\nname = "F"\ncontacts = "data/contacts_A.gpkg"\ndem = "data/dem_A.tif"\nmodel = "cubic"\n',
     "sheet 'F': model: must be one of"),
    ('[[sheet]]\nname = "a"\ncontacts = "data/contacts_A.gpkg"\ndem = "data/dem_A.tif"\n',
     "sheet 'a': the name is already that of sheet 1"),
    ('[[sheet]]\nname = "F"\ncontacts = "data/contacts_A.gpkg"\n', "sheet 'F': no topography given"),
])
def test_a_bad_job_file_is_one_line_and_nothing_runs(tmp_path, change, words):
    job = make_series(tmp_path, ("A",))
    job.write_text(job.read_text() + "\n" + change)
    out = tmp_path / "out"
    proc = batch(job, "--out", out)
    assert proc.returncode == 2, proc.stderr
    assert proc.stderr.count("\n") == 1 and words in proc.stderr and str(job) in proc.stderr, proc.stderr
    assert not out.exists()


def test_bad_toml_names_line_and_column(tmp_path):
    job = tmp_path / "job.toml"
    job.write_text('[defaults]\ninterval = 10\n[[sheet]]\nname = "A"\ncontacts = "x.gpkg\n')
    proc = batch(job, "--out", tmp_path / "out")
    # Source: Python's tomllib reports "(at line N, column M)" (Python 3.11 docs, tomllib.TOMLDecodeError)
    assert proc.returncode == 2 and "(at line 5, column" in proc.stderr


def test_a_folder_the_batch_did_not_write_is_refused(tmp_path):
    job = make_series(tmp_path, ("A",))
    out = tmp_path / "out"
    out.mkdir()
    (out / "notes.txt").write_text("mine")
    proc = batch(job, "--out", out)
    assert proc.returncode == 2 and "not written by strikeline batch" in proc.stderr
    assert [p.name for p in out.iterdir()] == ["notes.txt"]


# --------------------------------------------------------------------------- where sheets run
def _files(folder: Path) -> dict:
    return {p.relative_to(folder).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file()}


def _comparable(folder: Path) -> dict:
    """Every file's SHA-256, but batch.json read without its timings (``seconds``) and the batch
    folder's manifest, which holds batch.json's checksum and so its timings too."""
    files = _files(folder)
    files.pop(V.MANIFEST_FILE)
    rec = json.loads((folder / V.BATCH_FILE).read_text())
    rec.pop("seconds")
    for s in rec["sheets"].values():
        s.pop("seconds")
    files[V.BATCH_FILE] = rec
    return files


def test_workers_and_dask_write_the_same_bytes_as_serial(tmp_path):
    distributed = pytest.importorskip("distributed")  # the dask extra (make setup installs it)
    job = make_series(tmp_path, ("A", "B", "E"))
    contacts_off_dem(tmp_path, "A", 400.0)  # A's run warns: its warnings are compared too
    out = tmp_path / "out"
    assert batch(job, "--out", out).returncode == 0
    serial = _comparable(out)
    assert serial[V.BATCH_FILE]["sheets"]["A"]["warnings"]
    shutil.move(out, tmp_path / "serial")
    proc = batch(job, "--out", out, "--workers", "2")
    assert proc.returncode == 0, proc.stderr
    assert _comparable(out) == serial
    shutil.move(out, tmp_path / "workers")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, host="127.0.0.1", processes=True,
                                  dashboard_address=None) as cluster:
        proc = batch(job, "--out", out, "--scheduler", cluster.scheduler_address)
    assert proc.returncode == 0, proc.stderr
    assert _comparable(out) == serial
    # the sheets' summaries record the batch's command without where it ran
    assert json.loads((out / "A" / V.SUMMARY_FILE).read_text())["command_line"] == [
        "strikeline", "batch", str(job), "--out", str(out)]


def test_scheduler_without_dask_names_the_extra(tmp_path, monkeypatch):
    import sys

    job = make_series(tmp_path, ("A",))
    monkeypatch.setitem(sys.modules, "distributed", None)
    proc = batch(job, "--out", tmp_path / "out", "--scheduler", "tcp://127.0.0.1:1")
    assert proc.returncode == 2 and "strikeline[dask]" in proc.stderr and proc.stderr.count("\n") == 1
