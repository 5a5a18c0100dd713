"""Nothing lost, ever: the command's output folder under kills, signals, a full disk and a second
run on the same folder, with the command in separate processes.

* Fault injection: the writer is run in a child process that kills itself with SIGKILL right
  after one step of :func:`strikeline.io.files.output_folder` (through its test hook) or after
  one GeoTIFF; after each kill ``--out`` must hold exactly the old or the new complete results,
  every file as its manifest says (checked with ``sha256sum``), and the next run must succeed.
* SIGTERM / SIGINT sent to a real ``strikeline run`` while it is in progress (the reserved part
  folder has appeared): exit 143 / 130 (128 + the signal's number, the shell's convention), one
  ``error:`` line, no partial output, the old results intact.
* A full disk (a 200 KiB tmpfs): exit 2, one line, the old results intact, nothing left.
* Two processes on the same ``--out``: the second stops at once with one line.

References outside the project: GNU coreutils ``sha256sum`` for the files' checksums; GDAL's
``gdal_translate``-equivalent ``gdal.Translate``/``gdal.BuildVRT`` for inputs; the kernel's
ENOSPC on a full tmpfs (mount(8), tmpfs(5)); exit status 128 + N for a process stopped by signal
N (POSIX shell convention, common practice).
"""
from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import numpy as np
import pytest
from osgeo import gdal, osr

from helpers import DEMO, coreutils_sha256, run_cli
from strikeline.vocabulary import MANIFEST_FILE

# Source: common practice (POSIX shells report a process stopped by signal N as 128 + N)
EXIT_SIGTERM = 128 + signal.SIGTERM  # 143
EXIT_SIGINT = 128 + signal.SIGINT  # 130
#: How long a child may take at most before the test gives up (a hung child, not a timing check).
PATIENCE_S = 300


# --------------------------------------------------------------------------- inputs and checks
def _tif(path, array, cell=10.0):
    """A GeoTIFF written with GDAL directly (not strikeline's writer)."""
    srs = osr.SpatialReference()
    srs.ImportFromEPSG(32633)
    ds = gdal.GetDriverByName("GTiff").Create(str(path), array.shape[1], array.shape[0], 1, gdal.GDT_Float64)
    ds.SetGeoTransform((500_000.0, cell, 0.0, 4_100_000.0, 0.0, -cell))
    ds.SetProjection(srs.ExportToWkt())
    ds.GetRasterBand(1).WriteArray(array)
    ds = None
    return path


def _grids(folder: Path, name: str, shape=(12, 15), noise=0.0, seed=0):
    """A top and a base surface (planes 80 m apart, optional noise) as two GeoTIFFs."""
    folder.mkdir(parents=True, exist_ok=True)
    y, x = np.mgrid[0:shape[0], 0:shape[1]] * 10.0
    base = 100.0 + 0.2 * x - 0.1 * y
    rng = np.random.default_rng(seed)
    top = base + 80.0 + noise * rng.normal(size=shape)
    return str(_tif(folder / f"{name}_top.tif", top)), str(_tif(folder / f"{name}_base.tif", base))


def _complete_set(folder: Path) -> dict:
    """The folder's files as ``{name: sha256}``, asserting that they are exactly its manifest's,
    each with the size and checksum the manifest gives."""
    manifest = json.loads((folder / MANIFEST_FILE).read_text())
    assert manifest["complete"] is True
    on_disk = sorted(p.name for p in folder.iterdir())
    assert on_disk == sorted([*manifest["files"], MANIFEST_FILE]), (on_disk, manifest["files"])
    got = {}
    for name, info in manifest["files"].items():
        assert (folder / name).stat().st_size == info["bytes"]
        got[name] = coreutils_sha256(folder / name)
        assert got[name] == info["sha256"], name
    return got


def _one_error_line(stderr: str) -> str:
    lines = stderr.strip().splitlines()
    assert "Traceback" not in stderr, stderr
    errors = [line for line in lines if line.startswith("error: ")]
    assert len(errors) == 1 and lines[-1] == errors[0], stderr
    return errors[0]


def _env():
    return {k: v for k, v in os.environ.items() if k != "STRIKELINE_DEBUG"}


#: A child that runs the command with a hook: SIGKILL itself at the ``nth`` time step ``target``
#: happens, or (target ``pause``) announce the part folder and wait for a go file.
CHILD = textwrap.dedent("""
    import os, signal, sys, time
    from strikeline.io import files, geotiff
    target, nth, swap = sys.argv[1], int(sys.argv[2]), sys.argv[3] == "swap"
    seen = {}
    def hook(step):
        seen[step] = seen.get(step, 0) + 1
        if target == "pause" and step == "marker_written":
            open(sys.argv[4] + ".ready", "w").close()
            while not os.path.exists(sys.argv[4] + ".go"):
                time.sleep(0.01)
        if step == target and seen[step] == nth:
            os.kill(os.getpid(), signal.SIGKILL)
    files._STEP_HOOK = hook
    if not swap:
        files._exchange = lambda a, b: False
    real = geotiff._write_one
    def write_one(*a, **k):
        real(*a, **k)
        hook("geotiff_written")
    geotiff._write_one = write_one
    from strikeline.cli.main import main
    sys.exit(main(sys.argv[5:]))
""")


def _child(target, nth, swap, args, *, flag="", popen=False):
    argv = [sys.executable, "-c", CHILD, target, str(nth), "swap" if swap else "renames", flag or "-",
            *map(str, args)]
    if popen:
        return subprocess.Popen(argv, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=_env())
    return subprocess.run(argv, check=False, capture_output=True, text=True, env=_env(), timeout=PATIENCE_S)


@pytest.fixture
def sets(tmp_path):
    """An ``--out`` holding old results, the arguments of a run that writes new ones, and the
    checksums of both sets (the new set from a reference run of the same command elsewhere)."""
    old_top, old_base = _grids(tmp_path / "inputs", "old", noise=0.0)
    new_top, new_base = _grids(tmp_path / "inputs", "new", noise=3.0, seed=7)
    out, ref = tmp_path / "out", tmp_path / "ref"
    assert run_cli("thickness", "--grids", old_top, old_base, "--out", out).returncode == 0
    assert run_cli("thickness", "--grids", new_top, new_base, "--out", ref).returncode == 0
    old, new = _complete_set(out), _complete_set(ref)
    assert old != new and old.keys() == new.keys()
    new_args = ["thickness", "--grids", new_top, new_base, "--out", out, "--overwrite"]
    return out, new_args, old, new


# Every step of the write, in order (tests/io/test_files.py checks the hook sees them all).
STEPS_SWAP = [("locked", 1), ("recovered", 1), ("part_created", 1), ("marker_written", 1),
              ("geotiff_written", 1), ("geotiff_written", 2), ("files_written", 1), ("manifest_written", 1),
              ("exchanged", 1), ("removed_file", 1), ("removed_file", 3), ("old_removed", 1)]
STEPS_RENAMES = [("manifest_written", 1), ("old_moved", 1), ("new_moved", 1), ("removed_file", 2),
                 ("old_removed", 1)]


@pytest.mark.parametrize("swap,step,nth", [(True, s, n) for s, n in STEPS_SWAP]
                         + [(False, s, n) for s, n in STEPS_RENAMES],
                         ids=[f"swap-{s}{n}" for s, n in STEPS_SWAP] + [f"renames-{s}{n}" for s, n in STEPS_RENAMES])
def test_a_kill_after_any_step_leaves_the_old_or_the_new_results(tmp_path, sets, swap, step, nth):
    out, new_args, old, new = sets
    proc = _child(step, nth, swap, new_args)
    assert proc.returncode == -signal.SIGKILL, (proc.returncode, proc.stderr)  # killed at that very step
    if not swap and step == "old_moved":
        # between the two renames of the fall-back: --out is missing, the complete old folder
        # lies beside it, and the next run puts it back (its first step)
        assert not out.exists()
        assert run_cli("thickness", *new_args[1:-1]).returncode == 2  # restored; replacing needs --overwrite
    assert _complete_set(out) in (old, new)
    expected_new = step in ("exchanged", "removed_file", "old_removed", "new_moved")
    assert _complete_set(out) == (new if expected_new else old)
    proc = run_cli(*new_args)  # the following run succeeds and cleans up
    assert proc.returncode == 0, proc.stderr
    assert _complete_set(out) == new
    assert sorted(p.name for p in tmp_path.iterdir()) == ["inputs", "out", "ref"]  # no leftover, no lock


# --------------------------------------------------------------------------- two runs at once
def test_a_second_run_on_the_same_out_stops_at_once(tmp_path, sets):
    out, new_args, _old, new = sets
    flag = tmp_path / "first"
    first = _child("pause", 1, True, new_args, flag=flag, popen=True)
    try:
        deadline = time.monotonic() + PATIENCE_S
        while not Path(f"{flag}.ready").exists():  # the first run holds the lock and writes
            assert first.poll() is None and time.monotonic() < deadline, first.stderr and first.stderr.read()
            time.sleep(0.02)
        second = subprocess.run([sys.executable, "-m", "strikeline.cli.main", *map(str, new_args)],
                                check=False, capture_output=True, text=True, env=_env(), timeout=PATIENCE_S)
        line = _one_error_line(second.stderr)
        assert second.returncode == 2
        assert f"another strikeline run (process {first.pid}) is writing to '{out}'" in line
        Path(f"{flag}.go").touch()
        _, err = first.communicate(timeout=PATIENCE_S)
    finally:
        if first.poll() is None:
            first.kill()
    assert first.returncode == 0, err
    assert _complete_set(out) == new
    Path(f"{flag}.ready").unlink()
    Path(f"{flag}.go").unlink()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["inputs", "out", "ref"]


# --------------------------------------------------------------------------- signals
@pytest.mark.parametrize("signum,status", [(signal.SIGTERM, EXIT_SIGTERM), (signal.SIGINT, EXIT_SIGINT)],
                         ids=["SIGTERM", "SIGINT"])
def test_a_signal_mid_run_leaves_no_partial_output(tmp_path, sets, signum, status):
    out, _, old, _ = sets
    args = ["run", "--contacts", DEMO / "contacts.gpkg", "--dem", DEMO / "dem.tif", "--out", out, "--overwrite"]
    proc = subprocess.Popen([sys.executable, "-m", "strikeline.cli.main", *map(str, args)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=_env())
    try:
        deadline = time.monotonic() + PATIENCE_S
        while not list(tmp_path.glob(".out.strikeline-part-*")):  # the run has begun writing its results
            assert proc.poll() is None and time.monotonic() < deadline, "the run ended before it was stopped"
            time.sleep(0.02)
        proc.send_signal(signum)
        _, err = proc.communicate(timeout=PATIENCE_S)
    finally:
        if proc.poll() is None:
            proc.kill()
    assert proc.returncode == status, err
    assert _one_error_line(err) == f"error: stopped by {signal.Signals(signum).name}; no partial output was left"
    assert _complete_set(out) == old
    assert sorted(p.name for p in tmp_path.iterdir()) == ["inputs", "out", "ref"]


# --------------------------------------------------------------------------- a full disk
def _mount_small(folder: Path, size: str):
    folder.mkdir()
    # Source: mount(8), tmpfs(5) - a size-limited RAM file system answers ENOSPC when full
    proc = subprocess.run(["mount", "-t", "tmpfs", "-o", f"size={size}", "tmpfs", str(folder)],
                          check=False, capture_output=True, text=True)
    if proc.returncode != 0:
        pytest.skip(f"cannot mount a small tmpfs for the disk-full test ({proc.stderr.strip() or 'not root'})")
    try:
        yield folder
    finally:
        subprocess.run(["umount", str(folder)], check=False)


@pytest.fixture
def small_disk(tmp_path):
    """A 200 KiB tmpfs (needs root and permission to mount; skipped otherwise)."""
    yield from _mount_small(tmp_path / "small", "200k")


@pytest.fixture
def gpkg_short_disk(tmp_path):
    """A 1200 KiB tmpfs: room for the GeoTIFFs of a run on the demo's contact and DEM (about
    720 KiB, measured) but not for its 1.1 MB results.gpkg."""
    yield from _mount_small(tmp_path / "short", "1200k")


def test_a_full_disk_gives_one_line_and_keeps_the_old_results(tmp_path, small_disk, cli):
    old_top, old_base = _grids(tmp_path / "inputs", "old")
    # noise does not compress: two float32 grids of 300 x 300 cells need about 700 KiB
    big_top, big_base = _grids(tmp_path / "inputs", "big", shape=(300, 300), noise=5.0)
    out = small_disk / "out"
    assert cli("thickness", "--grids", old_top, old_base, "--out", out).returncode == 0
    old = _complete_set(out)
    proc = cli("thickness", "--grids", big_top, big_base, "--out", out, "--overwrite")
    assert proc.returncode == 2
    line = _one_error_line(proc.stderr)
    assert "free some space" in line and str(out) in line, line
    assert _complete_set(out) == old
    assert sorted(p.name for p in small_disk.iterdir()) == ["out"]


def test_a_full_disk_at_the_geopackage_is_exit_2_not_results_written(tmp_path, gpkg_short_disk, cli):
    old_top, old_base = _grids(tmp_path / "inputs", "old")
    out = gpkg_short_disk / "out"
    assert cli("thickness", "--grids", old_top, old_base, "--out", out).returncode == 0
    old = _complete_set(out)
    proc = cli("run", "--contacts", DEMO / "contacts.gpkg", "--dem", DEMO / "dem.tif", "--out", out, "--overwrite")
    assert proc.returncode == 2, proc.stderr
    line = _one_error_line(proc.stderr)
    # Source: SQLite's own message for SQLITE_FULL, passed on by OGR
    assert f"'{out / 'results.gpkg'}'" in line and "database or disk is full" in line, line
    assert "results written" not in proc.stdout
    assert _complete_set(out) == old
    assert sorted(p.name for p in gpkg_short_disk.iterdir()) == ["out"]


def test_a_geopackage_that_does_not_fit_is_an_error_and_leaves_nothing(small_disk):
    import shapely

    from strikeline.errors import OutputError
    from strikeline.io.vector import LayerOut, write_gpkg

    n = 50_000
    pts = shapely.points(np.column_stack([np.arange(n, dtype=float), np.zeros(n), np.ones(n)]))
    layer = LayerOut("picks", pts, {"note": np.array(["a text that takes room"] * n)}, "point_z")
    with pytest.raises(OutputError, match="OGR could not write it"):
        write_gpkg(small_disk / "results.gpkg", [layer], "")
    assert list(small_disk.iterdir()) == []


# --------------------------------------------------------------------------- --out and the inputs
def test_out_dot_is_refused_clearly(tmp_path, cli):
    top, base = _grids(tmp_path / "inputs", "old")
    work = tmp_path / "work"
    work.mkdir()
    for args in (["thickness", "--grids", top, base], ["run", "--contacts", DEMO / "contacts.gpkg",
                                                      "--dem", DEMO / "dem.tif"]):
        proc = run_cli(*args, "--out", ".", "--overwrite", cwd=work)
        assert proc.returncode == 2, proc.stderr
        assert "working folder" in _one_error_line(proc.stderr)
    assert list(work.iterdir()) == []


def test_a_vrt_input_whose_source_lies_in_out_is_refused(tmp_path, sets, cli):
    out, new_args, old, _ = sets
    src = out / "vertical_thickness.tif"
    vrt = tmp_path / "top.vrt"
    # Source: GDAL's BuildVRT writes a VRT that reads the file inside --out
    gdal.BuildVRT(str(vrt), [str(src)]).FlushCache()
    proc = cli("thickness", "--grids", vrt, new_args[3], "--out", out, "--overwrite")
    assert proc.returncode == 2
    line = _one_error_line(proc.stderr)
    assert "vertical_thickness.tif" in line and "inside the output folder" in line
    assert _complete_set(out) == old
