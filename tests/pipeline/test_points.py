"""Points with elevations read back (``strikeline.pipeline.points``): hand-made layers, exact answers."""
from __future__ import annotations

import numpy as np
import pytest
import shapely

from strikeline.errors import InputError
from strikeline.io.vector import VectorLayer
from strikeline.pipeline.points import pick_set_of_points, point_values, point_xyz


def layer(geoms, fields=None, types=None):
    fields = {k: np.array(v, dtype=object) for k, v in (fields or {}).items()}
    return VectorLayer("picks.gpkg", "picks", np.array(geoms, dtype=object), np.arange(len(geoms), dtype=np.int64),
                       fields, types or {}, "")


def test_elevation_from_a_field_wins_over_z():
    # Points whose Z (0 m) differs from their elevation field: the field is the elevation.
    lyr = layer([shapely.Point(1, 2, 0), shapely.Point(3, 4, 0)], {"elev": [510.5, None]}, {"elev": "Real"})
    xyz, owner = point_xyz(lyr, z_field="elev")
    np.testing.assert_array_equal(xyz[:, :2], [[1, 2], [3, 4]])
    assert xyz[0, 2] == 510.5 and np.isnan(xyz[1, 2])  # null -> NaN
    assert owner.tolist() == [0, 1]


def test_elevation_of_2d_points_from_a_field():
    lyr = layer([shapely.Point(1, 2), shapely.MultiPoint([(5, 6), (7, 8)])], {"elev": [100, 200]},
                {"elev": "Integer"})
    xyz, owner = point_xyz(lyr, z_field="elev")
    np.testing.assert_array_equal(xyz, [[1, 2, 100], [5, 6, 200], [7, 8, 200]])
    assert owner.tolist() == [0, 1, 1]


def test_elevation_from_z_and_points_without_z():
    xyz, _ = point_xyz(layer([shapely.Point(1, 2, 3)]))
    np.testing.assert_array_equal(xyz, [[1, 2, 3]])
    with pytest.raises(InputError, match=r"picks layer 'p' has points without Z; choose the field"):
        point_xyz(layer([shapely.Point(1, 2, 3), shapely.Point(1, 2)]), what="picks layer 'p'",
                  no_z_fix="choose the field")
    with pytest.raises(InputError, match="not numeric"):
        point_xyz(layer([shapely.Point(1, 2)], {"elev": ["high"]}, {"elev": "String"}), z_field="elev")


def test_point_values():
    lyr = layer([shapely.Point(0, 0, 1), shapely.MultiPoint([(1, 1, 1), (2, 2, 2)])],
                {"contact_id": [4, None], "unit": ["sandstone", None]}, {"contact_id": "Integer", "unit": "String"})
    _, owner = point_xyz(lyr)
    v = point_values(lyr, owner, numeric=("contact_id",), text=("unit",))
    np.testing.assert_array_equal(v["contact_id"], [4.0, np.nan, np.nan])
    assert v["unit"].tolist() == ["sandstone", None, None]
    with pytest.raises(InputError, match=r"has no field 'block' \(fields: contact_id, unit\)"):
        point_values(lyr, owner, text=("block",))


def test_pick_set_of_points():
    xyz = np.array([[0, 0, 1], [1, 1, 2], [2, 2, 3]], dtype=float)
    p = pick_set_of_points(xyz, contact_id=[7, None, 7.0], source=["contours", "dem", "survey"])
    assert p.contact_id.tolist() == [7, -1, 7]
    assert p.source.tolist() == ["contours", "dem", "dem"]  # not a pick source: counted as dem
    q = pick_set_of_points(xyz)
    assert q.contact_id.tolist() == [0, 0, 0] and q.source.tolist() == ["dem"] * 3
    np.testing.assert_array_equal(q.xyz, xyz)
