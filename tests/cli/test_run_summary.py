"""What ``strikeline run`` prints: the caution, then the report page's and the QGIS log's
sentences (strikeline.report.sentences.plain_answer), then where the results and the report went.

# Source: summary.json of the same run is the reference for the sentences' numbers; the flagged
# contacts are read back from results.gpkg's contact_misfit layer with GDAL/OGR (GDAL 3.6 bindings).
"""
from __future__ import annotations

import json

from osgeo import ogr

from strikeline import CAUTION
from strikeline import vocabulary as V
from strikeline.report.sentences import plain_answer


def _flagged_contacts(gpkg) -> list[int]:
    """contact_id of every contact with a flagged segment, read with OGR."""
    ds = ogr.Open(str(gpkg))
    lyr = ds.GetLayerByName(V.CONTACT_MISFIT.name)
    ids = sorted({f.GetFieldAsInteger("contact_id") for f in lyr if f.GetFieldAsInteger("flagged")})
    lyr = ds = None
    return ids


def test_the_summary_is_the_sentences_then_the_files(demo_command_run):
    out = demo_command_run.out
    summary = json.loads((out / V.SUMMARY_FILE).read_text())
    lines = demo_command_run.proc.stdout.splitlines()
    assert lines[0] == CAUTION
    assert lines == [*plain_answer(summary), f"results written to {out}/", f"report: {out / V.REPORT_FILE}"]


def test_the_flagged_contacts_are_named_as_the_misfit_layer_has_them(demo_command_run):
    out = demo_command_run.out
    want = _flagged_contacts(out / V.RESULTS_FILE)
    cm = json.loads((out / V.SUMMARY_FILE).read_text())["contact_misfit"]
    assert cm["flagged_contact_ids"] == want and cm["n_flagged"] >= len(want) > 0
    line = next(x for x in demo_command_run.proc.stdout.splitlines() if "contact segments" in x)
    named = line.split("they lie on contact")[1].split(" (contact_id")[0]
    assert [int(x) for x in named.lstrip("s ").replace(" and ", ", ").split(", ")] == want
