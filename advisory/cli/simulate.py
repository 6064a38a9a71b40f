"""``boom-advisory simulate SCENARIO``: fly a scenario with the advisor in the loop.

The scenario file (``docs/scenarios.md``) gives the flight, the true air, what the
advisor is given, the zones, the air-data source and the crew. The command flies it in
the closed loop (:func:`advisory.bench.closed_loop.simulate`), traces the truth along the
path flown and prints, per zone a boom reached, when it became unavoidable, the first
alerts, the lead time and the outcome; then nuisance alerts, the crew's resolution and
the unavailable time. ``--json`` prints the one object of ``docs/scenarios.md``;
``--report DIR`` also writes the run's record file and the replay report of it.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import argparse
import json
import time
from typing import Any

from advisory.bench.closed_loop import simulate, simulate_with_report
from advisory.bench.sim_scenario import load_scenario_file
from advisory.cli.options import add_json_option
from advisory.schema import SAFETY_CAUTION


def add_parser(sub: argparse._SubParsersAction) -> None:
    """Register ``boom-advisory simulate``."""
    p = sub.add_parser(
        "simulate", help="fly a scenario file with the advisor and a crew model in the loop",
        description="Fly a scenario (docs/scenarios.md) with the advisor in the loop, the "
                    "crew model acting on its cues, and score the advice against the "
                    "ground truth of the path flown. " + SAFETY_CAUTION)
    p.add_argument("scenario", metavar="SCENARIO", help="scenario file (TOML)")
    p.add_argument("--report", metavar="DIR",
                   help="write the run's record file and its replay report into DIR")
    add_json_option(p)
    p.set_defaults(func=run_simulate)


def _t(v: Any) -> str:
    return "-" if v is None else f"T+{v:.1f} s"


def human_lines(doc: dict[str, Any], wall_s: float) -> list[str]:
    """The human-readable summary of a ``simulate --json`` object."""
    lines = [SAFETY_CAUTION, f"scenario {doc['scenario']}: {doc['duration_s']:g} s flown, "
             f"crew {doc['crew_mode']}, {wall_s:.1f} s wall time"]
    if not doc["exposures"]:
        lines.append("  no boom reached any zone (truth)")
    for e in doc["exposures"]:
        lead = "-" if e["lead_time_s"] is None else f"{e['lead_time_s']:.1f} s"
        lines.append(
            f"  zone {e['zone_id']}: {e['outcome'].upper()}; booms arrive "
            f"{_t(e['first_arrival_s'])} to {_t(e['last_arrival_s'])}, peak "
            f"{e['peak_psf']:.2f} psf{' (over limit)' if e['exceeds_limit'] else ''}; "
            f"unavoidable from {_t(e['unavoidable_from_s'])}; first advisory "
            f"{_t(e['first_advisory_s'])}, caution {_t(e['first_caution_s'])}, warning "
            f"{_t(e['first_warning_s'])}, unavoidable "
            f"{_t(e.get('first_unavoidable_s'))}; lead time {lead}")
        for a, b in e["missed"]:
            lines.append(f"    MISSED {a:.1f}-{b:.1f} s: clear/no boom while a boom was on "
                         "its way into the zone")
    for n in doc["nuisance_alerts"]:
        lines.append(f"  nuisance {n['level']} for {n['zone_id']} {n['t0_s']:.1f}-"
                     f"{n['t1_s']:.1f} s (no boom reached it)")
    r = doc["resolution"]
    if r["followed"]:
        lines.append(f"  crew: {r['kind']} resolution for {r['zone_id']} (cue "
                     f"{_t(r['cue_s'])}, acted {_t(r['acted_s'])}): "
                     f"{'avoided' if r['avoided'] else 'NOT avoided'}")
    else:
        lines.append("  crew: did not act")
    lines.append(f"  unavailable {doc['unavailable_s']:.1f} s")
    return lines


def run_simulate(args: argparse.Namespace) -> int:
    """``boom-advisory simulate``: 0 when flown (whatever the outcome), 2 on bad input."""
    sc = load_scenario_file(args.scenario)
    t0 = time.perf_counter()
    if args.report:
        res, html = simulate_with_report(sc, args.report, quiet=bool(args.json))
    else:
        res, html = simulate(sc, quiet=bool(args.json)), None
    wall = time.perf_counter() - t0
    doc = res.as_json()
    if args.json:
        print(json.dumps(doc, indent=1))
        return 0
    for line in human_lines(doc, wall):
        print(line)
    if html is not None:
        print(f"  report: {html}")
    return 0
