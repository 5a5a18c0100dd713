"""Output tables shared by several tools (the same layers the command line writes)."""
from __future__ import annotations

import numpy as np
import shapely
from qgis.core import QgsWkbTypes

from strikeline.pipeline import picks_layer

from ..outputs import Table


def picks_table(picks) -> Table:
    """The ``picks`` layer of ``strikeline run``: PointZ with contact_id, source, elevation_m."""
    return Table.of_layer(picks_layer("picks", picks))


def contours_table(geoms, elevations_m, below_ground=None, extrapolated=None) -> Table:
    """Structure contours: LineStringZ at their elevation, field ``elevation`` (the layer of
    ``strikeline run``), and the part flags ``extrapolated`` (beyond the reach of the data: a
    forecast) / ``below_ground`` when they are known."""
    geoms = np.asarray(geoms, dtype=object)
    elev = np.asarray(elevations_m, dtype=float)
    if len(geoms):
        geoms = shapely.force_3d(geoms, elev)
    fields = {"elevation": elev}
    if below_ground is not None:
        fields["below_ground"] = np.asarray(below_ground, dtype=bool)
    if extrapolated is not None:
        fields["extrapolated"] = np.asarray(extrapolated, dtype=bool)
    return Table(geoms, fields, QgsWkbTypes.LineStringZ)


def trace_table(geoms, extrapolated=None) -> Table:
    """The predicted outcrop trace: lines, with ``extrapolated`` (as ``strikeline run``) when known."""
    geoms = np.asarray(geoms, dtype=object)
    fields = {}
    if extrapolated is not None:
        fields["extrapolated"] = np.asarray(extrapolated, dtype=bool)
    return Table(geoms, fields, QgsWkbTypes.LineString)
