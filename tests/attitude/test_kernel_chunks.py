"""The many-window kernels in small chunks: the same replicate normals and half-widths, bit for
bit, as in one chunk, and those of numpy's own functions.

References: ``numpy.random.Generator.random`` / ``standard_normal`` fill an array value after
value from the bit generator, so two draws of ``(b1, n)`` and ``(b2, n)`` are one draw of
``(b1 + b2, n)`` (numpy's random module, from memory; checked here by the equality itself);
``numpy.linalg.eigh`` (LAPACK's symmetric solver, eigenvalues ascending) and ``numpy.quantile``
(linear interpolation, numpy's default) as the outside references of each normal and half-width.
"""
from __future__ import annotations

import numpy as np
import pytest

import strikeline.attitude.kernels as K


def _windows(seed=5):
    rng = np.random.default_rng(seed)
    counts = rng.integers(12, 40, 37)
    q = rng.standard_normal((int(counts.sum()), 3)) * [40.0, 25.0, 1.5]
    starts = np.concatenate([[0], np.cumsum(counts)[:-1]])
    for s, n in zip(starts, counts):  # centre each window on its centroid, as the callers do
        q[s:s + n] -= q[s:s + n].mean(axis=0)
    blocks = np.arange(len(q)) // 4
    return q, counts, blocks


def _normals(monkeypatch, kernel, elements):
    monkeypatch.setattr(K, "_WINDOW_CHUNK_ELEMENTS", elements)
    q, counts, blocks = _windows()
    rng = np.random.default_rng(11)
    if kernel == "bootstrap":
        return K.window_block_normals(q, counts, blocks, 203, rng)[0]
    starts = np.concatenate([[0], np.cumsum(counts)[:-1]])
    scatter = np.stack([q[s:s + n].T @ q[s:s + n] for s, n in zip(starts, counts)])
    return K.monte_carlo_normals(q, counts, scatter, 0.3, 203, rng)


@pytest.mark.parametrize("kernel", ["bootstrap", "monte_carlo"])
def test_small_chunks_give_the_normals_of_one_chunk(monkeypatch, kernel):
    whole = _normals(monkeypatch, kernel, 1 << 30)  # every replicate in one chunk
    small = _normals(monkeypatch, kernel, 1)  # one replicate per chunk
    assert whole.shape == (203, 37, 3)
    assert np.array_equal(whole, small)


def test_a_small_chunk_normal_is_numpys_eigh_of_its_resampled_scatter(monkeypatch):
    """Replicate 0 of window 0 drawn again by hand: which blocks a resample takes is the
    generator's first row of uniforms, scaled by the window's block count (the kernel's rule)."""
    monkeypatch.setattr(K, "_WINDOW_CHUNK_ELEMENTS", 1)
    q, counts, blocks = _windows()
    normals = K.window_block_normals(q, counts, blocks, 203, np.random.default_rng(11))[0]
    window = np.repeat(np.arange(len(counts)), counts)
    _, unit = np.unique(np.column_stack([window, blocks]), axis=0, return_inverse=True)
    unit = unit.reshape(-1)
    n_units = unit.max() + 1
    u = np.random.default_rng(11).random(n_units)  # the first replicate's uniforms
    mine = np.unique(unit[window == 0])
    draws = np.minimum((u[mine] * len(mine)).astype(np.int64), len(mine) - 1)
    pts = np.concatenate([q[unit == mine[d]] for d in draws])
    c = pts - pts.mean(axis=0)
    # Source: numpy.linalg.eigh, eigenvector of the smallest eigenvalue (column 0)
    ref = np.linalg.eigh(c.T @ c)[1][:, 0]
    assert abs(abs(ref @ normals[0, 0]) - 1.0) < 1e-9


def test_half_widths_and_tilt_cov_in_pieces_equal_one_piece_and_numpy_quantile(monkeypatch):
    rng = np.random.default_rng(2)
    w = 301
    hat = rng.standard_normal((w, 3)) * [0.3, 0.3, 1.0]
    hat[:, 2] = np.abs(hat[:, 2]) + 0.2
    hat /= np.linalg.norm(hat, axis=1, keepdims=True)
    normals = hat[None] + rng.standard_normal((200, w, 3)) * 0.02
    normals /= np.linalg.norm(normals, axis=-1, keepdims=True)
    normals[::7] *= -1.0  # some replicates point down: the kernels turn them up
    monkeypatch.setattr(K, "_WINDOW_CHUNK_ELEMENTS", 1 << 30)
    one = K.replicate_half_widths(hat, normals), K.replicate_tilt_cov(hat, normals)
    monkeypatch.setattr(K, "_WINDOW_CHUNK_ELEMENTS", 4 * 3 * 200 * 10)  # pieces of 10 windows
    assert len(K._window_pieces(normals)) == 31
    pieces = K.replicate_half_widths(hat, normals), K.replicate_tilt_cov(hat, normals)
    for a, b in zip(one[0], pieces[0]):
        assert np.array_equal(a, b)
    assert np.array_equal(one[1], pieces[1])
    # Source: numpy.quantile (linear interpolation) of the angle between each replicate and the
    # estimate, from arccos of |dot| rather than the kernel's arctan2 of the cross product
    up = np.where(np.sum(normals * hat[None], axis=-1, keepdims=True) < 0, -normals, normals)
    angle = np.degrees(np.arccos(np.clip(np.sum(up * hat[None], axis=-1), -1.0, 1.0)))
    np.testing.assert_allclose(pieces[0][2], np.quantile(angle, 0.95, axis=0), rtol=1e-6, atol=1e-6)
    # Source: numpy's mean of outer products of the tilt deviations (nx, ny)
    dev = up[..., :2] - hat[None, :, :2]
    np.testing.assert_allclose(pieces[1], np.mean(dev[..., :, None] * dev[..., None, :], axis=0),
                               rtol=1e-12, atol=1e-18)


@pytest.mark.parametrize("n_replicates, n_columns, n_windows, per_window", [
    (203, 1000, 37, 13),  # many windows: the units bound the chunk
    (203, 10, 37, 9),  # many windows: the windows' scatter matrices bound it
    (9001, 500, 1, 13),  # one window: several chunks of draws
    (20, 3, 1, 13),  # one chunk
    (999, 1 << 21, 5, 13),  # a replicate's row alone exceeds the bound: one per chunk
    (1024, 1024, 2, 9),  # chunks that divide the replicates exactly
    (0, 50, 3, 9),  # no replicates: no chunk
])
def test_replicate_chunks_take_every_replicate_once_within_the_element_bound(
        monkeypatch, n_replicates, n_columns, n_windows, per_window):
    monkeypatch.setattr(K, "_CHUNK_ELEMENTS", 1 << 16)
    monkeypatch.setattr(K, "_WINDOW_CHUNK_ELEMENTS", 1 << 14)
    chunks = K._replicate_chunks(n_replicates, n_columns, n_windows, per_window)
    # Source: the kernels' contract (common practice for chunked loops): the chunks, in order,
    # tile 0..n-1 with no gap or overlap, counted with numpy.bincount
    taken = np.concatenate([np.arange(b0, b0 + b) for b0, b in chunks] + [np.zeros(0, np.int64)])
    assert np.array_equal(taken, np.arange(n_replicates))
    assert np.array_equal(np.bincount(taken, minlength=n_replicates), np.ones(n_replicates))
    row = n_columns if n_windows == 1 else max(n_columns, per_window * n_windows)
    bound = (1 << 16) if n_windows == 1 else (1 << 14)
    for _, b in chunks:
        assert b >= 1 and (b * row <= bound or b == 1)
    # all but the last chunk as large as the bound allows (fewest Python-level iterations)
    assert all(b == max(1, bound // row) for _, b in chunks[:-1])
