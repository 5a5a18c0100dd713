"""strikeline.maps.contours.trim_contour_fringe checks many vertices a band of rows at a time:
the same lines as checking them all at once."""
from __future__ import annotations

import numpy as np
import pytest

gdal = pytest.importorskip("osgeo.gdal")

from strikeline.geometry.grid import Grid  # noqa: E402
from strikeline.io.contours import contour_lines  # noqa: E402
from strikeline.maps import contours as mc  # noqa: E402


def test_bands_give_the_lines_of_one_pass(monkeypatch):
    # a surface over 700 x 600 cells with a hole and a ragged edge of nodata: GDAL's contour
    # generator (Source: GDAL's ContourGenerate via strikeline.io.contours) draws lines that leave
    # the data, so the fringe is trimmed in many places
    grid = Grid((500000.0, 2.0, 0.0, 4200000.0, 0.0, -2.0), (700, 600), "")
    X, Y = grid.mesh()
    z = 0.05 * (X - 500000.0) + 20 * np.sin((Y - 4200000.0) / 90.0)
    z[200:330, 150:420] = np.nan
    z[:, :40][np.random.default_rng(2).random((700, 40)) < 0.3] = np.nan
    geoms, levels = contour_lines(z, grid, interval_m=2.0)
    valid = np.isfinite(z)
    valid[400:450, :] = False  # a strip the lines cross that the mask says holds no data: cut there
    monkeypatch.setattr(mc, "_CHECK_VERTICES", 1000)  # several bands of 256 rows
    banded = mc.trim_contour_fringe(geoms, levels, valid, grid)
    monkeypatch.setattr(mc, "_CHECK_VERTICES", 1 << 40)  # one pass
    whole = mc.trim_contour_fringe(geoms, levels, valid, grid)
    assert len(whole[0]) > len(geoms) // 2  # the check has lines to compare
    assert len(banded[0]) == len(whole[0]) and np.array_equal(banded[1], whole[1])
    assert all(a.equals_exact(b, 0.0) for a, b in zip(banded[0], whole[0]))
    # lines were cut: fewer vertices than GDAL drew
    import shapely
    assert shapely.get_num_coordinates(whole[0]).sum() < shapely.get_num_coordinates(geoms).sum()


def test_lines_split_by_a_flag_in_chunks_are_those_of_one_pass(monkeypatch):
    # Source: the same function on all lines at once; the flag is a point-by-point test (a
    # distance to a point, as a model's reach is), so whole lines in chunks give the same parts
    import shapely

    from strikeline.maps import trace

    grid = Grid((500000.0, 2.0, 0.0, 4200000.0, 0.0, -2.0), (400, 500), "")
    X, Y = grid.mesh()
    z = 0.05 * (X - 500000.0) + 20 * np.sin((Y - 4200000.0) / 90.0)
    geoms, levels = contour_lines(z, grid, interval_m=1.0)

    def far(x, y):
        return np.hypot(x - 500400.0, y - 4199600.0) > 300.0

    monkeypatch.setattr(trace, "_SPLIT_VERTICES", 500)
    chunked = trace.split_lines_by_flag(geoms, far, spacing_m=2.0)
    monkeypatch.setattr(trace, "_SPLIT_VERTICES", 1 << 40)
    whole = trace.split_lines_by_flag(geoms, far, spacing_m=2.0)
    assert shapely.get_num_coordinates(geoms).sum() > 10 * 500  # many chunks
    assert whole[1].any() and not whole[1].all()  # lines leave the reach and come back
    assert np.array_equal(chunked[1], whole[1]) and np.array_equal(chunked[2], whole[2])
    assert len(chunked[0]) == len(whole[0])
    assert all(a.equals_exact(b, 0.0) for a, b in zip(chunked[0], whole[0]))
