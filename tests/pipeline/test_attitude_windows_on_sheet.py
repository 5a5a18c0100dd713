"""Local attitudes' windows on the sheet: with contacts running to the DEM's edges, no window
(grid or contact) is centred off the DEM (the attitudes layer of results.gpkg, read with OGR,
against the DEM's extent from gdalinfo)."""
from __future__ import annotations

import shapely
from helpers import write_lines
from osgeo import gdal, ogr

from strikeline import vocabulary as V

WINDOW_KIND = next(f.name for f in V.ATTITUDES.fields if f.name == "window_kind")


def test_attitude_windows_lie_on_the_dem(tmp_path, demo, cli):
    # Source: GDAL's gdalinfo (cornerCoordinates) for the DEM's outer edges
    corners = gdal.Info(demo["dem"], format="json")["cornerCoordinates"]
    (x0, y1), (x1, y0) = corners["upperLeft"], corners["lowerRight"]
    e = 1.0  # a metre inside the edges: the contacts run right to them
    zigzag = shapely.LineString([(x0 + e, y0 + e), (x0 + e, y1 - e), (x1 - e, y0 + e), (x1 - e, y1 - e)])
    contacts = write_lines(tmp_path / "edge.gpkg", [zigzag], epsg=32631, layer="contacts")
    out = tmp_path / "out"
    proc = cli("run", "--quiet", "--contacts", contacts, "--dem", demo["dem"], "--out", out)
    assert proc.returncode == 0, proc.stderr
    ds = ogr.Open(str(out / V.RESULTS_FILE))
    layer = ds.GetLayerByName(V.ATTITUDES.name)
    kinds, xs, ys = [], [], []
    for f in layer:
        g = f.GetGeometryRef()
        kinds.append(f.GetField(WINDOW_KIND))
        xs.append(g.GetX())
        ys.append(g.GetY())
    ds = None
    assert "grid" in kinds and len(xs) > 0
    off = [(k, x, y) for k, x, y in zip(kinds, xs, ys) if not (x0 <= x <= x1 and y0 <= y <= y1)]
    assert not off, (off[:5], (x0, y0, x1, y1))
