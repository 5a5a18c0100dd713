"""The report's colour ramps read in greyscale: lightness falls from end to end."""
import numpy as np
import pytest

from strikeline.report.palette import DEPTH_CMAP, ELEVATION_CMAP, MAGNITUDE_CMAP, lightness


@pytest.mark.parametrize("rgb, lstar", [
    # Source: CIE L* of the sRGB primaries and of 50% grey, D65 (tabulated e.g. by B. Lindbloom's
    # colour calculator; from memory to two decimals)
    ((1.0, 0.0, 0.0), 53.24), ((0.0, 1.0, 0.0), 87.73), ((0.0, 0.0, 1.0), 32.30),
    ((0.5, 0.5, 0.5), 53.39), ((1.0, 1.0, 1.0), 100.0), ((0.0, 0.0, 0.0), 0.0)])
def test_lightness_of_known_colours(rgb, lstar):
    assert float(lightness(rgb)) == pytest.approx(lstar, abs=0.01)


@pytest.mark.parametrize("cmap", [DEPTH_CMAP, ELEVATION_CMAP, MAGNITUDE_CMAP], ids=lambda c: c.name)
def test_ramps_fall_in_lightness(cmap):
    lstar = lightness(cmap(np.linspace(0, 1, 256)))
    assert np.all(np.diff(lstar) < 0), cmap.name
    assert lstar[0] - lstar[-1] > 70  # from near white to near black: a wide greyscale range
