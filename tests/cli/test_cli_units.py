"""``strikeline run --map-units``: the map's unit polygons as constraints, end to end, and the
one-line errors of its options.

The unit polygons are made here from the fold sheet's analytic truth (test_data/fold/truth.json):
where the ground is above the true surface the upper unit crops out, elsewhere the lower one;
GDAL's polygoniser (gdal.Polygonize, GDAL 3.x) turns the cells into polygons. A block of
"superficial cover" is laid over the south-west corner and must be ignored.
"""
import json

import numpy as np
import pytest
from osgeo import gdal, ogr

from conftest import REPO, run_cli
from unit_polygons import fold_dem as _dem
from unit_polygons import fold_z as _fold_z
from unit_polygons import write_fold_units as _write_units

FOLD = REPO / "test_data" / "fold"
UNIT_OPTS = ("--unit-field", "unit", "--units-above", "Cawl", "--units-below", "Brenlow")


@pytest.fixture(scope="module")
def units_gpkg(tmp_path_factory):
    return _write_units(tmp_path_factory.mktemp("units") / "units.gpkg")


def _run(out, *extra):
    return run_cli("run", "--contacts", FOLD / "contacts.gpkg", "--dem", FOLD / "dem.tif", "--out", out,
                   "--model", "spline", *extra)


@pytest.fixture(scope="module")
def runs(tmp_path_factory, units_gpkg):
    base = tmp_path_factory.mktemp("runs")
    free = _run(base / "free")
    bound = _run(base / "units", "--map-units", units_gpkg, *UNIT_OPTS)
    assert free.returncode == 0, free.stderr
    assert bound.returncode == 0, bound.stderr
    return base / "free", base / "units", bound


def test_summary_reports_the_constraints_and_what_still_breaks_them(runs):
    _, out, proc = runs
    s = json.loads((out / "summary.json").read_text())["map_units"]
    # Source: the unit polygons written by tests/unit_polygons.py from the fold sheet's analytic
    # truth (test_data/fold/truth.json) -- the upper unit Cawl, the lower Brenlow, cover Alluvium
    assert s["units_above"] == ["Cawl"] and s["units_below"] == ["Brenlow"]
    assert s["units_ignored"] == ["Alluvium"]
    assert s["n_points"] == s["n_above"] + s["n_below"] and s["n_above"] > 100 and s["n_below"] > 100
    assert s["n_points"] <= 2000  # Source: the documented cap of strikeline.surfaces.units.unit_bounds
    c = s["check"]
    assert c["n_points"] > 2 * s["n_points"]  # checked on a denser lattice than it was fitted on
    # the spline honours the units: at most a few check points between constraint points broken
    # (1 %: common practice for a tolerance on a lattice check; the fitted points are exact to
    # scipy's trust-constr in tests/test_units.py)
    assert c["share_violated"] <= 0.01
    ds = ogr.Open(str(out / "results.gpkg"))  # kept: a layer must not outlive its data set
    lyr = ds.GetLayerByName("unit_conflicts")
    assert lyr is not None and lyr.GetFeatureCount() == c["n_violated"]
    names = [lyr.GetLayerDefn().GetFieldDefn(i).GetName() for i in range(lyr.GetLayerDefn().GetFieldCount())]
    lyr = ds = None
    assert names == ["unit", "side", "violation_m"]
    assert "map units:" in proc.stdout and "constraint points" in proc.stdout


def test_the_surface_honours_the_units_on_the_grid(runs):
    free, out, _ = runs
    dem, gt, _ = _dem()
    r, c = np.mgrid[0:dem.shape[0], 0:dem.shape[1]]
    X, Y = gt[0] + (c + 0.5) * gt[1], gt[3] + (r + 0.5) * gt[5]
    truth = _fold_z(X, Y)  # Source: the fold sheet's analytic surface (test_data/fold/truth.json)
    errs = {}
    for name, folder in (("free", free), ("units", out)):
        ds = gdal.Open(str(folder / "surface.tif"))  # kept while its band is read
        z = ds.GetRasterBand(1).ReadAsArray().astype(float)
        ds = None
        errs[name] = np.sqrt(np.nanmean((z - truth) ** 2))
    # The fold sheet is traced densely (the spline is within 2 m RMS of the truth without the
    # units, tests/test_run_fold.py); the units must not make it worse by more than 10 %.
    assert errs["units"] <= 1.1 * errs["free"] + 0.05


def test_reprojected_units_are_used(tmp_path):
    # Source: EPSG registry -- 25830 is ETRS89 / UTM zone 30N; the reprojection is GDAL/PROJ's
    units = _write_units(tmp_path / "units_etrs.gpkg", epsg=25830)
    proc = _run(tmp_path / "out", "--map-units", units, *UNIT_OPTS)
    assert proc.returncode == 0, proc.stderr
    assert "reprojecting map units" in proc.stderr
    s = json.loads((tmp_path / "out" / "summary.json").read_text())["map_units"]
    assert s["n_points"] > 200


@pytest.mark.parametrize("args, needle", [
    (("--unit-field", "formation", "--units-above", "Cawl"),
     "--unit-field: map units layer 'units' of '{u}' has no field 'formation' (fields: code, unit)"),
    (("--unit-field", "unit", "--units-above", "Cawl,Chalk"),
     "unit(s) Chalk not found in field 'unit' of map units layer 'units' of '{u}' "
     "(units found: Alluvium, Brenlow, Cawl)"),
    (("--unit-field", "unit", "--units-above", "Cawl", "--units-below", "Brenlow,Cawl"),
     "--units-above and --units-below both name Cawl"),
    (("--units-above", "Cawl"), "name the field that holds each polygon's unit with --unit-field"),
    (("--unit-field", "unit"), "say which units lie above the surface (--units-above)"),
])
def test_bad_unit_options_fail_in_one_line(tmp_path, units_gpkg, args, needle):
    proc = _run(tmp_path / "out", "--map-units", units_gpkg, *args)
    assert proc.returncode == 2
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: ")
    assert needle.format(u=units_gpkg) in lines[0]
    assert not (tmp_path / "out").exists()


def test_units_need_a_polygon_layer_and_a_dem(tmp_path, units_gpkg):
    proc = _run(tmp_path / "out", "--map-units", FOLD / "contacts.gpkg", *UNIT_OPTS)
    assert proc.returncode == 2 and "it must hold polygons - give a polygon layer" in proc.stderr
    assert len(proc.stderr.strip().splitlines()) == 1
    proc = run_cli("run", "--contacts", FOLD / "contacts.gpkg", "--contours", FOLD / "contours.gpkg",
                   "--elev-field", "elev_m", "--out", tmp_path / "o2", "--map-units", units_gpkg, *UNIT_OPTS)
    assert proc.returncode == 2 and "--map-units needs a DEM (--dem)" in proc.stderr
    proc = _run(tmp_path / "o3", "--units-below", "Brenlow")
    assert proc.returncode == 2 and "--units-below needs --map-units" in proc.stderr
    proc = _run(tmp_path / "o4", "--map-units", units_gpkg, "--map-units-layer", "geology", *UNIT_OPTS)
    assert proc.returncode == 2 and "has no layer 'geology' (layers: units); name one with --map-units-layer" \
        in proc.stderr
