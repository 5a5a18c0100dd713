"""What the report does to draw a large sheet quickly: structure contours thinned to a fraction of a
pixel (against shapely's distance and matplotlib's own drawing of every vertex), the scale of the
map's pixels (against matplotlib's transform), PNGs of the same pixels at a lower zlib level
(against Pillow's default), and the figures that need no grid drawn while the grids are read."""
import base64
import io

import numpy as np
import pytest
import shapely

pytest.importorskip("matplotlib")
from strikeline import vocabulary as V  # noqa: E402
from strikeline.report import data as D  # noqa: E402
from strikeline.report import figures as F  # noqa: E402
from strikeline.report import page as P  # noqa: E402

#: A contour as a contour generator traces it on a fine grid: a smooth curve of 40,000 vertices
#: 2.5 cm apart with a zigzag of 2 mm across it (invented; the map's pixel is about 1.1 m).
_T = np.linspace(0.0, 1.0, 40_000)
WIGGLY = shapely.LineString(np.column_stack([1_000.0 * _T, 300.0 * np.sin(6.0 * _T)
                                             + 0.002 * (-1.0) ** np.arange(_T.size)]))
EXTENT = (-20.0, 1_020.0, -320.0, 320.0)


def test_simplified_lines_stay_within_the_tolerance():
    tol = 0.5
    got = F.simplified(np.array([WIGGLY], dtype=object), tol)[0]
    # Source: Douglas and Peucker 1973 - every dropped vertex lies within the tolerance of the kept
    # line, so shapely's Hausdorff distance between the two is at most the tolerance
    assert shapely.hausdorff_distance(WIGGLY, got) <= tol + 1e-9
    assert shapely.get_num_coordinates(got) < shapely.get_num_coordinates(WIGGLY) / 100
    assert F.simplified(np.array([WIGGLY], dtype=object), None)[0] is WIGGLY


def _map_axes_pixels(draw):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    with F.style():
        fig = Figure(figsize=F.SIZES_IN["map"], dpi=F.DPI)
        FigureCanvasAgg(fig)
        ax = fig.add_axes(list(F.MAP_AXES))
        draw(ax)
        ax.set_xlim(EXTENT[0], EXTENT[1])
        ax.set_ylim(EXTENT[2], EXTENT[3])
        ax.set_aspect("equal")
        fig.canvas.draw()
        return np.asarray(fig.canvas.buffer_rgba()).astype(int), ax


def test_pixel_size_in_metres_is_matplotlibs():
    _, ax = _map_axes_pixels(lambda ax: None)
    # Reference: matplotlib's own data-to-pixel transform of the equal-aspect axes
    (x0, _), (x1, _) = ax.transData.transform([(0.0, 0.0), (1_000.0, 0.0)])
    assert F.pixel_m(EXTENT) == pytest.approx(1_000.0 / (x1 - x0), rel=1e-6)


def test_a_thinned_contour_draws_what_matplotlib_draws_from_every_vertex():
    style = dict(color="0.08", lw=0.9, zorder=3)
    tol = F.SIMPLIFY_PX * F.pixel_m(EXTENT)
    for ls in ("solid", (0, (5, 3))):
        # Reference: matplotlib's ax.plot of all 40,000 vertices
        want, _ = _map_axes_pixels(lambda ax: ax.plot(*shapely.get_coordinates(WIGGLY).T, ls=ls, **style))
        got, _ = _map_axes_pixels(lambda ax: F._draw_lines(ax, np.array([WIGGLY], dtype=object), ls=ls,
                                                           tolerance_m=tol, **style))
        diff = np.abs(want - got).max(axis=2)
        # invisible: at most 16 of 255, along the line's antialiased edges (measured: 14 and 13 of 255,
        # 1.4% and 0.9% of the line's pixels by more than 8; on a 2,000^2 fold sheet's map 15 of 255,
        # 259 pixels by more than 8)
        assert diff.max() <= 16, ls
        assert (diff > 8).sum() <= 0.03 * (want != 255).any(axis=2).sum(), ls


def test_pngs_keep_their_pixels_at_the_lower_zlib_level():
    from PIL import Image
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    with F.style():
        fig = Figure(figsize=(4.0, 3.0), dpi=F.DPI)
        FigureCanvasAgg(fig)
        ax = fig.add_axes([0.1, 0.1, 0.8, 0.8])
        ax.imshow(np.random.default_rng(3).random((60, 80)), interpolation="nearest")
        ax.plot(*shapely.get_coordinates(WIGGLY).T[:, ::50] / 20.0)
        ours = F.png_bytes(fig)
        buf = io.BytesIO()
        fig.savefig(buf, format="png", dpi=F.DPI, metadata={"Software": None})  # Pillow's default level
    # Reference: Pillow's decoder of both files (PNG is lossless whatever the zlib level)
    a, b = (np.asarray(Image.open(io.BytesIO(x))) for x in (ours, buf.getvalue()))
    assert a.shape == b.shape == (330, 440, 4)  # 4 x 3 inches at 110 dpi, RGBA
    assert np.array_equal(a, b)


def test_figures_without_grids_are_drawn_while_the_grids_are_read(demo_command_run):
    seen = []

    def early(d):
        seen.append((d.surface, d.depth, d.picks, sorted(d.attitudes or {})))

    d = D.load_outputs(demo_command_run.out, while_reading=early)
    assert len(seen) == 1
    surface, depth, picks, attitude_keys = seen[0]
    assert surface is None and depth is None and picks is None and attitude_keys == sorted(d.attitudes)
    assert d.surface is not None and d.picks is not None
    names = [name for name, *_ in P.figure_list(d)]
    assert set(P.NO_GRID_FIGURES) <= set(names)
    # the page drawn that way holds the figures as drawn once everything is read (the same bytes:
    # the figures are drawn from the summary and the attitudes alone)
    page = (demo_command_run.out / V.REPORT_FILE).read_text(encoding="utf-8")
    with F.style():
        for name, _, draw, _ in P.figure_list(d):
            if name in P.NO_GRID_FIGURES:
                assert base64.b64encode(draw(d)).decode("ascii") in page, name
