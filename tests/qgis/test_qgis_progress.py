"""The whole-chain tool tells QGIS's feedback what it is doing: step names, progress, timings.

Reference: QGIS API, QgsProcessingFeedback - setProgressText(text) names the current step,
setProgress(percent) takes 0-100, pushInfo/pushWarning write the log, isCanceled() is polled by
the algorithm (QGIS 3 API documentation, qgis.core.QgsProcessingFeedback / QgsFeedback).
"""
from __future__ import annotations

import re

import pytest
from qgis.core import QgsProcessingException, QgsProcessingFeedback

from strikeline.pipeline.progress import RUN_STEPS

TMP = "TEMPORARY_OUTPUT"
QUICK_TOOL = {"MODEL": 1, "RESAMPLES": 100}  # the tool's values of conftest.QUICK: plane, 100 resamples
#: The log line of a step's cost, as the adapter writes it.
TIMING = re.compile(r"step (\d+)/(\d+) (.+): (\d+\.\d+) s, CPU (\d+\.\d+) s, peak memory (\d+) MiB$")


class Recording(QgsProcessingFeedback):
    """A feedback that keeps what the tool told it, in order; cancels once ``cancel_at`` is shown."""

    def __init__(self, cancel_at: str | None = None):
        super().__init__()
        self.texts, self.percents, self.infos, self.warnings = [], [], [], []
        self.cancel_at = cancel_at

    def setProgressText(self, text):  # noqa: N802 - QGIS's name
        self.texts.append(text)
        if self.cancel_at is not None and text.startswith(self.cancel_at):
            self.cancel()
        super().setProgressText(text)

    def setProgress(self, percent):  # noqa: N802
        self.percents.append(percent)
        super().setProgress(percent)

    def pushInfo(self, text):  # noqa: N802
        self.infos.append(text)

    def pushWarning(self, text):  # noqa: N802
        self.warnings.append(text)


def _chain(run, sheet, feedback):
    return run("modelcontact", {"CONTACTS": sheet["contacts_uri"], "DEM": sheet["dem"], "INTERVAL": 50.0,
                                **QUICK_TOOL, "picks": TMP, "structure_contours": TMP, "surface": TMP, "dip": TMP,
                                "dip_direction": TMP},
               feedback=feedback)


def test_the_feedback_names_every_step_in_order_with_its_timing(run, sheet):
    fb = Recording()
    res = _chain(run, sheet, fb)
    assert res["n_picks"] > 0
    n = len(RUN_STEPS)
    assert fb.texts == [f"{name} ({k}/{n})" for k, name in enumerate(RUN_STEPS, 1)]
    # percent done: within 0-100, never going back, 100 at the end
    assert fb.percents and all(0 <= p <= 100 for p in fb.percents)
    assert fb.percents == sorted(fb.percents) and fb.percents[-1] == pytest.approx(100.0)
    timings = [m.groups() for m in map(TIMING.match, fb.infos) if m]
    assert [(int(k), int(t), name) for k, t, name, *_ in timings] == [(k, n, s) for k, s in enumerate(RUN_STEPS, 1)]
    for *_, wall, cpu, peak in timings:
        assert float(wall) >= 0 and float(cpu) >= 0 and int(peak) > 0
    # the library's messages reach the log as before (the model choice is said on every run)
    assert any(line.startswith("surface model: ") for line in fb.infos)


def test_cancel_during_a_step_stops_before_the_next(run, sheet):
    fb = Recording(cancel_at="grids")
    with pytest.raises(QgsProcessingException, match="cancelled"):
        _chain(run, sheet, fb)
    shown = [t.split(" (")[0] for t in fb.texts]
    assert shown == list(RUN_STEPS[:RUN_STEPS.index("grids") + 1])
