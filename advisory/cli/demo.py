"""``boom-advisory demo``: replay the bundled demo flights and write the bench report.

The demo builds each scenario's small table once (cached in the user cache, see
:mod:`advisory.tables.cache`), replays every flight through the live loop in parallel,
prints the crew cues as they fired, checks each flight against its expected advisories
and writes the report (default ``./demo_report/report.html``). It works from an installed
wheel in any directory (:func:`advisory.bench.demo.demo_flights_dir`) and writes nothing
into the package.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import argparse
import json
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any

from advisory.bench.batch import replay_many
from advisory.bench.demo import demo_flights
from advisory.bench.report import write_report
from advisory.bench.result import ReplayResult, cue_lines, read_notes, summary_table
from advisory.bench.scenario import prepare
from advisory.cli.options import add_json_option
from advisory.schema import SAFETY_CAUTION

DEFAULT_OUT = "demo_report"


def add_parser(sub: argparse._SubParsersAction) -> None:
    """Register ``boom-advisory demo``."""
    p = sub.add_parser(
        "demo", help="replay the bundled demo flights, print the cues, write the report",
        description="Replay the invented demo flights (replay_logs/) through the live "
                    "loop, check them against their expected advisories and write an HTML "
                    "report. " + SAFETY_CAUTION)
    p.add_argument("--out", default=DEFAULT_OUT, metavar="DIR",
                   help=f"report directory (default ./{DEFAULT_OUT})")
    p.add_argument("--logs", metavar="DIR", help="scenario root (default: the bundled "
                   "demo flights)")
    p.add_argument("--only", nargs="+", metavar="NAME", help="replay only these scenarios")
    p.add_argument("--speed", default="max", metavar="1|10|max",
                   help="replay speed relative to real time (default max)")
    p.add_argument("--jobs", type=int, default=0,
                   help="worker processes (default: one per core)")
    add_json_option(p)
    p.set_defaults(func=run_demo)


def _selected(logs: str | None, only: list[str] | None) -> list[Path]:
    """The scenario directories to replay (``--logs``, ``--only``)."""
    flights = demo_flights(logs)
    if only:
        names = {d.name for d in flights}
        unknown = sorted(set(only) - names)
        if unknown:
            raise ValueError(f"--only: unknown scenario(s) {unknown} (have: "
                             f"{', '.join(sorted(names))})")
        flights = [d for d in flights if d.name in only]
    return flights


def _print_result(say: Callable[..., Any], res: ReplayResult) -> None:
    say(f"\n== {res.setup.title or res.name}  [{res.name}]")
    for line in cue_lines(res):
        say("  " + line)
    for note in read_notes(res):
        say("  note: " + note)
    if res.diffs:
        say("  DIFFERS from the expected advisories:")
        for d in res.diffs:
            say("    " + d)
    else:
        say("  matches the expected advisories")


def _quiet(*_args: Any, **_kwargs: Any) -> None:
    return None


def run_demo(args: argparse.Namespace) -> int:
    """``demo``: exit 0 when every flight matches its expected advisories, else 1."""
    say: Callable[..., Any] = _quiet if args.json else print
    if args.jobs < 0:
        raise ValueError(f"--jobs: {args.jobs} must be >= 0")
    t_start = time.monotonic()
    say(SAFETY_CAUTION)
    flights = _selected(args.logs, args.only)
    say(f"Replaying {len(flights)} invented demo flight(s) from {flights[0].parent}")
    setups = [prepare(d, expect="auto", speed=args.speed, collect=True, quiet=args.json)
              for d in flights]
    t_tables = time.monotonic()
    say(f"tables ready in {t_tables - t_start:.1f} s")
    results = []
    for res in replay_many(setups, args.jobs or None):
        results.append(res)
        _print_result(say, res)
    flight_s = sum(r.duration_s for r in results)
    t_done = time.monotonic()
    report = write_report(results, args.out, title="boom-advisory demo flights")
    say("")
    say(summary_table(results))
    say(f"\n{len(results)} flight(s), {flight_s / 60:.1f} min of flight replayed in "
        f"{t_done - t_tables:.1f} s; total {time.monotonic() - t_start:.1f} s")
    say(f"report: {report}")
    say(SAFETY_CAUTION)
    ok = all(not r.diffs for r in results)
    if args.json:
        print(json.dumps({"caution": SAFETY_CAUTION, "report": str(report),
                          "all_expected": ok,
                          "results": [r.to_json() for r in results]}, indent=2))
    return 0 if ok else 1
