"""``strikeline demo``: the whole chain on the bundled fictional demo sheet."""
from __future__ import annotations

import argparse
from pathlib import Path

from strikeline.cli.options import EPILOG, add_options
from strikeline.errors import InputError

HELP = ("run the whole chain on the bundled fictional demo sheet: DEM and contour picks, two mapped "
        "blocks, boreholes, dip readings and the unit's top contact")


def demo_dir() -> Path:
    """The demo sheet of a source checkout (``test_data/demo`` beside ``algorithms/``)."""
    return Path(__file__).resolve().parents[2] / "test_data" / "demo"


def add_parser(sub) -> argparse.ArgumentParser:
    p = sub.add_parser("demo", help=HELP, description=HELP + ".", epilog=EPILOG)
    add_options(p, "demo_out", "overwrite", "no_report", "quiet", "log_json")
    p.set_defaults(handler=main)
    return p


def demo_options(out, *, overwrite=False, no_report=False):
    from strikeline.pipeline import RunOptions

    d = demo_dir()
    if not (d / "dem.tif").exists():
        raise InputError(f"demo sheet not found in '{d}'; run strikeline demo from a source checkout "
                         "(or regenerate it with test_data/make_demo_sheet.py)")
    return RunOptions(contacts=str(d / "contacts_mapped.gpkg"), group_by="block", dem=str(d / "dem.tif"),
                      contours=str(d / "contours.gpkg"), elev_field="elev_m",
                      top_contacts=str(d / "top_contacts.gpkg"),
                      boreholes=str(d / "boreholes.gpkg"), borehole_collar_field="collar_m",
                      borehole_depth_field="depth_m",
                      orientations=str(d / "orientations.gpkg"), dip_field="dip", dip_direction_field="dip_dir",
                      out=str(out), overwrite=overwrite, no_report=no_report)


def main(args) -> int:
    from strikeline.cli.run import report
    from strikeline.pipeline import run

    opts = demo_options(args.out, overwrite=args.overwrite, no_report=args.no_report)
    results = run(opts, reporter=args.reporter)  # log lines, progress bar, --log-json: strikeline.cli.progress
    report(results, opts.out)
    return 0
