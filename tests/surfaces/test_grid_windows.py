"""Grid evaluation by windows and the faster grid internals give the values of the plain
per-cell computations on the real-terrain sheets (test_data/real): the bounded extrapolation
flag, the standard-error grid (distance by lower envelope) and windows of every grid.

Reference: scipy.spatial.cKDTree's unbounded nearest-neighbour search (what the flag and the
standard error used per cell before) and the whole grid's own call for its windows.
"""
from __future__ import annotations

import sys
import tempfile
from pathlib import Path

import numpy as np
import pytest
import shapely
from scipy.spatial import cKDTree

REPO = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(REPO / "test_data"))

import real_truth  # noqa: E402

from strikeline.pipeline import (RunOptions, collect_picks, load_inputs, model_surface, pick_sigmas,  # noqa: E402
                                 structure_contours, surface_grid)
from strikeline.maps.trace import split_lines_by_flag, vertex_spacing_m  # noqa: E402
from strikeline.surfaces.hull import distance_grid  # noqa: E402

CASES = [("volcano", "fold", "auto"), ("volcano", "plane", "auto"), ("volcano", "fold", "trend2"),
         ("lidar", "plane", "plane")]


@pytest.fixture(scope="module", params=CASES, ids=["-".join(c) for c in CASES])
def sheet(request):
    dem, case, model = request.param
    paths = real_truth.case_paths(dem, case)
    opts = RunOptions(contacts=str(paths["contacts"]), contacts_layer="contacts", dem=str(paths["dem"]),
                      out=str(Path(tempfile.mkdtemp()) / "out"), model=model)  # never written
    inputs = load_inputs(opts)
    picks = collect_picks(inputs, spacing_m=None)
    grid = surface_grid(inputs, opts)
    m = model_surface(picks, opts, grid, what=case, sigma=pick_sigmas(inputs, picks, opts),
                      vertex_spacing_m=vertex_spacing_m(inputs.contacts.geoms))
    return grid, m, opts


def _kdtree_distance(m, x, y):
    # Source: scipy.spatial.cKDTree.query without a bound, on the data the model used
    d, _ = cKDTree(m.data_xy).query(np.column_stack([np.ravel(x), np.ravel(y)]))
    return d.reshape(np.shape(x))


def test_extrapolation_flag_is_the_unbounded_distance_beyond_the_reach(sheet):
    grid, m, opts = sheet
    X, Y = grid.mesh()
    assert np.array_equal(m.is_extrapolated(X, Y), _kdtree_distance(m, X, Y) > m.reach_m)
    # points at exactly the reach (a datum moved out along x) are not extrapolated, as before
    xy = m.data_xy[:50]
    assert not m.is_extrapolated(xy[:, 0] + m.reach_m, xy[:, 1]).any() or \
        np.array_equal(m.is_extrapolated(xy[:, 0] + m.reach_m, xy[:, 1]),
                       _kdtree_distance(m, xy[:, 0] + m.reach_m, xy[:, 1]) > m.reach_m)


def test_structure_contours_split_as_with_the_unbounded_search(sheet):
    grid, m, opts = sheet
    surface = m.evaluate_grid(grid)
    new = structure_contours(surface, grid, interval_m=opts.interval_m / 5, extrapolated_fn=m.is_extrapolated)
    geoms, levels, _ = structure_contours(surface, grid, interval_m=opts.interval_m / 5)
    old = split_lines_by_flag(geoms, lambda x, y: _kdtree_distance(m, x, y) > m.reach_m,
                              spacing_m=min(grid.cell_x_m, grid.cell_y_m))
    assert len(new[0]) == len(old[0]) > 0
    assert all(shapely.equals_exact(a, b, 0.0) for a, b in zip(new[0], old[0]))
    assert np.array_equal(new[2], old[1])
    assert np.array_equal(new[1], np.asarray(levels, float)[old[2]])


def test_standard_error_grid_equals_the_per_cell_formula(sheet):
    grid, m, opts = sheet
    X, Y = grid.mesh()
    # Source: the per-cell standard error with the KD-tree distance (scipy), as the grid was made before
    want = m.standard_error(X, Y)
    for workers in (1, 2):
        assert np.array_equal(m.standard_error_grid(grid, workers=workers), want)


def test_distance_grid_equals_the_kdtree_distance(sheet):
    grid, m, opts = sheet
    xs, ys = grid.cell_centres()
    X, Y = grid.mesh()
    assert np.array_equal(distance_grid(xs, ys, m.data_xy), _kdtree_distance(m, X, Y))


def test_distance_grid_on_awkward_data():
    # Source: scipy.spatial.cKDTree.query; ties on a lattice, duplicates, one vertical line,
    # two points and one point
    rng = np.random.default_rng(5)
    xs, ys = np.linspace(-900.0, 900.0, 97), np.linspace(-700.0, 700.0, 61)
    X, Y = np.meshgrid(xs, ys)
    sets = [np.round(rng.normal(0, 300, (80, 2)) / 100) * 100, np.column_stack([np.full(9, 5.0), np.arange(9.0)]),
            np.array([[0.0, 0.0], [10.0, 0.0]]), np.array([[3.0, -4.0]]), np.repeat(rng.normal(0, 50, (5, 2)), 3, 0)]
    for data in sets:
        want = cKDTree(data).query(np.column_stack([X.ravel(), Y.ravel()]))[0].reshape(X.shape)
        assert np.array_equal(distance_grid(xs, ys, data), want)


@pytest.mark.parametrize("window", [(0, 7, 0, 5), (3, 10, 11, 19), (1, 2, 0, 1)])
def test_a_window_holds_the_values_of_the_whole_grid(sheet, window):
    grid, m, opts = sheet
    r0, r1, c0, c1 = window
    r1, c1 = min(r1, grid.rows), min(c1, grid.cols)
    whole_z, report = m.evaluate_grid(grid, return_report=True)
    whole_se = m.standard_error_grid(grid)
    z, wreport = m.evaluate_grid(grid, window=(r0, r1, c0, c1), return_report=True)
    assert wreport == report
    assert np.array_equal(z, whole_z[r0:r1, c0:c1])
    assert np.array_equal(m.standard_error_grid(grid, window=(r0, r1, c0, c1)), whole_se[r0:r1, c0:c1])
    # the last rows and columns too (the coarse lattice always holds them)
    last = (grid.rows - 3, grid.rows, grid.cols - 4, grid.cols)
    assert np.array_equal(m.evaluate_grid(grid, window=last), whole_z[-3:, -4:])


def test_a_window_outside_the_grid_is_refused(sheet):
    grid, m, opts = sheet
    from strikeline.errors import InputError
    with pytest.raises(InputError, match="window"):
        m.evaluate_grid(grid, window=(0, grid.rows + 1, 0, 2))
    with pytest.raises(InputError, match="window"):
        m.standard_error_grid(grid, window=(4, 4, 0, 2))


def test_distance_grid_on_data_that_strain_the_breakpoints():
    # Source: scipy.spatial.cKDTree.query. Data whose envelope's breakpoints are ill-conditioned:
    # pairs a few nanometres apart in x, map coordinates of millions of metres, rows that pass
    # exactly midway between data (ties), and columns finer than the data's spacing
    rng = np.random.default_rng(11)
    base = np.column_stack([rng.uniform(0, 3000, 60), rng.uniform(0, 2000, 60)])
    twins = base[:20] + np.column_stack([rng.choice([1e-9, 3e-8, 1e-6], 20), rng.normal(0, 40, 20)])
    lattice = np.array([[x, y] for x in (500.0, 1500.0, 2500.0) for y in (400.0, 1200.0)])
    for offset in ((0.0, 0.0), (612_345.0, 5_234_567.0)):
        data = np.vstack([base, twins, lattice]) + offset
        xs = np.linspace(-200.0, 3200.0, 1701) + offset[0]
        ys = np.concatenate([np.linspace(-100.0, 2100.0, 37), [800.0, 1200.0]]) + offset[1]
        X, Y = np.meshgrid(xs, ys)
        want = cKDTree(data).query(np.column_stack([X.ravel(), Y.ravel()]))[0].reshape(X.shape)
        assert np.array_equal(distance_grid(xs, ys, data), want)
        # columns in falling order take the cell-by-cell route: the same values
        assert np.array_equal(distance_grid(xs[::-1], ys, data), want[:, ::-1])
