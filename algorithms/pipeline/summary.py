"""``summary.json``: what a run found, in words and numbers, with the caution.
"""
from __future__ import annotations

import numpy as np

from strikeline import CAUTION, __version__
from strikeline.io.crs import crs_label
from strikeline.io.files import json_ready
from strikeline.pipeline.options import SEGMENT_CELLS
from strikeline.attitude.local import LocalAttitudes
from strikeline.picks import (PickSet)
from strikeline.surfaces import SurfaceModel
from strikeline.pipeline.command import current_command_line
from strikeline.pipeline.inputs import Inputs, input_record

#: The roles whose inputs may be several (a list in ``inputs`` of the summary).
LIST_ROLES = ("contacts", "top_contacts")
#: Why a contact segment was not checked against the surface forecast without it, in words (one
#: clause inside the printed sentence's brackets, so no brackets of its own).
UNCHECKED_REASON = ("off the DEM, or at the edge of the mapped ground, where a spline fitted without them "
                    "reaches only by extrapolating")
#: Every role, in the order the summary lists them.
INPUT_ROLES = ("contacts", "dem", "contours", "boreholes", "orientations", "top_contacts", "map_units")


def summary_inputs(inputs: Inputs) -> dict:
    """Every input by role: ``contacts`` and ``top_contacts`` as lists (one record per input, in
    the order given), the others as one record each (:func:`strikeline.pipeline.inputs.input_record`:
    path as given and absolute, layer, filter, fields used, SHA-256). Keyed by role, never by file
    name, so two files of the same name in different folders are both recorded."""
    records = dict(inputs.records) if inputs.records else {k: input_record(v) for k, v in inputs.paths.items()}
    out = {}
    for role in INPUT_ROLES:
        if role not in records:
            continue
        rec = records[role]
        if role in LIST_ROLES:
            out[role] = list(rec) if isinstance(rec, (list, tuple)) else [rec]
        else:
            out[role] = rec
    return out
from strikeline.pipeline.options import RunOptions


# --------------------------------------------------------------------------- summary
def build_summary(inputs: Inputs, opts: RunOptions, picks: PickSet, plane: dict, misfit: dict,
                  *, n_contours: int, model: SurfaceModel | None = None, groups: dict | None = None,
                  attitudes: LocalAttitudes | None = None, segments: dict | None = None,
                  flag_m: float | None = None, thickness: dict | None = None,
                  contour_flags=None, trace_flags=None, n_top_picks=None) -> dict:
    summary = {
        "version": __version__,
        "crs": crs_label(inputs.crs_wkt),
        "n_picks": len(picks),
        "picks_by_source": picks.counts_by_source(),
        "plane": plane,
        "trace_misfit": misfit,
        "structure_contours": {
            "interval_m": opts.interval_m, "n_lines": n_contours,
            "n_extrapolated": 0 if contour_flags is None else int(np.sum(contour_flags)),
        },
        "data_error": {
            "dem_sigma_m": opts.dem_sigma_m, "contour_sigma_m": opts.contour_sigma_m,
            "contact_sigma_m": opts.contact_sigma_m,
            "basis": "DEM picks: vertical standard error as given; contour picks: positional "
                     "standard error times tan(ground slope at the pick)",
            "resamples": opts.resamples, "seed": opts.seed,
        },
        "conventions": "dip direction 0-360 clockwise from grid north of the CRS; dip 0-90 from "
                       "horizontal; strike by the right-hand rule (dip to the right); "
                       "dip_direction_true_deg is the same azimuth from true north",
        "inputs": summary_inputs(inputs),
        # the strikeline command as given (outside the command line: the process's sys.argv)
        "command_line": current_command_line(),
        "caution": CAUTION,
    }
    if model is not None:
        m = model.summary()
        m["uncertainty"] = ("standard error calibrated on held-out picks: kappa * sqrt(model's own standard "
                            "error^2 + excess_m2 * (distance to the nearest datum / distance_ref_m)^alpha); "
                            "see error_growth" if model.growth is not None else
                            "least-squares prediction standard error (not calibrated: no cross-validation)"
                            if model.kind in ("plane", "trend2") else
                            "cross-validation RMSE scaled by distance to the nearest datum")
        if inputs.boreholes_xyz is not None:
            bm = model.borehole_misfit_m()
            m["boreholes"] = {"n_boreholes": int(len(bm)), "max_abs_misfit_m": float(np.max(np.abs(bm))) if len(bm) else None,
                              "sigma_m": opts.borehole_sigma_m}
        if inputs.orientations is not None:
            m["orientations"] = {"n_orientations": int(len(inputs.orientations)), "sigma_deg": opts.orientation_sigma_deg}
        summary["model"] = m
    if groups:
        summary["groups"] = {"field": opts.group_by, "planes": groups}
    if attitudes is not None:
        q, counts = np.unique(np.asarray(attitudes.quality, dtype=str), return_counts=True)
        summary["attitudes"] = {"n_windows": int(len(attitudes.x)), "window_m": attitudes.window_m,
                                "confidence_method": attitudes.method,
                                "by_quality": {str(a): int(b) for a, b in zip(q, counts)}}
    if segments is not None:
        unchecked = ~np.isfinite(np.asarray(segments.get("z_score", segments["misfit_m"]), dtype=float))
        summary["contact_misfit"] = {"segment_m": SEGMENT_CELLS * min(inputs.dem_grid.cell_x_m, inputs.dem_grid.cell_y_m),
                                     "check": flag_m, "n_segments": int(len(segments["geoms"])),
                                     "n_flagged": int(np.sum(segments["flagged"])),
                                     "flagged_contact_ids": sorted({int(c) for c, f in zip(
                                         segments["contact_id"], segments["flagged"]) if f}),
                                     "n_unchecked": int(np.sum(unchecked)),
                                     "unchecked_reason": UNCHECKED_REASON}
    if trace_flags is not None and len(trace_flags):
        summary["predicted_trace"] = {"n_lines": int(len(trace_flags)), "n_extrapolated": int(np.sum(trace_flags))}
    if thickness is not None:
        thickness["n_top_picks"] = n_top_picks
        summary["thickness"] = thickness
    return json_ready(summary)
