"""The plugin itself: provider, tool names and help, parameters a model can chain, the plugin zip.

# Source: QGIS 3.22 plugin conventions - metadata.txt keys (name, qgisMinimumVersion, description,
# version, author, email) and the classFactory(iface) entry point, from QGIS's Python plugin
# documentation (PyQGIS developer cookbook, "Developing Python Plugins").
# common practice: strike by the right-hand rule is the dip direction minus 90 degrees.
"""
from __future__ import annotations

import configparser
import re
import subprocess
import sys
import zipfile
from pathlib import Path

import pytest
from qgis.core import (
    QgsApplication,
    QgsProcessingOutputNumber,
    QgsProcessingParameterDistance,
    QgsProcessingParameterFeatureSink,
    QgsProcessingParameterRasterDestination,
)
from qgis.PyQt.QtSvg import QSvgRenderer

import adapter_qgis
from strikeline import CAUTION

pytestmark = pytest.mark.qgis

REPO = Path(__file__).resolve().parents[2]
PLUGIN = REPO / "adapter_qgis"
PROVIDER_ID = "strikeline"
TOOLS = {"modelcontact", "contactpicks", "planeattitude", "localattitudes", "surfacemodel", "structurecontours",
         "dipgrids", "depthtrace", "unitthickness", "isopachs"}
FORECAST_TOOLS = {"modelcontact", "surfacemodel", "structurecontours", "depthtrace", "isopachs"}
METADATA_KEYS = {"name", "qgisMinimumVersion", "description", "version", "author", "email"}


def provider():
    return QgsApplication.processingRegistry().providerById(PROVIDER_ID)


def test_provider_and_tools_are_registered():
    p = provider()
    assert p is not None and p.name() == "strikeline"
    assert {a.name() for a in p.algorithms()} == TOOLS
    assert adapter_qgis.initProcessing() is p  # idempotent
    assert not p.icon().isNull()


def test_help_names_method_conventions_and_caution():
    for alg in provider().algorithms():
        text = alg.shortHelpString()
        assert "clockwise from grid north" in text and "right-hand rule" in text, alg.name()
        # A References list with at least one cited work (authors, year) or GDAL's documentation.
        assert "<b>References</b>" in text and (re.search(r"\(\d{4}\)", text) or "gdal.org" in text), alg.name()
        assert (CAUTION in text) == (alg.name() in FORECAST_TOOLS), alg.name()
        assert alg.group() and alg.groupId() and alg.displayName()


def test_every_tool_has_outputs_the_next_tool_can_take():
    for alg in provider().algorithms():
        dests = alg.destinationParameterDefinitions()
        assert dests, alg.name()
        assert all(isinstance(d, (QgsProcessingParameterFeatureSink, QgsProcessingParameterRasterDestination))
                   or d.name() in ("summary", "report") for d in dests)  # the whole chain's files
    contours = QgsApplication.processingRegistry().algorithmById("strikeline:structurecontours")
    interval = contours.parameterDefinition("INTERVAL")
    assert isinstance(interval, QgsProcessingParameterDistance) and interval.defaultValue() == 50.0
    plane = QgsApplication.processingRegistry().algorithmById("strikeline:planeattitude")
    assert {o.name() for o in plane.outputDefinitions() if isinstance(o, QgsProcessingOutputNumber)} >= {
        "dip_deg", "dip_direction_deg", "strike_rhr_deg", "rms_m"}


def test_every_output_is_named_by_the_vocabulary():
    """Every tool's outputs (layers, rasters, numbers, strings, the summary file) carry a name of
    strikeline.vocabulary: a layer's, a raster's (its file without .tif) or a QGIS output's."""
    from strikeline import vocabulary as V

    known = set(V.LAYERS) | set(V.RASTERS) | V.QGIS_OUTPUT_NAMES
    for alg in provider().algorithms():
        names = {o.name() for o in alg.outputDefinitions()}
        assert names and names <= known, (alg.name(), sorted(names - known))


def test_strike_output_follows_the_right_hand_rule(run, sheet):
    res = run("contactpicks", {"CONTACTS": sheet["contacts_uri"], "DEM": sheet["dem"], "picks": "TEMPORARY_OUTPUT"})
    att = run("planeattitude", {"PICKS": res["picks"], "plane_attitudes": "TEMPORARY_OUTPUT"})
    assert att["strike_rhr_deg"] == pytest.approx((att["dip_direction_deg"] - 90.0) % 360.0, abs=1e-9)


def test_metadata_icon_and_entry_points():
    meta = configparser.ConfigParser()
    meta.optionxform = str  # keep the keys' case (qgisMinimumVersion)
    meta.read(PLUGIN / "metadata.txt")
    assert METADATA_KEYS <= set(meta["general"])
    assert meta["general"]["hasProcessingProvider"] == "yes"
    assert QSvgRenderer(str(PLUGIN / meta["general"]["icon"])).isValid()
    assert callable(adapter_qgis.classFactory) and callable(adapter_qgis.initProcessing)

    class FakeIface:  # the plugin only keeps a reference; Processing needs no GUI
        pass

    plugin = adapter_qgis.classFactory(FakeIface())
    plugin.initGui()
    assert provider() is not None
    plugin.unload()
    assert provider() is None
    adapter_qgis.initProcessing()
    assert provider() is not None


def test_plugin_zip_vendors_the_library(tmp_path):
    zip_path = tmp_path / "strikeline_qgis.zip"
    subprocess.run([sys.executable, str(PLUGIN / "build_zip.py"), "--out", str(zip_path)], check=True,
                   capture_output=True)
    with zipfile.ZipFile(zip_path) as z:
        names = z.namelist()
        meta = z.read("strikeline_qgis/metadata.txt").decode()
    assert {"strikeline_qgis/__init__.py", "strikeline_qgis/metadata.txt", "strikeline_qgis/icon.svg",
            "strikeline_qgis/provider.py", "strikeline_qgis/_vendor/strikeline/pipeline/options.py",
            "strikeline_qgis/_vendor/strikeline/io/raster.py"} <= set(names)
    assert not [n for n in names if "__pycache__" in n or n.endswith(".pyc") or "/cli/" in n
                or n.endswith("build_zip.py")]
    from strikeline import __version__

    assert f"version={__version__}" in meta
    with zipfile.ZipFile(zip_path) as z:
        z.extractall(tmp_path / "plugins")
    # In a fresh QGIS process the installed plugin runs on its vendored copy of the library.
    probe = (
        "import sys; sys.path.insert(0, sys.argv[1]);"
        "from qgis.core import QgsApplication; QgsApplication.setPrefixPath('/usr', True);"
        "app = QgsApplication([], False); app.initQgis();"
        "import strikeline_qgis, strikeline; p = strikeline_qgis.initProcessing();"
        "print(strikeline.__file__); print(len(p.algorithms()))"
    )
    done = subprocess.run([sys.executable, "-c", probe, str(tmp_path / "plugins")], capture_output=True,
                          text=True, timeout=120, env={"QT_QPA_PLATFORM": "offscreen", "PATH": "/usr/bin:/bin",
                                                      "HOME": str(tmp_path)})
    assert done.returncode == 0, done.stderr
    lib_file, n_algs = done.stdout.split()[-2:]
    assert Path(lib_file).is_relative_to(tmp_path / "plugins" / "strikeline_qgis" / "_vendor")
    assert int(n_algs) == len(TOOLS)


def test_a_symlinked_checkout_loads_its_own_library(tmp_path):
    """Development install: a plugin folder linked to adapter_qgis/ finds algorithms/ as strikeline."""
    plugins = tmp_path / "plugins"
    plugins.mkdir()
    (plugins / "strikeline_dev").symlink_to(PLUGIN, target_is_directory=True)
    # The system Python without the editable install: only the link can provide strikeline.
    probe = ("import sys; sys.path.insert(0, sys.argv[1]); import strikeline_dev._vendor as v; "
             "where = v.ensure_library(); import strikeline, strikeline.errors; "
             "print(where); print(strikeline.__file__)")
    done = subprocess.run(["/usr/bin/python3", "-c", probe, str(plugins)], capture_output=True, text=True,
                          timeout=60, env={"PATH": "/usr/bin:/bin", "HOME": str(tmp_path)})
    assert done.returncode == 0, done.stderr
    where, lib_file = done.stdout.split()[-2:]
    assert Path(lib_file) == REPO / "algorithms" / "__init__.py"
    assert Path(where) == REPO / "algorithms"
