"""Planes of point sets: the whole set's plane and one plane per group.

One function fits a plane per group (:func:`planes_by_group`) for ``strikeline run --group-by``,
``strikeline attitude --group-by`` and the QGIS plane-attitude tool; :func:`point_planes` is the
attitude step of a layer of points with elevations (the ``attitude`` command and the QGIS tool):
points without an elevation left out, the bootstrap by contact segment when the points carry a
contact id, the plane of all points and those of the groups.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from strikeline.errors import CancelledError
from strikeline.pipeline.options import default
from strikeline.pipeline.steps import attitude_of, segment_labels


def group_labels(values) -> np.ndarray:
    """The group label of every point: ``str()`` of its grouping value (``None`` -> ``'None'``),
    as ``strikeline run`` and ``strikeline attitude`` label their groups."""
    out = np.empty(len(values), dtype=object)
    out[:] = [str(v) for v in values]
    return out


def planes_by_group(xyz, labels, *, crs_wkt: str, sigma=None, blocks=None, what: str = "group {}",
                    resamples: int = default("resamples"), seed: int = 0, progress=None, is_cancelled=None) -> dict:
    """One plane per distinct label, as :func:`strikeline.pipeline.attitude_of` reports it.

    Parameters
    ----------
    xyz : (n, 3) array
        Points with elevations, metres.
    labels : (n,) array
        Group label of every point (see :func:`group_labels`); groups are taken in sorted order.
    crs_wkt : str
        CRS of the points (for the dip direction from true north).
    sigma : (n,) array, optional
        Vertical standard error of every point, metres (None: unknown).
    blocks : (n,) array, optional
        Bootstrap block of every point (contact segments); each group resamples its own blocks.
    what : str
        How messages name a group, ``{}`` standing for its label.
    resamples, seed
        Bootstrap resamples (and Monte Carlo draws) and the seed of every group's draws.
    progress, is_cancelled
        ``progress(fraction)`` after each group; ``is_cancelled()`` checked by the bootstrap.

    Returns
    -------
    dict
        ``{label: attitude dict}`` in sorted label order. A group that cannot fix a plane is
        ``undetermined`` with its reason (never an error: the verdict is the answer).
    """
    xyz = np.asarray(xyz, dtype=float)
    labels = np.asarray(labels, dtype=object)
    groups = sorted(set(labels.tolist()))
    out = {}
    for k, g in enumerate(groups):
        if is_cancelled is not None and is_cancelled():
            raise CancelledError("planes by group: cancelled; nothing was written")
        m = labels == g
        out[g] = attitude_of(xyz[m], None if sigma is None else np.asarray(sigma, dtype=float)[m],
                             crs_wkt=crs_wkt, what=what.replace("{}", str(g)), strict=False, resamples=resamples,
                             seed=seed, blocks=None if blocks is None else np.asarray(blocks)[m],
                             is_cancelled=is_cancelled)
        if progress is not None:
            progress((k + 1) / len(groups))
    return out


@dataclass
class PointPlanes:
    """The planes of a layer of points (:func:`point_planes`)."""

    plane: dict  # the plane of all points with an elevation (attitude_of's dict)
    groups: dict  # label -> attitude dict (empty without labels)
    n_points: int  # points with an elevation
    n_missing: int  # points left out for want of an elevation
    #: x, y, z where a plane is drawn: its points' centroid, which the plane passes through (for
    #: an undetermined plane the mean of its points; NaN without points): of all points ...
    location: tuple = (np.nan, np.nan, np.nan)
    #: ... and of each group, by label.
    group_locations: dict = field(default_factory=dict)


def point_planes(xyz, *, crs_wkt: str, labels=None, contact_id=None, sigma_z_m: float = 0.0,
                 what: str = "the points", group_what: str = "group {}", resamples: int = default("resamples"),
                 seed: int = 0, progress=None, is_cancelled=None) -> PointPlanes:
    """The attitude step of a layer of points with elevations: the plane of all points and, with
    ``labels``, one per group (:func:`planes_by_group`).

    Points whose x, y or z is not finite (no elevation) are left out and counted. With
    ``contact_id`` (one per point, e.g. the ``picks`` layer of ``strikeline run``) the bootstrap
    resamples whole contact segments (:func:`strikeline.pipeline.segment_labels`), because
    neighbouring picks along a contact share their errors. ``sigma_z_m`` > 0 is every point's
    vertical standard error (Monte Carlo); 0 means unknown. The plane of all points is never an
    error: an undetermined set is reported as such.
    """
    xyz = np.asarray(xyz, dtype=float).reshape(-1, 3)
    usable = np.isfinite(xyz).all(axis=1)
    xyz = xyz[usable]
    labels = None if labels is None else np.asarray(labels, dtype=object)[usable]
    sigma = np.full(len(xyz), float(sigma_z_m)) if sigma_z_m > 0 else None
    blocks = None if contact_id is None else segment_labels(xyz, np.asarray(contact_id, dtype=float)[usable])
    whole = attitude_of(xyz, sigma, crs_wkt=crs_wkt, what=what, strict=False, resamples=resamples, seed=seed,
                        blocks=blocks, is_cancelled=is_cancelled)
    if progress is not None:
        progress(0.0 if labels is not None else 1.0)
    groups = {} if labels is None else planes_by_group(
        xyz, labels, crs_wkt=crs_wkt, sigma=sigma, blocks=blocks, what=group_what, resamples=resamples,
        seed=seed, progress=progress, is_cancelled=is_cancelled)
    where = {g: _location(xyz[labels == g], att) for g, att in groups.items()}
    return PointPlanes(whole, groups, len(xyz), int((~usable).sum()), _location(xyz, whole), where)


def _location(xyz, att: dict) -> tuple[float, float, float]:
    c = att.get("centroid_m")
    if c is None:
        c = xyz.mean(axis=0) if len(xyz) else (np.nan, np.nan, np.nan)
    return tuple(float(v) for v in c)


def point_local_attitudes(xyz, *, contact_id=None, what: str = "the points", **options):
    """Local attitudes (:func:`strikeline.attitude.local_attitudes`) of a layer of points with
    elevations, and the count of their windows by quality.

    ``contact_id`` (one number per point, NaN for none -> -1) centres windows along each
    contact; ``options`` are :func:`~strikeline.attitude.local_attitudes`'s. Input errors name
    the points (``what``). Returns ``(attitudes, {quality: windows})`` for good, weak and
    undetermined.
    """
    from strikeline.attitude import local_attitudes
    from strikeline.errors import InputError

    cid = None
    if contact_id is not None:
        c = np.asarray(contact_id, dtype=float)
        cid = np.where(np.isfinite(c), c, -1).astype(np.int64)
    try:
        la = local_attitudes(xyz, contact_id=cid, **options)
    except InputError as exc:
        raise type(exc)(f"{what}: {exc}") from None
    counts = {q: int(np.count_nonzero(la.quality == q)) for q in ("good", "weak", "undetermined")}
    return la, counts
