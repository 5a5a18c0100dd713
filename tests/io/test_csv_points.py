"""Points from delimited text (CSV) through OGR's own CSV driver and its open options
(X/Y/Z_POSSIBLE_NAMES, AUTODETECT_TYPE=YES, KEEP_GEOM_COLUMNS=NO), with the CRS given by --crs.

References: ogr2ogr (GDAL's own command) converting the same CSV with the same open options; pyproj
for the CRS; the plane z = a x + b y + c, whose dip is atan(hypot(a, b)) and dip direction the
azimuth of the downhill gradient (common practice).
"""
from __future__ import annotations

import json
import math
import shutil
import subprocess

import numpy as np
import pytest
import shapely
from helpers import DEMO, run_cli
from strikeline.errors import InputError
from strikeline.io.crs import same_crs
from strikeline.io.vector import DelimitedPoints, read_layer
from strikeline.pipeline import RunOptions, load_inputs

OGR2OGR = shutil.which("ogr2ogr")
#: A plane z = A x + B y + C over invented UTM 33N coordinates (an invented place).
A, B, C = 0.05, -0.02, 400.0
X0, Y0 = 500000.0, 4650000.0


def _plane_csv(path, *, n=30, sep=","):
    rng = np.random.default_rng(7)
    x = X0 + rng.uniform(0, 2000, n)
    y = Y0 + rng.uniform(0, 2000, n)
    z = A * (x - X0) + B * (y - Y0) + C
    lines = [sep.join(["site", "Easting", "Northing", "elev_m", "dip", "dip_dir"])]
    lines += [sep.join([f"s{i}", f"{x[i]:.3f}", f"{y[i]:.3f}", f"{z[i]:.4f}", "20", "135"]) for i in range(n)]
    path.write_text("\n".join(lines) + "\n")
    return path, np.column_stack([np.round(x, 3), np.round(y, 3), np.round(z, 4)])


SPEC = DelimitedPoints(x_field="Easting", y_field="Northing", crs="EPSG:32633")


@pytest.mark.skipif(OGR2OGR is None, reason="GDAL's ogr2ogr command is not installed")
def test_points_are_read_as_ogr2ogr_reads_them(tmp_path):
    csv, _ = _plane_csv(tmp_path / "pts.csv")
    lyr = read_layer(csv, label="points", geometry="point", layer_option="--points-layer",
                     delimited=DelimitedPoints(x_field="easting", y_field="NORTHING", z_field="elev_m",
                                               crs="EPSG:32633"))
    # Source: ogr2ogr with the CSV driver's open options, written as GeoJSON
    out = tmp_path / "ref.geojson"
    subprocess.run([OGR2OGR, "-f", "GeoJSON", str(out), str(csv), "-oo", "X_POSSIBLE_NAMES=Easting",
                    "-oo", "Y_POSSIBLE_NAMES=Northing", "-oo", "Z_POSSIBLE_NAMES=elev_m", "-oo",
                    "AUTODETECT_TYPE=YES", "-oo", "KEEP_GEOM_COLUMNS=NO", "-a_srs", "EPSG:32633"],
                   check=True, capture_output=True)
    ref = json.loads(out.read_text())["features"]
    xyz = np.array([f["geometry"]["coordinates"] for f in ref])
    np.testing.assert_array_equal(shapely.get_coordinates(lyr.geoms), xyz[:, :2])
    np.testing.assert_array_equal(lyr.z, xyz[:, 2])
    assert list(lyr.fields) == list(ref[0]["properties"]) == ["site", "dip", "dip_dir"]
    assert lyr.field_types["dip"] == "Integer" and lyr.field_types["site"] == "String"
    # Source: pyproj - the layer's CRS is the one --crs names
    pyproj = pytest.importorskip("pyproj")
    assert pyproj.CRS.from_wkt(lyr.crs_wkt).to_epsg() == 32633
    assert same_crs(lyr.crs_wkt, pyproj.CRS.from_epsg(32633).to_wkt())


def test_a_proj_string_is_a_crs_too(tmp_path):
    csv, pts = _plane_csv(tmp_path / "pts.csv")
    lyr = read_layer(csv, label="points", geometry="point", layer_option="--points-layer",
                     delimited=DelimitedPoints(x_field="Easting", y_field="Northing",
                                               crs="+proj=utm +zone=33 +datum=WGS84 +units=m +no_defs"))
    pyproj = pytest.importorskip("pyproj")
    # Source: pyproj - the PROJ string and EPSG:32633 are the same CRS
    assert pyproj.CRS.from_wkt(lyr.crs_wkt).equals(pyproj.CRS.from_epsg(32633), ignore_axis_order=True)
    np.testing.assert_array_equal(shapely.get_coordinates(lyr.geoms), pts[:, :2])


NO_CRS = r"declares no CRS; give the CRS of its coordinates with --crs"
NO_X = r"has no column 'East' \(columns: site, Easting, Northing, elev_m, dip, dip_dir\); name one of them with --x-field"
NO_XY = r"name the columns of the points' coordinates with --x-field and --y-field \(columns: site, Easting"


@pytest.mark.parametrize("spec,expect", [
    (DelimitedPoints(x_field="Easting", y_field="Northing"), NO_CRS),
    (DelimitedPoints(x_field="East", y_field="Northing", crs="EPSG:32633"), NO_X),
    (DelimitedPoints(x_field="Easting", y_field="Northing", z_field="z", crs="EPSG:32633"),
     r"has no column 'z' \(columns: site, Easting.*--z-field"),
    (DelimitedPoints(crs="EPSG:32633"), NO_XY),
    (DelimitedPoints(x_field="Easting", y_field="Northing", crs="EPSG:0"), r"--crs 'EPSG:0' is not a CRS OSR understands"),
    (DelimitedPoints(x_field="Easting", y_field="Northing", crs="EPSG:4326"), r"geographic"),
])
def test_unusable_csv_options_are_one_line_errors(tmp_path, spec, expect):
    csv, _ = _plane_csv(tmp_path / "pts.csv")
    with pytest.raises(InputError, match=expect) as err:
        read_layer(csv, label="points", geometry="point", layer_option="--points-layer", delimited=spec)
    assert "\n" not in str(err.value)


def test_the_attitude_of_csv_points_is_the_planes(tmp_path):
    csv, _ = _plane_csv(tmp_path / "pts.csv", sep=";")
    out = tmp_path / "plane.json"
    done = run_cli("attitude", "--points", csv, "--x-field", "Easting", "--y-field", "Northing", "--z-field",
                   "elev_m", "--crs", "EPSG:32633", "--resamples", 50, "--out", out)
    assert done.returncode == 0, done.stderr
    plane = json.loads(out.read_text())["plane"]
    # Source: z = A x + B y + C dips atan(hypot(A, B)) toward the azimuth of -(A, B) (common practice)
    dip = math.degrees(math.atan(math.hypot(A, B)))
    dd = math.degrees(math.atan2(-A, -B)) % 360.0
    assert plane["dip_deg"] == pytest.approx(dip, abs=1e-3)
    assert plane["dip_direction_deg"] == pytest.approx(dd, abs=1e-3)
    done = run_cli("attitude", "--points", csv, "--x-field", "Easting", "--y-field", "Northing",
                   "--z-field", "elev_m", "--resamples", 50)
    assert done.returncode == 2 and done.stderr.count("\n") == 1 and "--crs" in done.stderr


def test_run_reads_boreholes_and_dip_readings_from_csv(tmp_path):
    """The demo's boreholes and dip readings, converted to CSV by ogr2ogr, give the run the same
    points as the GeoPackages (Source: ogr2ogr's CSV writer and OGR's reading of the originals)."""
    if OGR2OGR is None:
        pytest.skip("GDAL's ogr2ogr command is not installed")
    for name in ("boreholes", "orientations"):
        subprocess.run([OGR2OGR, "-f", "CSV", str(tmp_path / f"{name}.csv"), str(DEMO / f"{name}.gpkg"),
                        "-lco", "GEOMETRY=AS_XY"], check=True, capture_output=True)
    common = {"contacts": str(DEMO / "contacts.gpkg"), "dem": str(DEMO / "dem.tif"), "out": str(tmp_path / "o"),
              "borehole_collar_field": "collar_m", "borehole_depth_field": "depth_m"}
    ref = load_inputs(RunOptions(boreholes=str(DEMO / "boreholes.gpkg"),
                                 orientations=str(DEMO / "orientations.gpkg"), **common))
    got = load_inputs(RunOptions(boreholes=str(tmp_path / "boreholes.csv"),
                                 orientations=str(tmp_path / "orientations.csv"), x_field="X", y_field="Y",
                                 crs="EPSG:32631", **common))
    np.testing.assert_allclose(got.boreholes_xyz, ref.boreholes_xyz, rtol=0, atol=1e-6)
    np.testing.assert_allclose(got.orientations, ref.orientations, rtol=0, atol=1e-9)
    assert got.records["boreholes"]["fields"]["x_field"] == "X"
    with pytest.raises(InputError, match=r"describe points from delimited text"):
        load_inputs(RunOptions(boreholes=str(DEMO / "boreholes.gpkg"), x_field="X", y_field="Y",
                               crs="EPSG:32631", **common))
