"""The whole of ``strikeline run``: load, compute, write.
"""
from __future__ import annotations



from strikeline.pipeline.compute import Results, compute
from strikeline.pipeline.inputs import load_inputs
from strikeline.pipeline.options import Log, RunOptions, _quiet
from strikeline.pipeline.outputs import write_results


def run(opts: RunOptions, *, log: Log = _quiet, progress=None, is_cancelled=None) -> Results:
    """Load, compute and write: the whole of ``strikeline run``."""
    inputs = load_inputs(opts, log=log)
    results = compute(inputs, opts, log=log, progress=progress, is_cancelled=is_cancelled)
    write_results(results, opts.out, overwrite=opts.overwrite)
    return results
