"""No-boom zones: the zone set of one file, projected into a local frame for the kernels.

Zone files (GeoJSON, RFC 7946) are read and checked by :mod:`advisory.pipeline.zone_file`;
:class:`ZoneSet` holds their :class:`~advisory.pipeline.zone_file.Zone` records and
projects them once per frame into the flat arrays of :mod:`advisory.geo.polygons`
(:class:`ProjectedZones`), densifying long edges so the plane polygons follow the
straight longitude/latitude edges RFC 7946 (sec. 3.1.1) defines. All values are SI
inside: Pa, m, rad.
"""

from __future__ import annotations

import math
from collections.abc import Iterator
from dataclasses import dataclass
from functools import cached_property
from pathlib import Path
from typing import Any

import numpy as np

from advisory.geo import contact
from advisory.geo import polygons as gk
from advisory.geo.frame import LocalFrame
from advisory.pipeline.zone_file import Zone, ZoneFileError, read_geojson, zones_from_geojson

__all__ = [
    "DEFAULT_MAX_EDGE_DEG",
    "Zone",
    "ZoneFileError",
    "ZoneSet",
    "ProjectedZones",
]

#: Longest edge, in degrees of longitude or latitude, kept as one straight plane edge
#: by :meth:`ZoneSet.project` (about 1 m of sag at 60 deg latitude).
DEFAULT_MAX_EDGE_DEG = 0.1

@dataclass(frozen=True, eq=False)
class ProjectedZones:
    """A zone set projected into one :class:`~advisory.geo.frame.LocalFrame`.

    The flat arrays follow the layout of :mod:`advisory.geo.polygons` and can be
    passed to its kernels directly; the methods below are thin wrappers.

    Attributes
    ----------
    frame : LocalFrame
        The plane they were projected into.
    ids : tuple of str
        Zone ids, in zone order.
    x, y : ndarray
        float64 (V,) vertex coordinates, m (rings closed).
    ring_start, part_start, zone_start : ndarray
        int64 offsets (see :mod:`advisory.geo.polygons`).
    zone_bbox : ndarray
        float64 (Z, 4) ``xmin, ymin, xmax, ymax`` per zone, m.
    margin_m, limit_pa : ndarray
        float64 (Z,) per zone, m and Pa.
    ground_elevation_m : ndarray
        float64 (Z,) per zone, m; NaN where not given.
    extent_m : float
        Largest distance of any vertex from the frame origin, m (0 for no zones);
        reproject about a nearer origin when this grows past a few hundred km.
    ring_chunk, chunk_edges, chunk_bbox : ndarray
        Edge chunks for :func:`advisory.geo.contact.first_contact`.
    """

    frame: LocalFrame
    ids: tuple[str, ...]
    x: np.ndarray
    y: np.ndarray
    ring_start: np.ndarray
    part_start: np.ndarray
    zone_start: np.ndarray
    zone_bbox: np.ndarray
    margin_m: np.ndarray
    limit_pa: np.ndarray
    ground_elevation_m: np.ndarray
    extent_m: float
    ring_chunk: np.ndarray
    chunk_edges: np.ndarray
    chunk_bbox: np.ndarray

    def __len__(self) -> int:
        return len(self.ids)

    def first_contact(self, ax, ay, bx, by, *, swept: bool = True,
                      margin_m: np.ndarray | None = None) -> np.ndarray:
        """Index of the first time-ordered segment to touch each zone (-1 for none).

        See :func:`advisory.geo.contact.first_contact`.

        Parameters
        ----------
        ax, ay, bx, by : array_like
            (S,) segment ends in this frame, m, in time order.
        swept : bool
            Also count the band between consecutive segments (default True).
        margin_m : ndarray, optional
            (Z,) contact distances overriding the zones' own margins, m.

        Returns
        -------
        ndarray
            int64 (Z,).
        """
        m = self.margin_m if margin_m is None else np.ascontiguousarray(margin_m, np.float64)
        return contact.first_contact(*_f64(ax, ay, bx, by), self.x, self.y, self.part_start,
                                self.zone_start, self.zone_bbox, self.ring_chunk,
                                self.chunk_edges, self.chunk_bbox, m, bool(swept))

    def contains(self, k: int, px, py) -> np.ndarray:
        """Whether points (frame coordinates, m) are inside zone ``k``; bool array."""
        px, py = _f64(np.atleast_1d(px), np.atleast_1d(py))
        return gk.points_in_zone(px, py, self.x, self.y, self.ring_start, self.part_start,
                                 self.zone_start, int(k))

    def segment_distance(self, k: int, ax: float, ay: float, bx: float, by: float
                         ) -> tuple[float, float]:
        """Distance (m) from segment ab to zone ``k`` and where along ab (0..1) it is
        closest; see :func:`advisory.geo.polygons.segment_zone_distance`."""
        return gk.segment_zone_distance(float(ax), float(ay), float(bx), float(by), self.x,
                                        self.y, self.ring_start, self.part_start,
                                        self.zone_start, int(k))


def _f64(*arrays) -> list[np.ndarray]:
    return [np.ascontiguousarray(a, dtype=np.float64).reshape(-1) for a in arrays]


@dataclass(frozen=True, eq=False)
class ZoneSet:
    """The no-boom zones of one zone file.

    Attributes
    ----------
    zones : tuple of Zone
        In file order.
    source : str
        Where they came from (file name or description).
    """

    zones: tuple[Zone, ...]
    source: str = "<geojson>"

    @classmethod
    def from_file(cls, path: str | Path) -> ZoneSet:
        """Read and check a GeoJSON zone file (see :mod:`advisory.pipeline.zone_file`).

        Raises
        ------
        ZoneFileError
            When the file cannot be read, is not JSON, fails a check, or holds no zone
            (an empty zone file would advise "clear" for ever; an empty set built in
            code, :meth:`from_geojson`, stays allowed).
        """
        src = str(path)
        zones = zones_from_geojson(read_geojson(path, src), src)
        if not zones:
            raise ZoneFileError("'features' is empty: a zone file needs at least one zone "
                                "(an empty file would always advise clear)", source=src)
        return cls(zones, src)

    @classmethod
    def from_geojson(cls, obj: Any, source: str = "<geojson>") -> ZoneSet:
        """Check a parsed GeoJSON FeatureCollection and build the zone set.

        Raises
        ------
        ZoneFileError
            When the object fails a check (see :mod:`advisory.pipeline.zone_file`).
        """
        return cls(zones_from_geojson(obj, source), source)

    def __len__(self) -> int:
        return len(self.zones)

    def __iter__(self) -> Iterator[Zone]:
        return iter(self.zones)

    def __getitem__(self, k: int) -> Zone:
        return self.zones[k]

    def index_of(self, zone_id: str) -> int:
        """Position of the zone with this id; KeyError naming it if absent."""
        for k, z in enumerate(self.zones):
            if z.id == zone_id:
                return k
        raise KeyError(f"no zone with id {zone_id!r} in {self.source}")

    def project(self, frame: LocalFrame, max_edge_deg: float = DEFAULT_MAX_EDGE_DEG
                ) -> ProjectedZones:
        """Project every zone into ``frame`` once, as flat arrays for the kernels.

        Edges longer than ``max_edge_deg`` in longitude or latitude are split evenly in
        longitude/latitude first, so the plane polygon follows the straight
        longitude/latitude edge that RFC 7946 (sec. 3.1.1) defines.

        Parameters
        ----------
        frame : LocalFrame
            Plane to project into.
        max_edge_deg : float
            Longest edge kept unsplit, degrees (> 0).

        Returns
        -------
        ProjectedZones
        """
        lay = self.layout(max_edge_deg)
        x, y = project_vertices(lay.lonlat, frame)
        return self.assemble(lay, frame, x, y)

    def layout(self, max_edge_deg: float = DEFAULT_MAX_EDGE_DEG) -> ZoneLayout:
        """The frame-independent part of :meth:`project`: the densified vertices and the
        ring, part and zone offsets (long edges split as :meth:`project` says); the
        default edge length's is made once and kept (read-only arrays)."""
        if max_edge_deg == DEFAULT_MAX_EDGE_DEG:
            return self._default_layout
        return self._layout(max_edge_deg)

    @cached_property
    def _default_layout(self) -> ZoneLayout:
        lay = self._layout(DEFAULT_MAX_EDGE_DEG)
        for a in (lay.lonlat, lay.ring_start, lay.part_start, lay.zone_start):
            a.flags.writeable = False
        return lay

    def _layout(self, max_edge_deg: float) -> ZoneLayout:
        if not (max_edge_deg > 0.0 and math.isfinite(max_edge_deg)):
            raise ValueError(f"max_edge_deg must be a positive number, got {max_edge_deg!r}")
        step = math.radians(max_edge_deg)
        rings: list[np.ndarray] = []
        ring_start = [0]
        part_start = [0]
        zone_start = [0]
        for z in self.zones:
            for part in z.polygons:
                for ring in part:
                    dense = _densify(ring, step)
                    rings.append(dense)
                    ring_start.append(ring_start[-1] + len(dense))
                part_start.append(len(rings))
            zone_start.append(len(part_start) - 1)
        lonlat = np.concatenate(rings) if rings else np.zeros((0, 2))
        return ZoneLayout(lonlat, np.asarray(ring_start, dtype=np.int64),
                          np.asarray(part_start, dtype=np.int64),
                          np.asarray(zone_start, dtype=np.int64))

    def assemble(self, lay: ZoneLayout, frame: LocalFrame, x: np.ndarray, y: np.ndarray
                 ) -> ProjectedZones:
        """:class:`ProjectedZones` from the layout's vertices already in ``frame``
        (``x``, ``y`` in m: :func:`project_vertices`): boxes and edge chunks."""
        x = np.ascontiguousarray(x, dtype=np.float64)
        y = np.ascontiguousarray(y, dtype=np.float64)
        rs, ps, zs = lay.ring_start, lay.part_start, lay.zone_start
        n_zone = len(self.zones)
        bbox = np.empty((n_zone, 4))
        for k in range(n_zone):
            v0 = rs[ps[zs[k]]]
            v1 = rs[ps[zs[k + 1]]]
            bbox[k] = (x[v0:v1].min(), y[v0:v1].min(), x[v0:v1].max(), y[v0:v1].max())
        ring_chunk, chunk_edges, chunk_bbox = contact.build_edge_chunks(x, y, rs)
        return ProjectedZones(
            frame=frame,
            ids=tuple(z.id for z in self.zones),
            x=x,
            y=y,
            ring_start=rs,
            part_start=ps,
            zone_start=zs,
            zone_bbox=bbox,
            margin_m=np.array([z.margin_m for z in self.zones], dtype=np.float64),
            limit_pa=np.array([z.limit_pa for z in self.zones], dtype=np.float64),
            ground_elevation_m=np.array(
                [math.nan if z.ground_elevation_m is None else z.ground_elevation_m
                 for z in self.zones], dtype=np.float64),
            extent_m=float(np.hypot(x, y).max()) if x.size else 0.0,
            ring_chunk=ring_chunk,
            chunk_edges=chunk_edges,
            chunk_bbox=chunk_bbox,
        )


@dataclass(frozen=True, eq=False)
class ZoneLayout:
    """A zone set's vertices before projection (:meth:`ZoneSet.layout`).

    Attributes
    ----------
    lonlat : ndarray
        float64 (V, 2) densified ring vertices, rad, in the order of the rings.
    ring_start, part_start, zone_start : ndarray
        int64 offsets as in :class:`ProjectedZones`.
    """

    lonlat: np.ndarray
    ring_start: np.ndarray
    part_start: np.ndarray
    zone_start: np.ndarray


def project_vertices(lonlat: np.ndarray, frame: LocalFrame) -> tuple[np.ndarray, np.ndarray]:
    """Frame coordinates (east, north, m) of vertices (rad, as in :class:`ZoneLayout`);
    element by element, so a slice gives the same numbers as the whole."""
    if lonlat.shape[0] == 0:
        return np.zeros(0), np.zeros(0)
    x, y = frame.to_enu(lonlat[:, 1], lonlat[:, 0])
    return np.asarray(x, dtype=np.float64), np.asarray(y, dtype=np.float64)


def _densify(ring: np.ndarray, step: float) -> np.ndarray:
    """Split ring edges (rad, closed) longer than ``step`` in lon or lat, evenly."""
    d = np.abs(np.diff(ring, axis=0)).max(axis=1)
    n = np.maximum(1, np.ceil(d / step - 1e-9).astype(np.int64))
    if np.all(n == 1):
        return ring
    pieces = []
    for j in range(len(ring) - 1):
        t = np.arange(n[j])[:, None] / n[j]
        pieces.append(ring[j] + t * (ring[j + 1] - ring[j]))
    pieces.append(ring[-1:])
    return np.concatenate(pieces)
