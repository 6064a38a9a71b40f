"""No-boom zones: GeoJSON checks, projection, and the polygon kernels.

References used here:
* shapely (GEOS) for point-in-polygon, segment intersection, distances and ring
  simplicity (``shapely.contains_xy``, ``intersects``, ``distance``, ``is_simple``).
* geographiclib (Karney's geodesics) for the projected vertex positions.
* RFC 7946 (GeoJSON) for what a valid document is.
* advisory.units (NIST SP 811 definitions) for psf/ft conversions.
"""

from __future__ import annotations

import copy
import json
import math
from pathlib import Path

import numpy as np
import pytest
import shapely
from geographiclib.geodesic import Geodesic
from shapely.geometry import LinearRing, LineString, MultiPolygon, Point, Polygon

from advisory.geo import contact
from advisory.geo import polygons as gk
from advisory.geo import rings as gr
from advisory.geo.frame import LocalFrame
from advisory.pipeline.zone_file import DEFAULT_MARGIN_KM, ZoneFileError
from advisory.pipeline.zones import ZoneSet
from advisory.units import FT, PSF
from tests.twins import polygons as twins
from tests.twins import rings as ring_twins
from tests.twins.contact import edge_chunks_twin

DATA = Path(__file__).parent / "data"
GEOD = Geodesic.WGS84


# --------------------------------------------------------------------------------------
# helpers: random polygons packed in the kernels' flat layout
# --------------------------------------------------------------------------------------


def star(rng, cx, cy, r_lo, r_hi, n):
    """A simple (star-shaped) closed ring around (cx, cy), counter-clockwise."""
    ang = (np.arange(n) + rng.uniform(0.0, 0.8, n)) * (2.0 * np.pi / n)  # gaps < 2 * 360/n
    rad = rng.uniform(r_lo, r_hi, n)
    ring = np.column_stack([cx + rad * np.cos(ang), cy + rad * np.sin(ang)])
    return np.vstack([ring, ring[:1]])


def random_zone(rng, cx, cy, size, multipart=False):
    """Parts (list of rings) of a random zone: star exterior, maybe a hole, maybe 2 parts.

    With at least 8 exterior vertices every exterior edge stays farther than
    0.6 size cos(81 deg / 2) = 0.46 size from the centre, so the hole (radius <= 0.4 size)
    lies inside it.
    """
    parts = []
    centres = [(cx, cy)] if not multipart else [(cx - 1.6 * size, cy), (cx + 1.6 * size, cy)]
    for px, py in centres:
        ext = star(rng, px, py, 0.6 * size, size, int(rng.integers(8, 40)))
        rings = [ext]
        if rng.random() < 0.6:  # a hole well inside the exterior's smallest radius
            hole = star(rng, px, py, 0.1 * size, 0.4 * size, int(rng.integers(3, 12)))
            rings.append(hole[::-1])
        parts.append(rings)
    return parts


def pack(zones):
    """Flat arrays in the layout of advisory.geo.polygons (as ZoneSet.project does)."""
    xs, ys = [], []
    ring_start, part_start, zone_start = [0], [0], [0]
    n_rings = 0
    for parts in zones:
        for rings in parts:
            for ring in rings:
                xs.append(ring[:, 0])
                ys.append(ring[:, 1])
                ring_start.append(ring_start[-1] + len(ring))
                n_rings += 1
            part_start.append(n_rings)
        zone_start.append(len(part_start) - 1)
    x = np.ascontiguousarray(np.concatenate(xs))
    y = np.ascontiguousarray(np.concatenate(ys))
    rs = np.asarray(ring_start, np.int64)
    ps = np.asarray(part_start, np.int64)
    zs = np.asarray(zone_start, np.int64)
    bbox = np.empty((len(zones), 4))
    for k in range(len(zones)):
        v = slice(rs[ps[zs[k]]], rs[ps[zs[k + 1]]])
        bbox[k] = (x[v].min(), y[v].min(), x[v].max(), y[v].max())
    chunks = contact.build_edge_chunks(x, y, rs, 4)
    return x, y, rs, ps, zs, bbox, chunks


def to_shapely(parts):
    polys = [Polygon(rings[0], rings[1:]) for rings in parts]
    return polys[0] if len(polys) == 1 else MultiPolygon(polys)


@pytest.fixture(scope="module")
def random_zones():
    rng = np.random.default_rng(5)
    zones = [random_zone(rng, rng.uniform(-50, 50), rng.uniform(-50, 50), rng.uniform(3, 15),
                         multipart=bool(k % 3 == 0)) for k in range(12)]
    # small zones, narrower than the gap between successive cross-sections below
    zones += [random_zone(rng, rng.uniform(-30, 30), rng.uniform(-30, 30), rng.uniform(0.2, 0.8))
              for _ in range(10)]
    geoms = [to_shapely(z) for z in zones]
    assert all(g.is_valid for g in geoms)  # shapely (GEOS) validity of the test polygons
    return zones, geoms, pack(zones)


# --------------------------------------------------------------------------------------
# GeoJSON reading and checks
# --------------------------------------------------------------------------------------


def test_reads_fixture_in_si():
    zs = ZoneSet.from_file(DATA / "zones_fictional_valley.geojson")
    assert [z.id for z in zs] == ["brackenford", "lower-marsh-reserve", "north-range-edge"]
    town, marsh, edge = zs
    # conversions against the exact unit definitions (NIST SP 811): 1 psf = 47.880 Pa
    assert town.limit_pa == 0.0 and town.no_boom
    assert town.margin_m == 8000.0
    assert town.ground_elevation_m == pytest.approx(1200 * FT)
    assert marsh.limit_pa == pytest.approx(0.5 * PSF)
    assert marsh.margin_m == DEFAULT_MARGIN_KM * 1000.0  # documented default
    assert marsh.ground_elevation_m is None and edge.ground_elevation_m is None
    assert edge.margin_m == 0.0 and edge.name == "north-range-edge"  # name defaults to id
    assert len(town.polygons) == 1 and len(town.polygons[0]) == 2  # exterior + hole
    assert len(marsh.polygons) == 2
    ring = town.polygons[0][0]
    assert ring.shape == (5, 2) and np.array_equal(ring[0], ring[-1])
    assert ring[1] == pytest.approx(np.radians([-100.90, 39.80]))  # [lon, lat] in rad
    assert zs.index_of("lower-marsh-reserve") == 1
    with pytest.raises(KeyError, match="nowhere"):
        zs.index_of("nowhere")


def test_file_errors_name_the_file():
    with pytest.raises(ZoneFileError, match=r"zones_truncated.geojson: not valid JSON.*line"):
        ZoneSet.from_file(DATA / "zones_truncated.geojson")
    with pytest.raises(ZoneFileError, match="cannot read"):
        ZoneSet.from_file(DATA / "zones_no_such_file.geojson")


def _doc():
    return {
        "type": "FeatureCollection",
        "features": [
            {"type": "Feature", "properties": {"id": "alpha", "limit_psf": 1.0},
             "geometry": {"type": "Polygon",
                          "coordinates": [[[0, 0], [1, 0], [1, 1], [0, 1], [0, 0]]]}},
            {"type": "Feature", "properties": {"id": "bravo", "limit_psf": 0},
             "geometry": {"type": "Polygon",
                          "coordinates": [[[5, 5], [6, 5], [6, 6], [5, 5]]]}},
        ],
    }


def _set(path, value):
    def edit(doc):
        node = doc
        for key in path[:-1]:
            node = node[key]
        if value is KeyError:
            del node[path[-1]]
        else:
            node[path[-1]] = value
    return edit


GEOM = ("features", 1, "geometry")
RING = ("features", 1, "geometry", "coordinates", 0)
PROPS = ("features", 1, "properties")

# (edit, expected text in the message); every case is feature 1, id 'bravo' unless noted.
# What counts as invalid follows RFC 7946 (sec. 3.1.6 linear rings, 3.1.9 antimeridian).
BAD_CASES = {
    "unclosed": (_set(RING, [[5, 5], [6, 5], [6, 6], [5, 6]]), "not closed"),
    "three_positions": (_set(RING, [[5, 5], [6, 5], [5, 5]]), "at least 4"),
    "lon_range": (_set(RING, [[5, 5], [181, 5], [6, 6], [5, 5]]), "longitude must be"),
    "lat_range": (_set(RING, [[5, 5], [6, 5], [6, 91], [5, 5]]), "latitude must be"),
    "not_number": (_set(RING, [[5, 5], [6, "5"], [6, 6], [5, 5]]), "latitude must be"),
    "nan": (_set(RING, [[5, 5], [6, float("nan")], [6, 6], [5, 5]]), "latitude must be"),
    "short_position": (_set(RING, [[5, 5], [6], [6, 6], [5, 5]]), "position 1"),
    "bow_tie": (_set(RING, [[5, 5], [6, 6], [6, 5], [5, 6], [5, 5]]), "crosses or touches"),
    "collinear": (_set(RING, [[5, 5], [6, 5], [7, 5], [5, 5]]), "no area"),
    "duplicates": (_set(RING, [[5, 5], [6, 5], [6, 5], [5, 5]]), "3 distinct"),
    "antimeridian": (_set(RING, [[179, 5], [-179, 5], [-179, 6], [179, 5]]), "antimeridian"),
    "line_string": (_set(GEOM, {"type": "LineString", "coordinates": [[0, 0], [1, 1]]}),
                    "'LineString' is not supported"),
    "no_geometry": (_set(GEOM, None), "'geometry' must be an object"),
    "empty_multi": (_set(GEOM, {"type": "MultiPolygon", "coordinates": []}), "non-empty"),
    "ring_not_array": (_set(GEOM, {"type": "Polygon", "coordinates": [5]}), "ring must be"),
    "limit_missing": (_set(PROPS + ("limit_psf",), KeyError), "limit_psf is missing"),
    "limit_negative": (_set(PROPS + ("limit_psf",), -1), "limit_psf must be a number >= 0"),
    "limit_bool": (_set(PROPS + ("limit_psf",), True), "limit_psf must be"),
    "limit_string": (_set(PROPS + ("limit_psf",), "1.0"), "limit_psf must be"),
    "margin_negative": (_set(PROPS + ("margin_km",), -2), "margin_km must be"),
    "margin_huge": (_set(PROPS + ("margin_km",), 1e4), "margin_km must be"),
    "elevation_bad": (_set(PROPS + ("ground_elevation_ft",), 1e6), "ground_elevation_ft"),
    "name_not_str": (_set(PROPS + ("name",), 7), "name must be a string"),
}


@pytest.mark.parametrize("case", sorted(BAD_CASES))
def test_invalid_feature_named(case):
    edit, text = BAD_CASES[case]
    doc = copy.deepcopy(_doc())
    edit(doc)
    with pytest.raises(ZoneFileError) as info:
        ZoneSet.from_geojson(doc, source="test.geojson")
    err = info.value
    assert err.feature_index == 1 and err.zone_id == "bravo"
    assert str(err).startswith("test.geojson: feature 1 (id 'bravo'): ")
    assert text in str(err)


@pytest.mark.parametrize("props, text", [
    ({"limit_psf": 1}, "properties.id is missing"),
    ({"id": "", "limit_psf": 1}, "non-empty string"),
    ({"id": 12, "limit_psf": 1}, "non-empty string, got number 12"),
])
def test_bad_id_named_by_index(props, text):
    doc = _doc()
    doc["features"][1]["properties"] = props
    with pytest.raises(ZoneFileError, match=r"feature 1 \(id unknown\): .*" + text):
        ZoneSet.from_geojson(doc)


def test_repeated_id_and_structure():
    doc = _doc()
    doc["features"][1]["properties"]["id"] = "alpha"
    with pytest.raises(ZoneFileError, match=r"feature 1 \(id 'alpha'\): id repeats .*feature 0"):
        ZoneSet.from_geojson(doc)
    with pytest.raises(ZoneFileError, match="FeatureCollection"):
        ZoneSet.from_geojson({"type": "Feature"})
    with pytest.raises(ZoneFileError, match="'features' must be an array"):
        ZoneSet.from_geojson({"type": "FeatureCollection", "features": {}})
    with pytest.raises(ZoneFileError, match=r"feature 0 \(id unknown\): type must be 'Feature'"):
        ZoneSet.from_geojson({"type": "FeatureCollection", "features": [{"type": "Point"}]})
    assert len(ZoneSet.from_geojson({"type": "FeatureCollection", "features": []})) == 0


def test_hole_error_names_the_ring():
    doc = _doc()
    doc["features"][0]["geometry"]["coordinates"].append([[0.2, 0.2], [0.4, 0.2], [0.2, 0.4]])
    with pytest.raises(ZoneFileError, match=r"feature 0 \(id 'alpha'\): polygon, hole 1: has 3"):
        ZoneSet.from_geojson(doc)


def test_either_winding_accepted():
    # RFC 7946 sec. 3.1.6: parsers should not reject polygons on winding order
    doc = _doc()
    ring = doc["features"][0]["geometry"]["coordinates"][0]
    doc["features"][0]["geometry"]["coordinates"][0] = ring[::-1]
    assert len(ZoneSet.from_geojson(doc)) == 2


# --------------------------------------------------------------------------------------
# projection
# --------------------------------------------------------------------------------------


def test_projection_layout_and_positions():
    zs = ZoneSet.from_file(DATA / "zones_fictional_valley.geojson")
    frame = LocalFrame.from_deg(40.3, -100.6)
    pz = zs.project(frame)
    assert pz.ids == ("brackenford", "lower-marsh-reserve", "north-range-edge")
    assert pz.zone_start.tolist() == [0, 1, 3, 4]
    assert pz.part_start.tolist() == [0, 2, 3, 4, 5]
    assert pz.margin_m.tolist() == [8000.0, 5000.0, 0.0]
    assert np.isnan(pz.ground_elevation_m[1]) and pz.ground_elevation_m[0] == pytest.approx(
        365.76)  # 1200 ft, exact foot (NIST SP 811)
    # every ring is closed in the flat arrays
    for r in range(len(pz.ring_start) - 1):
        a, b = pz.ring_start[r], pz.ring_start[r + 1] - 1
        assert (pz.x[a], pz.y[a]) == (pz.x[b], pz.y[b])
    # first vertex of zone 0 against geographiclib: distance and azimuth from the origin
    g = GEOD.Inverse(40.3, -100.6, 39.80, -101.20)
    rho = math.hypot(pz.x[0], pz.y[0])
    s = 2 * frame.radius_m * math.asin(rho / (2 * frame.radius_m))  # the frame's radial law
    assert s == pytest.approx(g["s12"], abs=1e-3)
    assert math.degrees(math.atan2(pz.x[0], pz.y[0])) == pytest.approx(g["azi1"], abs=1e-8)
    for k in range(3):
        v0, v1 = pz.ring_start[pz.part_start[pz.zone_start[k]]], pz.ring_start[
            pz.part_start[pz.zone_start[k + 1]]]
        assert pz.zone_bbox[k].tolist() == [pz.x[v0:v1].min(), pz.y[v0:v1].min(),
                                            pz.x[v0:v1].max(), pz.y[v0:v1].max()]
    assert pz.extent_m == pytest.approx(np.hypot(pz.x, pz.y).max())


def test_long_edges_follow_the_parallel():
    # RFC 7946 sec. 3.1.1: an edge is a straight line in lon/lat, so a 2-degree east-west
    # edge runs along the parallel; the projected, densified ring must stay on it.
    zs = ZoneSet.from_file(DATA / "zones_fictional_valley.geojson")
    frame = LocalFrame.from_deg(41.1, -101.0)
    pz = zs.project(frame, max_edge_deg=0.1)
    v0, v1 = pz.ring_start[pz.part_start[pz.zone_start[2]]], pz.ring_start[-1]
    lat, lon = frame.from_enu(pz.x[v0:v1], pz.y[v0:v1])
    south = np.degrees(lat) < 41.05
    # 2 deg split into 0.1-deg pieces: 21 points, the first repeated to close the ring
    assert south.sum() == 22
    assert np.degrees(lat[south]) == pytest.approx(41.0, abs=1e-9)
    # zone 2 (margin 0) spans 41.0 to 41.2 N. A point 300 m north of the south edge's
    # midpoint is inside, 300 m south of it outside. Without densifying, the straight
    # chord between the corners would bow about 0.5 km north of the parallel (sagitta
    # L**2 tan(lat) / (8 R), value from the sagitta formula) and leave the first outside.
    north = GEOD.Direct(41.0, -101.0, 0.0, 300.0)
    south_pt = GEOD.Direct(41.0, -101.0, 180.0, 300.0)
    n_xy = frame.to_enu(math.radians(north["lat2"]), math.radians(north["lon2"]))
    s_xy = frame.to_enu(math.radians(south_pt["lat2"]), math.radians(south_pt["lon2"]))
    assert pz.contains(2, *n_xy)[0]
    assert not pz.contains(2, *s_xy)[0]
    coarse = zs.project(frame, max_edge_deg=10.0)
    assert not coarse.contains(2, *n_xy)[0]
    with pytest.raises(ValueError, match="max_edge_deg"):
        zs.project(frame, max_edge_deg=0.0)


def test_projected_zone_methods_match_shapely():
    zs = ZoneSet.from_file(DATA / "zones_fictional_valley.geojson")
    frame = LocalFrame.from_deg(40.3, -100.6)
    pz = zs.project(frame)
    # shapely polygon of zone 0 built from the projected rings
    rs, ps = pz.ring_start, pz.part_start
    rings = [np.column_stack([pz.x[rs[r]:rs[r + 1]], pz.y[rs[r]:rs[r + 1]]])
             for r in range(ps[0], ps[1])]
    poly = Polygon(rings[0], rings[1:])
    rng = np.random.default_rng(3)
    b = pz.zone_bbox[0]
    px = rng.uniform(b[0] - 5e3, b[2] + 5e3, 500)
    py = rng.uniform(b[1] - 5e3, b[3] + 5e3, 500)
    assert np.array_equal(pz.contains(0, px, py), shapely.contains_xy(poly, px, py))
    for _ in range(50):
        ax, ay, bx, by = rng.uniform(-150e3, 150e3, 4)
        d, u = pz.segment_distance(0, ax, ay, bx, by)
        assert d == pytest.approx(poly.distance(LineString([(ax, ay), (bx, by)])), abs=1e-6)
        assert 0.0 <= u <= 1.0


# --------------------------------------------------------------------------------------
# kernels against shapely, and numba kernels against their numpy twins
# --------------------------------------------------------------------------------------


def test_segments_intersect_vs_shapely():
    rng = np.random.default_rng(11)
    # random segments plus exact integer cases: touching ends, collinear overlap, T-joins
    seg = rng.integers(0, 6, size=(4000, 8)).astype(float)
    seg[2000:] = rng.uniform(0, 10, size=(2000, 8))
    # zero-length segments left out: GEOS treats such a line as degenerate (intersects
    # nothing), where the kernel treats it as the point it is
    proper = np.any(seg[:, 0:2] != seg[:, 2:4], axis=1) & np.any(seg[:, 4:6] != seg[:, 6:8], 1)
    seg = seg[proper]
    got = np.array([gk.segments_intersect(*s) for s in seg])
    twin = twins.segments_intersect_twin(*seg.T)
    ref = np.array([LineString([s[0:2], s[2:4]]).intersects(LineString([s[4:6], s[6:8]]))
                    for s in seg])
    assert np.array_equal(got, ref)
    assert np.array_equal(twin, ref)


def test_point_in_zone_vs_shapely(random_zones):
    zones, geoms, (x, y, rs, ps, zs, bbox, _) = random_zones
    rng = np.random.default_rng(12)
    px = rng.uniform(-80, 80, 3000)
    py = rng.uniform(-80, 80, 3000)
    for k, geom in enumerate(geoms):
        ref = shapely.contains_xy(geom, px, py)
        got = gk.points_in_zone(px, py, x, y, rs, ps, zs, k)
        twin = twins.points_in_zone_twin(px, py, x, y, rs, ps, zs, k)
        assert np.array_equal(got, ref), k
        assert np.array_equal(twin, ref), k
        assert gk.point_in_zone(px[0], py[0], x, y, rs, ps, zs, k) == ref[0]


def test_segment_distance_and_margin_vs_shapely(random_zones):
    zones, geoms, (x, y, rs, ps, zs, bbox, _) = random_zones
    rng = np.random.default_rng(13)
    for k, geom in enumerate(geoms):
        for _ in range(150):
            ax, ay = rng.uniform(-80, 80, 2)
            bx, by = np.array([ax, ay]) + rng.normal(0, 15, 2)
            ref = geom.distance(LineString([(ax, ay), (bx, by)]))
            d, u = gk.segment_zone_distance(ax, ay, bx, by, x, y, rs, ps, zs, k)
            twin = twins.segment_zone_distance_twin(ax, ay, bx, by, x, y, rs, ps, zs, k)
            assert d == pytest.approx(ref, abs=1e-9)
            assert twin == pytest.approx(ref, abs=1e-9)
            if ref > 0:  # the closest point really is at u along the segment
                cx, cy = ax + u * (bx - ax), ay + u * (by - ay)
                assert geom.distance(Point(cx, cy)) == pytest.approx(ref, abs=1e-9)
            margin = rng.uniform(0, 5)
            if abs(ref - margin) > 1e-9:
                expect = ref <= margin
                assert gk.segment_near_zone(ax, ay, bx, by, margin, x, y, rs, ps, zs, k,
                                            bbox) == expect
                assert twins.segment_near_zone_twin(ax, ay, bx, by, margin, x, y, rs, ps, zs,
                                               k) == expect


def _carpet(rng, n=150, spacing=2.5, half_width=12.0):
    """Time-ordered cross-sections of a gently turning path (no two sections cross),
    starting at the edge of the zones' region and heading across it."""
    x0, y0 = rng.uniform(-60, 60, 2)
    psi = math.atan2(-x0, -y0) + rng.normal(0, 0.3) + np.cumsum(rng.normal(0, 0.004, n))
    cx = x0 + np.cumsum(spacing * np.sin(psi))
    cy = y0 + np.cumsum(spacing * np.cos(psi))
    ax, ay = cx - half_width * np.cos(psi), cy + half_width * np.sin(psi)
    bx, by = cx + half_width * np.cos(psi), cy - half_width * np.sin(psi)
    return ax, ay, bx, by


def _first_contact_shapely(geoms, margins, ax, ay, bx, by, swept):
    out = []
    for geom, m in zip(geoms, margins, strict=True):
        first = -1
        for i in range(len(ax)):
            d = geom.distance(LineString([(ax[i], ay[i]), (bx[i], by[i])]))
            if swept and i > 0:
                band = Polygon([(ax[i - 1], ay[i - 1]), (bx[i - 1], by[i - 1]),
                                (bx[i], by[i]), (ax[i], ay[i])])
                d = min(d, geom.distance(band))
            if d <= m:
                first = i
                break
        out.append(first)
    return np.array(out)


@pytest.mark.parametrize("swept", [False, True])
def test_first_contact_vs_shapely(random_zones, swept):
    zones, geoms, (x, y, rs, ps, zs, bbox, (rc, ce, cb)) = random_zones
    rng = np.random.default_rng(14)
    hits = 0
    for _ in range(8):
        ax, ay, bx, by = _carpet(rng)
        margins = rng.uniform(0, 6, len(zones)) * (rng.random(len(zones)) < 0.5)
        got = contact.first_contact(ax, ay, bx, by, x, y, ps, zs, bbox, rc, ce, cb, margins, swept)
        twin = twins.first_contact_twin(ax, ay, bx, by, x, y, rs, ps, zs, margins, swept)
        ref = _first_contact_shapely(geoms, margins, ax, ay, bx, by, swept)
        assert np.array_equal(got, ref)
        assert np.array_equal(twin, ref)
        hits += int((ref >= 0).sum())
    assert hits > 20  # the carpets do reach many zones


def test_first_contact_swept_catches_small_zone_between_sections():
    # a 0.2 x 0.2 square that fits between two cross-sections 1 apart, margin 0
    sq = np.array([[10.4, -0.1], [10.6, -0.1], [10.6, 0.1], [10.4, 0.1], [10.4, -0.1]])
    x, y, rs, ps, zs, bbox, (rc, ce, cb) = pack([[[sq]]])
    cx = np.arange(0.0, 20.0, 1.0)
    ax, ay, bx, by = cx, np.full_like(cx, 5.0), cx, np.full_like(cx, -5.0)
    m = np.zeros(1)
    assert contact.first_contact(ax, ay, bx, by, x, y, ps, zs, bbox, rc, ce, cb, m, False)[0] == -1
    assert contact.first_contact(ax, ay, bx, by, x, y, ps, zs, bbox, rc, ce, cb, m, True)[0] == 11
    # and a zone far away costs nothing and reports -1; empty input gives -1 too
    far = sq + 1e4
    x, y, rs, ps, zs, bbox, (rc, ce, cb) = pack([[[sq]], [[far]]])
    got = contact.first_contact(ax, ay, bx, by, x, y, ps, zs, bbox, rc, ce, cb, np.zeros(2), True)
    assert got.tolist() == [11, -1]
    e = np.zeros(0)
    assert contact.first_contact(e, e, e, e, x, y, ps, zs, bbox, rc, ce, cb, np.zeros(2),
                            True).tolist() == [-1, -1]


def test_projected_first_contact_wrapper():
    zs = ZoneSet.from_file(DATA / "zones_fictional_valley.geojson")
    frame = LocalFrame.from_deg(40.3, -100.6)
    pz = zs.project(frame)
    # cross-sections 20 km wide marching east along 39.925 N through Brackenford's hole
    lon = np.radians(np.linspace(-101.6, -100.4, 121))
    cx, cy = frame.to_enu(np.full_like(lon, math.radians(39.925)), lon)
    got = pz.first_contact(cx, cy + 10e3, cx, cy - 10e3)
    # the town's west edge (-101.20) less its 8 km margin is first reached near
    # -101.294 deg (8 km at 39.9 N is 0.0937 deg of longitude, geographiclib below)
    g = GEOD.Direct(39.925, -101.20, 270.0, 8000.0)
    expected = int(np.ceil((g["lon2"] + 101.6) / 0.01 - 1e-9))
    assert got[0] == expected
    assert got[1] == -1 and got[2] == -1
    # overriding the margins: with none, first contact is at the edge itself
    got0 = pz.first_contact(cx, cy + 10e3, cx, cy - 10e3, margin_m=np.zeros(3))
    assert got0[0] == 40


def _sweep_agrees(ring: np.ndarray) -> bool:
    """The sweep kernel and its all-pairs twin agree on the ring; returns the verdict."""
    i, j = gr.ring_self_intersection(ring[:, 0].copy(), ring[:, 1].copy())
    ti, _ = ring_twins.ring_self_intersection_twin(ring[:, 0], ring[:, 1])
    assert (i < 0) == (ti < 0), ring.tolist()
    if i >= 0:  # the sweep may name another offending pair than the twin's first one
        assert i < j and ring_twins.edge_pair_bad_twin(ring[:, 0], ring[:, 1], i, j)
    return i < 0


def test_ring_self_intersection_vs_shapely():
    rng = np.random.default_rng(15)
    n_bad = 0
    for _ in range(400):
        n = int(rng.integers(3, 10))
        pts = rng.uniform(0, 10, size=(n, 2))
        ring = np.vstack([pts, pts[:1]])
        simple = _sweep_agrees(ring)
        assert simple == LinearRing(ring).is_simple  # GEOS simplicity of the ring
        n_bad += not simple
    assert n_bad > 50  # the sample really exercises both outcomes
    # fold-back spike and a figure-of-eight through a shared vertex (exact cases)
    spike = np.array([[0, 0], [4, 0], [4, 4], [4, 2], [0, 4], [0, 0]], float)
    eight = np.array([[0, 0], [2, 1], [4, 0], [4, 2], [2, 1], [0, 2], [0, 0]], float)
    square = np.array([[0, 0], [4, 0], [4, 4], [0, 4], [0, 0]], float)
    for ring, simple in ((spike, False), (eight, False), (square, True)):
        assert LinearRing(ring).is_simple == simple
        assert _sweep_agrees(ring) == simple


def test_ring_sweep_degenerate_rings_vs_twin_and_shapely():
    # Small integer grids make every degenerate case common: vertical and collinear
    # edges, touching at vertices, overlaps, repeated coordinates (exact arithmetic).
    rng = np.random.default_rng(7)
    verdicts = {True: 0, False: 0}
    for _ in range(3000):
        n = int(rng.integers(3, 12))
        pts = rng.integers(0, 4, size=(n, 2)).astype(float)
        keep = np.ones(n, dtype=bool)
        keep[1:] = np.any(pts[1:] != pts[:-1], axis=1)
        pts = pts[keep]
        if len(pts) > 1 and np.array_equal(pts[0], pts[-1]):
            pts = pts[:-1]
        if len(pts) < 3:
            continue
        ring = np.vstack([pts, pts[:1]])
        simple = _sweep_agrees(ring)
        verdicts[simple] += 1
        d = ring - ring[0]
        if not np.all(d[:, 0] * d[1, 1] - d[:, 1] * d[1, 0] == 0.0):  # GEOS wants area
            assert simple == LinearRing(ring).is_simple, ring.tolist()
    assert verdicts[True] > 100 and verdicts[False] > 1000


def comb_ring(teeth: int, angle_deg: float = 0.0, touch: bool = False) -> np.ndarray:
    """A comb: a spine along y with ``teeth`` long teeth along x, rotated by the angle;
    with ``touch`` the last tooth's tip is bent to touch the previous tooth."""
    pts = [[0.0, 0.0]]
    for k in range(teeth):
        y0 = 2.0 * k
        pts += [[100.0, y0], [100.0, y0 + 1.0], [1.0, y0 + 1.0], [1.0, y0 + 2.0]]
    pts[-1] = [0.0, 2.0 * teeth]
    if touch:
        pts[-3] = [100.0, 2.0 * teeth - 3.0]  # onto the previous tooth's upper edge
    a = np.radians(angle_deg)
    rot = np.array([[np.cos(a), -np.sin(a)], [np.sin(a), np.cos(a)]])
    ring = np.array(pts) @ rot.T
    return np.vstack([ring, ring[:1]])


@pytest.mark.parametrize("angle", [0.0, 90.0, 33.0])
def test_ring_sweep_comb_rings_vs_shapely(angle):
    # Combs in three orientations (a large one is what took the quadratic test 17.6 s;
    # its speed is measured by the bench, not here): simple, and with one touch.
    for touch in (False, True):
        ring = comb_ring(300, angle, touch)
        assert _sweep_agrees(ring) == LinearRing(ring).is_simple == (not touch)


def test_zone_file_roundtrip_through_json(tmp_path):
    # what a user would do: write a file, read it back
    path = tmp_path / "zones_user.geojson"
    path.write_text(json.dumps(_doc()))
    zs = ZoneSet.from_file(path)
    assert zs.source == str(path) and [z.id for z in zs] == ["alpha", "bravo"]
    assert zs[0].vertex_count == 4


@pytest.mark.parametrize("chunk_size", [1, 3, 8, 50])
def test_edge_chunks_kernel_matches_its_twin(chunk_size) -> None:
    # Project rule: every kernel has a readable numpy twin (tests/twins/contact.py); the
    # chunks and their boxes must be the same exactly (min / max are exact operations).
    rng = np.random.default_rng(7)
    sizes = [4, 5, 17, 100, 3]  # closed rings (last vertex = first), one degenerate
    x = rng.normal(size=sum(sizes)) * 1e4
    y = rng.normal(size=sum(sizes)) * 1e4
    rs = np.concatenate([[0], np.cumsum(sizes)]).astype(np.int64)
    got = contact.build_edge_chunks(x, y, rs, chunk_size)
    want = edge_chunks_twin(x, y, rs, chunk_size)
    for g, w in zip(got, want, strict=True):
        np.testing.assert_array_equal(g, w)
