"""The report's colours: three colour ramps of our own whose lightness falls monotonically from
end to end (so they read in greyscale and in print), and the line colours of the map.

Lightness is CIE 1976 L* of the sRGB colour (IEC 61966-2-1 transfer function, D65 white), see
:func:`lightness`; ``tests/report/test_palette.py`` checks each ramp with it.
"""
from __future__ import annotations

import numpy as np
from matplotlib.colors import LinearSegmentedColormap

#: Depth below ground, thickness: pale sand to deep slate.
DEPTH_STOPS = ("#f6f1e3", "#cdd6b4", "#8fae9c", "#5b8790", "#385f7a", "#1d3554", "#0d1a2e")
#: Elevation of the picks: pale straw to dark umber.
ELEVATION_STOPS = ("#fdf3c4", "#f5cf7a", "#e39a4c", "#c2652f", "#8f3b1f", "#5a1f12", "#2a0d07")
#: Size of a residual: pale grey-lilac to near black violet.
MAGNITUDE_STOPS = ("#f1eef6", "#d2c6e0", "#ac97c8", "#8467a8", "#5c3f82", "#37245a", "#1a0f30")

DEPTH_CMAP = LinearSegmentedColormap.from_list("strikeline_depth", DEPTH_STOPS)
ELEVATION_CMAP = LinearSegmentedColormap.from_list("strikeline_elevation", ELEVATION_STOPS)
MAGNITUDE_CMAP = LinearSegmentedColormap.from_list("strikeline_magnitude", MAGNITUDE_STOPS)

#: Line colours of the map (each class also has its own width or dash).
CONTACT = "#5a1f12"  # mapped contact: dark umber, solid
TRACE = "#0d1a2e"  # predicted trace: near-black slate, dash-dot
FLAG = "#f5cf7a"  # flagged misfit: a wide pale band edged in black


def lightness(rgb) -> np.ndarray:
    """CIE 1976 L* (0-100) of sRGB colours in 0-1 (array ``(..., 3)``).

    sRGB to linear light by IEC 61966-2-1 (``c / 12.92`` up to 0.04045, else
    ``((c + 0.055) / 1.055) ** 2.4``); relative luminance ``Y = 0.2126 R + 0.7152 G + 0.0722 B``;
    ``L* = 116 f(Y) - 16`` with ``f(t) = t ** (1/3)`` above ``(6/29) ** 3``, else
    ``t / (3 (6/29) ** 2) + 4/29`` (CIE 15:2004).

    >>> [round(float(v), 2) for v in lightness([[1, 1, 1], [0, 0, 0], [0.5, 0.5, 0.5]])]
    [100.0, 0.0, 53.39]
    """
    c = np.asarray(rgb, dtype=float)[..., :3]
    lin = np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)
    y = lin @ np.array([0.2126, 0.7152, 0.0722])
    d = 6.0 / 29.0
    f = np.where(y > d ** 3, np.cbrt(y), y / (3 * d * d) + 4.0 / 29.0)
    return 116.0 * f - 16.0
