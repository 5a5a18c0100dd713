"""Vertical errors of picks from their sources (strikeline.attitude.pick_errors)."""
import numpy as np
import pytest

from strikeline.attitude import contour_sigma_to_vertical, vertical_sigma_of_picks
from strikeline.errors import InputError


def test_contour_sigma_through_the_ground_slope():
    # Source: a horizontal shift s on ground of slope sigma changes elevation by s tan(sigma)
    # (used in reverse by the U.S. National Map Accuracy Standards, 1947; from memory)
    assert np.allclose(contour_sigma_to_vertical(5.0, [0.0, 45.0, 26.5650511771]),
                       [0.0, 5.0, 2.5])
    with pytest.raises(InputError, match="slope_deg"):
        contour_sigma_to_vertical(5.0, 90.0)


def test_vertical_sigma_of_picks_by_source():
    # Source: hand-worked - DEM picks take the DEM's sigma as is; contour picks s tan(slope):
    # 4 m x tan 45 deg = 4 m, 4 m x tan 0 deg = 0 m
    got = vertical_sigma_of_picks(["dem", "contours", "contours"], [10.0, 45.0, 0.0],
                                  dem_sigma_m=1.5, contour_sigma_m=4.0)
    assert np.allclose(got, [1.5, 4.0, 0.0])
    with pytest.raises(InputError, match="dem, contours"):
        vertical_sigma_of_picks(["lidar"], dem_sigma_m=1.0)
    with pytest.raises(InputError, match="slope_deg is needed"):
        vertical_sigma_of_picks(["contours"], contour_sigma_m=1.0)
