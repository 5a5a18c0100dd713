"""Windows for local attitudes: their radius from the pick density and their centres along the
contacts or on a regular grid.

:func:`default_window_m` sizes a window to hold about ``DEFAULT_WINDOW_PICKS`` picks around a
typical pick and :func:`fallback_window_m` finds one for pick sets too small for it;
:func:`centres_along_contacts` and :func:`grid_centres` place the windows that
:func:`strikeline.attitude.local.local_attitudes` fits. The checks of picks and lengths are shared
with it.
"""
from __future__ import annotations

import numpy as np
from scipy.spatial import cKDTree

from strikeline.attitude.kernels import check_count
from strikeline.errors import InputError

__all__ = [
    "DEFAULT_WINDOW_PICKS",
    "DEFAULT_MIN_POINTS",
    "default_window_m",
    "fallback_window_m",
    "centres_along_contacts",
    "grid_centres",
    "picks_xy",
    "check_positive_m",
    "contact_groups",
]

#: The default window holds about this many picks around a typical pick (see default_window_m).
DEFAULT_WINDOW_PICKS = 50
#: Fewest picks in a window for a fit.
DEFAULT_MIN_POINTS = 10
#: Picks sampled (evenly, deterministically) to estimate the pick density.
_DENSITY_SAMPLE = 5000


def default_window_m(points, *, target_picks=DEFAULT_WINDOW_PICKS):
    """Default window radius from the pick density.

    Parameters
    ----------
    points : array_like, shape ``(n, 2)`` or ``(n, 3)``
        Picks (only x, y are used).
    target_picks : int, optional
        Picks a typical window should hold (default 50).

    Returns
    -------
    float
        The median, over the picks (an even sample of at most 5000 of them), of the distance
        to the ``target_picks``-th nearest other pick; so a window centred on a typical pick
        holds about ``target_picks`` picks. It is capped at half the diagonal of the picks'
        bounding box. Along a contact sampled every ``s`` metres this is about
        ``target_picks · s / 2``.

    Raises
    ------
    InputError
        With fewer picks than ``target_picks + 1`` or all picks at one point.
    """
    xy = picks_xy(points)
    target_picks = check_count("target_picks", target_picks, 3)
    n = len(xy)
    if n <= target_picks:
        raise InputError(
            f"only {n} picks, fewer than the {target_picks + 1} needed to set a default window "
            "from the pick density; give window_m explicitly"
        )
    tree = cKDTree(xy)
    sample = xy[np.unique(np.linspace(0, n - 1, min(n, _DENSITY_SAMPLE)).astype(int))]
    dist, _ = tree.query(sample, k=target_picks + 1)
    radius = float(np.median(dist[:, -1]))
    half_diag = 0.5 * float(np.hypot(*np.ptp(xy, axis=0)))
    radius = min(radius, half_diag)
    if not radius > 0:
        raise InputError("all picks lie at one map position; no window can be set from them")
    return radius


def fallback_window_m(points, *, target_picks=DEFAULT_WINDOW_PICKS, min_points=DEFAULT_MIN_POINTS):
    """A window radius for any pick set, and why it differs from the default (if it does).

    Parameters
    ----------
    points : array_like, shape ``(n, 2)`` or ``(n, 3)``
        Picks (only x, y are used).
    target_picks, min_points : int, optional
        As in :func:`default_window_m` and :func:`local_attitudes`.

    Returns
    -------
    window_m : float or None
        :func:`default_window_m` when there are more than ``target_picks`` picks; with fewer
        but at least ``2 * min_points``, a window holding about half of them (so that windows
        along a contact still differ); ``None`` when there are fewer (or all picks lie at one
        map position): no local attitudes can be fitted.
    note : str
        Empty for the default window, else the reason in words.

    Examples
    --------
    >>> import numpy as np
    >>> x = np.arange(30.0) * 10.0
    >>> r, note = fallback_window_m(np.column_stack([x, np.zeros(30)]))
    >>> round(r), note.split(":")[0]
    (80, 'only 30 picks, too few for the default window of about 50 picks')
    """
    xy = picks_xy(points)
    target_picks = check_count("target_picks", target_picks, 3)
    min_points = check_count("min_points", min_points, 4)
    n = len(xy)
    try:
        if n > target_picks:
            return default_window_m(xy, target_picks=target_picks), ""
        if n >= 2 * min_points:
            r = default_window_m(xy, target_picks=n // 2)
            return r, (f"only {n} picks, too few for the default window of about {target_picks} picks: "
                       f"windows of {r:.0f} m radius hold about {n // 2} picks each instead")
        return None, (f"only {n} picks: local attitudes need at least {2 * min_points} (windows of at least "
                      f"{min_points} picks), so none were fitted")
    except InputError as exc:
        return None, f"no local attitudes: {exc}"


def centres_along_contacts(points, *, spacing_m, contact_id=None):
    """Window centres along each contact, about ``spacing_m`` apart.

    Parameters
    ----------
    points : array_like, shape ``(n, 2)`` or ``(n, 3)``
        Picks, in their order along the contacts where known.
    spacing_m : float
        Spacing of centres (metres).
    contact_id : array_like, shape ``(n,)``, optional
        Contact of each pick; all picks form one contact when omitted.

    Returns
    -------
    index : ndarray of int
        Indices of the picks chosen as centres.
    contact : ndarray of object
        Contact of each centre (None when ``contact_id`` is omitted).

    Notes
    -----
    Greedy thinning, per contact, in pick order: a pick becomes a centre unless it lies
    within ``spacing_m`` of an earlier centre of the same contact. Centres are thus picks on
    the contact, no two closer than ``spacing_m``, and every pick lies within ``spacing_m`` of a
    centre.
    """
    xy = picks_xy(points)
    spacing = check_positive_m("spacing_m", spacing_m)
    groups, labels = contact_groups(contact_id, len(xy))
    index, contact = [], []
    for g, members in enumerate(groups):
        sub = xy[members]
        tree = cKDTree(sub)
        covered = np.zeros(len(sub), dtype=bool)
        for i in range(len(sub)):
            if covered[i]:
                continue
            covered[tree.query_ball_point(sub[i], spacing)] = True
            index.append(members[i])
            contact.append(labels[g])
    out_contact = np.empty(len(contact), dtype=object)
    out_contact[:] = contact
    return np.asarray(index, dtype=np.int64), out_contact


def _axis_nodes(lo: float, hi: float, spacing: float) -> np.ndarray:
    """Multiples of ``spacing`` in ``[lo, hi]``, plus ``lo`` and ``hi`` themselves where they lie
    more than half a spacing from the nearest multiple (or no multiple falls inside)."""
    nodes = np.arange(np.ceil(lo / spacing), np.floor(hi / spacing) + 1) * spacing
    nodes = nodes[(nodes >= lo) & (nodes <= hi)]
    if len(nodes) == 0:
        return np.unique(np.array([lo, hi]) if hi - lo > 0.5 * spacing else np.array([0.5 * (lo + hi)]))
    head = [lo] if nodes[0] - lo > 0.5 * spacing else []
    tail = [hi] if hi - nodes[-1] > 0.5 * spacing else []
    return np.concatenate([head, nodes, tail])


def grid_centres(points, *, spacing_m):
    """Centres of a regular grid of ``spacing_m`` over the picks' bounding box, none outside it.

    The grid is anchored at multiples of ``spacing_m`` (so its inner nodes do not move when
    picks are added); on each axis the box's own edges are added where they lie more than half a
    spacing from the nearest node, so every pick is within half a spacing of a node on each axis
    while no centre lies beyond the picks (which lie on the DEM: a centre off the picks would be a
    window centred off the sheet). Returns an ``(m, 2)`` array.
    """
    xy = picks_xy(points)
    spacing = check_positive_m("spacing_m", spacing_m)
    lo = xy.min(axis=0)
    hi = xy.max(axis=0)
    gx = _axis_nodes(float(lo[0]), float(hi[0]), spacing)
    gy = _axis_nodes(float(lo[1]), float(hi[1]), spacing)
    mx, my = np.meshgrid(gx, gy)
    return np.column_stack([mx.ravel(), my.ravel()])


def picks_xy(points):
    """The x, y columns of ``(n, 2)`` or ``(n, 3)`` picks, refused when malformed, empty or not
    finite in x, y."""
    p = np.asarray(points, dtype=float)
    if p.ndim != 2 or p.shape[1] not in (2, 3):
        raise InputError(f"picks must be an (n, 3) array of x, y, z; got shape {p.shape}")
    if not np.all(np.isfinite(p[:, :2])):
        raise InputError("picks must have finite x and y; drop rows with NaN first")
    if len(p) == 0:
        raise InputError("no picks were given; a local attitude needs picks")
    return p[:, :2]


def check_positive_m(name, value):
    """``value`` as a float, refused unless it is a positive finite number of metres."""
    v = float(value)
    if not (np.isfinite(v) and v > 0):
        raise InputError(f"{name} must be a positive number of metres, got {value!r}")
    return v


def contact_groups(contact_id, n):
    """Indices of the picks of each contact, in pick order, and the contact labels (one group
    labelled ``None`` when ``contact_id`` is ``None``)."""
    if contact_id is None:
        return [np.arange(n)], [None]
    cid = np.asarray(contact_id)
    if cid.shape != (n,):
        raise InputError(f"contact_id must have one value per pick ({n}), got shape {cid.shape}")
    labels, inverse = np.unique(cid, return_inverse=True)
    order = np.argsort(inverse, kind="stable")
    bounds = np.searchsorted(inverse[order], np.arange(len(labels) + 1))
    groups = [order[bounds[g]:bounds[g + 1]] for g in range(len(labels))]
    return groups, [lab.item() if hasattr(lab, "item") else lab for lab in labels]
