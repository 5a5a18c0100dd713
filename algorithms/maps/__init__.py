"""Grids and lines drawn from a surface: dip and depth grids, predicted trace and misfit QA,
thickness and isopachs, and contour lines checked and trimmed to the data (GDAL traces them, in
:mod:`strikeline.io.contours`).
"""
from strikeline.maps.contours import (  # noqa: F401
    check_contour_levels,
    supported_vertices,
    trim_contour_fringe,
)
from strikeline.maps.dipgrids import (  # noqa: F401
    dip_grids,
    depth_below_ground,
)
from strikeline.maps.thickness import (  # noqa: F401
    SLOPE_SENSES,
    WIDTH_KINDS,
    thickness_from_outcrop_width,
    outcrop_width_gives_thickness,
    thickness_between_points,
    vertical_thickness,
    thickness_from_vertical,
    thickness_from_borehole,
    isopach_grids,
)
from strikeline.maps.trace import (  # noqa: F401
    line_segments,
    distance_to_lines,
    trace_misfit,
    split_lines_by_flag,
    vertex_spacing_m,
    split_into_segments,
    contact_misfit_segments,
    MIN_DEPTH_SLOPE,
    holdout_misfit_segments,
)

__all__ = [
    "check_contour_levels",
    "supported_vertices",
    "trim_contour_fringe",
    "dip_grids",
    "depth_below_ground",
    "SLOPE_SENSES",
    "WIDTH_KINDS",
    "thickness_from_outcrop_width",
    "outcrop_width_gives_thickness",
    "thickness_between_points",
    "vertical_thickness",
    "thickness_from_vertical",
    "thickness_from_borehole",
    "isopach_grids",
    "line_segments",
    "distance_to_lines",
    "trace_misfit",
    "split_lines_by_flag",
    "vertex_spacing_m",
    "split_into_segments",
    "contact_misfit_segments",
    "MIN_DEPTH_SLOPE",
    "holdout_misfit_segments",
]
