"""Size refusals in QGIS speak of the tool's parameters: the local-attitude tool's resamples are
checked before any draw as the plane tool's are, and a grid too large for memory names the cell
and extent parameters, not the command line's flags.

# Source: the library's own refusals are the reference (strikeline.pipeline.workload.check_resamples,
# strikeline.pipeline.rasters.output_grid with the command line's names); 10^9 resamples and a 1 cm
# cell over the demo sheet (some 4 km across) are orders of magnitude beyond any memory budget
# (our choice of values, far from the limits).
"""
from __future__ import annotations

import re

import pytest
from qgis.core import QgsApplication, QgsVectorLayer
from qgis_helpers import qgis_message

from strikeline.errors import StrikelineError

pytestmark = pytest.mark.qgis

TMP = "TEMPORARY_OUTPUT"
OUTPUTS = {"picks": TMP, "structure_contours": TMP, "surface": TMP, "dip": TMP, "dip_direction": TMP}
TINY_CELL_M = 0.01  # 1 cm cells: about 4e5 x 4e5 over the demo sheet


def _label(tool: str, parameter: str) -> str:
    return QgsApplication.processingRegistry().algorithmById(f"strikeline:{tool}") \
        .parameterDefinition(parameter).description()


def _no_flag(msg: str) -> None:
    assert not re.search(r"(^|\s|\()--[a-z]", msg), msg


@pytest.fixture(scope="module")
def picks(tmp_path_factory, sheet):
    import processing

    out = tmp_path_factory.mktemp("picks") / "picks.gpkg"
    processing.run("strikeline:contactpicks", {"CONTACTS": sheet["contacts_uri"], "DEM": sheet["dem"],
                                                "picks": str(out)})
    return str(out)


def test_local_attitudes_refuse_too_many_resamples_before_any_draw(run, picks, tmp_path):
    from strikeline.pipeline.workload import check_resamples

    label = _label("localattitudes", "RESAMPLES")
    n_picks = QgsVectorLayer(picks, "p", "ogr").featureCount()
    with pytest.raises(StrikelineError) as lib:
        check_resamples(10**9, n_picks, names={"resamples": f"the '{label}'"})
    out = tmp_path / "attitudes.gpkg"
    msg = qgis_message(run, "localattitudes", {"PICKS": picks, "RESAMPLES": 10**9, "attitudes": str(out)})
    assert msg == str(lib.value) and f"the '{label}'" in msg
    _no_flag(msg)
    assert not out.exists()
    # the default resamples still run (the check refuses only what is far beyond the limits)
    res = run("localattitudes", {"PICKS": picks, "attitudes": str(out)})
    assert res["n_windows"] > 0 and out.exists()


def test_a_grid_too_large_names_the_whole_chains_parameters(run, sheet):
    from strikeline.pipeline import RunOptions, load_inputs
    from strikeline.pipeline.steps import surface_grid

    opts = RunOptions(contacts=sheet["contacts"], dem=sheet["dem"], out="/nonexistent-out", cell_m=TINY_CELL_M)
    with pytest.raises(StrikelineError) as lib:
        surface_grid(load_inputs(opts), opts)
    want = str(lib.value)
    assert "--cell" in want and "--extent" in want  # the command line's words
    msg = qgis_message(run, "modelcontact", {"CONTACTS": sheet["contacts_uri"], "DEM": sheet["dem"],
                                         "CELL": TINY_CELL_M, **OUTPUTS})
    cell, extent = _label("modelcontact", "CELL"), _label("modelcontact", "EXTENT")
    assert msg == want.replace("--cell", f"the '{cell}'").replace("--extent", f"the '{extent}'")
    _no_flag(msg)


def test_a_grid_too_large_names_the_surface_tools_parameters(run, picks):
    msg = qgis_message(run, "surfacemodel", {"PICKS": picks, "CELL": TINY_CELL_M, "MODEL": 0, "surface": TMP})
    assert "more than the" in msg and "cells" in msg
    cell, extent = _label("surfacemodel", "CELL"), _label("surfacemodel", "EXTENT")
    assert msg.endswith(f"give the '{cell}' a larger value or the '{extent}' a smaller one"), msg
    _no_flag(msg)
