"""Zones by the ground they stand on: which table judges each zone.

A zone file gives each zone's ``ground_elevation_ft`` (absent: unknown). The advisor
judges a zone with the table traced to that zone's ground (:mod:`advisory.tables.levels`):
zones at or below the table's own ground elevation, or of unknown elevation, with the
table itself; higher zones with a table per *ground level*, their elevation rounded up
to the next :data:`LEVEL_STEP_FT`. Rounding up errs toward a boom: higher ground is
reached at a lower Mach (the cutoff Mach falls about 0.002 per 500 ft of ground near
5,000 ft in the standard atmosphere), and the carpet's position changes by the last few
hundred feet of each ray's descent.

Every level sees the same projection of the whole zone set (one frame, so the resolution
trials of one level can be judged against the zones of another), through a *masked view*
in which the zones of the other levels have an empty bounding box and so are never
touched (:func:`masked_zones`).
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from advisory import units
from advisory.pipeline.zones import ProjectedZones, ZoneSet

#: Ground levels are this far apart, ft (engineering choice; see the module notes).
LEVEL_STEP_FT = 500.0


def ground_level_m(elevation_m: float | None, base_m: float) -> float:
    """The ground level (m) whose table judges a zone at ``elevation_m`` (None: unknown),
    for a table traced to ``base_m``."""
    if elevation_m is None or not math.isfinite(elevation_m) or elevation_m <= base_m:
        return base_m
    step = units.ft_to_m(LEVEL_STEP_FT)
    level = math.ceil(elevation_m / step - 1e-9) * step
    return max(level, base_m)


def zone_levels(zones: ZoneSet, base_m: float) -> dict[float, np.ndarray]:
    """Ground level (m) -> bool mask over ``zones`` of the zones it judges; the base level
    (``base_m``) first, present even when it judges no zone."""
    levels = [ground_level_m(z.ground_elevation_m, base_m) for z in zones]
    out: dict[float, np.ndarray] = {base_m: np.array([lv == base_m for lv in levels],
                                                      dtype=bool)}
    for lv in sorted(set(levels) - {base_m}):
        out[lv] = np.array([x == lv for x in levels], dtype=bool)
    return out


def masked_zones(pz: ProjectedZones, mask: np.ndarray) -> ProjectedZones:
    """``pz`` with the zones outside ``mask`` made untouchable: their bounding box is
    empty (``+inf`` minimum, ``-inf`` maximum), which every contact test of
    :mod:`advisory.geo.contact` checks first."""
    bbox = pz.zone_bbox.copy()
    bbox[~mask] = (math.inf, math.inf, -math.inf, -math.inf)
    return replace(pz, zone_bbox=bbox)


__all__ = ["LEVEL_STEP_FT", "ground_level_m", "masked_zones", "zone_levels"]
