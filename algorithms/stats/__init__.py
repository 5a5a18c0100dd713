"""Statistics shared by attitudes and surfaces: robust least squares, spatial hold-out blocks,
cross-validation scores, model choice against the stated errors and the growth of error with distance.
"""
from strikeline.stats.crossval import (  # noqa: F401
    SELECTION_RULES,
    CHI2_ALPHA,
    MIN_BLOCK_CELLS,
    CVScore,
    make_folds,
    spatial_block_groups,
    segment_groups,
    typical_gap_m,
    residual_correlation_m,
    holdout_block_m,
    cross_validate,
    ModelChoice,
    choose_model,
    TRIM_FRACTION,
    trimmed_mean_square,
    select_model,
    ErrorGrowth,
    fit_error_growth,
    gcv_from_spectrum,
)
from strikeline.stats.robust import (  # noqa: F401
    BIWEIGHT_C,
    MAD_TO_SIGMA,
    robust_lstsq,
)
