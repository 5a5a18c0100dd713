"""The whole-chain tool writes ``strikeline run``'s report.html, says the report's sentences in its
log (the caution first), leaves the report out when asked or when matplotlib is missing, and
offers the report's path as an HTML output that a model can pass on.

# Source: the command line is the reference - strikeline.pipeline.run (what `strikeline run`
# calls) on the same files and options writes the report.html the tool's report must equal byte
# for byte; QGIS's API (QgsProcessingParameterFileDestination with an HTML filter gives a
# QgsProcessingOutputHtml, QGIS 3.22 documentation of qgis.core) for the output's kind.
"""
from __future__ import annotations

import sys

import pytest
from qgis.core import QgsApplication, QgsProcessingOutputHtml
from qgis_helpers import LogFeedback as Log

from strikeline import CAUTION
from strikeline import vocabulary as V
from strikeline.report import MISSING_PLOT

pytestmark = pytest.mark.qgis

TMP = "TEMPORARY_OUTPUT"
#: The tool's values of conftest.QUICK (plane, 100 resamples) and of RunOptions' model/resamples.
QUICK_TOOL = {"MODEL": 1, "RESAMPLES": 100}
LAYERS = {"picks": TMP, "structure_contours": TMP, "surface": TMP, "dip": TMP, "dip_direction": TMP}


def _params(sheet, **more):
    return {"CONTACTS": sheet["contacts_uri"], "DEM": sheet["dem"], "CONTOURS": sheet["contours_uri"],
            "ELEV_FIELD": "elev_m", "INTERVAL": 50.0, **QUICK_TOOL, **LAYERS, **more}


@pytest.fixture(scope="module")
def chain(sheet, tmp_path_factory):
    """The tool's run with a report and a summary destination, and its log."""
    import processing
    from qgis.core import QgsProcessingContext, QgsProject

    d = tmp_path_factory.mktemp("qgis_report")
    fb = Log()
    context = QgsProcessingContext()
    context.setProject(QgsProject.instance())
    res = processing.run("strikeline:modelcontact",
                         _params(sheet, report=str(d / "page.html"), summary=str(d / "summary.json")),
                         feedback=fb, context=context)
    return res, fb.lines, d


def test_the_report_is_the_command_lines_report(chain, sheet, tmp_path):
    from strikeline.pipeline import RunOptions, run as run_command

    res, _, d = chain
    assert res["report"] == str(d / "page.html")
    # the command line's run on the same files with the same options
    opts = RunOptions(contacts=sheet["contacts"], dem=sheet["dem"], contours=sheet["contours"],
                      contours_layer="topo_contours", elev_field="elev_m", interval_m=50.0, model="plane",
                      resamples=100, out=str(tmp_path / "cli"))
    run_command(opts)
    cli_page = (tmp_path / "cli" / V.REPORT_FILE).read_bytes()
    page = (d / "page.html").read_bytes()
    assert page == cli_page
    text = page.decode("utf-8")
    assert text.index(CAUTION) < text.index("<h1>") < text.index("<img")
    # the scratch folder the page was drawn in is gone: only what the user asked for is left
    assert sorted(p.name for p in d.iterdir()) == ["page.html", "summary.json"]


def test_the_log_says_the_reports_sentences_caution_first(chain):
    import json

    from strikeline.report.sentences import plain_answer

    res, lines, d = chain
    summary = json.loads((d / "summary.json").read_text())
    want = plain_answer(summary)
    assert want[0] == CAUTION
    start = [i for i, line in enumerate(lines) if line == CAUTION]
    assert start, "the caution is not in the log"
    i = start[-1]  # the tool also opens its log with the caution
    assert lines[i:i + len(want)] == want
    assert f"report: {res['report']}" in lines


def test_the_report_is_an_html_output_a_model_can_pass_on():
    alg = QgsApplication.processingRegistry().algorithmById("strikeline:modelcontact")
    out = alg.outputDefinition("report")
    assert isinstance(out, QgsProcessingOutputHtml)
    dest = alg.parameterDefinition("report")
    assert dest.createByDefault() and "*.html" in dest.fileFilter()
    assert alg.parameterDefinition("NO_REPORT").defaultValue() is False  # as --no-report's absence


def test_no_report_writes_none(run, sheet, tmp_path):
    res = run("modelcontact", _params(sheet, report=str(tmp_path / "page.html"), NO_REPORT=True))
    assert not (tmp_path / "page.html").exists() and list(tmp_path.iterdir()) == []
    assert not res.get("report")
    assert res["n_picks"] > 0


def test_without_matplotlib_the_run_succeeds_and_says_how_to_install_it(run, sheet, tmp_path, monkeypatch):
    # an import of a module whose sys.modules entry is None raises ImportError (Python's import system)
    for name in [m for m in sys.modules if m == "matplotlib" or m.startswith("matplotlib.")]:
        monkeypatch.delitem(sys.modules, name)
    monkeypatch.setitem(sys.modules, "matplotlib", None)
    fb = Log()
    res = run("modelcontact", _params(sheet, report=str(tmp_path / "page.html")), feedback=fb)
    assert res["n_picks"] > 0 and not res.get("report")
    assert list(tmp_path.iterdir()) == []  # neither the page nor a scratch folder
    assert MISSING_PLOT in fb.lines  # the command line's own words
    hint = next(line for line in fb.lines if line.startswith("report: in QGIS"))
    assert fb.lines.index(hint) == fb.lines.index(MISSING_PLOT) + 1 and "matplotlib" in hint
