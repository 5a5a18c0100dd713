"""The run's answer in plain sentences (strikeline.report.sentences): the caution first, then one
sentence per result the summary holds, with the summary's own numbers; the report page lists the
same sentences in the same order.

# Source: the summary's numbers are the reference (the sentences add no number of their own);
# azimuths wrap at 360 degrees (common practice for compass bearings); the caution is
# strikeline.CAUTION, which the project's rules require first in every summary.
"""
from __future__ import annotations

import html
import json
import re

from strikeline import CAUTION
from strikeline import vocabulary as V
from strikeline.report.sentences import answer_sentences, plain_answer, plane_words

PLANE = {"dip_deg": 12.0, "dip_ci95_deg": 0.5, "dip_direction_deg": 359.0, "dip_direction_ci95_deg": 2.5,
         "dip_direction_true_deg": 358.2, "strike_rhr_deg": 269.0, "rms_m": 0.84, "n_picks": 120,
         "quality": "good"}


def _summary(**more):
    return {"caution": CAUTION, "plane": PLANE, "n_picks": 120, "picks_by_source": {"dem": 100, "contours": 20},
            **more}


def test_the_caution_comes_first_then_the_answer():
    s = _summary()
    lines = plain_answer(s)
    assert lines[0] == CAUTION and lines[1:] == answer_sentences(s)
    assert plain_answer({k: v for k, v in s.items() if k != "caution"})[0] == CAUTION


def test_a_dip_direction_near_north_wraps_its_limits():
    # 359.0 +- 2.5 deg: 356.5 to 1.5 deg (bearings wrap at 360; common practice)
    words = plane_words(PLANE)
    assert "toward 359.0° (95% limits 356.5-1.5°)" in words and "dips 12.0° (95% limits 11.5-12.5°)" in words


def test_each_result_of_the_summary_has_its_sentence_with_its_numbers():
    s = _summary(
        groups={"planes": {"east": {**PLANE, "dip_deg": 20.0}}},
        model={"chosen": "trend2", "cv_rmse_m": {"plane": 3.1, "trend2": 1.25}, "choice": {"reason": "simplest"}},
        structure_contours={"n_lines": 7, "interval_m": 50.0, "n_extrapolated": 2},
        trace_misfit={"median_m": 4.25, "p90_m": 11.0, "n_vertices": 300},
        contact_misfit={"n_flagged": 3, "n_segments": 40, "segment_m": 100.0, "check": {"flag_rule": "|z| > 3"},
                        "n_unchecked": 2, "unchecked_reason": "off the DEM"},
        map_units={"check": {"n_violated": 1, "n_points": 50}},
        thickness={"mean_m": 73.6, "std_m": 1.2, "p10_m": 72.1, "p90_m": 75.0, "n_cells": 900})
    text = " ".join(answer_sentences(s))
    for words in ("Group 'east' dips 20.0°", "120 picks were taken along the mapped contacts (20 from the contours, "
                  "100 from the dem)", "a quadratic trend surface", "plane 3.10 m, trend2 1.25 m", "Why: simplest.",
                  "7 structure contours every 50 m; 2 of them are forecasts",
                  "a median 4.2 m from the mapped contact (90% of its 300 vertices within 11.0 m)",
                  "3 of 40 contact segments of 100 m", "2 were not checked (off the DEM)",
                  "breaks 1 of 50 check points", "true thickness averages 73.6 m"):
        assert words in text, words


def test_results_the_run_did_not_make_have_no_sentence():
    lines = answer_sentences(_summary(thickness={"mean_m": None, "reason": "no top contacts within reach"}))
    assert len(lines) == 3  # the plane, the picks, why there is no thickness
    assert lines[-1] == "No thickness: no top contacts within reach."
    assert plane_words({"quality": "undetermined", "reason": "the picks lie on a line",
                        "advice": "Map the contact where it crosses a valley."}).startswith(
        "The contact's attitude is undetermined: the picks lie on a line.")


def test_the_report_page_lists_the_same_sentences(demo_command_run):
    page = (demo_command_run.out / V.REPORT_FILE).read_text(encoding="utf-8")
    summary = json.loads((demo_command_run.out / V.SUMMARY_FILE).read_text())
    caution = re.search(r'<p class="caution" id="caution">(.*?)</p>', page, re.S).group(1)
    answer = re.search(r'<ul class="answer">(.*?)</ul>', page, re.S).group(1)
    items = [html.unescape(x) for x in re.findall(r"<li>(.*?)</li>", answer, re.S)]
    assert [html.unescape(caution), *items] == plain_answer(summary)
