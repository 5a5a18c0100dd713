"""The whole of ``strikeline run``: load, compute, write.
"""
from __future__ import annotations

from strikeline.io.files import output_folder
from strikeline.pipeline.compute import Results, compute
from strikeline.pipeline.inputs import load_inputs
from strikeline.pipeline.options import Log, RunOptions, _quiet, check_options, input_paths
from strikeline.pipeline.outputs import _write_all


def run(opts: RunOptions, *, log: Log = _quiet, progress=None, is_cancelled=None) -> Results:
    """Load, compute and write: the whole of ``strikeline run``.

    The options and ``--out`` are checked first; then the output folder is locked (a second run
    on it stops at once) and a temporary sibling reserved for the results, which replaces
    ``opts.out`` only when every file is written and checked
    (:func:`strikeline.io.files.output_folder`). An error or an interruption at any point leaves
    ``opts.out`` as it was.
    """
    check_options(opts)
    with output_folder(opts.out, overwrite=opts.overwrite, inputs=input_paths(opts), log=log) as part:
        inputs = load_inputs(opts, log=log)
        results = compute(inputs, opts, log=log, progress=progress, is_cancelled=is_cancelled)
        _write_all(results, part, is_cancelled=is_cancelled)
    return results
