"""``strikeline run --map-units``: the map's unit polygons as constraints, end to end, and the
one-line errors of its options.

The unit polygons are made from the fold sheet's analytic truth (test_data/fold/truth.json) by
``helpers.write_fold_units``: where the ground is above the true surface the upper unit crops out,
elsewhere the lower one; GDAL's polygoniser (gdal.Polygonize, GDAL 3.x) turns the cells into
polygons. A block of "superficial cover" is laid over the south-west corner and must be ignored.
The runs with and without the units are the session's (conftest ``fold_run``, where auto chooses
the spline, and ``fold_units_run``, the spline bounded by the units).
"""
import json

import numpy as np
import pytest
from osgeo import gdal, ogr

from helpers import FOLD, UNIT_OPTS, fold_dem, fold_z, run_cli, write_fold_units


def _run(out, *extra):
    return run_cli("run", "--contacts", FOLD / "contacts.gpkg", "--dem", FOLD / "dem.tif", "--out", out,
                   "--model", "spline", *extra)


@pytest.fixture(scope="module")
def runs(fold_run, fold_units_run):
    # the free model is the session's default run on the fold sheet: auto chooses the spline there
    # (tests/pipeline/test_run_fold.py), the same spline as --model spline writes
    assert json.loads((fold_run.out / "summary.json").read_text())["model"]["chosen"] == "spline"
    return fold_run.out, fold_units_run.out, fold_units_run.proc


def test_summary_reports_the_constraints_and_what_still_breaks_them(runs):
    _, out, proc = runs
    s = json.loads((out / "summary.json").read_text())["map_units"]
    # Source: the unit polygons written by helpers.write_fold_units from the fold sheet's analytic
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
    line = next(x for x in proc.stdout.splitlines() if x.startswith("Against the map's units"))
    assert f"({s['n_points']} constraint points: {s['n_above']} under units above" in line
    assert f"breaks {c['n_violated']} of {c['n_points']} check points" in line


def test_the_surface_honours_the_units_on_the_grid(runs):
    free, out, _ = runs
    dem, gt, _ = fold_dem()
    r, c = np.mgrid[0:dem.shape[0], 0:dem.shape[1]]
    X, Y = gt[0] + (c + 0.5) * gt[1], gt[3] + (r + 0.5) * gt[5]
    truth = fold_z(X, Y)  # Source: the fold sheet's analytic surface (test_data/fold/truth.json)
    errs = {}
    for name, folder in (("free", free), ("units", out)):
        ds = gdal.Open(str(folder / "surface.tif"))  # kept while its band is read
        z = ds.GetRasterBand(1).ReadAsArray().astype(float)
        ds = None
        errs[name] = np.sqrt(np.nanmean((z - truth) ** 2))
    # The fold sheet is traced densely (the spline is within 2 m RMS of the truth without the
    # units, tests/test_run_fold.py); the units must not make it worse by more than 10 %.
    assert errs["units"] <= 1.1 * errs["free"] + 0.05


def test_reprojected_units_are_used(tmp_path, runs):
    # The pipeline's steps, not the whole command: reading, reprojecting and turning the units into
    # constraint points is what depends on their CRS; fitting the bounded spline (tested above)
    # does not. Source: EPSG registry -- 25830 is ETRS89 / UTM zone 30N; the reprojection is
    # GDAL/PROJ's.
    from strikeline.pipeline import RunOptions, load_inputs, map_unit_bounds

    units = write_fold_units(tmp_path / "units_etrs.gpkg", epsg=25830)
    opts = RunOptions(contacts=str(FOLD / "contacts.gpkg"), dem=str(FOLD / "dem.tif"), out=str(tmp_path / "out"),
                      model="spline", map_units=str(units), unit_field="unit", units_above="Cawl",
                      units_below="Brenlow")
    said = []
    inputs = load_inputs(opts, log=said.append)
    assert any("reprojecting map units" in m for m in said), said
    ub = map_unit_bounds(inputs.unit_polygons, inputs.unit_names, inputs.dem, inputs.dem_grid, opts)
    # the same polygons in the sheet's own CRS gave the session run's constraint points; the round
    # trip through another UTM zone moves their outlines by millimetres, so the count barely moves
    # (1 %: common practice for a tolerance on a lattice count)
    native = json.loads((runs[1] / "summary.json").read_text())["map_units"]
    assert len(ub) > 200
    assert abs(len(ub) - native["n_points"]) <= 0.01 * native["n_points"]


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
def test_bad_unit_options_fail_in_one_line(tmp_path, fold_units_gpkg, args, needle):
    proc = _run(tmp_path / "out", "--map-units", fold_units_gpkg, *args)
    assert proc.returncode == 2
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: ")
    assert needle.format(u=fold_units_gpkg) in lines[0]
    assert not (tmp_path / "out").exists()


def test_units_need_a_polygon_layer_and_a_dem(tmp_path, fold_units_gpkg):
    proc = _run(tmp_path / "out", "--map-units", FOLD / "contacts.gpkg", *UNIT_OPTS)
    assert proc.returncode == 2 and "it must hold polygons - give a polygon layer" in proc.stderr
    assert len(proc.stderr.strip().splitlines()) == 1
    proc = run_cli("run", "--contacts", FOLD / "contacts.gpkg", "--contours", FOLD / "contours.gpkg",
                   "--elev-field", "elev_m", "--out", tmp_path / "o2", "--map-units", fold_units_gpkg, *UNIT_OPTS)
    assert proc.returncode == 2 and "--map-units needs a DEM (--dem)" in proc.stderr
    proc = _run(tmp_path / "o3", "--units-below", "Brenlow")
    assert proc.returncode == 2 and "--units-below needs --map-units" in proc.stderr
    proc = _run(tmp_path / "o4", "--map-units", fold_units_gpkg, "--map-units-layer", "geology", *UNIT_OPTS)
    assert proc.returncode == 2 and "has no layer 'geology' (layers: units); name one with --map-units-layer" \
        in proc.stderr
