"""Run the benchmark suite (``make bench``): every script in turn, then the README's table rows.

Each script runs in its own process (so one's memory does not weigh on the next's figures) with
its output shown as it comes; every line it prints that starts with ``result:`` (see
``bench/_measure.py``) becomes a row of the table printed at the end, in the README's columns
(markdown: workload | strikeline: wall; CPU/wall; peak | reference in the same run | ratio |
target), under the machine it ran on: CPU model, cores, memory, the versions of Python, numpy,
GDAL, scipy and shapely, the commit, the date and the load average at the start and at the end.
A script that fails is a row saying so; the others still run.

Sizes. Without options every workload runs at the size :data:`SUITE` gives it, chosen so that
the suite takes about 20 minutes on a quiet machine of two cores (a rough estimate for each script
is in :data:`SUITE`: the CPU seconds of earlier runs under load where the README has them, a guess
from the workload's size where not; each script's own time is printed after the table): the whole-sheet series at 1,000^2 and 4,000^2 cells, the 200-contact sheet at 5,000^2, the
16-sheet batch of 500^2 sheets. ``--full`` adds the 12,000^2 sheet (about 15 minutes more);
``--huge`` the 30,000^2 sheet. ``--quick`` runs every script at its smallest size (a check that
the suite works, not figures to quote); ``--only`` picks scripts by name. Any other
``bench_*.py`` of this folder runs after the named ones, with no arguments.

Run:  .venv/bin/python bench/run_all.py [--quick | --full] [--huge] [--only sheet,run] [--log FILE]
"""
from __future__ import annotations

import argparse
import os
import subprocess
import sys
import time
from datetime import datetime, timezone
from pathlib import Path

from _measure import RESULT, load_line, machine, machine_line

HERE = Path(__file__).resolve().parent

#: (script, arguments for the figures, arguments for --quick: its smallest size, rough estimate of
#: its seconds on a quiet 2-core machine at the figures' size)
SUITE = (
    ("bench_picks.py", ["--repeat", "2"], ["--scale", "0.02", "--repeat", "1"], 60),
    ("bench_dipgrids.py", [], ["--size", "300", "--repeat", "1"], 30),
    ("bench_attitudes.py", [], ["--repeat", "1"], 25),
    ("bench_thinning.py", [], [], 5),
    ("bench_local_coverage.py", ["--replicates", "5"], ["--replicates", "1"], 60),
    ("bench_surfaces.py", [], ["--picks", "3000", "--cells", "200", "--max-points", "300"], 70),
    ("bench_fit_workers.py", [], ["--cells", "500", "--repeat", "1"], 60),
    ("bench_uncertainty.py", [], ["--cells", "300"], 30),
    ("bench_read.py", [], ["--cells", "500"], 10),
    ("bench_writes.py", [], ["--cells", "300"], 25),
    ("bench_run.py", [], ["--cells", "300"], 240),
    ("bench_sheet.py", ["--sizes", "1000,4000"], ["--sizes", "300,400"], 120),
    ("bench_contacts.py", [], ["--cells", "600", "--contacts", "20"], 200),
    ("bench_batch.py", [], ["--cells", "150", "--sheets-per-side", "2"], 200),
    ("bench_report.py", [], ["--sizes", "300"], 60),
    ("bench_recovery.py", [], ["--dems", "volcano", "--cases", "plane", "--models", "plane"], 120),
    ("bench_units.py", [], ["--dems", "volcano", "--models", "plane"], 60),
)

#: Extra arguments of ``--full``: the issue's whole-sheet sizes.
FULL = {"bench_sheet.py": ["--sizes", "1000,4000,12000"]}


def suite() -> list:
    """:data:`SUITE` as (script, figures' arguments, quick arguments, estimate), then any other
    ``bench_*.py`` of this folder (no arguments, no estimate)."""
    named = {s for s, *_ in SUITE}
    extra = sorted(p.name for p in HERE.glob("bench_*.py") if p.name not in named)
    return list(SUITE) + [(s, [], [], None) for s in extra]


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


def _cell(text: str) -> str:
    return text.replace("|", "\\|").strip()


def table_row(result: str) -> str:
    """One README table row (markdown) from a ``result:`` line's text (without ``result:``).

    ``workload | time T s | peak P MiB | cpu/wall C | ratio R x REFERENCE | notes`` becomes
    ``| workload | T s; C; P MiB (notes) | REFERENCE | R × | target |``, the target being the
    notes that name one; a workload that did not run (``refused: ...``) keeps its reason."""
    parts = [p.strip() for p in result.split(" | ")]
    workload, rest = parts[0], parts[1:]
    fig, ref, ratio, notes, target = {}, "—", "—", [], []
    for p in rest:
        key = p.split(" ", 1)[0]
        if key in ("time", "peak", "cpu/wall") and key not in fig:
            fig[key] = p.split(" ", 1)[1]
        elif key == "ratio" and " x " in p:
            value, ref = p[len("ratio "):].split(" x ", 1)
            ratio = f"{value} ×"
        elif "target" in p:
            target.append(p)
        else:
            notes.append(p)
    if fig:
        figures = "; ".join(v for v in (fig.get("time"), fig.get("cpu/wall"), fig.get("peak")) if v)
        if notes:
            figures += f" ({'; '.join(notes)})"
    else:
        figures = "; ".join(notes) or "—"
    return "| " + " | ".join(_cell(c) for c in (workload, figures, ref, ratio, "; ".join(target) or "—")) + " |"


def machine_facts(info: dict, *, start_load, end_load, started: datetime, ended: datetime, seconds: float,
                  quick: bool) -> list:
    """Markdown lines naming the machine, the software and the load the figures came with."""
    def load(v):
        return ", ".join(f"{x:.2f}" for x in v)
    return [
        f"Figures: {info['cpus']} CPUs ({info['cpu_model']}), {info['ram_gib']} GiB RAM; Python {info['python']}, "
        f"numpy {info.get('numpy', '-')}, GDAL {info.get('gdal', '-')}, scipy {info.get('scipy', '-')}, "
        f"shapely {info.get('shapely', '-')}; commit {info['commit']}; "
        f"{started:%d %B %Y}, {started:%H:%M}-{ended:%H:%M} UTC ({seconds / 60:.0f} min"
        + ("; `--quick` sizes: a check of the suite, not figures to quote" if quick else "") + "). "
        f"Load average (1/5/15 min): {load(start_load)} at the start, {load(end_load)} at the end.",
    ]


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    size = ap.add_mutually_exclusive_group()
    size.add_argument("--quick", action="store_true", help="every script at its smallest size")
    size.add_argument("--full", action="store_true", help="also the 12,000^2 sheet (about 15 min more)")
    ap.add_argument("--huge", action="store_true", help="also the 30,000^2 sheet (bench_sheet.py --huge)")
    ap.add_argument("--only", default="", help="comma-separated script names (bench_ and .py may be left out)")
    ap.add_argument("--log", help="also write every script's output to this file")
    args = ap.parse_args(argv)
    only = {o.strip().removeprefix("bench_").removesuffix(".py") for o in args.only.split(",") if o.strip()}
    scripts = suite()
    unknown = only - {s.removeprefix("bench_").removesuffix(".py") for s, *_ in scripts}
    if unknown:
        raise SystemExit(f"run_all: no bench script named {', '.join(sorted(unknown))}; "
                         f"the suite: {', '.join(s for s, *_ in scripts)}")
    chosen = []
    for script, figures, quick, estimate in scripts:
        if only and script.removeprefix("bench_").removesuffix(".py") not in only:
            continue
        sargs = list(quick if args.quick else FULL.get(script, figures) if args.full else figures)
        if args.huge and script == "bench_sheet.py":
            sargs.append("--huge")
        chosen.append((script, sargs, estimate))
    if not args.quick:
        known = sum(e for _, _, e in chosen if e)
        print(f"run_all: {len(chosen)} script(s); about {known / 60:.0f} min on a quiet 2-core machine"
              + (" plus the larger sheets" if args.full or args.huge else ""), flush=True)
    log = open(args.log, "w") if args.log else None
    try:
        info, started = machine(), datetime.now(timezone.utc)
        head = machine_line()
        rows, t_all = [], time.perf_counter()
        for script, sargs, _ in chosen:
            results, rc, secs = run_script(script, sargs, log)
            rows += [(script, r, secs) for r in results]
            if rc != 0 or not results:
                rows.append((script, f"{script} | failed: exit status {rc} after {secs:.0f} s"
                             + ("" if results else "; printed no result line"), secs))
        seconds = time.perf_counter() - t_all
        tail = load_line("after the suite")
        end_load = os.getloadavg()
        lines = [f"\n=== results ({'quick sizes: not figures to quote; ' if args.quick else ''}"
                 f"suite took {seconds:.0f} s)", head, tail, "",
                 *machine_facts(info, start_load=info["load"], end_load=end_load, started=started,
                                ended=datetime.now(timezone.utc), seconds=seconds, quick=args.quick), "",
                 "| workload | strikeline: wall; CPU/wall; peak | reference in the same run | ratio | target |",
                 "|---|---|---|---|---|",
                 *(table_row(r) for _, r, _ in rows), "",
                 "Seconds per script: " + ", ".join(f"{s} {t:.0f}" for s, t in
                                                   dict((s, t) for s, _, t in rows).items())]
        print("\n".join(lines), flush=True)
        if log is not None:
            log.write("\n".join(lines) + "\n")
    finally:
        if log is not None:
            log.close()
    return 0


if __name__ == "__main__":
    os.environ.setdefault("PYTHONUNBUFFERED", "1")
    raise SystemExit(main())
