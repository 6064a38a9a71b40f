"""Command-line entry point: ``boom-advisory <command> ...``.

Every command prints the advisory-only caution on human-readable output. Bad arguments
get one line naming the argument and the value, and exit code 2.
"""

from __future__ import annotations

import argparse
import math
import sys
from collections.abc import Sequence

from advisory import SAFETY_CAUTION

EXIT_USAGE = 2


class UsageError(Exception):
    """Bad command-line input; the message names the argument and the value."""


def _finite(name: str, value: float) -> float:
    if not math.isfinite(value):
        raise UsageError(f"{name}: {value} is not a finite number")
    return value


def _add_predict(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser(
        "predict",
        help="carpet, cutoff Mach and ground overpressure for one flight condition",
        description="Predict the boom carpet for one steady flight condition.",
    )
    p.add_argument("--mach", type=float, required=True, help="Mach number")
    p.add_argument("--altitude-ft", type=float, required=True,
                   help="geometric altitude above mean sea level, ft")
    p.add_argument("--heading-deg", type=float, default=0.0, help="true heading, deg (0)")
    p.add_argument("--fpa-deg", type=float, default=0.0, help="flight-path angle, deg (0)")
    p.add_argument("--temp-offset-c", type=float, default=0.0,
                   help="temperature offset from the standard atmosphere, degC (0)")
    p.add_argument("--atmosphere", metavar="FILE",
                   help="atmosphere profile (CSV or TOML) instead of the standard atmosphere")
    p.add_argument("--ground-elevation-ft", type=float, default=0.0,
                   help="ground elevation above mean sea level, ft (0)")
    p.add_argument("--aircraft", metavar="FILE",
                   help="aircraft description (TOML); default: the bundled demo aircraft")
    p.add_argument("--load-factor", type=float, default=1.0,
                   help="lift over weight (1 in steady flight)")
    p.add_argument("--table", metavar="TABLE",
                   help="answer from a precomputed table instead of direct tracing")
    p.add_argument("--json", action="store_true", help="print one JSON object")
    p.set_defaults(func=_run_predict)


def _run_predict(args: argparse.Namespace) -> int:
    from advisory.bench.predict import PredictInputs, predict, summary_text, to_json

    inputs = PredictInputs(
        mach=_finite("--mach", args.mach),
        altitude_ft=_finite("--altitude-ft", args.altitude_ft),
        heading_deg=_finite("--heading-deg", args.heading_deg),
        fpa_deg=_finite("--fpa-deg", args.fpa_deg),
        temp_offset_c=_finite("--temp-offset-c", args.temp_offset_c),
        ground_elevation_ft=_finite("--ground-elevation-ft", args.ground_elevation_ft),
        atmosphere_file=args.atmosphere,
        aircraft_file=args.aircraft,
        load_factor=_finite("--load-factor", args.load_factor),
        table_file=args.table,
    )
    if args.table:
        for flag, given in (("--aircraft", args.aircraft), ("--atmosphere", args.atmosphere),
                            ("--temp-offset-c", args.temp_offset_c != 0.0),
                            ("--load-factor", args.load_factor != 1.0)):
            if given:
                raise UsageError(f"{flag}: cannot be combined with --table (the table fixes "
                                 "aircraft, atmosphere and load factor 1); omit --table to "
                                 "trace directly")
    if not (0.0 < inputs.load_factor <= 9.0):
        raise UsageError(f"--load-factor: {args.load_factor} must be in (0, 9]")
    if inputs.mach <= 0.0:
        raise UsageError(f"--mach: {args.mach} must be greater than 0")
    if inputs.altitude_ft <= inputs.ground_elevation_ft:
        raise UsageError(
            f"--altitude-ft: {args.altitude_ft} must be above the ground elevation "
            f"({args.ground_elevation_ft} ft)"
        )
    result = predict(inputs)
    if args.json:
        print(to_json(result))
    else:
        print(summary_text(result))
    return 0


def build_parser() -> argparse.ArgumentParser:
    """The argument parser with every sub-command."""
    parser = argparse.ArgumentParser(
        prog="boom-advisory",
        description="Sonic-boom carpet prediction and crew advisories. " + SAFETY_CAUTION,
    )
    sub = parser.add_subparsers(dest="command", required=True)
    _add_predict(sub)
    from advisory.cli.tables import add_parser as add_tables

    add_tables(sub)
    from advisory.cli.check import add_parser as add_check

    add_check(sub)
    from advisory.service.runner import add_parser as add_run

    add_run(sub)
    from advisory.cli.bench import add_parser as add_bench

    add_bench(sub)
    from advisory.cli.replay import add_parser as add_replay

    add_replay(sub)
    from advisory.cli.demo import add_parser as add_demo

    add_demo(sub)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; returns the process exit code."""
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return int(args.func(args))
    except UsageError as exc:
        print(f"boom-advisory {args.command}: error: {exc}", file=sys.stderr)
        return EXIT_USAGE
    except ValueError as exc:  # domain errors (atmosphere, flight condition, files)
        print(f"boom-advisory {args.command}: error: {exc}", file=sys.stderr)
        return EXIT_USAGE


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
