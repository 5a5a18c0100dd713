"""The output vocabulary: one spelling per concept, the README's output reference agrees with it
both ways, and a demo run writes exactly its names (read back with GDAL/OGR and json)."""
from __future__ import annotations

import json
import re
import subprocess
import sys
from pathlib import Path

import pytest

from strikeline import vocabulary as V

ROOT = Path(__file__).resolve().parents[1]
#: Unit suffixes of the house style (STYLE.md "Names and units"): a quantity with a unit ends with it.
SUFFIX = {"m": "_m", "deg": "_deg", "m2": "_m2"}  # common practice (house style), not from the module


def _all_names():
    for where, names in V.all_names().items():
        for n in names:
            yield where, n


# --------------------------------------------------------------------------- the module itself
def test_every_name_is_snake_case_with_its_unit_suffix():
    for where, n in _all_names():
        for part in n.name.split("."):
            assert part == "*" or re.fullmatch(r"[a-z][a-z0-9]*(_[a-z0-9]+)*", part), (where, n.name)
        leaf = n.leaf
        if n.type == "section" or leaf == "*":
            continue
        if n.unit is None:
            # counts, ratios and words carry no unit suffix (a trailing _m once read as metres)
            assert not any(leaf.endswith(sfx) for sfx in SUFFIX.values()), (where, n.name)
        else:
            assert leaf.endswith(SUFFIX[n.unit]), (where, n.name, n.unit)


def test_a_name_means_one_unit_everywhere():
    """The same leaf name never carries two units (``dip_deg`` is degrees wherever it is written)."""
    units = {}
    for where, n in _all_names():
        if n.type == "section" or n.leaf == "*":
            continue
        units.setdefault(n.leaf, set()).add(n.unit)
    assert {k: u for k, u in units.items() if len(u) > 1} == {}


def test_names_are_unique_where_they_are_written():
    for where, names in V.all_names().items():
        seen = [n.name for n in names]
        assert len(seen) == len(set(seen)), where


def test_summary_sections_are_declared_before_their_keys():
    known = V.summary_path_names()
    for keys in (V.SUMMARY_KEYS, V.ATTITUDE_REPORT_KEYS):
        names = V.summary_path_names(keys)
        for k in names:
            if "." in k:
                assert k.rsplit(".", 1)[0] in names, k
    assert "plane.dip_deg" in known and "groups.planes.*.dip_deg" in known


def test_layers_shared_by_the_chain_and_a_tool_have_one_field_list():
    # the attitudes layer of strikeline run and of the QGIS local-attitudes tool
    assert V.LAYERS["attitudes"] is V.ATTITUDES
    assert {"dip_deg", "dip_direction_deg", "strike_rhr_deg", "reason_code", "window_kind",
            "coplanarity", "collinearity"} <= set(V.ATTITUDES.field_names)
    # the plane's own names are the keys of attitude_of, the QGIS outputs and the layer fields
    plane = {n.name for n in V.PLANE_KEYS}
    assert set(V.PLANE_ATTITUDES.field_names) - {"group"} <= plane
    assert {"dip_deg", "quality", "reason", "coplanarity"} <= V.QGIS_OUTPUT_NAMES & plane


def test_vocabulary_layer_refuses_a_field_outside_the_vocabulary():
    import numpy as np

    from strikeline.pipeline import vocabulary_layer

    with pytest.raises(ValueError, match=r"\['dip'\] are not in strikeline.vocabulary"):
        vocabulary_layer(V.UNIT_CONFLICTS, np.empty(0, object), {"unit": [], "side": [], "violation_m": [], "dip": []})
    with pytest.raises(ValueError, match=r"\['flagged'\] are missing"):
        vocabulary_layer(V.CONTACT_MISFIT, np.empty(0, object), {"contact_id": [], "misfit_m": []})


# --------------------------------------------------------------------------- README
def _table_rows(markdown):
    """``(table heading, cell, ...)`` of every data row of the reference's markdown tables."""
    rows, table = set(), None
    for line in markdown.splitlines():
        if line.startswith("### "):
            table = line[4:]
        elif line.startswith("| ") and not line.startswith("| ---"):
            cells = tuple(c.strip() for c in line.strip().strip("|").split("|"))
            if cells[0] not in ("layer", "file", "key", "output"):
                rows.add((table,) + cells)
    return rows


def _readme_rows():
    text = (ROOT / "README.md").read_text()
    assert text.count(V.README_START) == 1 and text.count(V.README_END) == 1, "README: output reference markers"
    return _table_rows(text.split(V.README_START, 1)[1].split(V.README_END, 1)[0])


def _module_rows():
    return _table_rows(V.reference_markdown())


def test_readme_output_reference_agrees_with_the_module_both_ways():
    readme, module = _readme_rows(), _module_rows()
    assert sorted(module - readme) == [], "in strikeline.vocabulary, not in README (run python -m strikeline.vocabulary)"
    assert sorted(readme - module) == [], "in README, not in strikeline.vocabulary"


def test_readme_lists_every_name_of_the_module():
    """Independent of the generator: every layer, field, raster, key and QGIS output appears as a
    README row with its unit."""
    rows = _readme_rows()
    names = {(row[1], row[2], row[3]) for row in rows}
    plain = {(row[1].strip("`"), row[2].strip("`")) for row in rows}
    for layer in V.LAYERS.values():
        for f in layer.fields:
            assert (f"`{layer.name}`", f"`{f.name}`", f.unit or "-") in names, (layer.name, f.name)
    for r in V.RASTERS.values():
        assert (r.file, r.unit or "-") in plain, r.file
    for name, _ in V.RUN_FILES:
        assert (name, "-") in plain, name
    for k in (*V.SUMMARY_KEYS, *V.ATTITUDE_REPORT_KEYS, *V.QGIS_OUTPUTS):
        assert (k.name, k.unit or "-") in plain, k.name


def test_module_prints_the_reference():
    out = subprocess.run([sys.executable, "-m", "strikeline.vocabulary"], capture_output=True, text=True, check=True)
    assert out.stdout == V.reference_markdown()


# --------------------------------------------------------------------------- a demo run
@pytest.fixture(scope="module")
def demo_results(demo_command_run):
    """The output folder of the session's ``strikeline demo`` (conftest)."""
    return demo_command_run.out


def test_demo_summary_uses_exactly_the_vocabulary(demo_results):
    summary = json.loads((demo_results / V.SUMMARY_FILE).read_text())
    paths = V.json_paths(summary)
    assert sorted(paths - V.summary_path_names()) == []
    # the sections and plane keys every run with a DEM, groups and top contacts writes
    for key in ("plane.dip_deg", "plane.dip_direction_deg", "plane.strike_rhr_deg", "plane.coplanarity",
                "plane.centroid_m", "trace_misfit.median_m", "attitudes.n_windows", "model.chosen",
                "groups.planes.*.dip_deg", "thickness.mean_m", "contact_misfit.n_flagged", "inputs.dem.sha256",
                "inputs.contacts", "command_line"):
        assert key in paths, key


def test_demo_results_gpkg_and_rasters_use_exactly_the_vocabulary(demo_results):
    from osgeo import ogr  # Source: GDAL/OGR reads the GeoPackage back, independent of our writer

    ds = ogr.Open(str(demo_results / V.RESULTS_FILE))
    assert ds is not None
    got = {}
    for i in range(ds.GetLayerCount()):
        lyr = ds.GetLayerByIndex(i)
        defn = lyr.GetLayerDefn()
        got[lyr.GetName()] = [defn.GetFieldDefn(k).GetName() for k in range(defn.GetFieldCount())]
    ds = None
    assert got.pop(V.STYLES_TABLE, None) is not None  # QGIS's table of the layers' styles, not a layer
    assert set(got) <= set(V.LAYERS) and {"picks", "structure_contours", "attitudes", "top_picks"} <= set(got)
    # the demo's contacts carry name, unit, kind and block: copied under the vocabulary's prefix, after its fields
    assert [f for f in got["picks"] if f.startswith(V.CONTACT_ATTRIBUTE_PREFIX)] == [
        V.CONTACT_ATTRIBUTE_PREFIX + f for f in ("name", "unit", "kind", "block")]
    for name, fields in got.items():
        spec = V.LAYERS[name]
        fields = _named_fields(spec, fields)
        assert fields == [f for f in spec.field_names if f in fields], name  # vocabulary order
        assert set(spec.required_names) <= set(fields), name
    assert got["attitudes"] == list(V.ATTITUDES.field_names)
    tifs = {p.name for p in demo_results.glob("*.tif")}
    assert tifs <= {r.file for r in V.RASTERS.values()} and {"surface.tif", "dip.tif", "depth.tif"} <= tifs
    assert {p.name for p in demo_results.iterdir()} == tifs | {V.RESULTS_FILE, V.SUMMARY_FILE, V.MANIFEST_FILE,
                                                               V.REPORT_FILE}


def _named_fields(spec, fields):
    """``fields`` without the input's own attributes (``spec.input_attributes`` + a name), which
    must all come after the named ones."""
    if not spec.input_attributes:
        return fields
    own = [f.startswith(spec.input_attributes) for f in fields]
    assert own == sorted(own), (spec.name, fields)  # the input's attributes last
    return [f for f, o in zip(fields, own) if not o]


def _gpkg_fields(path):
    from osgeo import ogr  # Source: GDAL/OGR reads the GeoPackage back, independent of our writer

    ds = ogr.Open(str(path))
    got = {}
    for i in range(ds.GetLayerCount()):
        defn = ds.GetLayerByIndex(i).GetLayerDefn()
        got[ds.GetLayerByIndex(i).GetName()] = [defn.GetFieldDefn(k).GetName() for k in range(defn.GetFieldCount())]
    ds = None
    got.pop(V.STYLES_TABLE, None)  # QGIS's table of the layers' styles (strikeline.io.gpkg_styles), not a layer
    return got


@pytest.mark.parametrize("shared_run", ["demo_dem_run", "fold_run", "fold_units_run"])
def test_other_runs_use_exactly_the_vocabulary(shared_run, request):
    """The session's other runs (DEM picks only; the fold with auto; the fold bounded by map units,
    which adds map_units and unit_conflicts) write only the vocabulary's names too."""
    out = request.getfixturevalue(shared_run).out
    summary = json.loads((out / V.SUMMARY_FILE).read_text())
    assert sorted(V.json_paths(summary) - V.summary_path_names()) == []
    for name, fields in _gpkg_fields(out / V.RESULTS_FILE).items():
        spec = V.LAYERS[name]
        fields = _named_fields(spec, fields)
        assert fields == [f for f in spec.field_names if f in fields] and set(spec.required_names) <= set(fields), name
    assert {p.name for p in out.glob("*.tif")} <= {r.file for r in V.RASTERS.values()}
    if shared_run == "fold_units_run":
        assert "map_units" in summary and "map_units.check.n_violated" in V.json_paths(summary)


def test_attitude_report_uses_exactly_the_vocabulary(demo_results, tmp_path):
    from helpers import run_cli

    out = tmp_path / "plane.json"
    done = run_cli("attitude", "--points", demo_results / V.RESULTS_FILE, "--points-layer", "picks",
                   "--group-by", "source", "--resamples", 50, "--out", out)
    assert done.returncode == 0, done.stderr
    report = json.loads(out.read_text())
    paths = V.json_paths(report, V.ATTITUDE_REPORT_KEYS)
    assert sorted(paths - V.summary_path_names(V.ATTITUDE_REPORT_KEYS)) == []
    assert {"plane.dip_deg", "groups.field", "groups.planes.*.dip_deg", "points.sha256"} <= paths
