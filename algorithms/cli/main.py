"""The ``strikeline`` command: parses arguments, runs a subcommand, turns errors into one line."""
from __future__ import annotations

import os
import signal
import sys

from strikeline import CAUTION, __version__
from strikeline.cli import attitude, demo, run, thickness
from strikeline.cli.options import OneLineParser
from strikeline.errors import CancelledError, StrikelineError, one_line

SUBCOMMANDS = (run, demo, attitude, thickness)


def build_parser() -> OneLineParser:
    p = OneLineParser(
        prog="strikeline",
        description="3D geometry of mapped geological contacts from maps and topography.",
        epilog=CAUTION,
    )
    p.add_argument("--version", action="version", version=f"strikeline {__version__}")
    sub = p.add_subparsers(dest="command", metavar="COMMAND", parser_class=OneLineParser)
    for module in SUBCOMMANDS:
        module.add_parser(sub)
    return p


def main(argv=None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "handler", None):
        parser.print_help(sys.stderr)
        return 2
    from strikeline.io.interrupt import signals_as_exceptions
    from strikeline.pipeline.command import command_line  # recorded in summary.json

    try:
        # SIGTERM (schedulers, `timeout`) and SIGINT (Ctrl-C) become exceptions for the run, so
        # the output writers remove what they started; the handlers are restored after it
        with signals_as_exceptions(), command_line(sys.argv[1:] if argv is None else argv):
            return int(args.handler(args) or 0)
    except CancelledError as exc:
        print(f"error: {one_line(exc)}", file=sys.stderr)
        return 130
    except StrikelineError as exc:
        print(f"error: {one_line(exc)}", file=sys.stderr)
        return 2
    except BrokenPipeError:
        # the reader went away (e.g. `| head`): not an error of ours; silence the final flush
        try:
            sys.stdout = open(os.devnull, "w")
        except OSError:
            pass
        return 0
    except KeyboardInterrupt as exc:
        # 128 + the signal's number: the shell's convention for a process stopped by a signal
        status = getattr(exc, "exit_status", 128 + signal.SIGINT)
        name = signal.Signals(status - 128).name
        print(f"error: stopped by {name}; no partial output was left", file=sys.stderr)
        return status
    except Exception as exc:  # a bug, not bad input: still one line, unless debugging
        if os.environ.get("STRIKELINE_DEBUG"):
            raise
        print(f"error: internal failure ({type(exc).__name__}: {one_line(exc)}); this is a bug in "
              "strikeline - please report it with the command line (set STRIKELINE_DEBUG=1 for details)",
              file=sys.stderr)
        return 3


if __name__ == "__main__":
    sys.exit(main())
