"""A grid's ``k x k`` window means, gathered from its pieces as they are written.

The report draws a grid decimated to about a million cells
(:func:`strikeline.io.sampling.read_decimated`, GDAL's average resampling), which means decoding
every tile of the file again: on a 16,000² sheet most of the report's time. :class:`WindowMeans`
gives the same values from the pieces a writer already holds (the blocks of
:class:`strikeline.io.gridfiles.StripWriter`), at the cost of adding each cell once.
"""
from __future__ import annotations

import numpy as np

#: Most cells of a grid drawn in the report's map (a map panel is about 1,000 pixels across): the
#: report reads grids decimated to this, and the block path gathers the same window means while it
#: writes the surface and the depth.
PICTURE_CELLS = 1_000_000


class WindowMeans:
    """The mean of each ``k x k`` window of a float32 grid over its cells that are neither
    ``nodata`` nor NaN, from pieces given in the order a writer gives them.

    The values are those of :func:`strikeline.io.sampling.read_decimated` (``'average'``) of the
    written file when ``k`` divides the grid's rows and columns: each window's cells are added in
    float64 row by row, left to right (the order of :func:`strikeline.io.sampling._window_mean`,
    GDAL's average resampling), the sum divided by the count of cells, rounded to float32, and
    NaN where no cell counts. A window that spans two pieces is carried over: its partial sum from
    the rows above (a piece of the next band of rows), its leftover columns (the next piece of the
    same band) - so pieces need not align with the windows.

    Pieces come as a writer takes them: bands of rows top to bottom, every band cut into pieces
    of the band's full height, left to right across the width (a whole-width strip is one piece).

    Parameters
    ----------
    shape : (int, int)
        The grid's rows and columns, both multiples of ``k``.
    k : int
        The window's side in cells.
    nodata : float or None
        The value that marks no data in the pieces (besides NaN).
    """

    def __init__(self, shape, k: int, nodata=None):
        rows, cols = (int(v) for v in shape)
        if k < 1 or rows % k or cols % k:
            raise ValueError(f"windows of {k} cells do not tile a grid of {rows} x {cols} cells")
        self.k, self.shape, self.nodata = int(k), (rows, cols), nodata
        self.means = np.full((rows // k, cols // k), np.nan)
        # the window row that spans two bands: its sums and counts so far (one per window column)
        self._total = np.zeros(cols // k)
        self._count = np.zeros(cols // k)
        self._band = None  # (r0, r1) of the band being given
        self._next_col = 0
        self._left = None  # the band's columns that did not fill a window (< k of them)

    def add(self, piece: np.ndarray, r0: int, c0: int) -> None:
        """Add the piece whose top left cell is ``(r0, c0)``."""
        piece = np.asarray(piece)
        h, w = piece.shape
        if self._band != (r0, r0 + h):
            if self._next_col not in (0, self.shape[1]) or (self._band is not None and r0 != self._band[1]):
                raise ValueError(f"pieces must come band by band, left to right: got row {r0}, column {c0}")
            self._band, self._next_col, self._left = (r0, r0 + h), 0, None
        if c0 != self._next_col:
            raise ValueError(f"pieces must come left to right: expected column {self._next_col}, got {c0}")
        self._next_col = c0 + w
        k = self.k
        if self._left is not None:
            piece = np.concatenate([self._left, piece], axis=1)
            c0 -= self._left.shape[1]
        whole = piece.shape[1] - piece.shape[1] % k
        self._left = piece[:, whole:] if whole < piece.shape[1] else None
        if whole:
            self._add_windows(piece[:, :whole], r0, c0 // k)

    def _add_windows(self, piece: np.ndarray, r0: int, w0: int) -> None:
        """Add a piece whose columns are whole windows from window column ``w0``."""
        k = self.k
        h = piece.shape[0]
        bad = np.isnan(piece)
        if self.nodata is not None:
            bad |= piece == np.float32(self.nodata)
        values = np.where(bad, np.float32(0.0), piece)
        good = ~bad
        w1 = w0 + piece.shape[1] // k
        r, i = r0, 0  # the grid's row and the piece's row
        while i < h:
            wr, top = divmod(r, k)  # window row, and rows of it already added
            n = min(k - top, h - i)  # rows of this window row in the piece
            if top == 0 and n == k:  # whole window rows: all of them at once
                m = (h - i) // k
                total = np.zeros((m, w1 - w0))
                count = np.zeros((m, w1 - w0))
                for a in range(k):
                    for b in range(k):
                        total += values[i + a:i + m * k:k, b::k]
                        count += good[i + a:i + m * k:k, b::k]
                self._finish(wr, wr + m, w0, w1, total, count)
                r, i = r + m * k, i + m * k
                continue
            total, count = self._total[w0:w1], self._count[w0:w1]
            if top == 0:
                total[:] = 0.0
                count[:] = 0.0
            for a in range(n):
                for b in range(k):
                    total += values[i + a, b::k]
                    count += good[i + a, b::k]
            if top + n == k:
                self._finish(wr, wr + 1, w0, w1, total[None, :], count[None, :])
            r, i = r + n, i + n

    def _finish(self, wr0, wr1, w0, w1, total, count) -> None:
        with np.errstate(invalid="ignore", divide="ignore"):
            mean = (total / count).astype(np.float32).astype(np.float64)
        mean[count == 0] = np.nan
        if self.nodata is not None:
            mean[mean == self.nodata] = np.nan  # as a read of the file gives it (io.raster.as_float)
        mean[~np.isfinite(mean)] = np.nan
        self.means[wr0:wr1, w0:w1] = mean
