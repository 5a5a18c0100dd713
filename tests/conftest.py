"""Shared fixtures: the bundled sheets, the command run in process, and canonical runs.

Canonical runs are session-scoped: each is run once and read by every test that needs it. Their
folders are made read-only, so a test that would alter a shared output fails instead of changing
what the next test reads; a test that needs to alter files copies them to its ``tmp_path``.
Helpers that are not fixtures (paths, writers of derived inputs, ``run_cli``) live in
``tests/helpers.py``.
"""
from __future__ import annotations

import hashlib
import json
import os
import stat
from dataclasses import dataclass
from pathlib import Path

import pytest

from helpers import DEMO, FOLD, UNIT_OPTS, CliRun, run_cli


@dataclass(frozen=True)
class SheetRun:
    """One finished ``strikeline`` command: what it printed and the folder it wrote."""

    proc: CliRun
    out: Path


def _read_only(folder: Path) -> None:
    """Make a shared output read-only, so that a test cannot alter what the next test reads."""
    for root, dirs, files in os.walk(folder):
        for name in files:
            p = Path(root, name)
            p.chmod(p.stat().st_mode & ~(stat.S_IWUSR | stat.S_IWGRP | stat.S_IWOTH))
    for root, dirs, _ in os.walk(folder, topdown=False):
        for name in dirs:
            p = Path(root, name)
            p.chmod(p.stat().st_mode & ~(stat.S_IWUSR | stat.S_IWGRP | stat.S_IWOTH))
    folder.chmod(folder.stat().st_mode & ~(stat.S_IWUSR | stat.S_IWGRP | stat.S_IWOTH))


def _hashes(*folders) -> dict:
    return {p: hashlib.sha256(p.read_bytes()).hexdigest() for f in folders for p in Path(f).iterdir() if p.is_file()}


def _shared_run(tmp_path_factory, name: str, *args) -> SheetRun:
    """Run ``strikeline ARGS --out <fresh folder>`` once; it must succeed and leave the bundled
    sheets as they were (inputs are opened read-only)."""
    base = tmp_path_factory.mktemp(name)
    out = base / "out"
    before = _hashes(DEMO, FOLD)
    proc = run_cli(*args, "--out", out)
    assert proc.returncode == 0, proc.stderr
    assert _hashes(DEMO, FOLD) == before, "the bundled sheets must never be modified"
    _read_only(out)
    base.chmod(base.stat().st_mode & ~(stat.S_IWUSR | stat.S_IWGRP | stat.S_IWOTH))
    return SheetRun(proc, out)


def _gdal_modes():
    from osgeo import gdal, ogr, osr

    return gdal.GetUseExceptions(), ogr.GetUseExceptions(), osr.GetUseExceptions()


@pytest.fixture(autouse=True)
def _gdal_exception_mode_kept(request):
    """Fail a test (or module) that leaves GDAL/OGR/OSR's process-wide exception mode changed.

    strikeline switches exceptions on only around its own calls (``strikeline.io._gdal``), because
    inside QGIS other code relies on the mode it set. A test that switched them on for good would
    run every later test with them on and hide a library call that forgot to (so the test data
    writers check return values instead)."""
    before = _gdal_modes()
    yield
    after = _gdal_modes()
    if after != before:
        from osgeo import gdal, ogr, osr

        for module, was in zip((gdal, ogr, osr), before):
            module.UseExceptions() if was else module.DontUseExceptions()
        pytest.fail(f"{request.node.nodeid} changed the GDAL/OGR/OSR exception modes from {before} to {after}; "
                    "use strikeline.io._gdal.gdal_exceptions() around the calls instead")


@pytest.fixture(scope="session")
def demo():
    """Paths of the bundled demo sheet and its truth (the plane it was built from)."""
    truth = json.loads((DEMO / "truth.json").read_text())
    return {
        "dir": DEMO,
        "dem": str(DEMO / "dem.tif"),
        "contacts": str(DEMO / "contacts.gpkg"),
        "contours": str(DEMO / "contours.gpkg"),
        "elev_field": "elev_m",
        "truth": truth,
    }


@pytest.fixture
def cli():
    """``strikeline ARGS`` run in this process (see :func:`helpers.run_cli`)."""
    return run_cli


# --------------------------------------------------------------------------- canonical runs
@pytest.fixture(scope="session")
def demo_dem_run(tmp_path_factory, demo) -> SheetRun:
    """``strikeline run`` on the demo's exact contact and its DEM, default options."""
    return _shared_run(tmp_path_factory, "demo_dem", "run", "--contacts", demo["contacts"], "--dem", demo["dem"])


@pytest.fixture(scope="session")
def demo_dem_contours_run(tmp_path_factory, demo) -> SheetRun:
    """``strikeline run`` on the demo's exact contact with DEM and contour picks, default options."""
    return _shared_run(tmp_path_factory, "demo_dem_contours", "run", "--contacts", demo["contacts"],
                       "--dem", demo["dem"], "--contours", demo["contours"], "--elev-field", demo["elev_field"])


@pytest.fixture(scope="session")
def demo_command_run(tmp_path_factory) -> SheetRun:
    """``strikeline demo``: the whole chain on the demo sheet's mapped contacts, boreholes, dip
    readings and top contact."""
    return _shared_run(tmp_path_factory, "demo_command", "demo")


@pytest.fixture(scope="session")
def fold_run(tmp_path_factory) -> SheetRun:
    """``strikeline run`` on the fold sheet (test_data/fold), default options (``--model auto``)."""
    return _shared_run(tmp_path_factory, "fold", "run", "--contacts", FOLD / "contacts.gpkg",
                       "--dem", FOLD / "dem.tif")


@pytest.fixture(scope="session")
def fold_units_gpkg(tmp_path_factory) -> Path:
    """The fold sheet's unit polygons (helpers.write_fold_units), written once, read-only."""
    from helpers import write_fold_units

    path = write_fold_units(tmp_path_factory.mktemp("fold_units") / "units.gpkg")
    _read_only(Path(path))
    return Path(path)


@pytest.fixture(scope="session")
def fold_units_run(tmp_path_factory, fold_units_gpkg) -> SheetRun:
    """``strikeline run --model spline`` on the fold sheet bounded by its unit polygons."""
    return _shared_run(tmp_path_factory, "fold_units_run", "run", "--contacts", FOLD / "contacts.gpkg",
                       "--dem", FOLD / "dem.tif", "--model", "spline", "--map-units", fold_units_gpkg, *UNIT_OPTS)
