"""Reading vector layers: an attribute filter that OGR refuses is a clear input error, whichever
driver checks it and whenever it does."""
import pytest
import shapely
from osgeo import ogr

from helpers import write_lines
from strikeline.errors import InputError
from strikeline.io._gdal import gdal_exceptions
from strikeline.io.vector import read_layer

LINES = [shapely.LineString([(500000, 5200000), (500100, 5200050)]),
         shapely.LineString([(500000, 5200100), (500100, 5200150)])]


@pytest.mark.parametrize("suffix", [".gpkg", ".shp"])
@pytest.mark.parametrize("where", ["nope = 1", "unit = ", "x =="])
def test_a_filter_ogr_refuses_is_an_input_error_naming_the_option(tmp_path, suffix, where):
    path = write_lines(tmp_path / f"contacts{suffix}", LINES, epsg=32760, fields={"unit": ["a", "b"]})
    # Reference: OGR itself refuses the filter, either when it is set or when the first feature
    # is read (the GeoPackage driver defers the check to SQLite) - GDAL's own behaviour.
    ds = ogr.Open(path)
    lyr = ds.GetLayer(0)
    with gdal_exceptions(), pytest.raises(RuntimeError):
        lyr.SetAttributeFilter(where)
        lyr.GetNextFeature()
    ds = None
    with pytest.raises(InputError) as err:
        read_layer(path, where=where, label="contacts", layer_option="--contacts-layer", where_option="--where")
    message = str(err.value)
    assert "--where" in message and repr(where) in message and "not valid OGR SQL" in message
    assert "\n" not in message


def test_a_valid_filter_keeps_the_matching_features(tmp_path):
    path = write_lines(tmp_path / "contacts.gpkg", LINES, epsg=32760, fields={"unit": ["a", "b"]})
    lyr = read_layer(path, where="unit = 'b'", label="contacts", layer_option="--contacts-layer")
    # Reference: the second line written above is the one with unit 'b'.
    assert len(lyr) == 1 and shapely.equals(lyr.geoms[0], LINES[1])
