"""The ground truth in the report's inline SVG: where booms actually landed, the zone
margins and the predicted contact points on the map; a truth timeline (time to contact,
overpressure, arrivals per zone, and in red the spans where a boom was on its way into a
zone while the status said clear or no boom).

The truth's overpressure colours use the FIXED scale :data:`~advisory.bench.figures.TRUTH_PSF_MAX`
for every flight. Data: :func:`advisory.bench.replay_truth.figure_data` and the replay's
advisory frames (:func:`advisory.bench.figures.advisory_series`).

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import html
import math
from typing import Any

from advisory.bench.expect import Segment
from advisory.bench.figures import (
    MISSED_COLOUR,
    STATUS_COLOURS,
    TRUTH_PSF_MAX,
    Projection,
    missed_spans,
    nice_step,
    ramp_colour,
)

Series = list[tuple[float, str, str | None, float | None, float | None]]
#: Colours of the zones' truth arrivals in the timeline, in zone order.
ZONE_COLOURS = ("#6a1b9a", "#00838f", "#ef6c00", "#2e7d32", "#ad1457", "#283593")


def _esc(text: object) -> str:
    return html.escape(str(text), quote=True)


def margins_layer(proj: Projection, zones: list[dict[str, Any]]) -> list[str]:
    """Each zone's margin as a translucent band of the margin's width around its rings."""
    out = ['<g class="margins" fill="none" stroke="#c0392b" stroke-opacity="0.16" '
           'stroke-linejoin="round">']
    for z in zones:
        w = 2.0 * z["margin_km"] * proj.px_per_km()
        if w <= 0:
            continue
        d = " ".join("M " + " ".join("{:.1f},{:.1f}".format(*proj.xy(la, lo)) for la, lo in r)
                     + " Z" for r in z["rings"])
        out.append(f'<path class="zone-margin" data-zone="{_esc(z["id"])}" d="{d}" '
                   f'stroke-width="{w:.1f}"><title>{_esc(z["id"])}: margin '
                   f'{z["margin_km"]:.1f} km</title></path>')
    out.append("</g>")
    return out


def cells_layer(proj: Projection, truth_fig: dict[str, Any]) -> list[str]:
    """Where booms landed (truth): one square per map cell, the cell's peak overpressure
    on the fixed scale."""
    side = max(truth_fig["cell_m"] / 1e3 * proj.px_per_km(), 1.0)
    out = ['<g class="truth-booms" fill-opacity="0.9">']
    for lat, lon, psf, t_first in truth_fig["cells"]:
        x, y = proj.xy(lat, lon)
        out.append(f'<rect class="truth-cell" x="{x - side / 2:.1f}" y="{y - side / 2:.1f}" '
                   f'width="{side:.1f}" height="{side:.1f}" '
                   f'fill="{ramp_colour(psf / TRUTH_PSF_MAX)}"><title>{psf:.2f} psf, first '
                   f"boom T+{t_first:.1f} s</title></rect>")
    out.append("</g>")
    return out


def contacts_layer(proj: Projection, flight: dict[str, Any]) -> list[str]:
    """The advisor's predicted contact points (crosses in the level's colour)."""
    out = ['<g class="contacts" stroke-width="1.6">']
    for t, lat, lon, zone_id, status in flight.get("contacts", []):
        x, y = proj.xy(lat, lon)
        c = STATUS_COLOURS.get(status, "#333")
        out.append(f'<path class="contact" d="M {x - 4:.1f} {y - 4:.1f} L {x + 4:.1f} '
                   f'{y + 4:.1f} M {x - 4:.1f} {y + 4:.1f} L {x + 4:.1f} {y - 4:.1f}" '
                   f'stroke="{c}"><title>contact with {_esc(zone_id)} predicted at '
                   f"T+{t:.1f} s ({_esc(status)})</title></path>")
    out.append("</g>")
    return out


def truth_legend(height: int) -> list[str]:
    """The fixed truth scale, bottom right: colour bar 0 to :data:`TRUTH_PSF_MAX` psf."""
    lx, ly = 660, height - 76
    out = [f'<g class="truth-legend" font-family="sans-serif" font-size="11" fill="#222">'
           f'<rect x="{lx - 8}" y="{ly - 4}" width="240" height="72" fill="#fff" '
           'fill-opacity="0.85" stroke="#aaa"/>'
           f'<text x="{lx}" y="{ly + 10}">booms that landed (truth), psf</text>']
    for i in range(40):
        out.append(f'<rect x="{lx + i * 4}" y="{ly + 16}" width="4.2" height="10" '
                   f'fill="{ramp_colour(i / 39)}"/>')
    out.append(f'<text x="{lx}" y="{ly + 38}">0</text>'
               f'<text x="{lx + 144}" y="{ly + 38}">{TRUTH_PSF_MAX:g}+</text>'
               f'<text x="{lx}" y="{ly + 52}">fixed scale, the same for every flight</text>'
               f'<path d="M {lx} {ly + 58} l 8 8 M {lx} {ly + 66} l 8 -8" stroke="#e9c12e" '
               f'stroke-width="1.6"/><text x="{lx + 14}" y="{ly + 65}">predicted contact</text>'
               "</g>")
    return out


class _Axis:
    def __init__(self, left: float, pw: float, t_max: float) -> None:
        self.left, self.pw, self.t_max = left, pw, t_max
        self.tstep = nice_step(t_max, 8)

    def x(self, t: float) -> float:
        return self.left + self.pw * min(max(t, 0.0), self.t_max) / self.t_max


def _line_panel(ax: _Axis, y0: float, h: float, vmax: float, label: str,
                runs: list[list[tuple[float, float]]], colour: str, cls: str) -> list[str]:
    def y(v: float) -> float:
        return y0 + h - h * min(v, vmax) / vmax

    out = [f'<text x="{ax.left - 4}" y="{y(vmax) + 10:.1f}" text-anchor="end" fill="#555">'
           f"{vmax:g}</text>",
           f'<text x="{ax.left - 4}" y="{y0 + h:.1f}" text-anchor="end" fill="#555">0</text>']
    for run in runs:
        if len(run) > 1:
            pts = " ".join(f"{ax.x(t):.1f},{y(v):.1f}" for t, v in run)
            out.append(f'<polyline class="{cls}" points="{pts}" fill="none" stroke="{colour}" '
                       f'stroke-width="1.6"><title>{_esc(label)}</title></polyline>')
    return out


def _runs(series: Series, col: int) -> list[list[tuple[float, float]]]:
    runs: list[list[tuple[float, float]]] = [[]]
    for row in series:
        v = row[col]
        if isinstance(v, (int, float)) and math.isfinite(v):
            runs[-1].append((row[0], float(v)))
        elif runs[-1]:
            runs.append([])
    return [r for r in runs if r]


def truth_timeline_svg(name: str, series: Series, truth: dict[str, Any],
                       truth_fig: dict[str, Any] | None, segments: list[Segment],
                       duration_s: float, width: int = 900) -> str:
    """Time to contact, predicted and true overpressure, truth arrivals per zone and the
    level with the missed spans in red (``class="truth-timeline"``)."""
    arrivals = (truth_fig or {}).get("arrivals", {})
    zones = [e["zone_id"] for e in truth.get("exposures", [])]
    t_last = max([duration_s, 1.0] + [b[0] for a in arrivals.values() for b in a])
    ax = _Axis(70, width - 90, t_last)
    top, gap = 16, 24
    h_ttc, h_psf, h_band = 110, 110, 18
    height = top + h_ttc + h_psf + h_band * (len(zones) + 1) + 3 * gap + 58
    out = [f'<svg class="truth-timeline" id="truth-timeline-{_esc(name)}" '
           f'xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {width} {height}" width="{width}" '
           f'height="{height}" role="img" aria-label="truth timeline of flight {_esc(name)}" '
           'font-family="sans-serif" font-size="11">',
           f'<rect x="0" y="0" width="{width}" height="{height}" fill="#fff"/>']
    y0 = top
    ttc = _runs(series, 3)
    ttc_max = max([v for r in ttc for _t, v in r] + [60.0])
    out += _frame(ax, y0, h_ttc, "time to contact, s")
    out += _line_panel(ax, y0, h_ttc, nice_step(ttc_max, 1) * math.ceil(
        ttc_max / nice_step(ttc_max, 1)), "predicted time to contact", ttc, "#1f4e79", "ttc")
    y0 += h_ttc + gap
    out += _frame(ax, y0, h_psf, "overpressure, psf")
    out += _line_panel(ax, y0, h_psf, TRUTH_PSF_MAX, "predicted at the zone",
                       _runs(series, 4), "#555", "predicted-psf")
    for k, zid in enumerate(zones):
        c = ZONE_COLOURS[k % len(ZONE_COLOURS)]
        for t, psf, n in arrivals.get(zid, []):
            y = y0 + h_psf - h_psf * min(psf, TRUTH_PSF_MAX) / TRUTH_PSF_MAX
            out.append(f'<circle class="truth-psf" cx="{ax.x(t):.1f}" cy="{y:.1f}" r="1.6" '
                       f'fill="{c}"><title>{_esc(zid)}: {n} boom(s), {psf:.2f} psf at '
                       f"T+{t:.1f} s (truth)</title></circle>")
    y0 += h_psf + gap
    for k, zid in enumerate(zones):
        c = ZONE_COLOURS[k % len(ZONE_COLOURS)]
        out.append(f'<text x="{ax.left - 4}" y="{y0 + 12}" text-anchor="end" fill="{c}">'
                   f"{_esc(zid)}</text>")
        for t, _psf, _n in arrivals.get(zid, []):
            out.append(f'<rect class="truth-arrival" data-zone="{_esc(zid)}" '
                       f'x="{ax.x(t):.1f}" y="{y0 + 2}" width="1.5" height="{h_band - 4}" '
                       f'fill="{c}"/>')
        y0 += h_band
    out += _level_band(ax, segments, truth, y0, h_band + 8)
    y0 += h_band + 8 + 18
    t = 0.0
    while t <= t_last + 1e-9:
        out.append(f'<text x="{ax.x(t):.1f}" y="{y0 + 14}" text-anchor="middle" '
                   f'fill="#555">{t:g}</text>')
        t += ax.tstep
    out.append(f'<text x="{ax.left + ax.pw / 2}" y="{height - 4}" text-anchor="middle" '
               'fill="#333">time after the first input, s; red: a boom on its way into a '
               "zone while the status said clear or no boom</text></svg>")
    return "\n".join(out)


def _frame(ax: _Axis, y0: float, h: float, label: str) -> list[str]:
    out = [f'<rect x="{ax.left}" y="{y0}" width="{ax.pw}" height="{h}" fill="#fafafa" '
           f'stroke="#bbb"/><text x="{ax.left + 6}" y="{y0 + 12}" fill="#333">{_esc(label)}'
           "</text>"]
    t = 0.0
    while t <= ax.t_max + 1e-9:
        out.append(f'<line x1="{ax.x(t):.1f}" y1="{y0}" x2="{ax.x(t):.1f}" y2="{y0 + h}" '
                   'stroke="#e4e4e4"/>')
        t += ax.tstep
    return out


def _level_band(ax: _Axis, segments: list[Segment], truth: dict[str, Any], y0: float,
                h: float) -> list[str]:
    out = [f'<text x="{ax.left - 4}" y="{y0 + 14}" text-anchor="end" fill="#333">level</text>']
    for s in segments:
        x0, x1 = ax.x(s.t_start_s), ax.x(max(s.t_end_s, s.t_start_s + 0.1))
        out.append(f'<rect class="level" data-status="{_esc(s.status)}" x="{x0:.1f}" '
                   f'y="{y0 + 2}" width="{max(x1 - x0, 1.0):.1f}" height="{h - 4}" '
                   f'fill="{STATUS_COLOURS.get(s.status, "#999")}"/>')
    ym = y0 + h
    out.append(f'<text x="{ax.left - 4}" y="{ym + 12}" text-anchor="end" '
               f'fill="{MISSED_COLOUR}" font-weight="bold">MISSED</text>')
    for a, b, zid in missed_spans(truth):
        out.append(f'<rect class="missed" data-zone="{_esc(zid)}" x="{ax.x(a):.1f}" y="{ym}" '
                   f'width="{max(ax.x(b) - ax.x(a), 2.0):.1f}" height="16" '
                   f'fill="{MISSED_COLOUR}"><title>MISSED: a boom on its '
                   f"way into {_esc(zid)} from T+{a:.1f} to T+{b:.1f} s while the status said "
                   "clear or no boom</title></rect>")
    return out
