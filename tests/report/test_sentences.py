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


def test_flagged_contacts_are_named_up_to_a_limit_then_counted():
    from strikeline.report.sentences import MAX_IDS

    cm = {"n_flagged": 20, "n_segments": 90, "segment_m": 100.0, "check": {}}
    few = " ".join(answer_sentences(_summary(contact_misfit={**cm, "flagged_contact_ids": [4, 9]})))
    assert "they lie on contacts 4 and 9 (contact_id in the contact_misfit layer)" in few
    ids = list(range(100, 100 + MAX_IDS + 3))  # three more than a sentence names
    many = " ".join(answer_sentences(_summary(contact_misfit={**cm, "flagged_contact_ids": ids})))
    assert f"contacts {', '.join(map(str, ids[:MAX_IDS - 1]))} and {ids[MAX_IDS - 1]}" not in many
    assert f"contacts {', '.join(map(str, ids[:MAX_IDS]))} and 3 more " in many


def test_the_map_unit_check_and_a_trace_not_measured_say_why():
    text = " ".join(answer_sentences(_summary(
        map_units={"n_points": 300, "n_above": 180, "n_below": 120,
                   "check": {"n_violated": 4, "n_points": 900, "max_violation_m": 1.234}},
        trace_misfit={"median_m": None, "p90_m": None, "n_vertices": 0, "note": "needs a DEM"})))
    assert ("Against the map's units (300 constraint points: 180 under units above the surface, 120 under units "
            "below) the surface breaks 4 of 900 check points, by at most 1.23 m (unit_conflicts layer).") in text
    assert "The predicted trace's misfit was not measured: needs a DEM." in text


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


def _depth(text):
    depth = most = 0
    for c in text:
        depth += (c == "(") - (c == ")")
        most = max(most, depth)
    return most


def test_the_unchecked_segments_sentence_has_no_brackets_within_brackets():
    from strikeline.pipeline.summary import UNCHECKED_REASON

    # common practice (plain-language style guides): no brackets nested inside brackets
    cm = {"n_flagged": 3, "n_segments": 400, "segment_m": 100.0, "check": {"flag_rule": "|z| > 3"},
          "flagged_contact_ids": [4, 9], "n_unchecked": 107, "unchecked_reason": UNCHECKED_REASON}
    lines = answer_sentences(_summary(contact_misfit=cm))
    text = next(t for t in lines if "not checked" in t)
    assert f"107 were not checked ({UNCHECKED_REASON})" in text
    assert _depth(text) == 1 and text.count("(") == text.count(")"), text
    assert all(_depth(t) <= 1 for t in lines), [t for t in lines if _depth(t) > 1]
