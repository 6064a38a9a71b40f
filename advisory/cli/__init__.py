"""Command-line entry point: ``boom-advisory <command> ...``.

One module per command (``advisory/cli/<command>.py``, each with ``add_parser(sub)``
registering its arguments and a ``run``-style function as ``func``); this module builds
the parser from them and holds the shared error handling. Every command prints the
advisory-only caution on human-readable output. Bad arguments get one line naming the
argument and the value, and exit code 2.
"""

from __future__ import annotations

import argparse
import importlib
import sys
from collections.abc import Sequence

from advisory.cli.options import EXIT_USAGE, UsageError
from advisory.schema import SAFETY_CAUTION, VERSION

#: The sub-commands, in the order ``--help`` lists them (one module each).
COMMANDS = ("predict", "tables", "check", "run", "warm", "bench", "replay", "demo",
            "simulate", "campaign")

__all__ = ["EXIT_USAGE", "UsageError", "build_parser", "main"]


def build_parser(only: Sequence[str] = COMMANDS) -> argparse.ArgumentParser:
    """The argument parser with the sub-commands ``only`` (default: every one, in the order
    ``--help`` lists them).

    The command modules are imported here, not at the top, to keep start-up light: ``run``
    loads only its own module so that its first starting frame goes out within a second
    (the other commands load numpy and numba at import).
    """
    parser = argparse.ArgumentParser(
        prog="boom-advisory", formatter_class=argparse.RawDescriptionHelpFormatter,
        description="Sonic-boom carpet prediction and crew advisories. " + SAFETY_CAUTION,
    )
    parser.add_argument("--version", action="version",
                        version=f"boom-advisory {VERSION}\n{SAFETY_CAUTION}")
    sub = parser.add_subparsers(dest="command", required=True)
    for name in only:
        importlib.import_module(f"advisory.cli.{name}").add_parser(sub)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; returns the process exit code.

    A :class:`UsageError` or a ``ValueError`` from the command (a domain error: bad
    atmosphere, flight condition or file, its message naming the field and the value),
    or a file that is missing or cannot be opened, prints
    ``boom-advisory <command>: error: <message>`` on one line of stderr and returns
    :data:`EXIT_USAGE`.
    """
    argv = list(sys.argv[1:] if argv is None else argv)
    light = argv[:1] == ["run"] and not {"-h", "--help"} & set(argv)
    parser = build_parser(("run",) if light else COMMANDS)
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
