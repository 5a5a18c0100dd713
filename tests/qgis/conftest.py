"""A real QGIS for the adapter tests: QgsApplication, Processing, and the strikeline provider.

Runs in ``.venv-qgis`` (``make test-qgis``). Without QGIS these tests are not collected, except
under ``CI=true``, where a missing QGIS is an error: the adapter must be tested in CI.
"""
from __future__ import annotations

import json
import os
import sys
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[2]
DEMO = REPO / "test_data" / "demo"
PROCESSING_PLUGINS = "/usr/share/qgis/python/plugins"

try:
    from qgis.core import QgsApplication
except ImportError as exc:  # pragma: no cover - depends on the machine
    if os.environ.get("CI") == "true":
        raise RuntimeError(
            f"CI=true but QGIS's Python bindings do not import ({exc}); the QGIS adapter tests must "
            "run in CI - run them with `make test-qgis`, which installs python3-qgis") from None
    collect_ignore_glob = ["test_*.py"]
    QgsApplication = None

if QgsApplication is not None:
    os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    if str(REPO) not in sys.path:
        sys.path.insert(0, str(REPO))
    QgsApplication.setPrefixPath("/usr", True)
    _APP = QgsApplication([], False)
    _APP.initQgis()
    if PROCESSING_PLUGINS not in sys.path:
        sys.path.append(PROCESSING_PLUGINS)
    from processing.core.Processing import Processing

    Processing.initialize()
    import adapter_qgis

    _provider = adapter_qgis.initProcessing()
    if _provider is None:
        raise RuntimeError(f"the strikeline plugin registered no tools: {adapter_qgis.LOAD_PROBLEM}")
    if _provider.load_error:
        raise RuntimeError(f"the strikeline provider loaded no tools: {_provider.load_error}")


def pytest_report_header(config):
    if QgsApplication is None:
        return "strikeline QGIS tests: QGIS not importable here, tests/qgis not collected"
    from qgis.core import Qgis

    return f"strikeline QGIS tests: QGIS {Qgis.QGIS_VERSION}"


@pytest.fixture(scope="session")
def demo_dir(tmp_path_factory):
    """A copy of the demo sheet: QGIS writes .aux.xml statistics beside rasters it opens, and
    the repository's test data must stay untouched."""
    import shutil

    d = tmp_path_factory.mktemp("demo")
    for src in DEMO.iterdir():
        if src.is_file() and not src.name.endswith(".aux.xml"):
            shutil.copyfile(src, d / src.name)
    return d


@pytest.fixture(scope="session")
def sheet(demo_dir):
    """The demo sheet's files (copies) and the plane it was built from."""
    d = demo_dir
    return {
        "dem": str(d / "dem.tif"),
        "contacts": str(d / "contacts.gpkg"),
        "contacts_uri": f"{d / 'contacts.gpkg'}|layername=contacts",
        "contours": str(d / "contours.gpkg"),
        "contours_uri": f"{d / 'contours.gpkg'}|layername=topo_contours",
        "elev_field": "elev_m",
        "truth": json.loads((d / "truth.json").read_text()),
        "dir": d,
    }


@pytest.fixture
def run():
    """``processing.run`` on a strikeline tool with a fresh context; returns the results."""
    import processing
    from qgis.core import QgsProcessingContext, QgsProcessingFeedback, QgsProject

    def _run(name, params, *, feedback=None, context=None):
        if context is None:
            context = QgsProcessingContext()
            context.setProject(QgsProject.instance())
        return processing.run(f"strikeline:{name}", params, feedback=feedback or QgsProcessingFeedback(),
                              context=context)

    return _run


#: Options that keep the library's whole chain quick in tests (the tools are run with the same).
QUICK = {"model": "plane", "resamples": 100}


@pytest.fixture(scope="session")
def library():
    """The library's own result for the demo sheet's inputs (the reference of these tests)."""
    from strikeline.pipeline import RunOptions, compute, load_inputs

    def _lib(sheet, *, dem=True, contours=True, interval_m=50.0, cell_m=None, **options):
        opts = RunOptions(contacts=sheet["contacts"], out="/nonexistent-out", interval_m=interval_m,
                          cell_m=cell_m, dem=sheet["dem"] if dem else None,
                          contours=sheet["contours"] if contours else None,
                          contours_layer="topo_contours" if contours else None,
                          elev_field=sheet["elev_field"] if contours else None, **{**QUICK, **options})
        inputs = load_inputs(opts)
        return inputs, compute(inputs, opts)

    return _lib
