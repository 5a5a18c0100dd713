"""Surface models of a contact ``z(x, y)``: picks and constraints prepared for fitting, the plane
and quadratic trend, the thin-plate spline (within bounds), the relaxation to the trend beyond
the data, cross-validated model choice and the misfit check's hold-out fits
(:func:`fit_surface`, returning a :class:`SurfaceModel`), and the map's unit polygons as bounds.
The independent fits of cross-validation and of the hold-outs run two at a time on threads with
one BLAS thread each (:mod:`strikeline.surfaces.parallel`).
"""
from strikeline.surfaces.bounded import (  # noqa: F401
    BOUND_PIN_SIGMA_M,
    BOUND_TOLERANCE_M,
    MAX_ACTIVE_BOUNDS,
    MAX_BOUND_ITERATIONS,
)
from strikeline.surfaces.data import (  # noqa: F401
    DEFAULT_BOREHOLE_SIGMA_M,
    DEFAULT_ORIENTATION_SIGMA_DEG,
    MAX_DIP_DEG,
)
from strikeline.surfaces.fit import (  # noqa: F401
    MODEL_CHOICES,
    MODELS,
    REACH_PERCENTILE,
    SMOOTHING_CHOICES,
    TAPER_FRACTION,
    fit_surface,
)
from strikeline.surfaces.holdout import (  # noqa: F401
    CHECK_BLOCK_FACTOR,
    COARSE_HOLDOUT_FACTOR,
)
from strikeline.surfaces.hull import (  # noqa: F401
    distance_to_data,
)
from strikeline.surfaces.kernel import (  # noqa: F401
    tps_kernel,
)
from strikeline.surfaces.model import (  # noqa: F401
    GRID_TOLERANCE_M,
    GridEvaluation,
    SurfaceModel,
)
from strikeline.surfaces.polynomial import (  # noqa: F401
    FALLBACK_PICK_SIGMA_M,
    PICK_SIGMA_FLOOR_M,
)
from strikeline.surfaces.units import (  # noqa: F401
    DEFAULT_MAX_POINTS,
    MARGIN_CELLS,
    MIN_SPACING_CELLS,
    UNIT_SIDES,
    UnitBounds,
    bound_violation_m,
    parse_unit_names,
    unit_bounds,
)

__all__ = [
    "BOUND_PIN_SIGMA_M",
    "BOUND_TOLERANCE_M",
    "MAX_ACTIVE_BOUNDS",
    "MAX_BOUND_ITERATIONS",
    "DEFAULT_BOREHOLE_SIGMA_M",
    "DEFAULT_ORIENTATION_SIGMA_DEG",
    "MAX_DIP_DEG",
    "MODEL_CHOICES",
    "MODELS",
    "REACH_PERCENTILE",
    "SMOOTHING_CHOICES",
    "TAPER_FRACTION",
    "fit_surface",
    "CHECK_BLOCK_FACTOR",
    "COARSE_HOLDOUT_FACTOR",
    "distance_to_data",
    "tps_kernel",
    "GRID_TOLERANCE_M",
    "GridEvaluation",
    "SurfaceModel",
    "FALLBACK_PICK_SIGMA_M",
    "PICK_SIGMA_FLOOR_M",
    "DEFAULT_MAX_POINTS",
    "MARGIN_CELLS",
    "MIN_SPACING_CELLS",
    "UNIT_SIDES",
    "UnitBounds",
    "bound_violation_m",
    "parse_unit_names",
    "unit_bounds",
]
