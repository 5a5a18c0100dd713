"""End-to-end: ``strikeline run`` / ``strikeline demo`` on the demo sheet, and bad input.

The command runs in this process (conftest's ``cli``, the session's canonical runs); the console
script as a separate process is tested in test_console.py.
The demo sheet is invented (test_data/make_demo_sheet.py); the reference for what comes out is
the analytic plane it was built from (truth.json), and GDAL's own processing where noted.
"""
import hashlib
import json
from pathlib import Path

import numpy as np
import pytest
import shapely
from osgeo import gdal, ogr, osr

from helpers import run_cli, write_lines

# Tolerances set by the issue (end-to-end acceptance): 0.5 deg of dip, 1 deg of dip direction,
# trace misfit median below one DEM cell (10 m on the demo sheet).
DIP_TOL_DEG = 0.5
DIP_DIRECTION_TOL_DEG = 1.0
DEMO_CELL_M = 10.0


def _angle_diff(a, b):
    return abs((a - b + 180.0) % 360.0 - 180.0)


@pytest.fixture(scope="module")
def demo_run(demo_command_run):
    """``strikeline demo``, run once for the session (conftest; it checks the inputs are untouched)."""
    return demo_command_run.proc, demo_command_run.out


def test_demo_runs_and_writes_every_output(demo_run, demo):
    proc, out = demo_run
    assert proc.returncode == 0, proc.stderr
    for name in ("results.gpkg", "surface.tif", "dip.tif", "dip_direction.tif", "depth.tif", "uncertainty.tif",
                 "vertical_thickness.tif", "true_thickness.tif", "summary.json"):
        assert (out / name).is_file(), name
    assert "not a substitute for site investigation" in proc.stdout
    ds = ogr.Open(str(out / "results.gpkg"))
    names = {ds.GetLayer(i).GetName() for i in range(ds.GetLayerCount())}
    assert {"picks", "structure_contours", "predicted_trace", "contact_misfit", "attitudes", "top_picks"} <= names
    for name in ("surface.tif", "dip.tif", "dip_direction.tif", "depth.tif", "true_thickness.tif"):
        r = gdal.Open(str(out / name))
        assert r.GetRasterBand(1).DataType == gdal.GDT_Float32
        assert r.GetRasterBand(1).GetNoDataValue() is not None
        assert "32631" in r.GetProjection() or "UTM zone 31N" in r.GetProjection()
        assert r.GetMetadata("IMAGE_STRUCTURE").get("COMPRESSION") == "DEFLATE"


def test_demo_summary_recovers_the_plane(demo_run, demo):
    _, out = demo_run
    s = json.loads((out / "summary.json").read_text())
    t = demo["truth"]  # Source: the analytic plane the demo sheet was generated from (truth.json)
    for key in ("crs", "n_picks", "picks_by_source", "plane", "trace_misfit", "inputs", "version", "caution"):
        assert key in s
    assert s["crs"] == "EPSG:32631"
    assert s["picks_by_source"]["dem"] > 100 and s["picks_by_source"]["contours"] > 50
    assert s["n_picks"] == s["picks_by_source"]["dem"] + s["picks_by_source"]["contours"]
    assert abs(s["plane"]["dip_deg"] - t["dip_deg"]) < DIP_TOL_DEG
    assert _angle_diff(s["plane"]["dip_direction_deg"], t["dip_direction_deg"]) < DIP_DIRECTION_TOL_DEG
    # strike by the right-hand rule is dip direction - 90 (common practice)
    assert _angle_diff(s["plane"]["strike_rhr_deg"], s["plane"]["dip_direction_deg"] - 90.0) < 1e-6
    assert s["trace_misfit"]["median_m"] < DEMO_CELL_M
    # every input by role, the repeatable ones as lists (tests/pipeline/test_summary_inputs.py checks the records)
    assert set(s["inputs"]) == {"contacts", "dem", "contours", "top_contacts", "boreholes", "orientations"}
    named = [s["inputs"][r]["path"] for r in ("dem", "contours", "boreholes", "orientations")]
    named += [rec["path"] for r in ("contacts", "top_contacts") for rec in s["inputs"][r]]
    assert sorted(Path(p).name for p in named) == sorted(["contacts_mapped.gpkg", "dem.tif", "contours.gpkg",
                                                          "top_contacts.gpkg", "boreholes.gpkg", "orientations.gpkg"])
    assert all(len(s["inputs"][r]["sha256"]) == 64 for r in ("dem", "contours", "boreholes", "orientations"))
    # Source: truth.json - the top contact was built parallel to the base at this true thickness
    assert s["thickness"]["mean_m"] == pytest.approx(t["true_thickness_m"], abs=0.5)
    assert set(s["groups"]["planes"]) == set(t["grouped_contacts"]["blocks"])
    assert s["model"]["boreholes"]["n_boreholes"] == len(t["boreholes"]["holes"])
    assert s["model"]["orientations"]["n_orientations"] == len(t["orientations"]["readings"])
    # the demo's contact is a hand-digitised line: picks along it share their errors, so the
    # bootstrap resamples contact segments (Kuensch 1989), and the 95% intervals cover the truth
    pl = s["plane"]
    assert pl["confidence_method"] == "block_bootstrap+monte_carlo"
    assert abs(pl["dip_deg"] - t["dip_deg"]) <= pl["dip_ci95_deg"]
    assert _angle_diff(pl["dip_direction_deg"], t["dip_direction_deg"]) <= pl["dip_direction_ci95_deg"]


def test_demo_flags_the_digitising_error_and_nothing_else(demo_run, demo):
    _, out = demo_run
    # Source: truth.json records where the demo's digitised contact was mistraced by 70 m
    err = demo["truth"]["mapped_contacts"]["digitising_error"]
    stretch = shapely.from_wkt(err["mapped_wkt"])
    ds = ogr.Open(str(out / "results.gpkg"))
    segs = [(shapely.from_wkb(bytes(f.GetGeometryRef().ExportToWkb())), f.GetField("flagged"))
            for f in ds.GetLayerByName("contact_misfit")]
    ds = None
    flagged = [g for g, f in segs if f]
    assert flagged and len(flagged) < len(segs) / 10
    assert all(g.distance(stretch) < 1.0 for g in flagged)


def test_structure_contours_are_multiples_of_interval_and_on_the_plane(demo_run):
    _, out = demo_run
    m = json.loads((out / "summary.json").read_text())["model"]
    assert m["chosen"] == "plane" and m["params"]["terms"] == ["1", "u", "v"]
    # the fitted plane (constrained by the boreholes and dip readings) as the summary states it:
    # z = c0 + c1 u + c2 v with u = (x - x0) / L, v = (y - y0) / L
    c0, c1, c2 = m["params"]["coefficients"]
    (x0, y0), scale = m["params"]["origin_m"], m["params"]["scale_m"]
    ds = ogr.Open(str(out / "results.gpkg"))  # keep the data source alive while its layer is used
    lyr = ds.GetLayerByName("structure_contours")
    assert lyr.GetFeatureCount() > 5
    for f in lyr:
        z = f.GetField("elevation_m")
        assert z % 50.0 == pytest.approx(0.0, abs=1e-9)
        xy = shapely.get_coordinates(shapely.from_wkb(bytes(f.GetGeometryRef().ExportToWkb())))
        plane_z = c0 + c1 * (xy[:, 0] - x0) / scale + c2 * (xy[:, 1] - y0) / scale
        # the summary rounds the coefficients to 1e-4 (about 1e-4 m at the sheet's edge); GDAL's
        # contour vertices lie on the plane to round-off (Source: tests/test_contours.py)
        assert np.max(np.abs(plane_z - z)) < 0.01


@pytest.mark.parametrize("source", ["dem", "contours"])
def test_each_source_alone_recovers_the_plane(tmp_path, demo, cli, demo_dem_run, source):
    if source == "dem":
        out = demo_dem_run.out  # the session's run on the contacts and the DEM alone
    else:
        out = tmp_path / "out"
        proc = cli("run", "--contacts", demo["contacts"], "--contours", demo["contours"], "--elev-field",
                   demo["elev_field"], "--cell", "20", "--out", out)
        assert proc.returncode == 0, proc.stderr
    s = json.loads((out / "summary.json").read_text())
    t = demo["truth"]  # Source: the analytic plane of the demo sheet (truth.json)
    other = "contours" if source == "dem" else "dem"
    assert s["picks_by_source"][other] == 0 and s["picks_by_source"][source] > 50
    assert abs(s["plane"]["dip_deg"] - t["dip_deg"]) < DIP_TOL_DEG
    assert _angle_diff(s["plane"]["dip_direction_deg"], t["dip_direction_deg"]) < DIP_DIRECTION_TOL_DEG


def test_reprojected_contacts_give_the_same_answer(tmp_path, demo, cli, demo_dem_run):
    # The contacts are reprojected to the neighbouring UTM zone by GDAL's own VectorTranslate
    # (the general-purpose reference); strikeline must bring them back and answer the same as on
    # the contacts in the DEM's CRS (the session's run).
    other = str(tmp_path / "contacts_32632.gpkg")
    gdal.VectorTranslate(other, demo["contacts"], dstSRS="EPSG:32632", format="GPKG")
    b = cli("run", "--contacts", other, "--dem", demo["dem"], "--out", tmp_path / "b")
    assert b.returncode == 0, b.stderr
    assert "reprojecting contacts" in b.stderr and "EPSG:32632" in b.stderr
    sa = json.loads((demo_dem_run.out / "summary.json").read_text())["plane"]
    sb = json.loads((tmp_path / "b" / "summary.json").read_text())["plane"]
    assert sb["dip_deg"] == pytest.approx(sa["dip_deg"], abs=1e-3)
    assert _angle_diff(sb["dip_direction_deg"], sa["dip_direction_deg"]) < 1e-3


@pytest.fixture(scope="module")
def overwritten(tmp_path_factory, demo):
    """The session's demo run repeated with ``--overwrite`` into a folder that holds strikeline's
    earlier results of another run (the demo with contours), one of them a stale extra grid."""
    base = tmp_path_factory.mktemp("overwrite")
    out = base / "out"
    first = run_cli("run", "--contacts", demo["contacts"], "--dem", demo["dem"], "--contours", demo["contours"],
                    "--elev-field", demo["elev_field"], "--out", out, "--interval", "7")
    assert first.returncode == 0, first.stderr
    old_summary = (out / "summary.json").read_bytes()
    proc = run_cli("run", "--contacts", demo["contacts"], "--dem", demo["dem"], "--out", out, "--overwrite")
    return proc, base, out, old_summary


def test_overwrite_replaces_an_existing_folder(overwritten):
    proc, base, out, old_summary = overwritten
    assert proc.returncode == 0, proc.stderr
    assert (out / "summary.json").read_bytes() != old_summary
    assert [p.name for p in base.iterdir()] == ["out"]  # no temporary siblings or lock left behind


def test_overwrite_refuses_a_folder_with_files_strikeline_did_not_write(tmp_path, demo, cli):
    out = tmp_path / "out"
    out.mkdir()
    (out / "old.txt").write_text("old")
    (out / "sub").mkdir()
    (out / "sub" / "notes.txt").write_text("mine")
    proc = cli("run", "--contacts", demo["contacts"], "--dem", demo["dem"], "--out", out, "--overwrite")
    assert proc.returncode == 2 and proc.stderr.count("\n") == 1, proc.stderr
    assert "old.txt" in proc.stderr and "sub/notes.txt" in proc.stderr
    assert sorted(p.relative_to(out).as_posix() for p in out.rglob("*")) == ["old.txt", "sub", "sub/notes.txt"]


def test_summary_is_byte_identical_between_runs(overwritten, demo_dem_run):
    # two runs of the same command (into different folders) write the same summary but for the
    # command line each records (its --out); across separate processes (another hash seed) in
    # test_console.py
    proc, out = overwritten[0], overwritten[2]
    a, b = (out / "summary.json").read_text(), (demo_dem_run.out / "summary.json").read_text()
    sa, sb = json.loads(a), json.loads(b)
    assert sa.pop("command_line") == ["strikeline", *map(str, proc.args)]
    assert sb.pop("command_line") == ["strikeline", *map(str, demo_dem_run.proc.args)]
    assert sa == sb


def test_version(cli):
    proc = cli("--version")
    assert proc.returncode == 0 and proc.stdout.startswith("strikeline ")


# --------------------------------------------------------------------------- bad input
def _bad_inputs(tmp_path, demo):
    """Each case: (args, words the error must contain). Files are derived from the demo sheet."""
    d = demo
    cases = {}
    geo = str(tmp_path / "dem_wgs84.tif")
    gdal.Warp(geo, d["dem"], dstSRS="EPSG:4326")
    cases["geographic DEM"] = (["--contacts", d["contacts"], "--dem", geo],
                               [geo, "geographic", "EPSG:4326", "EPSG:32631"])
    # a Shapefile without its .prj has no CRS
    nocrs = tmp_path / "nocrs.shp"
    gdal.VectorTranslate(str(nocrs), d["contacts"], format="ESRI Shapefile")
    nocrs.with_suffix(".prj").unlink()
    cases["contacts without CRS"] = (["--contacts", nocrs, "--dem", d["dem"]],
                                     [str(nocrs), "no coordinate reference system", "assign"])
    far = write_lines(tmp_path / "far.gpkg", [shapely.LineString([(600000, 5000000), (601000, 5001000)])], epsg=32631)
    cases["contact outside the DEM"] = (["--contacts", far, "--dem", d["dem"]],
                                        [d["dem"], "outside", "covers the contacts"])
    cases["missing --elev-field"] = (["--contacts", d["contacts"], "--contours", d["contours"]],
                                     [d["contours"], "--elev-field"])
    txt = write_lines(tmp_path / "txt_contours.gpkg",
                      [shapely.LineString([(487000, 5216000), (489000, 5216000)])], epsg=32631,
                      fields={"elev_txt": ["five hundred"]})
    cases["non-numeric elevations"] = (["--contacts", d["contacts"], "--contours", txt, "--elev-field", "elev_txt"],
                                       [txt, "elev_txt", "not numeric"])
    empty = write_lines(tmp_path / "empty.gpkg", [], epsg=32631)
    cases["empty layer"] = (["--contacts", empty, "--dem", d["dem"]], [empty, "no feature"])
    # three horizontal contours 100 m apart; a short contact crossing two of them
    contours3 = write_lines(tmp_path / "c3.gpkg", [shapely.LineString([(487000, y), (489000, y)])
                                                   for y in (5216000, 5216100, 5216200)],
                            epsg=32631, fields={"z": [500.0, 510.0, 520.0]})
    two = write_lines(tmp_path / "two.gpkg", [shapely.LineString([(488000, 5215950), (488050, 5216150)])], epsg=32631)
    cases["fewer than three picks"] = (["--contacts", two, "--contours", contours3, "--elev-field", "z"],
                                       [two, "only 2 usable pick", "add"])
    straight = write_lines(tmp_path / "straight.gpkg",
                           [shapely.LineString([(488000, 5215950), (488100, 5216250)])], epsg=32631)
    cases["collinear picks"] = (["--contacts", straight, "--contours", contours3, "--elev-field", "z"],
                                [straight, "one straight line", "undetermined"])
    nodata = str(tmp_path / "nodata.tif")
    src = gdal.Open(d["dem"])
    nd = gdal.GetDriverByName("GTiff").CreateCopy(nodata, src)
    band = nd.GetRasterBand(1)
    band.Fill(band.GetNoDataValue())
    nd = None
    cases["all-nodata DEM"] = (["--contacts", d["contacts"], "--dem", nodata], [nodata, "no valid cell"])
    missing = str(tmp_path / "nowhere.gpkg")
    cases["missing file"] = (["--contacts", missing, "--dem", d["dem"]], [missing, "not found"])
    return cases


BAD_CASES = ["geographic DEM", "contacts without CRS", "contact outside the DEM", "missing --elev-field",
             "non-numeric elevations", "empty layer", "fewer than three picks", "collinear picks",
             "all-nodata DEM", "missing file"]


@pytest.mark.parametrize("case", BAD_CASES)
def test_bad_input_gives_one_clear_line_and_writes_nothing(tmp_path, demo, cli, case):
    args, words = _bad_inputs(tmp_path, demo)[case]
    inputs = {p: hashlib.sha256(Path(p).read_bytes()).hexdigest() for p in map(str, args) if Path(p).is_file()}
    out = tmp_path / "results"
    before = sorted(p.name for p in tmp_path.iterdir())
    proc = cli("run", *args, "--out", out)
    assert proc.returncode == 2, (proc.returncode, proc.stderr)
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: "), proc.stderr
    assert "Traceback" not in proc.stderr
    for w in words:
        assert str(w) in lines[0], (w, lines[0])
    assert not out.exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == before  # no partial or temporary output
    assert {p: hashlib.sha256(Path(p).read_bytes()).hexdigest() for p in inputs} == inputs


def test_existing_folder_is_not_touched_without_overwrite(tmp_path, demo, cli):
    out = tmp_path / "out"
    out.mkdir()
    (out / "keep.txt").write_text("mine")
    proc = cli("run", "--contacts", demo["contacts"], "--dem", demo["dem"], "--out", out)
    assert proc.returncode == 2
    # a folder of the user's is refused as such at once, without advising the --overwrite it would refuse
    assert proc.stderr.startswith("error: ") and "not written by strikeline" in proc.stderr
    assert "add --overwrite" not in proc.stderr and proc.stderr.count("\n") == 1
    assert [p.name for p in out.iterdir()] == ["keep.txt"]
    proc = cli("run", "--contacts", demo["contacts"], "--dem", demo["dem"], "--out", out, "--overwrite")
    assert proc.returncode == 2 and "not written by strikeline" in proc.stderr and "keep.txt" in proc.stderr
    assert [p.name for p in out.iterdir()] == ["keep.txt"]


def test_usage_errors_are_one_line(cli):
    proc = cli("run", "--contacts")
    assert proc.returncode == 2
    assert len(proc.stderr.strip().splitlines()) == 1 and proc.stderr.startswith("error: ")


def _ints(text: str) -> list[int]:
    import re

    return [int(v) for v in re.findall(r"-?\d+", text)]


def test_contacts_in_another_crs_off_the_dem_say_where_both_lie(tmp_path, demo, cli):
    # The demo DEM's own coordinates written as if they were Web Mercator (EPSG:3857): reprojected
    # to the DEM's CRS the contacts land far from it, a CRS mismatch the error must make visible.
    info = gdal.Info(demo["dem"], format="json")
    srs = osr.SpatialReference(wkt=info["coordinateSystem"]["wkt"])
    dem_epsg = int(srs.GetAuthorityCode(None))
    (x0, y1), (x1, y0) = info["cornerCoordinates"]["upperLeft"], info["cornerCoordinates"]["lowerRight"]
    line = shapely.LineString([(x0 + 100, y0 + 100), (x1 - 100, y1 - 100)])
    wrong = write_lines(tmp_path / "wrong.gpkg", [line], epsg=3857, layer="contacts")
    # Source: GDAL's own reprojection (ogr2ogr -t_srs) of the same layer, its extent rounded to the metre
    moved = gdal.VectorTranslate(str(tmp_path / "moved.gpkg"), str(wrong), dstSRS=f"EPSG:{dem_epsg}")
    cx0, cx1, cy0, cy1 = moved.GetLayer(0).GetExtent()
    moved = None
    out = tmp_path / "out"
    proc = cli("run", "--quiet", "--contacts", wrong, "--dem", demo["dem"], "--out", out)
    assert proc.returncode == 2, proc.stderr
    lines = proc.stderr.strip().splitlines()
    # with --quiet the error is the one line on stderr (the CLI's contract, as for every bad input)
    assert len(lines) == 1 and lines[0].startswith("error: "), proc.stderr
    msg = lines[0]
    assert "layer 'contacts' of" in msg and str(wrong) in msg and "lies entirely outside" in msg
    assert f"in EPSG:{dem_epsg} the contacts span" in msg and "check that both are in the CRS" in msg
    where = msg.split(f"in EPSG:{dem_epsg} the contacts span", 1)[1].split(";", 1)[0]
    got = _ints(where)
    # Source: gdalinfo's corner coordinates of the DEM; OGR's extent of the reprojected contacts
    expected = [round(cx0), round(cx1), round(cy0), round(cy1), round(x0), round(x1), round(y0), round(y1)]
    assert np.allclose(got, expected, atol=1), (got, expected)
    assert not out.exists()
    # without --quiet the reprojection's information line comes first on stderr, as every log line
    # of a run does (stdout holds only the command's results); the error is still the last line
    proc = cli("run", "--contacts", wrong, "--dem", demo["dem"], "--out", out)
    lines = proc.stderr.strip().splitlines()
    assert proc.returncode == 2 and lines[-1] == msg and all(not ln.startswith("error") for ln in lines[:-1])
    assert proc.stdout == ""
