"""Elevation picks on mapped contacts: pick sets, DEM and contour picks, line sampling, thinning.
"""
from strikeline.picks.core import (  # noqa: F401
    SOURCES,
    PickSet,
    densify_lines,
    sample_bilinear,
    picks_from_dem,
    picks_from_contours,
    ground_slope_from_contours,
)
from strikeline.picks.thinning import (  # noqa: F401
    ThinnedPicks,
    choose_cell_size,
    thin_picks,
)
