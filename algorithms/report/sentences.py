"""A run's answer in plain sentences, built from its summary (``summary.json``'s dict) alone.

One text for every place that tells the user what a run found: the report page lists the
sentences under its caution box (:mod:`strikeline.report.page`), ``strikeline run`` prints them
(:mod:`strikeline.cli.run`) and the QGIS whole-chain tool writes them to its log, one line each. :func:`plain_answer` puts the caution first, as every summary of
a forecast must; :func:`answer_sentences` is the answer without it.

Imports neither matplotlib, GDAL nor QGIS: the sentences need no drawing.
"""
from __future__ import annotations

import re

from strikeline import CAUTION
from strikeline import vocabulary as V

#: Most contact ids a sentence names; beyond them it says how many more.
MAX_IDS = 10

#: The surface models in words.
MODEL_WORDS = {"plane": "a plane", "trend2": "a quadratic trend surface",
               "spline": "a thin-plate smoothing spline"}


_SPEC = re.compile(r"([+ -]?)(\.\d+)?([efg%])")


def number(value, spec: str = ".2f") -> str:
    """``value`` formatted by ``spec`` (an optional sign, ``.precision`` and one of ``e f g %``),
    without a sign on a number that rounds to zero: Python's ``z`` option (PEP 682, "Normalizing
    negative zero in formatting", Python 3.11) for the minus sign, and no ``+`` on a zero either.
    Every number of the report's figures and captions goes through it.

    >>> number(-0.004), number(-0.004, "+.2f"), number(-0.006, "+.2f"), number(-0.0, "g")
    ('0.00', '0.00', '-0.01', '0')
    """
    m = _SPEC.fullmatch(spec)
    if m is None:
        raise ValueError(f"number format {spec!r} is not a sign, a precision and one of e, f, g, %")
    sign, precision, kind = m.groups()
    text = format(float(value), f"{sign}z{precision or ''}{kind}")
    if text[:1] in "+ " and not any(c in "123456789" for c in text.split("e")[0]):
        text = text[1:]
    return text


#: Each rule of the model choice (:data:`strikeline.stats.choice.SELECTION_RULES`, the ``rule``
#: of summary.json's ``model.choice``) in words, for the report's caption.
RULE_WORDS = {
    "data_error": ("the simplest model is kept whose error exceeds the best one's by no more than the larger of "
                   "the best one's standard error and the stated error of a pick, unless its trimmed error fails "
                   "a chi-square test against that stated error while a more flexible model passes"),
    "one_se": "the simplest model is kept whose error exceeds the best one's by no more than one standard error",
    "min": "the model with the lowest error is kept",
}


def _limits(value, half, unit="°", *, azimuth: bool = False) -> str:
    """``value`` with its 95% limits; an azimuth's limits are taken modulo 360.

    >>> _limits(1.5, 3.0, azimuth=True)
    '1.5° (95% limits 358.5-4.5°)'
    """
    if half is None:
        return f"{value:.1f}{unit}"
    lo, hi = value - half, value + half
    if azimuth:
        lo, hi = lo % 360.0, hi % 360.0
    return f"{value:.1f}{unit} (95% limits {lo:.1f}-{hi:.1f}{unit})"


def plane_words(pl: dict, *, who: str = "The contact") -> str:
    """The plane in a plain sentence, with its 95% limits (an undetermined plane gets no number).

    Parameters
    ----------
    pl : dict
        A plane of the summary (``summary["plane"]`` or one of ``summary["groups"]["planes"]``).
    who : str, keyword-only
        What the sentence is about.

    Returns
    -------
    str

    Examples
    --------
    >>> plane_words({"dip_deg": 30.0, "dip_ci95_deg": 1.0, "dip_direction_deg": 90.0,
    ...              "dip_direction_ci95_deg": 2.0, "dip_direction_true_deg": 89.5, "strike_rhr_deg": 0.0,
    ...              "rms_m": 1.2, "n_picks": 40, "quality": "good"}).split(" from grid north")[0]
    'The contact dips 30.0° (95% limits 29.0-31.0°) toward 90.0° (95% limits 88.0-92.0°)'
    """
    if pl.get("quality") == "undetermined" or pl.get("dip_deg") is None:
        return f"{who}'s attitude is undetermined: {pl.get('reason', '')}. {pl.get('advice', '')}".strip()
    fit = (f"The picks lie within {pl['rms_m']:.2f} m (RMS) of this plane; {pl['n_picks']} picks; "
           f"quality {pl['quality']}.")
    if pl.get("dip_direction_deg") is None:
        return (f"{who} is horizontal within its 95% confidence (dip {_limits(pl['dip_deg'], pl.get('dip_ci95_deg'))}"
                f"; no dip direction or strike). " + fit)
    return (f"{who} dips {_limits(pl['dip_deg'], pl.get('dip_ci95_deg'))} toward "
            f"{_limits(pl['dip_direction_deg'], pl.get('dip_direction_ci95_deg'), azimuth=True)} from grid north "
            f"({pl['dip_direction_true_deg']:.1f}° from true north); strike {pl['strike_rhr_deg']:.1f}° by the "
            f"right-hand rule. " + fit)


def _picks(s: dict) -> str:
    src = ", ".join(f"{n} from the {k}" for k, n in sorted((s.get("picks_by_source") or {}).items()) if n)
    return f"{s['n_picks']} picks were taken along the mapped contacts" + (f" ({src})." if src else ".")


def _model(m: dict) -> str:
    scores = ", ".join(f"{k} {v:.2f} m" for k, v in sorted((m.get("cv_rmse_m") or {}).items()) if v is not None)
    why = (m.get("choice") or {}).get("reason") or m.get("check_model_reason") or ""
    return (f"The surface is modelled as {MODEL_WORDS.get(m['chosen'], m['chosen'])}"
            + (f" (cross-validation error of held-out picks: {scores})" if scores else "") + "."
            + (f" Why: {why}." if why else ""))


def id_list(ids, *, most: int = MAX_IDS) -> str:
    """``ids`` in words, the first ``most`` of them and how many more.

    >>> id_list([3, 7]), id_list(range(13), most=10)
    ('3 and 7', '0, 1, 2, 3, 4, 5, 6, 7, 8, 9 and 3 more')
    """
    ids = [str(i) for i in ids]
    shown, more = ids[:most], len(ids) - most
    if more > 0:
        return f"{', '.join(shown)} and {more} more"
    return shown[0] if len(shown) == 1 else f"{', '.join(shown[:-1])} and {shown[-1]}"


def _contact_misfit(cm: dict) -> str:
    rule = (cm.get("check") or {}).get("flag_rule")
    text = (f"{cm['n_flagged']} of {cm['n_segments']} contact segments of {cm['segment_m']:g} m disagree with the "
            "surface forecast without them" + (f" ({rule})" if rule else "") + " and are flagged on the map")
    ids = cm.get("flagged_contact_ids") or []
    if ids:
        text += (f"; they lie on contact{'s' if len(ids) > 1 else ''} {id_list(ids)} (contact_id in the "
                 f"{V.CONTACT_MISFIT.name} layer)")
    unchecked = cm.get("n_unchecked") or 0
    if unchecked:
        text += f"; {unchecked} were not checked ({cm.get('unchecked_reason') or 'no forecast there'})"
    return text + "."


def _map_units(mu: dict) -> str:
    c = mu["check"]
    held = (f" ({mu['n_points']} constraint points: {mu['n_above']} under units above the surface, "
            f"{mu['n_below']} under units below)" if mu.get("n_points") is not None else "")
    worst = (f", by at most {c['max_violation_m']:.2f} m ({V.UNIT_CONFLICTS.name} layer)"
             if c["n_violated"] and c.get("max_violation_m") is not None else "")
    return f"Against the map's units{held} the surface breaks {c['n_violated']} of {c['n_points']} check points{worst}."


def _thickness(t: dict) -> str | None:
    if t.get("mean_m") is not None:
        return (f"The unit's true thickness averages {t['mean_m']:.1f} m (standard deviation {t['std_m']:.1f} m; "
                f"10-90%: {t['p10_m']:.1f}-{t['p90_m']:.1f} m) over {t['n_cells']} cells.")
    why = t.get("reason") or t.get("note")
    return f"No thickness: {why}." if why else None


def answer_sentences(s: dict) -> list[str]:
    """The run's answer in plain sentences, from ``summary.json``'s dict ``s`` (no caution).

    In order: the sheet's plane, each group's plane, the picks, the surface model and why, the
    structure contours, the predicted trace's misfit (or why it was not measured), the flagged
    contact segments and the contacts they lie on (at most :data:`MAX_IDS` named), the map-unit
    check, the thickness; a sentence is left out when the run did not make its result.

    Parameters
    ----------
    s : dict
        The run's summary (:func:`strikeline.pipeline.summary` output, or ``summary.json`` read back).

    Returns
    -------
    list of str
    """
    out = [plane_words(s["plane"])]
    for name, g in sorted((s.get("groups") or {}).get("planes", {}).items()):
        out.append(plane_words(g, who=f"Group '{name}'"))
    out.append(_picks(s))
    if s.get("model"):
        out.append(_model(s["model"]))
    sc = s.get("structure_contours") or {}
    if sc.get("n_lines"):
        out.append(f"{sc['n_lines']} structure contours every {sc['interval_m']:g} m; {sc.get('n_extrapolated', 0)} "
                   "of them are forecasts beyond the reach of the data (dashed on the map).")
    tm = s.get("trace_misfit") or {}
    if tm.get("median_m") is not None:
        out.append(f"The predicted outcrop trace lies a median {tm['median_m']:.1f} m from the mapped contact "
                   f"(90% of its {tm['n_vertices']} vertices within {tm['p90_m']:.1f} m).")
    if s.get("contact_misfit"):
        out.append(_contact_misfit(s["contact_misfit"]))
    elif tm.get("note"):
        out.append(f"The predicted trace's misfit was not measured: {tm['note']}.")
    if s.get("map_units"):
        out.append(_map_units(s["map_units"]))
    thickness = _thickness(s.get("thickness") or {})
    if thickness:
        out.append(thickness)
    return out


def plain_answer(s: dict) -> list[str]:
    """The caution, then the run's answer (:func:`answer_sentences`): what a summary of a run says
    to its reader, in this order (the report page and the QGIS log both).

    The caution is the summary's own (``s["caution"]``), else :data:`strikeline.CAUTION`.

    Examples
    --------
    >>> from strikeline import CAUTION
    >>> lines = plain_answer({"plane": {"quality": "undetermined", "reason": "too few picks",
    ...                                 "advice": "Map more of the contact."}, "n_picks": 2})
    >>> lines[0] == CAUTION, lines[1]
    (True, "The contact's attitude is undetermined: too few picks. Map more of the contact.")
    """
    return [s.get("caution") or CAUTION, *answer_sentences(s)]
