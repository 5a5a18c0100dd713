"""The whole of ``strikeline run``: load, compute, write.
"""
from __future__ import annotations

from strikeline.io.files import output_folder
from strikeline.pipeline.compute import Results, compute
from strikeline.pipeline.inputs import load_inputs
from strikeline.pipeline.options import Log, RunOptions, _quiet, check_options, input_paths
from strikeline.pipeline.outputs import _write_all
from strikeline.pipeline.progress import READING, RUN_STEPS, WRITING, Reporter, RunProgress


def run(opts: RunOptions, *, log: Log = _quiet, progress=None, is_cancelled=None,
        reporter: Reporter | None = None, sheet: str | None = None, names: dict | None = None) -> Results:
    """Load, compute and write: the whole of ``strikeline run``.

    The options and ``--out`` are checked first; then the output folder is locked (a second run
    on it stops at once) and a temporary sibling reserved for the results, which replaces
    ``opts.out`` only when every file is written and checked
    (:func:`strikeline.io.files.output_folder`). An error or an interruption at any point leaves
    ``opts.out`` as it was.

    The named steps of :data:`strikeline.pipeline.progress.RUN_STEPS` (timings, messages) go to
    ``reporter``, each event marked with ``sheet`` when given; every log line also goes to ``log``,
    and ``progress(fraction)`` hears the whole run's share done. ``names`` says how refusals and
    warnings name the options (default the command line's flags; a job file's keys in a batch).
    """
    tracker = RunProgress(reporter, steps=RUN_STEPS, progress=progress, is_cancelled=is_cancelled, sheet=sheet,
                          log=log)
    log = tracker.log
    check_options(opts, names=names)
    with output_folder(opts.out, overwrite=opts.overwrite, inputs=input_paths(opts), log=log) as part:
        tracker.step(READING)
        inputs = load_inputs(opts, log=log)
        results = compute(inputs, opts, log=log, tracker=tracker, folder=part, names=names)
        tracker.step(WRITING)
        _write_all(results, part, is_cancelled=is_cancelled, report=not opts.no_report, log=log)
    tracker.finish()
    return results
