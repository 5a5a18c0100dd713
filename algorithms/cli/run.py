"""``strikeline run``: the whole chain on a contact and its topography."""
from __future__ import annotations

import argparse
import sys

from strikeline import CAUTION
from strikeline.cli.options import EPILOG, add_contacts, add_output, add_topography, positive_metres

HELP = "model a mapped contact: picks, best-fit plane, structure contours, dip and depth grids, predicted trace"


def add_parser(sub) -> argparse.ArgumentParser:
    p = sub.add_parser("run", help=HELP, description=HELP + ".", epilog=EPILOG)
    add_contacts(p)
    add_topography(p)
    g = p.add_argument_group("outputs")
    add_output(g)
    g.add_argument("--interval", type=positive_metres, default=50.0, metavar="METRES", dest="interval_m",
                   help="structure-contour interval; levels at multiples of it (default 50)")
    g.add_argument("--cell", type=positive_metres, metavar="METRES", dest="cell_m",
                   help="output cell size when there is no DEM (default: about 1/500 of the contours' extent)")
    p.set_defaults(handler=main)
    return p


def options_from_args(args):
    from strikeline.pipeline import RunOptions

    return RunOptions(contacts=args.contacts, contacts_layer=args.contacts_layer, where=args.where,
                      dem=args.dem, contours=args.contours, contours_layer=args.contours_layer,
                      elev_field=args.elev_field, out=args.out, interval_m=args.interval_m,
                      cell_m=args.cell_m, overwrite=args.overwrite)


def report(results, out, stream=sys.stdout) -> None:
    s = results.summary
    pl = s["plane"]
    src = s["picks_by_source"]
    print(f"picks: {s['n_picks']} (dem {src['dem']}, contours {src['contours']})", file=stream)
    print(f"best-fit plane: dip {pl['dip']:.2f} deg toward {pl['dip_direction']:.1f} deg "
          f"(strike {pl['strike_rhr']:.1f} deg RHR), RMS residual {pl['rms_m']:.2f} m", file=stream)
    tm = s["trace_misfit_m"]
    if tm.get("median") is not None:
        print(f"trace misfit: median {tm['median']:.1f} m, 90th percentile {tm['p90']:.1f} m "
              f"over {tm['n_vertices']} contact vertices", file=stream)
    else:
        print(f"trace misfit: not computed ({tm.get('note', 'no trace')})", file=stream)
    print(f"results written to {out}/", file=stream)
    print(CAUTION, file=stream)


def main(args) -> int:
    from strikeline.pipeline import run

    opts = options_from_args(args)
    results = run(opts, log=lambda m: print(m, file=sys.stderr))
    report(results, opts.out)
    return 0
