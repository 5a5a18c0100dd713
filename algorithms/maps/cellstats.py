"""Summary statistics of the cells of a map (count, mean, standard deviation, percentiles), from
the whole array or from its values read in pieces, in bounded memory, with the very numbers numpy
gives on the whole array.

The pieces are the values in the order of the whole array (row-major), from a callable that
starts a new pass over them each time it is called; each figure is computed from them exactly:

* the sum as numpy sums a contiguous float64 array: pairwise summation (Higham 1993) within
  consecutive blocks of ``np.getbufsize()`` values (numpy's reduction buffer, 8,192 unless a
  program changes it with ``np.setbufsize``: it is read at each call), the block sums added
  one after another from the first block; the mean is the sum over the count and the standard
  deviation numpy's two-pass formula (the same block sums of the squared deviations from that
  mean, over the count, square root);
* the percentiles by selection of the order statistics they need with a most-significant-digit
  radix select (Knuth 1998, sec. 5.2.5) on the float64 values' bits mapped to unsigned integers
  that sort as the values do: a pass counts the values per 16-bit digit (a histogram of 65,536
  bins), the bins that hold the wanted ranks are refined by the next digit, or their values
  collected once they are few (:data:`COLLECT_CAP`); then numpy's linear interpolation between
  the two order statistics about ``(n - 1) q`` (Hyndman & Fan 1996, definition 7).

Memory is one piece, the histograms and at most :data:`COLLECT_CAP` values per wanted rank; the
passes are two when the wanted bins hold few values, at most five.

References
----------
Higham, N. J. (1993). The accuracy of floating point summation. *SIAM Journal on Scientific
Computing* 14(4), 783-799.
Knuth, D. E. (1998). *The Art of Computer Programming, vol. 3: Sorting and Searching*, 2nd ed.,
sec. 5.2.5 (radix sorting). Addison-Wesley.
Hyndman, R. J. & Fan, Y. (1996). Sample quantiles in statistical packages. *The American
Statistician* 50(4), 361-365.
"""
from __future__ import annotations

import math
from collections.abc import Callable, Iterable

import numpy as np

#: Blocks handled at once (a million values): the working copies (keys, digits, squared
#: deviations) stay a few megabytes whatever the size of the pieces given.
PIECE_BLOCKS = 128
#: Bits of one radix-select digit (a histogram of 2**16 counts).
DIGIT_BITS = 16
#: A bin holding at most this many values is collected and its ranks taken by np.partition.
COLLECT_CAP = 1 << 20
_SIGN = np.uint64(1 << 63)


def cell_statistics(values, *, percentiles=(10, 90)) -> dict:
    """Count, mean, standard deviation and percentiles of map cells.

    Parameters
    ----------
    values : ndarray or callable
        The cells' values (float64, finite), or a callable returning a new iterable of 1-D pieces
        of them in order each time it is called (several passes are made).
    percentiles : sequence of float
        Percentiles wanted (0-100), each reported as ``p{q}_m``.

    Returns
    -------
    dict
        ``n_cells``, ``mean_m``, ``std_m`` and ``p{q}_m`` for each percentile (None without cells):
        the numbers ``np.mean``, ``np.std`` and ``np.percentile`` give on the whole array.
    """
    if callable(values):
        n, total, keys = _first_pass(values)
        mean = total / n if n else None
        if n:
            ranks = sorted({r for q in percentiles for r in _ranks(n, q)})
            found = _select(values, keys, ranks, mean)
            std = math.sqrt(found.pop("sq") / n)
        stats = {"n_cells": n, "mean_m": mean, "std_m": std if n else None}
        for q in percentiles:
            stats[_name(q)] = _interpolate(n, q, found) if n else None
        return stats
    vals = np.asarray(values, dtype=np.float64)
    stats = {"n_cells": int(vals.size), "mean_m": float(np.mean(vals)) if vals.size else None,
             "std_m": float(np.std(vals)) if vals.size else None}
    for q in percentiles:
        stats[_name(q)] = float(np.percentile(vals, q)) if vals.size else None
    return stats


def _name(q) -> str:
    return f"p{q:g}_m"


def _position(n: int, q: float) -> tuple[float, int, int]:
    """numpy's (1.26) ``method='linear'`` position: ``(n - 1) * (q / 100)``, its floor and the next
    rank; past the last value both are the last."""
    virtual = (n - 1) * (q / 100.0)
    if virtual >= n - 1:
        return virtual, n - 1, n - 1
    lo = int(math.floor(virtual))
    return virtual, lo, lo + 1


def _ranks(n: int, q: float) -> tuple[int, int]:
    return _position(n, q)[1:]


def _interpolate(n: int, q: float, found: dict) -> float:
    """np.percentile's linear interpolation (numpy 1.26 ``_lerp``) between the order statistics."""
    virtual, lo, hi = _position(n, q)
    a, b = found[lo], found[hi]
    if lo == hi:
        return float(a)
    t = virtual - lo
    diff = b - a
    return float(b - diff * (1 - t)) if t >= 0.5 else float(a + diff * t)


def _keys(v: np.ndarray) -> np.ndarray:
    """Unsigned integers that sort as the float64 values do (sign bit flipped for positives, every
    bit for negatives)."""
    u = v.view(np.uint64)
    return np.where(u & _SIGN, ~u, u | _SIGN)


def _value_of_key(key: int) -> float:
    """The float64 value of a key of :func:`_keys`."""
    u = np.array([key], dtype=np.uint64)
    u = np.where(u & _SIGN, u ^ _SIGN, ~u)
    return float(u.view(np.float64)[0])


def _sum_block() -> int:
    """The values numpy's reductions sum pairwise at a time (its ufunc buffer): a float64 sum is
    the block sums of this many values added in order."""
    return int(np.getbufsize())


def _blocks(pieces: Iterable) -> Iterable[np.ndarray]:
    """The values of ``pieces`` as whole blocks of numpy's buffer size in order (the last may be short),
    several blocks at a time, holding back at most one short block between pieces."""
    held = np.empty(0)
    for p in pieces:
        p = np.asarray(p, dtype=np.float64).ravel()
        if held.size:
            p = np.concatenate([held, p])
        block = _sum_block()
        whole = p.size - p.size % block
        for k in range(0, whole, PIECE_BLOCKS * block):
            yield p[k:min(whole, k + PIECE_BLOCKS * block)]
        held = p[whole:]
    if held.size:
        yield held


def _block_sum(total, values: np.ndarray):
    """Add the block sums of ``values`` (whole blocks but perhaps the last) to ``total`` in order,
    as numpy's reduction does (``total`` None before the first block)."""
    block = _sum_block()
    whole = values.size - values.size % block
    sums = [np.sum(values[:whole].reshape(-1, block), axis=1)] if whole else []
    if whole < values.size:
        sums.append(np.array([np.sum(values[whole:])]))
    for s in np.concatenate(sums):
        total = s if total is None else total + s
    return total


def _first_pass(chunks: Callable) -> tuple[int, float, np.ndarray]:
    """The count, numpy's sum and the histogram of the top digit of the keys."""
    n, total = 0, None
    hist = np.zeros(1 << DIGIT_BITS, dtype=np.int64)
    shift = np.uint64(64 - DIGIT_BITS)
    for v in _blocks(chunks()):
        n += v.size
        total = _block_sum(total, v)
        hist += np.bincount((_keys(v) >> shift).astype(np.int64), minlength=1 << DIGIT_BITS)
    return n, (0.0 if total is None else float(total)), hist


def _select(chunks: Callable, hist: np.ndarray, ranks: list[int], mean: float) -> dict:
    """The values of the given ranks (0-based, ascending order) and, under ``'sq'``, numpy's sum of
    the squared deviations from ``mean`` (computed on the second pass)."""
    # each wanted rank: the key prefix found so far, its bits, and the rank within that prefix
    todo = {r: _locate(hist, r, prefix=0, bits=0) for r in ranks}
    found: dict = {}
    sq, first = None, True
    m = np.array([mean])
    while todo or first:
        groups: dict = {}
        for r, (prefix, bits, count, rank) in list(todo.items()):
            if bits == 64:  # the whole key: every value of the bin is this one
                found[r] = _value_of_key(prefix)
                del todo[r]
                continue
            groups.setdefault((prefix, bits), []).append((r, count, rank))
        hists = {g: np.zeros(1 << DIGIT_BITS, dtype=np.int64) for g, rs in groups.items()
                 if max(c for _, c, _ in rs) > COLLECT_CAP}
        kept = {g: [] for g in groups if g not in hists}
        for v in _blocks(chunks()):
            if first:
                d = v - m
                sq = _block_sum(sq, d * d)
            if not groups:
                continue
            k = _keys(v)
            for (prefix, bits) in groups:
                sel = (k >> np.uint64(64 - bits)) == np.uint64(prefix)
                if (prefix, bits) in hists:
                    nxt = (k[sel] >> np.uint64(64 - bits - DIGIT_BITS)) & np.uint64((1 << DIGIT_BITS) - 1)
                    hists[(prefix, bits)] += np.bincount(nxt.astype(np.int64), minlength=1 << DIGIT_BITS)
                else:
                    kept[(prefix, bits)].append(v[sel])
        if first:
            found["sq"] = 0.0 if sq is None else float(sq)
            first = False
        for g, rs in groups.items():
            prefix, bits = g
            if g in kept:
                vals = np.concatenate(kept[g]) if kept[g] else np.empty(0)
                want = sorted({rank for _, _, rank in rs})
                part = np.partition(vals, want)
                for r, _, rank in rs:
                    found[r] = float(part[rank])
                    del todo[r]
            else:
                for r, _, rank in rs:
                    todo[r] = _locate(hists[g], rank, prefix=prefix, bits=bits)
    return found


def _locate(hist: np.ndarray, rank: int, *, prefix: int, bits: int) -> tuple[int, int, int, int]:
    """The bin of ``hist`` (the next digit under ``prefix``) that holds the value of ``rank``:
    ``(longer prefix, its bits, the bin's count, the rank within it)``."""
    cum = np.cumsum(hist)
    b = int(np.searchsorted(cum, rank, side="right"))
    below = int(cum[b - 1]) if b else 0
    return (prefix << DIGIT_BITS) | b, bits + DIGIT_BITS, int(hist[b]), rank - below
