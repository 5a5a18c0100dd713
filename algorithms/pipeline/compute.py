"""The chain in memory: from :class:`~strikeline.pipeline.inputs.Inputs` to :class:`Results`.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from strikeline.io.window_means import PICTURE_CELLS
from strikeline.attitude.fitting import PlaneFit
from strikeline.geometry.grid import Grid
from strikeline.maps.dipgrids import dip_grids
from strikeline.io.files import json_ready
from strikeline.attitude import LocalAttitudes, fallback_window_m, local_attitudes
from strikeline.picks import (PickSet)
from strikeline.surfaces import SurfaceModel
from strikeline.stats import typical_gap_m
from strikeline.maps.thickness import isopach_grids
from strikeline.maps.trace import (vertex_spacing_m)
from strikeline.pipeline.inputs import Inputs
from strikeline.pipeline.options import CLI_OPTION_NAMES, SEGMENT_CELLS, Log, RunOptions, _quiet
from strikeline.pipeline.planes import group_labels, planes_by_group
from strikeline.pipeline.progress import COMPUTE_STEPS, RunProgress
from strikeline.pipeline.steps import attitude_of, collect_picks, contact_segments, depth_trace_misfit, fit_picks, log_model_choice, model_surface, pick_sigmas, structure_contours, surface_grid
from strikeline.pipeline.summary import build_summary
from strikeline.pipeline.workload import check_workload
from strikeline.pipeline.units import map_unit_bounds, map_unit_check
from strikeline.pipeline.rasters import length_off_raster
from strikeline.pipeline.dem_access import ground_on_grid
from strikeline.pipeline.tiled import (block_shape_of, contours_and_trace_of_blocks, contours_of_blocks,
                                       grids_by_blocks, isopachs_by_blocks)
from strikeline.pipeline.tiled import STATS_SCRATCH
from strikeline.pipeline.thickness_stats import in_reach_values
from strikeline.maps.cellstats import cell_statistics
from strikeline import vocabulary as V


@dataclass
class Results:
    """Everything the chain computed (arrays, geometries and the summary)."""

    picks: PickSet
    plane: PlaneFit
    grid: Grid
    surface: np.ndarray
    dip_deg: np.ndarray
    dip_direction_deg: np.ndarray
    depth_m: np.ndarray | None
    contour_geoms: np.ndarray
    contour_elevations_m: np.ndarray
    trace_geoms: np.ndarray
    summary: dict
    model: SurfaceModel | None = None
    uncertainty_m: np.ndarray | None = None
    contour_extrapolated: np.ndarray | None = None
    trace_extrapolated: np.ndarray | None = None
    contact_misfit: dict | None = None
    attitudes: LocalAttitudes | None = None
    vertical_thickness_m: np.ndarray | None = None
    true_thickness_m: np.ndarray | None = None
    top_picks: PickSet | None = None
    unit_check: dict | None = None  # map units: see map_unit_check
    # where each contact (top contact) came from and its attributes: written with picks and misfit segments
    contact_sources: object | None = None  # strikeline.pipeline.inputs.ContactSources
    top_contact_sources: object | None = None
    # the grids written block by block (strikeline.pipeline.tiled.BlockGrids): the grid fields
    # above are then GridFile objects, whose files these keep
    block_grids: tuple = ()


def _no_thickness_reason(nb: int, nt: int, both: int, model, top_model) -> str:
    """Why no grid cell gives a unit thickness: the two surfaces' reach of data never overlap
    (``nb``, ``nt``, ``both``: cells within reach of the base's, the top's and both surfaces' data)."""
    if both == 0:
        return (f"no grid cell lies within reach of the data of both surfaces (base: {nb} cells within "
                f"{model.reach_m:.0f} m of its picks, top: {nt} cells within {top_model.reach_m:.0f} m of "
                "its picks, none in common), so the thickness grids there are extrapolations of one "
                "surface or both; map the top and base contacts over the same ground, or measure the "
                "thickness between two points or in a borehole (strikeline thickness)")
    return (f"the {both} grid cells within reach of both surfaces hold no thickness (a surface has no "
            "value there); check the grids' extent and the DEM's nodata")


def compute(inputs: Inputs, opts: RunOptions, *, log: Log = _quiet, progress=None,
            is_cancelled=None, tracker: RunProgress | None = None, folder=None, names: dict | None = None) -> Results:
    """Run every step of the chain.

    The grids are arrays in memory, or, with ``opts.block_cells`` or (given ``folder``) for a grid
    too large for memory (:func:`strikeline.pipeline.tiled.block_shape_of`), computed block by
    block and written as GeoTIFFs into ``folder`` (the run's temporary output folder; default a
    temporary folder kept with the results): the grid fields of :class:`Results` are then
    :class:`~strikeline.pipeline.tiled.GridFile` objects, and the files equal those the arrays give.

    Each named step of :data:`strikeline.pipeline.progress.COMPUTE_STEPS` is marked as it begins
    on ``tracker`` (a :class:`~strikeline.pipeline.progress.RunProgress` of the whole run, which
    times it and checks for cancellation), or, without one, on a tracker of these steps made from
    ``progress(fraction)`` and ``is_cancelled()``. ``names`` names the options in the log and in
    refusals as the caller knows them (default the command line's flags; a QGIS tool passes its
    parameters' labels, :func:`adapter_qgis.params.option_names`).
    """
    own = tracker is None
    if own:
        tracker = RunProgress(steps=COMPUTE_STEPS, progress=progress, is_cancelled=is_cancelled)
    is_cancelled = is_cancelled or tracker.is_cancelled
    step = tracker.step

    step("picks")
    what = f"picks on contacts {inputs.contacts.what}"
    grid_notes = []  # said once the picks give a plane: an input error stays the only line
    grid = surface_grid(inputs, opts, log=grid_notes.append, names=names)  # first: an extent or cell refused before any work
    check_workload(inputs, opts, grid=grid, names=names, auto_blocks=folder is not None)  # every size-driving option, first
    picks = collect_picks(inputs, spacing_m=opts.pick_spacing_m, log=log, is_cancelled=is_cancelled,
                          progress=tracker.part())
    step("attitude and confidence")
    plane = fit_picks(picks, what=what)
    sigma = pick_sigmas(inputs, picks, opts)
    conf_opts = {"crs_wkt": inputs.crs_wkt, "resamples": opts.resamples, "seed": opts.seed,
                 "is_cancelled": is_cancelled}
    for note in grid_notes:
        log(note)
    off_dem = None if inputs.dem is None else contacts_off_dem(inputs, log=log, names=names)
    spacing = vertex_spacing_m(inputs.contacts.geoms)
    # the picks' typical gap (a triangulation of every pick) serves the segments here and the model's folds
    gap = typical_gap_m(picks.xyz[:, :2])
    blocks = contact_segments(picks, cell_m=grid.cell_x_m, vertex_spacing_m=spacing, gap_m=gap)
    plane_summary = attitude_of(picks.xyz, sigma, what=what, strict=True, blocks=blocks, **conf_opts)
    if plane_summary["quality"] == "weak":
        log(f"warning: the best-fit plane is weak - {plane_summary['reason']}; "
            f"{plane_summary['advice']}")
    groups = {}
    if opts.group_by:
        values = dict(zip(inputs.contacts.fids.tolist(), inputs.contacts.fields[opts.group_by].tolist()))
        labels = group_labels([values.get(int(c)) for c in picks.contact_id])
        groups = planes_by_group(picks.xyz, labels, sigma=sigma, blocks=blocks, **conf_opts)
    step("local attitudes")
    window, window_note = ((opts.window_m, "") if opts.window_m is not None
                           else fallback_window_m(picks.xyz))
    attitudes = None
    if window_note:  # few picks: the plane was fitted, so the run goes on without the default window
        log(f"warning: local attitudes: {window_note}")
    if window is not None:
        attitudes = local_attitudes(picks.xyz, window_m=window, contact_id=picks.contact_id,
                                    sigma_z_m=sigma, seed=opts.seed, is_cancelled=is_cancelled,
                                    progress=tracker.part())
    step("surface model")
    ub = None
    if inputs.unit_polygons is not None:
        ub = map_unit_bounds(inputs.unit_polygons, inputs.unit_names, inputs.dem, inputs.dem_grid, opts, log=log)
    model = model_surface(picks, opts, grid, boreholes=inputs.boreholes_xyz, orientations=inputs.orientations,
                          bounds=None if ub is None else ub.bounds,
                          what=what, is_cancelled=is_cancelled, sigma=sigma, vertex_spacing_m=spacing, gap_m=gap)
    log_model_choice(model, what="surface model", log=log, names=names)
    unit_check = None if ub is None else map_unit_check(model, inputs.unit_polygons, inputs.unit_names, inputs.dem,
                                                        inputs.dem_grid, opts, ub, log=log)
    step("grids")
    block_shape, tiles = block_shape_of(grid, opts, auto=folder is not None), None
    block_grids = []  # every BlockGrids whose files the results keep
    if block_shape is None:
        surface = model.evaluate_grid(grid, is_cancelled=is_cancelled)
        uncertainty = model.standard_error_grid(grid, is_cancelled=is_cancelled)
        dip, dipdir = dip_grids(surface, grid, is_cancelled=is_cancelled)
    else:
        log(f"grids computed and written in blocks of {block_shape[0]} x {block_shape[1]} cells")
        ground, ground_grid = (None, None) if inputs.dem is None else ground_on_grid(
            inputs.dem, inputs.dem_grid, grid, log=log)
        tiles = grids_by_blocks(model, grid, folder, ground=ground, ground_grid=ground_grid, block_shape=block_shape,
                                is_cancelled=is_cancelled, means_cells=None if opts.no_report else PICTURE_CELLS)
        block_grids.append(tiles)
        surface, uncertainty = tiles.files[V.SURFACE.file], tiles.files[V.UNCERTAINTY.file]
        dip, dipdir = tiles.files[V.DIP.file], tiles.files[V.DIP_DIRECTION.file]
    step("structure contours")
    raw_trace = None  # the block path draws the trace on a second thread meanwhile (its time counts here)
    if tiles is not None and inputs.dem is not None:
        (cparts, clevels, cflags), raw_trace = contours_and_trace_of_blocks(
            tiles, grid, ground_grid, interval_m=opts.interval_m, extrapolated_fn=model.is_extrapolated,
            is_cancelled=is_cancelled)
    else:
        cparts, clevels, cflags = (structure_contours if tiles is None else contours_of_blocks)(
            surface if tiles is None else tiles, grid, interval_m=opts.interval_m,
            extrapolated_fn=model.is_extrapolated, is_cancelled=is_cancelled)
    step("depth, trace and misfit")
    depth = None
    trace = np.empty(0, dtype=object)
    tflags = np.empty(0, dtype=bool)
    misfit = {"median_m": None, "p90_m": None, "n_vertices": 0,
              "note": "needs a DEM: the predicted trace is the zero line of depth below ground"}
    segments = None
    flag_m = None
    if inputs.dem is not None:
        if tiles is None:
            ground, ground_grid = ground_on_grid(inputs.dem, inputs.dem_grid, grid, log=log, whole=True)
        f = depth_trace_misfit(ground, ground_grid, surface, inputs.contacts,
                               extrapolated_fn=model.is_extrapolated, flag_m=opts.misfit_flag_m, model=model,
                               dem_sigma_m=opts.dem_sigma_m, contact_sigma_m=opts.contact_sigma_m,
                               is_cancelled=is_cancelled, raw_trace=raw_trace)
        depth, trace, tflags = f["depth"], f["trace"], f["trace_extrapolated"]
        if tiles is not None:
            depth = tiles.files[V.DEPTH.file]
        misfit, segments, flag_m = f["misfit"], f["segments"], f["check"]
    if tiles is not None:
        tiles.remove_scratch()
    step("thickness")
    vth = tth = top_picks = None
    thickness = None
    if inputs.top_contacts is not None:
        twhat = f"picks on top contacts {inputs.top_contacts.what}"
        top_picks = collect_picks(inputs, contacts=inputs.top_contacts, spacing_m=opts.pick_spacing_m, log=log,
                                  is_cancelled=is_cancelled)
        fit_picks(top_picks, what=twhat)
        top_model = model_surface(top_picks, opts, grid, what=twhat, is_cancelled=is_cancelled,
                                  sigma=pick_sigmas(inputs, top_picks, opts),
                                  vertex_spacing_m=vertex_spacing_m(inputs.top_contacts.geoms))
        log_model_choice(top_model, what="top surface model", log=log, names=names)
        if tiles is None:
            top_surface = top_model.evaluate_grid(grid, is_cancelled=is_cancelled)
            vth, tth = isopach_grids(top_surface, surface, grid)
            X, Y = grid.mesh()
            base_in, top_in = ~model.is_extrapolated(X, Y), ~top_model.is_extrapolated(X, Y)
            supported = base_in & top_in & np.isfinite(tth)
            del X, Y
            vals = tth[supported]
            n_in = (int(base_in.sum()), int(top_in.sum()), int((base_in & top_in).sum()))
        else:
            iso = isopachs_by_blocks(top_model, model, grid, folder, block_shape=block_shape,
                                     is_cancelled=is_cancelled)
            block_grids.append(iso)
            vth, tth = iso.files[V.VERTICAL_THICKNESS.file], iso.files[V.TRUE_THICKNESS.file]
            n_in = (iso.n_base_in, iso.n_top_in, iso.n_both_in)
            vals = in_reach_values(iso.scratch[STATS_SCRATCH], grid)  # read again by bands: bounded memory
        stats = cell_statistics(vals, percentiles=(10, 90))
        if tiles is not None:
            iso.remove_scratch()
        thickness = {
            "top_model": top_model.kind,
            "true_thickness_method": "vertical thickness x cos(local dip of the base surface)",
            **stats,
            "note": "statistics over cells within reach of data of both surfaces",
        }
        if stats["n_cells"] and stats["mean_m"] < 0:
            said = {**CLI_OPTION_NAMES, **(names or {})}
            log("warning: the top contacts model lies below the base on average - check which "
                f"contact is the top ({said['top_contacts']}) and which the base ({said['contacts']})")
        if not stats["n_cells"]:
            thickness["note"] = thickness["reason"] = _no_thickness_reason(*n_in, model, top_model)
            log(f"warning: unit thickness not computed: {thickness['reason']}")
    step("summary")
    summary = build_summary(inputs, opts, picks, plane_summary, misfit, n_contours=len(cparts),
                            model=model, groups=groups, attitudes=attitudes, segments=segments,
                            flag_m=flag_m, thickness=thickness, contour_flags=cflags, trace_flags=tflags,
                            n_top_picks=None if top_picks is None else len(top_picks))
    if unit_check is not None:
        summary["map_units"] = json_ready(unit_check["summary"])
    if off_dem is not None:
        summary[V.CONTACTS_OFF_DEM.name] = json_ready(off_dem)
    if segments is not None and ground_grid is not inputs.dem_grid:  # the segments were cut on the output grid
        summary["contact_misfit"]["segment_m"] = SEGMENT_CELLS * min(ground_grid.cell_x_m, ground_grid.cell_y_m)
    if window_note:
        summary["attitudes"] = {**summary.get("attitudes", {"n_windows": 0}), "note": window_note}
    if own:
        tracker.finish()
    return Results(picks, plane, grid, surface, dip, dipdir, depth, cparts, clevels, trace, summary,
                   model=model, uncertainty_m=uncertainty, contour_extrapolated=cflags,
                   trace_extrapolated=tflags, contact_misfit=segments, attitudes=attitudes,
                   vertical_thickness_m=vth, true_thickness_m=tth, top_picks=top_picks,
                   unit_check=unit_check, contact_sources=inputs.contact_sources,
                   top_contact_sources=inputs.top_contact_sources,
                   block_grids=tuple(block_grids))


def contacts_off_dem(inputs: Inputs, *, log: Log = _quiet, names: dict | None = None) -> dict:
    """The length of the contacts that lies off the DEM (outside it or over nodata), where no DEM
    pick is made (:func:`strikeline.pipeline.rasters.length_off_raster`), with a warning in the
    log when there is any: never dropped without a word. ``names`` names the options as the
    caller knows them (default the command line's flags)."""
    said = {**CLI_OPTION_NAMES, **(names or {})}
    off = length_off_raster(inputs.contacts.geoms, inputs.dem, inputs.dem_grid)
    if off["length_m"] > 0:
        dem = f"DEM '{inputs.paths['dem']}'" if "dem" in inputs.paths else "the DEM"
        log(f"warning: {off['length_m']:.0f} m of the contacts ({off['percent']:.1f}% of {off['total_length_m']:.0f} m, "
            f"on {off['n_lines']} line(s)) lie off {dem} (outside it or over nodata): no DEM picks there"
            + ("; contour picks may still cover them" if inputs.contours is not None else
               f"; give a DEM that covers them, or contours ({said['contours']}) for those stretches"))
    return off
