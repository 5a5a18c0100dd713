"""Numbers and words on the report's figures and in their captions: no signed zero, the model
chart's value labels clear of its markers, the choice rule in words.

The figures are drawn as the page draws them and caught before their PNG is encoded, so the
text and the positions are matplotlib's own (its Agg renderer's extents)."""
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
