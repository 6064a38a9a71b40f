"""Bench report of replayed flights: one self-contained HTML file plus PNG figures.

For each flight the report draws

* a **map**: the no-boom zones, the flight track, the boom carpet actually laid on the
  ground along the track (the rays of the present emission at each step, as the advisor
  predicted them) coloured by overpressure, focus points, where each advisory fired, and
  the carpet predicted at that moment (dashed outline);
* a **timeline**: Mach and cutoff Mach, altitude, and the advisory level.

Both are inline SVG (:mod:`advisory.bench.svg`, no dependency); when matplotlib is
installed (the optional ``report`` extra) the same two figures are also drawn as PNG
files (:mod:`advisory.bench.png`) beside the HTML and embedded in it as base64. The HTML
loads nothing from the network. The data come from
:class:`advisory.bench.collect.FlightCollector`, which a replay fills as it runs.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import base64
import csv
import datetime as _dt
import io
from pathlib import Path
from typing import Any

from advisory.bench.figures import (
    STATUS_COLOURS,
    advisory_series,
    missed_spans,
    zone_rings,
)
from advisory.bench.png import have_matplotlib, map_png, timeline_png
from advisory.bench.result import ReplayResult, read_notes
from advisory.bench.svg import esc, map_svg, timeline_svg
from advisory.bench.svg_truth import truth_timeline_svg
from advisory.schema import SAFETY_CAUTION, VERSION

REPORT_NAME = "report.html"

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
    fg = "#fff" if status in ("warning", "unavoidable", "unavailable", "clear") else "#111"
    return f'<span class="status" style="background:{c};color:{fg}">{esc(status)}</span>'


def _flight_section(res: ReplayResult, out_dir: Path, pngs: bool) -> str:
    name = res.name
    parts = [f'<section class="flight" id="flight-{esc(name)}">',
             f"<h2>{esc(res.setup.title or name)}</h2>"]
    if res.setup.description:
        parts.append(f"<p>{esc(res.setup.description)}</p>")
    speed = f"{res.duration_s / res.wall_s:,.0f}x real time" if res.wall_s > 0 else "-"
    parts.append(f"<p>Log <code>{esc(res.setup.log)}</code>: {res.duration_s:.1f} s of flight, "
                 f"{res.inputs_fed} input chunks, {len(res.outputs)} outputs; replayed at "
                 f"{speed}.</p>")
    for note in read_notes(res):
        parts.append(f'<p class="bad">{esc(note)}</p>')
    if res.recorded_match is not None:
        parts.append("<p>Recorded outputs: " + (
            '<span class="ok">reproduced byte for byte</span>' if res.recorded_match
            else f'<span class="bad">{esc(res.first_mismatch)}</span>') + "</p>")
    if res.diffs is not None:
        if res.diffs:
            parts.append(f'<p class="bad">Differs from {esc(res.setup.expect)}:</p><ul>'
                         + "".join(f"<li>{esc(d)}</li>" for d in res.diffs) + "</ul>")
        else:
            parts.append(f'<p class="ok">Matches the expected advisories '
                         f"({esc(Path(str(res.setup.expect)).name)}).</p>")
    parts.append('<table class="cues"><tr><th>T+ (s)</th><th>until (s)</th><th>status</th>'
                 "<th>zone</th><th>crew cue</th></tr>")
    for s in res.segments:
        parts.append(f"<tr><td>{s.t_start_s:.1f}</td><td>{s.t_end_s:.1f}</td>"
                     f"<td>{_status_badge(s.status)}</td><td>{esc(s.zone_id or '')}</td>"
                     f"<td>{esc(s.cue)}</td></tr>")
    parts.append("</table>")
    if res.truth is not None:
        parts.append(_truth_table(res.truth, out_dir, name, res))
    if res.flight is not None:
        zones = zone_rings(res.setup.zones)
        parts.append('<figure class="map-figure">'
                     + map_svg(name, res.flight, zones, truth=res.truth_figure)
                     + "<figcaption>Map: zones and their margins, track, carpet laid along the "
                     "track as predicted, coloured by ground overpressure, focus points, where "
                     "each cue fired, the carpet and contact points predicted then"
                     + ("; beside the carpet's edges, the band where the edge lies at the "
                        f"advisor's confidence ({100 * res.flight['edge_band']['confidence']:.0f}"
                        " %; the air below is never known exactly)"
                        if (res.flight.get("edge_band") or {}).get("rows") else "")
                     + ("; squares: where booms actually landed (truth), on a fixed scale"
                        if res.truth_figure is not None else "")
                     + ".</figcaption></figure>")
        parts.append('<figure class="timeline-figure">'
                     + timeline_svg(name, res.flight, res.segments, res.duration_s)
                     + "<figcaption>Timeline: Mach and cutoff Mach, altitude, advisory level."
                     "</figcaption></figure>")
        if res.truth is not None:
            series = advisory_series(res.outputs, res.t0_monotonic)
            parts.append('<figure class="truth-timeline-figure">'
                         + truth_timeline_svg(name, series, res.truth, res.truth_figure,
                                              res.segments, res.duration_s)
                         + "<figcaption>Truth timeline: predicted time to contact; predicted "
                         "overpressure at the zone (line) and the booms that landed in each "
                         "zone (dots, truth); truth arrivals per zone; the level, red where a "
                         "boom was on its way into a zone while the status said clear or no "
                         "boom.</figcaption></figure>")
        if pngs:
            for kind, data in (("map", map_png(name, res.flight, zones, res.truth_figure)),
                               ("timeline", timeline_png(name, res.flight, res.segments,
                                                         res.truth, res.truth_figure))):
                fname = f"{name}_{kind}.png"
                (out_dir / fname).write_bytes(data)
                b64 = base64.b64encode(data).decode("ascii")
                parts.append(f'<figure class="png"><img class="png-{kind}" alt="{kind} of '
                             f'{esc(name)}" src="data:image/png;base64,{b64}" width="900">'
                             f"<figcaption>{esc(fname)} (matplotlib)</figcaption></figure>")
    errs = res.error_counts
    parts.append("<details><summary>counters</summary><pre>"
                 + esc(", ".join(f"{k}={v}" for k, v in sorted(res.counters.items())))
                 + "</pre>" + (f"<p>input problems: {esc(errs)}</p>" if errs else "")
                 + "</details>")
    parts.append("</section>")
    return "\n".join(parts)


def _truth_table(truth: dict[str, Any], out_dir: Path, name: str, res: ReplayResult) -> str:
    """The truth's exposures as a table, and the timeline CSV written beside the report."""
    csv_name = f"{name}_timeline.csv"
    (out_dir / csv_name).write_text(timeline_csv(res), encoding="utf-8")
    rows = ['<table class="truth"><tr><th>zone (truth)</th><th>first boom (s)</th>'
            "<th>last boom (s)</th><th>peak psf</th><th>over limit</th><th>first emitted (s)"
            "</th><th>outcome</th><th>missed (s)</th></tr>"]
    for e in truth["exposures"]:
        missed = ", ".join(f"{a:.1f}-{b:.1f}" for a, b in e["missed"])
        rows.append(f"<tr><td>{esc(e['zone_id'])}</td><td>{e['first_arrival_s']:.1f}</td>"
                    f"<td>{e['last_arrival_s']:.1f}</td><td>{e['peak_psf']:.2f}</td>"
                    f"<td>{'yes' if e['exceeds_limit'] else 'no'}</td>"
                    f"<td>{e['unavoidable_from_s']:.1f}</td><td>{esc(e['outcome'])}</td>"
                    + (f'<td class="bad">MISSED {esc(missed)}</td>' if missed else "<td>-</td>")
                    + "</tr>")
    if not truth["exposures"]:
        rows.append('<tr><td colspan="8">no boom reached a zone (truth)</td></tr>')
    rows.append("</table>")
    return ("\n".join(rows) + f'<p>Timeline as CSV: <a class="csv" href="{esc(csv_name)}">'
            f"{esc(csv_name)}</a> (time, status, zone, time to contact, psf, missed, truth "
            "arrivals per zone).</p>")


def timeline_csv(res: ReplayResult) -> str:
    """One row per advisory frame: ``t_s``, ``status``, ``zone_id``, ``time_to_contact_s``,
    ``overpressure_psf`` (predicted), ``missed`` (1 inside a missed span) and, per zone the
    truth saw a boom reach, ``<zone>_booms`` and ``<zone>_peak_psf`` of the booms arriving
    since the previous frame."""
    series = advisory_series(res.outputs, res.t0_monotonic)
    arrivals = (res.truth_figure or {}).get("arrivals", {})
    zones = sorted(arrivals)
    spans = missed_spans(res.truth)
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["t_s", "status", "zone_id", "time_to_contact_s", "overpressure_psf", "missed"]
               + [f"{z}_{k}" for z in zones for k in ("booms", "peak_psf")])
    idx = dict.fromkeys(zones, 0)
    t_prev = -float("inf")
    for t, status, zone, ttc, psf in series:
        row: list[Any] = [f"{t:.3f}", status, zone or "", "" if ttc is None else ttc,
                          "" if psf is None else psf,
                          int(any(a <= t < b for a, b, _z in spans))]
        for z in zones:
            arr, n, peak = arrivals[z], 0, 0.0
            while idx[z] < len(arr) and arr[idx[z]][0] <= t:
                if arr[idx[z]][0] > t_prev:
                    n += arr[idx[z]][2]
                    peak = max(peak, arr[idx[z]][1])
                idx[z] += 1
            row += [n, f"{peak:.3f}" if n else ""]
        w.writerow(row)
        t_prev = t
    return buf.getvalue()


def write_report(results: list[ReplayResult], out_dir: str | Path,
                 title: str = "boom-advisory flight report",
                 pngs: bool | None = None) -> Path:
    """Write ``report.html`` (and PNG figures when matplotlib is there) into ``out_dir``.

    Parameters
    ----------
    results : list of advisory.bench.result.ReplayResult
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
            f'<tr><td><a href="#flight-{esc(r.name)}">{esc(r.name)}</a></td>'
            f"<td>{s['duration_s']:.1f} s</td><td>{s['conflicts']}</td><td>{warn}</td>"
            f"<td>{psf}</td><td>{s['errors']}</td><td>{exp}</td></tr>")
    when = _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds")
    doc = [
        "<!DOCTYPE html>", '<html lang="en"><head><meta charset="utf-8">',
        f"<title>{esc(title)}</title>",
        '<meta http-equiv="Content-Security-Policy" content="default-src \'none\'; '
        "img-src data:; style-src 'unsafe-inline'\">",
        f"<style>{_CSS}</style></head><body>",
        f"<h1>{esc(title)}</h1>",
        f'<p class="caution" id="caution">{esc(SAFETY_CAUTION)}</p>',
        f"<p>boom-advisory {VERSION}, written {when}. Invented demo scenarios use "
        "fictional places and a fictional aircraft. "
        + ("" if pngs else "matplotlib is not installed: SVG figures only. ") + "</p>",
        '<table id="summary"><tr><th>log</th><th>duration</th><th>conflicts</th>'
        "<th>first warning</th><th>worst psf</th><th>errors</th><th>expected</th></tr>",
        *rows, "</table>",
    ]
    for r in results:
        doc.append(_flight_section(r, out, pngs))
    doc.append(f'<p class="caution">{esc(SAFETY_CAUTION)}</p></body></html>')
    path = out / REPORT_NAME
    path.write_text("\n".join(doc) + "\n", encoding="utf-8")
    return path
