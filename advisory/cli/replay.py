"""``boom-advisory replay``: replay recorded flight logs through the live loop.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import argparse
import dataclasses
import json
import sys

from advisory.bench.batch import TruthRequest, replay_many
from advisory.bench.campaign_engine import DaskEngine
from advisory.bench.edge_band import MAX_CONDITIONS
from advisory.bench.replay_truth import truth_lines
from advisory.bench.report import write_report
from advisory.bench.result import ReplayResult, cue_lines, read_notes, summary_table
from advisory.bench.scenario import ReplayError, prepare
from advisory.cli.options import (
    add_aircraft_option,
    add_config_option,
    add_json_option,
    add_table_option,
    add_zones_option,
)
from advisory.schema import SAFETY_CAUTION

MAX_WORKERS = 1024  #: most Dask workers a local cluster may be asked for
MAX_EDGE_BAND = 100  #: most conditions a log's edge band may be sampled at


def add_parser(sub: argparse._SubParsersAction) -> None:
    """Register ``boom-advisory replay``."""
    p = sub.add_parser(
        "replay", help="replay recorded flight logs through the live loop",
        description="Feed recorded input through the same decoder, validator and advisor "
                    "as 'run', on the recorded clock (identical output at any speed). "
                    + SAFETY_CAUTION)
    add_arguments(p)
    p.set_defaults(func=run_replay)


def add_arguments(p: argparse.ArgumentParser) -> None:
    """The options of ``replay``."""
    p.add_argument("logs", nargs="+", metavar="LOG",
                   help="record file(s), or scenario directories holding flight.rec")
    p.add_argument("--speed", default="max", metavar="1|10|max",
                   help="replay speed relative to real time (default max)")
    add_zones_option(p, help_text="no-boom zones (GeoJSON); default: the scenario.toml "
                                  "beside the log names it, else (with --trust-log-paths) "
                                  "the zone file a 'run' recorded in its start event")
    add_aircraft_option(p, help_text="aircraft file (default: scenario's or the bundled "
                                     "demo aircraft)")
    add_table_option(p, help_text="boom table file (default: built once from the scenario "
                                  "and cached, else (with --trust-log-paths) the one a "
                                  "'run' recorded, else the default table)")
    add_config_option(p)
    p.add_argument("--expect", metavar="FILE",
                   help="expected advisories (JSON); 'auto': the expected.json named by "
                        "each log's scenario.toml")
    p.add_argument("--report", metavar="DIR", help="write report.html and PNG figures here")
    p.add_argument("--edge-band", type=int, default=MAX_CONDITIONS, metavar="N",
                   help="with --report: sample the carpet edge's confidence band at up to N "
                   f"flight conditions per log (about 2.5 s each; 0: none; default "
                   f"{MAX_CONDITIONS})")
    p.add_argument("--truth", action="store_true",
                   help="also trace the ground truth of each flight from its air-data "
                        "frames (where every boom landed) and score the advice against it")
    add_json_option(p)
    p.add_argument("--send", metavar="URL",
                   help="also send the recorded input to this transport (e.g. "
                        "udp://127.0.0.1:5600) at --speed, to drive a live 'run'")
    p.add_argument("--input-format", choices=("stream", "datagram", "arinc429"),
                   help="what the recorded bytes are (default: scenario, recorded "
                        "settings, else stream)")
    p.add_argument("--rate-hz", type=float, help="advisor steps per second (default: "
                   "scenario, recorded settings, else 10)")
    p.add_argument("--clock", choices=("auto", "recorded", "schedule"), default="auto",
                   help="poll times: recorded outputs' times (auto when present) or the "
                        "loop's schedule")
    p.add_argument("--trust-log-paths", action="store_true",
                   help="use the zone and table files a 'run' named in the log's start "
                        "event (off: give --zones / --tables, a log is data, not a "
                        "command)")
    engine = p.add_mutually_exclusive_group()
    engine.add_argument("--jobs", type=int, default=0,
                        help="worker processes for several logs (default: one per core)")
    engine.add_argument("--workers", type=int, metavar="K",
                        help="replay the logs on a local Dask cluster of K worker "
                             "processes on 127.0.0.1 (pip install 'boom-advisory[campaign]')")
    engine.add_argument("--scheduler", metavar="ADDRESS",
                        help="replay the logs on the Dask scheduler at ADDRESS, e.g. "
                             "tcp://host:8786 (the workers must see the log files)")


def _print_result(res: ReplayResult) -> None:
    """One replay's cues, notes and checks, for people."""
    print(f"\n== {res.name} ({res.setup.log})")
    for line in cue_lines(res):
        print("  " + line)
    for note in read_notes(res):
        print("  note: " + note)
    if res.bad_records:
        print(f"  {res.bad_records} bad record(s) skipped (see the notes)")
    if res.recorded_match is not None:
        print("  recorded outputs: " + ("reproduced byte for byte"
                                        if res.recorded_match else res.first_mismatch))
    if res.setup.send:
        print(f"  sent {res.sent} chunk(s) to {res.setup.send}"
              + (f", {res.send_errors} failed" if res.send_errors else ""))
    if res.truth is not None:
        for line in truth_lines(res.truth):
            print("  " + line)
    if res.diffs:
        print(f"  DIFFERENCES from {res.setup.expect}:")
        for d in res.diffs:
            print("    " + d)
    elif res.diffs is not None:
        print(f"  matches {res.setup.expect}")


def _engine(args: argparse.Namespace) -> DaskEngine | None:
    """The Dask engine ``--workers`` / ``--scheduler`` ask for (None: local processes)."""
    if args.scheduler is not None:
        if not args.scheduler.strip():
            raise ReplayError("--scheduler: empty address")
        engine = DaskEngine(address=args.scheduler.strip())
    elif args.workers is not None:
        if not 1 <= args.workers <= MAX_WORKERS:
            raise ReplayError(f"--workers: {args.workers} is not in 1..{MAX_WORKERS}")
        engine = DaskEngine(workers=args.workers)
    else:
        return None
    engine.check()  # Dask missing: one line with the install hint, before any work
    return engine


def run_replay(args: argparse.Namespace) -> int:
    """``replay``: exit 0, or 1 when a log differs from its expected advisories."""
    if args.send and len(args.logs) > 1:
        raise ReplayError("--send: give exactly one LOG to send")
    if args.jobs < 0:
        raise ReplayError(f"--jobs: {args.jobs} must be >= 0")
    if not 0 <= args.edge_band <= MAX_EDGE_BAND:
        raise ReplayError(f"--edge-band: {args.edge_band} is not in 0..{MAX_EDGE_BAND}")
    engine = _engine(args)
    human = not args.json
    if human:
        print(SAFETY_CAUTION)
    setups = [prepare(log, zones=args.zones, aircraft=args.aircraft, table=args.table,
                      config=args.config, expect=args.expect, speed=args.speed,
                      send=args.send, collect=bool(args.report),
                      input_format=args.input_format, rate_hz=args.rate_hz,
                      clock=args.clock, quiet=args.json,
                      trust_log_paths=args.trust_log_paths)
              for log in args.logs]
    setups = [dataclasses.replace(s, edge_conditions=args.edge_band) for s in setups]
    results = []
    truth = TruthRequest(args.aircraft, bool(args.report)) if args.truth else None
    for res in replay_many(setups, args.jobs or None, truth=truth, engine=engine):
        results.append(res)
        if human:
            _print_result(res)
        else:
            for note in read_notes(res):
                print("note: " + note, file=sys.stderr)
    report_path = write_report(results, args.report) if args.report else None
    if args.json:
        print(json.dumps({"caution": SAFETY_CAUTION,
                          "results": [r.to_json() for r in results],
                          "report": None if report_path is None else str(report_path)},
                         indent=2))
    else:
        print()
        print(summary_table(results))
        if report_path is not None:
            print(f"\nreport: {report_path}")
        print(SAFETY_CAUTION)
    return 1 if any(r.diffs for r in results) else 0


def replay_command(argv: list[str]) -> int:
    """Run ``boom-advisory replay ARGV`` in this process; the exit code (2: bad input).

    The benchmark's replay section is handed this, so that it measures the whole command
    without importing the command line.
    """
    p = argparse.ArgumentParser(prog="boom-advisory replay")
    add_arguments(p)
    args = p.parse_args(argv)
    try:
        return run_replay(args)
    except ValueError as exc:
        print(f"boom-advisory replay: error: {exc}", file=sys.stderr)
        return 2
