"""Attitude of a plane from picks: the total-least-squares fit, its quality, its 95% confidence
and moving-window (local) attitudes.

``fitting`` fits the plane; ``quality`` rates it (shape measures, flat ground, width of the
confidence); ``confidence`` holds the record of a plane's 95% confidence and combines estimates,
which come from ``resampling`` (bootstrap of picks or blocks, Monte Carlo of stated errors) and
``analytic`` (first-order covariance of the normal); ``pick_errors`` turns DEM accuracy and contour
tolerance into vertical errors of the picks; ``windows`` sizes and places the windows that
``local`` fits. ``kernels`` holds the batched computations these share (import it by module).
"""
from strikeline.attitude.analytic import (  # noqa: F401
    analytic_plane_confidence,
    analytic_plane_covariance,
)
from strikeline.attitude.confidence import (  # noqa: F401
    CHI2_2DOF_95,
    LEVEL,
    Z95,
    PlaneConfidence,
    combine_confidence,
    dip_is_significant,
)
from strikeline.attitude.fitting import (  # noqa: F401
    COLLINEAR_RATIO,
    PlaneFit,
    fit_plane,
    plane_elevation,
    scatter_eigen,
)
from strikeline.attitude.local import (  # noqa: F401
    CONFIDENCE_METHODS,
    DEFAULT_WINDOW_RESAMPLES,
    MIN_WINDOW_BLOCKS,
    LocalAttitudes,
    local_attitudes,
)
from strikeline.attitude.pick_errors import (  # noqa: F401
    PICK_SOURCES,
    contour_sigma_to_vertical,
    vertical_sigma_of_picks,
)
from strikeline.attitude.quality import (  # noqa: F401
    DEFAULT_MIN_RELIEF_M,
    GOOD_MAX_COLLINEARITY,
    GOOD_MAX_DIP_CI95_DEG,
    GOOD_MIN_COPLANARITY,
    MISFIT_SIGMAS,
    QUALITIES,
    RELIEF_SIGMAS,
    STRAIGHT_MAX_MAP_SPREAD,
    UNDETERMINED_MAX_COPLANARITY,
    UNDETERMINED_MIN_COLLINEARITY,
    PlaneQuality,
    assess_plane,
    classify_planes,
    map_spread,
    shape_measures,
)
from strikeline.attitude.resampling import (  # noqa: F401
    DEFAULT_RESAMPLES,
    MIN_BOOTSTRAP_BLOCKS,
    MIN_BOOTSTRAP_POINTS,
    MIN_REPLICATES,
    bootstrap_plane,
    monte_carlo_plane,
    plane_confidence,
)
from strikeline.attitude.windows import (  # noqa: F401
    DEFAULT_MIN_POINTS,
    DEFAULT_WINDOW_PICKS,
    centres_along_contacts,
    default_window_m,
    fallback_window_m,
    grid_centres,
)

__all__ = [
    "analytic_plane_confidence",
    "analytic_plane_covariance",
    "CHI2_2DOF_95",
    "LEVEL",
    "Z95",
    "PlaneConfidence",
    "combine_confidence",
    "dip_is_significant",
    "COLLINEAR_RATIO",
    "PlaneFit",
    "fit_plane",
    "plane_elevation",
    "scatter_eigen",
    "CONFIDENCE_METHODS",
    "DEFAULT_WINDOW_RESAMPLES",
    "MIN_WINDOW_BLOCKS",
    "LocalAttitudes",
    "local_attitudes",
    "PICK_SOURCES",
    "contour_sigma_to_vertical",
    "vertical_sigma_of_picks",
    "DEFAULT_MIN_RELIEF_M",
    "GOOD_MAX_COLLINEARITY",
    "GOOD_MAX_DIP_CI95_DEG",
    "GOOD_MIN_COPLANARITY",
    "MISFIT_SIGMAS",
    "QUALITIES",
    "RELIEF_SIGMAS",
    "STRAIGHT_MAX_MAP_SPREAD",
    "UNDETERMINED_MAX_COPLANARITY",
    "UNDETERMINED_MIN_COLLINEARITY",
    "PlaneQuality",
    "assess_plane",
    "classify_planes",
    "map_spread",
    "shape_measures",
    "DEFAULT_RESAMPLES",
    "MIN_BOOTSTRAP_BLOCKS",
    "MIN_BOOTSTRAP_POINTS",
    "MIN_REPLICATES",
    "bootstrap_plane",
    "monte_carlo_plane",
    "plane_confidence",
    "DEFAULT_MIN_POINTS",
    "DEFAULT_WINDOW_PICKS",
    "centres_along_contacts",
    "default_window_m",
    "fallback_window_m",
    "grid_centres",
]
