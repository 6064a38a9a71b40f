"""The benchmark's invented workload: a level cruise at Mach 1.6 over open sea, twenty
invented no-boom zones, a recorded 20 Hz feed of it, and the tiny ``--quick`` grid.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from advisory import units
from advisory.geo.geodesy import direct_deg
from advisory.physics.atmosphere import standard_atmosphere
from advisory.pipeline.advisor import Advisor
from advisory.pipeline.config import AdvisorConfig
from advisory.pipeline.zones import ZoneSet
from advisory.tables.grid import DEFAULT_N_ETA, TableGrid
from advisory.tables.table import BoomTable

#: The bench scenario: level flight east at Mach 1.6, 50,000 ft, over open sea at an
#: invented spot; the zones are invented too.
START_LAT_DEG = 30.0
START_LON_DEG = -40.0
CRUISE_ALT_FT = 50000.0
CRUISE_MACH = 1.6
CRUISE_HEADING_DEG = 90.0
FRAME_RATE_HZ = 20.0
N_ZONES = 20
VERTICES_PER_ZONE = 100


def cruise_ground_speed_kt() -> float:
    """Ground speed of the bench cruise in still standard air, kt."""
    c = standard_atmosphere().at(units.ft_to_m(CRUISE_ALT_FT)).sound_speed_mps
    return units.mps_to_kt(CRUISE_MACH * c)


def cruise_fields(t_s: float, gs_kt: float) -> dict[str, float]:
    """Wire-named air-data fields of the bench cruise ``t_s`` seconds after the start."""
    p = direct_deg(START_LAT_DEG, START_LON_DEG, CRUISE_HEADING_DEG,
                   units.kt_to_mps(gs_kt) * t_s)
    return {
        "lat_deg": float(p.lat_deg), "lon_deg": float(p.lon_deg), "alt_ft": CRUISE_ALT_FT,
        "mach": CRUISE_MACH, "heading_deg": CRUISE_HEADING_DEG, "gs_kt": gs_kt,
        "bank_deg": 0.0, "fpa_deg": 0.0, "track_deg": CRUISE_HEADING_DEG,
        "mach_rate_per_s": 0.0, "sat_c": -56.5,
    }


def bench_zones(seed: int = 8) -> dict[str, Any]:
    """Twenty invented no-boom zones (GeoJSON), 100 vertices each, 2,000 in all.

    Six lie on or beside the track 90-190 km ahead (inside the look-ahead, so the advisor
    finds a conflict and searches for a resolution); fourteen are scattered within
    250 km. Each is a star-shaped (hence simple) polygon of radius 3-9 km.
    """
    rng = np.random.default_rng(seed)
    features = []
    for k in range(N_ZONES):
        if k < 6:
            ahead_m = 90e3 + 20e3 * k  # far enough that no boom already in the air
            # reaches them during the measured steps: the turn search runs every step
            cross_m = rng.uniform(-15e3, 15e3)
        else:
            ahead_m = rng.uniform(-100e3, 250e3)
            cross_m = rng.uniform(-150e3, 150e3)
        dist = math.hypot(ahead_m, cross_m)
        bearing = (CRUISE_HEADING_DEG + math.degrees(math.atan2(cross_m, ahead_m))) % 360.0
        c = direct_deg(START_LAT_DEG, START_LON_DEG, bearing, dist)
        radius = rng.uniform(3e3, 9e3)
        ang = np.sort(rng.uniform(0.0, 360.0, VERTICES_PER_ZONE))
        ang += np.arange(VERTICES_PER_ZONE) * 1e-6  # strictly increasing
        lobes = 1.0 + 0.25 * np.sin(np.radians(3.0 * ang + rng.uniform(0, 360)))
        r = radius * lobes * rng.uniform(0.9, 1.1, VERTICES_PER_ZONE)
        pts = direct_deg(np.full(VERTICES_PER_ZONE, float(c.lat_deg)),
                         np.full(VERTICES_PER_ZONE, float(c.lon_deg)), ang, r)
        ring = [[float(lo), float(la)]
                for lo, la in zip(np.asarray(pts.lon_deg), np.asarray(pts.lat_deg))]
        ring.append(ring[0])
        features.append({
            "type": "Feature",
            "properties": {"id": f"bench-zone-{k:02d}", "name": f"Bench zone {k:02d}",
                           "limit_psf": 0.0 if k % 2 == 0 else 1.0, "margin_km": 2.0},
            "geometry": {"type": "Polygon", "coordinates": [ring]},
        })
    return {"type": "FeatureCollection", "features": features}


def make_advisor(table: BoomTable, zones: ZoneSet, reuse: bool = False) -> Advisor:
    """``Advisor(table, zones)``, predicting and searching resolutions on every step (the
    budget's case); ``reuse``: the default configuration.

    The default configuration reuses the last prediction for up to ``predict_every_s``
    (1 s) of steady flight (:mod:`advisory.pipeline.reuse`) and searches again only after
    ``refresh_s`` (1 s) unless the conflict changes; the budget is for a step *including*
    the prediction and the search, so it is measured with both on every step.
    """
    if reuse:
        return Advisor(table, zones)
    return Advisor(table, zones, config=AdvisorConfig(refresh_s=0.0, predict_every_s=0.0))


def quick_grid() -> TableGrid:
    """A tiny grid for ``--quick``: three altitudes, five Mach excesses, level flight."""
    return TableGrid(
        altitudes_m=tuple(units.ft_to_m(a) for a in (45000.0, 50000.0, 55000.0)),
        mach_excess=(0.05, 0.2, 0.6, 1.2, 2.0),
        fpa_rad=(0.0,),
        n_eta=DEFAULT_N_ETA,
    )
