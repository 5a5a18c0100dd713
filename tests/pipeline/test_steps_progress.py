"""Named steps of a run (strikeline.pipeline.progress): order, timings, cancellation, the older
``progress(fraction)`` callable, and a sheet's name on every event (for a series of sheets).

No test here measures or asserts a duration (timings live in bench/); the peak memory a step reports
is checked against ``resource.getrusage`` (getrusage(2): ru_maxrss in KiB on Linux).
"""
from __future__ import annotations

import json
import resource

import pytest

from helpers import DEMO
from strikeline.cli.progress import JsonLogReporter
from strikeline.errors import CancelledError
from strikeline.pipeline.progress import COMPUTE_STEPS, RUN_STEPS, Reporter, Reporters, RunProgress, level_of


class Recorder(Reporter):
    def __init__(self):
        self.events = []

    def start(self, step):
        self.events.append(("start", step))

    def advance(self, step, fraction):
        self.events.append(("advance", step.name, fraction))

    def finish(self, step, timing):
        self.events.append(("finish", step, timing))

    def message(self, text, *, level="info", sheet=None):
        self.events.append(("message", text, level, sheet))


def test_a_finished_step_reaches_the_reporter_with_its_costs():
    # Only the record is checked here (which step, in which order, with which fields); how long a
    # step takes is measured by the bench scripts (bench/bench_contacts.py reads --log-json's steps).
    rec = Recorder()
    t = RunProgress(rec, steps=("a", "b"))
    t.step("a")
    timing = t.finish()
    assert [e[0] for e in rec.events] == ["start", "finish"] and t.done[0][0].name == "a"
    assert rec.events[1][1].name == "a" and rec.events[1][2] is timing
    assert {"wall_s", "cpu_s", "peak_rss_mib"} <= set(vars(timing))
    # Source: getrusage(2) - ru_maxrss is the process's peak resident set, in KiB on Linux
    assert 0 < timing.peak_rss_mib <= resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def test_steps_only_go_forward_and_the_old_fraction_reaches_one():
    seen = []
    t = RunProgress(steps=("a", "b", "c", "d"), progress=seen.append)
    t.step("a")
    t.advance(0.5)
    t.step("c")  # a step the run does not need may be left out
    with pytest.raises(ValueError, match="not after"):
        t.step("b")
    with pytest.raises(ValueError, match="not after"):
        t.step("z")
    t.step("d")
    t.finish()
    assert seen == sorted(seen) and seen[0] == 0.0 and seen[-1] == 1.0
    assert 0.125 in seen  # half of the first of four steps


def test_a_cancel_stops_at_the_next_step():
    asked = []
    t = RunProgress(steps=("a", "b"), is_cancelled=lambda: bool(asked))
    t.step("a")
    asked.append(True)
    with pytest.raises(CancelledError, match="nothing was written"):
        t.step("b")


def test_log_lines_get_their_level_and_reach_the_log_callable_too():
    rec, lines = Recorder(), []
    t = RunProgress(rec, log=lines.append, sheet="north")
    t.log("surface model: plane chosen")
    t.log("warning: few picks")
    assert lines == ["surface model: plane chosen", "warning: few picks"]
    assert rec.events == [("message", "surface model: plane chosen", "info", "north"),
                          ("message", "warning: few picks", "warning", "north")]
    assert level_of("  Warning: x") == "warning" and level_of("a warning: x") == "info"


def test_a_sheet_name_is_on_every_event_of_the_log(tmp_path):
    path = tmp_path / "series.jsonl"
    log, rec = JsonLogReporter(str(path), command=["strikeline", "batch"]), Recorder()
    t = RunProgress(Reporters(log, rec), steps=("a",), sheet="north")
    t.step("a")
    t.log("warning: edge")
    t.finish()
    log.close(status="ok")
    events = [json.loads(line) for line in path.read_text().splitlines()]
    assert [e["event"] for e in events] == ["start", "step_start", "message", "step_end", "end"]
    assert all(e["sheet"] == "north" for e in events[1:4])
    assert rec.events[0][1].label == "north: a"


def test_compute_alone_still_takes_a_fraction_and_reports_its_steps():
    from strikeline.pipeline import RunOptions, compute, load_inputs

    opts = RunOptions(contacts=str(DEMO / "contacts.gpkg"), out="/nonexistent-out", dem=str(DEMO / "dem.tif"),
                      pick_spacing_m=150.0, resamples=20, model="plane")
    inputs = load_inputs(opts)
    seen = []
    compute(inputs, opts, progress=seen.append)
    assert seen == sorted(seen) and seen[-1] == 1.0
    # with a tracker of the whole run: the compute steps, in order, between reading and writing
    rec = Recorder()
    t = RunProgress(rec, steps=RUN_STEPS)
    t.step(RUN_STEPS[0])
    compute(inputs, opts, tracker=t, log=t.log)
    assert [e[1].name for e in rec.events if e[0] == "start"] == [RUN_STEPS[0], *COMPUTE_STEPS]
    assert t.current.name == COMPUTE_STEPS[-1]  # the run ends the last step itself, after writing
