"""``strikeline thickness`` takes ``--quiet`` and ``--log-json`` as ``strikeline run`` does: the
warnings and the answer stay with --quiet, the information lines go; the log holds the grids
case's named steps with their costs, every message with its level and the final status.

The log is read as JSON Lines (https://jsonlines.org: one JSON value per line, UTF-8, each line
ended by ``\\n``) with the standard library's ``json``. The thickness values are checked against
analytic geometry: planes z = a x + b y + c and z = a x + b y + c + d lie d / sqrt(1 + a^2 + b^2)
apart along their normal; 250 m of outcrop on flat ground at 26 deg is 250 sin 26 = 109.593 m
(Ragan 2009, Structural Geology, t = w sin(dip); recomputed by hand).
"""
from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from osgeo import gdal, osr

from helpers import run_cli
from strikeline.cli.progress import LOG_FORMAT
from strikeline.cli.thickness import GRID_STEPS

#: Source: Ragan (2009), t = w sin(dip): 250 sin 26 deg = 109.593 m (recomputed by hand).
OUTCROP_250_AT_26_M = 109.593
#: Source: analytic geometry, the planes below are built 60 m apart along their normal.
NORMAL_M = 60.0


def read_log(path: Path) -> list[dict]:
    text = path.read_text(encoding="utf-8")
    assert text.endswith("\n")
    return [json.loads(line) for line in text.split("\n")[:-1]]


def _tif(path, array, cell=25.0):
    ds = gdal.GetDriverByName("GTiff").Create(str(path), array.shape[1], array.shape[0], 1, gdal.GDT_Float64)
    ds.SetGeoTransform((500000.0, cell, 0.0, 4100000.0, 0.0, -cell))
    srs = osr.SpatialReference()
    srs.ImportFromEPSG(32633)
    ds.SetProjection(srs.ExportToWkt())
    ds.GetRasterBand(1).WriteArray(array)
    ds = None
    return str(path)


@pytest.fixture
def crossing(tmp_path):
    """A top 60 m above a planar base along the normal, except one corner pushed below the base
    (a warning: negative thickness there)."""
    rows, cols, cell = 20, 24, 25.0
    x = (np.arange(cols) + 0.5) * cell
    y = -(np.arange(rows) + 0.5) * cell
    X, Y = np.meshgrid(x, y)
    a, b = 0.2, -0.1
    base = 300.0 + a * X + b * Y
    top = base + NORMAL_M * np.sqrt(1 + a * a + b * b)
    top[0, 0] = base[0, 0] - 5.0
    return _tif(tmp_path / "top.tif", top), _tif(tmp_path / "base.tif", base)


@pytest.mark.parametrize("where", ["before the case", "after the case"])
def test_grids_case_logs_its_steps_messages_and_status(tmp_path, crossing, where):
    top, base = crossing
    log = tmp_path / "thickness.jsonl"
    told = ["--quiet", "--log-json", log]
    case = ["grids", "--top", top, "--base", base, "--out", tmp_path / "iso"]
    argv = ["thickness", *told, *case] if where == "before the case" else ["thickness", *case, *told]
    proc = run_cli(*argv)
    assert proc.returncode == 0, proc.stderr
    events = read_log(log)
    assert events[0]["event"] == "start" and events[0]["format"] == LOG_FORMAT
    assert events[0]["command"][1:3] == ["thickness", str(argv[1])]
    steps = [(e["event"], e["step"]) for e in events if e["event"].startswith("step_")]
    assert steps == [(kind, s) for s in GRID_STEPS for kind in ("step_start", "step_end")]
    for e in events:
        if e["event"] == "step_end":
            assert e["wall_s"] >= 0 and e["cpu_s"] >= 0 and e["peak_rss_mib"] > 0
    warnings = [e["text"] for e in events if e["event"] == "message" and e["level"] == "warning"]
    assert len(warnings) == 1 and "top lies below the base" in warnings[0]
    assert events[-1]["event"] == "end" and events[-1]["status"] == "ok" and events[-1]["exit_code"] == 0
    # --quiet: the warning stays on stderr, the answer on stdout
    assert proc.stderr.strip().splitlines() == [warnings[0]]
    mean = float(proc.stdout.split("true thickness: mean ")[1].split(" m")[0])
    n_cells = 20 * 24  # every cell but the crossed corner is NORMAL_M thick
    assert mean == pytest.approx(((n_cells - 1) * NORMAL_M + _corner(tmp_path)) / n_cells, abs=1e-3)


def _corner(tmp_path) -> float:
    """The true thickness the command wrote at the crossed corner (negative)."""
    ds = gdal.Open(str(tmp_path / "iso" / "true_thickness.tif"))
    v = float(ds.GetRasterBand(1).ReadAsArray()[0, 0])
    ds = None
    assert v < 0
    return v


def test_an_argument_case_logs_its_warning_and_status(tmp_path):
    log = tmp_path / "outcrop.jsonl"
    proc = run_cli("thickness", "outcrop", "--width-m", 250, "--dip-deg", 4, "--log-json", log)
    assert proc.returncode == 0, proc.stderr
    events = read_log(log)
    warnings = [e["text"] for e in events if e["event"] == "message" and e["level"] == "warning"]
    assert len(warnings) == 1 and "within 4.0 deg of the bedding" in warnings[0]
    assert warnings[0] in proc.stderr
    assert events[-1]["status"] == "ok"
    proc = run_cli("thickness", "outcrop", "--width-m", 250, "--dip-deg", 26, "--quiet")
    assert proc.returncode == 0 and proc.stderr == ""
    assert float(proc.stdout.split("true thickness: ")[1].split(" m")[0]) == pytest.approx(OUTCROP_250_AT_26_M,
                                                                                        abs=5e-4)


def test_a_refused_case_ends_the_log_with_status_error(tmp_path):
    log = tmp_path / "bad.jsonl"
    proc = run_cli("thickness", "outcrop", "--width-m", 100, "--dip-deg", 30, "--ground-slope-deg", 20,
                   "--log-json", log)
    assert proc.returncode == 2 and "--slope-sense" in proc.stderr
    end = read_log(log)[-1]
    assert end["event"] == "end" and end["status"] == "error" and end["exit_code"] == 2
    assert "--slope-sense" in end["message"]


def test_a_log_inside_the_grids_out_folder_is_refused(tmp_path, crossing):
    top, base = crossing
    out = tmp_path / "iso"
    proc = run_cli("thickness", "--grids", top, base, "--out", out, "--log-json", out / "log.jsonl")
    assert proc.returncode == 2 and "inside --out" in proc.stderr
    assert not out.exists()
