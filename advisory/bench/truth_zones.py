"""Protected zones for the truth tracer: which boom events land in a zone or its margin.

Kept apart from :mod:`advisory.bench.truth` (one job each) and independent of the
advisor's zone code (:mod:`advisory.pipeline.zones`), which the truth checks. Plain numpy:
the crossing-number point-in-polygon test and the clamped point-to-segment distance
(*Computational Geometry in C*, 2nd ed., Cambridge University Press, 1998, ch. 7; common
practice).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np


class ZoneInputError(ValueError):
    """A zone that cannot be used; the message names the field and value."""


@dataclass(frozen=True)
class TruthZone:
    """A protected zone in the path's local frame.

    Attributes
    ----------
    zone_id : str
    rings : tuple of ndarray, each shape (N, 2)
        East/north vertices, m: the exterior first, then holes (closed or not).
    limit_psf : float
        Largest acceptable overpressure, psf (0: no boom at all).
    margin_m : float
        Distance around the zone that counts as the zone, m.
    ground_elevation_m : float
        Ground elevation of the zone, m above mean sea level.
    """

    zone_id: str
    rings: tuple[np.ndarray, ...]
    limit_psf: float
    margin_m: float = 0.0
    ground_elevation_m: float = 0.0

    def __post_init__(self) -> None:
        rings = tuple(np.asarray(r, dtype=np.float64).reshape(-1, 2) for r in self.rings)
        if not rings or any(r.shape[0] < 3 for r in rings):
            raise ZoneInputError(f"rings: zone {self.zone_id!r} needs rings of >= 3 vertices")
        object.__setattr__(self, "rings", rings)
        for name in ("limit_psf", "margin_m", "ground_elevation_m"):
            v = float(getattr(self, name))
            if not math.isfinite(v) or (name != "ground_elevation_m" and v < 0.0):
                raise ZoneInputError(f"{name}: {v} is not valid for zone {self.zone_id!r}")

    def covers(self, east: np.ndarray, north: np.ndarray) -> np.ndarray:
        """Points inside the zone (even-odd over all rings) or within ``margin_m`` of it.

        Crossing-number test and clamped point-to-segment distance (*Computational
        Geometry in C*, 2nd ed., 1998, ch. 7; common practice).
        """
        ex = np.asarray(east, dtype=np.float64).ravel()
        ny = np.asarray(north, dtype=np.float64).ravel()
        out = np.zeros(ex.shape[0], dtype=bool)
        # Only points in the zone's bounding box grown by the margin can be covered: an
        # exact pre-filter (most boom events of a flight land far from a given zone).
        allv = np.concatenate(self.rings)
        lo, hi = allv.min(axis=0) - self.margin_m, allv.max(axis=0) + self.margin_m
        cand = np.flatnonzero((ex >= lo[0]) & (ex <= hi[0]) & (ny >= lo[1]) & (ny <= hi[1]))
        if cand.size:
            out[cand] = self._covers_all(ex[cand], ny[cand])
        return out

    def _covers_all(self, east: np.ndarray, north: np.ndarray) -> np.ndarray:
        """:meth:`covers` without the pre-filter (every point tested against every edge)."""
        px = east[:, None]
        py = north[:, None]
        inside = np.zeros(px.shape[0], dtype=bool)
        near = np.zeros(px.shape[0], dtype=bool)
        for ring in self.rings:
            ax, ay = ring[:, 0][None, :], ring[:, 1][None, :]
            bx, by = np.roll(ring[:, 0], -1)[None, :], np.roll(ring[:, 1], -1)[None, :]
            crosses = (ay > py) != (by > py)
            with np.errstate(divide="ignore", invalid="ignore"):
                x_at = ax + (py - ay) * (bx - ax) / (by - ay)
            inside ^= (np.count_nonzero(crosses & (px < x_at), axis=1) % 2) == 1
            if self.margin_m > 0.0:
                dx, dy = bx - ax, by - ay
                len2 = np.maximum(dx * dx + dy * dy, 1e-300)
                u = np.clip(((px - ax) * dx + (py - ay) * dy) / len2, 0.0, 1.0)
                d2 = (ax + u * dx - px) ** 2 + (ay + u * dy - py) ** 2
                near |= np.min(d2, axis=1) <= self.margin_m**2
        return inside | near


@dataclass(frozen=True)
class ZoneExposure:
    """What reaches one zone.

    Attributes
    ----------
    zone_id : str
    booms : int
        Rays landing in the zone or its margin.
    first_arrival_s : float
        Earliest arrival among them, s (NaN when none).
    peak_psf : float
        Largest overpressure among them, psf (0 when none).
    exceeds_limit : bool
        ``peak_psf`` above the zone's ``limit_psf`` (inside the zone plus its margin).
    focus : bool
        A focus boom is among them.
    """

    zone_id: str
    booms: int
    first_arrival_s: float
    peak_psf: float
    exceeds_limit: bool
    focus: bool

    def as_json(self) -> dict[str, object]:
        """Plain JSON-ready fields (``first_arrival_s`` None when no boom arrives)."""
        first = self.first_arrival_s if math.isfinite(self.first_arrival_s) else None
        return {"zone_id": self.zone_id, "first_arrival_s": first, "peak_psf": self.peak_psf,
                "exceeds_limit": self.exceeds_limit, "booms": self.booms, "focus": self.focus}


def zone_exposure(zone: TruthZone, east_m: np.ndarray, north_m: np.ndarray,
                  arrival_s: np.ndarray, overpressure_psf: np.ndarray, focus: np.ndarray
                  ) -> ZoneExposure:
    """Exposure of ``zone`` to boom events (arrays of equal length, traced to the zone's
    ground elevation): position (m, local frame), arrival (s), overpressure (psf), focus."""
    hit = zone.covers(east_m, north_m) if np.size(east_m) else np.zeros(0, dtype=bool)
    if not np.any(hit):
        return ZoneExposure(zone.zone_id, 0, math.nan, 0.0, False, False)
    peak = float(np.max(overpressure_psf[hit]))
    return ZoneExposure(zone.zone_id, int(np.count_nonzero(hit)),
                        float(np.min(arrival_s[hit])), peak, peak > zone.limit_psf,
                        bool(np.any(focus[hit])))
