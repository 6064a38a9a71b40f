"""What a campaign prints and writes: the metrics table, JSON, CSV and an HTML summary.

* :func:`text_lines`: the metrics with their 95 % intervals, the caution first.
* :func:`summary`: one JSON-ready object (every metric with ``value``, ``low``,
  ``high``; the failed encounters named).
* :func:`write_outputs`: ``DIR/encounters.csv`` (one row per encounter and run),
  ``DIR/summary.json`` and ``DIR/summary.html`` (inline SVG: the lead-time histogram and
  the outcome counts, in fixed colours; no script, no external file).

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import csv
import json
import math
from pathlib import Path
from typing import Any

from advisory.bench.campaign import CampaignResult
from advisory.bench.campaign_stats import OUTCOME_RANK, exceeding, lead_times
from advisory.bench.figures import nice_step
from advisory.bench.svg import esc
from advisory.schema import SAFETY_CAUTION, VERSION

RATES = ("missed_alert_rate", "late_alert_rate", "nuisance_alert_rate",
         "resolution_success_rate", "followed_resolution_success_rate",
         "alerted_before_act_by_rate", "avoidable_resolution_success_rate")
#: Fixed colours of the outcome plot (the same in every report).
OUTCOME_COLOURS = {
    "outcome_alerted": "#2f855a", "outcome_late": "#d69e2e", "outcome_missed": "#c53030",
    "below_limit": "#a0aec0", "quiet": "#4a5568", "nuisance": "#805ad5",
    "resolved": "#2b6cb0", "not_resolved": "#9b2c2c",
}
OUTCOME_LABELS = {
    "outcome_alerted": "exposed: alerted in time", "outcome_late": "exposed: late alert",
    "outcome_missed": "exposed: missed", "below_limit": "boom below the limit",
    "quiet": "no boom: quiet", "nuisance": "no boom: nuisance alert",
    "resolved": "crew follows: avoided", "not_resolved": "crew follows: not avoided",
}
HISTOGRAM_COLOUR = "#2b6cb0"
CSV_NAME, JSON_NAME, HTML_NAME = "encounters.csv", "summary.json", "summary.html"
RUN_FIELDS = ("exposures", "exceeds_limit", "zone_id", "outcome", "first_arrival_s",
              "peak_psf", "unavoidable_from_s", "first_alert_s", "lead_time_s",
              "nuisance_alerts", "resolution_followed", "resolution_kind",
              "resolution_avoided", "truth_avoidable", "truth_act_by_s",
              "alerted_in_time", "unavailable_s", "error")


def summary(result: CampaignResult) -> dict[str, Any]:
    """The campaign as one JSON-ready object (``--json``, ``summary.json``)."""
    failures = [{"index": r["index"], "name": e.info["name"], "error": r["error"]}
                for e, r in zip(result.encounters, result.records) if r.get("error")]
    return {"caution": SAFETY_CAUTION, "package_version": VERSION, "seed": result.seed,
            "count": result.count, "known": result.known, "spread": result.spread,
            "near_cutoff": result.near_cutoff,
            "config": result.config, "engine": result.engine,
            "elapsed_s": round(result.elapsed_s, 3), "resumed": result.resumed,
            "metrics": result.metrics,
            "failures": failures}


def _num(x: float | None, unit: str = "") -> str:
    if x is None:
        return "-"
    text = f"{x:.1f}{unit}" if unit else f"{x:.3f}"
    return text[1:] if text.startswith("-") and not any(c in "123456789" for c in text) \
        else text  # no "-0.0"


def text_lines(result: CampaignResult) -> list[str]:
    """The human-readable report: caution, the metrics table, failures."""
    m = result.metrics
    known = ("; the advisor knows the air and the crew (--known)" if result.known else "")
    if result.spread:
        known = ("; the advisor knows the crew, and the air to within the default spread "
                 "(--spread)")
    if result.near_cutoff:
        known += "; every flight starts near the cutoff Mach (--near-cutoff)"
    if result.config:
        known += f"; advisor config {result.config}"
    if result.resumed:
        known += (f"; {result.resumed} encounters read back from the journal (the time is "
                  "this run's)")
    lines = [f"boom-advisory campaign: {result.count} encounters, seed {result.seed} "
             f"({result.engine}), {result.elapsed_s:.0f} s{known}", SAFETY_CAUTION, ""]
    rows = [("metric", "value", "95 % interval", "over")]
    for key in RATES:
        r = m[key]
        what = "follow runs of exposed" if key.startswith("resolution") else (
            "follow runs of exposed that flew an offered resolution"
            if key.startswith("followed") else "encounters without a boom"
            if key.startswith("nuisance") else "exposed encounters")
        rows.append((key, _num(r["value"]), f"[{_num(r['low'])}, {_num(r['high'])}]",
                     f"{r['count']} of {r['of']} {what}"))
    for q, label in (("median", "median"), ("p5", "5th percentile")):
        r = m["lead_time_s"][q]
        rows.append((f"lead_time_s ({label})", _num(r["value"], " s"),
                     f"[{_num(r['low'], ' s')}, {_num(r['high'], ' s')}]",
                     f"{m['lead_time_s']['of']} alerted exposures"))
    u = m["unavailable_fraction"]
    rows.append(("unavailable_fraction", _num(u["value"]),
                 f"[{_num(u['low'])}, {_num(u['high'])}]", "flight time, every run"))
    rows.append(("scenarios", str(m["scenarios"]["value"]), "-", f"{m['failed']} failed"))
    cal = m.get("calibration") or {}
    for key, what in (("interval_coverage", "starts: truth cutoff inside the advisor's "
                       "two-sided interval"),
                      ("margin_exceedance", "starts: truth cutoff below the advisor's cutoff "
                       "less its margin")):
        r = cal.get(key)
        if r and r["of"]:
            rows.append((key, _num(r["value"]), f"[{_num(r['low'])}, {_num(r['high'])}]",
                         f"{r['count']} of {r['of']} {what}"))
    if cal.get("brier_score") is not None:
        rows.append(("brier_score (boom reaches)", _num(cal["brier_score"]), "-",
                     f"{cal['interval_coverage']['of']} starts; 0 perfect"))
        for b in cal["reliability"]:
            o = b["observed"]
            if b["count"]:
                rows.append((f"reaches, stated {b['bin'][0]:g}-{b['bin'][1]:g}",
                             _num(o["value"]), f"[{_num(o['low'])}, {_num(o['high'])}]",
                             f"{o['count']} of {o['of']} starts reached; stated mean "
                             f"{b['stated']:.3f}"))
    if cal.get("margin_mach_median") is not None:
        sig = cal.get("sigma_median")
        rows.append(("margin_mach (median)", f"{cal['margin_mach_median']:.4f}", "-",
                     f"cutoff sigma median {sig:.4f}, confidence {cal['confidence']}"
                     if sig is not None else "the fixed margin (no confidence)"))
    widths = [max(len(r[i]) for r in rows) for i in range(4)]
    for i, r in enumerate(rows):
        lines.append(" | ".join(c.ljust(w) for c, w in zip(r, widths)).rstrip())
        if i == 0:
            lines.append("-+-".join("-" * w for w in widths))
    fails = [(e.info["name"], r["error"]) for e, r in zip(result.encounters, result.records)
             if r.get("error")]
    if fails:
        lines += ["", "failed encounters:"] + [f"  {n}: {err}" for n, err in fails[:20]]
        if len(fails) > 20:
            lines.append(f"  ... and {len(fails) - 20} more (see {CSV_NAME})")
    return lines


def _first_alert(e: dict[str, Any]) -> float | None:
    times = [e.get(k) for k in ("first_advisory_s", "first_caution_s", "first_warning_s",
                                "first_unavoidable_s")]
    given = [float(t) for t in times if t is not None]
    return min(given) if given else None


def run_row(run: dict[str, Any] | None, error: str | None) -> dict[str, Any]:
    """One run's CSV fields: its worst exposure (exceeding first), counts, resolution."""
    row: dict[str, Any] = dict.fromkeys(RUN_FIELDS, "")
    if run is None:
        row["error"] = error or ""
        return row
    exposures = run.get("exposures", [])
    over = exceeding(run)
    main = None
    if over:
        main = max(over, key=lambda e: OUTCOME_RANK.get(e.get("outcome", "missed"), 2))
    elif exposures:
        main = min(exposures, key=lambda e: e.get("first_arrival_s") or math.inf)
    nuisance = run.get("nuisance_alerts", [])
    res = run.get("resolution") or {}
    row.update(exposures=len(exposures), exceeds_limit=bool(over),
               nuisance_alerts=len(nuisance) if isinstance(nuisance, list) else nuisance,
               resolution_followed=res.get("followed", ""),
               resolution_kind=res.get("kind") or "",
               resolution_avoided=res.get("avoided", ""),
               unavailable_s=run.get("unavailable_s", ""))
    if main is not None:
        row.update({k: main.get(k, "") for k in ("zone_id", "outcome", "first_arrival_s",
                                                  "peak_psf", "unavoidable_from_s",
                                                  "lead_time_s")})
        row["first_alert_s"] = _first_alert(main)
        act = main.get("truth_act_by") or {}
        row.update(truth_avoidable=act.get("avoidable", ""),
                   truth_act_by_s=act.get("act_by_s", ""),
                   alerted_in_time=act.get("alerted_in_time", ""))
    return {k: ("" if v is None else v) for k, v in row.items()}


def write_csv(result: CampaignResult, path: Path) -> None:
    """One row per encounter and run (``ignore``, ``follow``)."""
    info_keys = list(result.encounters[0].info) if result.encounters else []
    with path.open("w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["index", *info_keys, "run", *RUN_FIELDS])
        for e, r in zip(result.encounters, result.records):
            for mode in ("ignore", "follow"):
                row = run_row(r.get(mode), r.get("error"))
                w.writerow([e.index, *(e.info[k] for k in info_keys), mode,
                            *(row[k] for k in RUN_FIELDS)])


def histogram_svg(values: list[float], width: int = 560, height: int = 240) -> str:
    """Lead times (s) as a histogram; a note when there are none."""
    head = (f'<svg xmlns="http://www.w3.org/2000/svg" width="{width}" height="{height}" '
            f'viewBox="0 0 {width} {height}" role="img" aria-label="lead-time histogram">')
    if not values:
        return head + '<text x="20" y="40">no alerted exposure</text></svg>'
    lo, hi = min(values), max(values)
    step = nice_step(max(hi - lo, 1.0), 10)
    start = math.floor(lo / step) * step
    nbins = max(1, math.ceil((hi - start) / step + 1e-9))
    counts = [0] * nbins
    for v in values:
        counts[min(nbins - 1, int((v - start) // step))] += 1
    x0, y0, pw, ph = 50, 20, width - 70, height - 60
    cmax = max(counts)
    parts = [head, f'<line x1="{x0}" y1="{y0 + ph}" x2="{x0 + pw}" y2="{y0 + ph}" '
                   'stroke="#000"/>']
    bw = pw / nbins
    for i, c in enumerate(counts):
        h = ph * c / cmax
        parts.append(f'<rect x="{x0 + i * bw:.1f}" y="{y0 + ph - h:.1f}" width="{bw - 1:.1f}" '
                     f'height="{h:.1f}" fill="{HISTOGRAM_COLOUR}"><title>'
                     f'{start + i * step:g} to {start + (i + 1) * step:g} s: {c}</title></rect>')
    for i in range(0, nbins + 1, max(1, nbins // 6)):
        parts.append(f'<text x="{x0 + i * bw:.1f}" y="{y0 + ph + 16}" font-size="11" '
                     f'text-anchor="middle">{start + i * step:g}</text>')
    parts.append(f'<text x="{x0}" y="{y0 - 6}" font-size="11">max {cmax} per bin</text>')
    parts.append(f'<text x="{x0 + pw / 2}" y="{height - 8}" font-size="12" '
                 'text-anchor="middle">lead time, s (ahead of the first boom that is on '
                 'its way)</text></svg>')
    return "".join(parts)


def outcomes_svg(classes: dict[str, int], width: int = 560, row_h: int = 24) -> str:
    """The outcome counts as horizontal bars, one fixed colour each."""
    keys = list(OUTCOME_COLOURS)
    height = row_h * len(keys) + 20
    cmax = max([classes.get(k, 0) for k in keys] + [1])
    x0, pw = 200, width - 260
    parts = [f'<svg xmlns="http://www.w3.org/2000/svg" width="{width}" height="{height}" '
             f'viewBox="0 0 {width} {height}" role="img" aria-label="outcome counts">']
    for i, k in enumerate(keys):
        c = classes.get(k, 0)
        y = 10 + i * row_h
        parts.append(f'<text x="{x0 - 8}" y="{y + 15}" font-size="12" text-anchor="end">'
                     f'{esc(OUTCOME_LABELS[k])}</text>')
        parts.append(f'<rect x="{x0}" y="{y + 3}" width="{pw * c / cmax:.1f}" '
                     f'height="{row_h - 8}" fill="{OUTCOME_COLOURS[k]}"/>')
        parts.append(f'<text x="{x0 + pw * c / cmax + 6:.1f}" y="{y + 15}" '
                     f'font-size="12">{c}</text>')
    return "".join(parts) + "</svg>"


def html_page(result: CampaignResult) -> str:
    """summary.html: caution, the metrics table, the two plots."""
    lines = text_lines(result)
    table = "\n".join(f"<tr><td>{esc(line)}</td></tr>" for line in lines[3:])
    values = lead_times(result.records)
    return (
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
        f"<title>Campaign, seed {result.seed}</title>"
        "<style>body{font-family:sans-serif;margin:2em}td{font-family:monospace;"
        "white-space:pre}.caution{border:2px solid #c53030;padding:.5em;font-weight:bold}"
        "</style></head><body>\n"
        f"<p class=\"caution\">{esc(SAFETY_CAUTION)}</p>\n"
        f"<h1>Campaign: {result.count} encounters, seed {result.seed}</h1>\n"
        f"<p>{esc(lines[0])}</p>\n"
        f"<p>{esc(result.engine)}; {result.elapsed_s:.0f} s; boom-advisory {esc(VERSION)}; "
        f"per-scenario rows in <a href=\"{CSV_NAME}\">{CSV_NAME}</a>.</p>\n"
        f"<table>{table}</table>\n"
        f"<h2>Lead time of alerted exposures</h2>\n{histogram_svg(values)}\n"
        f"<h2>Outcomes</h2>\n{outcomes_svg(result.metrics.get('classes', {}))}\n"
        "</body></html>\n")


def write_outputs(result: CampaignResult, out_dir: Path) -> list[Path]:
    """Write the CSV, summary.json and summary.html into ``out_dir`` (created)."""
    out_dir.mkdir(parents=True, exist_ok=True)
    paths = [out_dir / CSV_NAME, out_dir / JSON_NAME, out_dir / HTML_NAME]
    write_csv(result, paths[0])
    paths[1].write_text(json.dumps(summary(result), indent=2) + "\n", encoding="utf-8")
    paths[2].write_text(html_page(result), encoding="utf-8")
    return paths
