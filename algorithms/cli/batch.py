"""``strikeline batch``: a series of sheets from one job file (TOML) into one folder."""
from __future__ import annotations

import sys

from strikeline import CAUTION
from strikeline.cli.options import EPILOG, add_options

HELP = ("run a series of sheets from a job file (TOML: [defaults] and one [[sheet]] table per sheet) into one "
        "folder, with an index of every sheet and the mismatch along shared edges")


def add_parser(sub):
    p = sub.add_parser("batch", help=HELP, description=HELP + ". A sheet whose input files are missing or "
                       "unreadable fails alone and the others run. Exit status: 0 every sheet ok (or unchanged), "
                       "1 some sheets failed (batch.json says why), 2 a bad job file (its TOML, keys or option "
                       "values) or output folder (nothing run).", epilog=EPILOG)
    p.add_argument("job", metavar="JOB.toml", help="the job file; relative paths in it are relative to its folder")
    add_options(p, "out", command="batch")
    add_options(p.add_mutually_exclusive_group(), "workers", "scheduler", command="batch")
    add_options(p, "force", "quiet", command="batch")
    p.set_defaults(handler=main)
    return p


def main(args) -> int:
    from strikeline.batch.series import run_batch
    from strikeline.pipeline.command import current_command_line

    quiet = args.quiet

    def say(message):
        if not quiet:
            print(message, file=sys.stderr)

    def done(name, status, text, n_warnings=0):
        if not quiet or status == "failed":
            also = f" with {n_warnings} warning{'s' if n_warnings != 1 else ''}" if n_warnings else ""
            print(f"sheet {name}: {status}{also} ({text})", file=sys.stderr if status == "failed" else sys.stdout,
                  flush=True)

    result = run_batch(args.job, args.out, argv=current_command_line()[1:], workers=args.workers,
                       scheduler=args.scheduler, force=args.force, log=say, done=done)
    r = result.record
    print(f"batch: {r['n_ok']} ok, {r['n_unchanged']} unchanged, {r['n_failed']} failed; "
          f"{len(r['edges'])} shared edge(s) compared; written to {args.out}/", flush=True)
    if not quiet:
        print(CAUTION)
    return 1 if result.n_failed else 0
