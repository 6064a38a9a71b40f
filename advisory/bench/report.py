"""Bench report of replayed flights: one self-contained HTML file plus PNG figures.

For each flight the report draws

* a **map**: the no-boom zones, the flight track, the boom carpet actually laid on the
  ground along the track (the rays of the present emission at each step, as the advisor
  predicted them) coloured by overpressure, focus points, where each advisory fired, and
  the carpet predicted at that moment (dashed outline);
* a **timeline**: Mach and cutoff Mach, altitude, and the advisory level.

Both are inline SVG written here (no dependency); when matplotlib is installed (the
optional ``report`` extra) the same two figures are also drawn as PNG files beside the
HTML and embedded in it as base64. The HTML loads nothing from the network.

The data come from :class:`FlightCollector`, which a replay (:mod:`advisory.bench.replay`)
calls after every advisor step: it reads the loop's last advisory, the validator's
current state and the advisor's ``last_prediction`` / ``last_trajectory``.

Map projection: plate carree scaled by the cosine of the mid latitude (equirectangular,
Snyder, *Map Projections: A Working Manual*, USGS PP 1395, 1987, sec. 12), good enough
for a picture a few hundred km across; distances in the scale bar use the mean Earth
radius 6371.0088 km (IUGG).

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import base64
import datetime as _dt
import html
import io
import math
from pathlib import Path

import numpy as np

from advisory import SAFETY_CAUTION, __version__, units

KM_PER_DEG = math.pi * 6371.0088 / 180.0  #: km per degree of arc on the mean sphere
STATUS_COLOURS = {
    "no_boom": "#9db4c0", "clear": "#5aa469", "advisory": "#e9c12e", "caution": "#f2994a",
    "warning": "#d64545", "unavailable": "#4f4f4f",
}
STATUS_RANK = {"no_boom": 0, "clear": 0, "advisory": 1, "caution": 2, "warning": 3,
               "unavailable": -1}
#: Overpressure colour ramp stops (fraction of the scale, RGB): blue - yellow - red.
_RAMP = ((0.0, (44, 123, 182)), (0.25, (171, 217, 233)), (0.5, (255, 255, 191)),
         (0.75, (253, 174, 97)), (1.0, (215, 25, 28)))
REPORT_NAME = "report.html"


# ----------------------------------------------------------------------------- collecting

class FlightCollector:
    """Gathers what the report draws, step by step, from a running loop.

    Parameters
    ----------
    loop : advisory.service.loop.AdvisoryLoop
        The loop being replayed (its ``advisor``, ``validator``, ``last_advisory``).
    t0_monotonic : float
        Time origin (the first input's receive time), s.
    carpet_every_s : float
        Spacing of the carpet rows kept along the track, s of flight time.
    """

    def __init__(self, loop, t0_monotonic: float, carpet_every_s: float = 1.0) -> None:
        self.loop = loop
        self.t0 = t0_monotonic
        self.every = carpet_every_s
        self.threshold = float(loop.advisor.config.focus_threshold)
        self.track: list[list] = []
        self.rows: list[dict] = []
        self.focus: list[list[float]] = []
        self.events: list[dict] = []
        self._last_pred = None
        self._last_row_t = -math.inf
        self._key: tuple | None = None
        self._rank = 0

    def on_step(self, now_monotonic: float) -> None:
        """Take what the step just computed (call after every advisor step)."""
        loop = self.loop
        adv = loop.last_advisory
        if adv is None:
            return
        t = round(now_monotonic - self.t0, 3)
        st = loop.validator.current(now_monotonic)
        lat = lon = alt = mach = None
        if st is not None:
            lat, lon = round(math.degrees(st.lat_rad), 5), round(math.degrees(st.lon_rad), 5)
            alt, mach = round(units.m_to_ft(st.alt_m), 1), round(st.mach, 4)
        cut = None if adv.cutoff_mach is None or not math.isfinite(adv.cutoff_mach) \
            else round(adv.cutoff_mach, 4)
        self.track.append([t, lat, lon, alt, mach, cut, adv.status])
        advisor = loop.advisor
        pred, traj = advisor.last_prediction, advisor.last_trajectory
        fresh = (adv.status != "unavailable" and pred is not None and traj is not None
                 and pred is not self._last_pred)
        if fresh:
            self._last_pred = pred
            if t - self._last_row_t >= self.every - 1e-9:
                self._row(t, pred, traj)
        key = (adv.status, adv.zone_id)
        rank = STATUS_RANK.get(adv.status, 0)
        if key != self._key:
            ev = {"t_s": t, "status": adv.status, "zone_id": adv.zone_id, "cue": adv.cue,
                  "lat": lat, "lon": lon, "predicted": None, "predicted_focus": []}
            if adv.status in ("advisory", "caution", "warning") and fresh \
                    and (rank > self._rank or key[1] != (self._key or (None, None))[1]):
                ev["predicted"], ev["predicted_focus"] = self._predicted(pred, traj)
            self.events.append(ev)
            self._key = key
        self._rank = rank

    def _row(self, t: float, pred, traj) -> None:
        k0 = int(np.searchsorted(pred.t_emit_s, -1e-9))
        if k0 >= pred.t_emit_s.size or not pred.on_ground[k0]:
            return
        e, n = pred.east_m[k0], pred.north_m[k0]
        ok = np.isfinite(e) & np.isfinite(n)
        if ok.sum() < 2:
            return
        la, lo = traj.frame.from_enu(e[ok], n[ok])
        psf = units.pa_to_psf(pred.effective_overpressure_pa[k0][ok])
        self.rows.append({"t_s": t, "lat": np.round(np.degrees(la), 5).tolist(),
                          "lon": np.round(np.degrees(lo), 5).tolist(),
                          "psf": np.round(psf, 3).tolist()})
        self._last_row_t = t
        foc = pred.focus_factor[k0][ok]
        for i in np.flatnonzero(foc >= self.threshold):
            self.focus.append([round(float(np.degrees(la[i])), 5),
                               round(float(np.degrees(lo[i])), 5), round(float(foc[i]), 2)])

    def _predicted(self, pred, traj) -> tuple[list | None, list]:
        from advisory.pipeline.footprint import swath_polygon

        ring = swath_polygon(pred, 0.0, math.inf)
        outline = None
        if ring is not None:
            la, lo = traj.frame.from_enu(ring[:, 0], ring[:, 1])
            outline = [np.round(np.degrees(la), 5).tolist(), np.round(np.degrees(lo), 5).tolist()]
        ahead = (pred.t_emit_s >= 0.0)[:, None] & pred.on_ground[:, None]
        mask = ahead & (pred.focus_factor >= self.threshold) & np.isfinite(pred.east_m)
        ks, js = np.nonzero(mask)
        if ks.size > 300:
            pick = np.linspace(0, ks.size - 1, 300).astype(int)
            ks, js = ks[pick], js[pick]
        pts = []
        if ks.size:
            la, lo = traj.frame.from_enu(pred.east_m[ks, js], pred.north_m[ks, js])
            pts = [[round(float(a), 5), round(float(b), 5)]
                   for a, b in zip(np.degrees(la), np.degrees(lo))]
        return outline, pts

    def result(self) -> dict:
        """The collected data (plain lists; JSON-ready)."""
        return {"track": self.track, "rows": self.rows, "focus": self.focus,
                "events": self.events, "focus_threshold": self.threshold}


# ----------------------------------------------------------------------------- geometry

def ramp_colour(frac: float) -> str:
    """Hex colour of the overpressure ramp at ``frac`` (0..1)."""
    f = min(max(float(frac), 0.0), 1.0) if math.isfinite(frac) else 0.0
    for (f0, c0), (f1, c1) in zip(_RAMP, _RAMP[1:]):
        if f <= f1:
            w = 0.0 if f1 == f0 else (f - f0) / (f1 - f0)
            rgb = [round(a + w * (b - a)) for a, b in zip(c0, c1)]
            return "#{:02x}{:02x}{:02x}".format(*rgb)
    return "#{:02x}{:02x}{:02x}".format(*_RAMP[-1][1])


def _nice_step(span: float, target: int = 6) -> float:
    raw = span / max(target, 1)
    mag = 10 ** math.floor(math.log10(raw)) if raw > 0 else 1.0
    for m in (1, 2, 2.5, 5, 10):
        if m * mag >= raw:
            return m * mag
    return 10 * mag


def _scale_max(psf_max: float) -> float:
    """Top of the overpressure colour scale, psf (a round number above the data)."""
    if not math.isfinite(psf_max) or psf_max <= 0:
        return 1.0
    return max(0.5, math.ceil(psf_max * 2.0) / 2.0)


class _Projection:
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


def _zone_rings(zones_file: str) -> list[dict]:
    """Zones as rings in degrees: [{'id', 'name', 'limit_psf', 'rings': [[(lat, lon)...]]}]."""
    from advisory.pipeline.zones import ZoneSet

    out = []
    for z in ZoneSet.from_file(zones_file):
        rings = []
        for part in z.polygons:
            for ring in part:
                rings.append([(math.degrees(p[1]), math.degrees(p[0])) for p in ring])
        out.append({"id": z.id, "name": z.name, "limit_psf": units.pa_to_psf(z.limit_pa),
                    "margin_km": z.margin_m / 1e3, "rings": rings})
    return out


def _extent(flight: dict, zones: list[dict]) -> tuple[list[float], list[float]]:
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
    if not lats:
        lats, lons = [0.0, 0.1], [0.0, 0.1]
    return lats, lons


def _track_runs(track: list) -> list[list[tuple[float, float]]]:
    runs, cur = [], []
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


def fire_groups(events: list[dict], within_s: float = 10.0
                ) -> list[tuple[float, float, str, str, list[str]]]:
    """Where cues of a conflict level fired, merging cues fired within ``within_s``.

    Returns (lat, lon, highest status, label, cues) per group, at the first cue's place.
    """
    groups: list[list] = []
    for ev in events:
        if ev["lat"] is None or ev["status"] not in ("advisory", "caution", "warning"):
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


def _swath_quads(rows: list[dict], every: float, max_rows: int = 400
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


# ----------------------------------------------------------------------------- SVG

def _esc(text) -> str:
    return html.escape(str(text), quote=True)


def _pts(proj: _Projection, pts) -> str:
    return " ".join("{:.1f},{:.1f}".format(*proj.xy(la, lo)) for la, lo in pts)


def map_svg(name: str, flight: dict, zones: list[dict], width: int = 900,
            height: int = 640) -> str:
    """The map of one flight as an SVG element (``class="map"``)."""
    lats, lons = _extent(flight, zones)
    proj = _Projection(lats, lons, width, height)
    psf_all = [v for r in flight["rows"] for v in r["psf"]]
    vmax = _scale_max(max(psf_all) if psf_all else 0.0)
    out = [f'<svg class="map" id="map-{_esc(name)}" xmlns="http://www.w3.org/2000/svg" '
           f'viewBox="0 0 {width} {height}" width="{width}" height="{height}" role="img" '
           f'aria-label="map of flight {_esc(name)}">',
           f'<rect class="sea" x="0" y="0" width="{width}" height="{height}" fill="#eef4f8"/>']
    # graticule
    la0, la1, lo0, lo1 = proj.bounds
    lat_lo = proj.cy - (height / 2) / proj.scale
    lat_hi = proj.cy + (height / 2) / proj.scale
    lon_lo = proj.cx - (width / 2) / (proj.scale * proj.k)
    lon_hi = proj.cx + (width / 2) / (proj.scale * proj.k)
    step = _nice_step(max(lat_hi - lat_lo, lon_hi - lon_lo), 7)
    out.append('<g class="graticule" stroke="#c9d6df" stroke-width="0.7" fill="#7d8b96" '
               'font-size="10" font-family="sans-serif">')
    v = math.ceil(lat_lo / step) * step
    while v <= lat_hi:
        y = proj.xy(v, proj.cx)[1]
        hemi = "N" if v >= 0 else "S"
        out.append(f'<line x1="0" y1="{y:.1f}" x2="{width}" y2="{y:.1f}"/>'
                   f'<text x="3" y="{y - 2:.1f}" stroke="none">{abs(v):.2f}°{hemi}</text>')
        v += step
    v = math.ceil(lon_lo / step) * step
    while v <= lon_hi:
        x = proj.xy(proj.cy, v)[0]
        hemi = "E" if v >= 0 else "W"
        out.append(f'<line x1="{x:.1f}" y1="0" x2="{x:.1f}" y2="{height}"/>'
                   f'<text x="{x + 2:.1f}" y="{height - 4}" stroke="none">{abs(v):.2f}°{hemi}'
                   "</text>")
        v += step
    out.append("</g>")
    # carpet along the track
    out.append('<g class="carpet" stroke-width="0.6">')
    for pts, psf in _swath_quads(flight["rows"], 1.0):
        c = ramp_colour(psf / vmax)
        out.append(f'<polygon points="{_pts(proj, pts)}" fill="{c}" stroke="{c}"/>')
    out.append("</g>")
    # zones
    out.append('<g class="zones">')
    for z in zones:
        d = " ".join("M " + _pts(proj, ring) + " Z" for ring in z["rings"])
        out.append(f'<path class="zone" data-zone="{_esc(z["id"])}" d="{d}" fill="#c0392b" '
                   'fill-opacity="0.35" fill-rule="evenodd" stroke="#7b241c" '
                   'stroke-width="1.2"><title>' + _esc(
                       f'{z["name"]} ({z["id"]}): limit {z["limit_psf"]:.2f} psf, margin '
                       f'{z["margin_km"]:.1f} km') + "</title></path>")
        ring = z["rings"][0]
        x, y = proj.xy(sum(p[0] for p in ring) / len(ring), sum(p[1] for p in ring) / len(ring))
        out.append(f'<text x="{x + 8:.1f}" y="{y - 8:.1f}" font-size="12" font-family="sans-serif" '
                   f'fill="#5b1a12" font-weight="bold">{_esc(z["name"])}</text>')
    out.append("</g>")
    # predicted carpets when advisories fired
    out.append('<g class="predicted" fill="none" stroke-width="1.4" stroke-dasharray="6 4">')
    for ev in flight["events"]:
        if ev.get("predicted"):
            la, lo = ev["predicted"]
            c = STATUS_COLOURS.get(ev["status"], "#333")
            out.append(f'<polygon points="{_pts(proj, zip(la, lo))}" stroke="{c}"><title>'
                       f'carpet predicted at T+{ev["t_s"]:.1f} s ({_esc(ev["status"])})'
                       "</title></polygon>")
    out.append("</g>")
    # track
    out.append('<g class="track" fill="none" stroke="#111" stroke-width="2">')
    for run in _track_runs(flight["track"]):
        out.append(f'<polyline points="{_pts(proj, run[::2] + run[-1:])}"/>')
    first = next((r for r in flight["track"] if r[1] is not None), None)
    if first is not None:
        x, y = proj.xy(first[1], first[2])
        out.append(f'<circle cx="{x:.1f}" cy="{y:.1f}" r="4" fill="#111"/>'
                   f'<text x="{x + 6:.1f}" y="{y + 14:.1f}" font-size="11" stroke="none" '
                   'fill="#111" font-family="sans-serif">start</text>')
    out.append("</g>")
    # focus points
    out.append('<g class="focus" fill="#8e24aa">')
    for la, lo, *_ in flight["focus"][:400]:
        x, y = proj.xy(la, lo)
        out.append(f'<rect x="{x - 2.5:.1f}" y="{y - 2.5:.1f}" width="5" height="5" '
                   f'transform="rotate(45 {x:.1f} {y:.1f})"/>')
    for ev in flight["events"]:
        for la, lo in ev.get("predicted_focus") or []:
            x, y = proj.xy(la, lo)
            out.append(f'<circle cx="{x:.1f}" cy="{y:.1f}" r="1.6" fill-opacity="0.6"/>')
    out.append("</g>")
    # where advisories fired
    out.append('<g class="fired" font-family="sans-serif" font-size="11">')
    for lat, lon, status, label, cues in fire_groups(flight["events"]):
        x, y = proj.xy(lat, lon)
        c = STATUS_COLOURS[status]
        out.append(f'<circle class="fire" cx="{x:.1f}" cy="{y:.1f}" r="6" fill="{c}" '
                   f'stroke="#111" stroke-width="1"><title>{_esc(" | ".join(cues))}</title>'
                   f'</circle><text x="{x + 8:.1f}" y="{y + 4:.1f}" fill="#111">'
                   f"{_esc(label)}</text>")
    out.append("</g>")
    # legend: colour bar, scale bar, north arrow
    lx, ly = width - 200, 14
    out.append(f'<g class="legend" font-family="sans-serif" font-size="11" fill="#222">'
               f'<rect x="{lx - 8}" y="{ly - 4}" width="200" height="98" fill="#fff" '
               'fill-opacity="0.85" stroke="#aaa"/>'
               f'<text x="{lx}" y="{ly + 10}">ground overpressure, psf</text>')
    for i in range(40):
        out.append(f'<rect x="{lx + i * 4}" y="{ly + 16}" width="4.2" height="10" '
                   f'fill="{ramp_colour(i / 39)}"/>')
    out.append(f'<text x="{lx}" y="{ly + 38}">0</text>'
               f'<text x="{lx + 148}" y="{ly + 38}">{vmax:.1f}</text>'
               f'<rect x="{lx}" y="{ly + 46}" width="12" height="9" fill="#c0392b" '
               'fill-opacity="0.35" stroke="#7b241c"/>'
               f'<text x="{lx + 18}" y="{ly + 55}">no-boom zone</text>'
               f'<line x1="{lx}" y1="{ly + 66}" x2="{lx + 12}" y2="{ly + 66}" stroke="#111" '
               'stroke-width="2"/>'
               f'<text x="{lx + 18}" y="{ly + 70}">track</text>'
               f'<rect x="{lx + 92}" y="{ly + 62}" width="5" height="5" fill="#8e24aa" '
               f'transform="rotate(45 {lx + 94.5} {ly + 64.5})"/>'
               f'<text x="{lx + 104}" y="{ly + 70}">focus</text>'
               f'<line x1="{lx}" y1="{ly + 82}" x2="{lx + 12}" y2="{ly + 82}" stroke="#f2994a" '
               'stroke-width="1.4" stroke-dasharray="4 2"/>'
               f'<text x="{lx + 18}" y="{ly + 86}">carpet predicted at a cue</text></g>')
    km = _nice_step(120.0 / proj.px_per_km(), 1)
    bar = km * proj.px_per_km()
    out.append(f'<g class="scalebar" font-family="sans-serif" font-size="11">'
               f'<rect x="14" y="{height - 44}" width="{bar:.1f}" height="5" fill="#222"/>'
               f'<text x="14" y="{height - 50}">{km:g} km</text>'
               f'<path d="M 30 20 L 36 38 L 30 33 L 24 38 Z" fill="#222"/>'
               f'<text x="26" y="16">N</text></g>')
    out.append("</svg>")
    return "\n".join(out)


def _axis(vals: list[float]) -> tuple[float, float]:
    finite = [v for v in vals if v is not None and math.isfinite(v)]
    if not finite:
        return 0.0, 1.0
    lo, hi = min(finite), max(finite)
    if hi - lo < 1e-9:
        lo, hi = lo - 0.5 * max(abs(lo) * 0.02, 0.01), hi + 0.5 * max(abs(hi) * 0.02, 0.01)
    pad = 0.08 * (hi - lo)
    return lo - pad, hi + pad


def timeline_svg(name: str, flight: dict, segments: list, duration_s: float,
                 width: int = 900) -> str:
    """Mach and cutoff Mach, altitude and advisory level against time (``class="timeline"``)."""
    track = flight["track"]
    left, right = 70, 20
    panels = [("Mach", 140), ("altitude, ft", 110), ("level", 46)]
    gap, top = 26, 16
    height = top + sum(h for _, h in panels) + gap * len(panels) + 20
    t_max = max(duration_s, track[-1][0] if track else 1.0, 1.0)
    pw = width - left - right

    def x(t: float) -> float:
        return left + pw * t / t_max

    out = [f'<svg class="timeline" id="timeline-{_esc(name)}" xmlns="http://www.w3.org/2000/svg" '
           f'viewBox="0 0 {width} {height}" width="{width}" height="{height}" role="img" '
           f'aria-label="timeline of flight {_esc(name)}" font-family="sans-serif" '
           'font-size="11">',
           f'<rect x="0" y="0" width="{width}" height="{height}" fill="#fff"/>']
    y0 = top
    tstep = _nice_step(t_max, 8)
    series = {
        "Mach": [("Mach", 4, "#1f4e79"), ("cutoff Mach", 5, "#c0392b")],
        "altitude, ft": [("altitude", 3, "#2e7d32")],
    }
    for label, h in panels:
        out.append(f'<g class="panel" data-panel="{_esc(label)}">'
                   f'<rect x="{left}" y="{y0}" width="{pw}" height="{h}" fill="#fafafa" '
                   'stroke="#bbb"/>'
                   f'<text x="6" y="{y0 + 12}" fill="#333">{_esc(label)}</text>')
        t = 0.0
        while t <= t_max + 1e-9:
            out.append(f'<line x1="{x(t):.1f}" y1="{y0}" x2="{x(t):.1f}" y2="{y0 + h}" '
                       'stroke="#e4e4e4"/>')
            t += tstep
        if label in series:
            cols = [c for _, c, _ in series[label]]
            lo, hi = _axis([row[c] for row in track for c in cols])

            def y(v: float, lo=lo, hi=hi, y0=y0, h=h) -> float:
                return y0 + h - h * (v - lo) / (hi - lo)

            for frac in (0.0, 0.5, 1.0):
                v = lo + frac * (hi - lo)
                txt = f"{v:,.0f}" if label.startswith("alt") else f"{v:.3f}"
                out.append(f'<text x="{left - 4}" y="{y(v) + 4:.1f}" text-anchor="end" '
                           f'fill="#555">{txt}</text>')
            for k, (sname, col, colour) in enumerate(series[label]):
                runs, cur = [], []
                for row in track:
                    if row[col] is None:
                        if len(cur) > 1:
                            runs.append(cur)
                        cur = []
                    else:
                        cur.append(f"{x(row[0]):.1f},{y(row[col]):.1f}")
                if len(cur) > 1:
                    runs.append(cur)
                dash = ' stroke-dasharray="5 3"' if sname == "cutoff Mach" else ""
                for run in runs:
                    out.append(f'<polyline class="series" data-series="{_esc(sname)}" '
                               f'points="{" ".join(run[::2] + run[-1:])}" fill="none" '
                               f'stroke="{colour}" stroke-width="1.8"{dash}/>')
                out.append(f'<text x="{left + 8 + 110 * k}" y="{y0 + h - 6}" '
                           f'fill="{colour}">{_esc(sname)}</text>')
        else:  # level band
            for s in segments:
                x0, x1 = x(s.t_start_s), x(max(s.t_end_s, s.t_start_s + 0.1))
                c = STATUS_COLOURS.get(s.status, "#999")
                out.append(f'<rect class="level" data-status="{_esc(s.status)}" x="{x0:.1f}" '
                           f'y="{y0 + 4}" width="{max(x1 - x0, 1.0):.1f}" height="{h - 8}" '
                           f'fill="{c}"><title>{_esc(s.cue)}</title></rect>')
                if x1 - x0 > 50:
                    fg = "#fff" if s.status in ("warning", "unavailable", "clear") else "#111"
                    out.append(f'<text x="{x0 + 4:.1f}" y="{y0 + h / 2 + 4:.1f}" '
                               f'fill="{fg}">{_esc(s.status)}</text>')
        out.append("</g>")
        y0 += h + gap
    t = 0.0
    while t <= t_max + 1e-9:
        out.append(f'<text x="{x(t):.1f}" y="{y0 - gap + 14}" text-anchor="middle" '
                   f'fill="#555">{t:g}</text>')
        t += tstep
    out.append(f'<text x="{left + pw / 2}" y="{height - 2}" text-anchor="middle" '
               'fill="#333">time after the first input, s</text>')
    for s in segments:
        if s.status in ("advisory", "caution", "warning"):
            out.append(f'<line class="cue-mark" x1="{x(s.t_start_s):.1f}" y1="{top}" '
                       f'x2="{x(s.t_start_s):.1f}" y2="{y0 - gap}" stroke="'
                       f'{STATUS_COLOURS[s.status]}" stroke-width="1.2" '
                       'stroke-dasharray="3 3"/>')
    out.append("</svg>")
    return "\n".join(out)


# ----------------------------------------------------------------------------- PNG

def have_matplotlib() -> bool:
    """True when matplotlib can be imported (the optional ``report`` extra)."""
    try:
        import matplotlib  # noqa: F401
    except ImportError:
        return False
    return True


def _png(fig) -> bytes:
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    FigureCanvasAgg(fig)
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=100)
    return buf.getvalue()


def map_png(name: str, flight: dict, zones: list[dict]) -> bytes:
    """The map as a PNG image (needs matplotlib)."""
    from matplotlib.collections import PolyCollection
    from matplotlib.colors import LinearSegmentedColormap, Normalize
    from matplotlib.figure import Figure

    lats, lons = _extent(flight, zones)
    k = math.cos(math.radians(0.5 * (min(lats) + max(lats))))
    aspect = (max(lats) - min(lats)) / max((max(lons) - min(lons)) * k, 1e-6)
    if aspect >= 0.75:  # tall: fix the height, narrow the figure
        size = (min(max(7.0 / aspect + 2.6, 5.5), 10.0), 8.0)
    else:
        size = (10.0, min(max(7.4 * aspect + 1.4, 4.0), 8.0))
    fig = Figure(figsize=size)
    ax = fig.add_subplot(1, 1, 1)
    ax.set_facecolor("#eef4f8")
    cmap = LinearSegmentedColormap.from_list(
        "psf", [(f, tuple(v / 255 for v in c)) for f, c in _RAMP])
    psf_all = [v for r in flight["rows"] for v in r["psf"]]
    norm = Normalize(0.0, _scale_max(max(psf_all) if psf_all else 0.0))
    quads = _swath_quads(flight["rows"], 1.0)
    if quads:
        pc = PolyCollection([[(lo, la) for la, lo in pts] for pts, _ in quads],
                            array=np.array([p for _, p in quads]), cmap=cmap, norm=norm,
                            linewidths=0.3, edgecolors="face")
        ax.add_collection(pc)
        fig.colorbar(pc, ax=ax, label="ground overpressure, psf", shrink=0.7, fraction=0.04)
    for z in zones:
        for i, ring in enumerate(z["rings"]):
            ax.fill([p[1] for p in ring], [p[0] for p in ring], color="#c0392b", alpha=0.35,
                    lw=1.2, ec="#7b241c", label="no-boom zone" if z is zones[0] and i == 0
                    else None)
        ring = z["rings"][0]
        ax.annotate(z["name"], (sum(p[1] for p in ring) / len(ring),
                                sum(p[0] for p in ring) / len(ring)),
                    xytext=(6, 6), textcoords="offset points", color="#5b1a12",
                    fontweight="bold", fontsize=9)
    for ev in flight["events"]:
        if ev.get("predicted"):
            la, lo = ev["predicted"]
            ax.plot(lo, la, ls="--", lw=1.2, color=STATUS_COLOURS.get(ev["status"], "#333"))
    for i, run in enumerate(_track_runs(flight["track"])):
        ax.plot([p[1] for p in run], [p[0] for p in run], color="#111", lw=1.8,
                label="track" if i == 0 else None)
    if flight["focus"]:
        f = np.array(flight["focus"])
        ax.plot(f[:, 1], f[:, 0], "D", ms=3, color="#8e24aa", label="focus", ls="none")
    first = next((r for r in flight["track"] if r[1] is not None), None)
    if first is not None:
        ax.plot(first[2], first[1], "o", ms=5, color="#111")
        ax.annotate("start", (first[2], first[1]), xytext=(6, -12), textcoords="offset points",
                    fontsize=8)
    for lat, lon, status, label, _ in fire_groups(flight["events"]):
        ax.plot(lon, lat, "o", ms=8, mec="#111", color=STATUS_COLOURS[status])
        ax.annotate(label, (lon, lat), xytext=(8, -4), textcoords="offset points", fontsize=8)
    ax.set_aspect(1.0 / k)
    ax.autoscale_view()
    ax.set_xlabel("longitude, deg")
    ax.set_ylabel("latitude, deg")
    ax.set_title(f"{name}: carpet, zones and cues", fontsize=10)
    ax.legend(loc="best", fontsize=8, framealpha=0.85)
    fig.tight_layout()
    return _png(fig)


def timeline_png(name: str, flight: dict, segments: list) -> bytes:
    """The timeline as a PNG image (needs matplotlib)."""
    from matplotlib.figure import Figure
    from matplotlib.patches import Patch

    tr = flight["track"]

    def col(i):
        return np.array([np.nan if r[i] is None else r[i] for r in tr], dtype=float)

    t = col(0)
    fig = Figure(figsize=(9, 5.2))
    axes = fig.subplots(3, 1, sharex=True, gridspec_kw={"height_ratios": [3, 2, 1]})
    axes[0].plot(t, col(4), color="#1f4e79", label="Mach")
    axes[0].plot(t, col(5), color="#c0392b", ls="--", label="cutoff Mach")
    axes[0].set_ylabel("Mach")
    axes[0].legend(loc="best", fontsize=8)
    axes[1].plot(t, col(3), color="#2e7d32")
    axes[1].set_ylabel("altitude, ft")
    for s in segments:
        axes[2].axvspan(s.t_start_s, max(s.t_end_s, s.t_start_s + 0.1),
                        color=STATUS_COLOURS.get(s.status, "#999"))
        if s.status in ("advisory", "caution", "warning"):
            for ax in axes[:2]:
                ax.axvline(s.t_start_s, color=STATUS_COLOURS[s.status], ls=":", lw=1)
    axes[2].set_yticks([])
    axes[2].set_ylabel("level")
    axes[2].set_xlabel("time after the first input, s")
    handles = [Patch(color=STATUS_COLOURS[k], label=k) for k in STATUS_COLOURS
               if any(s.status == k for s in segments)]
    if handles:
        axes[2].legend(handles=handles, loc="upper center", ncol=len(handles), fontsize=7,
                       bbox_to_anchor=(0.5, -0.9))
    axes[0].set_title(f"{name}: Mach, altitude and advisory level")
    fig.tight_layout()
    return _png(fig)


# ----------------------------------------------------------------------------- HTML

_CSS = """
body{font-family:sans-serif;margin:24px;color:#222;max-width:1000px}
.caution{background:#fff4d6;border:1px solid #e0b000;padding:8px 12px;font-weight:bold}
table{border-collapse:collapse;margin:8px 0}
td,th{border:1px solid #ccc;padding:3px 8px;text-align:left;font-size:13px}
th{background:#f0f0f0}
.ok{color:#2e7d32;font-weight:bold}.bad{color:#c0392b;font-weight:bold}
section.flight{border-top:2px solid #999;margin-top:28px;padding-top:8px}
figure{margin:10px 0}figcaption{font-size:12px;color:#555}
.status{display:inline-block;padding:0 6px;border-radius:3px;color:#111}
pre{font-size:12px;background:#f7f7f7;padding:6px;overflow-x:auto}
"""


def _status_badge(status: str) -> str:
    c = STATUS_COLOURS.get(status, "#ccc")
    fg = "#fff" if status in ("warning", "unavailable", "clear") else "#111"
    return f'<span class="status" style="background:{c};color:{fg}">{_esc(status)}</span>'


def _flight_section(res, out_dir: Path, pngs: bool) -> str:
    from advisory.bench.replay import read_notes

    name = res.name
    parts = [f'<section class="flight" id="flight-{_esc(name)}">',
             f"<h2>{_esc(res.setup.title or name)}</h2>"]
    if res.setup.description:
        parts.append(f"<p>{_esc(res.setup.description)}</p>")
    speed = f"{res.duration_s / res.wall_s:,.0f}x real time" if res.wall_s > 0 else "-"
    parts.append(f"<p>Log <code>{_esc(res.setup.log)}</code>: {res.duration_s:.1f} s of flight, "
                 f"{res.inputs_fed} input chunks, {len(res.outputs)} outputs; replayed at "
                 f"{speed}.</p>")
    for note in read_notes(res):
        parts.append(f'<p class="bad">{_esc(note)}</p>')
    if res.recorded_match is not None:
        parts.append("<p>Recorded outputs: " + (
            '<span class="ok">reproduced byte for byte</span>' if res.recorded_match
            else f'<span class="bad">{_esc(res.first_mismatch)}</span>') + "</p>")
    if res.diffs is not None:
        if res.diffs:
            parts.append(f'<p class="bad">Differs from {_esc(res.setup.expect)}:</p><ul>'
                         + "".join(f"<li>{_esc(d)}</li>" for d in res.diffs) + "</ul>")
        else:
            parts.append(f'<p class="ok">Matches the expected advisories '
                         f"({_esc(Path(res.setup.expect).name)}).</p>")
    parts.append('<table class="cues"><tr><th>T+ (s)</th><th>until (s)</th><th>status</th>'
                 "<th>zone</th><th>crew cue</th></tr>")
    for s in res.segments:
        parts.append(f"<tr><td>{s.t_start_s:.1f}</td><td>{s.t_end_s:.1f}</td>"
                     f"<td>{_status_badge(s.status)}</td><td>{_esc(s.zone_id or '')}</td>"
                     f"<td>{_esc(s.cue)}</td></tr>")
    parts.append("</table>")
    if res.flight is not None:
        zones = _zone_rings(res.setup.zones)
        parts.append('<figure class="map-figure">' + map_svg(name, res.flight, zones)
                     + "<figcaption>Map: zones, track, carpet laid along the track coloured by "
                     "ground overpressure, focus points, where each cue fired and the carpet "
                     "predicted then.</figcaption></figure>")
        parts.append('<figure class="timeline-figure">'
                     + timeline_svg(name, res.flight, res.segments, res.duration_s)
                     + "<figcaption>Timeline: Mach and cutoff Mach, altitude, advisory level."
                     "</figcaption></figure>")
        if pngs:
            for kind, data in (("map", map_png(name, res.flight, zones)),
                               ("timeline", timeline_png(name, res.flight, res.segments))):
                fname = f"{name}_{kind}.png"
                (out_dir / fname).write_bytes(data)
                b64 = base64.b64encode(data).decode("ascii")
                parts.append(f'<figure class="png"><img class="png-{kind}" alt="{kind} of '
                             f'{_esc(name)}" src="data:image/png;base64,{b64}" width="900">'
                             f"<figcaption>{_esc(fname)} (matplotlib)</figcaption></figure>")
    errs = res.error_counts
    parts.append("<details><summary>counters</summary><pre>"
                 + _esc(", ".join(f"{k}={v}" for k, v in sorted(res.counters.items())))
                 + "</pre>" + (f"<p>input problems: {_esc(errs)}</p>" if errs else "")
                 + "</details>")
    parts.append("</section>")
    return "\n".join(parts)


def write_report(results: list, out_dir: str | Path, title: str = "boom-advisory flight report",
                 pngs: bool | None = None) -> Path:
    """Write ``report.html`` (and PNG figures when matplotlib is there) into ``out_dir``.

    Parameters
    ----------
    results : list of advisory.bench.replay.ReplayResult
        Replays made with ``collect=True`` get a map and a timeline; the others only
        their cues.
    out_dir : str or Path
        Created if missing.
    title : str
    pngs : bool, optional
        Draw PNG figures (default: when matplotlib is installed).

    Returns
    -------
    Path
        The HTML file.
    """
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    if pngs is None:
        pngs = have_matplotlib()
    rows = []
    for r in results:
        s = r.summary()
        exp = "-" if s["expected"] is None else (
            '<span class="ok">match</span>' if s["expected"]
            else '<span class="bad">differs</span>')
        warn = "-" if s["first_warning_s"] is None else f"{s['first_warning_s']:.1f} s"
        psf = "-" if s["worst_overpressure_psf"] is None else f"{s['worst_overpressure_psf']:.2f}"
        rows.append(
            f'<tr><td><a href="#flight-{_esc(r.name)}">{_esc(r.name)}</a></td>'
            f"<td>{s['duration_s']:.1f} s</td><td>{s['conflicts']}</td><td>{warn}</td>"
            f"<td>{psf}</td><td>{s['errors']}</td><td>{exp}</td></tr>")
    when = _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds")
    doc = [
        "<!DOCTYPE html>", '<html lang="en"><head><meta charset="utf-8">',
        f"<title>{_esc(title)}</title>",
        '<meta http-equiv="Content-Security-Policy" content="default-src \'none\'; '
        "img-src data:; style-src 'unsafe-inline'\">",
        f"<style>{_CSS}</style></head><body>",
        f"<h1>{_esc(title)}</h1>",
        f'<p class="caution" id="caution">{_esc(SAFETY_CAUTION)}</p>',
        f"<p>boom-advisory {__version__}, written {when}. Invented demo scenarios use "
        "fictional places and a fictional aircraft. "
        + ("" if pngs else "matplotlib is not installed: SVG figures only. ") + "</p>",
        '<table id="summary"><tr><th>log</th><th>duration</th><th>conflicts</th>'
        "<th>first warning</th><th>worst psf</th><th>errors</th><th>expected</th></tr>",
        *rows, "</table>",
    ]
    for r in results:
        doc.append(_flight_section(r, out, pngs))
    doc.append(f'<p class="caution">{_esc(SAFETY_CAUTION)}</p></body></html>')
    path = out / REPORT_NAME
    path.write_text("\n".join(doc) + "\n", encoding="utf-8")
    return path
