"""Values computed once for a whole band of rows and shared by the blocks of that band.

Some grids cost much more in narrow blocks than across the grid's width: the distance to the
nearest datum behind the standard error builds each row's lower envelope from every datum whose
Voronoi cell reaches the block, and the cells of data at the edge of a sheet's data reach every
block; eight blocks of 2,048 columns built them eight times (measured on a 16,000-column sheet:
0.85 s CPU for a band's distances in blocks against 0.20 s across it). :class:`SharedBands`
computes such a grid for a band's full width, in row parts that the threads asking for the band
share among themselves, and gives each block its columns. Each part is copied into the band's one
array as soon as it is done (in ``dtype`` when given: float32 for a grid that is only written as a
float32 output, half the memory and the values its writer would round to), so a band is held once.
"""
from __future__ import annotations

import threading

import numpy as np


class _Band:
    """The row parts of one band: which are claimed, which are done, and their values."""

    def __init__(self, r0: int, r1: int, parts: int):
        n = max(1, min(int(parts), r1 - r0))
        edges = np.linspace(r0, r1, n + 1).round().astype(int)
        self.parts = [(int(a), int(b)) for a, b in zip(edges[:-1], edges[1:]) if b > a]
        self.r0 = r0
        self.next = 0  # the next part nobody has claimed
        self.done = 0  # parts copied into whole
        self.failed: BaseException | None = None
        self.used = 0  # blocks that have taken their columns
        self.whole: np.ndarray | None = None  # made when the first part is done


class SharedBands:
    """``get(r0, r1, c0, c1)``: the block ``[r0:r1, c0:c1]`` of ``fn(a, b)``, the grid's rows
    ``a:b`` across its whole width, computed once per band.

    A thread asking for a band first computes the band's row parts nobody has claimed yet (so two
    threads asking at once compute its two halves at the same time), then waits for the parts
    others are computing. The band is forgotten once ``uses`` blocks have taken their columns.
    ``fn`` must give rows ``a:b`` of one and the same grid whatever the split (the surface models'
    grid methods do: a window of the whole grid holds the whole grid's values). If a part fails,
    every block of its band raises that error.

    >>> calls = []
    >>> def rows(a, b):
    ...     calls.append((a, b))
    ...     return np.arange(a, b, dtype=float)[:, None] * 10 + np.arange(4)
    >>> share = SharedBands(rows, uses=2, parts=2)
    >>> share.get(0, 4, 0, 2).tolist()
    [[0.0, 1.0], [10.0, 11.0], [20.0, 21.0], [30.0, 31.0]]
    >>> share.get(0, 4, 2, 4)[3].tolist(), calls
    ([32.0, 33.0], [(0, 2), (2, 4)])
    """

    def __init__(self, fn, *, uses: int, parts: int = 2, dtype=None):
        self._fn, self._uses, self._parts = fn, max(1, int(uses)), max(1, int(parts))
        self._dtype = None if dtype is None else np.dtype(dtype)
        self._lock = threading.Lock()
        self._ready = threading.Condition(self._lock)
        self._bands: dict = {}

    def get(self, r0: int, r1: int, c0: int, c1: int) -> np.ndarray:
        with self._lock:
            band = self._bands.get((r0, r1))
            if band is None:
                band = self._bands[(r0, r1)] = _Band(r0, r1, self._parts)
        while True:
            with self._lock:
                if band.next >= len(band.parts) or band.failed is not None:
                    break
                a, b = band.parts[band.next]
                band.next += 1
            try:
                values = self._fn(a, b)
            except BaseException as exc:
                with self._lock:
                    band.failed = exc
                    self._ready.notify_all()
                raise
            with self._lock:
                if band.whole is None:
                    band.whole = np.empty((band.parts[-1][1] - band.r0, values.shape[1]),
                                          values.dtype if self._dtype is None else self._dtype)
                whole = band.whole
            whole[a - band.r0:b - band.r0] = values  # its own rows: no other thread writes them
            values = None
            with self._lock:
                band.done += 1
                self._ready.notify_all()
        with self._lock:
            while band.failed is None and band.done < len(band.parts):
                self._ready.wait()
            if band.failed is not None:
                raise band.failed
            band.used += 1
            if band.used >= self._uses:
                del self._bands[(r0, r1)]
            return band.whole[:, c0:c1]
