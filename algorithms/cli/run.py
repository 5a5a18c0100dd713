"""``strikeline run``: the whole chain on a contact and its topography."""
from __future__ import annotations

import argparse
import sys

from strikeline import CAUTION
from strikeline.cli.options import (EPILOG, add_contacts, add_output, add_topography, non_negative,
                                    positive_int, positive_metres)

HELP = ("model a mapped contact: picks, attitude with confidence, surface model, structure contours, "
        "dip, depth and uncertainty grids, predicted trace, misfit QA, isopachs")


def add_parser(sub) -> argparse.ArgumentParser:
    from strikeline import defaults as pl

    p = sub.add_parser("run", help=HELP, description=HELP + ".", epilog=EPILOG)
    add_contacts(p)
    add_topography(p)
    g = p.add_argument_group("outputs")
    add_output(g)
    g.add_argument("--interval", type=positive_metres, default=50.0, metavar="METRES", dest="interval_m",
                   help="structure-contour interval; levels at multiples of it (default 50)")
    g.add_argument("--cell", type=positive_metres, metavar="METRES", dest="cell_m",
                   help="output cell size when there is no DEM (default: about 1/500 of the contours' extent)")
    g.add_argument("--pick-spacing", type=positive_metres, metavar="METRES", dest="pick_spacing_m",
                   help="spacing of DEM picks along the contacts (default: the DEM cell size)")
    g.add_argument("--misfit-flag", type=positive_metres, metavar="METRES", dest="misfit_flag_m",
                   help=f"flag contact segments whose horizontal misfit against the forecast made without "
                        f"them exceeds this (default: flag where the vertical misfit exceeds {pl.MISFIT_Z:g} "
                        "standard errors, from the stated errors and the ground slope)")

    m = p.add_argument_group("surface model")
    m.add_argument("--model", choices=pl.MODELS, default="auto",
                   help="plane, quadratic trend (trend2), thin-plate spline, or auto (default): cross-validation on "
                        "held-out contact segments, keeping the simplest model within the larger of its standard "
                        "error and the stated pick error of the best, unless a chi-square test says its residuals "
                        "far exceed the stated errors; the reason is printed")
    m.add_argument("--boreholes", metavar="PATH", help="point layer of boreholes that reach the surface")
    m.add_argument("--boreholes-layer", metavar="NAME")
    m.add_argument("--borehole-z-field", metavar="NAME", help="field with the surface's elevation in each hole")
    m.add_argument("--borehole-collar-field", metavar="NAME", help="field with the collar elevation (with --borehole-depth-field)")
    m.add_argument("--borehole-depth-field", metavar="NAME", help="field with the vertical depth from collar to the surface")
    m.add_argument("--borehole-sigma", type=non_negative, default=pl.DEFAULT_BOREHOLE_SIGMA_M, metavar="METRES",
                   dest="borehole_sigma_m", help=f"standard error of borehole elevations (default {pl.DEFAULT_BOREHOLE_SIGMA_M:g})")
    m.add_argument("--orientations", metavar="PATH", help="point layer of dip measurements on the surface")
    m.add_argument("--orientations-layer", metavar="NAME")
    m.add_argument("--dip-field", default="dip", metavar="NAME", help="dip field, degrees (default dip)")
    m.add_argument("--dip-direction-field", default="dip_dir", metavar="NAME",
                   help="dip-direction field, degrees (default dip_dir)")
    m.add_argument("--strike-field", metavar="NAME", help="right-hand-rule strike field instead of dip direction")
    m.add_argument("--orientation-sigma", type=non_negative, default=pl.DEFAULT_ORIENTATION_SIGMA_DEG,
                   metavar="DEGREES", dest="orientation_sigma_deg",
                   help=f"standard error of measured dips (default {pl.DEFAULT_ORIENTATION_SIGMA_DEG:g})")
    m.add_argument("--top-contacts", metavar="PATH",
                   help="line layer of the unit's top contact: models it too and writes isopach grids")
    m.add_argument("--top-contacts-layer", metavar="NAME")
    m.add_argument("--top-where", metavar="SQL", help="OGR SQL filter on the top contacts")

    u = p.add_argument_group("geological map units (need --dem)")
    u.add_argument("--map-units", metavar="PATH",
                   help="polygon layer of the map's units: the surface stays below ground where a unit above it "
                        "crops out and above ground where a unit below it crops out")
    u.add_argument("--map-units-layer", metavar="NAME", help="layer name inside the map-units file")
    u.add_argument("--unit-field", metavar="NAME", help="field of the map-units layer that holds each polygon's unit")
    u.add_argument("--units-above", metavar="VALUES",
                   help="comma-separated units that lie above the modelled surface (e.g. \"Kv,Kl\")")
    u.add_argument("--units-below", metavar="VALUES",
                   help="comma-separated units that lie below it; polygons of other units (superficial "
                        "deposits, water) are ignored")

    a = p.add_argument_group("attitude confidence and local attitudes")
    a.add_argument("--dem-sigma", type=non_negative, default=pl.DEFAULT_DEM_SIGMA_M, metavar="METRES",
                   dest="dem_sigma_m",
                   help=f"vertical standard error of DEM picks (default {pl.DEFAULT_DEM_SIGMA_M:g}: a typical "
                        "stated accuracy of 5-25 m national DEMs; give your DEM's, e.g. 0.2 for lidar). With "
                        "--contact-sigma and --contour-sigma it sets the model choice's tolerance, the misfit "
                        "check's threshold and the confidence intervals")
    a.add_argument("--contour-sigma", type=non_negative, default=pl.DEFAULT_CONTOUR_SIGMA_M, metavar="METRES",
                   dest="contour_sigma_m",
                   help=f"positional standard error of contour picks, turned vertical through the ground "
                        f"slope (default {pl.DEFAULT_CONTOUR_SIGMA_M:g}: half of a 5 m tolerance)")
    a.add_argument("--contact-sigma", type=non_negative, default=pl.DEFAULT_CONTACT_SIGMA_M, metavar="METRES",
                   dest="contact_sigma_m",
                   help=f"positional standard error of the mapped contact lines, turned vertical through the "
                        f"ground slope for DEM picks (default {pl.DEFAULT_CONTACT_SIGMA_M:g}: linework at 1:10,000)")
    a.add_argument("--window", type=positive_metres, metavar="METRES", dest="window_m",
                   help="radius of the moving windows of local attitudes (default from pick density)")
    a.add_argument("--group-by", metavar="FIELD", help="fit one plane per value of this contact field")
    a.add_argument("--resamples", type=positive_int, default=1000, metavar="N",
                   help="bootstrap resamples and Monte Carlo draws (default 1000)")
    a.add_argument("--seed", type=int, default=0, metavar="N", help="random seed (default 0): same seed, same numbers")
    p.set_defaults(handler=main)
    return p


OPTION_FIELDS = (
    "contacts", "contacts_layer", "where", "dem", "contours", "contours_layer", "elev_field", "out",
    "interval_m", "cell_m", "overwrite", "pick_spacing_m", "misfit_flag_m", "model", "boreholes", "boreholes_layer",
    "borehole_z_field", "borehole_collar_field", "borehole_depth_field", "borehole_sigma_m",
    "orientations", "orientations_layer", "dip_field", "dip_direction_field", "strike_field",
    "orientation_sigma_deg", "top_contacts", "top_contacts_layer", "top_where", "map_units", "map_units_layer",
    "unit_field", "units_above", "units_below", "dem_sigma_m",
    "contour_sigma_m", "contact_sigma_m", "window_m", "group_by", "resamples", "seed",
)


def options_from_args(args):
    from strikeline.pipeline import RunOptions

    return RunOptions(**{k: getattr(args, k) for k in OPTION_FIELDS})


def _pm(value, half):
    return f"{value:.2f}" if half is None else f"{value:.2f} ± {half:.2f}"


def describe_plane(pl: dict) -> str:
    """The plane in plain words; an undetermined plane gets no number."""
    if pl.get("quality") == "undetermined":
        return f"undetermined - {pl['reason']}; {pl['advice']}"
    if pl.get("dip_direction_deg") is None:
        return (f"dip {_pm(pl['dip_deg'], pl.get('dip_ci95_deg'))} deg: horizontal within its 95% confidence (no dip "
                f"direction or strike), RMS residual {pl['rms_m']:.2f} m, {pl['n_picks']} picks, quality {pl['quality']}")
    return (f"dip {_pm(pl['dip_deg'], pl.get('dip_ci95_deg'))} deg toward "
            f"{_pm(pl['dip_direction_deg'], pl.get('dip_direction_ci95_deg'))} deg (grid north; "
            f"{pl['dip_direction_true_deg']:.2f} deg from true north), strike {pl['strike_rhr_deg']:.1f} deg RHR, "
            f"RMS residual {pl['rms_m']:.2f} m, {pl['n_picks']} picks, quality {pl['quality']}")


def report(results, out, stream=None) -> None:
    # sys.stdout is looked up at each call, not bound at import, so that a caller that redirects
    # it (tests running the command in process) gets the report
    stream = stream or sys.stdout
    s = results.summary
    pl = s["plane"]
    src = s["picks_by_source"]
    print(f"picks: {s['n_picks']} (dem {src['dem']}, contours {src['contours']})", file=stream)
    print(f"best-fit plane: {describe_plane(pl)} (95% half-widths)", file=stream)
    for name, g in s.get("groups", {}).get("planes", {}).items():
        print(f"  group {name}: {describe_plane(g)}", file=stream)
    if "model" in s:
        m = s["model"]
        scores = ", ".join(f"{k} {v:.2f} m" for k, v in sorted(m["cv_rmse_m"].items()) if v is not None)
        print(f"surface model: {m['chosen']}" + (f" (cross-validation RMSE: {scores})" if scores else ""), file=stream)
        if m.get("choice"):
            print(f"  why: {m['choice']['reason']}", file=stream)
    tm = s["trace_misfit"]
    if tm.get("median_m") is not None:
        print(f"trace misfit: median {tm['median_m']:.1f} m, 90th percentile {tm['p90_m']:.1f} m "
              f"over {tm['n_vertices']} contact vertices", file=stream)
    else:
        print(f"trace misfit: not computed ({tm.get('note', 'no trace')})", file=stream)
    if "contact_misfit" in s:
        cm = s["contact_misfit"]
        unchecked = cm.get("n_unchecked", 0)
        print(f"contact segments flagged ({cm['check']['flag_rule']}, each against the surface forecast "
              f"without it): {cm['n_flagged']} of {cm['n_segments']}"
              + (f"; {unchecked} not checked ({cm['unchecked_reason']})" if unchecked else ""), file=stream)
    if "map_units" in s:
        mu, c = s["map_units"], s["map_units"]["check"]
        worst = "" if not c["n_violated"] else f", by at most {c['max_violation_m']:.2f} m (layer unit_conflicts)"
        print(f"map units: {mu['n_points']} constraint points ({mu['n_above']} under units above the surface, "
              f"{mu['n_below']} below); the surface breaks {c['n_violated']} of {c['n_points']} check points{worst}",
              file=stream)
    if "thickness" in s and s["thickness"]["mean_m"] is not None:
        t = s["thickness"]
        print(f"true thickness: mean {t['mean_m']:.1f} m, std {t['std_m']:.1f} m "
              f"(10-90%: {t['p10_m']:.1f}-{t['p90_m']:.1f} m)", file=stream)
    print(f"results written to {out}/", file=stream)
    print(CAUTION, file=stream)


def main(args) -> int:
    from strikeline.pipeline import run

    opts = options_from_args(args)
    results = run(opts, log=lambda m: print(m, file=sys.stderr))
    report(results, opts.out)
    return 0
