"""Statistics shared by attitudes and surfaces: robust least squares, hold-out groups for
cross-validation (folds, spatial blocks, contact segments and their size), cross-validation and
GCV scores, model choice against the stated pick error, and the growth of error with distance.
"""
from strikeline.stats.blocks import (  # noqa: F401
    MIN_BLOCK_CELLS,
    holdout_block_m,
    make_folds,
    residual_correlation_m,
    segment_groups,
    spatial_block_groups,
    typical_gap_m,
)
from strikeline.stats.choice import (  # noqa: F401
    CHI2_ALPHA,
    SELECTION_RULES,
    TRIM_FRACTION,
    ModelChoice,
    choose_model,
    select_model,
    trimmed_mean_square,
)
from strikeline.stats.growth import (  # noqa: F401
    ErrorGrowth,
    fit_error_growth,
)
from strikeline.stats.robust import (  # noqa: F401
    BIWEIGHT_C,
    MAD_TO_SIGMA,
    robust_lstsq,
)
from strikeline.stats.scores import (  # noqa: F401
    CVScore,
    cross_validate,
    gcv_from_spectrum,
)

__all__ = [
    "MIN_BLOCK_CELLS",
    "holdout_block_m",
    "make_folds",
    "residual_correlation_m",
    "segment_groups",
    "spatial_block_groups",
    "typical_gap_m",
    "CHI2_ALPHA",
    "SELECTION_RULES",
    "TRIM_FRACTION",
    "ModelChoice",
    "choose_model",
    "select_model",
    "trimmed_mean_square",
    "ErrorGrowth",
    "fit_error_growth",
    "BIWEIGHT_C",
    "MAD_TO_SIGMA",
    "robust_lstsq",
    "CVScore",
    "cross_validate",
    "gcv_from_spectrum",
]
