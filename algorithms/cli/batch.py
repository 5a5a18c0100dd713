"""``strikeline batch``: a series of sheets from one job file (TOML) into one folder."""
from __future__ import annotations

import argparse
import sys

from strikeline import CAUTION
from strikeline.cli.options import EPILOG

HELP = ("run a series of sheets from a job file (TOML: [defaults] and one [[sheet]] table per sheet) into one "
        "folder, with an index of every sheet and the mismatch along shared edges")


def _workers(text: str) -> int:
    try:
        n = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number, got {text!r}") from None
    if n < 1:
        raise argparse.ArgumentTypeError(f"expected at least 1, got {n}")
    return n


def add_parser(sub) -> argparse.ArgumentParser:
    p = sub.add_parser("batch", help=HELP, description=HELP + ". Exit status: 0 every sheet ok (or unchanged), "
                       "1 some sheets failed (batch.json says why), 2 a bad job file or output folder (nothing "
                       "run).", epilog=EPILOG)
    p.add_argument("job", metavar="JOB.toml", help="the job file; relative paths in it are relative to its folder")
    p.add_argument("--out", required=True, metavar="DIR",
                   help="the batch folder: one folder per sheet, index.gpkg, index.html, batch.json; a rerun into "
                        "it redoes only the sheets whose inputs or options changed")
    where = p.add_mutually_exclusive_group()
    where.add_argument("--workers", type=_workers, default=1, metavar="N",
                       help="sheets run at once in local processes (default 1: one after the other)")
    where.add_argument("--scheduler", metavar="ADDRESS",
                       help="run the sheets on the dask.distributed cluster whose scheduler listens at ADDRESS "
                            "(e.g. tcp://host:8786; the dask extra); every worker must see the job's paths")
    p.add_argument("--force", action="store_true", help="redo every sheet, even those unchanged since the last run")
    p.add_argument("--quiet", action="store_true", help="print nothing but errors and the final line")
    p.set_defaults(handler=main)
    return p


def main(args) -> int:
    from strikeline.batch.series import run_batch
    from strikeline.pipeline.command import current_command_line

    quiet = args.quiet

    def say(message):
        if not quiet:
            print(message, file=sys.stderr)

    def done(name, status, text):
        if not quiet or status == "failed":
            print(f"sheet {name}: {status} ({text})", file=sys.stderr if status == "failed" else sys.stdout,
                  flush=True)

    result = run_batch(args.job, args.out, argv=current_command_line()[1:], workers=args.workers,
                       scheduler=args.scheduler, force=args.force, log=say, done=done)
    r = result.record
    print(f"batch: {r['n_ok']} ok, {r['n_unchanged']} unchanged, {r['n_failed']} failed; "
          f"{len(r['edges'])} shared edge(s) compared; written to {args.out}/", flush=True)
    if not quiet:
        print(CAUTION)
    return 1 if result.n_failed else 0
