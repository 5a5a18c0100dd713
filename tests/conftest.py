"""Shared fixtures: the demo sheet, derived bad inputs, and a CLI runner."""
from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[1]
DEMO = REPO / "test_data" / "demo"


@pytest.fixture(scope="session")
def demo():
    """Paths of the bundled demo sheet and its truth (the plane it was built from)."""
    truth = json.loads((DEMO / "truth.json").read_text())
    return {
        "dir": DEMO,
        "dem": str(DEMO / "dem.tif"),
        "contacts": str(DEMO / "contacts.gpkg"),
        "contours": str(DEMO / "contours.gpkg"),
        "elev_field": "elev_m",
        "truth": truth,
    }


def run_cli(*args, cwd=None):
    """Run ``strikeline`` as a user would (a subprocess) and return the CompletedProcess."""
    env = dict(os.environ)
    env.pop("STRIKELINE_DEBUG", None)
    return subprocess.run(
        [sys.executable, "-m", "strikeline.cli.main", *map(str, args)],
        capture_output=True, text=True, cwd=cwd, env=env, timeout=600,
    )


@pytest.fixture
def cli():
    return run_cli


def write_lines(path, lines, *, epsg=None, fields=None, layer="lines", driver=None):
    """Write shapely lines to a vector file with OGR (test inputs only). ``epsg=None``: no CRS."""
    from osgeo import ogr, osr
    import shapely

    path = str(path)
    driver = driver or {".gpkg": "GPKG", ".shp": "ESRI Shapefile", ".geojson": "GeoJSON"}[Path(path).suffix]
    ogr.UseExceptions()
    ds = ogr.GetDriverByName(driver).CreateDataSource(path)
    srs = None
    if epsg is not None:
        srs = osr.SpatialReference()
        srs.ImportFromEPSG(epsg)
    lyr = ds.CreateLayer(layer, srs, ogr.wkbLineString)
    fields = fields or {}
    for name, values in fields.items():
        kind = ogr.OFTReal if isinstance(values[0], float) else ogr.OFTString
        lyr.CreateField(ogr.FieldDefn(name, kind))
    for i, g in enumerate(lines):
        f = ogr.Feature(lyr.GetLayerDefn())
        f.SetGeometry(ogr.CreateGeometryFromWkb(shapely.to_wkb(g)))
        for name, values in fields.items():
            f.SetField(name, values[i])
        lyr.CreateFeature(f)
    ds = None
    return path
