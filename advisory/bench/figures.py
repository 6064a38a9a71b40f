"""What the report's figures share: colours, the map projection, and the geometry of the
carpet, zones, track and cues in degrees (drawn by :mod:`advisory.bench.svg` and
:mod:`advisory.bench.png`).

Map projection: plate carree scaled by the cosine of the mid latitude (equirectangular,
Snyder, *Map Projections: A Working Manual*, USGS PP 1395, 1987, sec. 12), good enough
for a picture a few hundred km across; distances in the scale bar use the mean Earth
radius 6371.0088 km (IUGG; :data:`advisory.schema.EARTH_MEAN_RADIUS_M`).

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import math
from typing import Any

from advisory import units
from advisory.io.messages import decode_frame
from advisory.pipeline.zones import ZoneSet
from advisory.schema import CONFLICT_STATUSES, EARTH_MEAN_RADIUS_M, STATUS_RANK

KM_PER_DEG = math.pi * (EARTH_MEAN_RADIUS_M / 1e3) / 180.0  #: km per degree of arc
STATUS_COLOURS = {
    "no_boom": "#9db4c0", "clear": "#5aa469", "advisory": "#e9c12e", "caution": "#f2994a",
    "warning": "#d64545", "unavoidable": "#8e2c8e", "unavailable": "#4f4f4f",
}
#: Top of the FIXED overpressure scale of the truth's booms, psf: the same for every flight
#: of every report, so colours compare across flights (higher values take the top colour).
TRUTH_PSF_MAX = 3.0
#: Colour of a missed span (a boom on its way into a zone while the status said clear or
#: no boom).
MISSED_COLOUR = "#e00000"
#: Overpressure colour ramp stops (fraction of the scale, RGB): blue - yellow - red.
RAMP = ((0.0, (44, 123, 182)), (0.25, (171, 217, 233)), (0.5, (255, 255, 191)),
        (0.75, (253, 174, 97)), (1.0, (215, 25, 28)))

def ramp_colour(frac: float) -> str:
    """Hex colour of the overpressure ramp at ``frac`` (0..1)."""
    f = min(max(float(frac), 0.0), 1.0) if math.isfinite(frac) else 0.0
    for (f0, c0), (f1, c1) in zip(RAMP, RAMP[1:]):
        if f <= f1:
            w = 0.0 if f1 == f0 else (f - f0) / (f1 - f0)
            rgb = [round(a + w * (b - a)) for a, b in zip(c0, c1)]
            return "#{:02x}{:02x}{:02x}".format(*rgb)
    return "#{:02x}{:02x}{:02x}".format(*RAMP[-1][1])


def nice_step(span: float, target: int = 6) -> float:
    raw = span / max(target, 1)
    mag = 10 ** math.floor(math.log10(raw)) if raw > 0 else 1.0
    for m in (1, 2, 2.5, 5, 10):
        if m * mag >= raw:
            return m * mag
    return 10 * mag


def scale_max(psf_max: float) -> float:
    """Top of the overpressure colour scale, psf (a round number above the data)."""
    if not math.isfinite(psf_max) or psf_max <= 0:
        return 1.0
    return max(0.5, math.ceil(psf_max * 2.0) / 2.0)


class Projection:
    """Degrees to SVG pixels (equirectangular about the mid latitude)."""

    def __init__(self, lats: list[float], lons: list[float], width: int, height: int,
                 pad: int = 46) -> None:
        la0, la1 = min(lats), max(lats)
        lo0, lo1 = min(lons), max(lons)
        self.lat_mid = 0.5 * (la0 + la1)
        self.k = math.cos(math.radians(self.lat_mid))
        span_x = max((lo1 - lo0) * self.k, 1e-3)
        span_y = max(la1 - la0, 1e-3)
        self.scale = min((width - 2 * pad) / span_x, (height - 2 * pad) / span_y)
        self.cx, self.cy = 0.5 * (lo0 + lo1), 0.5 * (la0 + la1)
        self.w, self.h = width, height
        self.bounds = (la0, la1, lo0, lo1)

    def xy(self, lat: float, lon: float) -> tuple[float, float]:
        return (self.w / 2 + (lon - self.cx) * self.k * self.scale,
                self.h / 2 - (lat - self.cy) * self.scale)

    def px_per_km(self) -> float:
        return self.scale / KM_PER_DEG


def zone_rings(zones_file: str) -> list[dict[str, Any]]:
    """Zones as rings in degrees: [{'id', 'name', 'limit_psf', 'rings': [[(lat, lon)...]]}]."""
    out = []
    for z in ZoneSet.from_file(zones_file):
        rings = []
        for part in z.polygons:
            for ring in part:
                rings.append([(math.degrees(p[1]), math.degrees(p[0])) for p in ring])
        out.append({"id": z.id, "name": z.name, "limit_psf": units.pa_to_psf(z.limit_pa),
                    "margin_km": z.margin_m / 1e3, "rings": rings})
    return out


def extent(flight: dict[str, Any], zones: list[dict[str, Any]],
           truth: dict[str, Any] | None = None) -> tuple[list[float], list[float]]:
    lats, lons = [], []
    for row in flight["track"]:
        if row[1] is not None:
            lats.append(row[1])
            lons.append(row[2])
    for r in flight["rows"]:
        lats += r["lat"]
        lons += r["lon"]
    for z in zones:
        for ring in z["rings"]:
            lats += [p[0] for p in ring]
            lons += [p[1] for p in ring]
    for ev in flight["events"]:
        if ev.get("predicted"):
            lats += ev["predicted"][0]
            lons += ev["predicted"][1]
    for ribbon in edge_ribbons(flight):
        lats += [p[0] for p in ribbon]
        lons += [p[1] for p in ribbon]
    for cell in (truth or {}).get("cells", []):
        lats.append(cell[0])
        lons.append(cell[1])
    if not lats:
        lats, lons = [0.0, 0.1], [0.0, 0.1]
    return lats, lons


def track_runs(track: list[list[Any]]) -> list[list[tuple[float, float]]]:
    runs: list[list[tuple[float, float]]] = []
    cur: list[tuple[float, float]] = []
    for row in track:
        if row[1] is None:
            if len(cur) > 1:
                runs.append(cur)
            cur = []
        else:
            cur.append((row[1], row[2]))
    if len(cur) > 1:
        runs.append(cur)
    return runs


def fire_groups(events: list[dict[str, Any]], within_s: float = 10.0
                ) -> list[tuple[float, float, str, str, list[str]]]:
    """Where cues of a conflict level fired, merging cues fired within ``within_s``.

    Returns (lat, lon, highest status, label, cues) per group, at the first cue's place.
    """
    groups: list[list] = []
    for ev in events:
        if ev["lat"] is None or ev["status"] not in CONFLICT_STATUSES:
            continue
        g = groups[-1] if groups else None
        if g is not None and ev["t_s"] - g[5] <= within_s:
            if STATUS_RANK[ev["status"]] > STATUS_RANK[g[2]]:
                g[2] = ev["status"]
            g[3] += f", {ev['t_s']:.0f} s {ev['status'].upper()}"
            g[4].append(ev["cue"])
            g[5] = ev["t_s"]
            continue
        groups.append([ev["lat"], ev["lon"], ev["status"],
                       f"T+{ev['t_s']:.0f} s {ev['status'].upper()}", [ev["cue"]], ev["t_s"]])
    return [tuple(g[:5]) for g in groups]


def swath_quads(rows: list[dict[str, Any]], every: float, max_rows: int = 400
                 ) -> list[tuple[list, float]]:
    """Quadrilaterals between consecutive carpet rows: ([(lat, lon) x4], psf).

    Long flights keep at most ``max_rows`` rows (evenly thinned) so the figures stay light.
    """
    stride = max(1, math.ceil(len(rows) / max_rows))
    rows = rows[::stride]
    quads = []
    for a, b in zip(rows, rows[1:]):
        if b["t_s"] - a["t_s"] > 2.5 * every * stride or len(a["lat"]) != len(b["lat"]):
            continue
        for j in range(len(a["lat"]) - 1):
            pts = [(a["lat"][j], a["lon"][j]), (a["lat"][j + 1], a["lon"][j + 1]),
                   (b["lat"][j + 1], b["lon"][j + 1]), (b["lat"][j], b["lon"][j])]
            psf = 0.25 * (a["psf"][j] + a["psf"][j + 1] + b["psf"][j] + b["psf"][j + 1])
            quads.append((pts, psf))
    return quads


def edge_ribbons(flight: dict[str, Any], max_rows: int = 400
                 ) -> list[list[tuple[float, float]]]:
    """The carpet edge's confidence band (:mod:`advisory.bench.edge_band`) as closed
    rings of (lat, lon): one per side and per run of carpet rows at most 2.5 s apart,
    outer edge forward then inner edge back. Long flights keep at most ``max_rows`` rows."""
    rows = (flight.get("edge_band") or {}).get("rows", [])
    stride = max(1, math.ceil(len(rows) / max_rows))
    rows = rows[::stride]
    runs: list[list[dict[str, Any]]] = []
    for r in rows:
        if runs and r["t_s"] - runs[-1][-1]["t_s"] <= 2.5 * stride:
            runs[-1].append(r)
        else:
            runs.append([r])
    rings = []
    for run in runs:
        if len(run) < 2:
            continue
        for side in ("left", "right"):
            outer = [(r[side][1][0], r[side][1][1]) for r in run]
            inner = [(r[side][0][0], r[side][0][1]) for r in reversed(run)]
            rings.append(outer + inner)
    return rings


def advisory_series(outputs: list[tuple[float, float, bytes]], t0: float
                    ) -> list[tuple[float, str, str | None, float | None, float | None]]:
    """Every advisory frame of a replay: (t_s after ``t0``, status, zone_id, time to
    contact s, predicted overpressure psf)."""
    out = []
    for mono, _utc, payload in outputs:
        f = decode_frame(payload)
        if f.type == "adv":
            a = f.fields
            out.append((round(mono - t0, 3), a["status"], a["zone_id"],
                        a["time_to_contact_s"], a["overpressure_psf"]))
    return out


def missed_spans(truth: dict[str, Any] | None) -> list[tuple[float, float, str]]:
    """The truth's missed spans of every exposure: (t0_s, t1_s, zone_id)."""
    if not truth:
        return []
    return [(float(a), float(b), str(e["zone_id"])) for e in truth.get("exposures", [])
            for a, b in e.get("missed", [])]
