"""Benchmark: how often the 95% intervals of local attitudes rated good hold the true attitude.

Workload: the demo sheet's exact base trace (``test_data/demo/contacts.gpkg``, a plane dipping
18.7 toward 221.3) digitised again and again as ``test_data/make_demo_sheet.py`` digitised
``contacts_mapped.gpkg`` - vertices every 15-40 m, a smooth sideways error of 3 m correlated over
100 m - but with a new seed each time and no mistraced stretch; DEM and contour picks as
``strikeline run`` takes them, the DEM and contour errors of its defaults. Every replicate gives
about 50 windows rated good; the script prints, for each way of resampling, the share of good
windows whose 95% interval holds the true dip, the true dip direction, and both;
the project's target is 90-99%. Then the same for the real-terrain plane sheets in ``test_data/real/`` when
they are present (a window horizontal within its confidence has no dip direction and counts as
holding any). A script, not a test (``make bench`` runs it); the figures go into the README.

Run:  .venv/bin/python bench/bench_local_coverage.py [--replicates 20]
"""
from __future__ import annotations

import argparse
import dataclasses
import importlib.util
import json
import sys
from pathlib import Path

import numpy as np

from _measure import load_line, machine_line, measured, result_line
from strikeline import pipeline as pl
from strikeline.attitude import local_attitudes
from strikeline.geometry import azimuth_difference

REPO = Path(__file__).resolve().parents[1]
DEMO = REPO / "test_data" / "demo"
REAL = REPO / "test_data" / "real"


def _sheet_module():
    spec = importlib.util.spec_from_file_location("make_demo_sheet", REPO / "test_data" / "make_demo_sheet.py")
    mod = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = mod  # its dataclasses look their module up
    spec.loader.exec_module(mod)
    return mod


def coverage(la, dip, dd, keep=None):
    """(n good windows, share holding the dip, the dip direction, both) of ``la``."""
    good = la.quality == "good"
    if keep is not None:
        good &= keep
    d = np.abs(la.dip_deg[good] - dip) <= la.dip_ci95_deg[good]
    # a window horizontal within its confidence has no direction: it holds any true direction
    dci = np.where(np.isfinite(la.dip_direction_ci95_deg[good]), la.dip_direction_ci95_deg[good], 180.0)
    a = np.abs(azimuth_difference(np.nan_to_num(la.dip_direction_deg[good]), dd)) <= dci
    return int(good.sum()), d, a


VARIANTS = {
    "single picks (before)": dict(block_m=0),
    "blocks (default)": dict(),
}


def demo_replicates(n_rep, *, variants=VARIANTS):
    mod = _sheet_module()
    truth = json.loads((DEMO / "truth.json").read_text())
    opts = pl.RunOptions(contacts=str(DEMO / "contacts.gpkg"), dem=str(DEMO / "dem.tif"),
                         contours=str(DEMO / "contours.gpkg"), elev_field="elev_m", out="unused")
    inputs = pl.load_inputs(opts)
    exact = inputs.contacts.geoms
    hits = {k: [[], [], 0] for k in variants}
    for rep in range(n_rep):
        rng = np.random.default_rng(10_000 + rep)
        lines = np.array([mod.digitised_line(g, rng)[0] for g in exact], dtype=object)
        contacts = dataclasses.replace(inputs.contacts, geoms=lines)
        picks = pl.collect_picks(inputs, contacts=contacts)
        sigma = pl.pick_sigmas(inputs, picks, opts)
        _tally(hits, variants, picks, sigma, truth, seed=rep)
    return hits


def _tally(hits, variants, picks, sigma, truth, *, seed):
    """Add the coverage of every variant's local attitudes of ``picks`` to ``hits``."""
    for name, kw in variants.items():
        la = local_attitudes(picks.xyz, contact_id=picks.contact_id, sigma_z_m=sigma, seed=seed, **kw)
        n, d, a = coverage(la, truth["dip_deg"], truth["dip_direction_deg"])
        hits[name][0].append(d)
        hits[name][1].append(a)
        hits[name][2] += n


def real_sheets(*, variants=VARIANTS, seeds=(0, 1, 2)):
    """Coverage on the real-terrain plane sheets (``test_data/real/<dem>/plane``), DEM picks with
    the DEM's stated vertical error and the contacts' stated positional error, over a few
    bootstrap seeds."""
    out = {}
    for dem in ("lidar", "volcano"):
        folder = REAL / dem / "plane"
        if not (folder / "truth.json").exists():
            continue
        truth = json.loads((folder / "truth.json").read_text())
        opts = pl.RunOptions(contacts=str(folder / "contacts.gpkg"), contacts_layer="contacts",
                             dem=str(REAL / dem / "dem.tif"), out="unused",
                             dem_sigma_m=float(truth["dem_grid"]["error_m"]))
        if hasattr(opts, "contact_sigma_m"):  # the contacts' stated positional error
            opts.contact_sigma_m = float(truth["digitising"]["sigma_m"])
        inputs = pl.load_inputs(opts)
        picks = pl.collect_picks(inputs)
        sigma = pl.pick_sigmas(inputs, picks, opts)
        hits = {k: [[], [], 0] for k in variants}
        for seed in seeds:
            _tally(hits, variants, picks, sigma, truth, seed=seed)
        out[dem] = (hits, truth, len(picks))
    return out


def report(title, hits):
    print(title)
    both = {}
    for name, (d, a, n) in hits.items():
        d, a = np.concatenate(d), np.concatenate(a)
        both[name] = 100 * (d & a).mean()
        print(f"  {name:24s} {n:5d} good windows: dip {100 * d.mean():5.1f}%  dip direction "
              f"{100 * a.mean():5.1f}%  both {both[name]:5.1f}%")
    return both


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--replicates", type=int, default=20)
    args = ap.parse_args(argv)
    machine_line()
    with measured() as m:
        both = _main(args)
    result_line(f"local attitudes' coverage, demo sheet x {args.replicates} replicates and the real plane sheets", m,
                extra="demo sheet, both dip and direction covered: "
                      + ", ".join(f"{k.strip()} {v:.1f}%" for k, v in both.items()) + " (target 90-99%)")
    load_line("at the end")


def _main(args):
    both = report(f"demo sheet, exact trace digitised {args.replicates} times (3 m error correlated over 100 m):",
                  demo_replicates(args.replicates))
    for dem, (hits, truth, n) in real_sheets().items():
        d = truth["digitising"]
        report(f"real terrain '{dem}' plane sheet ({n} DEM picks, dip {truth['dip_deg']:g} toward "
               f"{truth['dip_direction_deg']:g}; digitised with {d['sigma_m']:g} m error correlated over "
               f"{d['correlation_m']:g} m; --dem-sigma {truth['dem_grid']['error_m']:g}, --contact-sigma "
               f"{d['sigma_m']:g}), 3 bootstrap seeds:", hits)
    return both


if __name__ == "__main__":
    main()
