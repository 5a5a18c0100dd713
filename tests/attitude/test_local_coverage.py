"""Coverage of the 95% intervals of local attitudes on the demo's hand-digitised contact.

A coverage test, not a timing: on a true plane (the demo's base, dip 18.7 toward 221.3, from
``test_data/demo/truth.json``) the 95% intervals of the windows rated good must hold the true
attitude in about 95% of windows - the project's target is 90-99%. Picks along a digitised contact
share their errors over ~100 m, so resampling single picks gave 74-90% (measured); resampling
contact blocks within each window (Kuensch 1989; Lahiri 2003) is what brings them into range.

The demo's own digitised contact (``contacts_mapped.gpkg``) gives about 40 good windows away from
its recorded mistraced stretch - too few for a coverage near 95% to be told from 100% (one miss
in 40 is 97.5%). So the same exact trace (``contacts.gpkg``) is digitised again with the recorded
process (``make_demo_sheet.digitised_line``: vertices every 15-40 m, 3 m sideways error
correlated over 100 m; new seeds, no mistrace) and the windows of all copies are pooled.
"""
from __future__ import annotations

import dataclasses
import importlib.util
import json
import sys

import numpy as np
import pytest
import shapely

from helpers import DEMO, REPO
from strikeline import pipeline as pl
from strikeline.attitude import local_attitudes
from strikeline.geometry import azimuth_difference

#: The project's target for the coverage of 95% intervals (a 95% interval should hold the truth
#: about 95% of the time; 90-99% allows for the windows' finite number).
COVERAGE_RANGE = (0.90, 0.99)
#: Re-digitised copies of the exact trace pooled with the demo's own contact.
N_COPIES = 6


def _sheet_module():
    spec = importlib.util.spec_from_file_location("make_demo_sheet", REPO / "test_data" / "make_demo_sheet.py")
    mod = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = mod  # its dataclasses look their module up
    spec.loader.exec_module(mod)
    return mod


def _hits(la, truth, keep=None):
    good = la.quality == "good"
    if keep is not None:
        good &= keep
    dip = np.abs(la.dip_deg[good] - truth["dip_deg"]) <= la.dip_ci95_deg[good]
    # a window horizontal within its confidence has no dip direction and holds any
    dci = np.where(np.isfinite(la.dip_direction_ci95_deg[good]), la.dip_direction_ci95_deg[good], 180.0)
    dd = np.abs(azimuth_difference(np.nan_to_num(la.dip_direction_deg[good]), truth["dip_direction_deg"])) <= dci
    return dip, dd


@pytest.fixture(scope="module")
def coverage():
    # Source: truth.json - the analytic plane of the demo sheet and where its contact was mistraced
    truth = json.loads((DEMO / "truth.json").read_text())
    mistraced = shapely.from_wkt(truth["mapped_contacts"]["digitising_error"]["mapped_wkt"])
    opts = pl.RunOptions(contacts=str(DEMO / "contacts_mapped.gpkg"), dem=str(DEMO / "dem.tif"),
                         contours=str(DEMO / "contours.gpkg"), elev_field="elev_m", out="unused")
    out = {}
    for kind, block_m in (("blocks", None), ("single picks", 0)):
        inputs = pl.load_inputs(opts)
        picks = pl.collect_picks(inputs)
        sigma = pl.pick_sigmas(inputs, picks, opts)
        la = local_attitudes(picks.xyz, contact_id=picks.contact_id, sigma_z_m=sigma, block_m=block_m)
        # windows reaching the deliberately mistraced stretch are not on the true plane
        away = shapely.distance(shapely.points(la.x, la.y), mistraced) > la.window_m
        dips, dds = _hits(la, truth, away)
        own = (dips, dds)
        exact = pl.load_inputs(dataclasses.replace(opts, contacts=str(DEMO / "contacts.gpkg")))
        mod = _sheet_module()
        dips, dds = [dips], [dds]
        for copy in range(N_COPIES):
            rng = np.random.default_rng(20_000 + copy)
            lines = np.array([mod.digitised_line(g, rng)[0] for g in exact.contacts.geoms], dtype=object)
            picks = pl.collect_picks(exact, contacts=dataclasses.replace(exact.contacts, geoms=lines))
            sigma = pl.pick_sigmas(exact, picks, opts)
            la = local_attitudes(picks.xyz, contact_id=picks.contact_id, sigma_z_m=sigma, seed=copy,
                                 block_m=block_m)
            d, a = _hits(la, truth)
            dips.append(d)
            dds.append(a)
        out[kind] = (own, np.concatenate(dips), np.concatenate(dds), la.method)
    return out


def test_block_resampled_intervals_hold_the_truth_90_to_99_percent(coverage):
    own, dip, dd, method = coverage["blocks"]
    assert method == "block_bootstrap+monte_carlo"
    assert len(dip) > 200
    lo, hi = COVERAGE_RANGE
    assert lo <= dip.mean() <= hi, dip.mean()
    assert lo <= dd.mean() <= hi, dd.mean()
    # the demo's own digitised contact alone: at most a couple of misses among its ~40 windows
    assert len(own[0]) >= 30 and own[0].mean() >= lo and own[1].mean() >= lo


def test_single_pick_intervals_were_too_narrow(coverage):
    # the reason for the blocks: the same windows resampled by single picks miss the truth too
    # often (measured 82% / 77% over 12 copies; 74-80% in an earlier measurement)
    _, dip, dd, method = coverage["single picks"]
    assert method == "bootstrap+monte_carlo"
    assert dip.mean() < COVERAGE_RANGE[0] or dd.mean() < COVERAGE_RANGE[0]
