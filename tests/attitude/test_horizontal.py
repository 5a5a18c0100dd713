"""Horizontal and near-horizontal beds through ``strikeline run`` and ``strikeline attitude``.

A contact that follows one height around hills is the textbook signature of a horizontal bed
(common practice: a horizontal contact runs parallel to the topographic contours). The contacts
here are drawn by GDAL's own contour generator (``gdal.ContourGenerateEx``), which is the
reference for their level; the DEM is the demo sheet's.
"""
from __future__ import annotations

import json
import re

import numpy as np
import pytest
import shapely
from osgeo import gdal, ogr, osr

from helpers import run_cli, write_lines
from strikeline.geometry import azimuth_difference, normal_from_dip

#: The level of the horizontal bed (metres): a contour of the demo DEM (300-865 m).
LEVEL_M = 500.0
#: GDAL interpolates contours linearly between cell centres and strikeline samples the DEM
#: bilinearly; on the demo DEM (10 m cells) the two differ by centimetres (measured 0.09 m at most).
LEVEL_TOL_M = 0.25
#: A gently dipping bed (our own synthetic truth): 1.5 degrees toward 130.
GENTLE_DIP_DEG, GENTLE_DD_DEG = 1.5, 130.0


def gdal_contours(array, transform, epsg, level):
    """Lines of ``array == level`` drawn by GDAL's contour generator (the reference)."""
    drv = gdal.GetDriverByName("MEM")
    ds = drv.Create("", array.shape[1], array.shape[0], 1, gdal.GDT_Float64)
    ds.SetGeoTransform(transform)
    band = ds.GetRasterBand(1)
    band.WriteArray(np.where(np.isfinite(array), array, -9999.0))
    band.SetNoDataValue(-9999.0)
    srs = osr.SpatialReference()
    srs.ImportFromEPSG(epsg)
    vds = ogr.GetDriverByName("Memory").CreateDataSource("c")
    lyr = vds.CreateLayer("c", srs, ogr.wkbLineString)
    lyr.CreateField(ogr.FieldDefn("elev", ogr.OFTReal))
    gdal.ContourGenerateEx(band, lyr, options=[f"FIXED_LEVELS={level}", "ELEV_FIELD=elev"])
    lines = [shapely.from_wkb(bytes(f.GetGeometryRef().ExportToWkb())) for f in lyr]
    return [g for g in lines if g.length > 200.0]


def read_dem(path):
    ds = gdal.Open(path)
    band = ds.GetRasterBand(1)
    a = band.ReadAsArray().astype(float)
    a[a == band.GetNoDataValue()] = np.nan
    return a, ds.GetGeoTransform()


@pytest.fixture(scope="module")
def horizontal_run(tmp_path_factory, demo):
    tmp = tmp_path_factory.mktemp("horizontal")
    dem, gt = read_dem(demo["dem"])
    lines = gdal_contours(dem, gt, 32631, LEVEL_M)
    contacts = write_lines(tmp / "level_contact.gpkg", lines, epsg=32631)
    out = tmp / "out"
    proc = run_cli("run", "--contacts", contacts, "--dem", demo["dem"], "--out", out)
    return proc, out, lines


def test_horizontal_bed_runs_through_and_reports_no_direction(horizontal_run):
    proc, out, lines = horizontal_run
    assert proc.returncode == 0, proc.stderr
    s = json.loads((out / "summary.json").read_text())
    pl = s["plane"]
    assert pl["quality"] != "undetermined"
    assert pl["dip_significant"] is False
    assert pl["dip_direction_deg"] is None and pl["strike_rhr_deg"] is None
    assert pl["dip_direction_true_deg"] is None and pl["dip_direction_ci95_deg"] is None
    # the 95% interval of the dip reaches 0
    assert pl["dip_deg"] - pl["dip_ci95_deg"] <= 0.0 or pl["cone95_deg"] >= pl["dip_deg"]
    assert "horizontal within its 95% confidence" in pl["horizontal"]
    # Source: GDAL's contour generator drew the contact at LEVEL_M
    assert pl["centroid_m"][2] == pytest.approx(LEVEL_M, abs=LEVEL_TOL_M)
    line = next(x for x in proc.stdout.splitlines() if x.startswith("The contact"))  # sentences.plane_words
    assert "horizontal within its 95% confidence" in line
    assert not re.search(r"strike \d", line) and "toward" not in line


def test_horizontal_bed_writes_a_level_surface(horizontal_run):
    proc, out, _ = horizontal_run
    assert proc.returncode == 0, proc.stderr
    for name in ("surface.tif", "depth.tif", "uncertainty.tif", "results.gpkg"):
        assert (out / name).exists(), name
    surface, _ = read_dem(str(out / "surface.tif"))
    # Source: GDAL's contour generator drew the contact at LEVEL_M
    assert np.nanmax(np.abs(surface - LEVEL_M)) < 1.0
    s = json.loads((out / "summary.json").read_text())
    # local windows along a level contact are level too: none of them gets a direction
    ds = ogr.Open(str(out / "results.gpkg"))
    att = ds.GetLayerByName("attitudes")
    rows = [(f.GetField("quality"), f.GetField("dip_direction_deg"), f.GetField("strike_rhr_deg")) for f in att]
    assert rows and s["attitudes"]["n_windows"] == len(rows)
    determined = [r for r in rows if r[0] != "undetermined"]
    assert determined, "some windows along a winding level contact must be determined"
    assert all(r[1] is None and r[2] is None for r in determined)


def test_attitude_of_the_level_picks(horizontal_run, tmp_path):
    _, out, _ = horizontal_run
    proc = run_cli("attitude", "--points", out / "results.gpkg", "--points-layer", "picks",
                   "--dem-sigma", "2", "--out", tmp_path / "a.json")
    assert proc.returncode == 0, proc.stderr
    r = json.loads((tmp_path / "a.json").read_text())["plane"]
    assert r["dip_significant"] is False and r["dip_direction_deg"] is None and r["strike_rhr_deg"] is None
    assert r["quality"] == "good"
    text = proc.stdout
    assert "horizontal within its 95% confidence" in text
    assert not re.search(r"strike \d", text) and "dip direction from true north" not in text


def test_gently_dipping_bed_keeps_its_direction(tmp_path, demo):
    dem, gt = read_dem(demo["dem"])
    rows, cols = np.indices(dem.shape)
    x = gt[0] + (cols + 0.5) * gt[1]
    y = gt[3] + (rows + 0.5) * gt[5]
    n = normal_from_dip(GENTLE_DD_DEG, GENTLE_DIP_DEG)
    cx, cy = x.mean(), y.mean()
    plane = 520.0 - (n[0] * (x - cx) + n[1] * (y - cy)) / n[2]
    # Source: GDAL's contour generator: the outcrop trace is the zero line of ground - plane
    lines = gdal_contours(dem - plane, gt, 32631, 0.0)
    assert lines
    contacts = write_lines(tmp_path / "gentle.gpkg", lines, epsg=32631)
    proc = run_cli("run", "--contacts", contacts, "--dem", demo["dem"], "--out", tmp_path / "out")
    assert proc.returncode == 0, proc.stderr
    pl = json.loads((tmp_path / "out" / "summary.json").read_text())["plane"]
    assert pl["dip_significant"] is True
    assert pl["dip_deg"] == pytest.approx(GENTLE_DIP_DEG, abs=max(0.1, pl["dip_ci95_deg"]))
    assert abs(azimuth_difference(pl["dip_direction_deg"], GENTLE_DD_DEG)) <= max(2.0, pl["dip_direction_ci95_deg"])
    # common practice: strike by the right-hand rule is the dip direction minus 90
    assert pl["strike_rhr_deg"] == pytest.approx((pl["dip_direction_deg"] - 90.0) % 360.0, abs=1e-3)
    line = next(x for x in proc.stdout.splitlines() if x.startswith("The contact"))  # sentences.plane_words
    assert "toward" in line and "strike" in line and "horizontal" not in line


def flat_dem(path, *, level=120.0, size=200, cell=10.0):
    drv = gdal.GetDriverByName("GTiff")
    ds = drv.Create(str(path), size, size, 1, gdal.GDT_Float32)
    ds.SetGeoTransform((400000.0, cell, 0.0, 5000000.0 + size * cell, 0.0, -cell))
    srs = osr.SpatialReference()
    srs.ImportFromEPSG(32631)
    ds.SetProjection(srs.ExportToWkt())
    ds.GetRasterBand(1).WriteArray(np.full((size, size), level, dtype=np.float32))
    ds = None
    return str(path)


def test_straight_contact_on_flat_ground_is_undetermined(tmp_path):
    dem = flat_dem(tmp_path / "flat.tif")
    line = shapely.LineString([(400150.0, 5000150.0), (401700.0, 5001500.0)])
    contacts = write_lines(tmp_path / "straight.gpkg", [line], epsg=32631)
    proc = run_cli("run", "--contacts", contacts, "--dem", dem, "--out", tmp_path / "out")
    assert proc.returncode == 2
    assert proc.stderr.startswith("error: ") and len(proc.stderr.strip().splitlines()) == 1
    assert "undetermined" in proc.stderr and "straight" in proc.stderr
    assert not (tmp_path / "out").exists()


def test_straight_level_points_are_undetermined_in_attitude(tmp_path):
    # `strikeline attitude` reports an undetermined verdict with exit 0 (its documented contract)
    from osgeo import ogr as _ogr

    path = str(tmp_path / "pts.gpkg")
    ds = _ogr.GetDriverByName("GPKG").CreateDataSource(path)
    srs = osr.SpatialReference()
    srs.ImportFromEPSG(32631)
    lyr = ds.CreateLayer("pts", srs, _ogr.wkbPoint25D)
    for t in np.linspace(0.0, 1500.0, 150):
        f = _ogr.Feature(lyr.GetLayerDefn())
        f.SetGeometry(_ogr.CreateGeometryFromWkt(f"POINT Z ({400000 + t} {5000000 + 0.4 * t} 120.0)"))
        lyr.CreateFeature(f)
    ds = None
    proc = run_cli("attitude", "--points", path, "--out", tmp_path / "a.json")
    assert proc.returncode == 0, proc.stderr
    r = json.loads((tmp_path / "a.json").read_text())["plane"]
    assert r["quality"] == "undetermined" and "dip_deg" not in r
    assert "undetermined - no attitude can be given" in proc.stdout
