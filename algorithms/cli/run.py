"""``strikeline run``: the whole chain on a contact and its topography."""
from __future__ import annotations

import argparse
import sys
from pathlib import Path

from strikeline import CAUTION
from strikeline import vocabulary as V
from strikeline.cli.options import EPILOG, add_contacts, add_options, add_output, add_topography

HELP = ("model a mapped contact: picks, attitude with confidence, surface model, structure contours, "
        "dip, depth and uncertainty grids, predicted trace, misfit QA, isopachs")


def add_parser(sub) -> argparse.ArgumentParser:
    p = sub.add_parser("run", help=HELP, description=HELP + ".", epilog=EPILOG)
    add_contacts(p)
    add_topography(p)
    g = p.add_argument_group("outputs")
    add_output(g)
    add_options(g, "no_report")
    add_options(g, "interval_m", "cell_m", "extent", "block_cells", "pick_spacing_m", "misfit_flag_m")
    add_options(p.add_argument_group("surface model"), "model", "boreholes", "boreholes_layer", "borehole_z_field",
                "borehole_collar_field", "borehole_depth_field", "borehole_sigma_m", "orientations",
                "orientations_layer", "dip_field", "dip_direction_field", "strike_field", "orientation_sigma_deg",
                "top_contacts", "top_contacts_layer", "top_where")
    add_options(p.add_argument_group("points from delimited text (.csv boreholes or orientations; OGR's CSV driver)"),
                "x_field", "y_field", "crs")
    add_options(p.add_argument_group("geological map units (need --dem)"), "map_units", "map_units_layer",
                "unit_field", "units_above", "units_below")
    add_options(p.add_argument_group("attitude confidence and local attitudes"), "dem_sigma_m", "contour_sigma_m",
                "contact_sigma_m", "window_m", "group_by", "resamples", "seed")
    add_options(p.add_argument_group("progress and log"), "quiet", "log_json")
    p.set_defaults(handler=main)
    return p


def options_from_args(args):
    """The parsed arguments as :class:`RunOptions` (every field of it is an option of ``run``)."""
    from dataclasses import fields

    from strikeline.pipeline import RunOptions

    return RunOptions(**{f.name: getattr(args, f.name) for f in fields(RunOptions)})


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
    page = Path(out) / V.REPORT_FILE
    if page.is_file():
        print(f"report: {page}", file=stream)
    print(CAUTION, file=stream)


def main(args) -> int:
    from strikeline.pipeline import run

    opts = options_from_args(args)
    results = run(opts, reporter=args.reporter)  # log lines, progress bar, --log-json: strikeline.cli.progress
    report(results, opts.out)
    return 0
