"""Several contacts inputs: --contacts and --top-contacts are repeatable (PATH or PATH:LAYER), every
input is read, reprojected into the run's CRS and joined; picks and misfit segments keep which input
and which feature they came from, with the feature's own attributes.

References: OGR reads the demo's contact files back (feature ids, attributes, filters, layers);
ogr2ogr (GDAL's own command) reprojects a copy into another CRS and splits the file; argparse's
documented ``action="append"`` semantics for the command line.
"""
from __future__ import annotations

import shutil
import subprocess

import numpy as np
import pytest
import shapely
from helpers import DEMO, write_lines
from osgeo import ogr
from strikeline import vocabulary as V
from strikeline.cli.main import build_parser
from strikeline.cli.run import options_from_args
from strikeline.errors import InputError
from strikeline.io.vector import read_layer, write_gpkg
from strikeline.picks import PickSet
from strikeline.pipeline import RunOptions, collect_picks, load_inputs
from strikeline.pipeline.inputs import layer_specs, split_layer_spec
from strikeline.pipeline.outputs import picks_layer

CONTACTS = DEMO / "contacts_mapped.gpkg"  # two contact features, fids 1 and 2 (ogrinfo)
TOP = DEMO / "top_contacts.gpkg"
DEM = DEMO / "dem.tif"
OGR2OGR = shutil.which("ogr2ogr")
needs_ogr2ogr = pytest.mark.skipif(OGR2OGR is None, reason="GDAL's ogr2ogr command is not installed")


def _fields_of(feature) -> dict:
    return {feature.GetFieldDefnRef(i).GetName(): feature.GetField(i) for i in range(feature.GetFieldCount())}


def _ogr_features(path, layer=None, where=None):
    """``{fid: (shapely geometry, {field: value})}`` as OGR reads them (the reference)."""
    ds = ogr.Open(str(path))
    lyr = ds.GetLayerByName(layer) if layer else ds.GetLayer(0)
    if where:
        lyr.SetAttributeFilter(where)
    out = {}
    for f in lyr:
        out[f.GetFID()] = (shapely.from_wkb(bytes(f.GetGeometryRef().ExportToWkb())),
                           _fields_of(f))
    ds = None
    return out


def _ogr2ogr(*args):
    subprocess.run([OGR2OGR, *map(str, args)], check=True, capture_output=True)


def _opts(contacts, tmp_path, **kw):
    return RunOptions(contacts=contacts, out=str(tmp_path / "out"), dem=str(DEM), resamples=50, **kw)


# --------------------------------------------------------------------------- PATH[:LAYER]
def test_path_and_layer_are_split_at_the_last_colon_only_after_an_existing_file(tmp_path):
    f = tmp_path / "c.gpkg"
    f.write_bytes(b"")
    odd = tmp_path / "odd:name.gpkg"  # a file whose own name holds a colon
    odd.write_bytes(b"")
    # The documented rule (split_layer_spec): an existing file is a path as it stands; otherwise the
    # last colon splits only when the part before is an existing file and the part after a name.
    assert split_layer_spec(f"{f}:lines") == (str(f), "lines")
    assert split_layer_spec(str(odd)) == (str(odd), None)
    assert split_layer_spec(f"{odd}:lines") == (str(odd), "lines")
    assert split_layer_spec(f"{f}:sub/dir") == (f"{f}:sub/dir", None)  # a path after the colon
    assert split_layer_spec(r"C:\maps\contacts.gpkg") == (r"C:\maps\contacts.gpkg", None)  # Windows drive
    assert split_layer_spec("C:/maps/contacts.gpkg") == ("C:/maps/contacts.gpkg", None)
    assert split_layer_spec(f"{f}:") == (f"{f}:", None)  # an empty layer name is no layer
    # --contacts-layer names the layer of every input that names none itself
    assert layer_specs([str(f), f"{f}:top"], "base") == [(str(f), "base"), (str(f), "top")]
    assert layer_specs(None) == []


def test_a_second_contacts_adds_to_the_first(tmp_path):
    # Source: argparse's action="append" (Python documentation): each use appends one item.
    args = build_parser().parse_args(["run", "--contacts", "a.gpkg", "--contacts", "b.gpkg:lines",
                                      "--top-contacts", "t.gpkg", "--dem", "d.tif", "--out", "o"])
    assert args.contacts == ["a.gpkg", "b.gpkg:lines"] and args.top_contacts == ["t.gpkg"]
    opts = options_from_args(args)
    assert opts.contacts == ["a.gpkg", "b.gpkg:lines"]


# --------------------------------------------------------------------------- joining inputs
@needs_ogr2ogr
def test_inputs_in_two_crss_are_reprojected_and_joined(tmp_path):
    """The second feature, moved by ogr2ogr into UTM zone 32 and given as PATH:LAYER, comes back
    into the DEM's CRS next to the first; nothing of either input is dropped."""
    ref = _ogr_features(CONTACTS)
    first, second = tmp_path / "a" / "contacts.gpkg", tmp_path / "b" / "contacts.gpkg"
    first.parent.mkdir()
    second.parent.mkdir()
    _ogr2ogr("-f", "GPKG", first, CONTACTS, "-where", "fid = 1", "-nln", "contacts")
    _ogr2ogr("-f", "GPKG", second, CONTACTS, "-where", "fid = 2", "-nln", "lines", "-t_srs", "EPSG:32632")
    log = []
    inputs = load_inputs(_opts([str(first), f"{second}:lines"], tmp_path), log=log.append)
    assert any("reprojecting contacts" in m for m in log)
    assert len(inputs.contacts) == 2
    # Source: OGR's reading of the original file; the round trip through EPSG:32632 and back is
    # good to well under a millimetre (PROJ's transverse Mercator).
    for g, fid in zip(inputs.contacts.geoms, (1, 2)):
        assert shapely.equals_exact(shapely.force_2d(ref[fid][0]), g, tolerance=1e-3)
    src = inputs.contact_sources
    assert src.input_index.tolist() == [0, 1] and src.inputs == (f"{first}:contacts", f"{second}:lines")
    # ogr2ogr keeps the feature ids into a GeoPackage (its FID creation option): 1 and 2
    assert src.fid.tolist() == [1, 2] and src.contact_id.tolist() == [1, 2]
    assert src.attributes["unit"].tolist() == [ref[1][1]["unit"], ref[2][1]["unit"]]


def test_the_same_file_twice_gives_unique_contact_ids_and_all_picks(tmp_path):
    single = load_inputs(_opts(str(CONTACTS), tmp_path))
    double = load_inputs(_opts([str(CONTACTS), str(CONTACTS)], tmp_path))
    ref = _ogr_features(CONTACTS)
    # one input: the contact ids are the file's own feature ids, as before (Source: OGR)
    assert single.contacts.fids.tolist() == sorted(ref)
    assert double.contacts.fids.tolist() == [1, 2, 3, 4]
    assert double.contact_sources.fid.tolist() == [1, 2, 1, 2]
    assert double.contact_sources.input_index.tolist() == [0, 0, 1, 1]
    p1, p2 = collect_picks(single), collect_picks(double)
    # the second input's picks repeat the first's, under the new ids
    assert len(p2) == 2 * len(p1)
    # (to a nanometre: the DEM is sampled in another order of chunks)
    np.testing.assert_allclose(p2.xyz[p2.contact_id <= 2], p1.xyz, rtol=0, atol=1e-6)
    np.testing.assert_allclose(p2.xyz[p2.contact_id > 2], p1.xyz, rtol=0, atol=1e-6)


def test_where_filters_every_input_and_the_layer_option_names_the_unnamed(tmp_path):
    lines = [shapely.LineString([(x, 5214000), (x + 200, 5214300)]) for x in (489000.0, 489400.0, 489800.0)]
    a = write_lines(tmp_path / "a.gpkg", lines, epsg=32631, fields={"unit": ["Kv", "Kl", "Kv"]}, layer="base")
    b = write_lines(tmp_path / "b.gpkg", lines[:2], epsg=32631, fields={"unit": ["Kl", "Kv"]}, layer="other")
    where = "unit = 'Kv'"
    inputs = load_inputs(_opts([a, f"{b}:other"], tmp_path, contacts_layer="base", where=where))
    # Source: OGR's own attribute filter on each file
    want = len(_ogr_features(a, "base", where)) + len(_ogr_features(b, "other", where))
    assert len(inputs.contacts) == want == 3
    assert set(inputs.contacts.fields["unit"].tolist()) == {"Kv"}
    assert [r["where"] for r in inputs.records["contacts"]] == [where, where]
    assert [r["layer"] for r in inputs.records["contacts"]] == ["base", "other"]
    with pytest.raises(InputError, match=r"has no layer 'base' \(layers: other\)"):
        load_inputs(_opts([a, b], tmp_path, contacts_layer="base"))


def test_fields_of_different_inputs_are_joined(tmp_path):
    line = [shapely.LineString([(489000.0, 5214000), (489200.0, 5214300)])]
    a = write_lines(tmp_path / "a.gpkg", line, epsg=32631, fields={"unit": ["Kv"], "age_ma": [70.0]})
    b = write_lines(tmp_path / "b.gpkg", line, epsg=32631, fields={"UNIT": ["Kl"], "mapper": ["tv"]})
    src = load_inputs(_opts([a, b], tmp_path)).contact_sources
    assert list(src.attributes) == ["unit", "age_ma", "mapper"]
    assert src.attributes["age_ma"].tolist() == [70.0, None] and src.attributes["mapper"].tolist() == [None, "tv"]
    cols = src.columns(np.array([2, 1, 99]), prefix=V.CONTACT_ATTRIBUTE_PREFIX)
    assert cols["contact_input"].tolist() == [1, 0, -1] and cols["attr_unit"].tolist() == ["Kl", "Kv", None]
    assert np.isnan(cols["attr_age_ma"][0]) and cols["attr_age_ma"][1] == 70.0
    # 'unit' and 'UNIT' are one column: a GeoPackage's column names ignore case (SQLite), so both
    # could not be written (Source: SQLite documentation, identifiers are case-insensitive)
    gpkg = tmp_path / "joined.gpkg"
    write_gpkg(gpkg, [picks_layer(V.PICKS.name, PickSet(np.array([[489000.0, 5214000.0, 1.0]] * 2), [1, 2],
                                                         ["dem", "dem"]), src)], "")
    assert [r["attr_unit"] for r in _read_layer_table(gpkg, V.PICKS.name)] == ["Kv", "Kl"]  # read back by OGR


# --------------------------------------------------------------------------- written layers
def _read_layer_table(path, name):
    ds = ogr.Open(str(path))
    lyr = ds.GetLayerByName(name)
    rows = [_fields_of(f) for f in lyr]
    ds = None
    return rows


def test_picks_layer_carries_input_feature_and_attributes(tmp_path):
    first = write_lines(tmp_path / "first.gpkg", [shapely.LineString([(489000.0, 5214000), (489200.0, 5214300)])],
                        epsg=32631, fields={"unit": ["Kv"], "age_ma": [70.0]})
    inputs = load_inputs(_opts([first, str(CONTACTS)], tmp_path))
    picks = collect_picks(inputs)
    gpkg = tmp_path / "picks.gpkg"
    write_gpkg(gpkg, [picks_layer(V.PICKS.name, picks, inputs.contact_sources)], inputs.crs_wkt)
    rows = _read_layer_table(gpkg, V.PICKS.name)  # read back by OGR
    ref = _ogr_features(CONTACTS)  # Source: OGR's reading of the demo contacts
    seen = set()
    for r in rows:
        if r["contact_input"] == 0:
            assert r["contact_fid"] == 1 and r["contact_id"] == 1
            assert r["attr_unit"] == "Kv" and r["attr_age_ma"] == 70.0 and r["attr_kind"] is None
        else:
            assert r["contact_input"] == 1 and r["contact_id"] == r["contact_fid"] + 1
            want = ref[r["contact_fid"]][1]
            assert (r["attr_unit"], r["attr_kind"], r["attr_block"]) == (want["unit"], want["kind"], want["block"])
            assert r["attr_age_ma"] is None
        seen.add((r["contact_input"], r["contact_fid"]))
    assert seen == {(0, 1), (1, 1), (1, 2)}


def test_the_demo_run_writes_each_contacts_input_and_attributes(demo_command_run):
    """``strikeline demo`` (one contacts input, one top-contacts input): picks, top picks and misfit
    segments in results.gpkg, read back by OGR, carry each contact's input, feature id and
    attributes as OGR reads them from the demo's own files."""
    gpkg = demo_command_run.out / V.RESULTS_FILE
    for layer, source in ((V.PICKS.name, DEMO / "contacts_mapped.gpkg"), (V.TOP_PICKS.name, TOP),
                          (V.CONTACT_MISFIT.name, DEMO / "contacts_mapped.gpkg")):
        ref = _ogr_features(source)  # Source: OGR's reading of the input
        rows = _read_layer_table(gpkg, layer)
        assert rows, layer
        for r in rows:
            assert r["contact_input"] == 0 and r["contact_id"] == r["contact_fid"], layer
            want = ref[r["contact_fid"]][1]
            for k, v in want.items():
                assert r[V.CONTACT_ATTRIBUTE_PREFIX + k] == v, (layer, k)


def test_top_contacts_given_twice_give_twice_the_top_picks(tmp_path):
    once = load_inputs(_opts(str(CONTACTS), tmp_path, top_contacts=str(TOP)))
    twice = load_inputs(_opts(str(CONTACTS), tmp_path, top_contacts=[str(TOP), str(TOP)]))
    p1 = collect_picks(once, contacts=once.top_contacts)
    p2 = collect_picks(twice, contacts=twice.top_contacts)
    top_ref = _ogr_features(TOP)  # Source: OGR
    assert len(p2) == 2 * len(p1)
    cols = picks_layer(V.TOP_PICKS.name, p2, twice.top_contact_sources).fields
    later = cols["contact_input"] == 1
    assert later.sum() == len(p1)
    assert (cols["contact_id"][later] == cols["contact_fid"][later] + max(top_ref)).all()
    assert all(u == top_ref[f][1]["unit"] for f, u in zip(cols["contact_fid"], cols["attr_unit"]))
    assert len(twice.records["top_contacts"]) == 2


def test_a_missing_second_input_is_a_one_line_error(tmp_path):
    with pytest.raises(InputError) as err:
        load_inputs(_opts([str(CONTACTS), str(tmp_path / "nope.gpkg:lines")], tmp_path))
    assert "nope.gpkg:lines': file not found" in str(err.value) and "\n" not in str(err.value)


def test_reading_one_input_still_works_through_read_layer():
    lyr = read_layer(CONTACTS, label="contacts", layer_option="--contacts-layer")
    assert lyr.fids.tolist() == sorted(_ogr_features(CONTACTS))
