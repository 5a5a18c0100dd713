"""The whole chain's log names the contacts whose segments it flags, in the words ``strikeline
run`` prints (strikeline.report.sentences), from the run's summary.

# Source: the tool's own contact_misfit output, read back with GDAL/OGR (GDAL 3.6 bindings), is the
# reference for which contacts hold a flagged segment.
"""
from __future__ import annotations

import json

import pytest
from osgeo import ogr
from qgis_helpers import LogFeedback, model_index

from strikeline import vocabulary as V
from strikeline.report.sentences import id_list, plain_answer

pytestmark = pytest.mark.qgis

TMP = "TEMPORARY_OUTPUT"


def test_the_log_names_the_flagged_contacts_of_the_misfit_layer(run, sheet, tmp_path):
    segments, summary = tmp_path / "segments.gpkg", tmp_path / "summary.json"
    fb = LogFeedback()
    # the demo's hand-traced contacts: some stretches stray from the true contact (test_data/demo)
    run("modelcontact", {"CONTACTS": f"{sheet['dir'] / 'contacts_mapped.gpkg'}|layername=contacts",
                         "DEM": sheet["dem"], "MODEL": model_index("plane"), "RESAMPLES": 100, "NO_REPORT": True,
                         "picks": TMP, "structure_contours": TMP, "surface": TMP, "dip": TMP, "dip_direction": TMP,
                         V.CONTACT_MISFIT.name: str(segments), "summary": str(summary)}, feedback=fb)
    ds = ogr.Open(str(segments))
    lyr = ds.GetLayer(0)
    flagged = sorted({f.GetFieldAsInteger("contact_id") for f in lyr if f.GetFieldAsInteger("flagged")})
    lyr = ds = None
    assert flagged, "the hand-traced contacts should have a flagged segment"
    s = json.loads(summary.read_text())
    assert s["contact_misfit"]["flagged_contact_ids"] == flagged
    line = next(x for x in fb.lines if "contact segments of" in x)
    assert f"on contact{'s' if len(flagged) > 1 else ''} {id_list(flagged)} (contact_id in the" in line
    assert line in plain_answer(s)  # the command line prints the same sentence
