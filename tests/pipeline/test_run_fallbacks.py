"""``strikeline run`` never fails silently and never stops on a default: few picks for the default
local-attitude window, and top and base contacts whose models never overlap.

Truth: the demo sheet's analytic plane (``test_data/demo/truth.json``).
"""
from __future__ import annotations

import json
import re

import numpy as np
import pytest
import shapely
from osgeo import ogr
from scipy.spatial.distance import cdist

from helpers import run_cli
from strikeline.attitude import DEFAULT_MIN_POINTS, DEFAULT_WINDOW_PICKS

#: Plane recovered from exact DEM picks of the exact trace (tolerance of tests/test_cli.py).
DIP_TOL_DEG = 0.5


def _run(tmp_path, demo, *extra):
    out = tmp_path / "out"
    proc = run_cli("run", "--contacts", demo["contacts"], "--dem", demo["dem"], "--out", out, *extra)
    return proc, out


def _layers(path):
    ds = ogr.Open(str(path))
    return {ds.GetLayer(i).GetName(): ds.GetLayer(i) for i in range(ds.GetLayerCount())}, ds


def test_few_picks_take_a_larger_window_and_say_so(tmp_path, demo):
    # DEM picks every 200 m along the demo's 8.8 km of contact: fewer than the default window needs
    proc, out = _run(tmp_path, demo, "--pick-spacing", "200")
    assert proc.returncode == 0, proc.stderr
    s = json.loads((out / "summary.json").read_text())
    n = s["n_picks"]
    assert 2 * DEFAULT_MIN_POINTS <= n <= DEFAULT_WINDOW_PICKS
    note = s["attitudes"]["note"]
    assert f"only {n} picks" in note and "too few for the default window" in note
    assert "warning: local attitudes: " + note in proc.stderr
    assert s["attitudes"]["n_windows"] > 0
    # the window holds about half the picks: the median distance from a pick to its (n//2)-th
    # nearest other pick (Source: scipy.spatial.distance.cdist as the reference)
    layers, ds = _layers(out / "results.gpkg")
    xy = np.array([f.GetGeometryRef().GetPoint_2D() for f in layers["picks"]])
    d = np.sort(cdist(xy, xy), axis=1)[:, n // 2]
    assert s["attitudes"]["window_m"] == pytest.approx(np.median(d), rel=1e-3)
    assert layers["attitudes"].GetFeatureCount() == s["attitudes"]["n_windows"]
    ds = None
    t = demo["truth"]  # Source: truth.json, the analytic plane of the demo sheet
    assert abs(s["plane"]["dip_deg"] - t["dip_deg"]) < DIP_TOL_DEG


def test_too_few_picks_for_any_window_skip_local_attitudes_and_say_why(tmp_path, demo):
    proc, out = _run(tmp_path, demo, "--pick-spacing", "800")
    assert proc.returncode == 0, proc.stderr
    s = json.loads((out / "summary.json").read_text())
    assert s["n_picks"] < 2 * DEFAULT_MIN_POINTS
    assert s["attitudes"]["n_windows"] == 0 and "none were fitted" in s["attitudes"]["note"]
    assert "warning: local attitudes: only" in proc.stderr
    layers, ds = _layers(out / "results.gpkg")
    assert "attitudes" not in layers and "picks" in layers
    ds = None
    for name in ("surface.tif", "depth.tif", "dip.tif"):
        assert (out / name).exists()
    t = demo["truth"]  # Source: truth.json
    assert abs(s["plane"]["dip_deg"] - t["dip_deg"]) < DIP_TOL_DEG


def test_thickness_of_surfaces_that_never_overlap_says_why(tmp_path, demo):
    # the south piece of the base and the small north-west piece of the top: kilometres apart
    top = str(demo["dir"] / "top_contacts.gpkg")
    proc, out = _run(tmp_path, demo, "--where", "fid = 2", "--top-contacts", top, "--top-where", "fid = 2")
    assert proc.returncode == 0, proc.stderr
    s = json.loads((out / "summary.json").read_text())
    th = s["thickness"]
    assert th["mean_m"] is None and th["n_cells"] == 0
    assert "no grid cell lies within reach of the data of both surfaces" in th["reason"]
    assert th["note"] == th["reason"]
    assert "warning: unit thickness not computed: " in proc.stderr
    # Source: GEOS distance (shapely): the two contacts lie farther apart than the two models'
    # reaches together, so no cell can be within reach of both
    layers, ds = _layers(out / "results.gpkg")
    base = shapely.multipoints([f.GetGeometryRef().GetPoint_2D() for f in layers["picks"]])
    topp = shapely.multipoints([f.GetGeometryRef().GetPoint_2D() for f in layers["top_picks"]])
    ds = None
    reaches = [float(x) for x in re.findall(r"within (\d+) m of its picks", th["reason"])]
    assert len(reaches) == 2 and shapely.distance(base, topp) > sum(reaches)
