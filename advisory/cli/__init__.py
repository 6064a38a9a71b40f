"""Command-line entry point: ``boom-advisory <command> ...``.

One module per command (``advisory/cli/<command>.py``, each with ``add_parser(sub)``
registering its arguments and a ``run``-style function as ``func``); this module builds
the parser from them and holds the shared error handling. Every command prints the
advisory-only caution on human-readable output. Bad arguments get one line naming the
argument and the value, and exit code 2.
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence

from advisory.cli import bench, campaign, check, demo, predict, replay, run, simulate, tables
from advisory.cli.options import EXIT_USAGE, UsageError
from advisory.schema import SAFETY_CAUTION

__all__ = ["EXIT_USAGE", "UsageError", "build_parser", "main"]


def build_parser() -> argparse.ArgumentParser:
    """The argument parser with every sub-command, in the order ``--help`` lists them."""
    parser = argparse.ArgumentParser(
        prog="boom-advisory",
        description="Sonic-boom carpet prediction and crew advisories. " + SAFETY_CAUTION,
    )
    sub = parser.add_subparsers(dest="command", required=True)
    predict.add_parser(sub)
    tables.add_parser(sub)
    check.add_parser(sub)
    run.add_parser(sub)
    bench.add_parser(sub)
    replay.add_parser(sub)
    demo.add_parser(sub)
    simulate.add_parser(sub)
    campaign.add_parser(sub)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; returns the process exit code.

    A :class:`UsageError` or a ``ValueError`` from the command (a domain error: bad
    atmosphere, flight condition or file, its message naming the field and the value),
    or a file that is missing or cannot be opened, prints
    ``boom-advisory <command>: error: <message>`` on one line of stderr and returns
    :data:`EXIT_USAGE`.
    """
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return int(args.func(args))
    except (UsageError, ValueError) as exc:
        print(f"boom-advisory {args.command}: error: {_one_line(exc)}", file=sys.stderr)
        return EXIT_USAGE
    except (FileNotFoundError, IsADirectoryError, NotADirectoryError, PermissionError) as exc:
        # a named file that cannot be opened is bad input like any other (one line, exit 2)
        print(f"boom-advisory {args.command}: error: {exc.filename}: {exc.strerror}",
              file=sys.stderr)
        return EXIT_USAGE


def _one_line(exc: Exception) -> str:
    """The error message on one line (a multi-line message is joined with ``; ``)."""
    return "; ".join(part.strip() for part in str(exc).splitlines() if part.strip())


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
