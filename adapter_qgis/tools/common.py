"""Output tables shared by several tools: the layers the command line writes, built by the same
library functions, so a single-step tool and the whole chain give a layer the same fields."""
from __future__ import annotations

from strikeline.pipeline import contours_layer, picks_layer, trace_layer

from ..outputs import Table


def picks_table(picks) -> Table:
    """The ``picks`` layer of ``strikeline run``: PointZ with contact_id, source, elevation_m."""
    return Table.of_layer(picks_layer("picks", picks))


def contours_table(geoms, elevations_m, below_ground=None, extrapolated=None) -> Table:
    """The ``structure_contours`` layer: LineStringZ with ``elevation_m``, and the part flags
    ``extrapolated`` (beyond the reach of the data: a forecast) / ``below_ground`` when known."""
    return Table.of_layer(contours_layer(geoms, elevations_m, extrapolated=extrapolated,
                                         below_ground=below_ground))


def trace_table(geoms, extrapolated=None) -> Table:
    """The ``predicted_trace`` layer: lines, with ``extrapolated`` (as ``strikeline run``) when known."""
    return Table.of_layer(trace_layer(geoms, extrapolated=extrapolated))
