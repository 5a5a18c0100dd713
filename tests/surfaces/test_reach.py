"""The lattice of reach flags gives the flags of a KD-tree search for every point."""
from __future__ import annotations

from concurrent.futures import ThreadPoolExecutor

import numpy as np
import pytest
from scipy.spatial import cKDTree

from strikeline.surfaces import fit_surface
from strikeline.surfaces.reach import ASK, BEYOND, WITHIN, ReachLattice, beyond_reach


def brute_beyond(data: np.ndarray, reach: float, x, y) -> np.ndarray:
    """Reference: the nearest datum by numpy's exhaustive distances (no tree, no lattice)."""
    # Source: the definition (nearest-neighbour distance > reach), computed exhaustively with numpy
    d = np.sqrt(np.min((x[:, None] - data[None, :, 0]) ** 2 + (y[:, None] - data[None, :, 1]) ** 2, axis=1))
    return d > reach


def scattered(seed: int = 3, n: int = 300, x0: float = 512_000.0, y0: float = 6_204_000.0):
    """Invented data: clustered points along a few lines in projected coordinates of this size."""
    rng = np.random.default_rng(seed)
    t = rng.uniform(0, 1, n)
    line = rng.integers(0, 3, n)
    x = x0 + 4_000 * t + 700 * line + rng.normal(0, 20, n)
    y = y0 + 2_500 * np.sin(3 * t + line) + rng.normal(0, 20, n)
    return np.column_stack([x, y])


def test_same_flags_as_the_search_everywhere():
    data = scattered()
    tree, reach = cKDTree(data), 350.0
    lattice = ReachLattice(tree, reach)
    rng = np.random.default_rng(7)
    lo, hi = data.min(axis=0) - 3 * reach, data.max(axis=0) + 3 * reach
    pts = rng.uniform(lo, hi, size=(60_000, 2))
    # points at exactly the reach from a datum and a hair either side of it, and on cell corners
    on = data[:50] + [reach, 0.0]
    corners = lattice.origin + lattice.h * rng.integers(0, min(lattice.shape), size=(500, 2))
    pts = np.vstack([pts, on, on + [1e-7, 0.0], on - [1e-7, 0.0], corners])
    got = lattice(pts[:, 0], pts[:, 1])
    # Source: scipy.spatial.cKDTree.query without a bound (the nearest datum's distance), and numpy exhaustively
    d, _ = tree.query(pts)
    assert np.array_equal(got, d > reach)
    assert np.array_equal(got, beyond_reach(tree, reach, pts[:, 0], pts[:, 1]))
    assert np.array_equal(got, brute_beyond(data, reach, pts[:, 0], pts[:, 1]))
    assert got.any() and not got.all()
    # the lattice settles most cells itself and asks the tree only near the reach's boundary
    assert (lattice.state == WITHIN).any() and (lattice.state == BEYOND).any()
    assert (lattice.state == ASK).mean() < 0.5


def test_shapes_non_finite_and_far_points():
    data = scattered(seed=5, n=80)
    tree, reach = cKDTree(data), 200.0
    lattice = ReachLattice(tree, reach)
    x = np.array([[data[0, 0], data[0, 0] + 1e7, 1e9], [data[1, 0] + 199.0, -1e9, data[1, 0] + 201.0]])
    y = np.array([[data[0, 1], data[0, 1], data[0, 1]], [data[1, 1], 0.0, data[1, 1]]])
    got = lattice(x, y)
    assert got.shape == (2, 3)
    # Source: scipy.spatial.cKDTree.query bounded just beyond the reach
    assert np.array_equal(got, beyond_reach(tree, reach, x, y))
    assert got[0, 1] and got[0, 2] and got[1, 1] and not got[0, 0] and not got[1, 0]
    # a non-finite point is refused as the search refuses it (scipy: "'x' must be finite")
    for bad in (np.nan, np.inf):
        with pytest.raises(ValueError, match="finite"):
            beyond_reach(tree, reach, np.array([bad]), np.array([0.0]))
        with pytest.raises(ValueError, match="finite"):
            lattice(np.array([data[0, 0], bad]), np.array([data[0, 1], 0.0]))
    assert lattice(np.empty(0), np.empty(0)).shape == (0,)
    # broadcast: a row of x against a column of y
    xs = np.linspace(data[:, 0].min() - 500, data[:, 0].max() + 500, 200)
    ys = np.linspace(data[:, 1].min() - 500, data[:, 1].max() + 500, 150)[:, None]
    X, Y = np.broadcast_arrays(xs, ys)
    assert np.array_equal(lattice(xs, ys), tree.query(np.column_stack([X.ravel(), Y.ravel()]))[0].reshape(X.shape) > reach)


def test_model_flags_match_distance_to_data_and_one_lattice_across_threads():
    rng = np.random.default_rng(11)
    xy = scattered(seed=9, n=400)
    z = 300.0 - 0.25 * (xy[:, 0] - xy[0, 0]) + 0.1 * (xy[:, 1] - xy[0, 1]) + rng.normal(0, 0.5, len(xy))
    model = fit_surface(np.column_stack([xy, z]), model="plane")
    lo, hi = xy.min(axis=0) - 2_000, xy.max(axis=0) + 2_000
    pts = rng.uniform(lo, hi, size=(200_000, 2))  # above the size that takes the lattice
    with ThreadPoolExecutor(max_workers=4) as pool:
        parts = list(pool.map(lambda p: model.is_extrapolated(p[:, 0], p[:, 1]), np.array_split(pts, 8)))
    flags = np.concatenate(parts)
    # Source: the model's own definition, distance_to_data (an unbounded scipy cKDTree search) > reach_m
    assert np.array_equal(flags, model.distance_to_data(pts[:, 0], pts[:, 1]) > model.reach_m)
    assert 0 < flags.mean() < 1
    assert isinstance(model._prepared.get("reach_lattice"), ReachLattice)
    small = pts[:100]  # below that size: the search itself, the same flags
    assert np.array_equal(model.is_extrapolated(small[:, 0], small[:, 1]), flags[:100])


@pytest.mark.parametrize("reach", [1e-3, 5.0, 5_000.0])
def test_tiny_and_huge_reach(reach):
    data = scattered(seed=2, n=60)
    tree = cKDTree(data)
    lattice = ReachLattice(tree, reach)
    assert lattice.state.size <= (1 << 18) + 5 * sum(lattice.shape) + 25  # the cap, plus the spare cells
    rng = np.random.default_rng(1)
    pts = np.vstack([rng.uniform(data.min(axis=0) - 2 * reach - 100, data.max(axis=0) + 2 * reach + 100,
                                 size=(20_000, 2)), data + [reach * 0.999, 0.0], data + [reach * 1.001, 0.0]])
    # Source: scipy.spatial.cKDTree.query without a bound
    assert np.array_equal(lattice(pts[:, 0], pts[:, 1]), tree.query(pts)[0] > reach)
