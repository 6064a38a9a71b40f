"""``boom-advisory campaign``: randomized closed-loop encounters, alerting metrics with 95 %
intervals (docs/scenarios.md, "Metrics of a campaign").

Engines (one clear scheme): no option runs a process pool on this machine, one process
per core (``--processes K`` sets its size); ``--workers K`` starts a local Dask cluster
(``LocalCluster`` on 127.0.0.1, K worker processes of one thread each) and runs there;
``--scheduler ADDRESS`` submits the same tasks to a running Dask scheduler. The Dask
options need the optional extra ``boom-advisory[campaign]``. Same seed, same results,
whatever the engine. With ``--out DIR`` each finished encounter is journalled to
``DIR/records.jsonl`` as it comes back; ``--resume`` flies only what the journal lacks
(:mod:`advisory.bench.campaign_journal`). Progress goes to stderr; exit code 1 when an
encounter failed (each is named), 2 for bad options.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import argparse
import json
import sys
import time
from pathlib import Path

from advisory.bench.campaign import MAX_COUNT, run_campaign
from advisory.bench.campaign_engine import DaskEngine, Engine, PoolEngine
from advisory.bench.campaign_journal import JOURNAL_NAME, Journal, JournalError, campaign_header
from advisory.bench.campaign_report import summary, text_lines, write_outputs
from advisory.bench.closed_loop import run_encounter
from advisory.cli.options import UsageError, add_json_option
from advisory.pipeline.config import load_config
from advisory.schema import SAFETY_CAUTION

DESCRIPTION = ("Fly randomized encounters closed-loop (crew ignores the cues, crew follows "
               "them), measure them against the truth and report missed, late and nuisance "
               "alerts, lead time, resolution success and unavailable time with 95 % "
               "intervals. " + SAFETY_CAUTION)
MAX_WORKERS = 1024
EXIT_FAILED = 1  #: some encounter failed (named in the output)


def add_parser(sub: argparse._SubParsersAction) -> None:
    """Register ``boom-advisory campaign``."""
    p = sub.add_parser("campaign", help="randomized closed-loop encounters and alerting "
                                        "metrics", description=DESCRIPTION)
    p.add_argument("--count", type=int, required=True, metavar="N",
                   help="encounters to sample and fly (each twice)")
    p.add_argument("--seed", type=int, default=0, metavar="S",
                   help="campaign seed (default: %(default)s)")
    engine = p.add_mutually_exclusive_group()
    engine.add_argument("--processes", type=int, metavar="K",
                        help="process pool of K processes (the default engine; default: "
                             "one per core)")
    engine.add_argument("--workers", type=int, metavar="K",
                        help="start a local Dask cluster of K worker processes on 127.0.0.1 "
                             "and run there (needs boom-advisory[campaign])")
    engine.add_argument("--scheduler", metavar="ADDRESS",
                        help="run on the Dask scheduler at ADDRESS, e.g. tcp://host:8786 "
                             "(needs boom-advisory[campaign])")
    p.add_argument("--known", action="store_true",
                   help="the advisor knows what it assumes: it is given the true air, each "
                        "zone's ground elevation (in its zone file) and a crew that reacts, "
                        "slows, banks and rolls as its configuration says (the same "
                        "flights otherwise)")
    p.add_argument("--spread", action="store_true",
                   help="as --known, but the true air is the advisor's plus an error drawn "
                        "from the default spread of the air below (issue 16: calibration of "
                        "its confidence)")
    p.add_argument("--near-cutoff", action="store_true",
                   help="as --spread, with every flight starting within -0.04/+0.03 of the "
                        "cutoff Mach of the advisor's air (where its margin decides)")
    p.add_argument("--config", metavar="FILE",
                   help="advisor thresholds (TOML) for every encounter, e.g. [confidence] "
                        "confidence = 0 for the fixed-margin baseline")
    p.add_argument("--out", metavar="DIR",
                   help="write encounters.csv, summary.json and summary.html here, and "
                        "each finished encounter's record to records.jsonl as it comes "
                        "back")
    p.add_argument("--resume", action="store_true",
                   help="with --out: read DIR/records.jsonl of the same campaign (seed, "
                        "options, config and code) and fly only the encounters it does "
                        "not hold; a larger --count extends it")
    add_json_option(p)
    p.set_defaults(func=campaign_command)


def _count(name: str, value: int | None, hi: int) -> None:
    if value is not None and not 1 <= value <= hi:
        raise UsageError(f"{name}: {value} is not in 1..{hi}")


def engine_from(args: argparse.Namespace) -> Engine:
    """The engine the options ask for; UsageError names a bad option."""
    _count("--processes", args.processes, MAX_WORKERS)
    _count("--workers", args.workers, MAX_WORKERS)
    if args.scheduler is not None:
        if not args.scheduler.strip():
            raise UsageError("--scheduler: empty address")
        engine = DaskEngine(address=args.scheduler.strip())
    elif args.workers is not None:
        engine = DaskEngine(workers=args.workers)
    else:
        return PoolEngine(args.processes)
    engine.check()  # Dask missing: one line with the install hint, before any work
    return engine


class _Progress:
    """``campaign: done/total`` on stderr, at most about once a second, and the last."""

    def __init__(self) -> None:
        self.t0 = self.last = time.monotonic()

    def __call__(self, done: int, total: int, failed: int) -> None:
        now = time.monotonic()
        if done < total and now - self.last < 1.0:
            return
        self.last = now
        extra = f", {failed} failed" if failed else ""
        print(f"campaign: {done}/{total} encounters{extra}, {now - self.t0:.0f} s",
              file=sys.stderr, flush=True)


def campaign_command(args: argparse.Namespace) -> int:
    """``campaign``: 0, :data:`EXIT_FAILED` when an encounter failed, 2 for bad options."""
    _count("--count", args.count, MAX_COUNT)
    if args.seed < 0:
        raise UsageError(f"--seed: {args.seed} is not >= 0")
    out = Path(args.out) if args.out else None
    if out is not None and out.exists() and not out.is_dir():
        raise UsageError(f"--out: {args.out} exists and is not a directory")
    config = None
    if args.config:
        load_config(args.config)  # a bad file: one line, exit 2, before any work
        config = str(Path(args.config).resolve())
    if args.resume and out is None:
        raise UsageError("--resume: needs --out DIR (the campaign's journal is there)")
    engine = engine_from(args)
    journal = None
    if out is not None:
        header = campaign_header(args.seed, args.known, args.spread, args.near_cutoff,
                                 config)
        try:
            journal = Journal(out / JOURNAL_NAME, header, args.resume)
        except JournalError as exc:
            raise UsageError(str(exc)) from None
        if journal.kept_as is not None:
            print(f"campaign: the earlier journal is kept as {journal.kept_as} (--resume "
                  "continues one)", file=sys.stderr)
        if journal.done:
            print(f"campaign: {len(journal.done)} finished encounters read back from "
                  f"{journal.path}", file=sys.stderr)
    try:
        result = run_campaign(args.count, args.seed, engine, run_encounter,
                              progress=_Progress(), known=args.known, spread=args.spread,
                              config=config, near_cutoff=args.near_cutoff,
                              done=journal.done if journal else None,
                              on_record=journal.append if journal else None)
    finally:
        if journal is not None:
            journal.close()
    if out is not None:
        for path in write_outputs(result, out):
            print(f"campaign: wrote {path}", file=sys.stderr)
    if args.json:
        print(json.dumps(summary(result), indent=2))
    else:
        print("\n".join(text_lines(result)))
    return EXIT_FAILED if result.metrics["failed"] else 0
