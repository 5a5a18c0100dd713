"""The equal-area lower-hemisphere projection of lines (a Schmidt net) and its drawing.

A line of trend ``t`` and plunge ``p`` is the point of the lower hemisphere at angle
``theta = 90 - p`` from the vertical; the Lambert azimuthal equal-area projection about the
downward vertical puts it at distance ``r = sqrt(2) sin(theta / 2)`` from the centre along the
azimuth ``t`` (Snyder 1987, *Map Projections - A Working Manual*, USGS Professional Paper 1395,
ch. 24, polar aspect: ``rho = 2 R sin(45 deg - phi / 2)`` with ``theta = 90 deg - phi``, on a
sphere of radius ``R = 1/sqrt(2)`` so that the horizon is the unit circle). Equal areas of the sphere stay equal on the net, so a cloud of poles is not thinned
towards the rim as on the equal-angle (Wulff) net.
"""
from __future__ import annotations

import functools

import numpy as np

from strikeline.report.sentences import number
from strikeline.geometry.orientation import pole_from_dip, trend_plunge_from_vector, vector_from_trend_plunge


def equal_area_xy(trend_deg, plunge_deg):
    """Net coordinates ``(x east, y north)`` of lines on the unit-radius lower-hemisphere
    equal-area net (a horizontal line lies on the unit circle, a vertical one at the centre).

    >>> x, y = equal_area_xy(270.0, 60.0)  # the pole of a plane dipping 30 toward 090
    >>> round(float(x), 6), round(float(y), 6)
    (-0.366025, -0.0)
    """
    t = np.radians(np.asarray(trend_deg, dtype=float))
    theta = np.radians(90.0 - np.asarray(plunge_deg, dtype=float))
    r = np.sqrt(2.0) * np.sin(theta / 2.0)
    return r * np.sin(t), r * np.cos(t)


def small_circle(trend_deg: float, plunge_deg: float, half_angle_deg: float, *, n: int = 361):
    """Trend and plunge of ``n`` lines at ``half_angle_deg`` around a line (a cone about it),
    each taken as a line (an upward direction reversed into the lower hemisphere)."""
    axis = vector_from_trend_plunge(trend_deg, plunge_deg)
    ref = np.array([0.0, 0.0, 1.0]) if abs(axis[2]) < 0.9 else np.array([1.0, 0.0, 0.0])
    u = np.cross(axis, ref)
    u /= np.linalg.norm(u)
    w = np.cross(axis, u)
    a = np.radians(half_angle_deg)
    phi = np.linspace(0.0, 2.0 * np.pi, n)
    v = np.cos(a) * axis + np.sin(a) * (np.cos(phi)[:, None] * u + np.sin(phi)[:, None] * w)
    return trend_plunge_from_vector(v)


def great_circle(dip_deg: float, dip_direction_deg: float, *, n: int = 181):
    """Trend and plunge of ``n`` lines in a plane, from one end of its strike to the other."""
    strike = np.radians(float(dip_direction_deg) - 90.0)
    s = np.array([np.sin(strike), np.cos(strike), 0.0])  # horizontal, along strike
    d = vector_from_trend_plunge(dip_direction_deg, dip_deg)  # down the dip
    phi = np.linspace(0.0, np.pi, n)
    v = np.cos(phi)[:, None] * s + np.sin(phi)[:, None] * d
    return trend_plunge_from_vector(v)


def _split_at_rim(x, y, *, jump: float = 0.5):
    """Break a projected curve where it wraps across the net (a jump of more than ``jump``)."""
    x, y = np.asarray(x, float), np.asarray(y, float)
    cut = np.flatnonzero(np.hypot(np.diff(x), np.diff(y)) > jump) + 1
    return [(a, b) for a, b in zip(np.split(x, cut), np.split(y, cut)) if len(a) > 1]


def _within(x, y, window):
    """``(x, y)`` with the points outside ``window`` (xmin, xmax, ymin, ymax) as NaN (a gap)."""
    if window is None:
        return x, y
    out = (x < window[0]) | (x > window[1]) | (y < window[2]) | (y > window[3])
    return np.where(out, np.nan, x), np.where(out, np.nan, y)


@functools.lru_cache(maxsize=4)
def _net_curves(step_deg: float, n: int) -> tuple:
    """The net's grid as projected curves (computed once per spacing and resolution)."""
    curves = []
    for a in np.arange(step_deg, 180.0, step_deg):  # great circles striking N-S
        dip, ddir = (a, 90.0) if a <= 90 else (180.0 - a, 270.0)
        curves.append(great_circle(dip, ddir, n=n))
    for a in np.arange(step_deg, 180.0, step_deg):  # small circles about the N-S horizontal axis
        if abs(a - 90.0) > 1e-9:
            curves.append(small_circle(0.0, 0.0, a, n=2 * n - 1))
    return tuple(xy for t, p in curves for xy in _split_at_rim(*equal_area_xy(t, p)))


def draw_net(ax, *, step_deg: float = 10.0, window=None):
    """The net's frame on ``ax``: the horizon, great circles through N-S every ``step_deg`` and
    small circles about the N-S axis every ``step_deg``, in light grey, with N, E, S, W marked and
    a cross at the centre (the vertical), whose legend handle is returned.
    With ``window`` (xmin, xmax, ymin, ymax) only the grid inside it is drawn (a close-up: no
    letters and no centre cross, whose fixed size would fill a close-up; None is returned)."""
    grid = dict(color="0.85", lw=0.5, zorder=0)
    segments = []
    for x, y in _net_curves(float(step_deg), 181 if window is None else 2001):
        x, y = _within(x, y, window)
        ok = np.isfinite(x)
        edges = np.flatnonzero(np.diff(np.r_[0, ok.astype(np.int8), 0]))
        segments += [np.column_stack([x[a:b], y[a:b]]) for a, b in zip(edges[::2], edges[1::2]) if b - a > 1]
    from matplotlib.collections import LineCollection

    ax.add_collection(LineCollection(segments, colors=grid["color"], linewidths=grid["lw"], zorder=grid["zorder"]))
    phi = np.linspace(0, 2 * np.pi, 721)
    ax.plot(np.cos(phi), np.sin(phi), color="0.2", lw=1.2, zorder=3)
    if window is not None:
        return None
    for word, (x, y) in {"N": (0, 1.06), "E": (1.06, 0), "S": (0, -1.06), "W": (-1.06, 0)}.items():
        ax.text(x, y, word, ha="center", va="center", fontsize=11, color="0.15")
    (centre,) = ax.plot([-0.03, 0.03, np.nan, 0, 0], [0, 0, np.nan, -0.03, 0.03], color="0.4", lw=0.8,
                        label="centre of the net (the vertical)")
    return centre


#: Markers of the group planes' poles, in turn (told apart by shape, not colour).
GROUP_MARKERS = ("s", "D", "^", "v", "p", "h", "<", ">")


def draw_attitudes(ax, *, local=None, plane=None, groups=(), pole_size: float = 16.0) -> list:
    """Poles of local attitudes, the sheet's plane (pole, 95% cone, great circle) and group
    planes on a net drawn by :func:`draw_net`; returns the legend handles.

    ``local`` maps a quality class to ``(dip_deg, dip_direction_deg)`` arrays; ``plane`` is the
    summary's plane (``dip_deg``, ``dip_direction_deg``, ``cone95_deg``); ``groups`` is a list of
    ``(label, plane)``. Classes differ by marker shape and fill, not by colour alone.
    """
    handles = []
    styles = {"good": dict(marker="o", mfc="0.25", mec="0.1", ms=5),
              "weak": dict(marker="o", mfc="white", mec="0.35", ms=5),
              "undetermined": dict(marker="x", color="0.55", ms=5)}
    for quality, (dip, ddir) in (local or {}).items():
        ok = np.isfinite(dip) & np.isfinite(ddir)
        if not ok.any():
            continue
        t, p = pole_from_dip(np.asarray(ddir)[ok], np.asarray(dip)[ok])
        x, y = equal_area_xy(t, p)
        style = styles.get(quality, styles["weak"])
        no_dir = int((np.isfinite(dip) & ~np.isfinite(ddir)).sum())
        words = f"{ok.sum()}" + (f"; {no_dir} more have no dip direction" if no_dir else "")
        (h,) = ax.plot(x, y, ls="none", zorder=4, label=f"pole of a local attitude, {quality} ({words})", **style)
        handles.append(h)
    unknown = sum(int((~np.isfinite(np.asarray(dip, float))).sum()) for dip, _ in (local or {}).values())
    if unknown:  # an entry without a mark: said, not drawn
        (h,) = ax.plot([], [], ls="none", marker="none",
                       label=f"{unknown} local attitude{'s' if unknown > 1 else ''} undetermined, not drawn")
        handles.append(h)
    for k, (label, g) in enumerate(groups):
        if g.get("dip_direction_deg") is None:
            continue
        x, y = equal_area_xy(*pole_from_dip(g["dip_direction_deg"], g["dip_deg"]))
        marker = GROUP_MARKERS[k % len(GROUP_MARKERS)]
        (h,) = ax.plot([x], [y], ls="none", marker=marker, mfc="white", mec="black", ms=8, mew=1.4, zorder=6,
                       label=f"pole of group {label}")
        handles.append(h)
    if plane and plane.get("dip_deg") is not None:
        ddir = plane.get("dip_direction_deg")
        ddir = 0.0 if ddir is None else ddir
        t, p = pole_from_dip(ddir, plane["dip_deg"])
        x, y = equal_area_xy(t, p)
        (h,) = ax.plot([x], [y], ls="none", marker="*", mfc="black", mec="white", ms=pole_size, mew=0.8, zorder=7,
                       label="pole of the sheet's plane")
        handles.append(h)
        if plane.get("cone95_deg") is not None:
            ct, cp = small_circle(float(t), float(p), float(plane["cone95_deg"]))
            h = None
            for cx, cy in _split_at_rim(*equal_area_xy(ct, cp)):
                (h,) = ax.plot(cx, cy, color="black", lw=1.6, zorder=8,
                               label=f"its 95% confidence cone ({number(plane['cone95_deg'])}°)")
            if h is not None:
                handles.append(h)
        gt, gp = great_circle(plane["dip_deg"], ddir)
        h = None
        for gx, gy in _split_at_rim(*equal_area_xy(gt, gp)):
            (h,) = ax.plot(gx, gy, color="0.1", lw=1.2, ls=(0, (6, 3)), zorder=5, label="the sheet's plane")
        if h is not None:
            handles.append(h)
    return handles
