"""Small helpers for the adapter tests: QGIS outputs back to numpy and shapely.

They hold no reference values; each test file names the source of its own (Source: ... comments).
"""
from __future__ import annotations

import numpy as np
import shapely
from osgeo import gdal
from qgis.core import QgsProcessingFeedback, QgsVectorLayer


class LogFeedback(QgsProcessingFeedback):
    """A feedback that keeps the log lines (information and warnings) in order."""

    def __init__(self):
        super().__init__()
        self.lines = []

    def pushInfo(self, text):  # noqa: N802 - QGIS's name
        self.lines.append(text)

    def pushWarning(self, text):  # noqa: N802
        self.lines.append(text)


def qgis_message(run, name, params) -> str:
    """The one-line message of the QgsProcessingException that tool ``name`` raises on ``params``."""
    import pytest
    from qgis.core import QgsProcessingException

    with pytest.raises(QgsProcessingException) as exc:
        run(name, params)
    msg = str(exc.value)
    assert "Traceback" not in msg and "\n" not in msg
    return msg


def as_layer(value):
    """A result value (layer or path/uri) as a QgsVectorLayer."""
    if isinstance(value, QgsVectorLayer):
        return value
    lyr = QgsVectorLayer(value, "out", "ogr")
    assert lyr.isValid(), value
    return lyr


def table(value, *, z=True):
    """``(shapely geometries, {field: ndarray})`` of a vector output, in feature order."""
    lyr = as_layer(value)
    names = lyr.fields().names()
    wkbs, cols = [], {n: [] for n in names}
    for f in lyr.getFeatures():
        wkbs.append(bytes(f.geometry().asWkb()))
        for n in names:
            v = f[n]
            cols[n].append(None if v is None or (hasattr(v, "isNull") and v.isNull()) else v)
    geoms = shapely.from_wkb(wkbs) if wkbs else np.empty(0, object)
    if not z and len(geoms):
        geoms = shapely.force_2d(geoms)
    return np.asarray(geoms, dtype=object), {n: np.array(v) for n, v in cols.items()}


def raster(path):
    """``(float64 array with NaN for nodata, geotransform, projection WKT)`` read by GDAL."""
    ds = gdal.Open(str(path))
    b = ds.GetRasterBand(1)
    a = b.ReadAsArray().astype(float)
    nd = b.GetNoDataValue()
    if nd is not None:
        a[a == nd] = np.nan
    out = a, ds.GetGeoTransform(), ds.GetProjection()
    ds = None
    return out


def assert_same_lines(got_geoms, got_z, ref_geoms, ref_z, *, tol_m):
    """Same set of lines: same count, same levels, each line within ``tol_m`` of its match."""
    assert len(got_geoms) == len(ref_geoms)
    assert len(got_geoms) > 0
    tree = shapely.STRtree(np.asarray(ref_geoms, dtype=object))
    used = set()
    for g, z in zip(got_geoms, got_z):
        cand = [i for i in tree.query(g, predicate="dwithin", distance=tol_m)
                if i not in used and abs(ref_z[i] - z) < 1e-9]
        dists = [shapely.hausdorff_distance(g, ref_geoms[i]) for i in cand]
        assert dists and min(dists) <= tol_m, f"line at {z} m has no match within {tol_m} m"
        used.add(cand[int(np.argmin(dists))])


def vector(uri: str, name: str = "layer"):
    lyr = QgsVectorLayer(uri, name, "ogr")
    assert lyr.isValid(), uri
    return lyr


def memory_copy(uri: str, name: str):
    """The features of a file layer in a memory layer (same geometries, fields and order)."""
    from qgis.core import QgsFeatureRequest

    mem = vector(uri, name).materialize(QgsFeatureRequest())
    mem.setName(name)
    return mem


def bilinear_reference(dem_path):
    """scipy's linear interpolator over the DEM's cell centres, called as ``f(x, y)``."""
    from scipy.interpolate import RegularGridInterpolator

    a, gt, _ = raster(dem_path)
    rows, cols = a.shape
    xs = gt[0] + gt[1] * (np.arange(cols) + 0.5)
    ys = gt[3] + gt[5] * (np.arange(rows) + 0.5)
    f = RegularGridInterpolator((ys[::-1], xs), a[::-1], method="linear", bounds_error=False,
                                fill_value=np.nan)
    return lambda x, y: f(np.column_stack([np.asarray(y, float), np.asarray(x, float)]))


def model_index(model: str) -> int:
    """The value of the 'Surface model' enum (parameter MODEL) that chooses ``model``."""
    from strikeline.pipeline.options import option

    return option("model").choices.index(model)
