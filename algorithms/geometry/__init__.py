"""Geometry: orientation conventions and conversions (``orientation``), apparent dip and
structure-contour spacing (``apparent``), geodesy (grid to true north) and the GDAL-free grid
georeferencing every raster step shares (``grid``).
"""
from strikeline.geometry.apparent import (  # noqa: F401
    apparent_dip,
    apparent_dip_from_strike_angle,
    contour_spacing_from_dip,
    dip_from_contour_spacing,
    true_dip_from_apparent,
)
from strikeline.geometry.geodesy import (  # noqa: F401
    grid_to_true_azimuth,
    meridian_convergence_deg,
)
from strikeline.geometry.grid import (  # noqa: F401
    Grid,
    check_grid_array,
)
from strikeline.geometry.orientation import (  # noqa: F401
    angle_between_normals,
    azimuth_difference,
    dip_direction_from_strike,
    dip_from_normal,
    dip_from_pole,
    normal_from_dip,
    normal_from_pole,
    pole_from_dip,
    pole_from_normal,
    strike_from_dip_direction,
    three_point,
    trend_plunge_from_vector,
    vector_components,
    vector_from_trend_plunge,
)

__all__ = [
    "apparent_dip",
    "apparent_dip_from_strike_angle",
    "contour_spacing_from_dip",
    "dip_from_contour_spacing",
    "true_dip_from_apparent",
    "grid_to_true_azimuth",
    "meridian_convergence_deg",
    "Grid",
    "check_grid_array",
    "angle_between_normals",
    "azimuth_difference",
    "dip_direction_from_strike",
    "dip_from_normal",
    "dip_from_pole",
    "normal_from_dip",
    "normal_from_pole",
    "pole_from_dip",
    "pole_from_normal",
    "strike_from_dip_direction",
    "three_point",
    "trend_plunge_from_vector",
    "vector_components",
    "vector_from_trend_plunge",
]
