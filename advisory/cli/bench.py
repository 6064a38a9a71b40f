"""``boom-advisory bench``: measure every budget and print each figure beside it.

Also run by ``python benchmarks/run.py``. The options are checked here (one line naming
the option and the value, exit code 2); :func:`advisory.bench.benchmark.run_benchmark`
does the measuring.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import argparse
import tempfile
from pathlib import Path

from advisory.bench.benchmark import SECTIONS, BenchOptions, run_benchmark
from advisory.cli.options import add_json_option, add_table_option
from advisory.cli.replay import replay_command
from advisory.schema import SAFETY_CAUTION

DESCRIPTION = ("Measure every budget of the issues and print each figure beside its budget, "
               "with the machine it ran on. " + SAFETY_CAUTION)
DEFAULT_WORK_DIR = str(Path(tempfile.gettempdir()) / "boom-advisory-bench")


def add_parser(sub: argparse._SubParsersAction) -> None:
    """Register ``boom-advisory bench``."""
    p = sub.add_parser("bench", help="measure every budget against its figure",
                       description=DESCRIPTION)
    p.add_argument("--quick", action="store_true",
                   help="tiny sizes and a tiny table grid (smoke test; figures not meaningful)")
    p.add_argument("--skip-build", action="store_true",
                   help="do not time the table build; reuse the cached table")
    add_table_option(p, help_text="use this table file for the sections after the build")
    p.add_argument("--work-dir", metavar="DIR", default=DEFAULT_WORK_DIR,
                   help="where the cached table, zones and replay log go "
                        "(default: %(default)s)")
    p.add_argument("--only", metavar="SECTIONS",
                   help=f"comma-separated subset of {','.join(SECTIONS)}")
    add_json_option(p)
    p.add_argument("--strict", action="store_true",
                   help="exit 1 when a budget is short or not measured")
    p.set_defaults(func=run_bench)


def options_from(args: argparse.Namespace) -> BenchOptions:
    """Check the parsed options; ValueError names the option and the value."""
    selected: tuple[str, ...] = SECTIONS
    if args.only:
        selected = tuple(x.strip() for x in args.only.split(",") if x.strip())
        bad = [x for x in selected if x not in SECTIONS]
        if bad:
            raise ValueError(f"--only: {','.join(bad)} is not one of {','.join(SECTIONS)}")
    table = Path(args.table) if args.table else None
    if table is not None and not table.is_file():
        raise ValueError(f"--table: {args.table} is not a file")
    work_dir = Path(args.work_dir)
    try:
        work_dir.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise ValueError(f"--work-dir: {args.work_dir}: {exc.strerror}") from None
    return BenchOptions(quick=args.quick, skip_build=args.skip_build, table=table,
                        work_dir=work_dir, only=selected, json=args.json, strict=args.strict)


def run_bench(args: argparse.Namespace) -> int:
    """``bench``: 0; 1 with ``--strict`` when a budget is short or not measured."""
    return run_benchmark(options_from(args), replay_command=replay_command)
