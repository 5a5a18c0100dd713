"""Bounded-memory views of written outputs: a raster read decimated, a raster sampled at points,
a point layer thinned to a regular sample, a layer's names.

What a run wrote may be far larger than memory (a 30,000 x 30,000 grid is 3.6 GB as float32); a
picture of it needs at most a few million cells and a few thousand points. These readers ask GDAL
for no more than that: a decimated raster comes from GDAL's own resampling in ``RasterIO`` (the
buffer smaller than the window), samples at points read only the strips of rows around them, and
a point layer is read feature by feature keeping every k-th.
"""
from __future__ import annotations

import contextlib
import math
import os

import numpy as np
from osgeo import gdal, ogr

from strikeline.errors import InputError, RasterReadError, VectorReadError
from strikeline.geometry.grid import Grid
from strikeline.io._gdal import gdal_exceptions, gdal_message
from strikeline.io.raster import as_float, open_raster

#: Rows of the file read at once (then dropped from GDAL's block cache, which would otherwise keep up
#: to GDAL_CACHEMAX - 5% of the memory - of a large grid's blocks).
STRIP_ROWS = 512
#: Columns of a strip averaged at once by numpy (rounded to whole blocks and windows).
PIECE_COLUMNS = 4_096
#: GDAL's resampling of a decimated read, by name.
_RESAMPLING = {"average": gdal.GRIORA_Average, "nearest": gdal.GRIORA_NearestNeighbour}


def _open_raster(path: str, label: str):
    return open_raster(path, label=label)


def _as_float(arr: np.ndarray, nodata) -> np.ndarray:
    return as_float(arr, nodata)


def decimation(shape, max_cells: int) -> int:
    """The whole factor by which a grid of ``shape`` (rows, cols) is thinned to hold at most
    ``max_cells`` cells (1: read as it is).

    >>> decimation((30000, 30000), 1_000_000), decimation((400, 400), 1_000_000)
    (30, 1)
    """
    rows, cols = int(shape[0]), int(shape[1])
    if max_cells < 1:
        raise ValueError(f"max_cells must be at least 1, got {max_cells}")
    k = max(1, math.ceil(math.sqrt(rows * cols / max_cells)))
    while math.ceil(rows / k) * math.ceil(cols / k) > max_cells:
        k += 1
    return k


def _window_mean(block: np.ndarray, k: int, nodata) -> np.ndarray:
    """The mean of each ``k x k`` window of a float32 ``block`` (rows and columns multiples of
    ``k``) over its cells that are neither ``nodata`` nor NaN, summed in float64 row by row as
    GDAL's average resampling sums them, then rounded to float32 as GDAL's resampling of a float32
    band does (``nodata`` where no cell counts): the values of ``ReadAsArray`` with
    ``GRIORA_Average``, at about half its time (the windows added as k x k strided views, no
    copy of the block)."""
    bad = np.isnan(block)
    if nodata is not None:
        bad |= block == np.float32(nodata)
    shape = (block.shape[0] // k, block.shape[1] // k)
    total = np.zeros(shape)
    if bad.any():
        block = np.where(bad, np.float32(0.0), block)
        count = np.zeros(shape)
        for i in range(k):
            for j in range(k):
                total += block[i::k, j::k]
                count += ~bad[i::k, j::k]
        with np.errstate(invalid="ignore", divide="ignore"):
            mean = (total / count).astype(np.float32).astype(np.float64)
        mean[count == 0] = np.nan if nodata is None else nodata
        return mean
    for i in range(k):
        for j in range(k):
            total += block[i::k, j::k]
    return (total / (k * k)).astype(np.float32).astype(np.float64)


def _decimated(ds, max_cells: int) -> tuple[int, Grid]:
    """The factor and the georeferencing of :func:`read_decimated`'s result for an open dataset."""
    rows, cols = ds.RasterYSize, ds.RasterXSize
    k = decimation((rows, cols), max_cells)
    by, bx = math.ceil(rows / k), math.ceil(cols / k)
    x0, dx, _, y0, _, dy = ds.GetGeoTransform()
    return k, Grid((x0, dx * cols / bx, 0.0, y0, 0.0, dy * k), (by, bx), ds.GetProjection() or "",
                   ds.GetRasterBand(1).GetNoDataValue())


def decimated_grid(path, *, max_cells: int = 1_000_000, label: str = "raster") -> Grid:
    """The georeferencing of ``read_decimated(path, max_cells=max_cells)``'s result, from the
    file's header alone (no cell is read): what a figure of the grid will show, known before the
    grid is decoded."""
    path = os.fspath(path)
    with gdal_exceptions():
        ds = _open_raster(path, label)
        try:
            return _decimated(ds, max_cells)[1]
        finally:
            ds = None


def read_decimated(path, *, max_cells: int = 1_000_000, resampling: str = "average",
                   label: str = "raster") -> tuple[np.ndarray, Grid]:
    """Band 1 of a raster thinned by a whole factor to at most ``max_cells`` cells.

    GDAL resamples while it reads (``ReadAsArray`` with ``buf_xsize``/``buf_ysize`` smaller than
    the window), in strips of about :data:`STRIP_ROWS` rows (a multiple of the factor ``k``), each
    dropped from GDAL's block cache after, so memory is that of the result and one strip,
    whatever the raster's size.

    Parameters
    ----------
    path : str or PathLike
    max_cells : int
        Most cells of the result.
    resampling : {'average', 'nearest'}
        How GDAL makes one result cell of ``k x k`` cells: their mean (nodata cells left out) or
        the one nearest the centre.
    label : str
        How to name the raster in messages.

    Returns
    -------
    array : ndarray of float64, NaN for nodata
    grid : Grid
        The result's georeferencing: rows ``k`` cells high (the last one may reach past the raster
        by less than ``k`` cells when its height is not a multiple of ``k``), columns spread evenly
        over the width (``cols / ceil(cols / k)`` cells each).
    """
    path = os.fspath(path)
    if resampling not in _RESAMPLING:
        raise ValueError(f"resampling must be one of {sorted(_RESAMPLING)}, got {resampling!r}")
    with gdal_exceptions():
        ds = _open_raster(path, label)
        try:
            band = ds.GetRasterBand(1)
            rows, cols = ds.RasterYSize, ds.RasterXSize
            k, grid = _decimated(ds, max_cells)
            by, bx = grid.shape
            arr = np.empty((by, bx), dtype=np.float64)
            step = k * max(1, STRIP_ROWS // k)  # source rows per strip, a multiple of k
            nodata = band.GetNoDataValue()
            # whole k x k windows of a float32 band: GDAL's average computed by numpy (same values)
            by_numpy = (resampling == "average" and k > 1 and rows % k == 0 and cols % k == 0
                        and band.DataType == gdal.GDT_Float32)
            whole = math.lcm(k, band.GetBlockSize()[0])  # columns of whole windows and whole blocks
            piece = whole * max(1, PIECE_COLUMNS // whole)
            for r0 in range(0, rows, step):
                h = min(step, rows - r0)
                b0 = r0 // k
                try:
                    if by_numpy:  # by pieces of whole blocks and windows, each dropped from the cache
                        for c0 in range(0, cols, piece):
                            w = min(piece, cols - c0)
                            arr[b0:b0 + h // k, c0 // k:(c0 + w) // k] = _window_mean(
                                band.ReadAsArray(c0, r0, w, h), k, nodata)
                            band.FlushCache()
                    else:
                        arr[b0:b0 + math.ceil(h / k)] = band.ReadAsArray(
                            0, r0, cols, h, buf_xsize=bx, buf_ysize=math.ceil(h / k), buf_type=gdal.GDT_Float64,
                            resample_alg=_RESAMPLING[resampling])
                except RuntimeError as exc:
                    raise RasterReadError(f"{label} '{path}': GDAL could not read it ({gdal_message(exc)})") from None
                band.FlushCache()  # drop the strip's blocks from GDAL's cache: memory stays one strip
        finally:
            ds = None
    return _as_float(arr, nodata), grid


def read_decimated_and_sample(path, *, max_cells: int = 1_000_000, sample_cells: int = 4_000_000,
                              label: str = "raster") -> tuple[np.ndarray, Grid, np.ndarray]:
    """:func:`read_decimated` with ``resampling='average'`` and the array of ``read_decimated(...,
    max_cells=sample_cells, resampling='nearest')``, from one decoding of the file when both
    factors divide the float32 band's rows and columns (GDAL's nearest cell of a ``k x k`` window
    is its ``(k // 2, k // 2)`` cell, its average :func:`_window_mean`'s), else from the two reads.
    """
    path = os.fspath(path)
    with gdal_exceptions():
        ds = _open_raster(path, label)
        try:
            band = ds.GetRasterBand(1)
            rows, cols = ds.RasterYSize, ds.RasterXSize
            ka, kn = decimation((rows, cols), max_cells), decimation((rows, cols), sample_cells)
            if not (ka > 1 and kn > 1 and band.DataType == gdal.GDT_Float32
                    and rows % ka == 0 and cols % ka == 0 and rows % kn == 0 and cols % kn == 0):
                ds = None
                mean, grid = read_decimated(path, max_cells=max_cells, resampling="average", label=label)
                return mean, grid, read_decimated(path, max_cells=sample_cells, resampling="nearest",
                                                  label=label)[0]
            nodata = band.GetNoDataValue()
            both = math.lcm(ka, kn)
            step = both * max(1, STRIP_ROWS // both)
            whole = math.lcm(both, band.GetBlockSize()[0])
            piece = whole * max(1, PIECE_COLUMNS // whole)
            mean = np.empty((rows // ka, cols // ka))
            near = np.empty((rows // kn, cols // kn))
            for r0 in range(0, rows, step):
                h = min(step, rows - r0)
                for c0 in range(0, cols, piece):
                    w = min(piece, cols - c0)
                    try:
                        block = band.ReadAsArray(c0, r0, w, h)
                    except RuntimeError as exc:
                        raise RasterReadError(f"{label} '{path}': GDAL could not read it ({gdal_message(exc)})") \
                            from None
                    band.FlushCache()
                    mean[r0 // ka:(r0 + h) // ka, c0 // ka:(c0 + w) // ka] = _window_mean(block, ka, nodata)
                    near[r0 // kn:(r0 + h) // kn, c0 // kn:(c0 + w) // kn] = block[kn // 2::kn, kn // 2::kn]
            x0, dx, _, y0, _, dy = ds.GetGeoTransform()
            wkt = ds.GetProjection() or ""
        finally:
            ds = None
    grid = Grid((x0, dx * cols / (cols // ka), 0.0, y0, 0.0, dy * ka), mean.shape, wkt, nodata)  # as read_decimated
    return _as_float(mean, nodata), grid, _as_float(near, nodata)


def sample_bilinear(path, x, y, *, block_rows: int = 256, label: str = "raster") -> np.ndarray:
    """Band 1 of a raster interpolated bilinearly between cell centres at the points ``(x, y)``.

    A point is NaN outside the cell centres' hull widened by half a cell (there the nearest edge
    cell's values are used along the edge) or where one of its four cells is nodata. Rows are read
    in strips of ``block_rows`` around the points, each dropped from GDAL's block cache after, so
    memory is one strip, whatever the raster's size.

    The interpolation is the bilinear one of e.g. Press et al. 2007, *Numerical Recipes*, 3rd ed.,
    sec. 3.6.1 (eq. 3.6.5).
    """
    path = os.fspath(path)
    x = np.asarray(x, dtype=float).ravel()
    y = np.asarray(y, dtype=float).ravel()
    out = np.full(x.shape, np.nan)
    if not len(x):
        return out
    with gdal_exceptions():
        ds = _open_raster(path, label)
        try:
            band = ds.GetRasterBand(1)
            rows, cols = ds.RasterYSize, ds.RasterXSize
            x0, dx, _, y0, _, dy = ds.GetGeoTransform()
            nodata = band.GetNoDataValue()
            fc = (x - x0) / dx - 0.5
            fr = (y - y0) / dy - 0.5
            inside = np.isfinite(fc) & np.isfinite(fr) & (fc >= -0.5) & (fc <= cols - 0.5) \
                & (fr >= -0.5) & (fr <= rows - 0.5)
            fc = np.clip(fc, 0.0, cols - 1.0)
            fr = np.clip(fr, 0.0, rows - 1.0)
            c0 = np.minimum(np.floor(fc).astype(np.int64), max(cols - 2, 0))
            r0 = np.minimum(np.floor(fr).astype(np.int64), max(rows - 2, 0))
            tc, tr = fc - c0, fr - r0
            idx = np.flatnonzero(inside)
            for start in range(0, rows, block_rows):
                sel = idx[(r0[idx] >= start) & (r0[idx] < start + block_rows)]
                if not len(sel):
                    continue
                ra, rb = start, min(start + block_rows + 1, rows)
                ca, cb = int(c0[sel].min()), min(int(c0[sel].max()) + 2, cols)
                try:
                    block = _as_float(band.ReadAsArray(ca, ra, cb - ca, rb - ra), nodata)
                except RuntimeError as exc:
                    raise RasterReadError(f"{label} '{path}': GDAL could not read it ({gdal_message(exc)})") from None
                band.FlushCache()
                i, j = r0[sel] - ra, c0[sel] - ca
                i1 = np.minimum(i + 1, block.shape[0] - 1)
                j1 = np.minimum(j + 1, block.shape[1] - 1)
                u, v = tc[sel], tr[sel]
                out[sel] = ((1 - u) * (1 - v) * block[i, j] + u * (1 - v) * block[i, j1]
                            + (1 - u) * v * block[i1, j] + u * v * block[i1, j1])
        finally:
            ds = None
    return out


#: WKB bytes of the features of one piece of :func:`read_line_pieces` (about 87,000 3-D vertices).
PIECE_WKB_BYTES = 2 << 20


def read_line_pieces(path, *, layer: str, each, label: str = "layer", piece_bytes: int = PIECE_WKB_BYTES) -> list:
    """``each(piece)`` for the line features of ``layer`` in feature order, a few at a time: each piece a
    :class:`strikeline.io.vector.VectorLayer` of consecutive features holding about
    ``piece_bytes`` of WKB (at least one feature), checked and converted as
    :func:`strikeline.io.vector.read_layer` checks and converts the whole layer (features without a
    usable line skipped; a piece without any is left out). Memory holds one piece, however many
    vertices the layer has, so a caller that keeps less than it reads (lines simplified for a
    picture) stays bounded. Returns the list of what ``each`` returned, piece by piece.

    Raises
    ------
    VectorReadError, InputError
        The file or the layer cannot be read.
    """
    from strikeline.io.crs import _wkt_of
    from strikeline.io.vector import layer_from_wkb

    path = os.fspath(path)
    with _open_layer(path, layer) as lyr:
        defn = lyr.GetLayerDefn()
        fnames = [defn.GetFieldDefn(i).GetName() for i in range(defn.GetFieldCount())]
        ftypes = {n: defn.GetFieldDefn(i).GetFieldTypeName(defn.GetFieldDefn(i).GetType())
                  for i, n in enumerate(fnames)}
        srs = lyr.GetSpatialRef()
        wkt = _wkt_of(srs)
        out = []

        def piece(wkbs, fids, values):
            try:
                return layer_from_wkb(wkbs, fids=fids, fields=values, field_types=ftypes, crs_wkt=wkt, path=path,
                                      layer_name=layer, label=label, geometry="line")
            except InputError:  # no usable line among these features: nothing to give
                return None

        wkbs, fids, values, size = [], [], {n: [] for n in fnames}, 0
        lyr.ResetReading()
        try:
            for feat in lyr:
                g = feat.GetGeometryRef()
                wkbs.append(None if g is None else bytes(g.ExportToIsoWkb()))
                size += 0 if wkbs[-1] is None else len(wkbs[-1])
                fids.append(feat.GetFID())
                for i, n in enumerate(fnames):
                    values[n].append(feat.GetField(i) if feat.IsFieldSetAndNotNull(i) else None)
                if size >= piece_bytes:
                    got = piece(wkbs, fids, values)
                    wkbs, fids, values, size = [], [], {n: [] for n in fnames}, 0
                    if got is not None:
                        out.append(each(got))
        except RuntimeError as exc:
            raise VectorReadError(f"{label} layer '{layer}' of '{path}': OGR could not read its features "
                                  f"({gdal_message(exc)})") from None
        if wkbs:
            got = piece(wkbs, fids, values)
            if got is not None:
                out.append(each(got))
    return out


@contextlib.contextmanager
def _open_layer(path: str, layer: str):
    """The layer ``layer`` of the vector file ``path``, open in GDAL's exception mode; an
    unreadable file or a missing layer raises the one-line error that names it."""
    with gdal_exceptions():
        try:
            ds = ogr.Open(path, 0)
        except RuntimeError as exc:
            raise VectorReadError(f"'{path}': OGR cannot open it ({gdal_message(exc)})") from None
        try:
            lyr = ds.GetLayerByName(layer)
            if lyr is None:
                raise InputError(f"'{path}' has no layer '{layer}'")
            yield lyr
        finally:
            lyr = ds = None


def layer_names(path) -> list[str]:
    """The names of the layers of a vector file (an empty list when OGR cannot open it)."""
    path = os.fspath(path)
    if not os.path.exists(path):
        return []
    with gdal_exceptions():
        try:
            ds = ogr.Open(path, 0)
        except RuntimeError:
            return []
        try:
            return [ds.GetLayer(i).GetName() for i in range(ds.GetLayerCount())]
        finally:
            ds = None


def read_point_sample(path, *, layer: str, fields=(), max_points: int = 20_000) -> dict:
    """Every k-th point of a point layer (in feature order), at most ``max_points`` of them.

    Returns
    -------
    dict
        ``x``, ``y``, ``z`` (NaN without Z) as float arrays, one array per name of ``fields``
        (None for null), and ``n_total``, the features of the layer, and ``step``, the ``k``.
    """
    path = os.fspath(path)
    with _open_layer(path, layer) as lyr:
        n = lyr.GetFeatureCount()
        step = max(1, math.ceil(n / max_points)) if max_points > 0 else max(n, 1)
        defn = lyr.GetLayerDefn()
        index = {f: defn.GetFieldIndex(f) for f in fields}
        missing = [f for f, i in index.items() if i < 0]
        if missing:
            raise InputError(f"layer '{layer}' of '{path}' has no field(s) {', '.join(missing)}")
        xs, ys, zs = [], [], []
        vals = {f: [] for f in fields}
        lyr.ResetReading()
        for k, feat in enumerate(lyr):
            if k % step:
                continue
            g = feat.GetGeometryRef()
            if g is None or g.IsEmpty():
                continue
            xs.append(g.GetX())
            ys.append(g.GetY())
            zs.append(g.GetZ() if g.Is3D() else np.nan)
            for f, i in index.items():
                vals[f].append(feat.GetField(i) if feat.IsFieldSetAndNotNull(i) else None)
    out = {"x": np.asarray(xs, float), "y": np.asarray(ys, float), "z": np.asarray(zs, float),
           "n_total": int(n), "step": int(step)}
    for f in fields:
        arr = np.empty(len(vals[f]), dtype=object)
        arr[:] = vals[f]
        out[f] = arr
    return out
