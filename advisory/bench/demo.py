"""``boom-advisory demo``: replay the bundled demo flights and write the bench report.

The demo flights live in ``replay_logs/`` at the top of the repository: invented
scenarios over invented geography (fictional towns and parks over open ocean around
30 N 140 W), flown by the fictional demo aircraft. Each directory holds the record file,
its zones, a small table grid, the atmosphere when it is not the standard one, and the
expected advisories. The demo builds each scenario's small table once (cached, see
:mod:`advisory.tables.cache`), replays every flight through the live loop in parallel,
prints the crew cues as they fired, checks each flight against its expected advisories
and writes the report (default ``./demo_report/report.html``).

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import argparse
import json
import sys
import time
from pathlib import Path

from advisory import SAFETY_CAUTION

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

DEFAULT_OUT = "demo_report"


def demo_root() -> Path:
    """The bundled ``replay_logs`` directory (beside the package in a checkout)."""
    return Path(__file__).resolve().parents[2] / "replay_logs"


def demo_flights(root: str | Path | None = None) -> list[Path]:
    """The scenario directories under ``root``, in their ``order``.

    Raises
    ------
    ValueError
        When ``root`` holds no scenario (the message names the directory).
    """
    root = Path(root) if root is not None else demo_root()
    if not root.is_dir():
        raise ValueError(f"--logs: {root} is not a directory (the demo flights live in "
                         "replay_logs/ of a boom-advisory checkout)")
    found = []
    for d in sorted(root.iterdir()):
        f = d / "scenario.toml"
        if f.is_file():
            try:
                order = tomllib.loads(f.read_text(encoding="utf-8")).get("order", 99)
            except (OSError, tomllib.TOMLDecodeError) as exc:
                raise ValueError(f"scenario file {f}: cannot read ({exc})") from exc
            found.append((order, d.name, d))
    if not found:
        raise ValueError(f"--logs: no scenario directories (with scenario.toml) in {root}")
    return [d for _, _, d in sorted(found)]


def add_parser(sub: argparse._SubParsersAction) -> None:
    """Register ``boom-advisory demo``."""
    p = sub.add_parser(
        "demo", help="replay the bundled demo flights, print the cues, write the report",
        description="Replay the invented demo flights of replay_logs/ through the live "
                    "loop, check them against their expected advisories and write an HTML "
                    "report. " + SAFETY_CAUTION)
    p.add_argument("--out", default=DEFAULT_OUT, metavar="DIR",
                   help=f"report directory (default ./{DEFAULT_OUT})")
    p.add_argument("--logs", metavar="DIR", help="scenario root (default: the bundled "
                   "replay_logs/)")
    p.add_argument("--only", nargs="+", metavar="NAME", help="replay only these scenarios")
    p.add_argument("--speed", default="max", metavar="1|10|max",
                   help="replay speed relative to real time (default max)")
    p.add_argument("--jobs", type=int, default=0,
                   help="worker processes (default: one per core)")
    p.add_argument("--json", action="store_true", help="print one JSON object at the end")
    p.set_defaults(func=run_demo)


def run_demo(args: argparse.Namespace) -> int:
    """``demo``: exit 0 when every flight matches its expected advisories, else 1."""
    from advisory.bench.replay import (
        cue_lines,
        prepare,
        read_notes,
        replay_many,
        summary_table,
    )
    from advisory.bench.report import write_report

    human = not args.json
    say = print if human else (lambda *a, **k: None)
    t_start = time.monotonic()
    say(SAFETY_CAUTION)
    flights = demo_flights(args.logs)
    if args.only:
        names = {d.name for d in flights}
        unknown = sorted(set(args.only) - names)
        if unknown:
            raise ValueError(f"--only: unknown scenario(s) {unknown} (have: "
                             f"{', '.join(sorted(names))})")
        flights = [d for d in flights if d.name in args.only]
    say(f"Replaying {len(flights)} invented demo flight(s) from {flights[0].parent}")
    setups = [prepare(d, expect="auto", speed=args.speed, collect=True, quiet=args.json)
              for d in flights]
    t_tables = time.monotonic()
    say(f"tables ready in {t_tables - t_start:.1f} s")
    results = []
    for res in replay_many(setups, args.jobs or None):
        results.append(res)
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
