"""The steps of a run: inputs, picks, attitude, surface, maps, summary and written outputs.
The CLI and the QGIS adapter call these; they hold no maths of their own.
"""
from strikeline.pipeline.options import (  # noqa: F401
    RunOptions,
    check_options,
    check_unit_options,
    CLI_OPTION_NAMES,
    SPLINE_SMOOTHING,
    MAX_SIGMA_M,
)
from strikeline.pipeline.inputs import (  # noqa: F401
    Inputs,
    reproject_to,
    borehole_points,
    orientation_rows,
    load_inputs,
    assemble_inputs,
    map_unit_polygons,
)
from strikeline.pipeline.units import (  # noqa: F401
    UNIT_VIOLATION_M,
    UNIT_MARGIN_SIGMAS,
    map_unit_bounds,
    map_unit_check,
    unit_conflicts_layer,
)
from strikeline.pipeline.steps import (  # noqa: F401
    collect_picks,
    fit_picks,
    pick_sigmas,
    attitude_of,
    POOR_DIRECTION_DEG,
    surface_grid,
    contact_segments,
    segment_labels,
    segment_block_m,
    smooth_trend,
    model_surface,
    structure_contours,
    depth_trace_misfit,
    log_model_choice,
    error_scale_hint,
)
from strikeline.pipeline.compute import (  # noqa: F401
    Results,
    compute,
)
from strikeline.pipeline.summary import (  # noqa: F401
    build_summary,
)
from strikeline.pipeline.outputs import (  # noqa: F401
    write_results,
    picks_layer,
    attitudes_layer,
    result_rasters,
    result_layers,
)
from strikeline.pipeline.run import (  # noqa: F401
    run,
)
from strikeline.defaults import (  # noqa: F401
    DEFAULT_BOREHOLE_SIGMA_M,
    DEFAULT_CONTACT_SIGMA_M,
    DEFAULT_CONTOUR_SIGMA_M,
    DEFAULT_DEM_SIGMA_M,
    DEFAULT_ORIENTATION_SIGMA_DEG,
    MISFIT_Z,
    MODELS,
)
