"""The ``strikeline`` command: parses arguments, runs a subcommand, turns errors into one line."""
from __future__ import annotations

import os
import signal
import sys

from strikeline import CAUTION, __version__
from strikeline.cli import attitude, batch, demo, run, thickness
from strikeline.cli.options import OneLineParser
from strikeline.errors import CancelledError, StrikelineError, one_line

SUBCOMMANDS = (run, demo, attitude, thickness, batch)


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
    from strikeline.cli.progress import command_reporter
    from strikeline.io.interrupt import signals_as_exceptions
    from strikeline.pipeline.command import command_line, current_command_line  # recorded in summary.json

    reporter = None
    status, error = 0, None
    try:
        # SIGTERM (schedulers, `timeout`) and SIGINT (Ctrl-C) become exceptions for the run, so
        # the output writers remove what they started; the handlers are restored after it
        with signals_as_exceptions(), command_line(sys.argv[1:] if argv is None else argv):
            # the progress bar on a terminal and --log-json FILE (checked before any work)
            args.reporter = reporter = command_reporter(args, command=current_command_line())
            status = int(args.handler(args) or 0)
    except CancelledError as exc:
        status, error = 130, one_line(exc)
    except StrikelineError as exc:
        status, error = 2, one_line(exc)
    except BrokenPipeError:
        # the reader went away (e.g. `| head`): not an error of ours; silence the final flush
        try:
            sys.stdout = open(os.devnull, "w")
        except OSError:
            pass
        status = 0
    except KeyboardInterrupt as exc:
        # 128 + the signal's number: the shell's convention for a process stopped by a signal
        status = getattr(exc, "exit_status", 128 + signal.SIGINT)
        name = signal.Signals(status - 128).name
        error = f"stopped by {name}; no partial output was left"
    except Exception as exc:  # a bug, not bad input: still one line, unless debugging
        if reporter is not None:
            reporter.end(3, f"internal failure ({type(exc).__name__}: {one_line(exc)})")
            reporter = None
        if os.environ.get("STRIKELINE_DEBUG"):
            raise
        status, error = 3, (f"internal failure ({type(exc).__name__}: {one_line(exc)}); this is a bug in "
                            "strikeline - please report it with the command line (set STRIKELINE_DEBUG=1 for details)")
    finally:
        if reporter is not None:  # the bar is cleared before the error line; the log gets the status
            reporter.end(status, error)
    if error is not None:
        print(f"error: {error}", file=sys.stderr)
    return status


if __name__ == "__main__":
    sys.exit(main())
