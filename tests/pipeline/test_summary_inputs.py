"""summary.json records every input by role - contacts and top contacts as lists - with its path as
given and absolute, layer, filter, fields used and SHA-256, and the command line; two files of the
same name in different folders are both kept.

References: coreutils' ``sha256sum`` for the checksums; OGR for layer names; ogr2ogr (GDAL's own
command) to split the demo's contacts into two files of the same name.
"""
from __future__ import annotations

import json
import shutil
import subprocess
from pathlib import Path

import pytest
from helpers import DEMO, FOLD, coreutils_sha256, write_fold_units
from osgeo import ogr
from strikeline import vocabulary as V
from strikeline.pipeline import RunOptions, load_inputs
from strikeline.pipeline.summary import summary_inputs

OGR2OGR = shutil.which("ogr2ogr")


def _layer_name(path) -> str:
    ds = ogr.Open(str(path))  # Source: OGR
    name = ds.GetLayer(0).GetName()
    ds = None
    return name


@pytest.mark.skipif(OGR2OGR is None, reason="GDAL's ogr2ogr command is not installed")
def test_two_files_of_one_name_in_two_folders_are_both_recorded(tmp_path):
    a, b = tmp_path / "north" / "contacts.gpkg", tmp_path / "south" / "contacts.gpkg"
    for path, fid in ((a, 1), (b, 2)):
        path.parent.mkdir()
        subprocess.run([OGR2OGR, "-f", "GPKG", str(path), str(DEMO / "contacts_mapped.gpkg"), "-where",
                        f"fid = {fid}"], check=True, capture_output=True)
    opts = RunOptions(contacts=[str(a), f"{b}:contacts"], out=str(tmp_path / "out"), dem=str(DEMO / "dem.tif"),
                      where="kind IS NOT NULL", group_by="block")
    got = summary_inputs(load_inputs(opts))
    assert set(got) == {"contacts", "dem"}
    c = got["contacts"]
    assert [r["path"] for r in c] == [str(a), str(b)]
    assert [r["path_absolute"] for r in c] == [str(a.resolve()), str(b.resolve())]
    assert [r["sha256"] for r in c] == [coreutils_sha256(a), coreutils_sha256(b)] and c[0]["sha256"] != c[1]["sha256"]
    assert [r["layer"] for r in c] == [_layer_name(a), _layer_name(b)]
    assert all(r["where"] == "kind IS NOT NULL" and r["fields"] == {"group_by": "block"} for r in c)
    assert got["dem"]["sha256"] == coreutils_sha256(DEMO / "dem.tif") and got["dem"]["layer"] is None


def test_every_role_with_its_layer_filter_and_fields(tmp_path):
    units = write_fold_units(tmp_path / "units.gpkg")
    opts = RunOptions(contacts=str(FOLD / "contacts.gpkg"), out=str(tmp_path / "out"), dem=str(FOLD / "dem.tif"),
                      map_units=str(units), unit_field="unit", units_above="Cawl", units_below="Brenlow")
    got = summary_inputs(load_inputs(opts))
    assert list(got) == ["contacts", "dem", "map_units"]
    assert got["map_units"] == {"path": str(units), "path_absolute": str(Path(units).resolve()),
                                "layer": _layer_name(units), "where": None, "fields": {"unit_field": "unit"},
                                "sha256": coreutils_sha256(units)}
    demo = RunOptions(contacts=str(DEMO / "contacts_mapped.gpkg"), out=str(tmp_path / "o2"),
                      dem=str(DEMO / "dem.tif"), contours=str(DEMO / "contours.gpkg"), elev_field="elev_m",
                      boreholes=str(DEMO / "boreholes.gpkg"), borehole_collar_field="collar_m",
                      borehole_depth_field="depth_m", orientations=str(DEMO / "orientations.gpkg"),
                      strike_field="strike", top_contacts=str(DEMO / "top_contacts.gpkg"), top_where="unit <> ''")
    got = summary_inputs(load_inputs(demo))
    assert list(got) == ["contacts", "dem", "contours", "boreholes", "orientations", "top_contacts"]
    assert got["contours"]["fields"] == {"elev_field": "elev_m"}
    assert got["boreholes"]["fields"] == {"borehole_collar_field": "collar_m", "borehole_depth_field": "depth_m"}
    assert got["orientations"]["fields"] == {"dip_field": "dip", "strike_field": "strike"}
    assert got["top_contacts"][0]["where"] == "unit <> ''"
    for role in ("contours", "boreholes", "orientations"):
        path = DEMO / f"{role}.gpkg"
        assert got[role]["layer"] == _layer_name(path) and got[role]["sha256"] == coreutils_sha256(path)
    # every key is in the vocabulary (the README's output reference)
    assert V.json_paths({"inputs": got}) <= V.summary_path_names()


def test_outside_the_command_line_the_process_arguments_are_recorded():
    import sys

    from strikeline.pipeline.command import command_line, current_command_line

    assert current_command_line() == sys.argv  # Source: the Python process's own sys.argv
    with command_line(["run", "--contacts", "c.gpkg"]):
        assert current_command_line() == ["strikeline", "run", "--contacts", "c.gpkg"]
    assert current_command_line() == sys.argv


def test_the_demo_summary_records_its_inputs_and_command(demo_command_run):
    s = json.loads((demo_command_run.out / V.SUMMARY_FILE).read_text())
    # the strikeline command as given to the command line (here run in this process), as a list
    assert s["command_line"] == ["strikeline", *map(str, demo_command_run.proc.args)] and s["version"]
    assert isinstance(s["inputs"]["contacts"], list) and len(s["inputs"]["contacts"]) == 1
    rec = s["inputs"]["contacts"][0]
    assert Path(rec["path"]).name == "contacts_mapped.gpkg" and rec["sha256"] == coreutils_sha256(rec["path_absolute"])
    assert s["inputs"]["boreholes"]["fields"]["borehole_collar_field"]
