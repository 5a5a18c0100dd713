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
