"""``strikeline run``: the whole chain on a contact and its topography."""
from __future__ import annotations

import argparse
import sys
from pathlib import Path

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


def report(results, out, stream=None) -> None:
    """The run's answer on ``stream`` (default stdout), one sentence a line: the caution first,
    then the sentences of the report page and the QGIS log
    (:func:`strikeline.report.sentences.plain_answer` of the summary), then where the results and
    the report page were written."""
    from strikeline.report.sentences import plain_answer  # imported here: building the parsers loads no report code

    # sys.stdout is looked up at each call, not bound at import, so that a caller that redirects
    # it (tests running the command in process) gets the report
    stream = stream or sys.stdout
    for line in plain_answer(results.summary):
        print(line, file=stream)
    print(f"results written to {out}/", file=stream)
    page = Path(out) / V.REPORT_FILE
    if page.is_file():
        print(f"report: {page}", file=stream)


def main(args) -> int:
    from strikeline.pipeline import run

    opts = options_from_args(args)
    results = run(opts, reporter=args.reporter)  # log lines, progress bar, --log-json: strikeline.cli.progress
    report(results, opts.out)
    return 0
