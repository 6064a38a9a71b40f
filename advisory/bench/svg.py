"""The report's figures as inline SVG (no dependency): the map of a flight and its timeline.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import html
import math
from collections.abc import Iterable
from typing import Any

from advisory.bench.expect import Segment
from advisory.bench.figures import (
    STATUS_COLOURS,
    Projection,
    edge_ribbons,
    extent,
    fire_groups,
    nice_step,
    ramp_colour,
    scale_max,
    swath_quads,
    track_runs,
)
from advisory.bench.svg_truth import cells_layer, contacts_layer, margins_layer, truth_legend
from advisory.schema import CONFLICT_STATUSES


def esc(text: object) -> str:
    """``text`` escaped for HTML and SVG."""
    return html.escape(str(text), quote=True)


def _pts(proj: Projection, pts: Iterable[tuple[float, float]]) -> str:
    return " ".join("{:.1f},{:.1f}".format(*proj.xy(la, lo)) for la, lo in pts)


def map_svg(name: str, flight: dict[str, Any], zones: list[dict[str, Any]], width: int = 900,
            height: int = 640, truth: dict[str, Any] | None = None) -> str:
    """The map of one flight as an SVG element (``class="map"``); with ``truth``
    (:func:`advisory.bench.replay_truth.figure_data`) also where booms actually landed."""
    lats, lons = extent(flight, zones, truth)
    proj = Projection(lats, lons, width, height)
    psf_all = [v for r in flight["rows"] for v in r["psf"]]
    vmax = scale_max(max(psf_all) if psf_all else 0.0)
    out = [f'<svg class="map" id="map-{esc(name)}" xmlns="http://www.w3.org/2000/svg" '
           f'viewBox="0 0 {width} {height}" width="{width}" height="{height}" role="img" '
           f'aria-label="map of flight {esc(name)}">',
           f'<rect class="sea" x="0" y="0" width="{width}" height="{height}" fill="#eef4f8"/>']
    out += _graticule(proj, width, height)
    out += _carpet(proj, flight, vmax)
    out += _edge_band(proj, flight)
    if truth is not None:
        out += cells_layer(proj, truth)
    out += margins_layer(proj, zones)
    out += _zones(proj, zones)
    out += _predicted(proj, flight)
    out += contacts_layer(proj, flight)
    out += _track(proj, flight)
    out += _focus(proj, flight)
    out += _fired(proj, flight)
    out += _legend(proj, width, height, vmax)
    if truth is not None:
        out += truth_legend(height)
    out.append("</svg>")
    return "\n".join(out)


def _graticule(proj: Projection, width: int, height: int) -> list[str]:
    """Lines of latitude and longitude at a round spacing, labelled."""
    out: list[str] = []
    lat_lo = proj.cy - (height / 2) / proj.scale
    lat_hi = proj.cy + (height / 2) / proj.scale
    lon_lo = proj.cx - (width / 2) / (proj.scale * proj.k)
    lon_hi = proj.cx + (width / 2) / (proj.scale * proj.k)
    step = nice_step(max(lat_hi - lat_lo, lon_hi - lon_lo), 7)
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
    return out


def _carpet(proj: Projection, flight: dict[str, Any], vmax: float) -> list[str]:
    """The carpet laid along the track, coloured by overpressure."""
    out: list[str] = []
    out.append('<g class="carpet" stroke-width="0.6">')
    for pts, psf in swath_quads(flight["rows"], 1.0):
        c = ramp_colour(psf / vmax)
        out.append(f'<polygon points="{_pts(proj, pts)}" fill="{c}" stroke="{c}"/>')
    out.append("</g>")
    return out


#: Colour of the carpet edge's confidence band.
EDGE_BAND_COLOUR = "#1f3a5f"


def _edge_band(proj: Projection, flight: dict[str, Any]) -> list[str]:
    """The carpet edge's confidence band, each side a translucent ribbon."""
    band = flight.get("edge_band") or {}
    rings = edge_ribbons(flight)
    if not rings:
        return []
    rows = band["rows"]
    lo_l = min(r["half_width_km"]["left"][0] for r in rows)
    hi_l = max(r["half_width_km"]["left"][1] for r in rows)
    lo_r = min(r["half_width_km"]["right"][0] for r in rows)
    hi_r = max(r["half_width_km"]["right"][1] for r in rows)
    title = esc(f"carpet edge, {100 * band['confidence']:.0f} % band from "
                f"{band['samples']} sampled atmospheres per condition: half-width left "
                f"{lo_l:.1f}-{hi_l:.1f} km, right {lo_r:.1f}-{hi_r:.1f} km")
    out = [f'<g class="edge-band" fill="{EDGE_BAND_COLOUR}" fill-opacity="0.18" '
           f'stroke="{EDGE_BAND_COLOUR}" stroke-width="0.8" stroke-dasharray="3 2">'
           f"<title>{title}</title>"]
    for ring in rings:
        out.append(f'<polygon points="{_pts(proj, ring)}"/>')
    out.append("</g>")
    return out


def _zones(proj: Projection, zones: list[dict[str, Any]]) -> list[str]:
    """The no-boom zones, named."""
    out: list[str] = []
    out.append('<g class="zones">')
    for z in zones:
        d = " ".join("M " + _pts(proj, ring) + " Z" for ring in z["rings"])
        out.append(f'<path class="zone" data-zone="{esc(z["id"])}" d="{d}" fill="#c0392b" '
                   'fill-opacity="0.35" fill-rule="evenodd" stroke="#7b241c" '
                   'stroke-width="1.2"><title>' + esc(
                       f'{z["name"]} ({z["id"]}): limit {z["limit_psf"]:.2f} psf, margin '
                       f'{z["margin_km"]:.1f} km') + "</title></path>")
        ring = z["rings"][0]
        x, y = proj.xy(sum(p[0] for p in ring) / len(ring), sum(p[1] for p in ring) / len(ring))
        out.append(f'<text x="{x + 8:.1f}" y="{y - 8:.1f}" font-size="12" font-family="sans-serif" '
                   f'fill="#5b1a12" font-weight="bold">{esc(z["name"])}</text>')
    out.append("</g>")
    return out


def _predicted(proj: Projection, flight: dict[str, Any]) -> list[str]:
    """The carpets predicted when advisories fired (dashed)."""
    out: list[str] = []
    out.append('<g class="predicted" fill="none" stroke-width="1.4" stroke-dasharray="6 4">')
    for ev in flight["events"]:
        if ev.get("predicted"):
            la, lo = ev["predicted"]
            c = STATUS_COLOURS.get(ev["status"], "#333")
            out.append(f'<polygon points="{_pts(proj, zip(la, lo))}" stroke="{c}"><title>'
                       f'carpet predicted at T+{ev["t_s"]:.1f} s ({esc(ev["status"])})'
                       "</title></polygon>")
    out.append("</g>")
    return out


def _track(proj: Projection, flight: dict[str, Any]) -> list[str]:
    """The flight track and its start."""
    out: list[str] = []
    out.append('<g class="track" fill="none" stroke="#111" stroke-width="2">')
    for run in track_runs(flight["track"]):
        out.append(f'<polyline points="{_pts(proj, run[::2] + run[-1:])}"/>')
    first = next((r for r in flight["track"] if r[1] is not None), None)
    if first is not None:
        x, y = proj.xy(first[1], first[2])
        out.append(f'<circle cx="{x:.1f}" cy="{y:.1f}" r="4" fill="#111"/>'
                   f'<text x="{x + 6:.1f}" y="{y + 14:.1f}" font-size="11" stroke="none" '
                   'fill="#111" font-family="sans-serif">start</text>')
    out.append("</g>")
    return out


def _focus(proj: Projection, flight: dict[str, Any]) -> list[str]:
    """Focus points laid and predicted."""
    out: list[str] = []
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
    return out


def _fired(proj: Projection, flight: dict[str, Any]) -> list[str]:
    """Where advisories fired."""
    out: list[str] = []
    out.append('<g class="fired" font-family="sans-serif" font-size="11">')
    for lat, lon, status, label, cues in fire_groups(flight["events"]):
        x, y = proj.xy(lat, lon)
        c = STATUS_COLOURS[status]
        out.append(f'<circle class="fire" cx="{x:.1f}" cy="{y:.1f}" r="6" fill="{c}" '
                   f'stroke="#111" stroke-width="1"><title>{esc(" | ".join(cues))}</title>'
                   f'</circle><text x="{x + 8:.1f}" y="{y + 4:.1f}" fill="#111">'
                   f"{esc(label)}</text>")
    out.append("</g>")
    return out


def _legend(proj: Projection, width: int, height: int, vmax: float) -> list[str]:
    """Colour bar, symbols, scale bar and north arrow."""
    out: list[str] = []
    lx, ly = width - 200, 14
    out.append(f'<g class="legend" font-family="sans-serif" font-size="11" fill="#222">'
               f'<rect x="{lx - 8}" y="{ly - 4}" width="200" height="114" fill="#fff" '
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
               f'<text x="{lx + 18}" y="{ly + 86}">carpet predicted at a cue</text>'
               f'<rect x="{lx}" y="{ly + 94}" width="12" height="9" fill="{EDGE_BAND_COLOUR}" '
               f'fill-opacity="0.18" stroke="{EDGE_BAND_COLOUR}" stroke-dasharray="3 2"/>'
               f'<text x="{lx + 18}" y="{ly + 102}">carpet edge band (confidence)</text></g>')
    km = nice_step(120.0 / proj.px_per_km(), 1)
    bar = km * proj.px_per_km()
    out.append(f'<g class="scalebar" font-family="sans-serif" font-size="11">'
               f'<rect x="14" y="{height - 44}" width="{bar:.1f}" height="5" fill="#222"/>'
               f'<text x="14" y="{height - 50}">{km:g} km</text>'
               f'<path d="M 30 20 L 36 38 L 30 33 L 24 38 Z" fill="#222"/>'
               f'<text x="26" y="16">N</text></g>')
    return out


def _axis(vals: list[float | None]) -> tuple[float, float]:
    finite = [v for v in vals if v is not None and math.isfinite(v)]
    if not finite:
        return 0.0, 1.0
    lo, hi = min(finite), max(finite)
    if hi - lo < 1e-9:
        lo, hi = lo - 0.5 * max(abs(lo) * 0.02, 0.01), hi + 0.5 * max(abs(hi) * 0.02, 0.01)
    pad = 0.08 * (hi - lo)
    return lo - pad, hi + pad


def timeline_svg(name: str, flight: dict[str, Any], segments: list[Segment],
                 duration_s: float, width: int = 900) -> str:
    """Mach and cutoff Mach, altitude and advisory level against time (``class="timeline"``)."""
    track = flight["track"]
    left, right = 70, 20
    panels = [("Mach", 140), ("altitude, ft", 110), ("level", 46)]
    gap, top = 26, 16
    height = top + sum(h for _, h in panels) + gap * len(panels) + 20
    t_max = max(duration_s, track[-1][0] if track else 1.0, 1.0)
    ax = _TimeAxis(left, width - left - right, t_max)
    out = [f'<svg class="timeline" id="timeline-{esc(name)}" xmlns="http://www.w3.org/2000/svg" '
           f'viewBox="0 0 {width} {height}" width="{width}" height="{height}" role="img" '
           f'aria-label="timeline of flight {esc(name)}" font-family="sans-serif" '
           'font-size="11">',
           f'<rect x="0" y="0" width="{width}" height="{height}" fill="#fff"/>']
    y0 = top
    for label, h in panels:
        out.append(f'<g class="panel" data-panel="{esc(label)}">'
                   f'<rect x="{left}" y="{y0}" width="{ax.pw}" height="{h}" fill="#fafafa" '
                   'stroke="#bbb"/>'
                   f'<text x="6" y="{y0 + 12}" fill="#333">{esc(label)}</text>')
        t = 0.0
        while t <= t_max + 1e-9:
            out.append(f'<line x1="{ax.x(t):.1f}" y1="{y0}" x2="{ax.x(t):.1f}" y2="{y0 + h}" '
                       'stroke="#e4e4e4"/>')
            t += ax.tstep
        if label in _SERIES:
            out += _series_panel(ax, track, label, y0, h)
        else:
            out += _level_band(ax, segments, y0, h)
        out.append("</g>")
        y0 += h + gap
    t = 0.0
    while t <= t_max + 1e-9:
        out.append(f'<text x="{ax.x(t):.1f}" y="{y0 - gap + 14}" text-anchor="middle" '
                   f'fill="#555">{t:g}</text>')
        t += ax.tstep
    out.append(f'<text x="{left + ax.pw / 2}" y="{height - 2}" text-anchor="middle" '
               'fill="#333">time after the first input, s</text>')
    for s in segments:
        if s.status in CONFLICT_STATUSES:
            out.append(f'<line class="cue-mark" x1="{ax.x(s.t_start_s):.1f}" y1="{top}" '
                       f'x2="{ax.x(s.t_start_s):.1f}" y2="{y0 - gap}" stroke="'
                       f'{STATUS_COLOURS[s.status]}" stroke-width="1.2" '
                       'stroke-dasharray="3 3"/>')
    out.append("</svg>")
    return "\n".join(out)


#: The lines of each timeline panel: (name, column of the track row, colour).
_SERIES = {
    "Mach": [("Mach", 4, "#1f4e79"), ("cutoff Mach", 5, "#c0392b")],
    "altitude, ft": [("altitude", 3, "#2e7d32")],
}


class _TimeAxis:
    """Time to x pixels of the timeline's panels."""

    def __init__(self, left: float, pw: float, t_max: float) -> None:
        self.left, self.pw, self.t_max = left, pw, t_max
        self.tstep = nice_step(t_max, 8)

    def x(self, t: float) -> float:
        return self.left + self.pw * t / self.t_max


def _series_panel(ax: _TimeAxis, track: list[list[Any]], label: str, y0: float,
                  h: float) -> list[str]:
    """One panel of lines against time (Mach and cutoff Mach, or altitude)."""
    out: list[str] = []
    left = ax.left
    cols = [c for _, c, _ in _SERIES[label]]
    lo, hi = _axis([row[c] for row in track for c in cols])

    def y(v: float) -> float:
        return y0 + h - h * (v - lo) / (hi - lo)

    for frac in (0.0, 0.5, 1.0):
        v = lo + frac * (hi - lo)
        txt = f"{v:,.0f}" if label.startswith("alt") else f"{v:.3f}"
        out.append(f'<text x="{left - 4}" y="{y(v) + 4:.1f}" text-anchor="end" '
                   f'fill="#555">{txt}</text>')
    for k, (sname, col, colour) in enumerate(_SERIES[label]):
        runs: list[list[str]] = []
        cur: list[str] = []
        for row in track:
            if row[col] is None:
                if len(cur) > 1:
                    runs.append(cur)
                cur = []
            else:
                cur.append(f"{ax.x(row[0]):.1f},{y(row[col]):.1f}")
        if len(cur) > 1:
            runs.append(cur)
        dash = ' stroke-dasharray="5 3"' if sname == "cutoff Mach" else ""
        for run in runs:
            out.append(f'<polyline class="series" data-series="{esc(sname)}" '
                       f'points="{" ".join(run[::2] + run[-1:])}" fill="none" '
                       f'stroke="{colour}" stroke-width="1.8"{dash}/>')
        out.append(f'<text x="{left + 8 + 110 * k}" y="{y0 + h - 6}" '
                   f'fill="{colour}">{esc(sname)}</text>')
    return out


def _level_band(ax: _TimeAxis, segments: list[Segment], y0: float, h: float) -> list[str]:
    """The advisory level against time, one coloured box per segment."""
    out: list[str] = []
    for s in segments:
        x0, x1 = ax.x(s.t_start_s), ax.x(max(s.t_end_s, s.t_start_s + 0.1))
        c = STATUS_COLOURS.get(s.status, "#999")
        out.append(f'<rect class="level" data-status="{esc(s.status)}" x="{x0:.1f}" '
                   f'y="{y0 + 4}" width="{max(x1 - x0, 1.0):.1f}" height="{h - 8}" '
                   f'fill="{c}"><title>{esc(s.cue)}</title></rect>')
        if x1 - x0 > 50:
            fg = "#fff" if s.status in ("warning", "unavailable", "clear") else "#111"
            out.append(f'<text x="{x0 + 4:.1f}" y="{y0 + h / 2 + 4:.1f}" '
                       f'fill="{fg}">{esc(s.status)}</text>')
    return out
