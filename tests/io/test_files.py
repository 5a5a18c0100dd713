"""Output folders that lose nothing (strikeline.io.files): the manifest, what --overwrite may
replace, inputs kept apart from --out, the lock, recovery of what a killed run left, and the
band description and unit of every GeoTIFF (checked with GDAL's own gdalinfo).

The kill-at-every-step, signal, disk-full and two-process tests run the command in separate
processes: tests/cli/test_safe_outputs.py.
"""
from __future__ import annotations

import fcntl
import json
import os
import shutil
import subprocess
from pathlib import Path

import numpy as np
import pytest
from helpers import coreutils_sha256
from osgeo import gdal, osr

from strikeline import vocabulary as V
from strikeline.errors import OutputError
from strikeline.geometry.grid import Grid
from strikeline.io import files
from strikeline.io.files import (
    check_out_folder,
    foreign_files,
    lock_path,
    output_folder,
    read_manifest,
)
from strikeline.io.raster import write_geotiff


def _utm_grid(shape=(4, 5)) -> Grid:
    srs = osr.SpatialReference()
    srs.ImportFromEPSG(32633)
    return Grid((500_000.0, 10.0, 0.0, 4_100_000.0, 0.0, -10.0), shape, srs.ExportToWkt())


def _write(out, names=("a.txt", "b.txt"), text="new", **kw):
    with output_folder(out, **kw) as part:
        for n in names:
            (part / n).write_text(text)
    return Path(out)


# --------------------------------------------------------------------------- manifest
def test_manifest_lists_every_file_with_size_and_sha256(tmp_path):
    out = _write(tmp_path / "out", names=("a.txt", "b.txt"))
    manifest = json.loads((out / V.MANIFEST_FILE).read_text())
    assert manifest["complete"] is True
    assert sorted(manifest["files"]) == ["a.txt", "b.txt"]
    for name, info in manifest["files"].items():
        assert info["bytes"] == os.stat(out / name).st_size
        assert info["sha256"] == coreutils_sha256(out / name)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out"]  # no part folder, no lock file left


def test_overwrite_replaces_only_the_files_strikeline_wrote(tmp_path):
    out = _write(tmp_path / "out", names=("a.txt", "b.txt"), text="old")
    _write(out, names=("a.txt", "c.txt"), text="new", overwrite=True)
    assert sorted(p.name for p in out.iterdir()) == ["a.txt", "c.txt", V.MANIFEST_FILE]
    assert (out / "a.txt").read_text() == "new"


def test_an_empty_existing_folder_is_used_without_overwrite(tmp_path):
    (tmp_path / "out").mkdir()
    _write(tmp_path / "out")
    assert (tmp_path / "out" / V.MANIFEST_FILE).is_file()


def test_an_existing_folder_needs_overwrite(tmp_path):
    out = _write(tmp_path / "out")
    with pytest.raises(OutputError, match="already exists; add --overwrite"):
        _write(out)


def test_a_folder_without_manifest_is_refused_and_left_alone(tmp_path):
    out = tmp_path / "out"
    (out / "sub").mkdir(parents=True)
    for i in range(7):
        (out / f"note{i}.txt").write_text("mine")
    (out / "sub" / "deep.txt").write_text("mine")
    before = sorted(p.relative_to(out) for p in out.rglob("*"))
    with pytest.raises(OutputError) as e:
        _write(out, overwrite=True)
    msg = str(e.value)
    # the first few foreign files and the count of the rest, and the fix
    assert "holds 8 entries" in msg and "note0.txt" in msg and "and 3 more" in msg and "name a new or empty folder" in msg
    assert "\n" not in msg
    assert sorted(p.relative_to(out) for p in out.rglob("*")) == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out"]


@pytest.mark.parametrize("overwrite", [False, True])
def test_a_folder_of_the_users_is_refused_as_such_with_or_without_overwrite(tmp_path, overwrite):
    # The first refusal must not advise --overwrite for a folder that --overwrite would not replace:
    # with or without it the message is the same, says the folder is not strikeline's and names the fix.
    out = tmp_path / "out"
    out.mkdir()
    (out / "notes.txt").write_text("mine")
    with pytest.raises(OutputError) as e:
        _write(out, overwrite=overwrite)
    msg = str(e.value)
    assert "was not written by strikeline" in msg and "holds 1 entry (notes.txt)" in msg
    assert "add --overwrite" not in msg and "name a new or empty folder for --out" in msg and "\n" not in msg
    assert [p.name for p in out.iterdir()] == ["notes.txt"] and (out / "notes.txt").read_text() == "mine"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out"]


def test_a_user_file_among_our_results_is_named_before_overwrite_is_asked(tmp_path):
    out = _write(tmp_path / "out")
    (out / "notes.txt").write_text("mine")
    with pytest.raises(OutputError, match=r"holds 1 file\(s\) strikeline did not write \(notes.txt\); .* move those "
                                          r"files out of the folder and add --overwrite, or choose another --out"):
        _write(out)
    assert (out / "notes.txt").read_text() == "mine"


def test_a_user_file_added_to_our_results_is_refused(tmp_path):
    out = _write(tmp_path / "out")
    (out / "notes.txt").write_text("mine")
    (out / "maps").mkdir()
    (out / "maps" / "figure.png").write_bytes(b"\x89PNG")
    with pytest.raises(OutputError, match=r"holds 2 file\(s\) strikeline did not write \(maps/figure.png, notes.txt\)"):
        _write(out, overwrite=True)
    assert (out / "notes.txt").read_text() == "mine" and (out / "a.txt").read_text() == "new"


def test_a_result_changed_since_it_was_written_counts_as_foreign(tmp_path):
    out = _write(tmp_path / "out")
    (out / "a.txt").write_text("wen")  # same size, other bytes: only the SHA-256 sees it
    assert foreign_files(out, verify=False) == []
    assert foreign_files(out) == ["a.txt (changed since strikeline wrote it)"]
    with pytest.raises(OutputError, match="changed since strikeline wrote it"):
        _write(out, overwrite=True)
    assert (out / "a.txt").read_text() == "wen"


# --------------------------------------------------------------------------- inputs and --out
def test_out_equal_to_inside_or_containing_an_input_is_refused(tmp_path):
    data = tmp_path / "data"
    data.mkdir()
    dem = data / "dem.tif"
    write_geotiff(dem, np.ones((4, 5)), _utm_grid(), description="ground", unit="m")
    with pytest.raises(OutputError, match="lies inside the output folder"):
        check_out_folder(data, overwrite=True, inputs=[dem])
    with pytest.raises(OutputError, match="is the input"):
        check_out_folder(dem, overwrite=True, inputs=[None, [dem]])  # a file given as --out: refused too
    (tmp_path / "folder_input").mkdir()
    with pytest.raises(OutputError, match="lies inside the input"):
        check_out_folder(tmp_path / "folder_input" / "out", overwrite=False, inputs=[tmp_path / "folder_input"])


def test_a_vrt_whose_source_lies_in_out_is_refused(tmp_path):
    out = _write(tmp_path / "out")
    src = out / "a_source.tif"
    write_geotiff(src, np.ones((4, 5)), _utm_grid(), description="ground", unit="m")
    vrt = tmp_path / "dem.vrt"
    # Source: GDAL's own gdal.BuildVRT, which writes the VRT that names the source file
    gdal.BuildVRT(str(vrt), [str(src)]).FlushCache()
    assert str(src) in gdal.Open(str(vrt)).GetFileList()  # GDAL itself lists the source
    with pytest.raises(OutputError, match="a_source.tif"):
        check_out_folder(out, overwrite=True, inputs=[vrt])


def test_the_shapefile_files_gdal_lists_are_inputs_too(tmp_path):
    from osgeo import ogr

    out = tmp_path / "out"
    out.mkdir()
    shp = out / "contacts.shp"
    ds = ogr.GetDriverByName("ESRI Shapefile").CreateDataSource(str(shp))
    ds.CreateLayer("contacts", geom_type=ogr.wkbLineString)
    ds = None
    listed = files.input_files(shp)
    assert {p.suffix for p in listed} >= {".shp", ".shx", ".dbf"}  # Source: OGR's GetFileList
    with pytest.raises(OutputError, match="lies inside the output folder"):
        check_out_folder(out, overwrite=True, inputs=[str(shp) + ":contacts"])  # PATH:LAYER


def test_the_working_folder_as_out_is_refused_clearly(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    for given in (".", str(tmp_path), ".."):
        with pytest.raises(OutputError, match="working folder"):
            check_out_folder(given, overwrite=True)


def test_a_symbolic_link_as_out_is_refused(tmp_path):
    target = _write(tmp_path / "real")
    (tmp_path / "link").symlink_to(target)
    with pytest.raises(OutputError, match="symbolic link"):
        check_out_folder(tmp_path / "link", overwrite=True)


# --------------------------------------------------------------------------- lock
def test_a_held_lock_stops_a_second_writer_at_once(tmp_path):
    out = tmp_path / "out"
    with output_folder(out) as part:
        assert lock_path(out).is_file() and lock_path(out).parent == tmp_path  # beside --out, not in it
        with pytest.raises(OutputError, match="another strikeline run .* is writing to"):
            _write(out, overwrite=True)
        (part / "a.txt").write_text("first")
    assert not lock_path(out).exists() and (out / "a.txt").read_text() == "first"


def test_a_lock_held_by_another_holder_is_respected(tmp_path):
    out = tmp_path / "out"
    # Source: flock(2) - an exclusive lock taken through another open file description conflicts
    fd = os.open(lock_path(out), os.O_RDWR | os.O_CREAT)
    try:
        fcntl.flock(fd, fcntl.LOCK_EX)
        with pytest.raises(OutputError, match="writing to"):
            _write(out)
    finally:
        os.close(fd)
    _write(out)  # free again


# --------------------------------------------------------------------------- failures and leftovers
def test_an_error_while_writing_leaves_the_old_results(tmp_path):
    out = _write(tmp_path / "out", text="old")
    with pytest.raises(RuntimeError, match="boom"), output_folder(out, overwrite=True) as part:
        (part / "a.txt").write_text("new")
        raise RuntimeError("boom")
    assert (out / "a.txt").read_text() == "old"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out"]


def _leftover(out: Path, kind: str, complete_from: Path | None = None) -> Path:
    p = out.parent / f".{out.name}.strikeline-{kind}-0123abcd"
    if complete_from is not None:
        shutil.copytree(complete_from, p)
    else:
        p.mkdir()
        (p / V.MANIFEST_FILE).write_text('{"complete": false, "files": {}}')
        (p / "half.tif").write_bytes(b"II*\0")
    return p


def test_recovery_puts_back_complete_old_results_when_out_is_missing(tmp_path):
    done = _write(tmp_path / "done", text="old")
    out = tmp_path / "out"
    _leftover(out, "old", complete_from=done)
    _leftover(out, "part")
    messages = []
    with pytest.raises(OutputError, match="already exists"):  # restored: replacing it needs --overwrite
        _write(out, log=messages.append)
    assert (out / "a.txt").read_text() == "old" and read_manifest(out)["complete"]
    assert sorted(p.name for p in tmp_path.iterdir()) == ["done", "out"]
    assert any("restored" in m for m in messages)


def test_recovery_removes_an_incomplete_old_folder_and_leaves_unknown_folders(tmp_path):
    done = _write(tmp_path / "done", text="old")
    out = tmp_path / "out"
    old = _leftover(out, "old", complete_from=done)
    (old / "a.txt").unlink()  # an old folder half removed: never restored
    stranger = tmp_path / f".{out.name}.strikeline-part-fedcba98"
    stranger.mkdir()
    (stranger / "theirs.txt").write_text("not ours: no manifest")
    _write(out, text="new")
    assert (out / "a.txt").read_text() == "new"
    assert sorted(p.name for p in tmp_path.iterdir()) == [stranger.name, "done", "out"]


def test_recovery_removes_leftovers_beside_existing_results(tmp_path):
    out = _write(tmp_path / "out", text="old")
    _leftover(out, "part")
    _leftover(out, "old", complete_from=out)
    _write(out, text="new", overwrite=True)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out"]


# --------------------------------------------------------------------------- GeoTIFF bands
def _gdalinfo_band(path) -> dict:
    # Source: GDAL's own gdalinfo -json (GDAL 3.6), run as a separate program
    out = subprocess.run(["gdalinfo", "-json", str(path)], capture_output=True, text=True, check=True).stdout
    return json.loads(out)["bands"][0]


@pytest.mark.parametrize("spec", list(V.RASTERS.values()), ids=list(V.RASTERS))
def test_every_raster_of_the_vocabulary_keeps_its_description_and_unit(tmp_path, spec):
    path = tmp_path / spec.file
    write_geotiff(path, np.arange(20.0).reshape(4, 5), _utm_grid(), description=spec.meaning, unit=spec.unit)
    band = _gdalinfo_band(path)
    assert band["description"] == spec.meaning
    assert band.get("unit", "") == (spec.unit or "")
    assert not Path(str(path) + ".aux.xml").exists()  # carried inside the GeoTIFF, not beside it


def test_geotiff_read_back_mismatch_is_an_error_and_leaves_nothing(tmp_path, monkeypatch):
    from strikeline.io import geotiff

    real = geotiff.GeoTiffWriter._check

    def truncated(self):
        with open(self.tmp, "r+b") as f:  # cut the file after GDAL closed it, as a full disk would
            f.truncate(os.path.getsize(self.tmp) // 2)
        real(self)

    monkeypatch.setattr(geotiff.GeoTiffWriter, "_check", truncated)
    path = tmp_path / "x.tif"
    rng = np.random.default_rng(1)
    with pytest.raises(OutputError, match="GDAL could not write it"):
        write_geotiff(path, rng.normal(size=(600, 600)), _utm_grid((600, 600)), description="x", unit="m")
    assert list(tmp_path.iterdir()) == []


@pytest.mark.parametrize("swap", [True, False], ids=["one-step swap", "two renames"])
def test_the_step_hook_sees_every_step_in_order(tmp_path, monkeypatch, swap):
    seen = []
    monkeypatch.setattr(files, "_STEP_HOOK", seen.append)
    if not swap:  # a file system without renameat2's RENAME_EXCHANGE
        monkeypatch.setattr(files, "_exchange", lambda a, b: False)
    out = _write(tmp_path / "out", text="old")
    _write(out, overwrite=True, text="new")
    first = ["locked", "recovered", "part_created", "marker_written", "files_written", "manifest_written",
             "new_moved"]
    assert seen[:len(first)] == first
    second = seen[len(first):]
    assert second[:7] == first[:6] + (["exchanged"] if swap else ["old_moved"])
    assert second[-1] == "old_removed" and second.count("removed_file") == 3  # a.txt, b.txt, manifest
    assert (out / "a.txt").read_text() == "new" and sorted(p.name for p in tmp_path.iterdir()) == ["out"]
