"""``boom-advisory tables build|info|verify``: precomputed boom tables off the hot path."""

from __future__ import annotations

import argparse
import sys
import time

from advisory.cli.options import add_aircraft_option
from advisory.physics.aircraft import default_aircraft, load_aircraft
from advisory.physics.atmosphere import standard_atmosphere
from advisory.physics.profile_file import load_profile
from advisory.schema import SAFETY_CAUTION
from advisory.tables.build import BuildInputs, build_table_arrays, provenance
from advisory.tables.grid import default_grid, load_grid
from advisory.tables.store import write_table_file
from advisory.tables.table import BoomTable
from advisory.tables.verify import verify_table


def add_parser(sub: argparse._SubParsersAction) -> None:
    """Register ``boom-advisory tables build|info|verify``."""
    p = sub.add_parser("tables", help="build, inspect and verify precomputed boom tables",
                       description="Build, inspect and verify precomputed boom tables. "
                                   + SAFETY_CAUTION)
    tsub = p.add_subparsers(dest="tables_command", required=True)
    b = tsub.add_parser("build", help="run the physics over a grid and write a table file")
    add_aircraft_option(b)
    g = b.add_mutually_exclusive_group()
    g.add_argument("--atmosphere", metavar="FILE", help="atmosphere profile (CSV or TOML)")
    g.add_argument("--temp-offset-c", type=float, default=0.0,
                   help="standard atmosphere temperature offset, degC (0)")
    b.add_argument("--grid", metavar="FILE", help="grid file (TOML); default grid otherwise")
    b.add_argument("--workers", type=int, default=0, help="worker processes (default: cores)")
    b.add_argument("-o", "--output", required=True, metavar="TABLE", help="table file to write")
    b.set_defaults(func=run_build)
    i = tsub.add_parser("info", help="print what a table was built from")
    i.add_argument("table", metavar="TABLE")
    i.set_defaults(func=run_info)
    v = tsub.add_parser("verify", help="re-trace random points and print the table's error")
    v.add_argument("table", metavar="TABLE")
    v.add_argument("--samples", type=int, default=40, help="random points (40)")
    v.add_argument("--seed", type=int, default=1, help="random seed (1)")
    v.set_defaults(func=run_verify)


def run_build(args: argparse.Namespace) -> int:
    """``tables build``: exit 0 with the table file written."""

    aircraft = load_aircraft(args.aircraft) if args.aircraft else default_aircraft()
    if args.atmosphere:
        atm = load_profile(args.atmosphere)
    else:
        atm = standard_atmosphere(args.temp_offset_c)
    grid = load_grid(args.grid, atm.has_wind) if args.grid else default_grid(atm.has_wind)
    inputs = BuildInputs(aircraft=aircraft, atmosphere=atm, grid=grid)
    t0 = time.monotonic()
    arrays = build_table_arrays(inputs, workers=args.workers or None)
    seconds = time.monotonic() - t0
    digest = write_table_file(args.output, provenance(inputs, seconds), arrays)
    print(f"wrote {args.output}: {arrays['cells'].shape[:4]} cells x {grid.n_eta} azimuths "
          f"in {seconds:.1f} s, payload SHA-256 {digest}")
    print(SAFETY_CAUTION)
    return 0


def run_info(args: argparse.Namespace) -> int:
    """``tables info``: print the table's provenance; exit 0."""

    table = BoomTable.load(args.table)
    for line in table.info_lines():
        print(line)
    print(SAFETY_CAUTION)
    return 0


def run_verify(args: argparse.Namespace) -> int:
    """``tables verify``: exit 0 when within budget, 1 otherwise."""

    table = BoomTable.load(args.table)
    report = verify_table(table, samples=args.samples, seed=args.seed)
    for line in report.lines():
        print(line)
    print(SAFETY_CAUTION)
    sys.stdout.flush()
    return 0 if report.within_budget else 1
