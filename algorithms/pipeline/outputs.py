"""What a run writes: the GeoTIFF grids, the layers of ``results.gpkg`` and ``summary.json``,
all into a temporary folder renamed into place.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np
import shapely

from strikeline.io.files import dumps_stable, output_folder, write_text_checked
from strikeline.io.geotiff import RasterOut, write_geotiffs
from strikeline.io.gpkg_styles import write_layer_styles
from strikeline.io.vector import LayerOut, write_gpkg
from strikeline import vocabulary as V
from strikeline.attitude.local import LocalAttitudes
from strikeline.picks import (PickSet)
from strikeline.pipeline.compute import Results
from strikeline.pipeline.tiled import GridFile, place_grid_file
from strikeline.pipeline.options import Log, _quiet
from strikeline.pipeline.units import unit_conflicts_layer


# --------------------------------------------------------------------------- writing
def write_results(results: Results, out_dir, *, overwrite: bool = False, inputs=(), log: Log = _quiet,
                  is_cancelled=None) -> Path:
    """Write every output into ``out_dir``, all or nothing.

    Everything goes into a temporary sibling folder first, with a manifest of the files
    (:data:`strikeline.vocabulary.MANIFEST_FILE`); only when every file is complete and checked
    is it renamed to ``out_dir``. An existing ``out_dir`` is replaced only with ``overwrite`` and
    only when it holds nothing but strikeline's own earlier results; ``out_dir`` may not hold,
    lie inside or be one of ``inputs`` (paths). The folder is locked while it is written; see
    :func:`strikeline.io.files.output_folder` for the steps and what a kill leaves.
    """
    with output_folder(out_dir, overwrite=overwrite, inputs=inputs, log=log) as tmp:
        _write_all(results, tmp, is_cancelled=is_cancelled)
    return Path(out_dir)


def vocabulary_layer(spec: V.Layer, geoms, values: dict, *, name: str | None = None) -> LayerOut:
    """A layer to write with the fields of its vocabulary entry, in the vocabulary's order.

    ``values`` maps field names to arrays; an optional field of ``spec`` may be left out, a required
    one may not, and a name the vocabulary does not know is refused (so every writer of a layer
    gives it the same fields).
    """
    unknown = sorted(set(values) - set(spec.field_names))
    missing = [f for f in spec.required_names if f not in values]
    if unknown or missing:
        raise ValueError(f"layer '{spec.name}': fields {unknown} are not in strikeline.vocabulary and "
                         f"{missing} are missing; add them to the vocabulary or give them")
    return LayerOut(name or spec.name, geoms, {f: values[f] for f in spec.field_names if f in values},
                    spec.geometry)


def picks_layer(name: str, p: PickSet, sources=None) -> LayerOut:
    """A layer of picks: PointZ with ``contact_id``, ``source`` and ``elevation_m``; with
    ``sources`` (:class:`strikeline.pipeline.inputs.ContactSources`) also the contact's input,
    its feature id in its file and its own attributes (:func:`with_contact_sources`)."""
    spec = V.TOP_PICKS if name == V.TOP_PICKS.name else V.PICKS
    return with_contact_sources(vocabulary_layer(spec, shapely.points(p.xyz), {
        "contact_id": p.contact_id.astype(np.int64), "source": p.source.astype(str),
        "elevation_m": p.xyz[:, 2]}, name=name), spec, sources)


def with_contact_sources(layer: LayerOut, spec: V.Layer, sources) -> LayerOut:
    """``layer`` with ``contact_input`` and ``contact_fid`` (in the vocabulary's order) and the
    contact's own attributes after them under ``spec.input_attributes``, looked up by each row's
    ``contact_id``; unchanged without ``sources``."""
    if sources is None:
        return layer
    cols = sources.columns(layer.fields["contact_id"], prefix=spec.input_attributes)
    named = {f: v for f, v in {**layer.fields, **cols}.items() if f in spec.field_names}
    ordered = {f: named[f] for f in spec.field_names if f in named}
    ordered.update({f: v for f, v in cols.items() if f not in spec.field_names})
    return LayerOut(layer.name, layer.geoms, ordered, layer.geometry_type)


def attitudes_layer(a: LocalAttitudes) -> LayerOut:
    """The ``attitudes`` layer of local attitudes (one point per window centre): the layer of
    ``strikeline run`` and of the QGIS local-attitudes tool. ``contact_id`` is -1 for windows
    over all picks."""
    cid = np.array([-1 if c is None else int(c) for c in a.contact_id], dtype=np.int64)
    f = lambda v: np.asarray(v, dtype=float)  # noqa: E731
    return vocabulary_layer(V.ATTITUDES, shapely.points(np.column_stack([a.x, a.y])) if len(a.x)
                            else np.empty(0, dtype=object), {
        "elevation_m": f(a.elevation_m), "dip_deg": f(a.dip_deg), "dip_direction_deg": f(a.dip_direction_deg),
        "strike_rhr_deg": f(a.strike_rhr_deg), "dip_ci95_deg": f(a.dip_ci95_deg),
        "dip_direction_ci95_deg": f(a.dip_direction_ci95_deg), "cone95_deg": f(a.cone95_deg),
        "n_picks": np.asarray(a.n_picks, np.int64), "quality": np.asarray(a.quality, str),
        "reason_code": np.asarray(a.reason_code, str), "coplanarity": f(a.coplanarity),
        "collinearity": f(a.collinearity), "rms_m": f(a.rms_m), "window_kind": np.asarray(a.kind, str),
        "contact_id": cid, "window_m": np.full(len(a.x), float(a.window_m))})


def contours_layer(geoms, elevations_m, *, extrapolated=None, below_ground=None) -> LayerOut:
    """The ``structure_contours`` layer: lines at their elevation (Z), with the flags that are known."""
    geoms = np.asarray(geoms, dtype=object)
    elev = np.asarray(elevations_m, dtype=float)
    values = {"elevation_m": elev}
    if extrapolated is not None:
        values["extrapolated"] = np.asarray(extrapolated, dtype=bool)
    if below_ground is not None:
        values["below_ground"] = np.asarray(below_ground, dtype=bool)
    return vocabulary_layer(V.STRUCTURE_CONTOURS, shapely.force_3d(geoms, elev) if len(geoms) else geoms, values)


def trace_layer(geoms, *, extrapolated=None) -> LayerOut:
    """The ``predicted_trace`` layer, with ``extrapolated`` when known."""
    values = {} if extrapolated is None else {"extrapolated": np.asarray(extrapolated, dtype=bool)}
    return vocabulary_layer(V.PREDICTED_TRACE, np.asarray(geoms, dtype=object), values)


def contact_misfit_layer(segments: dict, sources=None) -> LayerOut:
    """The ``contact_misfit`` layer from the segments of :func:`strikeline.pipeline.depth_trace_misfit`
    (the check against a model gives the vertical misfit and its error as well)."""
    values = {"contact_id": np.asarray(segments["contact_id"], dtype=np.int64),
              "misfit_m": np.asarray(segments["misfit_m"], dtype=float),
              "flagged": np.asarray(segments["flagged"], dtype=bool)}
    for key in ("misfit_z_m", "se_m", "z_score", "flag_m"):
        if key in segments:
            values[key] = np.asarray(segments[key], dtype=float)
    return with_contact_sources(vocabulary_layer(V.CONTACT_MISFIT, segments["geoms"], values), V.CONTACT_MISFIT,
                                sources)


def trace_misfit_layer(vertices, distance_m) -> LayerOut:
    """The ``trace_misfit`` layer: contact vertices on the DEM with their distance to the predicted
    trace (``vertices`` and ``vertex_distance`` of :func:`strikeline.pipeline.depth_trace_misfit`)."""
    vxy = np.asarray(vertices, dtype=float).reshape(-1, 2)
    return vocabulary_layer(V.TRACE_MISFIT, shapely.points(vxy) if len(vxy) else np.empty(0, dtype=object),
                            {"distance_m": np.asarray(distance_m, dtype=float)})


def plane_attitudes_layer(planes) -> LayerOut:
    """The ``plane_attitudes`` layer: one PointZ per plane of
    :func:`strikeline.pipeline.planes.point_planes` (all points first, group ``''``, then each
    group) at its points' centroid, with the values of its attitude that the layer's fields name
    (null where a value is undefined, e.g. no dip direction for a horizontal plane)."""
    rows = [("", planes.plane, planes.location)]
    rows += [(g, att, planes.group_locations[g]) for g, att in planes.groups.items()]
    cols = {}
    for spec in V.PLANE_ATTITUDES.fields:
        vals = [g if spec.name == "group" else att.get(spec.name) for g, att, _ in rows]
        if spec.type == "real":
            cols[spec.name] = np.array([np.nan if v is None else float(v) for v in vals], dtype=float)
        elif spec.type == "integer":
            cols[spec.name] = np.array([0 if v is None else int(v) for v in vals], dtype=np.int64)
        else:
            arr = np.empty(len(vals), dtype=object)
            arr[:] = vals
            cols[spec.name] = arr
    pts = np.array([where for _, _, where in rows], dtype=float).reshape(-1, 3)
    return vocabulary_layer(V.PLANE_ATTITUDES, shapely.points(pts), cols)


def result_rasters(r: Results) -> list[tuple[str, np.ndarray]]:
    """The grids of a run as ``(file name, array)``, in the order they are written."""
    out = [(V.SURFACE.file, r.surface), (V.DIP.file, r.dip_deg), (V.DIP_DIRECTION.file, r.dip_direction_deg)]
    if r.uncertainty_m is not None:
        out.append((V.UNCERTAINTY.file, r.uncertainty_m))
    if r.depth_m is not None:
        out.append((V.DEPTH.file, r.depth_m))
    if r.vertical_thickness_m is not None:
        out += [(V.VERTICAL_THICKNESS.file, r.vertical_thickness_m), (V.TRUE_THICKNESS.file, r.true_thickness_m)]
    return out


def result_layers(r: Results) -> list[LayerOut]:
    """The vector layers of a run (names and fields as in ``results.gpkg``)."""
    cflags = r.contour_extrapolated if r.contour_extrapolated is not None else np.zeros(len(r.contour_geoms), bool)
    tflags = r.trace_extrapolated if r.trace_extrapolated is not None else np.zeros(len(r.trace_geoms), bool)
    layers = [
        picks_layer(V.PICKS.name, r.picks, r.contact_sources),
        contours_layer(r.contour_geoms, r.contour_elevations_m, extrapolated=cflags),
        trace_layer(r.trace_geoms, extrapolated=tflags),
    ]
    if r.contact_misfit is not None:
        layers.append(contact_misfit_layer(r.contact_misfit, r.contact_sources))
    if r.attitudes is not None:
        layers.append(attitudes_layer(r.attitudes))
    if r.top_picks is not None:
        layers.append(picks_layer(V.TOP_PICKS.name, r.top_picks, r.top_contact_sources))
    if r.unit_check is not None:
        layers.append(unit_conflicts_layer(r.unit_check))
    return layers


#: The vocabulary's entry of each raster file (its band's description and unit).
_RASTER_OF_FILE = {spec.file: spec for spec in V.RASTERS.values()}


def _write_all(r: Results, folder: Path, *, is_cancelled=None, report: bool = False, log: Log = _quiet) -> None:
    """Write every output of a run into ``folder`` (a new, empty folder).

    Each writer checks its own file (GDAL's close, the file read back) and raises
    :class:`strikeline.errors.OutputError` on failure; a new output is one more call here. With
    ``report``, the page of figures (:func:`strikeline.report.write_report`) is drawn last, from
    the files already in ``folder``; without matplotlib it is left out with one line to ``log``.
    """
    in_memory = []
    for name, array in result_rasters(r):
        spec = _RASTER_OF_FILE[name]
        if isinstance(array, GridFile):  # written block by block (strikeline.pipeline.tiled)
            place_grid_file(array, folder / name)
            continue
        in_memory.append(RasterOut(folder / name, array, spec.meaning, spec.unit))
    # several files at once: GDAL compresses and writes without Python's lock
    write_geotiffs(in_memory, r.grid, is_cancelled=is_cancelled)
    write_gpkg(folder / V.RESULTS_FILE, result_layers(r), r.grid.crs_wkt)
    write_layer_styles(folder / V.RESULTS_FILE)  # QGIS opens the layers styled (layer_styles)
    write_text_checked(folder / V.SUMMARY_FILE, dumps_stable(r.summary))
    if report:
        from strikeline.report import write_report

        # the window means the block path gathered while it wrote a grid: the values the report's
        # decimated read of the file gives, without decoding it again
        means = {name: a.means for name, a in result_rasters(r) if isinstance(a, GridFile) and a.means is not None}
        write_report(folder, log=log, means=means)


def write_report_file(r: Results, path, *, log: Log = _quiet, is_cancelled=None) -> Path | None:
    """Write the ``report.html`` of ``strikeline run`` to the file ``path``, for a caller that
    writes the run's layers and grids elsewhere (the QGIS whole-chain tool).

    The page is drawn from the files, as the command line draws it: every output is written by
    :func:`_write_all` into a scratch folder beside ``path`` (so the page's figures read the same
    bytes), the page is drawn there and moved onto ``path`` in one rename; the scratch folder,
    which this function made, is removed however it ends. Without matplotlib nothing is written
    and ``log`` gets :data:`strikeline.report.MISSING_PLOT`.

    Returns
    -------
    Path or None
        ``path`` when the page was written.
    """
    import os
    import shutil
    import tempfile

    from strikeline.errors import OutputError
    from strikeline.report import MISSING_PLOT

    try:
        import matplotlib  # noqa: F401 - the plot extra; checked before any file is written
    except ImportError:
        log(MISSING_PLOT)
        return None
    path = Path(path).resolve()
    try:
        scratch = Path(tempfile.mkdtemp(prefix=f".{path.name}.strikeline-report-", dir=path.parent))
    except OSError as exc:
        raise OutputError(f"cannot write the report '{path}': {exc.strerror}; choose a writable folder") from None
    try:
        _write_all(r, scratch, is_cancelled=is_cancelled, report=True, log=log)
        os.replace(scratch / V.REPORT_FILE, path)
    except OSError as exc:
        raise OutputError(f"cannot write the report '{path}': {exc.strerror}; free some space or choose a "
                          "writable folder") from None
    finally:
        shutil.rmtree(scratch, ignore_errors=True)
    return path
