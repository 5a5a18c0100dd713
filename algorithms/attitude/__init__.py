"""Attitude of a plane: total-least-squares fit, quality, 95% confidence, pick errors and
moving-window (local) attitudes.
"""
from strikeline.attitude.confidence import (  # noqa: F401
    Z95,
    LEVEL,
    MIN_BOOTSTRAP_POINTS,
    MIN_REPLICATES,
    MIN_BOOTSTRAP_BLOCKS,
    PICK_SOURCES,
    PlaneConfidence,
    CHI2_2DOF_95,
    dip_is_significant,
    bootstrap_plane,
    analytic_plane_covariance,
    analytic_plane_confidence,
    monte_carlo_plane,
    combine_confidence,
    plane_confidence,
    contour_sigma_to_vertical,
    vertical_sigma_of_picks,
)
from strikeline.attitude.fitting import (  # noqa: F401
    COLLINEAR_RATIO,
    PlaneFit,
    scatter_eigen,
    fit_plane,
    plane_elevation,
)
from strikeline.attitude.local import (  # noqa: F401
    CONFIDENCE_METHODS,
    DEFAULT_WINDOW_PICKS,
    DEFAULT_MIN_POINTS,
    MIN_WINDOW_BLOCKS,
    LocalAttitudes,
    default_window_m,
    fallback_window_m,
    centres_along_contacts,
    grid_centres,
    local_attitudes,
)
from strikeline.attitude.quality import (  # noqa: F401
    QUALITIES,
    GOOD_MIN_COPLANARITY,
    GOOD_MAX_COLLINEARITY,
    UNDETERMINED_MIN_COLLINEARITY,
    UNDETERMINED_MAX_COPLANARITY,
    DEFAULT_MIN_RELIEF_M,
    STRAIGHT_MAX_MAP_SPREAD,
    RELIEF_SIGMAS,
    MISFIT_SIGMAS,
    GOOD_MAX_DIP_CI95_DEG,
    PlaneQuality,
    map_spread,
    shape_measures,
    classify_planes,
    assess_plane,
)
