"""Elevation picks on mapped contacts: the pick set, line inputs and densifying, picks from a DEM
and from topographic contour lines, the ground slope from contours, and thinning to one pick per
lattice cell.
"""
from strikeline.picks.contours import (  # noqa: F401
    ground_slope_from_contours,
    picks_from_contours,
)
from strikeline.picks.dem import (  # noqa: F401
    picks_from_dem,
    sample_bilinear,
)
from strikeline.picks.lines import (  # noqa: F401
    densify_lines,
)
from strikeline.picks.pickset import (  # noqa: F401
    SOURCES,
    PickSet,
)
from strikeline.picks.thinning import (  # noqa: F401
    ThinnedPicks,
    choose_cell_size,
    thin_picks,
)

__all__ = [
    "ground_slope_from_contours",
    "picks_from_contours",
    "picks_from_dem",
    "sample_bilinear",
    "densify_lines",
    "SOURCES",
    "PickSet",
    "ThinnedPicks",
    "choose_cell_size",
    "thin_picks",
]
