"""A large zone set is re-projected a slice per step, never in one stalling step.

Checks: the sliced projection is the one-go projection exactly (the same element-wise
geodesic kernel over the same vertices); the advisor starts a large set's next
projection at half the re-projection distance and finishes it within the distance; a
small set is re-projected as before. Distances checked with geographiclib (Karney 2013).
"""

from __future__ import annotations

import math

import numpy as np
from geographiclib.geodesic import Geodesic

from advisory.geo.frame import LocalFrame
from advisory.pipeline.advisor import Advisor
from advisory.pipeline.zone_projection import SYNC_VERTICES, ZoneProjector, vertex_count
from advisory.pipeline.zones import ZoneSet

LAT0, LON0 = 35.0, -120.0


def wavy_zone(zone_id: str, lat: float, lon: float, n: int) -> dict:
    """A star-shaped (simple) ring of ``n`` vertices, about 5 km across."""
    a = np.linspace(0.0, 2.0 * math.pi, n, endpoint=False)
    r = 0.025 * (1.0 + 0.05 * np.sin(40.0 * a))
    ring = [[float(lon + r_ * math.cos(t)), float(lat + r_ * math.sin(t))]
            for r_, t in zip(r, a, strict=True)]
    ring.append(ring[0])
    return {"type": "Feature", "properties": {"id": zone_id, "limit_psf": 0.0},
            "geometry": {"type": "Polygon", "coordinates": [ring]}}


def zone_set(n_per_zone: int, count: int = 3) -> ZoneSet:
    feats = [wavy_zone(f"z{k}", LAT0 + 0.2 * k, LON0 + 3.0, n_per_zone) for k in range(count)]
    return ZoneSet.from_geojson({"type": "FeatureCollection", "features": feats})


class CountingZoneSet(ZoneSet):
    """A zone set that counts its one-go projections."""

    calls: list = []  # noqa: RUF012 - a test's own counter

    def project(self, frame, max_edge_deg=0.1):  # type: ignore[override]
        CountingZoneSet.calls.append((frame.lat0_rad, frame.lon0_rad))
        return super().project(frame, max_edge_deg)


def same_projection(a, b) -> None:
    for name in ("x", "y", "ring_start", "part_start", "zone_start", "zone_bbox",
                 "ring_chunk", "chunk_edges", "chunk_bbox"):
        np.testing.assert_array_equal(getattr(a, name), getattr(b, name), err_msg=name)


def test_sliced_projection_is_the_one_go_projection() -> None:
    zs = zone_set(4001)
    frame = LocalFrame.from_deg(LAT0 + 0.3, LON0 + 1.0)
    sliced = ZoneProjector(zs, frame, slice_vertices=997)
    steps = 0
    while (out := sliced.advance()) is None:
        steps += 1
    assert steps == math.ceil(sliced.total / 997)  # the slices, then the assembly
    same_projection(out, zs.project(frame))


def fly_east(adv: Advisor, km: float, step_km: float = 1.0):
    """Call the advisor's zone projection along a parallel, one call per ``step_km``;
    yields (position, origin) after each call."""
    geod = Geodesic.WGS84
    for i in range(int(km / step_km) + 1):
        p = geod.Direct(LAT0, LON0, 90.0, i * step_km * 1e3)
        lat, lon = math.radians(p["lat2"]), math.radians(p["lon2"])
        adv._zones_for(lat, lon)
        yield (lat, lon), adv._frame_origin


def test_large_zone_set_is_reprojected_a_slice_per_step(small_table) -> None:
    n = SYNC_VERTICES // 2 + 1  # three zones: above the one-step limit
    zs = CountingZoneSet(zone_set(n).zones, "large")
    assert vertex_count(zs) > SYNC_VERTICES
    CountingZoneSet.calls = []
    adv = Advisor(small_table, zs)
    limit_km = adv.config.reproject_km
    origins = []
    for (lat, lon), origin in fly_east(adv, 3.2 * limit_km):
        d = Geodesic.WGS84.Inverse(*map(math.degrees, origin), math.degrees(lat),
                                   math.degrees(lon))["s12"] / 1e3
        assert d < limit_km * 1.01  # never used past the re-projection distance
        if not origins or origin != origins[-1]:
            origins.append(origin)
    assert len(CountingZoneSet.calls) == 1  # only the first projection in one go
    assert len(origins) >= 4
    for a, b in zip(origins, origins[1:]):  # each new origin about half the distance on
        d = Geodesic.WGS84.Inverse(*map(math.degrees, a), *map(math.degrees, b))["s12"]
        assert 0.45 * limit_km < d / 1e3 < 0.6 * limit_km
    # what the advisor uses is exactly the one-go projection about the new origin
    same_projection(adv._projected, ZoneSet.project(zs, LocalFrame(*adv._frame_origin)))


def test_small_zone_set_is_reprojected_at_the_distance_as_before(small_table) -> None:
    zs = CountingZoneSet(zone_set(200).zones, "small")
    CountingZoneSet.calls = []
    adv = Advisor(small_table, zs)
    limit_km = adv.config.reproject_km
    list(fly_east(adv, 2.5 * limit_km))
    assert len(CountingZoneSet.calls) == 3  # start, then at 1x and 2x the distance
    lon1 = math.degrees(CountingZoneSet.calls[1][1])
    d = Geodesic.WGS84.Inverse(LAT0, LON0, LAT0, lon1)["s12"] / 1e3
    assert limit_km <= d < limit_km + 1.5
