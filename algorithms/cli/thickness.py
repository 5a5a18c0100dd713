"""``strikeline thickness``: true thickness of a unit from arguments, or isopach grids.

Four cases, each a sub-command, with units in the option names:

* ``outcrop``  -- outcrop width perpendicular to strike, dip, and the ground slope;
* ``points``   -- a point on the top and a point on the base, and the attitude;
* ``borehole`` -- the drilled length of the unit, the hole's azimuth and plunge, and the attitude;
* ``grids``    -- two surface grids (top and base) -> ``vertical_thickness.tif`` and
  ``true_thickness.tif`` and the unit's mean thickness with its spread.

``strikeline thickness --grids TOP.tif BASE.tif --out DIR`` is the same as ``grids``. Each case
prints the result with the formula used and its reference; the maths is in
:mod:`strikeline.maps.thickness`.

As ``strikeline run``, every case takes ``--quiet`` (no information lines on stderr; warnings and
the answer on stdout stay) and ``--log-json FILE`` (its messages, the grids case's named steps
:data:`GRID_STEPS` with their costs, and the final status as JSON Lines): its information and
warning lines go through the command's reporter (:mod:`strikeline.cli.progress`). Both may be
given before or after the case's name.
"""
from __future__ import annotations

import argparse
import math
import sys
from pathlib import Path

from strikeline import CAUTION
from strikeline.cli.options import EPILOG, OneLineParser, add_option, add_options
from strikeline.errors import InputError
from strikeline.vocabulary import TRUE_THICKNESS, VERTICAL_THICKNESS

HELP = "true thickness of a unit from outcrop width, two points, a borehole, or two surface grids"

RAGAN = ("Ragan, D. M. (2009), Structural Geology: An Introduction to Geometrical Techniques, 4th ed., "
         "Cambridge University Press")
ROWLAND = ("Rowland, S. M., Duebendorfer, E. M. & Schiefelbein, I. M. (2007), Structural Analysis and "
           "Synthesis, 3rd ed., Blackwell")
ZEVENBERGEN = ("Zevenbergen, L. W. & Thorne, C. R. (1987), Quantitative analysis of land surface "
               "topography, Earth Surface Processes and Landforms 12(1), 47-56, doi:10.1002/esp.3290120107")

#: The named steps of the grids case (timed in --log-json, as a run's steps are).
GRID_STEPS = ("reading surfaces", "thickness", "writing outputs")

#: A hole (or, for an outcrop width, the ground) within this angle of the bedding gives a
#: thickness very sensitive to the attitude.
_SHALLOW_INTERCEPT_DEG = 10.0

def _slope_senses() -> dict:
    """--slope-sense as spelt on the command line -> the library's slope sense."""
    from strikeline.pipeline.options import option

    o = option("slope_sense")
    return dict(zip(o.cli_choices, o.choices))


def add_parser(sub) -> argparse.ArgumentParser:
    p = sub.add_parser(
        "thickness", help=HELP, epilog=EPILOG,
        description=HELP + ". Choose a case: outcrop, points, borehole or grids "
                           "(see 'strikeline thickness CASE --help'); "
                           "'strikeline thickness --grids TOP.tif BASE.tif --out DIR' is the grids case.")
    add_options(p, "grids", "grids_out", "overwrite")
    add_options(p.add_argument_group("progress and log"), "quiet", "log_json")
    p.set_defaults(handler=main, case=None, run_case=None)
    cases = p.add_subparsers(dest="case", metavar="CASE", parser_class=OneLineParser)

    o = cases.add_parser("outcrop", epilog=EPILOG,
                         help="from the outcrop width measured perpendicular to strike",
                         description="True thickness from the outcrop width measured perpendicular to "
                                     "strike, on flat or sloping ground.")
    add_options(o, "width_m", "dip_deg", "ground_slope_deg", "slope_sense", "width_kind")
    _add_told(o)
    o.set_defaults(run_case=_outcrop)

    pt = cases.add_parser("points", epilog=EPILOG, help="from a point on the top and a point on the base",
                          description="Exact true thickness from any point on the top and any point on the "
                                      "base of a planar unit of known attitude.")
    add_options(pt, "top", "base")
    _add_attitude(pt)
    _add_told(pt)
    pt.set_defaults(run_case=_points)

    b = cases.add_parser("borehole", epilog=EPILOG, help="from the drilled length of the unit in a straight hole",
                         description="True thickness from the length of a straight borehole between the top "
                                     "and base of a planar unit.")
    add_options(b, "length_m", "hole_azimuth_deg", "hole_plunge_deg")
    _add_attitude(b)
    _add_told(b)
    b.set_defaults(run_case=_borehole)

    g = cases.add_parser("grids", epilog=EPILOG, help="isopachs between a top and a base surface grid",
                         description="Vertical and true thickness grids between a top and a base surface "
                                     "grid on the same grid (transform, shape, CRS).")
    add_options(g, "top_grid", "base_grid")
    add_option(g, "grids_out", required=True)
    add_option(g, "overwrite")
    _add_told(g)
    g.set_defaults(run_case=_grids_case)
    return p


def _add_attitude(p) -> None:
    add_options(p, "dip_deg", "dip_direction_deg")


def _add_told(p) -> None:
    """--quiet and --log-json on a case's parser too, left out of the parsed values unless given
    there: a case's own default would otherwise replace the value given before the case's name."""
    group = p.add_argument_group("progress and log")
    for name in ("quiet", "log_json"):
        add_option(group, name, default=argparse.SUPPRESS)


def _warn(args, text: str) -> None:
    """A warning line on stderr (kept by --quiet) and in --log-json."""
    reporter = getattr(args, "reporter", None)
    if reporter is None:
        print(f"warning: {text}", file=sys.stderr)
    else:
        reporter.log(f"warning: {text}")


def _say(*lines, stream=None) -> None:
    for line in lines:
        print(line, file=stream or sys.stdout)


# --------------------------------------------------------------------------- cases from arguments
def _outcrop(args) -> int:
    from strikeline.maps.thickness import thickness_from_outcrop_width, vertical_thickness

    slope = args.ground_slope_deg
    if slope > 0 and args.slope_sense is None:
        raise InputError(
            f"--ground-slope-deg {slope:g} needs --slope-sense: against-dip when the ground descends "
            "opposite to the dip, with-dip when it descends in the dip direction"
        )
    sense = _slope_senses().get(args.slope_sense) if slope > 0 else None
    given = f"--dip-deg {args.dip_deg:g}, --ground-slope-deg {slope:g}" + (
        f" --slope-sense {args.slope_sense}" if sense else "")
    try:
        t = float(thickness_from_outcrop_width(args.width_m, args.dip_deg, ground_slope_deg=slope,
                                               slope_sense=sense, width_kind=args.width_kind))
    except InputError as exc:
        raise InputError(f"{given}: {exc}") from None
    grazing = abs(args.dip_deg + (slope if sense != "with_dip" else -slope))
    if grazing < _SHALLOW_INTERCEPT_DEG:
        _warn(args, f"the ground runs within {grazing:.1f} deg of the bedding along the measurement line "
                    f"({given}), so the thickness is very sensitive to errors in the dip and the slope")
    v = float(vertical_thickness(t, args.dip_deg))
    if slope == 0:
        formula = "t = w * sin(dip), flat ground"
    elif sense == "against_dip":
        formula = "t = w * sin(dip + slope), ground descending against the dip"
    else:
        formula = "t = w * |sin(dip - slope)|, ground descending with the dip"
    kind = ("measured along the ground" if args.width_kind == "slope" or slope == 0
            else f"measured on the map, turned into the slope distance w = h / cos(slope) = "
                 f"{args.width_m / math.cos(math.radians(slope)):.3f} m")
    _say(f"true thickness: {t:.3f} m",
         f"vertical thickness: {_metres(v)} (t / cos(dip): what a vertical hole through the unit drills)",
         f"formula: {formula}; w = {args.width_m:g} m perpendicular to strike ({kind}), "
         f"dip = {args.dip_deg:g} deg" + (f", slope = {slope:g} deg" if slope else ""),
         f"reference: {RAGAN}; {ROWLAND}")
    return 0


def _points(args) -> int:
    import numpy as np

    from strikeline.geometry.orientation import normal_from_dip
    from strikeline.maps.thickness import thickness_between_points, vertical_thickness

    top = np.array(args.top)
    base = np.array(args.base)
    t = float(thickness_between_points(top, base, args.dip_direction_deg, args.dip_deg))
    n = normal_from_dip(args.dip_direction_deg, args.dip_deg)
    if float(np.dot(top - base, n)) < 0:
        _warn(args, "the --top point lies below the --base point across the bedding ((top - base) . n < 0); "
                    "check that the two are not swapped, or whether the beds are overturned")
    _say(f"true thickness: {t:.3f} m",
         f"vertical thickness: {_metres(float(vertical_thickness(t, args.dip_deg)))} (t / cos(dip))",
         f"straight distance between the points: {float(np.linalg.norm(top - base)):.3f} m",
         "formula: t = |(p_top - p_base) . n|, n = (sin(dip) sin(dd), sin(dip) cos(dd), cos(dip)) the "
         f"bedding's unit normal; dip = {args.dip_deg:g} deg, dd = {args.dip_direction_deg:g} deg",
         f"reference: {RAGAN} (thickness by vector methods)")
    return 0


def _borehole(args) -> int:
    import numpy as np

    from strikeline.geometry.orientation import normal_from_dip, vector_from_trend_plunge
    from strikeline.maps.thickness import thickness_from_borehole

    t = float(thickness_from_borehole(args.length_m, args.hole_azimuth_deg, args.hole_plunge_deg,
                                      args.dip_direction_deg, args.dip_deg))
    cosine = abs(float(np.dot(vector_from_trend_plunge(args.hole_azimuth_deg, args.hole_plunge_deg),
                              normal_from_dip(args.dip_direction_deg, args.dip_deg))))
    angle = math.degrees(math.asin(min(1.0, cosine)))
    if angle < _SHALLOW_INTERCEPT_DEG:
        _warn(args, f"the hole runs within {angle:.1f} deg of the bedding, so the thickness is very sensitive "
                    "to errors in the hole's direction and the bed's attitude")
    _say(f"true thickness: {t:.3f} m",
         f"angle between the hole and the bedding: {angle:.2f} deg",
         "formula: t = L * |b . n|, b = (cos(plunge) sin(az), cos(plunge) cos(az), -sin(plunge)) the "
         "hole's downward unit vector, n = (sin(dip) sin(dd), sin(dip) cos(dd), cos(dip)) the bedding's "
         f"unit normal; L = {args.length_m:g} m, az = {args.hole_azimuth_deg:g} deg, plunge = "
         f"{args.hole_plunge_deg:g} deg, dip = {args.dip_deg:g} deg, dd = {args.dip_direction_deg:g} deg",
         f"reference: {RAGAN} (thickness from drill holes; vector geometry)")
    return 0


def _metres(v: float) -> str:
    return "infinite (vertical unit)" if not math.isfinite(v) else f"{v:.3f} m"


# --------------------------------------------------------------------------- grids
def _grids_case(args) -> int:
    return grids(args.top, args.base, args.out, overwrite=args.overwrite, reporter=getattr(args, "reporter", None))


def _check_out_folder(out: str, overwrite: bool, inputs) -> Path:
    from strikeline.io.files import check_out_folder

    return check_out_folder(out, overwrite=overwrite, inputs=inputs)


def _same_grid(top_path, gt, base_path, gb) -> None:
    from strikeline.io.crs import crs_label, same_crs

    st, sb = gt.crs_wkt, gb.crs_wkt
    tol = 1e-6 * min(gt.cell_x_m, gt.cell_y_m)
    differs = []
    if gt.shape != gb.shape:
        differs.append(f"{gt.rows} x {gt.cols} vs {gb.rows} x {gb.cols} cells")
    if any(abs(a - b) > tol for a, b in zip(gt.transform, gb.transform)):
        differs.append(f"origin ({gt.transform[0]:g}, {gt.transform[3]:g}) and cells {gt.cell_x_m:g} x "
                       f"{gt.cell_y_m:g} m vs ({gb.transform[0]:g}, {gb.transform[3]:g}) and "
                       f"{gb.cell_x_m:g} x {gb.cell_y_m:g} m")
    if not same_crs(st, sb):
        differs.append(f"CRS {crs_label(st)} vs {crs_label(sb)}")
    if differs:
        xmin, ymin, xmax, ymax = gt.bounds
        raise InputError(
            f"top surface '{top_path}' and base surface '{base_path}' are not on the same grid "
            f"({'; '.join(differs)}); resample one onto the other, e.g. gdalwarp -t_srs {crs_label(st)} "
            f"-te {xmin:.10g} {ymin:.10g} {xmax:.10g} {ymax:.10g} -ts {gt.cols} {gt.rows} -r bilinear "
            f"'{base_path}' base_on_top_grid.tif"
        )


def _spread(a) -> dict:
    import numpy as np

    v = a[np.isfinite(a)]
    return {"mean": float(v.mean()), "std": float(v.std()), "p10": float(np.percentile(v, 10)),
            "p90": float(np.percentile(v, 90)), "n_cells": int(v.size)}


def _write_folder(out: Path, arrays: dict, grid, *, overwrite: bool, inputs=(), log=None) -> None:
    """Write GeoTIFFs (``{vocabulary raster: array}``, each band with its vocabulary meaning and
    unit) into ``out``, all or nothing: :func:`strikeline.io.files.output_folder` (manifest,
    lock, crash-safe replace of strikeline's own earlier results only)."""
    from strikeline.io.files import output_folder
    from strikeline.io.raster import write_geotiff

    with output_folder(out, overwrite=overwrite, inputs=inputs,
                       log=log or (lambda m: print(m, file=sys.stderr))) as tmp:
        for spec, arr in arrays.items():
            write_geotiff(tmp / spec.file, arr, grid, description=spec.meaning, unit=spec.unit)


def grids(top_path: str, base_path: str, out: str, *, overwrite: bool = False, stream=None,
          reporter=None) -> int:
    """The grids case: read, check, compute, write atomically, report.

    Parameters
    ----------
    top_path, base_path : str
        The top and base surface grids.
    out : str
        The folder to create for the two thickness grids.
    overwrite : bool, keyword-only
        Replace an earlier result of strikeline in ``out``.
    stream : file, optional, keyword-only
        Where the answer goes (default stdout).
    reporter : strikeline.pipeline.progress.Reporter, optional, keyword-only
        Told of the steps :data:`GRID_STEPS` (their costs) and of every information and warning
        line (the command's reporter: stderr and --log-json); without it the lines go to stderr.

    Returns
    -------
    int
        The exit status, 0.
    """
    import numpy as np

    from strikeline.io.raster import read_raster
    from strikeline.maps.thickness import isopach_grids
    from strikeline.pipeline.progress import RunProgress

    tracker = RunProgress(reporter, steps=GRID_STEPS)
    log = tracker.log if reporter is not None else (lambda m: print(m, file=sys.stderr))
    out_path = _check_out_folder(out, overwrite, (top_path, base_path))
    tracker.step(GRID_STEPS[0])
    top, gt = read_raster(top_path, label="top surface")
    base, gb = read_raster(base_path, label="base surface")
    _same_grid(top_path, gt, base_path, gb)
    tracker.step(GRID_STEPS[1])
    vertical, true = isopach_grids(top, base, gt)
    if not np.isfinite(true).any():
        raise InputError(
            f"top surface '{top_path}' and base surface '{base_path}' share no cell where both have a "
            "value (and the base a dip); give surfaces that overlap"
        )
    n_neg = int(np.count_nonzero(vertical < 0))
    if n_neg:
        log(f"warning: in {n_neg} cells the top lies below the base (negative thickness): the two "
            "surfaces cross there, or --top and --base are swapped")
    sv, st = _spread(vertical), _spread(true)
    tracker.step(GRID_STEPS[2])
    _write_folder(out_path, {VERTICAL_THICKNESS: vertical, TRUE_THICKNESS: true},
                  gt.with_nodata(None), overwrite=overwrite, inputs=(top_path, base_path), log=log)
    tracker.finish()

    def line(name, s):
        return (f"{name}: mean {s['mean']:.3f} m, std {s['std']:.3f} m, p10 {s['p10']:.3f} m, "
                f"p90 {s['p90']:.3f} m over {s['n_cells']} cells")

    _say(f"top surface '{top_path}', base surface '{base_path}': {gt.rows} x {gt.cols} cells of "
         f"{gt.cell_x_m:g} x {gt.cell_y_m:g} m",
         line("vertical thickness", sv),
         line("true thickness", st),
         "formula: vertical = top - base; true = vertical * cos(dip of the base), the base's local dip "
         "from central differences (exact for a top parallel to the base); std over cells, p10/p90 "
         "the 10th and 90th percentiles",
         f"reference: {RAGAN} (vertical thickness); {ZEVENBERGEN}",
         f"written to {out}/ ({VERTICAL_THICKNESS.file}, {TRUE_THICKNESS.file})",
         CAUTION, stream=stream)
    return 0


def main(args) -> int:
    if args.run_case is not None:
        if args.grids is not None:
            raise InputError(f"--grids and the {args.case} case exclude each other; give one of them")
        if args.case != "grids" and (args.out is not None or args.overwrite):
            raise InputError(f"--out and --overwrite belong to the grids case, not to {args.case}")
        return args.run_case(args)
    if args.grids is None:
        if args.out is not None or args.overwrite:
            raise InputError("--out and --overwrite belong to the grids case: strikeline thickness --grids "
                             "TOP.tif BASE.tif --out DIR")
        raise InputError("choose a case: strikeline thickness outcrop | points | borehole | grids ... "
                         "(or --grids TOP.tif BASE.tif --out DIR); see 'strikeline thickness --help'")
    if args.out is None:
        raise InputError("--grids TOP.tif BASE.tif needs --out DIR, the folder to create for "
                         "vertical_thickness.tif and true_thickness.tif")
    top, base = args.grids
    return grids(top, base, args.out, overwrite=args.overwrite, reporter=getattr(args, "reporter", None))
