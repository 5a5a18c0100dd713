"""Smallest eigenvectors of stacks of scatter matrices, decomposed on two threads.

The replicate normals of :mod:`strikeline.attitude.kernels` are the eigenvectors of the smallest
eigenvalue of stacked 3 x 3 scatter matrices (one per replicate and window). numpy's ``eigh``
releases Python's lock while it loops over a stack, so pieces of one chunk's stack are decomposed
on worker threads while the caller draws and sums the next chunk; each matrix goes through the
same LAPACK routine as in one stacked call, so the vectors are the same bit for bit.
"""
from __future__ import annotations

import os
from concurrent.futures import ThreadPoolExecutor

import numpy as np


def smallest_eigvec(scatter):
    """The eigenvector of the smallest eigenvalue of each symmetric matrix of ``scatter`` (..., 3, 3)."""
    _, v = np.linalg.eigh(scatter)
    return v[..., :, 0]


#: Threads that decompose the stacked scatter matrices of the replicates (the machine's cores, at
#: most 2; our choice): numpy's ``eigh`` releases Python's lock over a stack, so the decompositions
#: of one chunk run while the caller draws and sums the next.
EIGH_THREADS = max(1, min(2, os.cpu_count() or 1))
#: Fewest matrices in a piece of a stack given to one thread (our choice: below it the hand-over
#: costs more than it saves).
_EIGH_PIECE = 1 << 12


class Eigvecs:
    """Smallest eigenvectors of the chunks of stacked symmetric 3 x 3 matrices, written into ``out``
    (B, W, 3) at each chunk's place: with :data:`EIGH_THREADS` above 1, each chunk is cut into
    pieces decomposed on worker threads while the caller prepares the next chunk (at most two
    chunks in hand, so memory stays two chunks). Every matrix is decomposed by the same LAPACK
    routine as in one stacked call (numpy's ``eigh`` loops over the stack matrix by matrix), so
    the vectors are the same bit for bit. Use as a context manager: leaving it waits for every
    piece (and re-raises a piece's error)."""

    def __init__(self, out: np.ndarray, threads: int | None = None):
        self.out = out
        self.threads = EIGH_THREADS if threads is None else max(1, int(threads))
        if not out.flags.c_contiguous:  # the pieces write into views of out's rows
            self.threads = 1
        self.pool = ThreadPoolExecutor(self.threads, thread_name_prefix="strikeline-eigh") if self.threads > 1 else None
        self.chunks = []  # futures of each chunk handed over, oldest first

    def __enter__(self):
        return self

    def put(self, b0: int, stack: np.ndarray) -> None:
        """Decompose ``stack`` (b, W, 3, 3) into ``out[b0:b0 + b]``."""
        b = stack.shape[0]
        if self.pool is None:
            self.out[b0:b0 + b] = smallest_eigvec(stack)
            return
        while len(self.chunks) >= 2:  # the oldest chunk ends before a third is handed over
            for f in self.chunks.pop(0):
                f.result()
        flat = np.ascontiguousarray(stack).reshape(-1, 3, 3)
        target = self.out[b0:b0 + b].reshape(-1, 3)  # a view: out is C-contiguous along its first axis
        n = len(flat)
        pieces = max(1, min(self.threads, n // _EIGH_PIECE))
        edges = [n * k // pieces for k in range(pieces + 1)]
        self.chunks.append([self.pool.submit(_eigvec_into, flat, target, a, z)
                            for a, z in zip(edges[:-1], edges[1:])])

    def __exit__(self, *exc):
        if self.pool is not None:
            self.pool.shutdown(wait=True)
            if exc[0] is None:
                for fs in self.chunks:
                    for f in fs:
                        f.result()
        return False


def _eigvec_into(flat, target, a, z):
    target[a:z] = smallest_eigvec(flat[a:z])
