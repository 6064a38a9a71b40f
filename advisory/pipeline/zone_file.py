"""No-boom zone files: GeoJSON read and checked into :class:`Zone` records.

A zone file is a GeoJSON FeatureCollection (RFC 7946) of Polygon and MultiPolygon
features; polygons may have holes. Each feature's ``properties``:

``id`` : str, required
    Unique, non-empty identifier (used in advisories), without control characters
    (Unicode category Cc) and unique within its first 63 UTF-8 bytes (the advisory
    frame's ``zone_id`` limit).
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
longitude/latitude (RFC 7946, sec. 3.1.1);
:meth:`advisory.pipeline.zones.ZoneSet.project` densifies long edges so the plane
polygons follow them. Rings must not cross the antimeridian (cut them
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
import logging
import math
import unicodedata
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from advisory.geo.rings import ring_self_intersection
from advisory.schema import ZONE_ID_MAX_BYTES, ZONE_LIMIT_PSF_PLAUSIBLE_MAX
from advisory.units import ft_to_m, pa_to_psf, psf_to_pa

log = logging.getLogger(__name__)

__all__ = [
    "DEFAULT_MARGIN_KM",
    "ZoneFileError",
    "Zone",
    "read_geojson",
    "zones_from_geojson",
]

#: Default buffer around a zone when its feature gives no ``margin_km``, km. A project
#: choice covering carpet-edge uncertainty of a few km (common practice, no source).
DEFAULT_MARGIN_KM = 5.0
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


def read_geojson(path: str | Path, source: str) -> Any:
    """The parsed JSON of a zone file (``source`` names it in errors).

    Raises
    ------
    ZoneFileError
        When the file cannot be read or is not JSON.
    """
    try:
        text = Path(path).read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise ZoneFileError(f"cannot read the zone file: {exc}", source=source) from exc
    try:
        obj = json.loads(text)
    except json.JSONDecodeError as exc:
        raise ZoneFileError(
            f"not valid JSON: {exc.msg} at line {exc.lineno} column {exc.colno}",
            source=source) from exc
    except RecursionError:
        raise ZoneFileError("JSON nested too deeply to be a zone file", source=source) \
            from None
    return obj


def zones_from_geojson(obj: Any, source: str = "<geojson>") -> tuple[Zone, ...]:
    """Check a parsed GeoJSON FeatureCollection and build its zones, in file order.

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
    seen_wire: dict[str, int] = {}
    for i, feat in enumerate(features):
        zone = _parse_feature(feat, i, source)
        if zone.id in seen:
            raise ZoneFileError(f"id repeats that of feature {seen[zone.id]}",
                                source=source, feature_index=i, zone_id=zone.id)
        wire = wire_zone_id(zone.id)
        if wire in seen_wire:
            raise ZoneFileError(
                f"id agrees with that of feature {seen_wire[wire]} in its first "
                f"{ZONE_ID_MAX_BYTES} UTF-8 bytes (all an advisory frame carries); make the "
                "ids differ within that length", source=source, feature_index=i,
                zone_id=zone.id)
        seen[zone.id] = i
        seen_wire[wire] = i
        zones.append(zone)
    _warn_implausible_limits(zones, source)
    return tuple(zones)


def _warn_implausible_limits(zones: list[Zone], source: str) -> None:
    """One warning line for the zones whose ``limit_psf`` is above
    :data:`advisory.schema.ZONE_LIMIT_PSF_PLAUSIBLE_MAX` (likely pascals typed as psf)."""
    high = [z for z in zones if pa_to_psf(z.limit_pa) > ZONE_LIMIT_PSF_PLAUSIBLE_MAX]
    if not high:
        return
    named = ", ".join(f"{z.id!r} ({pa_to_psf(z.limit_pa):g})" for z in high[:5])
    more = f" and {len(high) - 5} more" if len(high) > 5 else ""
    log.warning("%s: limit_psf above %g psf for zone(s) %s%s: typical booms are "
                "0.5-3 psf, so such a zone is in effect never in conflict; were pascals "
                "meant (1 psf = 47.88 Pa)?", source, ZONE_LIMIT_PSF_PLAUSIBLE_MAX, named, more)


def wire_zone_id(zone_id: str) -> str:
    """The zone id as an advisory frame carries it: cut to
    :data:`advisory.schema.ZONE_ID_MAX_BYTES` UTF-8 bytes, a partial character dropped."""
    raw = zone_id.encode("utf-8")
    return zone_id if len(raw) <= ZONE_ID_MAX_BYTES else \
        raw[:ZONE_ID_MAX_BYTES].decode("utf-8", "ignore")


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
    try:
        return isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)
    except OverflowError:  # an integer too large for a float
        return False


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
    bad = [ch for ch in zid if unicodedata.category(ch) == "Cc"]
    if bad:
        raise fail(f"properties.id contains the control character U+{ord(bad[0]):04X} "
                   "(ids are sent in advisory frames as printable text)")

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


def _positions_fast(ring_in: list) -> np.ndarray | None:
    """The ring's [lon, lat] as an (n, 2) array when every position is plainly good
    (JSON numbers in range), else None: the position-by-position check then names the
    first bad one. A whole-array check: large rings load in a fraction of the time."""
    if not all(type(p) is list and len(p) == 2 for p in ring_in):
        return None  # (positions with an altitude take the slow path)
    kinds = {type(p[0]) for p in ring_in} | {type(p[1]) for p in ring_in}
    if not kinds <= {int, float}:  # bool, str, null, containers: the slow path names them
        return None
    try:
        pts = np.array(ring_in, dtype=np.float64)
    except OverflowError:
        return None
    if not (np.all(np.abs(pts[:, 0]) <= 180.0) and np.all(np.abs(pts[:, 1]) <= 90.0)):
        return None  # NaN and infinity fail these too
    return pts


def _parse_ring(ring_in: Any) -> np.ndarray:
    """Check one linear ring; return it as a closed (n, 2) array of [lon, lat] rad."""
    if not isinstance(ring_in, list):
        raise ValueError(f"a ring must be an array of positions, got {_kind(ring_in)}")
    if len(ring_in) < 4:
        raise ValueError(f"has {len(ring_in)} positions; a linear ring needs at least 4 "
                         "(RFC 7946 section 3.1.6)")
    fast = _positions_fast(ring_in)
    pts = fast if fast is not None else np.empty((len(ring_in), 2))
    for j, pos in enumerate(ring_in if fast is None else ()):
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
    i, j = ring_self_intersection(xs, ys)
    if i >= 0:
        raise ValueError(f"crosses or touches itself: the edge from {_fmt(pts[i])} to "
                         f"{_fmt(pts[i + 1])} meets the edge from {_fmt(pts[j])} to "
                         f"{_fmt(pts[j + 1])}")
    return np.radians(pts)
