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


# --------------------------------------------------------------- selected features in every layer
#: The demo's two contact files hold fids 1 and 2; one contact chosen in each layer.
CHOSEN_FIRST, CHOSEN_SECOND = (2,), (1,)


def _subset(src: str, fids, dst) -> str:
    """The features ``fids`` of ``src`` in a file of their own, fids kept (GDAL's VectorTranslate,
    OGR SQL), as a command-line user would cut the selection out."""
    from osgeo import gdal

    where = f"fid IN ({', '.join(map(str, fids))})"
    ds = gdal.VectorTranslate(str(dst), src, options=["-f", "GPKG", "-where", where, "-preserve_fid",
                                                      "-nln", "contacts"])
    assert ds is not None
    ds = None
    return str(dst)


@pytest.fixture(scope="module")
def selected_command_picks(tmp_path_factory, sheet, two_layers):
    """``strikeline run`` on the selected contacts of each layer, cut into files of their own."""
    first, second, _ = two_layers
    d = tmp_path_factory.mktemp("selected")
    a = _subset(first, CHOSEN_FIRST, d / "first.gpkg")
    b = _subset(second, CHOSEN_SECOND, d / "second.gpkg")
    proc = subprocess.run([sys.executable, "-c", MAIN, "run", "--contacts", a, "--contacts", b, "--dem", sheet["dem"],
                           "--out", str(d / "out"), *QUICK], capture_output=True, text=True)
    assert proc.returncode == 0, proc.stderr
    return _picks_of(d / "out" / V.RESULTS_FILE)


@pytest.fixture
def project_layers(sheet, two_layers):
    """Both contact files open in the project (as a user has them), removed after the test."""
    from qgis.core import QgsProject
    from qgis_helpers import vector

    _, _, second_uri = two_layers
    layers = [vector(sheet["contacts_uri"], "contacts"), vector(second_uri, "contacts mapped")]
    QgsProject.instance().addMapLayers(layers)
    yield layers
    for lyr in layers:
        QgsProject.instance().removeMapLayer(lyr.id())


def test_selected_features_only_holds_for_every_contact_layer(run, sheet, project_layers, selected_command_picks):
    from qgis.core import QgsProcessingFeatureSourceDefinition

    first, second = project_layers
    first.selectByIds(list(CHOSEN_FIRST))
    second.selectByIds(list(CHOSEN_SECOND))
    res = run("contactpicks", {"CONTACTS": QgsProcessingFeatureSourceDefinition(first.id(), True),
                               "MORE_CONTACTS": [second.id()], "DEM": sheet["dem"], "picks": TMP})
    geoms, cols = table(res["picks"])
    xyz, cid = selected_command_picks
    assert len(np.unique(cid)) == 2  # one contact of each layer, nothing of the unselected ones
    np.testing.assert_array_equal(shapely.get_coordinates(geoms, include_z=True), xyz)
    np.testing.assert_array_equal(np.asarray(cols["contact_id"], dtype=np.int64), cid)


def test_without_selected_only_every_layer_is_read_whole(run, sheet, project_layers, command_picks):
    first, second = project_layers
    first.selectByIds(list(CHOSEN_FIRST))
    second.selectByIds(list(CHOSEN_SECOND))  # a selection not asked for is not used
    res = run("contactpicks", {"CONTACTS": first.id(), "MORE_CONTACTS": [second.id()], "DEM": sheet["dem"],
                               "picks": TMP})
    geoms, cols = table(res["picks"])
    xyz, cid = command_picks
    np.testing.assert_array_equal(shapely.get_coordinates(geoms, include_z=True), xyz)
    np.testing.assert_array_equal(np.asarray(cols["contact_id"], dtype=np.int64), cid)


def test_a_further_layer_with_nothing_selected_is_refused_by_name(run, sheet, project_layers):
    from qgis.core import QgsApplication, QgsProcessingFeatureSourceDefinition
    from qgis_helpers import qgis_message

    first, second = project_layers
    first.selectByIds(list(CHOSEN_FIRST))
    second.removeSelection()
    msg = qgis_message(run, "contactpicks", {"CONTACTS": QgsProcessingFeatureSourceDefinition(first.id(), True),
                                             "MORE_CONTACTS": [second.id()], "DEM": sheet["dem"], "picks": TMP})
    more = QgsApplication.processingRegistry().algorithmById("strikeline:contactpicks") \
        .parameterDefinition("MORE_CONTACTS").description()
    assert "contacts_mapped.gpkg" in msg and f"in the '{more}' has no feature selected" in msg, msg
    assert "Selected features only" in msg


def test_the_whole_chain_and_the_depth_tool_read_the_selection_too(run, sheet, project_layers,
                                                                   selected_command_picks, command_run):
    from qgis.core import QgsProcessingFeatureSourceDefinition

    first, second = project_layers
    first.selectByIds(list(CHOSEN_FIRST))
    second.selectByIds(list(CHOSEN_SECOND))
    contacts = QgsProcessingFeatureSourceDefinition(first.id(), True)
    outs = {"picks": TMP, "structure_contours": TMP, "surface": TMP, "dip": TMP, "dip_direction": TMP}
    res = run("modelcontact", {"CONTACTS": contacts, "MORE_CONTACTS": [second.id()], "DEM": sheet["dem"],
                               "MODEL": model_index("plane"), "RESAMPLES": 100, "NO_REPORT": True, **outs})
    geoms, _ = table(res["picks"])
    np.testing.assert_array_equal(shapely.get_coordinates(geoms, include_z=True), selected_command_picks[0])
    res = run("depthtrace", {"SURFACE": str(command_run / V.SURFACE.file), "DEM": sheet["dem"],
                             "CONTACTS": contacts, "MORE_CONTACTS": [second.id()],
                             "depth": TMP, "predicted_trace": TMP, "contact_misfit": TMP})
    _, cols = table(res["contact_misfit"], z=False)
    # the segments of the two selected contacts only, numbered as the command line numbers them
    assert sorted(set(np.asarray(cols["contact_id"], dtype=np.int64).tolist())) == \
        sorted(set(selected_command_picks[1].tolist()))


def test_the_list_of_layers_says_how_it_follows_the_selection(run):
    from qgis.core import QgsApplication

    for tool in ("contactpicks", "modelcontact", "depthtrace"):
        help_text = QgsApplication.processingRegistry().algorithmById(f"strikeline:{tool}") \
            .parameterDefinition("MORE_CONTACTS").help()
        assert "Selected features only" in help_text and "whole" in help_text, tool
