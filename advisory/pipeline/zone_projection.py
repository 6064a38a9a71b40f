"""Re-projecting a large zone set without stalling the live step.

The advisor projects the zones into a local frame about a nearby origin and projects them
again about the aircraft when it has flown ``reproject_km`` from that origin
(:meth:`advisory.pipeline.advisor.Advisor`). A zone set of many vertices takes long to
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

import numpy as np

from advisory.geo.frame import LocalFrame
from advisory.pipeline.zones import ProjectedZones, ZoneSet, project_vertices

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


def vertex_count(zones: ZoneSet) -> int:
    """Vertices of the zone set as read (before densifying), summed over every ring."""
    return sum(len(ring) for z in zones for part in z.polygons for ring in part)


__all__ = ["EARLY_FRACTION", "SLICE_VERTICES", "SYNC_VERTICES", "ZoneProjector",
           "vertex_count"]
