"""The report page: one self-contained HTML file (figures as base64 PNG, no script, no link out),
opening with the caution, then the answer in plain words, then the figures with their captions.

The sentences are :func:`strikeline.report.sentences.plain_answer`'s (the QGIS log's too). The
page is made from the output folder alone (:func:`strikeline.report.data.load_outputs`) and
holds no date, path of the run or random id, so the same outputs give the same bytes.
"""
from __future__ import annotations

import base64
import html
from pathlib import Path

from strikeline import CAUTION, __version__
from strikeline import vocabulary as V
from strikeline.report.sentences import (  # noqa: F401
    MODEL_WORDS, RULE_WORDS, answer_sentences, number, plain_answer, plane_words)

#: What a reader sees when matplotlib is missing (one log line; the run still succeeds).
MISSING_PLOT = (f"report: {V.REPORT_FILE} not written because matplotlib is not installed; install the plot "
                "extra (pip install 'strikeline[plot]', or pip install -e '.[plot]' in a checkout) and run again")
#: Figures drawn from summary.json and the attitudes alone (no grid, pick or contacts input), so
#: before the grids are read; they are the same drawn after. Every figure is drawn on the calling
#: thread: matplotlib is not thread-safe (its FAQ, "Working with threads") and its Agg renderer
#: holds one lock over every figure's drawing (matplotlib pull request 26302, 2023), so figures
#: on several threads would wait for each other; what runs beside the drawing is GDAL decoding
#: the grids, without Python's lock.
NO_GRID_FIGURES = ("stereonet", "models")
#: The colour of the frame around every figure (the rendering test finds the figures by it).
FRAME_RGB = (43, 62, 80)

_CSS = """
body { font-family: 'DejaVu Sans', Arial, sans-serif; color: #1b1b1b; background: #ffffff; margin: 0 auto;
       max-width: 1340px; padding: 16px 24px 48px 24px; line-height: 1.45; }
p.caution { border: 3px solid #1b1b1b; background: #f4f4f4; padding: 12px 16px; font-weight: bold; }
h1 { font-size: 26px; margin: 18px 0 8px 0; }
h2 { font-size: 20px; margin: 28px 0 6px 0; border-bottom: 1px solid #999999; }
ul.answer li { margin: 4px 0; }
figure { margin: 8px 0 0 0; }
img.figure { display: block; width: 1320px; max-width: 100%; height: auto;
             border: 4px solid FRAME; }
figcaption { font-size: 14px; color: #333333; margin-top: 6px; }
table { border-collapse: collapse; font-size: 14px; }
td, th { border: 1px solid #bbbbbb; padding: 3px 8px; text-align: left; vertical-align: top; }
p.note { font-style: italic; }
""".replace("FRAME", "rgb(%d, %d, %d)" % FRAME_RGB)


def _e(text) -> str:
    return html.escape(str(text), quote=True)


def _img(fid: str, png: bytes, size: tuple, alt: str) -> str:
    data = base64.b64encode(png).decode("ascii")
    return (f'<img id="{fid}" class="figure" width="{size[0]}" height="{size[1]}" alt="{_e(alt)}" '
            f'src="data:image/png;base64,{data}">')


def figure_list(d) -> list[tuple[str, str, object, str]]:
    """The figures this folder supports, in order: ``(name, title, drawer, caption)``."""
    from strikeline.report import figures as F

    s = d.summary
    out = []
    interval = (s.get("structure_contours") or {}).get("interval_m")
    reach = (s.get("model") or {}).get("reach_m")
    shown = ""
    if d.picks is not None and d.picks["step"] > 1:
        shown = f" Every {d.picks['step']}th of the {d.picks['n_total']} picks is drawn."
    relief = ("Shaded relief of the ground on the output grid (the surface plus its depth below ground, lit from "
              "the north-west), tinted by the depth of the surface below ground; untinted where the surface lies "
              "above the ground (eroded)." if d.ground is not None else
              "The modelled surface's elevation (no DEM: no relief or depth).")
    out.append(("map", "The sheet", F.map_figure,
                relief + (f" Structure contours every {number(interval, 'g')} m are labelled with their elevation in metres; "
                          "solid within the reach of the data"
                          + (f" ({number(reach, '.0f')} m)" if reach else "") + ", dashed where forecast beyond it."
                          if interval else "")
                + " Picks are coloured by elevation; the predicted outcrop trace is dash-dotted (dotted where "
                "forecast); contact segments flagged by the misfit check carry a wide pale band." + shown))
    pl = s.get("plane") or {}
    if pl.get("dip_deg") is not None or d.attitudes:
        cone = (f" The sheet's plane: its pole (star) with the 95% confidence cone of half-angle "
                f"{number(pl['cone95_deg'])}° (circle) and the plane itself (dashed great circle)."
                if pl.get("cone95_deg") is not None else "")
        out.append(("stereonet", "Attitudes on the equal-area net", F.stereonet_figure,
                    "Poles of the local attitudes (filled circles: good; open: weak)"
                    + (" and of the group planes (open markers, one shape per group)"
                       if any(g.get("dip_direction_deg") is not None
                              for g in ((s.get("groups") or {}).get("planes") or {}).values()) else "")
                    + " on the lower hemisphere of the equal-area (Schmidt) net: the Lambert azimuthal "
                    "equal-area projection, a line at angle θ from the vertical plotted at r = √2·sin(θ/2) of the "
                    "net's radius (Snyder 1987, Map Projections - A Working Manual, USGS Professional Paper 1395). "
                    "A pole lies opposite the dip direction, 90° minus the dip from the rim. The close-up holds "
                    "every pole drawn." + cone))
    if d.picks is not None and len(d.picks["x"]):
        out.append(("residuals", "Residuals of the picks", F.residuals_figure,
                    "Residual: the elevation of a pick minus the modelled surface (surface.tif) interpolated "
                    "bilinearly between cell centres at the pick; positive (triangle up) where the pick lies above "
                    "the surface. Picks where the surface has no value are left out." + shown))
    if s.get("model", {}).get("cv_rmse_m"):
        m = s["model"]
        ch = m.get("choice") or {}
        out.append(("models", "Surface models and the choice", F.models_figure,
                    f"Each model's error on picks held out in blocks of {number(m.get('holdout_block_m', 0), '.0f')} m "
                    f"(cross-validation RMSE, {m.get('n_folds', '?')} folds). "
                    + (f"How the model is chosen: {RULE_WORDS[ch['rule']]}"
                       + (f"; the tolerance here is {number(ch['tolerance_m'])} m" if ch.get("tolerance_m") else "")
                       + ". "
                       if ch.get("rule") in RULE_WORDS else "")
                    + _trimmed_words(ch) + _sentence(ch.get('reason') or m.get('check_model_reason'))))
    t = s.get("thickness") or {}
    if t.get("mean_m") is not None:
        n = 0 if d.thickness_sample is None else len(d.thickness_sample)
        out.append(("thickness", "Thickness of the unit", F.thickness_figure,
                    f"True thickness ({t.get('true_thickness_method', '')}) over {n} cells of true_thickness.tif "
                    f"(a regular sample when the grid is large); the lines mark the mean and the 10th and 90th "
                    f"percentiles of summary.json, over {t['n_cells']} cells within reach of data of both "
                    "surfaces."))
    return out


def _sentence(text) -> str:
    """``text`` ended with a full stop (nothing for no text)."""
    return f"{text}." if text else ""


def _trimmed_words(choice: dict) -> str:
    """What the models chart's diamonds are, and why one can lie beyond its bar (when drawn)."""
    from strikeline.stats.choice import _TRIMMED_NORMAL_VAR, TRIM_FRACTION

    if not any((v or {}).get("trimmed_rms_m") is not None for v in (choice.get("chi2") or {}).values()):
        return ""
    kept = 1.0 - TRIM_FRACTION
    return (f"Diamonds: the trimmed error the choice compares: the mean square of a model's held-out errors "
            f"without the largest {number(100 * TRIM_FRACTION, '.0f')}% of them, divided by "
            f"{number(_TRIMMED_NORMAL_VAR, '.3f')} (the variance of a normal distribution cut to its central "
            f"{number(100 * kept, '.0f')}%), and its square root taken, so that it estimates the standard deviation "
            "of normally distributed errors. It lies "
            "below the plain RMSE when a few picks are far off, and above it (at most "
            f"{number(1.0 / _TRIMMED_NORMAL_VAR ** 0.5)} times) when the errors are more even than normal ones, as "
            "when a model misses the shape of the contact everywhere. ")


def _run_table(s: dict) -> str:
    rows = [("strikeline version", s.get("version", __version__)), ("CRS", s.get("crs", ""))]
    for role, rec in sorted((s.get("inputs") or {}).items()):
        recs = rec if isinstance(rec, list) else [rec]
        for r in recs:
            if isinstance(r, dict) and r.get("path"):
                rows.append((f"input: {role.replace('_', ' ')}", f"{Path(r['path']).name}"
                             + (f" (layer {r['layer']})" if r.get("layer") else "")
                             + (f", sha256 {r['sha256'][:12]}…" if r.get("sha256") else "")))
    de = s.get("data_error") or {}
    for key, word in (("dem_sigma_m", "DEM vertical standard error"), ("contour_sigma_m", "contour positional error"),
                      ("contact_sigma_m", "contact positional error")):
        if de.get(key) is not None:
            rows.append((word, f"{number(de[key], 'g')} m"))
    if s.get("conventions"):
        rows.append(("conventions", s["conventions"]))
    return "<table>" + "".join(f"<tr><th>{_e(a)}</th><td>{_e(b)}</td></tr>" for a, b in rows) + "</table>"


def render_report(folder, *, means=None) -> str:
    """The report's HTML for a run's output ``folder`` (needs matplotlib); ``means``: grids'
    window means gathered while they were written (:func:`strikeline.report.data.load_outputs`)."""
    from strikeline.report.data import load_outputs
    from strikeline.report.figures import pixel_size, style

    early = {}

    def draw_early(d):  # the figures that need no grid, drawn while the grids are read
        with style():
            for name, _, draw, _ in figure_list(d):
                if name in NO_GRID_FIGURES:
                    early[name] = draw(d)

    d = load_outputs(folder, while_reading=draw_early, means=means)
    s = d.summary
    caution, *answer = plain_answer(s)  # the QGIS log says the same, in the same order
    parts = ["<!DOCTYPE html>", '<html lang="en"><head><meta charset="utf-8">',
             "<title>strikeline report</title>", f"<style>{_CSS}</style></head><body>",
             f'<p class="caution" id="caution">{_e(caution)}</p>',
             "<h1>What the map says about the contact</h1>", '<ul class="answer">']
    parts += [f"<li>{_e(line)}</li>" for line in answer]
    parts.append("</ul>")
    with style():
        for i, (name, title, draw, caption) in enumerate(figure_list(d), start=1):
            png = early[name] if name in early else draw(d)
            parts += [f'<h2 id="section-{name}">{i}. {_e(title)}</h2>', "<figure>",
                      _img(f"fig-{name}", png, pixel_size(name), title),
                      f"<figcaption>{_e(caption)}</figcaption>", "</figure>"]
    parts += ["<h2>The run</h2>", _run_table(s), f'<p class="note">{_e(CAUTION)}</p>', "</body></html>"]
    return "\n".join(parts) + "\n"


def write_report(folder, *, log=None, means=None) -> Path | None:
    """Write :data:`strikeline.vocabulary.REPORT_FILE` into a run's output ``folder`` (the
    temporary folder of :func:`strikeline.io.files.output_folder`, before its swap).

    Without matplotlib nothing is written and ``log`` gets one line saying how to install it;
    returns the file written, or None. ``means``: file name -> ``(cells, array)``, window means of
    grids gathered while they were written (the values of the decimated reads the page makes).
    """
    from strikeline.io.files import write_text_checked

    try:
        import matplotlib  # noqa: F401
    except ImportError:
        if log is not None:
            log(MISSING_PLOT)
        return None
    path = Path(folder) / V.REPORT_FILE
    write_text_checked(path, render_report(folder, means=means))
    return path
