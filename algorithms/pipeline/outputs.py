"""What a run writes: the GeoTIFF grids, the layers of ``results.gpkg`` and ``summary.json``,
all into a temporary folder renamed into place.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np
import shapely

from strikeline.io.files import atomic_folder, dumps_stable
from strikeline.io.raster import write_geotiff
from strikeline.io.vector import LayerOut, write_gpkg
from strikeline.attitude.local import LocalAttitudes
from strikeline.picks import (PickSet)
from strikeline.pipeline.compute import Results
from strikeline.pipeline.units import unit_conflicts_layer


# --------------------------------------------------------------------------- writing
def write_results(results: Results, out_dir, *, overwrite: bool = False) -> Path:
    """Write every output into ``out_dir`` atomically.

    Everything goes into a temporary sibling folder first; only when every file is complete is
    it renamed to ``out_dir`` (an existing ``out_dir`` is replaced only with ``overwrite``).
    """
    with atomic_folder(out_dir, overwrite=overwrite) as tmp:
        _write_all(results, tmp)
    return Path(out_dir)


def picks_layer(name: str, p: PickSet) -> LayerOut:
    """A layer of picks: PointZ with ``contact_id``, ``source`` and ``elevation_m``."""
    return LayerOut(name, shapely.points(p.xyz), {"contact_id": p.contact_id.astype(np.int64),
                                                  "source": p.source.astype(str),
                                                  "elevation_m": p.xyz[:, 2]}, "point_z")


def attitudes_layer(a: LocalAttitudes) -> LayerOut:
    """The ``attitudes`` layer of local attitudes (one point per window centre)."""
    cid = np.array([-1 if c is None else int(c) for c in a.contact_id], dtype=np.int64)
    return LayerOut("attitudes", shapely.points(np.column_stack([a.x, a.y])), {
        "dip": np.asarray(a.dip_deg, float), "dip_direction": np.asarray(a.dip_direction_deg, float),
        "strike_rhr": np.asarray(a.strike_rhr_deg, float), "dip_ci95": np.asarray(a.dip_ci95_deg, float),
        "dip_direction_ci95": np.asarray(a.dip_direction_ci95_deg, float),
        "n_picks": np.asarray(a.n_picks, np.int64), "quality": np.asarray(a.quality, str),
        "reason": np.asarray(a.reason_code, str), "window_kind": np.asarray(a.kind, str),
        "contact_id": cid, "window_m": np.full(len(a.x), float(a.window_m)),
    }, "point")


def result_rasters(r: Results) -> list[tuple[str, np.ndarray]]:
    """The grids of a run as ``(file name, array)``, in the order they are written."""
    out = [("surface.tif", r.surface), ("dip.tif", r.dip_deg), ("dip_direction.tif", r.dip_direction_deg)]
    if r.uncertainty_m is not None:
        out.append(("uncertainty.tif", r.uncertainty_m))
    if r.depth_m is not None:
        out.append(("depth.tif", r.depth_m))
    if r.vertical_thickness_m is not None:
        out += [("vertical_thickness.tif", r.vertical_thickness_m), ("true_thickness.tif", r.true_thickness_m)]
    return out


def result_layers(r: Results) -> list[LayerOut]:
    """The vector layers of a run (names and fields as in ``results.gpkg``)."""
    cflags = r.contour_extrapolated if r.contour_extrapolated is not None else np.zeros(len(r.contour_geoms), bool)
    tflags = r.trace_extrapolated if r.trace_extrapolated is not None else np.zeros(len(r.trace_geoms), bool)
    layers = [
        picks_layer("picks", r.picks),
        LayerOut("structure_contours", shapely.force_3d(r.contour_geoms, r.contour_elevations_m)
                 if len(r.contour_geoms) else r.contour_geoms,
                 {"elevation": np.asarray(r.contour_elevations_m, dtype=float),
                  "extrapolated": np.asarray(cflags, dtype=bool)}, "line_z"),
        LayerOut("predicted_trace", r.trace_geoms, {"extrapolated": np.asarray(tflags, dtype=bool)},
                 "line"),
    ]
    if r.contact_misfit is not None:
        cm = r.contact_misfit
        fields = {"contact_id": cm["contact_id"], "misfit_m": cm["misfit_m"]}
        for key in ("misfit_z_m", "se_m", "z_score", "flag_m"):
            if key in cm:
                fields[key] = np.asarray(cm[key], dtype=float)
        fields["flagged"] = cm["flagged"]
        layers.append(LayerOut("contact_misfit", cm["geoms"], fields, "line"))
    if r.attitudes is not None:
        layers.append(attitudes_layer(r.attitudes))
    if r.top_picks is not None:
        layers.append(picks_layer("top_picks", r.top_picks))
    if r.unit_check is not None:
        layers.append(unit_conflicts_layer(r.unit_check))
    return layers


def _write_all(r: Results, folder: Path) -> None:
    for name, array in result_rasters(r):
        write_geotiff(folder / name, array, r.grid)
    write_gpkg(folder / "results.gpkg", result_layers(r), r.grid.crs_wkt)
    (folder / "summary.json").write_text(dumps_stable(r.summary))
