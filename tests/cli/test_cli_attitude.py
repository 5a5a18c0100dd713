"""``strikeline attitude``: the plane of a points layer with its confidence and quality.

The demo sheet's picks come from the session's ``strikeline run`` (conftest); the reference is
the analytic plane the demo sheet was built from (test_data/demo/truth.json), the analytic planes
of synthetic point sets, and pyproj for the meridian convergence. The command runs in this process
(``helpers.run_cli``); the console script as a separate process is tested in test_console.py.
"""
import hashlib
import json
import re
from pathlib import Path

import numpy as np
import pyproj
import pytest
from osgeo import ogr, osr

from helpers import write_lines

# Tolerances of the end-to-end acceptance: 0.5 deg of dip, 1 deg of dip direction.
DIP_TOL_DEG = 0.5
DIP_DIRECTION_TOL_DEG = 1.0
# common practice: the hand estimate from structure contours is good to a degree or two, so a
# well-conditioned case must report a 95% half-width under 2 deg (project target).
WELL_CONDITIONED_MAX_CI_DEG = 2.0
# Two synthetic contacts (our own invented attitudes); Source: the analytic planes they are built on.
PLANE_A = {"dip_deg": 25.0, "dip_direction_deg": 120.0}
PLANE_B = {"dip_deg": 40.0, "dip_direction_deg": 300.0}
EPSG = 32631
CENTRE = (488000.0, 5215000.0, 600.0)


def _angle_diff(a, b):
    return abs((a - b + 180.0) % 360.0 - 180.0)


def write_points(path, xyz, *, fields=None, epsg=EPSG, with_z=True, layer="points"):
    """Write points to a GeoPackage with OGR (test input only)."""
    ds = ogr.GetDriverByName("GPKG").CreateDataSource(str(path))
    assert ds is not None, f"OGR could not create the test input {path}"
    srs = osr.SpatialReference()
    srs.ImportFromEPSG(epsg)
    lyr = ds.CreateLayer(layer, srs, ogr.wkbPoint25D if with_z else ogr.wkbPoint)
    fields = fields or {}
    for name, values in fields.items():
        kind = ogr.OFTReal if isinstance(values[0], float) else ogr.OFTString
        lyr.CreateField(ogr.FieldDefn(name, kind))
    for i, (x, y, z) in enumerate(np.asarray(xyz, dtype=float)):
        f = ogr.Feature(lyr.GetLayerDefn())
        g = ogr.Geometry(ogr.wkbPoint25D if with_z else ogr.wkbPoint)
        g.AddPoint(x, y, z) if with_z else g.AddPoint_2D(x, y)
        f.SetGeometry(g)
        for name, values in fields.items():
            f.SetField(name, values[i])
        lyr.CreateFeature(f)
    ds = None
    return str(path)


def plane_points(dip_deg, dip_direction_deg, *, n=150, half_m=1000.0, noise_m=1.0, seed=0,
                 centre=CENTRE):
    """Points scattered over a square on an analytic plane, with normal vertical noise."""
    rng = np.random.default_rng(seed)
    xy = rng.uniform(-half_m, half_m, (n, 2))
    t = np.tan(np.radians(dip_deg))
    dd = np.radians(dip_direction_deg)
    z = -t * (xy[:, 0] * np.sin(dd) + xy[:, 1] * np.cos(dd)) + rng.normal(0.0, noise_m, n)
    return np.column_stack([xy[:, 0] + centre[0], xy[:, 1] + centre[1], z + centre[2]])


@pytest.fixture
def run(cli):
    """``strikeline ARGS`` in this process (conftest's ``cli``)."""
    return cli


@pytest.fixture(scope="module")
def demo_picks(demo_dem_contours_run):
    """results.gpkg of the session's ``strikeline run`` on the demo sheet (DEM and contour picks)."""
    return demo_dem_contours_run.out / "results.gpkg"


def _one_error_line(proc):
    lines = proc.stderr.strip().splitlines()
    assert proc.returncode == 2, (proc.returncode, proc.stderr)
    assert len(lines) == 1 and lines[0].startswith("error: "), proc.stderr
    assert "Traceback" not in proc.stderr
    return lines[0]


# --------------------------------------------------------------------------- the demo sheet
def test_demo_picks_recover_the_demo_plane(tmp_path, cli, demo, demo_picks):
    out = tmp_path / "plane.json"
    proc = cli("attitude", "--points", demo_picks, "--points-layer", "picks", "--out", out)
    assert proc.returncode == 0, proc.stderr
    t = demo["truth"]  # Source: the analytic plane the demo sheet was generated from (truth.json)
    pl = json.loads(out.read_text())["plane"]
    assert pl["quality"] == "good"
    assert abs(pl["dip_deg"] - t["dip_deg"]) < DIP_TOL_DEG
    assert _angle_diff(pl["dip_direction_deg"], t["dip_direction_deg"]) < DIP_DIRECTION_TOL_DEG
    # strike by the right-hand rule is dip direction - 90 (common practice)
    assert _angle_diff(pl["strike_rhr_deg"], pl["dip_direction_deg"] - 90.0) < 1e-3
    for key in ("dip_ci95_deg", "dip_direction_ci95_deg", "cone95_deg"):
        assert 0.0 <= pl[key] < WELL_CONDITIONED_MAX_CI_DEG, key
    # the printout gives the same plane with its half-widths, then the caution
    m = re.search(r"dip ([\d.]+) \+/- ([\d.]+) deg toward ([\d.]+) \+/- ([\d.]+) deg from grid north", proc.stdout)
    assert m, proc.stdout
    assert float(m.group(1)) == pytest.approx(pl["dip_deg"], abs=0.006)
    assert float(m.group(3)) == pytest.approx(pl["dip_direction_deg"], abs=0.006)
    assert "from true north" in proc.stdout and "strike 131." in proc.stdout
    assert re.search(r"best-fit plane of all points \(\d+ points\): good", proc.stdout)
    assert proc.stdout.rstrip().endswith("under local codes.")
    assert "not a substitute for site investigation" in proc.stdout


def test_true_north_from_pyproj(tmp_path, run, demo_picks):
    out = tmp_path / "plane.json"
    assert run("attitude", "--points", demo_picks, "--out", out).returncode == 0
    pl = json.loads(out.read_text())["plane"]
    # Source: pyproj (PROJ) Proj.get_factors().meridian_convergence at the points' centroid, a
    # general-purpose reference library; true azimuth = grid azimuth + convergence (common practice).
    c = pyproj.CRS(f"EPSG:{EPSG}")
    lon, lat = pyproj.Transformer.from_crs(c, c.geodetic_crs, always_xy=True).transform(*pl["centroid_m"][:2])
    gamma = pyproj.Proj(c).get_factors(lon, lat).meridian_convergence
    assert pl["meridian_convergence_deg"] == pytest.approx(gamma, abs=1e-4)
    assert pl["dip_direction_true_deg"] == pytest.approx((pl["dip_direction_deg"] + gamma) % 360.0, abs=2e-4)


def test_z_field_gives_the_same_plane_and_the_json_is_deterministic(tmp_path, run, demo_picks):
    a, b, c = (tmp_path / f"{k}.json" for k in "abc")
    assert run("attitude", "--points", demo_picks, "--out", a).returncode == 0
    assert run("attitude", "--points", demo_picks, "--out", b).returncode == 0
    assert a.read_bytes() == b.read_bytes()
    assert run("attitude", "--points", demo_picks, "--z-field", "elevation_m", "--out", c).returncode == 0
    ja, jc = json.loads(a.read_text()), json.loads(c.read_text())
    assert ja["plane"] == jc["plane"]
    assert ja["points"]["elevation_from"] != jc["points"]["elevation_from"]
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.json", "b.json", "c.json"]  # no temp files


def test_where_filter_matches_the_group(tmp_path, run, demo_picks):
    a, b = tmp_path / "where.json", tmp_path / "groups.json"
    assert run("attitude", "--points", demo_picks, "--where", "source = 'dem'", "--out", a).returncode == 0
    assert run("attitude", "--points", demo_picks, "--group-by", "source", "--out", b).returncode == 0
    only_dem, groups = json.loads(a.read_text()), json.loads(b.read_text())
    assert only_dem["points"]["where"] == "source = 'dem'"
    assert only_dem["plane"] == groups["groups"]["planes"]["dem"]
    assert only_dem["n_points"] == groups["groups"]["planes"]["dem"]["n_picks"] < groups["n_points"]


def test_dem_sigma_widens_the_half_widths(tmp_path, run):
    pts = write_points(tmp_path / "p.gpkg", plane_points(**PLANE_A, noise_m=0.5))
    plain, mc = tmp_path / "plain.json", tmp_path / "mc.json"
    # --dem-sigma 0: the points' error unknown, the bootstrap alone (the default is 2 m, as in run)
    assert run("attitude", "--points", pts, "--dem-sigma", 0, "--out", plain).returncode == 0
    proc = run("attitude", "--points", pts, "--dem-sigma", 5, "--out", mc)
    assert proc.returncode == 0
    p0, p1 = (json.loads(f.read_text())["plane"] for f in (plain, mc))
    assert p0["confidence_method"] == "bootstrap" and "monte_carlo" in p1["confidence_method"]
    # independent error sources add in quadrature (JCGM 100:2008, 5.1): strictly wider
    assert p1["dip_ci95_deg"] > p0["dip_ci95_deg"] and p1["cone95_deg"] > p0["cone95_deg"]
    assert p1["dip_deg"] == p0["dip_deg"]
    assert "Monte Carlo of the 5 m vertical error" in proc.stdout


def test_group_by_recovers_two_differently_dipping_planes(tmp_path, run):
    a = plane_points(**PLANE_A, seed=1)
    b = plane_points(**PLANE_B, seed=2, centre=(CENTRE[0] + 3000.0, CENTRE[1], 400.0))
    units = ["Lower Varn"] * len(a) + ["Upper Varn"] * len(b)  # invented unit names
    pts = write_points(tmp_path / "two.gpkg", np.vstack([a, b]), fields={"unit": units})
    out = tmp_path / "groups.json"
    proc = run("attitude", "--points", pts, "--group-by", "unit", "--out", out)
    assert proc.returncode == 0, proc.stderr
    groups = json.loads(out.read_text())["groups"]["planes"]
    assert sorted(groups) == ["Lower Varn", "Upper Varn"]
    for name, truth in (("Lower Varn", PLANE_A), ("Upper Varn", PLANE_B)):
        g = groups[name]  # Source: the analytic plane the group was built on
        assert g["quality"] == "good" and g["n_picks"] == 150
        assert abs(g["dip_deg"] - truth["dip_deg"]) < DIP_TOL_DEG
        assert _angle_diff(g["dip_direction_deg"], truth["dip_direction_deg"]) < DIP_DIRECTION_TOL_DEG
    assert "group unit = Lower Varn (150 points): good" in proc.stdout
    assert "group unit = Upper Varn (150 points): good" in proc.stdout


# --------------------------------------------------------------------------- undetermined
def _line_points(jitter_m):
    # picks strung along one line in 3D (a contact traced along the slope at constant attitude):
    # the plane can turn about the line, so no dip is defined (Woodcock 1977; Fernandez 2005)
    rng = np.random.default_rng(4)
    s = np.linspace(0.0, 2000.0, 60)
    return np.column_stack([CENTRE[0] + 0.8 * s, CENTRE[1] + 0.6 * s + rng.normal(0, jitter_m, 60),
                            CENTRE[2] - 0.1 * s + rng.normal(0, jitter_m / 2, 60)])


@pytest.mark.parametrize("jitter_m", [0.0, 0.5])
def test_near_collinear_points_are_undetermined_without_a_number(tmp_path, run, jitter_m):
    pts = write_points(tmp_path / "line.gpkg", _line_points(jitter_m))
    out = tmp_path / "line.json"
    proc = run("attitude", "--points", pts, "--out", out)
    assert proc.returncode == 0, proc.stderr  # the verdict is the answer (documented)
    assert "undetermined" in proc.stdout and "one" in proc.stdout and "line" in proc.stdout
    for advice in ("more relief", "second contact", "borehole"):
        assert advice in proc.stdout
    # no confident number: no dip value, no direction, no strike, no half-width
    assert not re.search(r"dip \d", proc.stdout)
    assert "toward" not in proc.stdout and not re.search(r"strike \d", proc.stdout) and "+/-" not in proc.stdout
    pl = json.loads(out.read_text())["plane"]
    assert pl["quality"] == "undetermined" and pl["advice"] and pl["reason"]
    assert all(pl.get(k) is None for k in ("dip_deg", "dip_direction_deg", "strike_rhr_deg", "dip_ci95_deg"))
    assert "not a substitute for site investigation" in proc.stdout


def test_overall_good_with_an_undetermined_group(tmp_path, run):
    good = plane_points(**PLANE_A, seed=5)
    line = _line_points(0.5)
    pts = write_points(tmp_path / "mixed.gpkg", np.vstack([good, line]),
                       fields={"unit": ["spread"] * len(good) + ["strung"] * len(line)})
    proc = run("attitude", "--points", pts, "--group-by", "unit")
    assert proc.returncode == 0
    assert "group unit = spread (150 points): good" in proc.stdout
    assert "group unit = strung (60 points): undetermined" in proc.stdout


# --------------------------------------------------------------------------- bad input
def _bad_cases(tmp_path, demo_picks):
    xyz = plane_points(**PLANE_A, n=30)
    flat = write_points(tmp_path / "flat2d.gpkg", xyz, with_z=False, fields={"elev_txt": ["high"] * 30,
                                                                              "elev_m": list(xyz[:, 2])})
    lines = write_lines(tmp_path / "lines.gpkg", [__import__("shapely").LineString([(0, 0), (1, 1)])], epsg=EPSG)
    missing = str(tmp_path / "nowhere.gpkg")
    return {
        "missing file": (["--points", missing], [missing, "not found"]),
        "no z": (["--points", flat], [flat, "no Z", "--z-field", "elev_m"]),
        "non-numeric z field": (["--points", flat, "--z-field", "elev_txt"], ["elev_txt", "not numeric"]),
        "unknown z field": (["--points", flat, "--z-field", "height"], ["height", "elev_m"]),
        "unknown group field": (["--points", demo_picks, "--group-by", "unit"], ["unit", "--group-by", "source"]),
        "line layer": (["--points", lines], [lines, "point"]),
        "few resamples": (["--points", demo_picks, "--resamples", 5], ["--resamples", "20"]),
    }


BAD = ["missing file", "no z", "non-numeric z field", "unknown z field", "unknown group field",
       "line layer", "few resamples"]


@pytest.mark.parametrize("case", BAD)
def test_bad_input_gives_one_line_and_writes_nothing(tmp_path, run, demo_picks, case):
    args, words = _bad_cases(tmp_path, demo_picks)[case]
    inputs = {p: hashlib.sha256(Path(p).read_bytes()).hexdigest() for p in map(str, args) if Path(p).is_file()}
    before = sorted(p.name for p in tmp_path.iterdir())
    line = _one_error_line(run("attitude", *args, "--out", tmp_path / "plane.json"))
    for w in words:
        assert str(w) in line, (w, line)
    assert sorted(p.name for p in tmp_path.iterdir()) == before
    assert {p: hashlib.sha256(Path(p).read_bytes()).hexdigest() for p in inputs} == inputs


def test_bad_input_through_the_entry_point(tmp_path, cli):
    missing = tmp_path / "nowhere.gpkg"
    line = _one_error_line(cli("attitude", "--points", missing, "--out", tmp_path / "p.json"))
    assert str(missing) in line and "not found" in line
    assert list(tmp_path.iterdir()) == []


def test_existing_json_needs_overwrite(tmp_path, run, demo_picks):
    out = tmp_path / "plane.json"
    out.write_text("mine")
    line = _one_error_line(run("attitude", "--points", demo_picks, "--out", out))
    assert "already exists" in line and "--overwrite" in line
    assert out.read_text() == "mine"
    # --overwrite replaces only a report the command wrote, not a file of the user's
    line = _one_error_line(run("attitude", "--points", demo_picks, "--out", out, "--overwrite"))
    assert "not a report of strikeline attitude" in line and out.read_text() == "mine"
    out.unlink()
    assert run("attitude", "--points", demo_picks, "--out", out, "--seed", "2").returncode == 0
    assert run("attitude", "--points", demo_picks, "--out", out, "--overwrite").returncode == 0
    assert json.loads(out.read_text())["plane"]["quality"] == "good"
    assert [p.name for p in tmp_path.iterdir()] == ["plane.json"]


def test_three_points_give_a_plane_without_half_widths(tmp_path, run):
    # Source: the three-point problem (common practice): three points not in a line fix a plane
    # exactly, so there is no scatter from which to estimate a confidence.
    xyz = plane_points(**PLANE_B, n=3, noise_m=0.0, seed=7)
    out = tmp_path / "three.json"
    proc = run("attitude", "--points", write_points(tmp_path / "three.gpkg", xyz), "--out", out)
    assert proc.returncode == 0, proc.stderr
    pl = json.loads(out.read_text())["plane"]
    assert pl["dip_deg"] == pytest.approx(PLANE_B["dip_deg"], abs=1e-3)
    assert _angle_diff(pl["dip_direction_deg"], PLANE_B["dip_direction_deg"]) < 1e-3
    assert pl["dip_ci95_deg"] is None and pl["dip_direction_ci95_deg"] is None
    assert "no 95% half-widths" in proc.stdout and "+/-" not in proc.stdout


@pytest.mark.parametrize("args", [["--help"], ["attitude", "--help"]])
def test_help_is_printed(run, args):
    proc = run(*args)
    assert proc.returncode == 0 and "attitude" in proc.stdout and "95%" in proc.stdout
