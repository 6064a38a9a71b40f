"""No-boom zones: read them from GeoJSON, check them, project them for the kernels.

A zone file is a GeoJSON FeatureCollection (RFC 7946) of Polygon and MultiPolygon
features; polygons may have holes. Each feature's ``properties``:

``id`` : str, required
    Unique, non-empty identifier (used in advisories).
``name`` : str, optional
    Human-readable name; defaults to the id.
``limit_psf`` : number >= 0, required
    Highest acceptable peak overpressure on the ground there, psf; 0 means no boom at
    all (any carpet contact is a conflict).
``margin_km`` : number in [0, 500], optional
    Buffer around the zone within which the carpet counts as reaching it, km; default
    :data:`DEFAULT_MARGIN_KM`.
``ground_elevation_ft`` : number in [-1500, 30000] or null, optional
    Ground elevation of the zone, ft above mean sea level; absent means unknown.

Other properties are ignored. Positions are ``[longitude, latitude]`` in degrees on
WGS 84 (a third element, altitude, is ignored). Edges are straight lines in
longitude/latitude (RFC 7946, sec. 3.1.1); :meth:`ZoneSet.project` densifies long edges
so the plane polygons follow them. Rings must not cross the antimeridian (cut them
there, RFC 7946 sec. 3.1.9). Either winding order is accepted (RFC 7946 sec. 3.1.6 asks
parsers not to reject on it).

Checks, each failing with :class:`ZoneFileError` naming the feature (index and id) and
the problem: document structure and geometry types; rings with fewer than 4
positions, unclosed, with fewer than 3 distinct positions, enclosing no area, or
crossing or touching themselves; coordinates out of range or not finite; properties
missing, of the wrong type, out of range, or ids repeated. Not checked: holes lying
outside their exterior or overlapping one another, and overlapping parts of a
MultiPolygon.

All values are SI inside (:class:`Zone`): Pa, m, rad.
"""

from __future__ import annotations

import json
import math
from collections.abc import Iterator, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from advisory.geo import contact
from advisory.geo import polygons as gk
from advisory.geo.frame import LocalFrame
from advisory.units import ft_to_m, psf_to_pa

__all__ = [
    "DEFAULT_MARGIN_KM",
    "DEFAULT_MAX_EDGE_DEG",
    "ZoneFileError",
    "Zone",
    "ZoneSet",
    "ProjectedZones",
]

#: Default buffer around a zone when its feature gives no ``margin_km``, km. A project
#: choice covering carpet-edge uncertainty of a few km (common practice, no source).
DEFAULT_MARGIN_KM = 5.0
#: Longest edge, in degrees of longitude or latitude, kept as one straight plane edge
#: by :meth:`ZoneSet.project` (about 1 m of sag at 60 deg latitude).
DEFAULT_MAX_EDGE_DEG = 0.1
MAX_MARGIN_KM = 500.0  #: largest accepted ``margin_km`` (the local frames' good range)
GROUND_ELEVATION_RANGE_FT = (-1500.0, 30000.0)  #: accepted ``ground_elevation_ft``


class ZoneFileError(ValueError):
    """A zone file or GeoJSON object that cannot be used, with a message that says why.

    Attributes
    ----------
    source : str
        File name or description of the input.
    feature_index : int or None
        Index of the offending feature in ``features``, if any.
    zone_id : str or None
        Its ``properties.id``, when it has a usable one.
    """

    def __init__(self, message: str, *, source: str = "<geojson>",
                 feature_index: int | None = None, zone_id: str | None = None) -> None:
        self.source = source
        self.feature_index = feature_index
        self.zone_id = zone_id
        where = source
        if feature_index is not None:
            ident = f"id {zone_id!r}" if zone_id is not None else "id unknown"
            where += f": feature {feature_index} ({ident})"
        super().__init__(f"{where}: {message}")
        self.problem = message


@dataclass(frozen=True, eq=False)
class Zone:
    """One no-boom zone, SI inside.

    Attributes
    ----------
    id : str
        Unique identifier.
    name : str
        Human-readable name.
    limit_pa : float
        Highest acceptable peak overpressure on the ground, Pa (0: no boom at all).
    margin_m : float
        Buffer around the zone counted as contact, m.
    ground_elevation_m : float or None
        Ground elevation above mean sea level, m; None when not given.
    polygons : tuple of tuple of ndarray
        Parts; each part is its rings (exterior first, then holes); each ring a float64
        (n, 2) array of ``[lon, lat]`` in rad, closed (last row repeats the first), with
        consecutive duplicate positions removed.
    """

    id: str
    name: str
    limit_pa: float
    margin_m: float
    ground_elevation_m: float | None
    polygons: tuple[tuple[np.ndarray, ...], ...]

    @property
    def no_boom(self) -> bool:
        """True when no boom at all is acceptable (limit 0)."""
        return self.limit_pa == 0.0

    @property
    def vertex_count(self) -> int:
        """Number of distinct ring vertices over all parts."""
        return sum(len(r) - 1 for part in self.polygons for r in part)


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
        """Read and check a GeoJSON zone file.

        Raises
        ------
        ZoneFileError
            When the file cannot be read, is not JSON, or fails a check.
        """
        src = str(path)
        try:
            text = Path(path).read_text(encoding="utf-8")
        except (OSError, UnicodeDecodeError) as exc:
            raise ZoneFileError(f"cannot read the zone file: {exc}", source=src) from exc
        try:
            obj = json.loads(text)
        except json.JSONDecodeError as exc:
            raise ZoneFileError(
                f"not valid JSON: {exc.msg} at line {exc.lineno} column {exc.colno}",
                source=src) from exc
        return cls.from_geojson(obj, source=src)

    @classmethod
    def from_geojson(cls, obj: Any, source: str = "<geojson>") -> ZoneSet:
        """Check a parsed GeoJSON FeatureCollection and build the zone set.

        Raises
        ------
        ZoneFileError
            When the object fails a check (see the module notes).
        """
        if not isinstance(obj, dict):
            raise ZoneFileError(f"top level must be a JSON object, got {_kind(obj)}",
                                source=source)
        if obj.get("type") != "FeatureCollection":
            raise ZoneFileError(
                f"top-level type must be 'FeatureCollection', got {obj.get('type')!r}",
                source=source)
        features = obj.get("features")
        if not isinstance(features, list):
            raise ZoneFileError(f"'features' must be an array, got {_kind(features)}",
                                source=source)
        zones: list[Zone] = []
        seen: dict[str, int] = {}
        for i, feat in enumerate(features):
            zone = _parse_feature(feat, i, source)
            if zone.id in seen:
                raise ZoneFileError(f"id repeats that of feature {seen[zone.id]}",
                                    source=source, feature_index=i, zone_id=zone.id)
            seen[zone.id] = i
            zones.append(zone)
        return cls(tuple(zones), source)

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
        n_zone = len(self.zones)
        if rings:
            lonlat = np.concatenate(rings)
            x, y = frame.to_enu(lonlat[:, 1], lonlat[:, 0])
        else:
            x = np.zeros(0)
            y = np.zeros(0)
        x = np.ascontiguousarray(x, dtype=np.float64)
        y = np.ascontiguousarray(y, dtype=np.float64)
        rs = np.asarray(ring_start, dtype=np.int64)
        ps = np.asarray(part_start, dtype=np.int64)
        zs = np.asarray(zone_start, dtype=np.int64)
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


# --------------------------------------------------------------------------------------
# Checking one feature
# --------------------------------------------------------------------------------------


def _kind(v: Any) -> str:
    if v is None:
        return "null"
    if isinstance(v, bool):
        return f"boolean {v!r}"
    if isinstance(v, (int, float)):
        return f"number {v!r}"
    if isinstance(v, str):
        return f"string {v!r}"
    if isinstance(v, list):
        return "an array"
    if isinstance(v, dict):
        return "an object"
    return type(v).__name__


def _is_number(v: Any) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)


def _parse_feature(feat: Any, i: int, source: str) -> Zone:
    zid: str | None = None

    def fail(msg: str) -> ZoneFileError:
        return ZoneFileError(msg, source=source, feature_index=i, zone_id=zid)

    if not isinstance(feat, dict):
        raise fail(f"a feature must be a JSON object, got {_kind(feat)}")
    if feat.get("type") != "Feature":
        raise fail(f"type must be 'Feature', got {feat.get('type')!r}")
    props = feat.get("properties")
    if isinstance(props, dict) and isinstance(props.get("id"), str) and props["id"].strip():
        zid = props["id"]
    if not isinstance(props, dict):
        raise fail(f"'properties' must be an object, got {_kind(props)}")
    if "id" not in props:
        raise fail("properties.id is missing (a unique, non-empty string is required)")
    if zid is None:
        raise fail(f"properties.id must be a non-empty string, got {_kind(props['id'])}")

    name = props.get("name", zid)
    if name is None:
        name = zid
    if not isinstance(name, str):
        raise fail(f"properties.name must be a string, got {_kind(name)}")

    if "limit_psf" not in props:
        raise fail("properties.limit_psf is missing (a number >= 0 is required; 0 = no boom)")
    limit = props["limit_psf"]
    if not _is_number(limit) or limit < 0:
        raise fail(f"properties.limit_psf must be a number >= 0, got {_kind(limit)}")

    margin = props.get("margin_km", DEFAULT_MARGIN_KM)
    if margin is None:
        margin = DEFAULT_MARGIN_KM
    if not _is_number(margin) or not (0.0 <= margin <= MAX_MARGIN_KM):
        raise fail(f"properties.margin_km must be a number in [0, {MAX_MARGIN_KM:g}], "
                   f"got {_kind(margin)}")

    elev = props.get("ground_elevation_ft")
    lo, hi = GROUND_ELEVATION_RANGE_FT
    if elev is not None and (not _is_number(elev) or not (lo <= elev <= hi)):
        raise fail(f"properties.ground_elevation_ft must be a number in [{lo:g}, {hi:g}] "
                   f"or null, got {_kind(elev)}")

    geom = feat.get("geometry")
    if not isinstance(geom, dict):
        raise fail(f"'geometry' must be an object, got {_kind(geom)}")
    gtype = geom.get("type")
    coords = geom.get("coordinates")
    if gtype == "Polygon":
        parts_in = [coords]
        if not isinstance(coords, list):
            raise fail(f"Polygon coordinates must be an array of rings, got {_kind(coords)}")
    elif gtype == "MultiPolygon":
        if not isinstance(coords, list) or not coords:
            raise fail("MultiPolygon coordinates must be a non-empty array of polygons, "
                       f"got {_kind(coords)}")
        parts_in = coords
    else:
        raise fail(f"geometry type {gtype!r} is not supported (Polygon or MultiPolygon)")

    parts = []
    for p, rings_in in enumerate(parts_in):
        where_p = f"polygon {p}" if gtype == "MultiPolygon" else "polygon"
        if not isinstance(rings_in, list) or not rings_in:
            raise fail(f"{where_p} must be a non-empty array of rings, got {_kind(rings_in)}")
        rings = []
        for r, ring_in in enumerate(rings_in):
            what = f"{where_p}, {'exterior ring' if r == 0 else f'hole {r}'}"
            try:
                rings.append(_parse_ring(ring_in))
            except ValueError as exc:
                raise fail(f"{what}: {exc}") from None
        parts.append(tuple(rings))

    return Zone(
        id=zid,
        name=name,
        limit_pa=psf_to_pa(float(limit)),
        margin_m=float(margin) * 1000.0,
        ground_elevation_m=None if elev is None else ft_to_m(float(elev)),
        polygons=tuple(parts),
    )


def _fmt(p: Sequence[float]) -> str:
    return f"[{p[0]:.9g}, {p[1]:.9g}]"


def _parse_ring(ring_in: Any) -> np.ndarray:
    """Check one linear ring; return it as a closed (n, 2) array of [lon, lat] rad."""
    if not isinstance(ring_in, list):
        raise ValueError(f"a ring must be an array of positions, got {_kind(ring_in)}")
    if len(ring_in) < 4:
        raise ValueError(f"has {len(ring_in)} positions; a linear ring needs at least 4 "
                         "(RFC 7946 section 3.1.6)")
    pts = np.empty((len(ring_in), 2))
    for j, pos in enumerate(ring_in):
        if not isinstance(pos, list) or len(pos) < 2:
            raise ValueError(f"position {j} must be [longitude, latitude], got {_kind(pos)}")
        lon, lat = pos[0], pos[1]
        if not _is_number(lon) or not -180.0 <= lon <= 180.0:
            raise ValueError(f"position {j}: longitude must be a number in [-180, 180], "
                             f"got {_kind(lon)}")
        if not _is_number(lat) or not -90.0 <= lat <= 90.0:
            raise ValueError(f"position {j}: latitude must be a number in [-90, 90], "
                             f"got {_kind(lat)}")
        pts[j] = (lon, lat)
    if not np.array_equal(pts[0], pts[-1]):
        raise ValueError(f"is not closed: first position {_fmt(pts[0])} differs from last "
                         f"{_fmt(pts[-1])} (RFC 7946 section 3.1.6)")
    keep = np.ones(len(pts), dtype=bool)
    keep[1:] = np.any(pts[1:] != pts[:-1], axis=1)
    pts = pts[keep]
    if len(pts) < 4:
        raise ValueError("has fewer than 3 distinct positions")
    jump = np.flatnonzero(np.abs(np.diff(pts[:, 0])) > 180.0)
    if jump.size:
        j = int(jump[0])
        raise ValueError(f"edge from {_fmt(pts[j])} to {_fmt(pts[j + 1])} crosses the "
                         "antimeridian; cut the ring there (RFC 7946 section 3.1.9)")
    d = pts - pts[0]
    if np.all(d[:, 0] * d[1, 1] - d[:, 1] * d[1, 0] == 0.0):
        raise ValueError("encloses no area (all positions on one line)")
    xs = np.ascontiguousarray(pts[:, 0])
    ys = np.ascontiguousarray(pts[:, 1])
    i, j = gk.ring_self_intersection(xs, ys)
    if i >= 0:
        raise ValueError(f"crosses or touches itself: the edge from {_fmt(pts[i])} to "
                         f"{_fmt(pts[i + 1])} meets the edge from {_fmt(pts[j])} to "
                         f"{_fmt(pts[j + 1])}")
    return np.radians(pts)
