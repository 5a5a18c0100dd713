"""The map's line families, drawn as one collection each, against matplotlib's own ax.plot of each line."""
import numpy as np
import pytest
import shapely

pytest.importorskip("matplotlib")
from strikeline.report import figures as F  # noqa: E402

LINES = np.array([shapely.LineString([(0, 0), (3, 4), (7, 4)]),
                  shapely.MultiLineString([[(1, 6), (2, 9)], [(5, 1), (9, 8), (9, 2)]]),
                  shapely.LineString([(0, 9, 12.5), (8, 0, 3.0)])], dtype=object)
STYLES = [dict(color="0.08", lw=0.9, zorder=3),
          dict(color="0.08", lw=0.9, ls=(0, (5, 3)), zorder=3),
          dict(color="#c0392b", lw=10.0, solid_capstyle="butt", zorder=4),
          dict(color="#2c7fb8", lw=1.3, ls=(0, (8, 2, 1.5, 2)), zorder=8)]


def _pixels(draw):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    with F.style():
        fig = Figure(figsize=(3.0, 3.0), dpi=100)
        FigureCanvasAgg(fig)
        ax = fig.add_axes([0.05, 0.05, 0.9, 0.9])
        draw(ax)
        ax.set_xlim(-1, 10)
        ax.set_ylim(-1, 10)
        if ax.get_legend_handles_labels()[0]:
            ax.legend(loc="lower right")
        fig.canvas.draw()
        return np.asarray(fig.canvas.buffer_rgba()).astype(int), ax


def test_the_parts_are_shapelys_coordinates_in_order():
    # Source: shapely 2's get_parts / get_coordinates (2-D), one array per part
    got = F._line_parts(LINES)
    want = [np.asarray(shapely.get_coordinates(p)) for p in shapely.get_parts(LINES)]
    assert len(got) == 4 and all(np.array_equal(a, b) for a, b in zip(got, want))


@pytest.mark.parametrize("style", STYLES)
def test_one_collection_draws_what_one_plot_call_per_line_draws(style):
    def by_plot(ax):
        kw = {k: v for k, v in style.items()}
        first = True
        for g in LINES:
            for p in shapely.get_parts(g):
                xy = shapely.get_coordinates(p)
                ax.plot(xy[:, 0], xy[:, 1], **(dict(kw, label="lines") if first else kw))
                first = False

    old, old_ax = _pixels(by_plot)
    new, new_ax = _pixels(lambda ax: F._draw_lines(ax, LINES, label="lines", **style))
    # Reference: matplotlib's ax.plot of each line (Line2D defaults: projecting caps when solid, butt
    # when dashed, round joins): the same pixels for these few short lines. (On a whole sheet the
    # pixels can differ a little where lines overlap or long paths are simplified: at most 35 of 255
    # on a 200-contact sheet.)
    assert np.array_equal(old, new)
    assert len(new_ax.collections) == 1 and len(new_ax.get_legend_handles_labels()[0]) == 1
    assert len(old_ax.lines) == 4


def test_nothing_is_drawn_for_no_lines():
    _, ax = _pixels(lambda ax: F._draw_lines(ax, LINES[:0], color="k", lw=1.0, zorder=3, label="none"))
    assert not ax.collections and not ax.lines
