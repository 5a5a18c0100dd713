"""Several contact layers in QGIS, as ``strikeline run`` takes ``--contacts`` several times: the
first in the contacts parameter, the others in the list of more contact layers, in that order.

# Source: the command line itself is the reference - ``strikeline run`` with the same two files
# given as two --contacts, its picks read back from results.gpkg with GDAL/OGR (GDAL 3.6 bindings).
"""
from __future__ import annotations

import subprocess
import sys

import numpy as np
import pytest
import shapely
from osgeo import ogr
from qgis_helpers import model_index, table

from strikeline import vocabulary as V

pytestmark = pytest.mark.qgis

TMP = "TEMPORARY_OUTPUT"
MAIN = "import sys; from strikeline.cli.main import main; sys.exit(main(sys.argv[1:]))"
#: Options that keep the runs quick; the picks do not depend on them.
QUICK = ("--model", "plane", "--resamples", "100", "--no-report", "--quiet")


def _picks_of(gpkg):
    """(xyz, contact_id) of the picks layer of a results.gpkg, read with OGR."""
    ds = ogr.Open(str(gpkg))
    lyr = ds.GetLayerByName(V.PICKS.name)
    xyz, cid = [], []
    for f in lyr:
        xyz.append(f.GetGeometryRef().GetPoint())
        cid.append(f.GetFieldAsInteger("contact_id"))
    lyr = ds = None
    return np.asarray(xyz), np.asarray(cid)


@pytest.fixture(scope="module")
def two_layers(sheet):
    """The demo's exact contact and its mapped (hand-traced) contacts: two files, one layer each."""
    second = sheet["dir"] / "contacts_mapped.gpkg"
    return sheet["contacts"], str(second), f"{second}|layername=contacts"


@pytest.fixture(scope="module")
def command_run(tmp_path_factory, sheet, two_layers):
    first, second, _ = two_layers
    out = tmp_path_factory.mktemp("cli") / "out"
    proc = subprocess.run([sys.executable, "-c", MAIN, "run", "--contacts", first, "--contacts", second,
                           "--dem", sheet["dem"], "--out", str(out), *QUICK], capture_output=True, text=True)
    assert proc.returncode == 0, proc.stderr
    return out


@pytest.fixture(scope="module")
def command_picks(command_run):
    return _picks_of(command_run / V.RESULTS_FILE)


def test_the_picks_of_two_layers_are_the_command_lines(run, sheet, two_layers, command_picks):
    _, _, second_uri = two_layers
    res = run("contactpicks", {"CONTACTS": sheet["contacts_uri"], "MORE_CONTACTS": [second_uri],
                               "DEM": sheet["dem"], "picks": TMP})
    geoms, cols = table(res["picks"])
    xyz, cid = command_picks
    assert len(np.unique(cid)) > 2  # both files' contacts, numbered on over the two inputs
    np.testing.assert_array_equal(shapely.get_coordinates(geoms, include_z=True), xyz)
    np.testing.assert_array_equal(np.asarray(cols["contact_id"], dtype=np.int64), cid)
    one = run("contactpicks", {"CONTACTS": sheet["contacts_uri"], "DEM": sheet["dem"], "picks": TMP})
    assert one["n_picks"] < res["n_picks"] == len(xyz)  # the second layer adds its picks


def test_the_whole_chain_takes_the_same_two_layers(run, sheet, two_layers, command_picks):
    _, _, second_uri = two_layers
    outs = {"picks": TMP, "structure_contours": TMP, "surface": TMP, "dip": TMP, "dip_direction": TMP}
    res = run("modelcontact", {"CONTACTS": sheet["contacts_uri"], "MORE_CONTACTS": [second_uri],
                               "DEM": sheet["dem"], "MODEL": model_index("plane"), "RESAMPLES": 100, "NO_REPORT": True, **outs})
    geoms, cols = table(res["picks"])
    xyz, cid = command_picks
    np.testing.assert_array_equal(shapely.get_coordinates(geoms, include_z=True), xyz)
    np.testing.assert_array_equal(np.asarray(cols["contact_id"], dtype=np.int64), cid)


def test_the_depth_tool_segments_two_layers_as_the_command_line(run, sheet, two_layers, command_run):
    _, _, second_uri = two_layers
    res = run("depthtrace", {"SURFACE": str(command_run / V.SURFACE.file), "DEM": sheet["dem"],
                             "CONTACTS": sheet["contacts_uri"], "MORE_CONTACTS": [second_uri],
                             "depth": TMP, "predicted_trace": TMP, "contact_misfit": TMP})
    geoms, cols = table(res["contact_misfit"], z=False)
    ref = ogr.Open(str(command_run / V.RESULTS_FILE))
    lyr = ref.GetLayerByName(V.CONTACT_MISFIT.name)
    ref_cid, ref_wkb = [], []
    for f in lyr:
        ref_cid.append(f.GetFieldAsInteger("contact_id"))
        ref_wkb.append(bytes(f.GetGeometryRef().ExportToWkb()))
    lyr = ref = None
    # the same contacts, joined and numbered as the command line joins them, cut into the same
    # segments (their misfits differ by design: the run measures each against a forecast made
    # without it, maps.trace.holdout_misfit_segments; the tool against the trace of the surface it
    # is given, maps.trace.contact_misfit_segments)
    assert len(set(ref_cid)) > 2
    np.testing.assert_array_equal(np.asarray(cols["contact_id"], dtype=np.int64), ref_cid)
    np.testing.assert_allclose(shapely.get_coordinates(list(geoms)),
                               shapely.get_coordinates(shapely.from_wkb(ref_wkb)), atol=1e-6)
