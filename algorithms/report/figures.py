"""The report's figures, drawn with matplotlib's Agg renderer into PNG bytes.

No pyplot: each figure is a :class:`matplotlib.figure.Figure` on its own Agg canvas, drawn under
matplotlib's default style (a user's ``matplotlibrc`` changes nothing) and saved without the
``Software`` text chunk, so the same outputs give the same bytes. Colours come from
:mod:`strikeline.report.palette` (lightness falls monotonically, so a greyscale print still reads
them); classes differ by line style, width or marker as well as by colour.
"""
from __future__ import annotations

import contextlib
import functools
import io

import numpy as np
import shapely

from strikeline.report.palette import CONTACT, DEPTH_CMAP, ELEVATION_CMAP, FLAG, MAGNITUDE_CMAP, TRACE
from strikeline.report.sentences import number
from strikeline.report.stereonet import draw_attitudes, draw_net, equal_area_xy
from strikeline.geometry.orientation import pole_from_dip

#: Pixels per inch of every figure.
DPI = 110
#: Size of each figure in inches (width, height); in pixels ``DPI`` times these.
SIZES_IN = {"map": (12.0, 10.2), "stereonet": (12.0, 6.2), "residuals": (12.0, 5.4), "models": (12.0, 4.4),
            "thickness": (12.0, 5.0)}
#: The models from the simplest to the most flexible (the order of the scores' chart).
MODEL_ORDER = ("plane", "trend2", "spline")
#: Most structure contours labelled with their elevation on the map.
MAX_LABELS = 40
#: zlib compression level of the PNGs (Pillow's ``compress_level``, 0-9).
PNG_LEVEL = 3
#: Lines are simplified before drawing to this fraction of a pixel of their figure (Douglas and
#: Peucker 1973): a structure contour traced on a fine grid has many vertices per pixel.
SIMPLIFY_PX = 0.05
#: Size of the models chart's trimmed-error markers, and the gap between a row's furthest mark and its
#: value label, in points.
MODEL_MARKER_PT = 7.0
#: Drawing order of the map's contour labels: above every line and pick (the contacts 5, picks 6,
#: predicted trace 8), so a contact drawn through a label cannot hide its digits.
LABEL_ZORDER = 9
#: Where the map's axes sit in its figure (left, bottom, width, height as fractions).
MAP_AXES = (0.07, 0.13, 0.72, 0.82)


def pixel_size(name: str) -> tuple[int, int]:
    """Width and height in pixels of figure ``name``.

    >>> pixel_size("map")
    (1320, 1122)
    """
    w, h = SIZES_IN[name]
    return int(round(w * DPI)), int(round(h * DPI))


def _figure(name: str):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=SIZES_IN[name], dpi=DPI)
    FigureCanvasAgg(fig)
    return fig


def png_bytes(fig) -> bytes:
    """The figure as PNG bytes of exactly its pixel size, without time or software chunks.

    zlib level :data:`PNG_LEVEL` rather than Pillow's 6: the same pixels (PNG is lossless), half
    the encoding time of the map, about 2% more bytes."""
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=DPI, metadata={"Software": None},
                pil_kwargs={"compress_level": PNG_LEVEL})
    return buf.getvalue()


@contextlib.contextmanager
def style():
    """The drawing style of every figure: matplotlib's defaults (whatever a user's matplotlibrc
    says), then ours; the caller's settings come back after the block."""
    import matplotlib as mpl
    import matplotlib.style

    with matplotlib.style.context("default"), mpl.rc_context({
            "font.size": 10, "axes.titlesize": 11, "axes.labelsize": 10, "legend.fontsize": 9,
            "axes.formatter.useoffset": False, "svg.hashsalt": "strikeline", "path.simplify": True}):
        yield


def _plain_axes(ax) -> None:
    from matplotlib.ticker import MaxNLocator

    ax.ticklabel_format(useOffset=False, style="plain")
    ax.xaxis.set_major_locator(MaxNLocator(5))
    ax.yaxis.set_major_locator(MaxNLocator(6))
    ax.set_xlabel("easting (m)")
    ax.set_ylabel("northing (m)")
    ax.set_aspect("equal")


def _line_parts(geoms) -> list:
    """The parts of (multi)lines as 2-D coordinate arrays, one per part, in order."""
    parts = shapely.get_parts(np.asarray(geoms, dtype=object))
    xy, which = shapely.get_coordinates(parts, return_index=True)
    return np.split(xy, np.flatnonzero(np.diff(which)) + 1) if len(xy) else []


def pixel_m(extent, *, name: str = "map", box=MAP_AXES) -> float:
    """Metres per pixel of axes ``box`` in figure ``name`` showing ``extent`` ``(xmin, xmax, ymin,
    ymax)`` at equal aspect (matplotlib's ``set_aspect('equal')`` shrinks the box to the larger
    scale).

    >>> round(pixel_m((0.0, 9504.0, 0.0, 100.0)), 6)
    10.0
    """
    w, h = pixel_size(name)
    return max((extent[1] - extent[0]) / (box[2] * w), (extent[3] - extent[2]) / (box[3] * h))


def simplified(geoms, tolerance_m: float | None) -> np.ndarray:
    """``geoms`` simplified by shapely (Douglas-Peucker, topology not preserved: each line on
    its own) to within ``tolerance_m``; as they are for None or 0.

    References
    ----------
    Douglas, D. H. and Peucker, T. K. 1973, 'Algorithms for the reduction of the number of
    points required to represent a digitized line or its caricature', The Canadian
    Cartographer 10(2), 112-122.
    """
    geoms = np.asarray(geoms, dtype=object)
    if not tolerance_m or not len(geoms):
        return geoms
    return shapely.simplify(geoms, tolerance_m, preserve_topology=False)


def _draw_lines(ax, geoms, *, color, lw, zorder, ls="solid", solid_capstyle="projecting", label=None,
                tolerance_m=None):
    """Every part of ``geoms`` as one :class:`~matplotlib.collections.LineCollection` (one artist,
    one legend entry), drawn as ``ax.plot`` would draw each line: the same colour, width, dashes
    and zorder, :class:`~matplotlib.lines.Line2D`'s default caps (projecting when solid, butt
    when dashed) and round joins. The legend entry is an empty line with the same style, so the
    legend reads as it would for ``ax.plot``. Nothing is added for no geometries. With
    ``tolerance_m``, the lines are first :func:`simplified` to it (a fraction of a pixel)."""
    from matplotlib.collections import LineCollection

    if not len(geoms):
        return
    geoms = simplified(geoms, tolerance_m)
    solid = ls in ("solid", "-")
    ax.add_collection(LineCollection(_line_parts(geoms), colors=color, linewidths=lw, linestyles=ls,
                                     capstyle=solid_capstyle if solid else "butt", joinstyle="round",
                                     zorder=zorder))
    if label is not None:
        ax.plot([], [], color=color, lw=lw, ls=ls, solid_capstyle=solid_capstyle, zorder=zorder, label=label)


def hillshade(ground: np.ndarray, cell_m: float) -> np.ndarray:
    """Shaded relief (0-1) lit from the north-west at 45 degrees (matplotlib's LightSource, the
    Lambertian shading of Horn 1981, 'Hill shading and the reflectance map', Proc. IEEE 69)."""
    from matplotlib.colors import LightSource

    z = np.where(np.isfinite(ground), ground, np.nanmean(ground) if np.isfinite(ground).any() else 0.0)
    hs = LightSource(azdeg=315, altdeg=45).hillshade(z, vert_exag=1.0, dx=cell_m, dy=cell_m)
    return np.where(np.isfinite(ground), hs, np.nan)


def _label_lines(geoms, elev, length=None) -> list[int]:
    """Which lines get a label: the longest piece of each elevation, at most :data:`MAX_LABELS`
    elevations spread evenly over the range (``length``: the lines' lengths, when ``geoms`` are
    simplified)."""
    length = shapely.length(geoms) if length is None else length
    levels = np.unique(elev)
    keep = levels[np.unique(np.linspace(0, len(levels) - 1, min(MAX_LABELS, len(levels))).round().astype(int))]
    out = []
    for z in keep:
        idx = np.flatnonzero(elev == z)
        out.append(int(idx[np.argmax(length[idx])]))
    return out


def map_figure(d) -> bytes:
    """The sheet: relief, depth tint, contacts, picks, structure contours, trace and flagged misfit."""
    fig = _figure("map")
    ax = fig.add_axes(list(MAP_AXES))
    ref = d.ground or d.surface or d.depth
    lines = functools.partial(_draw_lines, ax)
    # structure contours (traced on the output grid: ~2 million vertices on a 16,000^2 sheet)
    # thinned to a fraction of a pixel: the same picture from far fewer vertices
    # (or read so already: d.contours.simplified_m)
    contour_lines = functools.partial(
        _draw_lines, ax, tolerance_m=SIMPLIFY_PX * pixel_m(ref.extent)
        if ref is not None and getattr(d.contours, "simplified_m", None) is None else None)
    if d.ground is not None:
        ax.imshow(hillshade(d.ground.values, d.ground.cell_m), cmap="gray", vmin=0, vmax=1,
                  extent=d.ground.extent, interpolation="nearest", zorder=0)
    if d.depth is not None:
        depth = np.ma.masked_invalid(np.where(d.depth.values >= 0, d.depth.values, np.nan))
        if depth.count():
            im = ax.imshow(depth, cmap=DEPTH_CMAP, alpha=0.6, extent=d.depth.extent, interpolation="nearest",
                           vmin=0, vmax=float(depth.max()) or 1.0, zorder=1)
            cax = fig.add_axes([0.84, 0.58, 0.022, 0.36])
            fig.colorbar(im, cax=cax).set_label("depth of the surface below ground (m)")
    elif d.surface is not None:
        im = ax.imshow(np.ma.masked_invalid(d.surface.values), cmap=DEPTH_CMAP.reversed(), alpha=0.6,
                       extent=d.surface.extent, interpolation="nearest", zorder=1)
        cax = fig.add_axes([0.84, 0.58, 0.022, 0.36])
        fig.colorbar(im, cax=cax).set_label("elevation of the modelled surface (m)")
    if d.contours is not None and len(d.contours):
        from matplotlib.patheffects import withStroke

        ex = d.contours.fields.get("extrapolated", np.zeros(len(d.contours), bool))
        elev = np.asarray(d.contours.fields["elevation_m"], dtype=float)
        contour_lines(d.contours.geoms[~ex], color="0.08", lw=0.9, zorder=3,
                      label="structure contour (m above datum)")
        contour_lines(d.contours.geoms[ex], color="0.08", lw=0.9, ls=(0, (5, 3)), zorder=3,
                      label="structure contour, forecast beyond the data")
        middle = getattr(d.contours, "middle", None)
        for i in _label_lines(d.contours.geoms, elev, getattr(d.contours, "length", None)):
            pt = middle[i] if middle is not None else shapely.line_interpolate_point(d.contours.geoms[i], 0.5,
                                                                                      normalized=True)
            ax.text(shapely.get_x(pt), shapely.get_y(pt), number(elev[i], "g"), fontsize=7, ha="center", va="center",
                    zorder=LABEL_ZORDER, bbox=dict(boxstyle="round,pad=0.15", fc="white", ec="none", alpha=0.85),
                    path_effects=[withStroke(linewidth=2.0, foreground="white")], clip_on=True)
    if d.misfit is not None and len(d.misfit):
        fl = d.misfit.fields.get("flagged", np.zeros(len(d.misfit), bool))
        lines(d.misfit.geoms[fl], color="black", lw=13.0, solid_capstyle="butt", zorder=4)
        lines(d.misfit.geoms[fl], color=FLAG, lw=10.0, solid_capstyle="butt", zorder=4,
              label="contact segment flagged by the misfit check (wide band)")
        lines(d.misfit.geoms, color=CONTACT, lw=1.8, zorder=5, label="mapped contact")
    elif d.contacts is not None and len(d.contacts):
        lines(d.contacts.geoms, color=CONTACT, lw=1.8, zorder=5, label="mapped contact")
    if d.trace is not None and len(d.trace):
        ex = d.trace.fields.get("extrapolated", np.zeros(len(d.trace), bool))
        lines(d.trace.geoms[~ex], color=TRACE, lw=1.3, ls=(0, (8, 2, 1.5, 2)), zorder=8,
              label="predicted outcrop trace")
        lines(d.trace.geoms[ex], color=TRACE, lw=1.3, ls=(0, (1.5, 2.5)), zorder=8,
              label="predicted outcrop trace, forecast beyond the data")
    if d.picks is not None and len(d.picks["x"]):
        sc = ax.scatter(d.picks["x"], d.picks["y"], c=d.picks["z"], cmap=ELEVATION_CMAP, s=16, marker="o",
                        edgecolors="black", linewidths=0.2, zorder=6, label="pick on a contact")
        cax = fig.add_axes([0.84, 0.13, 0.022, 0.38])
        fig.colorbar(sc, cax=cax).set_label("elevation of the pick (m)")
    if ref is not None:
        ax.set_xlim(ref.extent[0], ref.extent[1])
        ax.set_ylim(ref.extent[2], ref.extent[3])
    _plain_axes(ax)
    ax.set_title("The sheet: shaded relief tinted by the depth of the surface, with the model's lines")
    handles, labels = ax.get_legend_handles_labels()
    if handles:
        fig.legend(handles, labels, loc="lower left", bbox_to_anchor=(0.07, 0.005), ncol=2, frameon=False)
    return png_bytes(fig)


def _pole_xy(local, groups) -> np.ndarray:
    """Net coordinates of every pole the net draws: the local attitudes' with a dip direction and
    the group planes'."""
    xy = []
    for dip, ddir in (local or {}).values():
        dip, ddir = np.asarray(dip, float), np.asarray(ddir, float)
        ok = np.isfinite(dip) & np.isfinite(ddir)
        xy += list(zip(*equal_area_xy(*pole_from_dip(ddir[ok], dip[ok]))))
    for _, g in groups:
        if g.get("dip_direction_deg") is not None and g.get("dip_deg") is not None:
            xy.append(tuple(float(v) for v in equal_area_xy(*pole_from_dip(g["dip_direction_deg"], g["dip_deg"]))))
    return np.asarray(xy, float).reshape(-1, 2)


#: Grid spacings (degrees) the close-up chooses from, and the most grid intervals across it.
CLOSEUP_STEPS_DEG = (1.0, 2.0, 5.0, 10.0)
CLOSEUP_MAX_LINES = 16


def closeup_window(centre, half: float, points) -> tuple[tuple[float, float, float, float], float]:
    """The close-up's square ``(xmin, xmax, ymin, ymax)`` on the net: ``half`` either side of
    ``centre`` (the sheet's pole), grown to hold every one of ``points`` (net coordinates) with a
    margin of a twelfth of its width each side; and the spacing in degrees of its grid (the finest of
    :data:`CLOSEUP_STEPS_DEG` with at most :data:`CLOSEUP_MAX_LINES` intervals across: near the
    centre of the net one degree spans about sqrt(2) sin(0.5 deg) = 0.0123 of its radius).

    >>> [round(v, 4) for v in closeup_window((0.0, 0.0), 0.05, [(0.2, 0.0)])[0]]
    [-0.075, 0.225, -0.15, 0.15]
    """
    pts = np.vstack([np.asarray(points, float).reshape(-1, 2),
                     [[centre[0] - half, centre[1] - half], [centre[0] + half, centre[1] + half]]])
    lo, hi = pts.min(axis=0), pts.max(axis=0)
    side = float(np.max(hi - lo))
    if side > 2.0 * half:  # a pole beyond the cone's square: a margin around them all
        side *= 1.2
    mid = (lo + hi) / 2.0
    window = (float(mid[0] - side / 2), float(mid[0] + side / 2), float(mid[1] - side / 2), float(mid[1] + side / 2))
    degree = np.sqrt(2.0) * np.sin(np.radians(0.5))
    step = next((s for s in CLOSEUP_STEPS_DEG if side / (s * degree) <= CLOSEUP_MAX_LINES), CLOSEUP_STEPS_DEG[-1])
    return window, step


def stereonet_figure(d) -> bytes:
    """Poles of the local attitudes and the sheet's plane on the lower-hemisphere equal-area net,
    with a close-up around the sheet's pole that holds every pole drawn."""
    s = d.summary
    plane = s.get("plane") or {}
    groups = sorted((s.get("groups") or {}).get("planes", {}).items())
    fig = _figure("stereonet")
    ax = fig.add_axes([0.03, 0.08, 0.42, 0.84])
    centre = draw_net(ax)
    handles = draw_attitudes(ax, local=d.attitudes, plane=plane, groups=groups) + [centre]
    ax.set_xlim(-1.12, 1.12)
    ax.set_ylim(-1.12, 1.12)
    ax.set_aspect("equal")
    ax.axis("off")
    ax.set_title("Equal-area net, lower hemisphere")
    if plane.get("dip_deg") is not None:
        zx = fig.add_axes([0.50, 0.40, 0.30, 0.52])
        x, y = equal_area_xy(*pole_from_dip(plane.get("dip_direction_deg") or 0.0, plane["dip_deg"]))
        half = max(0.03, 3.0 * np.sqrt(2) * np.sin(np.radians(plane.get("cone95_deg") or 0.0) / 2))
        window, step = closeup_window((float(x), float(y)), half, _pole_xy(d.attitudes, groups))
        side = window[1] - window[0]
        draw_net(zx, step_deg=step, window=tuple(w + e for w, e in zip(window, (-side, side, -side, side))))
        draw_attitudes(zx, local=d.attitudes, plane=plane, groups=groups, pole_size=12.0)
        zx.set_xlim(*window[:2])
        zx.set_ylim(*window[2:])
        zx.set_aspect("equal")
        zx.set_xticks([])
        zx.set_yticks([])
        zx.set_title(f"Close-up around the sheet's pole (grid: {number(step, 'g')}° circles)")
    if handles:
        fig.legend(handles, [h.get_label() for h in handles], loc="lower left", bbox_to_anchor=(0.50, 0.02),
                   frameon=False)
    return png_bytes(fig)


def residuals_figure(d) -> bytes:
    """Residuals of the picks against the model: histogram and map."""
    p = d.picks
    r = p["residual_m"]
    ok = np.isfinite(r)
    fig = _figure("residuals")
    ax = fig.add_axes([0.07, 0.13, 0.36, 0.77])
    if ok.any():
        ax.hist(r[ok], bins=max(10, min(60, int(np.sqrt(ok.sum())))), color="0.55", edgecolor="0.15", lw=0.5)
        rms = float(np.sqrt(np.mean(r[ok] ** 2)))
        ax.axvline(0.0, color="black", lw=1.0)
        ax.set_title(f"{ok.sum()} picks: median {number(np.median(r[ok]), '+.2f')} m, RMS {number(rms)} m")
    ax.set_xlabel("pick elevation minus the modelled surface (m)")
    ax.set_ylabel("number of picks")
    mx = fig.add_axes([0.52, 0.13, 0.36, 0.77])
    if ok.any():
        order = np.argsort(np.abs(r[ok]), kind="stable")  # the largest drawn last, on top
        res = r[ok][order]
        mag = np.abs(res)
        top = float(np.percentile(mag, 99)) or 1.0
        up = res >= 0
        x, y = p["x"][ok][order], p["y"][ok][order]
        sc = mx.scatter(x[up], y[up], c=mag[up], cmap=MAGNITUDE_CMAP, vmin=0, vmax=top, marker="^", s=22,
                        edgecolors="black", linewidths=0.3, label="pick above the surface")
        mx.scatter(x[~up], y[~up], c=mag[~up], cmap=MAGNITUDE_CMAP, vmin=0, vmax=top, marker="v", s=22,
                   edgecolors="black", linewidths=0.3, label="pick below the surface")
        cax = fig.add_axes([0.90, 0.13, 0.018, 0.77])
        fig.colorbar(sc, cax=cax).set_label("size of the residual (m)")
        mx.legend(loc="best", frameon=True)
    _plain_axes(mx)
    mx.set_title("Where the picks depart from the surface")
    return png_bytes(fig)


def models_figure(d) -> bytes:
    """Cross-validation RMSE of each model, with its standard error, the chosen one marked."""
    m = d.summary["model"]
    rank = {k: i for i, k in enumerate(MODEL_ORDER)}
    names = sorted((k for k, v in m.get("cv_rmse_m", {}).items() if v is not None),
                   key=lambda k: (-rank.get(k, len(rank)), k))  # the simplest at the top
    rmse = np.array([m["cv_rmse_m"][k] for k in names], float)
    se = np.array([(m.get("cv_se_m") or {}).get(k) or 0.0 for k in names], float)
    fig = _figure("models")
    ax = fig.add_axes([0.12, 0.16, 0.55, 0.72])
    ys = np.arange(len(names))
    trimmed = (m.get("choice") or {}).get("chi2") or {}
    tx = np.array([(trimmed.get(k) or {}).get("trimmed_rms_m") for k in names], dtype=float)
    right = np.fmax(rmse + se, tx)  # the right end of each row's bar, error bar and marker
    for i, k in enumerate(names):
        chosen = k == m.get("chosen")
        ax.barh(i, rmse[i], xerr=se[i], height=0.6, color="0.25" if chosen else "0.82", edgecolor="black",
                hatch="" if chosen else "//", capsize=4, error_kw=dict(lw=1.0),
                label="chosen model" if chosen else None)
        # the value right of everything drawn on its row, a marker's width further (offset in points)
        ax.annotate(f"RMSE {number(rmse[i])} m" + ("  (chosen)" if chosen else ""), (right[i], i),
                    xytext=(MODEL_MARKER_PT, 0), textcoords="offset points", va="center", fontsize=9)
    keep = np.flatnonzero(np.isfinite(tx))
    if len(keep):
        ax.plot(tx[keep], ys[keep], ls="none", marker="D", mfc="white", mec="black", ms=MODEL_MARKER_PT,
                label="trimmed error the choice compares")
        tol = (m.get("choice") or {}).get("tolerance_m")
        if tol is not None:
            ax.axvline(float(np.min(tx[keep])) + tol, color="black", ls=(0, (2, 2)), lw=1.2,
                       label="best trimmed error + tolerance")
    ax.set_yticks(ys, [f"{k}" for k in names])
    ax.set_xlabel("cross-validation error, RMSE of held-out picks (m); bars: ± one standard error")
    ax.set_title(f"Surface models compared; chosen: {m.get('chosen')}")
    ax.set_xlim(0, max(float(np.nanmax(right)) if len(right) else 1.0, 1e-9) * 1.35)
    ax.legend(loc="upper left", bbox_to_anchor=(1.02, 1.0), frameon=False)
    return png_bytes(fig)


def thickness_figure(d) -> bytes:
    """True thickness: its distribution over the cells within reach of both surfaces, and its map."""
    t = d.summary.get("thickness") or {}
    fig = _figure("thickness")
    ax = fig.add_axes([0.07, 0.14, 0.38, 0.76])
    v = d.thickness_sample
    if v is not None and len(v):
        counts, _, _ = ax.hist(v, bins=50, color="0.6", edgecolor="0.2", lw=0.4)
        ax.set_ylim(0, max(float(counts.max()), 1.0) * 1.4)  # room for the legend above the bars
    for key, ls, word in (("mean_m", "-", "mean"), ("p10_m", (0, (4, 2)), "10th percentile"),
                          ("p90_m", (0, (1, 2)), "90th percentile")):
        if t.get(key) is not None:
            ax.axvline(t[key], color="black", ls=ls, lw=1.4, label=f"{word} {number(t[key], '.1f')} m")
    ax.set_xlabel("true thickness (m)")
    ax.set_ylabel("number of cells (a regular sample)")
    ax.set_title("True thickness between the base and the top")
    if ax.get_legend_handles_labels()[0]:
        ax.legend(loc="best")
    mx = fig.add_axes([0.53, 0.14, 0.34, 0.76])
    if d.true_thickness is not None and np.isfinite(d.true_thickness.values).any():
        im = mx.imshow(np.ma.masked_invalid(d.true_thickness.values), cmap=DEPTH_CMAP, extent=d.true_thickness.extent,
                       interpolation="nearest")
        cax = fig.add_axes([0.89, 0.14, 0.018, 0.76])
        fig.colorbar(im, cax=cax).set_label("true thickness (m)")
    _plain_axes(mx)
    mx.set_title("Where the unit is thicker or thinner")
    return png_bytes(fig)
