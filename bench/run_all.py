"""Run the benchmark suite (``make bench``): every script in turn, then one table of its results.

Each script runs in its own process (so one's memory does not weigh on the next's figures) with
its output shown as it comes; every line it prints that starts with ``result:`` (see
``bench/_measure.py``) becomes a row of the table printed at the end, under the machine, the
commit and the load average before and after. A script that fails is a row saying so; the
others still run.

Any other ``bench_*.py`` in this folder runs after the named ones, with no arguments.
``--quick`` runs every script at its smallest size (a check that the suite works, not figures
to quote); ``--huge`` adds the 30,000 x 30,000 sheet to ``bench_sheet.py``; ``--only`` picks
scripts by name.

Run:  .venv/bin/python bench/run_all.py [--quick] [--huge] [--only sheet,run] [--log FILE]
"""
from __future__ import annotations

import argparse
import os
import subprocess
import sys
import time
from pathlib import Path

from _measure import RESULT, load_line, machine_line

HERE = Path(__file__).resolve().parent

#: (script, arguments for the figures, arguments for --quick: its smallest size)
SUITE = (
    ("bench_picks.py", [], ["--scale", "0.02", "--repeat", "1"]),
    ("bench_dipgrids.py", [], ["--size", "300", "--repeat", "1"]),
    ("bench_attitudes.py", [], ["--repeat", "1"]),
    ("bench_thinning.py", [], []),
    ("bench_local_coverage.py", ["--replicates", "5"], ["--replicates", "1"]),
    ("bench_surfaces.py", [], ["--picks", "3000", "--cells", "200", "--max-points", "300"]),
    ("bench_run.py", [], ["--cells", "300"]),
    ("bench_sheet.py", [], ["--sizes", "300,400"]),
    ("bench_contacts.py", [], ["--cells", "600", "--contacts", "20"]),
    ("bench_batch.py", [], ["--cells", "150", "--sheets-per-side", "2"]),
    ("bench_recovery.py", [], ["--dems", "volcano", "--cases", "plane", "--models", "plane"]),
    ("bench_units.py", [], ["--dems", "volcano", "--models", "plane"]),
)



#: Smallest sizes of other scripts of this folder, where known (the rest run with no arguments).
OTHER_QUICK = {"bench_writes.py": ["--cells", "300"], "bench_report.py": ["--sizes", "300"]}


def suite() -> list:
    """:data:`SUITE`, then any other ``bench_*.py`` of this folder (figures: no arguments)."""
    named = {s for s, _, _ in SUITE}
    extra = sorted(p.name for p in HERE.glob("bench_*.py") if p.name not in named)
    return list(SUITE) + [(s, [], OTHER_QUICK.get(s, [])) for s in extra]


def run_script(script: str, args: list, log) -> tuple[list, int, float]:
    """Run one script, echo its output, return its result lines, exit status and seconds."""
    print(f"\n=== {script} {' '.join(args)}", flush=True)
    t0 = time.perf_counter()
    proc = subprocess.Popen([sys.executable, str(HERE / script), *args], stdout=subprocess.PIPE,
                            stderr=subprocess.STDOUT, text=True, bufsize=1, cwd=HERE.parent)
    results = []
    for line in proc.stdout:
        sys.stdout.write(line)
        sys.stdout.flush()
        if log is not None:
            log.write(line)
        if line.startswith(RESULT):
            results.append(line[len(RESULT):].strip())
    rc = proc.wait()
    return results, rc, time.perf_counter() - t0


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="every script at its smallest size")
    ap.add_argument("--huge", action="store_true", help="also the 30,000^2 sheet (bench_sheet.py --huge)")
    ap.add_argument("--only", default="", help="comma-separated script names (bench_ and .py may be left out)")
    ap.add_argument("--log", help="also write every script's output to this file")
    args = ap.parse_args(argv)
    only = {o.strip().removeprefix("bench_").removesuffix(".py") for o in args.only.split(",") if o.strip()}
    scripts = suite()
    chosen = [(s, q if args.quick else a) for s, a, q in scripts
              if not only or s.removeprefix("bench_").removesuffix(".py") in only]
    unknown = only - {s.removeprefix("bench_").removesuffix(".py") for s, _, _ in scripts}
    if unknown:
        raise SystemExit(f"run_all: no bench script named {', '.join(sorted(unknown))}; "
                         f"the suite: {', '.join(s for s, _, _ in scripts)}")
    log = open(args.log, "w") if args.log else None
    try:
        head = [machine_line()]
        rows, t_all = [], time.perf_counter()
        for script, sargs in chosen:
            sargs = list(sargs) + (["--huge"] if args.huge and script == "bench_sheet.py" else [])
            results, rc, secs = run_script(script, sargs, log)
            for r in results:
                rows.append((script, r))
            if rc != 0 or not results:
                rows.append((script, f"script exit status {rc} after {secs:.0f} s"
                             + ("" if results else "; printed no result line")))
        tail = load_line("after the suite")
        print(f"\n=== results ({'quick sizes: not figures to quote; ' if args.quick else ''}"
              f"suite took {time.perf_counter() - t_all:.0f} s)")
        print(head[0])
        width = max((len(s) for s, _ in rows), default=10)
        for script, r in rows:
            print(f"  {script:<{width}}  {r}")
        print(tail)
        if log is not None:
            log.write("\n".join([*head, *(f"{s}  {r}" for s, r in rows), tail]) + "\n")
    finally:
        if log is not None:
            log.close()
    return 0


if __name__ == "__main__":
    os.environ.setdefault("PYTHONUNBUFFERED", "1")
    raise SystemExit(main())
