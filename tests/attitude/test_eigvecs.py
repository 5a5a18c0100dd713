"""Replicate normals decomposed on worker threads: the same vectors as one stacked eigh.

Reference: ``numpy.linalg.eigh`` (numpy 1.26, LAPACK's symmetric eigensolver) called once on the
whole stack, its eigenvalues in ascending order (numpy's documentation), so column 0 is the
eigenvector of the smallest eigenvalue.
"""
from __future__ import annotations

import numpy as np
import pytest

import strikeline.attitude.eigvecs as E
from strikeline.attitude.kernels import monte_carlo_normals, window_block_normals


def _stack(rng, b, w):
    a = rng.standard_normal((b, w, 3, 3))
    return a + np.swapaxes(a, -1, -2)


@pytest.mark.parametrize("threads, piece", [(1, 4096), (2, 4096), (2, 7), (3, 5)])
def test_chunks_equal_numpy_eigh_of_each_whole_stack(monkeypatch, threads, piece):
    monkeypatch.setattr(E, "_EIGH_PIECE", piece)
    rng = np.random.default_rng(3)
    chunks = [_stack(rng, 17, 11), _stack(rng, 17, 11), _stack(rng, 5, 11)]
    out = np.full((39, 11, 3), np.nan)
    with E.Eigvecs(out, threads=threads) as eig:
        b0 = 0
        for c in chunks:
            eig.put(b0, c)
            b0 += len(c)
    expected = np.concatenate([np.linalg.eigh(c)[1][..., :, 0] for c in chunks])
    assert np.array_equal(out, expected)  # bit for bit, every row written


def test_an_error_in_a_piece_reaches_the_caller(monkeypatch):
    monkeypatch.setattr(E, "_EIGH_PIECE", 2)
    bad = np.full((4, 1, 3, 3), np.nan)
    bad[:2] = np.eye(3)
    out = np.empty((4, 1, 3))
    with pytest.raises(np.linalg.LinAlgError):  # numpy: "Eigenvalues did not converge" for NaN input
        with E.Eigvecs(out, threads=2) as eig:
            eig.put(0, bad)


def test_an_out_that_is_not_contiguous_is_filled_on_the_callers_thread():
    rng = np.random.default_rng(4)
    stack = _stack(rng, 6, 2)
    base = np.zeros((6, 4, 3))
    out = base[:, ::2]  # every second window: not C-contiguous
    with E.Eigvecs(out, threads=2) as eig:
        eig.put(0, stack)
    assert np.array_equal(out, np.linalg.eigh(stack)[1][..., :, 0])


@pytest.mark.parametrize("kernel", ["bootstrap", "monte_carlo"])
def test_replicate_normals_same_on_one_thread_and_two(monkeypatch, kernel):
    rng = np.random.default_rng(8)
    counts = [40, 25, 60]
    q = rng.standard_normal((sum(counts), 3)) * [50.0, 30.0, 2.0]
    blocks = np.arange(len(q)) // 5

    def normals(threads):
        monkeypatch.setattr(E, "EIGH_THREADS", threads)
        monkeypatch.setattr(E, "_EIGH_PIECE", 16)
        r = np.random.default_rng(21)
        if kernel == "bootstrap":
            return window_block_normals(q, counts, blocks, 300, r)[0]
        scatter = np.stack([np.eye(3)] * len(counts))
        return monte_carlo_normals(q, counts, scatter, 0.5, 300, r)

    one, two = normals(1), normals(2)
    assert np.array_equal(one, two)
    # the one-thread path is numpy's stacked eigh (reference above): spot-check its unit length
    assert np.allclose(np.linalg.norm(one, axis=-1), 1.0)
