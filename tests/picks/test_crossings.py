"""Tests of the bulk contour crossings (strikeline.picks.crossings) behind picks_from_contours.

The outside reference is GEOS's overlay through ``shapely.intersection``: the crossing point of
two segments must be GEOS's to the last bit, and the picks must be byte for byte those of the
overlay of every intersecting piece pair (the method the bulk computation replaces, kept as
``_ENGINE = "overlay"``) on invented sheets, the demo sheet and the real-terrain sheets
(test_picks checks them against GEOS's intersection of the whole, unsplit lines).
"""
import numpy as np
import pytest
import shapely
from shapely import LineString, MultiLineString

from helpers import DEMO, REPO
from test_picks import wavy_sheet
from strikeline.picks import crossings, picks_from_contours
from strikeline.picks.lines import _line_parts, _part_vertices


def both_engines(monkeypatch, *args, **kwargs):
    """picks_from_contours by the bulk crossings and by the overlay of every piece pair."""
    monkeypatch.setattr("strikeline.picks.contours._ENGINE", "overlay")
    ref = picks_from_contours(*args, **kwargs)
    monkeypatch.setattr("strikeline.picks.contours._ENGINE", "segments")
    return picks_from_contours(*args, **kwargs), ref


def assert_same_bytes(got, ref):
    assert len(ref) > 0
    assert got.xyz.tobytes() == ref.xyz.tobytes()
    assert got.contact_id.tobytes() == ref.contact_id.tobytes()
    assert got.source.tolist() == ref.source.tolist()


def split(contacts, contours, max_segments=32):
    """Segment tables of the contacts and contours, and the guard distance, as picks use them."""
    tables = []
    for geoms in (contacts, contours):
        parts, _ = _line_parts(np.asarray(geoms, dtype=object), "lines")
        tables.append(crossings.segment_table(*_part_vertices(parts), max_segments))
    extent = max(1.0, max(float(np.abs(np.column_stack([t.x, t.y])).max()) for t in tables))
    return tables[0], tables[1], extent * crossings.GUARD_SHARE


# --------------------------------------------------------------------------------------------
# The crossing point
# --------------------------------------------------------------------------------------------
@pytest.mark.parametrize("scale, offset", [(10.0, 0.0), (1000.0, 5e5), (20.0, 5.15e6),
                                           (1e-3, 1.0), (5.0, 123456.789)])
def test_crossing_point_is_geos_to_the_last_bit(scale, offset):
    rng = np.random.default_rng(7)
    n = 20000
    p1, p2, q1, q2 = (rng.uniform(-1.0, 1.0, (n, 2)) * scale + offset for _ in range(4))
    a = shapely.linestrings(np.stack([p1, p2], axis=1))
    b = shapely.linestrings(np.stack([q1, q2], axis=1))
    # Source: GEOS 3.13's overlay (shapely.intersection) of each pair of single segments.
    ref = shapely.intersection(a, b)
    crossing = shapely.get_type_id(ref) == 0
    assert crossing.sum() > 3000
    x, y = crossings.crossing_points(*p1[crossing].T, *p2[crossing].T, *q1[crossing].T,
                                     *q2[crossing].T)
    xy = shapely.get_coordinates(ref[crossing])
    assert x.tobytes() == xy[:, 0].copy().tobytes()
    assert y.tobytes() == xy[:, 1].copy().tobytes()


def test_settled_pairs_and_pairs_left_to_geos():
    # A crossing, a vertex on the other line, a collinear stretch, a near miss (1e-9 m, far
    # inside the guard distance) and a clear miss, each in its own piece pair.
    contact = [LineString([(0.0, 0.0), (100.0, 0.0)])]
    contours = [LineString([(10.0, -1.0), (10.5, 1.0)]),            # proper crossing
                LineString([(20.0, -1.0), (20.0, 0.0), (21.0, 1.0)]),  # vertex on the contact
                LineString([(30.0, 0.0), (40.0, 0.0)]),             # along the contact
                LineString([(50.0, 1e-9), (51.0, 1.0)]),            # near miss
                LineString([(60.0, 0.5), (61.0, 1.0)])]             # clear miss
    a, b, guard = split(contact, contours)
    found = crossings.segment_crossings(a, b, guard)
    # Common practice: the segment from (10, -1) to (10.5, 1) is halfway across at y = 0.
    assert found.x.tolist() == [10.25] and found.y.tolist() == [0.0]
    assert found.b_piece.tolist() == [0]
    assert (found.flagged % b.n_pieces).tolist() == [1, 2, 3]


# --------------------------------------------------------------------------------------------
# Same picks as the overlay of every piece pair
# --------------------------------------------------------------------------------------------
@pytest.mark.parametrize("workers", [1, 2])
@pytest.mark.parametrize("spacing", [None, 0.7])
def test_same_picks_as_the_overlay_on_an_invented_sheet(monkeypatch, workers, spacing):
    contacts, contours, z = wavy_sheet(3, noise_m=4.0)
    got, ref = both_engines(monkeypatch, contacts, contours, z, workers=workers,
                            overlap_spacing_m=spacing)
    assert len(ref) > 500
    assert_same_bytes(got, ref)


def awkward_sheet():
    """Every case the bulk crossings leave to GEOS, and groups of picks within the tolerance
    that are not on one spot, on one long contact of 1 m steps (pieces of 32 segments)."""
    x = np.arange(0.0, 301.0)
    contact = LineString(np.column_stack([x, 0.002 * np.sin(x)]))
    contours, z = [], []

    def add(coords, elevation):
        contours.append(LineString(coords))
        z.append(elevation)

    add([(10.5, -2.0), (10.5, 2.0)], 100.0)                       # plain crossing
    add([(20.0, -2.0), (20.0, 0.002 * np.sin(20.0)), (21.0, 2.0)], 101.0)  # vertex on the contact
    add([(32.0, -2.0), (32.0, 2.0)], 102.0)                        # through a piece junction
    add(np.column_stack([x[40:120], 0.002 * np.sin(x[40:120])]), 103.0)  # along the contact
    add([(130.0, -2.0), (130.0, 0.0)], 104.0)                      # split at the crossing
    add([(130.0, 0.0), (130.0, 2.0)], 104.0)
    add([(140.2, -2.0), (140.2, 2.0)], 105.0)                      # two features 0.4 mm apart,
    add([(140.2004, -2.0), (140.2004, 2.0)], 105.0)                # same elevation
    add([(150.2, -2.0), (150.2, 2.0), (150.2003, 2.0), (150.2003, -2.0),
         (150.2006, -2.0), (150.2006, 2.0)], 106.0)                # three crossings in 0.6 mm
    add([(160.5, 0.5), (160.5, 1e-9 + 0.002 * np.sin(160.5))], 107.0)  # ends just off it
    add([(170.5, -2.0), (170.5, 2.0), (170.5, -2.0)], 108.0)       # there and back
    ring = np.column_stack([180.0 + 3 * np.cos(np.linspace(0, 2 * np.pi, 40)),
                            3 * np.sin(np.linspace(0, 2 * np.pi, 40))])
    ring[-1] = ring[0]
    add(ring, 109.0)                                               # a closed loop
    add([(200.0, -2.0), (200.0, -2.0), (200.5, 2.0), (200.5, 2.0)], 110.0)  # repeated vertices
    return [contact, MultiLineString([[(250.5, -3.0), (250.5, 3.0)]])], contours, np.array(z)


@pytest.mark.parametrize("spacing", [None, 5.0])
@pytest.mark.parametrize("tolerance", [1e-3, 0.0])
def test_same_picks_as_the_overlay_in_awkward_cases(monkeypatch, spacing, tolerance):
    contacts, contours, z = awkward_sheet()
    a, b, guard = split(contacts, contours)
    found = crossings.segment_crossings(a, b, guard)
    assert len(found.x) >= 5 and len(found.flagged) >= 5  # both ways are exercised
    got, ref = both_engines(monkeypatch, contacts, contours, z, overlap_spacing_m=spacing,
                            tolerance_m=tolerance)
    assert_same_bytes(got, ref)


def test_a_long_line_far_beyond_the_contacts(monkeypatch):
    # A contour 20,000 km long passing 4 m from a 100 m contact, and one 2,000 km long that
    # runs along the contact's first segment (y = x / 50): only their parts near the contact
    # are cut into bucket-sized chunks.
    contact = [LineString([(0.0, 0.0), (50.0, 1.0), (100.0, 0.0)])]
    contours = [LineString([(-1e7, 5.0), (1e7, 5.0)]), LineString([(-1e6, -2e4), (1e6, 2e4)]),
                LineString([(40.0, -3.0), (41.0, 3.0)])]
    got, ref = both_engines(monkeypatch, contact, contours, [10.0, 20.0, 30.0])
    assert_same_bytes(got, ref)
    # Common practice: the shared stretch gives its two ends, (0, 0) and (50, 1), at 20 m; the
    # short contour crosses at 30 m.
    assert got.xyz[:2].tolist() == [[0.0, 0.0, 20.0], [50.0, 1.0, 20.0]]
    assert got.xyz[2, 2] == 30.0


def read_lines(path, field=None):
    from strikeline.io.vector import read_layer

    layer = read_layer(path, label="lines", layer_option="--layer")
    geoms = layer.geoms.reshape(-1)
    return geoms, (None if field is None else np.asarray(layer.fields[field], dtype=float))


def test_same_picks_as_the_overlay_on_the_demo_sheet(monkeypatch):
    contours, z = read_lines(DEMO / "contours.gpkg", "elev_m")
    contacts, _ = read_lines(DEMO / "contacts.gpkg")
    got, ref = both_engines(monkeypatch, contacts, contours, z)
    assert len(ref) > 150
    assert_same_bytes(got, ref)


@pytest.mark.parametrize("terrain, case, interval", [("lidar", "fold", 0.5),
                                                     ("lidar", "plane", 0.5),
                                                     ("volcano", "fold", 2.0)])
def test_same_picks_as_the_overlay_on_real_terrain(monkeypatch, terrain, case, interval):
    from strikeline.io.contours import contour_lines
    from strikeline.io.raster import read_raster

    root = REPO / "test_data" / "real" / terrain
    dem, grid = read_raster(root / "dem.tif")
    # Topographic contours of the real DEM by GDAL's contour generator; contacts as mapped.
    contours, z = contour_lines(np.where(dem == grid.nodata, np.nan, dem).astype(float), grid,
                                interval_m=interval)
    contacts, _ = read_lines(root / case / "contacts.gpkg")
    got, ref = both_engines(monkeypatch, contacts, contours, z)
    assert len(ref) > 50
    assert_same_bytes(got, ref)
