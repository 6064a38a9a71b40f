"""Re-projecting a large zone set without stalling the live step.

The advisor projects the zones into a local frame about a nearby origin and projects them
again about the aircraft when it has flown ``reproject_km`` from that origin
(:class:`ZoneFrames`). A zone set of many vertices takes long to
project (10 zones of 100,000 vertices: about half a second, the geodesic inverse of every
vertex), far more than one step. For such a set the advisor starts the next projection
early, at half the re-projection distance, about the aircraft's position then, and
:class:`ZoneProjector` does it a bounded slice of vertices per step; the new frame is
taken the step the last slice is done. Nothing depends on the wall clock, so a replay
re-projects at the same steps and gives the same bytes. A small set (at most
:data:`SYNC_VERTICES`) is projected in one go at the re-projection distance, as before.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import math

import numpy as np

from advisory.geo.frame import LocalFrame
from advisory.pipeline.zones import ProjectedZones, ZoneSet, project_vertices
from advisory.schema import EARTH_MEAN_RADIUS_M

#: Zone sets with at most this many vertices are projected in one step (a few ms).
SYNC_VERTICES = 20_000
#: Vertices projected per step by :class:`ZoneProjector` (about 5 ms on the project's
#: machine; engineering choice: well inside a 100-ms step).
SLICE_VERTICES = 10_000
#: Fraction of the re-projection distance at which a large set's next projection starts.
EARLY_FRACTION = 0.5


class ZoneProjector:
    """One projection of ``zones`` into ``frame``, a slice of vertices at a time.

    Parameters
    ----------
    zones : ZoneSet
    frame : LocalFrame
        The new frame (about the aircraft's position when the projection started).
    slice_vertices : int
        Vertices projected per :meth:`advance` (>= 1).
    """

    def __init__(self, zones: ZoneSet, frame: LocalFrame,
                 slice_vertices: int = SLICE_VERTICES) -> None:
        if slice_vertices < 1:
            raise ValueError(f"slice_vertices: {slice_vertices} must be >= 1")
        self.zones = zones
        self.frame = frame
        self.slice = int(slice_vertices)
        self.layout = zones.layout()
        n = self.layout.lonlat.shape[0]
        self.x = np.empty(n)
        self.y = np.empty(n)
        self.done = 0

    @property
    def total(self) -> int:
        """Vertices to project."""
        return int(self.layout.lonlat.shape[0])

    def advance(self) -> ProjectedZones | None:
        """Project the next slice; once every vertex is projected, the next call builds
        and returns the projected zones (boxes and edge chunks: a step of its own)."""
        a = self.done
        if a < self.total:
            b = min(a + self.slice, self.total)
            self.x[a:b], self.y[a:b] = project_vertices(self.layout.lonlat[a:b], self.frame)
            self.done = b
            return None
        return self.zones.assemble(self.layout, self.frame, self.x, self.y)

    def finish(self) -> ProjectedZones:
        """Project every remaining slice now."""
        while True:
            out = self.advance()
            if out is not None:
                return out


class ZoneFrames:
    """The zones projected about a nearby origin, re-projected past ``reproject_km``.

    A large zone set's next projection starts at :data:`EARLY_FRACTION` of that distance
    and goes a slice per step (:class:`ZoneProjector`), so no step stalls. The distance
    test is a haversine on the mean Earth radius (good to 0.5 %, plenty for a
    re-projection threshold); geodesics proper are for the projection itself.

    Attributes
    ----------
    projected : ProjectedZones or None
        The projection in use.
    origin : (lat_rad, lon_rad) or None
        Its frame's origin.
    """

    def __init__(self, zones: ZoneSet, reproject_km: float) -> None:
        self.zones = zones
        self.limit_m = reproject_km * 1e3
        self.projected: ProjectedZones | None = None
        self.origin: tuple[float, float] | None = None
        self._projector: ZoneProjector | None = None
        self._projector_origin: tuple[float, float] = (0.0, 0.0)
        self._large = vertex_count(zones) > SYNC_VERTICES

    def about(self, lat: float, lon: float) -> ProjectedZones:
        """The projection for an aircraft at (``lat``, ``lon``), rad."""
        limit_m = self.limit_m
        if self.origin is not None and self.projected is not None:
            d = _haversine_m(self.origin, lat, lon)
            if d < limit_m:
                if self._large:
                    self._project_ahead(lat, lon, d >= EARLY_FRACTION * limit_m)
                return self.projected
            if self._projector is not None:  # not done in time: finish it now
                self._take(self._projector.finish())
                if _haversine_m(self.origin, lat, lon) < limit_m:
                    return self.projected
        self._projector = None
        self.projected = self.zones.project(LocalFrame(lat, lon))
        self.origin = (lat, lon)
        return self.projected

    def _project_ahead(self, lat: float, lon: float, start: bool) -> None:
        """Start (when ``start``) or continue a large set's next projection."""
        if self._projector is None:
            if not start:
                return
            self._projector = ZoneProjector(self.zones, LocalFrame(lat, lon))
            self._projector_origin = (lat, lon)
        done = self._projector.advance()
        if done is not None:
            self._take(done)

    def _take(self, projected: ProjectedZones) -> None:
        self.projected = projected
        self.origin = self._projector_origin
        self._projector = None


def _haversine_m(origin: tuple[float, float], lat: float, lon: float) -> float:
    """Great-circle distance (mean Earth radius) from ``origin`` (rad) to a point, m."""
    lat0, lon0 = origin
    h = (math.sin(0.5 * (lat - lat0)) ** 2
         + math.cos(lat0) * math.cos(lat) * math.sin(0.5 * (lon - lon0)) ** 2)
    return 2.0 * EARTH_MEAN_RADIUS_M * math.asin(min(1.0, math.sqrt(h)))


def vertex_count(zones: ZoneSet) -> int:
    """Vertices of the zone set as read (before densifying), summed over every ring."""
    return sum(len(ring) for z in zones for part in z.polygons for ring in part)


__all__ = ["EARLY_FRACTION", "SLICE_VERTICES", "SYNC_VERTICES", "ZoneFrames",
           "ZoneProjector", "vertex_count"]
