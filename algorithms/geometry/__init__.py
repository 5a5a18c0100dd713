"""Geometry: orientation conventions and conversions, geodesy (grid to true north) and the
GDAL-free grid georeferencing every raster step shares.
"""
from strikeline.geometry.geodesy import (  # noqa: F401
    meridian_convergence_deg,
    grid_to_true_azimuth,
)
from strikeline.geometry.grid import (  # noqa: F401
    Grid,
    check_grid_array,
)
from strikeline.geometry.orientation import (  # noqa: F401
    normal_from_dip,
    dip_from_normal,
    strike_from_dip_direction,
    dip_direction_from_strike,
    pole_from_dip,
    dip_from_pole,
    three_point,
    azimuth_difference,
    apparent_dip_from_strike_angle,
    apparent_dip,
    true_dip_from_apparent,
    contour_spacing_from_dip,
    dip_from_contour_spacing,
    vector_from_trend_plunge,
    trend_plunge_from_vector,
    pole_from_normal,
    normal_from_pole,
    angle_between_normals,
)
