"""Benchmark figures for a large zone set: the advisor step while the zones are
re-projected, beside the same set projected in one go (issue 15: 10 zones of 100k
vertices stalled each re-projection for 1.1 s).

The advisor projects its zones about a nearby origin and projects them again once the
aircraft has flown ``reproject_km`` from it; a set over
:data:`advisory.pipeline.zone_projection.SYNC_VERTICES` vertices is projected a slice per
step instead of in one call. Here the bench cruise flies past several re-projections
(``reproject_km`` shortened to 10 km so that a few happen within a minute of flight) with
ten star-shaped zones of 100,000 vertices each beside the track (no conflict: the figure is
the projection's cost, not the resolution search's), and the worst and 99th-percentile
steps are printed beside the time of one whole projection of the same set in the same run.
Informational figures; the advisor-step budgets (median < 2 ms, p99 < 5 ms) are the bar.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import math
import time
from typing import Any

import numpy as np

from advisory.bench.context import Context, median, percentile
from advisory.bench.workload import (
    CRUISE_HEADING_DEG,
    FRAME_RATE_HZ,
    START_LAT_DEG,
    START_LON_DEG,
    cruise_fields,
    cruise_ground_speed_kt,
)
from advisory.geo.frame import LocalFrame
from advisory.geo.geodesy import direct_deg
from advisory.pipeline.advisor import Advisor
from advisory.pipeline.config import AdvisorConfig
from advisory.pipeline.state import AirDataState
from advisory.pipeline.zones import ZoneSet
from advisory.tables.table import BoomTable

#: Re-projection distance of this run, km (the default is 150 km).
REPROJECT_KM = 10.0


def big_zones(count: int, vertices: int) -> ZoneSet:
    """``count`` star-shaped zones of ``vertices`` vertices, 5 km across, 150 km to the
    right of the bench track (beyond the carpet) along its first 100 km (invented)."""
    features: list[dict[str, Any]] = []
    a = np.linspace(0.0, 2.0 * math.pi, vertices, endpoint=False)
    for k in range(count):
        c = direct_deg(START_LAT_DEG, START_LON_DEG, CRUISE_HEADING_DEG, 10e3 * k)
        c = direct_deg(float(c.lat_deg), float(c.lon_deg), CRUISE_HEADING_DEG + 90.0, 150e3)
        r = 0.025 * (1.0 + 0.05 * np.sin(40.0 * a))
        lon = float(c.lon_deg) + r * np.cos(a) / math.cos(math.radians(float(c.lat_deg)))
        lat = float(c.lat_deg) + r * np.sin(a)
        ring = np.column_stack([lon, lat]).tolist()
        ring.append(ring[0])
        features.append({"type": "Feature",
                         "properties": {"id": f"large-{k:02d}", "limit_psf": 0.0},
                         "geometry": {"type": "Polygon", "coordinates": [ring]}})
    return ZoneSet.from_geojson({"type": "FeatureCollection", "features": features})


def reprojection_figures(ctx: Context, table: BoomTable) -> None:
    """Add the large-zone-set figures to the report (see the module notes)."""
    count, vertices, seconds = (3, 8_000, 20.0) if ctx.quick else (10, 100_000, 60.0)
    ctx.progress(f"large zone set: {count} zones x {vertices:,} vertices")
    zones = big_zones(count, vertices)
    t0 = time.perf_counter()
    zones.project(LocalFrame.from_deg(START_LAT_DEG, START_LON_DEG))
    one_go_ms = (time.perf_counter() - t0) * 1e3
    advisor = Advisor(table, zones, config=AdvisorConfig(reproject_km=REPROJECT_KM,
                                                         predict_every_s=0.0))
    gs = cruise_ground_speed_kt()
    times: list[float] = []
    origins = set()
    for i in range(int(seconds * FRAME_RATE_HZ)):
        st = AirDataState.from_fields(cruise_fields(i / FRAME_RATE_HZ, gs),
                                      utc_s=time.time(), rx_monotonic=time.monotonic())
        t0 = time.perf_counter()
        advisor.step(st)
        times.append(time.perf_counter() - t0)
        origins.add(advisor._frame_origin)  # noqa: SLF001 - counting re-projections
    steady = times[1:]  # the first step projects the set in one go (nothing to show yet)
    note = (f"{count} zones x {vertices:,} vertices beside the bench cruise, "
            f"{len(steady)} steps at 20 Hz, re-projection every {REPROJECT_KM:g} km: "
            f"{len(origins) - 1} re-projections, step median "
            f"{median(steady) * 1e3:.2f} ms; the advisor-step budgets apply")
    r = ctx.report
    r.add_info("reproject_worst_ms", "advisor step, worst, large zone set re-projecting",
               max(steady) * 1e3, "ms", note)
    r.add_info("reproject_p99_ms", "advisor step, p99, large zone set re-projecting",
               percentile(steady, 99.0) * 1e3, "ms")
    r.add_info("reproject_one_go_ms", "the same set projected in one go", one_go_ms, "ms",
               "what a step would stall for without the sliced projection")
