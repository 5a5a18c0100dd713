"""The unit's true thickness within reach of both surfaces' data, read back by bands from the
float64 scratch copy the block path writes (:data:`strikeline.pipeline.tiled.STATS_SCRATCH`), for
:func:`strikeline.maps.cellstats.cell_statistics`: the statistics of a grid of any size in the
memory of one band."""
from __future__ import annotations

import numpy as np

from strikeline.geometry.grid import Grid

#: Rows read at a time (a quarter of a tile row of the scratch GeoTIFF: memory of a few copies of
#: a 64-row band, about 15 MB each at 30,000 columns).
BAND_ROWS = 64


def in_reach_values(path, grid: Grid, *, band_rows: int = BAND_ROWS):
    """A callable that starts a pass over the file's values (NaN cells left out) in row-major order,
    a band of ``band_rows`` rows at a time: the order in which the in-memory chain takes
    ``true_thickness[within reach of both]``."""
    from strikeline.io.gridfiles import read_window

    def passes():
        for r0 in range(0, grid.rows, band_rows):
            band = read_window(path, r0, min(grid.rows, r0 + band_rows), 0, grid.cols)
            yield band[np.isfinite(band)]
    return passes
