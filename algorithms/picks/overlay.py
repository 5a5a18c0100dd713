"""Contour crossings by GEOS's overlay, piece pair by piece pair: the exact intersection of a
contact piece and a contour piece (points and shared stretches), batches on a thread pool, and
the order in which a spatial index of all contour pieces lists the pieces a contact piece
meets. The bulk numpy crossings (:mod:`strikeline.picks.crossings`) hand their unsettled piece
pairs here, and inputs with non-finite coordinates go through here whole.
"""
from __future__ import annotations

from concurrent.futures import ThreadPoolExecutor

import numpy as np
import shapely

from strikeline.picks.dem import _BATCH
from strikeline.picks.lines import _cancel_check, _explode


def run_batches(fn, n_items: int, *, workers: int, is_cancelled, progress, lo: float,
                hi: float, what: str) -> list:
    """``fn(slice)`` over consecutive batches of ``range(n_items)`` on a thread pool.

    shapely's array functions release the GIL, so batches run in parallel. Cancellation is
    checked and progress reported as batches finish; results come back in order.
    """
    bounds = list(range(0, n_items, _BATCH)) + [n_items]
    slices = [slice(a, b) for a, b in zip(bounds[:-1], bounds[1:])]
    results = [None] * len(slices)
    if not slices:
        return []
    with ThreadPoolExecutor(max_workers=workers) as pool:
        # Submit a window of batches at a time so cancellation takes effect promptly.
        window = 2 * workers
        for w0 in range(0, len(slices), window):
            _cancel_check(is_cancelled, what)
            futures = {i: pool.submit(fn, slices[i])
                       for i in range(w0, min(w0 + window, len(slices)))}
            for i, f in futures.items():
                results[i] = f.result()
            if progress is not None:
                progress(lo + (hi - lo) * min(len(slices), w0 + window) / len(slices))
    return results


def piece_parts(n: np.ndarray, max_segments: int) -> np.ndarray:
    """The part of every piece, for parts of ``n`` vertices cut as ``_cut_into_pieces`` cuts."""
    n_pieces = np.maximum(1, -(-np.maximum(n - 1, 0) // max_segments))
    return np.repeat(np.arange(len(n)), n_pieces)


def pieces_of(xy: np.ndarray, first: np.ndarray, n: np.ndarray, ids: np.ndarray,
              max_segments: int) -> np.ndarray:
    """The pieces ``ids`` (numbered as :func:`strikeline.picks.lines._cut_into_pieces` numbers
    them) as LineStrings, with the same vertices as that function gives them."""
    n_pieces = np.maximum(1, -(-np.maximum(n - 1, 0) // max_segments))
    piece_first = np.cumsum(n_pieces) - n_pieces
    part = np.searchsorted(piece_first, ids, side="right") - 1
    start = first[part] + (ids - piece_first[part]) * max_segments
    stop = np.minimum(start + max_segments, first[part] + n[part] - 1)
    count = stop - start + 1
    vertex = np.repeat(start - (np.cumsum(count) - count), count) + np.arange(int(count.sum()))
    return shapely.linestrings(xy[vertex], indices=np.repeat(np.arange(len(ids)), count))


def intersect_pairs(c_pieces, t_pieces, ia, ib, *, workers, is_cancelled=None, progress=None,
                    lo=0.0, hi=1.0):
    """GEOS's intersection of ``c_pieces[ia[k]]`` and ``t_pieces[ib[k]]`` for every ``k``,
    exploded into single points and lines: ``(parts, k of each part, type id of each part)``."""
    def intersect(s):
        return shapely.intersection(c_pieces[ia[s]], t_pieces[ib[s]])

    inter = run_batches(intersect, len(ia), workers=workers, is_cancelled=is_cancelled,
                        progress=progress, lo=lo, hi=hi, what="contour intersection")
    inter = np.concatenate(inter) if inter else np.empty(0, dtype=object)
    return _explode(inter)


def tree_pairs(c_pieces, t_pieces, *, workers, is_cancelled=None, progress=None, lo=0.0, hi=1.0):
    """The pairs of pieces that intersect, as one ``shapely.STRtree`` of the contour pieces
    lists them for the contact pieces in turn (Sort-Tile-Recursive R-tree; Leutenegger et al.
    1997): contact piece ascending, then the tree's own order."""
    tree = shapely.STRtree(t_pieces)

    def query(s):
        a, b = tree.query(c_pieces[s], predicate="intersects")
        return a + s.start, b

    found = run_batches(query, len(c_pieces), workers=workers, is_cancelled=is_cancelled,
                        progress=progress, lo=lo, hi=hi, what="contour intersection")
    ia = np.concatenate([f[0] for f in found]).astype(np.intp) if found else np.empty(0, np.intp)
    ib = np.concatenate([f[1] for f in found]).astype(np.intp) if found else np.empty(0, np.intp)
    return ia, ib


class TreeOrder:
    """The rank of a contour piece among the pieces the STRtree of ``t_pieces`` lists for a
    contact piece: its order in :func:`tree_pairs` (the index's query with a predicate keeps
    the order of its query by boxes). The tree is built on first use."""

    def __init__(self, c_xy, c_first, c_n, t_pieces_fn, max_segments: int):
        self._c = (c_xy, c_first, c_n)
        self._t_pieces_fn = t_pieces_fn
        self._max = max_segments
        self._tree = None
        self._n_b = None

    def __call__(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        if len(a) == 0:
            return np.empty(0, np.int64)
        if self._tree is None:
            t_pieces = self._t_pieces_fn()
            self._tree = shapely.STRtree(t_pieces)
            self._n_b = np.int64(len(t_pieces))
        ua = np.unique(a)
        qa, qb = self._tree.query(pieces_of(*self._c, ua, self._max))
        rank = np.arange(len(qa)) - np.searchsorted(qa, qa)
        key = ua[qa].astype(np.int64) * self._n_b + qb
        o = np.argsort(key)
        at = np.searchsorted(key[o], a.astype(np.int64) * self._n_b + b)
        return rank[o][at]
