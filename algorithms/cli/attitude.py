"""``strikeline attitude``: the best-fit plane of a points layer, with its confidence and quality.

The points are any layer of points with elevations: the Z of Point Z geometries (such as the
``picks`` layer of ``strikeline run``'s ``results.gpkg``) or a numeric field named with
``--z-field``. The plane is the total-least-squares fit, its 95% half-widths come from a
bootstrap of the points (plus a Monte Carlo of ``--dem-sigma`` when it is given) and its
quality from the eigenvalue shape measures; see :func:`strikeline.pipeline.attitude_of`.

Exit status: 0 when a verdict was reached, *including* ``undetermined`` (the verdict is the
answer: the points cannot fix a plane, and the report says why and what data would help);
2 for unusable input (missing file, no elevations, a field that is not numeric, an output that
exists without ``--overwrite``).
"""
from __future__ import annotations

import argparse
import json
import os
import sys
from pathlib import Path

from strikeline import CAUTION
from strikeline.cli.options import EPILOG, add_options
from strikeline.errors import InputError, OutputError

HELP = "best-fit plane of a points layer with elevations: attitude, 95% confidence and quality"

#: The dip direction half-width that means "undetermined within the confidence".
_DD_UNDETERMINED = 180.0

DESCRIPTION = (
    HELP + ". Elevations come from the Z of Point Z geometries (the 'picks' layer of strikeline "
    "run's results.gpkg has them) or from a numeric field (--z-field). Exit status 0 also when "
    "the plane is undetermined: the report then gives the reason and what data would help, and "
    "no attitude."
)


def add_parser(sub) -> argparse.ArgumentParser:
    # argparse %-formats help strings: "95%" must be written "95%%" there
    p = sub.add_parser("attitude", help=HELP.replace("%", "%%"), description=DESCRIPTION, epilog=EPILOG)
    add_options(p.add_argument_group("points"), "points", "points_layer", "points_where", "z_field", "group_by",
                command="attitude")
    add_options(p.add_argument_group("points from delimited text (.csv, read by OGR's CSV driver)"), "x_field",
                "y_field", "crs")
    add_options(p.add_argument_group("confidence"), "dem_sigma_m", "resamples", "seed", command="attitude")
    add_options(p.add_argument_group("output"), "json_out", "overwrite")
    add_options(p.add_argument_group("progress and log"), "quiet", "log_json")
    p.set_defaults(handler=main)
    return p


# --------------------------------------------------------------------------- inputs
def _check_out(out: str | None, overwrite: bool, points: str) -> None:
    """Refuse an unusable --out before any work is done."""
    if out is None:
        return
    path = Path(out)
    if path.is_dir():
        raise OutputError(f"--out '{out}' is a folder; name a .json file to write")
    if path.exists() and not overwrite:
        raise OutputError(f"output file '{out}' already exists; add --overwrite to replace it, or name a new file")
    if not path.resolve().parent.is_dir():
        raise OutputError(f"cannot write '{out}': the folder '{path.resolve().parent}' does not exist; create it first")
    if os.path.exists(points) and path.exists() and path.resolve() == Path(points).resolve():
        raise OutputError(f"--out '{out}' is the points file itself; name another file")
    if path.exists() and not _is_own_report(path):
        raise OutputError(f"output file '{out}' is not a report of strikeline attitude, and --overwrite replaces "
                          "only the tool's own reports; name a new file, or move that one away")


#: The keys every report of ``strikeline attitude --out`` has: how an earlier report is recognised.
_REPORT_KEYS = ("version", "points", "plane", "conventions")


def _is_own_report(path: Path) -> bool:
    """Whether ``path`` holds a JSON report this command wrote (so --overwrite may replace it)."""
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return False
    return isinstance(data, dict) and all(k in data for k in _REPORT_KEYS)


def load_points(args):
    """Read the points and their elevations -> (layer, xyz, labels or None, elevation source,
    contact id per point or None)."""
    import numpy as np
    import shapely

    from strikeline.io.vector import DelimitedPoints, read_layer

    # in delimited text the --z-field column becomes the points' Z (OGR's Z_POSSIBLE_NAMES)
    layer = read_layer(args.points, layer=args.points_layer, where=args.where, label="points",
                       geometry="point", layer_option="--points-layer",
                       where_option="--where",
                       delimited=DelimitedPoints(x_field=args.x_field, y_field=args.y_field,
                                                 z_field=args.z_field, crs=args.crs))
    xy, index = shapely.get_coordinates(layer.geoms, return_index=True)
    if args.z_field and args.z_field not in layer.fields and layer.z is not None and np.isfinite(layer.z).any():
        z = layer.z[index]
        source = f"column '{args.z_field}' (the points' Z)"
    elif args.z_field:
        z = layer.numeric_field(args.z_field, option="--z-field")[index]
        source = f"field '{args.z_field}'"
    else:
        z = layer.z[index]
        source = "the geometries' Z"
        if not np.isfinite(z).any():
            numeric = [n for n, t in layer.field_types.items() if t in ("Integer", "Integer64", "Real")]
            raise InputError(
                f"points {layer.what} have no Z (2-D geometries) and no --z-field was given; name "
                f"the numeric field that holds each point's elevation with --z-field (numeric "
                f"fields: {', '.join(numeric) or 'none'}), or give Point Z geometries"
            )
    if not np.isfinite(z).any():
        raise InputError(
            f"field '{args.z_field}' of points {layer.what} holds no elevation (all null); name the "
            "field that holds the elevations with --z-field"
        )
    labels = None
    if args.group_by:
        if args.group_by not in layer.fields:
            raise InputError(
                f"points {layer.what} have no field '{args.group_by}' (fields: "
                f"{', '.join(layer.fields) or 'none'}); name the grouping field with --group-by"
            )
        # str() of the value, as strikeline run labels its groups
        labels = np.array([str(v) for v in layer.fields[args.group_by][index]], dtype=object)
    xyz = np.column_stack([xy, z])
    cid = None
    if layer.field_types.get("contact_id") in ("Integer", "Integer64", "Real"):
        cid = layer.numeric_field("contact_id", option="--points")[index]
    return layer, xyz, labels, source, cid


# --------------------------------------------------------------------------- computing
def compute(args, *, log=lambda m: print(m, file=sys.stderr)) -> dict:
    """Everything ``attitude`` reports, as a JSON-ready dict (rounded floats, null for inf/NaN)."""
    from strikeline import __version__
    from strikeline.io.crs import crs_label
    from strikeline.io.files import file_sha256, json_ready
    from strikeline.pipeline.planes import point_planes

    from strikeline.pipeline.workload import check_resamples

    layer, xyz, labels, source, cid = load_points(args)
    check_resamples(args.resamples, len(xyz))  # before any resample is drawn
    # Points with a contact_id (the picks of strikeline run) are bootstrapped by contact segment,
    # as run does, because neighbouring picks along a contact share their errors.
    planes = point_planes(xyz, crs_wkt=layer.crs_wkt, labels=labels, contact_id=cid, sigma_z_m=args.dem_sigma_m,
                          what=f"points {layer.what}", group_what=f"group {args.group_by} = {{}}",
                          resamples=args.resamples, seed=args.seed)
    n_missing = planes.n_missing
    if n_missing:
        log(f"warning: {n_missing} of {len(xyz)} points have no elevation ({source} is empty) "
            "and are left out")

    result = {
        "version": __version__,
        "crs": crs_label(layer.crs_wkt),
        "points": {"file": os.path.basename(args.points), "sha256": file_sha256(args.points),
                   "layer": layer.layer_name, "where": args.where, "elevation_from": source},
        "n_points": planes.n_points,
        "n_points_without_elevation": n_missing,
        "options": {"dem_sigma_m": args.dem_sigma_m, "resamples": args.resamples, "seed": args.seed,
                    "group_by": args.group_by},
        "plane": planes.plane,
        "conventions": "dip direction 0-360 clockwise from grid north of the CRS (dip_direction_true_deg "
                       "from true north); dip 0-90 from horizontal; strike by the right-hand rule "
                       "(dip to the right); *_ci95_deg are 95% half-widths in degrees",
        "caution": CAUTION,
    }
    if labels is not None:
        result["groups"] = {"field": args.group_by,
                            "planes": planes.groups}
    return json_ready(result)


# --------------------------------------------------------------------------- reporting
def _method_words(pl: dict, options: dict) -> str:
    method = pl.get("confidence_method") or ""
    parts = []
    if "bootstrap" in method:
        parts.append(f"a bootstrap of the points ({options['resamples']} resamples, seed {options['seed']})")
    if "monte_carlo" in method:
        parts.append(f"a Monte Carlo of the {options['dem_sigma_m']:g} m vertical error (--dem-sigma)")
    return " and ".join(parts) or method


def _plane_lines(title: str, pl: dict, options: dict) -> list[str]:
    n = pl.get("n_picks", 0)
    q = pl["quality"]
    if q == "undetermined":
        return [f"{title} ({n} points): undetermined - no attitude can be given",
                f"  why: {pl['reason']}",
                f"  {pl['advice'] or 'data that would help: more points that spread in two directions'}"]

    def pm(v):
        if v is None:
            return ""
        return f" +/- {v:.1f}" if v >= 1 else (f" +/- {v:.2f}" if v >= 0.01 else f" +/- {v:.3f}")

    dd_ci = pl.get("dip_direction_ci95_deg")
    lines = [f"{title} ({n} points): {q}"]
    if pl.get("dip_direction_deg") is None:
        lines.append(f"  dip {pl['dip_deg']:.2f}{pm(pl['dip_ci95_deg'])} deg: horizontal within its 95% confidence "
                     "(the dip does not differ from 0, so there is no dip direction or strike)")
    elif dd_ci is not None and dd_ci >= _DD_UNDETERMINED:
        lines.append(f"  dip {pl['dip_deg']:.2f}{pm(pl['dip_ci95_deg'])} deg; dip direction undetermined within "
                     f"the 95% confidence (estimate {pl['dip_direction_deg']:.1f} deg from grid north, "
                     f"{pl['dip_direction_true_deg']:.1f} deg from true north): the plane is nearly horizontal")
    else:
        lines.append(f"  dip {pl['dip_deg']:.2f}{pm(pl['dip_ci95_deg'])} deg toward {pl['dip_direction_deg']:.2f}"
                     f"{pm(dd_ci)} deg from grid north")
        lines.append(f"  dip direction from true north {pl['dip_direction_true_deg']:.2f}{pm(dd_ci)} deg "
                     f"(meridian convergence {pl['meridian_convergence_deg']:+.3f} deg at the points' centre)")
    if pl.get("strike_rhr_deg") is not None:
        lines.append(f"  strike {pl['strike_rhr_deg']:.2f} deg (right-hand rule, grid north)")
    if pl.get("dip_ci95_deg") is None:
        lines.append(f"  RMS residual {pl['rms_m']:.2f} m; no 95% half-widths: {n} points fix a plane exactly "
                     "but leave no scatter to estimate its error (a bootstrap needs at least 4); add points")
    else:
        lines.append(f"  RMS residual {pl['rms_m']:.2f} m; 95% half-widths from {_method_words(pl, options)}")
    lines.append(f"  why {q}: {pl['reason']}")
    if pl.get("advice"):
        lines.append(f"  {pl['advice']}")
    return lines


def report(result: dict, stream=None) -> None:
    stream = stream or sys.stdout
    p = result["points"]
    print(f"points: {result['n_points']} from layer '{p['layer']}' of '{p['file']}' "
          f"(elevations from {p['elevation_from']}; {result['crs']})", file=stream)
    for line in _plane_lines("best-fit plane of all points", result["plane"], result["options"]):
        print(line, file=stream)
    field = result["options"]["group_by"]
    for g, pl in result.get("groups", {}).get("planes", {}).items():
        for line in _plane_lines(f"group {field} = {g}", pl, result["options"]):
            print(line, file=stream)


def write_json(result: dict, out: str, *, overwrite: bool) -> None:
    """Write ``result`` to ``out`` atomically (temporary sibling, then rename)."""
    from strikeline.io.files import write_json_atomic

    write_json_atomic(out, result, overwrite=overwrite)


def main(args) -> int:
    _check_out(args.out, args.overwrite, args.points)
    result = compute(args, log=args.reporter.log)  # log lines and --log-json: strikeline.cli.progress
    if args.out:
        write_json(result, args.out, overwrite=args.overwrite)
    report(result)
    if args.out:
        print(f"written to {args.out}")
    print(CAUTION)
    return 0
