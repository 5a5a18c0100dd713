"""Layers of points with elevations read back as the steps' inputs: the points' x, y and elevation
(from a field or their Z), their attribute values, and a pick set rebuilt from a picks layer (the
``picks`` output of ``strikeline run`` or of the QGIS contact-picks tool).
"""
from __future__ import annotations

import numpy as np
import shapely

from strikeline.errors import InputError
from strikeline.io.vector import VectorLayer
from strikeline.picks import SOURCES, PickSet


def point_xyz(layer: VectorLayer, *, z_field: str | None = None, z_option: str = "the elevation field",
              what: str | None = None, no_z_fix: str = "name the field that holds the elevations"):
    """``(xyz, owner)``: every point's x, y and elevation, (n, 3) metres, and the index of the
    feature it belongs to (multi-points give several).

    The elevation comes from the numeric field ``z_field`` when it is named (NaN for null; the
    points' own Z, if any, is ignored), otherwise from the points' Z, which every point must then
    have. ``z_option`` names the setting that chose the field in messages, ``what`` the layer
    (default: the layer's own name), ``no_z_fix`` what to do about points without Z.
    """
    coords, owner = shapely.get_coordinates(layer.geoms, include_z=True, return_index=True)
    if z_field:
        z = layer.numeric_field(z_field, option=z_option)[owner]
    elif len(layer.geoms) and not shapely.has_z(layer.geoms).all():
        raise InputError(f"{what or layer.what} has points without Z; {no_z_fix}")
    else:
        z = coords[:, 2]
    return np.column_stack([coords[:, 0], coords[:, 1], z]), owner


def point_values(layer: VectorLayer, owner, *, numeric=(), text=(), what: str | None = None) -> dict:
    """Attribute values per point (``owner`` from :func:`point_xyz`): each of ``numeric`` as
    float64 with NaN for null (:meth:`VectorLayer.numeric_field`'s errors), each of ``text`` as
    read (any type; a missing one is an error that lists the layer's fields)."""
    for f in text:
        if f not in layer.fields:
            raise InputError(f"{what or layer.what} has no field '{f}' (fields: {', '.join(layer.fields) or 'none'}); "
                             "choose one of its fields")
    values = {f: layer.numeric_field(f, option=f"the field '{f}'")[owner] for f in numeric}
    values.update({f: layer.fields[f][owner] for f in text})
    return values


def pick_set_of_points(xyz, *, contact_id=None, source=None) -> PickSet:
    """A pick set rebuilt from points read back from a picks layer.

    ``contact_id`` (one per point; null -> -1) keeps each contact's picks together in the
    cross-validation folds; without it every pick is on one contact (0). ``source`` labels the
    picks (a value that is not a pick source counts as ``dem``; without it all are ``dem``); it
    is carried, not used in the fit.
    """
    xyz = np.asarray(xyz, dtype=float).reshape(-1, 3)
    if contact_id is None:
        cid = np.zeros(len(xyz), np.int64)
    else:
        cid = np.array([-1 if v is None or (isinstance(v, float) and np.isnan(v)) else int(v) for v in contact_id],
                       dtype=np.int64)
    if source is None:
        src = np.full(len(xyz), "dem", dtype="<U8")
    else:
        src = np.array([v if v in SOURCES else "dem" for v in source], dtype="<U8")
    return PickSet(xyz, cid, src)
