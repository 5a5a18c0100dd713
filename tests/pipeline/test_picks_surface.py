"""The surface step on its own (``strikeline.pipeline.picks_surface``) against a plane's own formula."""
from __future__ import annotations

import math

import numpy as np
import pytest

from strikeline.geometry.grid import Grid
from strikeline.pipeline import RunOptions
from strikeline.pipeline.picks_surface import surface_from_picks
from strikeline.pipeline.points import pick_set_of_points

DIP_DEG, DIP_DIRECTION_DEG = 30.0, 120.0
GRID = Grid((0.0, 20.0, 0.0, 1000.0, 0.0, -20.0), (50, 50))


def plane_z(x, y):
    """# Source: from memory - the definition of dip and dip direction (Ragan 2009, ch. 1): the plane
    descends tan(dip) per metre along (sin az, cos az), x east, y north."""
    az = math.radians(DIP_DIRECTION_DEG)
    return 500.0 - math.tan(math.radians(DIP_DEG)) * ((x - 500.0) * math.sin(az) + (y - 500.0) * math.cos(az))


def test_a_plane_of_picks_gives_the_plane_everywhere():
    rng = np.random.default_rng(8)
    x, y = rng.uniform(100, 900, 120), rng.uniform(100, 900, 120)
    picks = pick_set_of_points(np.column_stack([x, y, plane_z(x, y)]), contact_id=np.repeat(np.arange(6), 20))
    logs = []
    s = surface_from_picks(picks, RunOptions(contacts="picks", out="", model="plane"), GRID, standard_error=True,
                           mask=True, log=logs.append)
    X, Y = GRID.mesh()
    np.testing.assert_allclose(s.elevation_m, plane_z(X, Y), atol=1e-6)
    assert s.dip_deg == pytest.approx(DIP_DEG, abs=1e-7)
    assert s.dip_direction_deg == pytest.approx(DIP_DIRECTION_DEG, abs=1e-7)
    assert s.standard_error_m.shape == GRID.shape and s.forecast_mask.shape == GRID.shape
    assert s.forecast_mask.dtype == np.float32 and s.unit_check is None
    assert any(m.startswith("surface model: plane") and "plane dip 30.00° toward 120.0°" in m for m in logs)


def test_grids_not_asked_for_are_not_made():
    rng = np.random.default_rng(9)
    x, y = rng.uniform(100, 900, 60), rng.uniform(100, 900, 60)
    picks = pick_set_of_points(np.column_stack([x, y, plane_z(x, y)]))
    s = surface_from_picks(picks, RunOptions(contacts="picks", out="", model="plane"), GRID)
    assert s.standard_error_m is None and s.forecast_mask is None
