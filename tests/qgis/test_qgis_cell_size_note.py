"""The whole chain's log in QGIS names the cell option by its parameter, not by the command line's
flag, when the grid is made without a cell size (contours and no DEM, the cell left at 0).

# Source: the cell the line states is checked against the contour layer's extent as OGR reports
# it (GetExtent, GDAL 3.6), a 500th of its larger side rounded up in the 1-2-5 series (common
# practice for round map-grid steps); the label is QGIS's own description of the parameter.
"""
from __future__ import annotations

import sys
from pathlib import Path

import pytest
from qgis_helpers import LogFeedback, model_index

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
from helpers import round_cell_of_layer  # noqa: E402

pytestmark = pytest.mark.qgis

TMP = "TEMPORARY_OUTPUT"
OUT = {"picks": TMP, "structure_contours": TMP, "surface": TMP, "dip": TMP, "dip_direction": TMP,
       "NO_REPORT": True}


def test_the_note_names_the_cell_parameter(run, sheet):
    from qgis.core import QgsApplication

    label = QgsApplication.processingRegistry().algorithmById("strikeline:modelcontact") \
        .parameterDefinition("CELL").description()
    fb = LogFeedback()
    run("modelcontact", {"CONTACTS": sheet["contacts_uri"], "CONTOURS": sheet["contours_uri"],
                         "ELEV_FIELD": sheet["elev_field"], "MODEL": model_index("plane"), "RESAMPLES": 100,
                         **OUT}, feedback=fb)
    cell = round_cell_of_layer(sheet["contours"])
    notes = [ln for ln in fb.lines if "cell size not given" in ln]
    assert len(notes) == 1, fb.lines
    assert notes[0].endswith(f"cell size not given (the '{label}'): using {cell:g} m cells over the contour "
                             "layer's extent"), notes
    assert not any("--cell" in ln for ln in fb.lines), [ln for ln in fb.lines if "--cell" in ln]
