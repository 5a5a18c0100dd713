"""write_gpkg: every kind of field and its missing values, read back with OGR itself."""
import numpy as np
import shapely
from osgeo import ogr

from strikeline.io.vector import LayerOut, write_gpkg


def _read_back(path, name):
    ds = ogr.Open(str(path))
    lyr = ds.GetLayerByName(name)
    defn = lyr.GetLayerDefn()
    kinds = {defn.GetFieldDefn(j).GetName(): (defn.GetFieldDefn(j).GetType(), defn.GetFieldDefn(j).GetSubType())
             for j in range(defn.GetFieldCount())}
    rows = []
    for f in lyr:
        g = f.GetGeometryRef()
        rows.append(({k: (None if not f.IsFieldSetAndNotNull(k) else f.GetField(k)) for k in kinds},
                     (g.GetX(), g.GetY(), g.GetZ())))
    ds = None
    return kinds, rows


def test_fields_of_every_kind_and_their_missing_values_read_back_as_written(tmp_path):
    geoms = shapely.points([[1.0, 2.0, 3.0], [4.0, 5.0, 6.0], [7.5, 8.5, -9.25]])
    fields = {"value_m": np.array([1.25, np.nan, -np.inf]), "count": np.array([3, -7, 2**40], np.int64),
              "flag": np.array([True, False, True]), "word": np.array(["a", None, "é"], dtype=object)}
    path = tmp_path / "out.gpkg"
    write_gpkg(path, [LayerOut("pts", geoms, fields, "point_z")], "")
    kinds, rows = _read_back(path, "pts")
    # Expected: OGR's own field types and values as GDAL 3.6's GPKG driver reads them (common practice:
    # a non-finite float and a None string are written as NULL; booleans as Integer/Boolean).
    assert kinds == {"value_m": (ogr.OFTReal, ogr.OFSTNone), "count": (ogr.OFTInteger64, ogr.OFSTNone),
                     "flag": (ogr.OFTInteger, ogr.OFSTBoolean), "word": (ogr.OFTString, ogr.OFSTNone)}
    assert [r[0] for r in rows] == [
        {"value_m": 1.25, "count": 3, "flag": 1, "word": "a"},
        {"value_m": None, "count": -7, "flag": 0, "word": None},
        {"value_m": None, "count": 2**40, "flag": 1, "word": "é"}]
    assert [r[1] for r in rows] == [(1.0, 2.0, 3.0), (4.0, 5.0, 6.0), (7.5, 8.5, -9.25)]


def test_an_empty_layer_is_written_with_its_fields(tmp_path):
    path = tmp_path / "out.gpkg"
    write_gpkg(path, [LayerOut("lines", np.empty(0, dtype=object), {"elevation_m": np.empty(0)}, "line_z")], "")
    kinds, rows = _read_back(path, "lines")
    # Expected: an empty GPKG table still declares its columns (OGR read-back, GDAL 3.6).
    assert kinds == {"elevation_m": (ogr.OFTReal, ogr.OFSTNone)} and rows == []
