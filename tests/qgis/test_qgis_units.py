"""The map's unit polygons through QGIS: the whole chain and the surface-model tool give the
library's numbers, and bad unit parameters fail with the library's one-line message.

# Source: strikeline library result as the reference (strikeline.pipeline.compute and
# strikeline.pipeline.model_surface on the same files); the numerical truth of the constraints
# is tested in tests/test_units.py against scipy's trust-constr optimum.
"""
from __future__ import annotations

import json
import sys

import numpy as np
import pytest
from qgis.core import QgsProcessingException
from qgis_helpers import model_index, raster, table

from conftest import REPO

sys.path.insert(0, str(REPO / "tests"))
from helpers import FOLD, write_fold_units  # noqa: E402

pytestmark = pytest.mark.qgis

TMP = "TEMPORARY_OUTPUT"
UNITS = {"UNIT_FIELD": "unit", "UNITS_ABOVE": "Cawl", "UNITS_BELOW": "Brenlow"}
#: The tools' grids pass through float32 GeoTIFFs; the library's stay float64 (common practice:
#: float32 keeps about 7 significant digits of elevations of a few hundred metres).
FLOAT32_TOL_M = 1e-3
#: DEM picks every 50 m instead of every 10 m cell: about 650 picks, so the spline stays quick
#: under QGIS's own numpy.
PICK_SPACING_M = 50.0


@pytest.fixture(scope="module")
def units(tmp_path_factory):
    path = write_fold_units(tmp_path_factory.mktemp("units") / "units.gpkg")
    return f"{path}|layername=units"


@pytest.fixture(scope="module")
def library_run(units):
    from strikeline.pipeline import RunOptions, compute, load_inputs

    opts = RunOptions(contacts=str(FOLD / "contacts.gpkg"), dem=str(FOLD / "dem.tif"), out="/nonexistent-out",
                      model="spline", resamples=100, pick_spacing_m=PICK_SPACING_M,
                      map_units=units.split("|")[0], unit_field="unit",
                      units_above="Cawl", units_below="Brenlow")
    return compute(load_inputs(opts), opts)


def test_whole_chain_gives_the_librarys_constraints_and_surface(run, units, library_run, tmp_path):
    summary = tmp_path / "summary.json"
    res = run("modelcontact", {"CONTACTS": f"{FOLD / 'contacts.gpkg'}|layername=contacts",
                               "DEM": str(FOLD / "dem.tif"), "MODEL": model_index("spline"),
                               "RESAMPLES": 100, "PICK_SPACING": PICK_SPACING_M, "MAP_UNITS": units, **UNITS,
                               "summary": str(summary),
                               "picks": TMP, "structure_contours": TMP, "surface": str(tmp_path / "s.tif"),
                               "dip": TMP, "dip_direction": TMP, "unit_conflicts": TMP})
    got = json.loads(summary.read_text())["map_units"]
    assert got == library_run.summary["map_units"]
    assert res["unit_check_n_violated"] == got["check"]["n_violated"]
    z, _, _ = raster(res["surface"])
    assert np.nanmax(np.abs(z - library_run.surface)) < FLOAT32_TOL_M
    geoms, cols = table(res["unit_conflicts"], z=False)
    assert len(geoms) == got["check"]["n_violated"]
    assert set(cols) >= {"unit", "side", "violation_m"}


@pytest.fixture(scope="module")
def picks_uri(library_run, tmp_path_factory):
    """The run's picks as a layer (what Contact elevation picks makes), by the library's writer."""
    from strikeline.io.vector import write_gpkg
    from strikeline.pipeline import picks_layer

    pk = tmp_path_factory.mktemp("picks") / "picks.gpkg"
    write_gpkg(pk, [picks_layer("picks", library_run.picks)], library_run.grid.crs_wkt)
    return f"{pk}|layername=picks"


def test_surface_model_tool_gives_the_librarys_constrained_surface(run, units, library_run, picks_uri, tmp_path):
    from strikeline.io.raster import read_raster
    from strikeline.io.vector import read_layer
    from strikeline.picks import PickSet
    from strikeline.pipeline import RunOptions, map_unit_bounds, map_unit_polygons, model_surface

    picks = library_run.picks
    res = run("surfacemodel", {"PICKS": picks_uri, "MODEL": model_index("spline"), "REFERENCE": str(FOLD / "dem.tif"),
                               "MAP_UNITS": units, **UNITS, "surface": str(tmp_path / "s.tif"),
                               "unit_conflicts": TMP})
    # the library on the same picks, units and grid
    dem, grid = read_raster(str(FOLD / "dem.tif"), label="DEM")
    opts = RunOptions(contacts="", out="", model="spline", unit_field="unit", units_above="Cawl",
                      units_below="Brenlow")
    lyr = read_layer(units.split("|")[0], label="map units", geometry="polygon", layer_option="--map-units-layer")
    polys, labels = map_unit_polygons(lyr, opts)
    ub = map_unit_bounds(polys, labels, dem, grid, opts)
    m = model_surface(PickSet(picks.xyz, picks.contact_id, picks.source), opts, grid, bounds=ub.bounds,
                      what="picks")
    ref = m.evaluate_grid(grid.with_nodata(None))
    z, _, _ = raster(res["surface"])
    assert np.nanmax(np.abs(z - ref)) < FLOAT32_TOL_M
    assert res["model_chosen"] == "spline"
    assert res["unit_check_n_violated"] == len(table(res["unit_conflicts"])[0])


def _message(run, name, params):
    with pytest.raises(QgsProcessingException) as exc:
        run(name, params)
    msg = str(exc.value)
    assert "Traceback" not in msg and "\n" not in msg
    return msg


def test_bad_unit_parameters_fail_with_the_librarys_words(run, units, picks_uri):
    base = {"CONTACTS": f"{FOLD / 'contacts.gpkg'}|layername=contacts", "DEM": str(FOLD / "dem.tif"),
            "MODEL": model_index("spline"), "picks": TMP, "structure_contours": TMP, "surface": TMP, "dip": TMP,
            "dip_direction": TMP}
    msg = _message(run, "modelcontact", {**base, "MAP_UNITS": units, **UNITS, "UNITS_ABOVE": "Cawl,Chalk"})
    assert "unit(s) Chalk not found in field 'unit'" in msg and "(units found: Alluvium, Brenlow, Cawl)" in msg
    assert "the 'Units above the surface (comma-separated)'" in msg
    msg = _message(run, "modelcontact", {**base, "UNITS_ABOVE": "Cawl"})
    assert "needs the 'Geological map units (polygons; needs the DEM)'" in msg
    msg = _message(run, "modelcontact", {**base, "MAP_UNITS": units, **UNITS, "UNITS_BELOW": "Cawl"})
    assert "both name Cawl" in msg
    msg = _message(run, "surfacemodel", {"PICKS": picks_uri, "CELL": 50.0, "MAP_UNITS": units, **UNITS,
                                         "surface": TMP})
    assert "need the reference grid: give the DEM as the reference grid" in msg
