"""Numbers and words on the report's figures and in their captions: no signed zero, the model
chart's value labels clear of its markers, the choice rule in words.

The figures are drawn as the page draws them and caught before their PNG is encoded, so the
text and the positions are matplotlib's own (its Agg renderer's extents)."""
import re
from types import SimpleNamespace

import numpy as np
import pytest

from strikeline.report.sentences import number

pytest.importorskip("matplotlib")
from strikeline.report import figures as F  # noqa: E402


@pytest.fixture
def drawn(monkeypatch):
    """Draw a figure with ``drawn(F.some_figure, d)``; returns its matplotlib Figure, drawn."""
    figs = []
    monkeypatch.setattr(F, "png_bytes", lambda fig: figs.append(fig) or b"")

    def draw(func, d):
        with F.style():
            func(d)
            figs[-1].canvas.draw()
        return figs[-1]
    return draw


@pytest.mark.parametrize("value", [-0.004, -0.0, 0.0, 0.004, -0.005, -0.006, 0.006, -12.345, 3.999, 1e-300])
@pytest.mark.parametrize("spec", [".2f", "+.2f", ".1f", "+.0f", "g"])
def test_a_number_rounded_to_zero_has_no_sign(value, spec):
    # Source: Python's format-spec 'z' option (PEP 682, Python 3.11) turns a negative zero after
    # rounding into a positive one; the digits are Python's own rounding of the value.
    plain = format(value, spec.replace("+", "") .replace(".", "z.") if "." in spec else "z" + spec)
    got = number(value, spec)
    assert got.lstrip("+") == plain
    zero = not any(c in "123456789" for c in plain)
    assert got[0] not in "+-" if zero else got[0] == ("-" if value < 0 else "+" if "+" in spec else got[0])


def test_a_bad_format_is_refused():
    with pytest.raises(ValueError):
        number(1.0, "10.2f")


def test_the_residual_histogram_shows_no_negative_zero(drawn):
    rng = np.random.default_rng(1)
    r = rng.normal(-0.001, 0.01, 401)  # the median rounds to zero at 2 decimals
    r -= np.median(r) + 0.001
    d = SimpleNamespace(picks={"x": rng.uniform(0, 100, r.size), "y": rng.uniform(0, 100, r.size),
                               "z": np.zeros(r.size), "residual_m": r, "step": 1, "n_total": r.size})
    fig = drawn(F.residuals_figure, d)
    title = fig.axes[0].get_title()
    # Source: the median of the residuals, numpy's, rounded by Python's format (-0.001 -> 0.00)
    assert round(float(np.median(r)), 2) == 0 and "median 0.00 m" in title, title


def _scored(rmse):
    from strikeline.stats.scores import CVScore

    return CVScore(rmse, np.array([rmse, rmse]), 0.1, 100, 50.0, np.full(100, rmse), n_groups=40)


def _rules_made():
    """Every rule id the model choice can record: each rule asked for, with and without a stated
    pick error (the data-error rule falls back without one)."""
    from strikeline.stats.choice import SELECTION_RULES, choose_model

    scores = {"plane": _scored(2.3), "spline": _scored(2.0)}
    made = {choose_model(scores, order=["plane", "spline"], rule=r, sigma_m=s).summary()["rule"]
            for r in SELECTION_RULES for s in (None, 2.0)}
    assert made == set(SELECTION_RULES)  # every rule the option allows is recorded as itself somewhere
    return sorted(made), scores


def test_the_choice_rule_is_told_in_words_for_every_rule():
    from strikeline.report.page import figure_list
    from strikeline.report.sentences import RULE_WORDS
    from strikeline.stats.choice import choose_model

    rules, scores = _rules_made()
    for rule in rules:
        ch = choose_model(scores, order=["plane", "spline"], rule=rule, sigma_m=2.0).summary()
        d = SimpleNamespace(summary={"model": {"cv_rmse_m": {"plane": 2.3, "spline": 2.0}, "chosen": "plane",
                                               "holdout_block_m": 500.0, "n_folds": 5, "choice": ch}},
                            picks=None, ground=None, attitudes=None, thickness_sample=None)
        caption = dict((n, c) for n, _, _, c in figure_list(d))["models"]
        assert RULE_WORDS[rule] in caption, rule
        # no rule's code name on the page (data_error, one_se, min)
        assert not any(re.search(rf"\b{ident}\b", caption) for ident in rules), caption


#: The trial's fold sheet (cross-validation RMSE, its standard error and the trimmed RMS by model):
#: a trimmed error above the RMSE for the plane and the quadratic trend, far below it for the spline.
FOLD_MODELS = {"plane": (83.75, 7.5, 97.2), "trend2": (57.95, 5.6, 70.8), "spline": (9.46, 1.8, 2.2)}


def _models_summary(rows, chosen):
    return {"model": {"chosen": chosen, "cv_rmse_m": {k: v[0] for k, v in rows.items()},
                      "cv_se_m": {k: v[1] for k, v in rows.items()}, "holdout_block_m": 500.0, "n_folds": 5,
                      "choice": {"rule": "data_error", "tolerance_m": 2.06,
                                 "chi2": {k: {"trimmed_rms_m": v[2]} for k, v in rows.items()}}}}


def _point_extents(line, renderer):
    """matplotlib's window extent of each point of a Line2D drawn alone (its marker's size included)."""
    xs, ys = line.get_xdata(), line.get_ydata()
    out = []
    for x, y in zip(np.atleast_1d(xs), np.atleast_1d(ys)):
        line.set_data([x], [y])
        out.append(line.get_window_extent(renderer))
    line.set_data(xs, ys)
    return out


@pytest.mark.parametrize("rows", [FOLD_MODELS,
                                  {"plane": (10.0, 1.0, 10.6), "trend2": (8.0, 0.5, 8.0), "spline": (7.0, 0.3, 11.5)},
                                  {"plane": (5.0, 0.0, 4.0), "spline": (4.0, 2.0, 6.6)}])
def test_the_model_values_are_clear_of_every_mark(drawn, rows):
    fig = drawn(F.models_figure, SimpleNamespace(summary=_models_summary(rows, "spline")))
    ax = fig.axes[0]
    renderer = fig.canvas.get_renderer()
    labels = [t for t in ax.texts if t.get_text().strip()]
    assert len(labels) == len(rows)
    # Reference: matplotlib's Agg renderer extents of each label and of each drawn point (trimmed-error
    # markers, error-bar caps and ends), one by one
    marks = [b for line in ax.lines if len(np.atleast_1d(line.get_xdata())) for b in _point_extents(line, renderer)]
    frame = ax.get_window_extent(renderer)
    for t in labels:
        box = t.get_window_extent(renderer)
        hit = [m for m in marks if box.overlaps(m)]
        assert not hit, (t.get_text(), box, hit)
        assert frame.x0 <= box.x0 and box.x1 <= frame.x1, (t.get_text(), box, frame)  # inside the chart


def test_the_caption_says_what_the_trimmed_error_is_and_how_far_above_the_rmse_it_can_lie():
    from scipy.stats import norm, truncnorm

    from strikeline.report.page import figure_list
    from strikeline.stats.choice import trimmed_mean_square

    d = SimpleNamespace(summary=_models_summary(FOLD_MODELS, "spline"), picks=None, ground=None, attitudes=None,
                        thickness_sample=None)
    caption = dict((n, c) for n, _, _, c in figure_list(d))["models"]
    # Source: scipy.stats.truncnorm, the variance of a standard normal cut to its central 75 %
    q = norm.ppf(0.875)
    var = truncnorm(-q, q).var()
    bound = 1.0 / np.sqrt(var)
    # (the caption gives the constant to three digits)
    stated = float(re.search(r"divided by (\d\.\d+)", caption).group(1))
    assert abs(stated - var) < 1e-3 and f"at most {bound:.2f} times" in caption, caption
    # the bound is reached: errors all of one size (more even than normal) give a trimmed error that
    # many times their RMS; the trimmed error the choice computes is that
    e = np.full(400, 3.0)
    assert np.sqrt(trimmed_mean_square(e)) / 3.0 == pytest.approx(bound, rel=1e-9)
    # without trimmed errors (another rule) the chart has no diamonds and the caption no such words
    d.summary["model"]["choice"] = {"rule": "one_se", "tolerance_m": 1.0, "chi2": {}}
    assert "Diamonds" not in dict((n, c) for n, _, _, c in figure_list(d))["models"]


class _Lines(SimpleNamespace):
    """Lines of a layer as the report reads them: ``geoms`` and ``fields``, and their count."""

    def __len__(self):
        return len(self.geoms)


def _sheet(cross_x):
    """A flat 100 m sheet with one structure contour at 750 m along y = 50, and a mapped contact with
    dense picks running north-south at x = ``cross_x``."""
    import shapely

    ys = np.linspace(0.0, 100.0, 400)
    return SimpleNamespace(
        ground=SimpleNamespace(values=np.zeros((100, 100)), cell_m=1.0, extent=(0.0, 100.0, 0.0, 100.0)),
        surface=None, depth=None, misfit=None, trace=None,
        contours=_Lines(geoms=np.array([shapely.LineString([(0, 50), (100, 50)])], dtype=object),
                        fields={"elevation_m": np.array([750.0])}),
        contacts=_Lines(geoms=np.array([shapely.LineString([(cross_x, 0), (cross_x, 100)])], dtype=object)),
        picks={"x": np.full(ys.size, float(cross_x)), "y": ys, "z": ys})


def test_a_contour_label_stays_legible_where_a_contact_and_its_picks_cross_it(drawn):
    def pixels(cross_x):
        fig = drawn(F.map_figure, _sheet(cross_x))
        label = next(t for t in fig.axes[0].texts if t.get_text() == "750")
        box = label.get_window_extent(fig.canvas.get_renderer())
        rgba = np.asarray(fig.canvas.buffer_rgba()).astype(int)
        h = rgba.shape[0]
        return rgba[int(h - box.y1):int(np.ceil(h - box.y0)), int(box.x0):int(np.ceil(box.x1)), :3]

    through, away = pixels(50.0), pixels(20.0)  # the label sits at x = 50 (the contour's middle)
    assert through.shape == away.shape
    # Reference: matplotlib's Agg rendering of the same label with the contact and picks elsewhere;
    # drawn over them (zorder, matplotlib's drawing order) the label's box differs only by what its
    # 85%-opaque background lets through: at most 15% of 255
    assert np.abs(through - away).max() <= 0.15 * 255 + 1, np.abs(through - away).max()


PLANE = {"dip_deg": 30.0, "dip_direction_deg": 90.0, "cone95_deg": 1.0}
#: Local attitudes round the sheet's plane, a few degrees off it (beyond its cone's close-up), and
#: five undetermined (no dip).
ATTITUDES = {"good": (np.array([30.5, 33.0, 27.0, 30.0]), np.array([91.0, 84.0, 97.0, 90.2])),
             "weak": (np.array([36.0, 24.0, 20.0]), np.array([80.0, 101.0, np.nan])),
             "undetermined": (np.full(5, np.nan), np.full(5, np.nan))}


def _net(drawn, groups=None):
    summary = {"plane": PLANE, **({"groups": {"planes": groups}} if groups else {})}
    return drawn(F.stereonet_figure, SimpleNamespace(summary=summary, attitudes=ATTITUDES))


def test_the_close_up_holds_every_pole_and_every_line_is_in_the_legend(drawn):
    fig = _net(drawn)
    net, close = fig.axes[:2]
    renderer = fig.canvas.get_renderer()
    frame = close.get_window_extent(renderer)
    poles = [line for line in close.lines if line.get_marker() not in ("None", "none", "", None)
             and len(np.atleast_1d(line.get_xdata()))]
    n_drawn = sum(len(np.atleast_1d(line.get_xdata())) for line in poles)
    assert n_drawn == 4 + 2 + 1  # good, weak with a dip direction, the sheet's pole
    # Reference: matplotlib's Agg extents of each pole's marker against the close-up's frame
    for line in poles:
        for box in _point_extents(line, renderer):
            assert frame.x0 <= box.x0 and box.x1 <= frame.x1 and frame.y0 <= box.y0 and box.y1 <= frame.y1, box
    legend = {t.get_text() for t in fig.legends[0].get_texts()}
    for ax in (net, close):
        for line in ax.lines:
            x, y = (np.asarray(v, float) for v in line.get_data())
            if len(x) and np.allclose(np.hypot(x, y), 1.0):  # the net's horizon
                continue
            assert line.get_label() in legend, (line.get_label(), x[:3], y[:3])  # no unexplained line
    assert "5 local attitudes undetermined, not drawn" in legend


def test_the_caption_names_group_planes_only_when_there_are_some():
    from strikeline.report.page import figure_list

    def caption(groups):
        d = SimpleNamespace(summary={"plane": PLANE, **({"groups": {"planes": groups}} if groups else {})},
                            attitudes=ATTITUDES, picks=None, ground=None, thickness_sample=None)
        return dict((n, c) for n, _, _, c in figure_list(d))["stereonet"]

    assert "group" not in caption(None)
    assert "group planes" in caption({"east": {"dip_deg": 20.0, "dip_direction_deg": 80.0}})
