"""What the sub-commands share: one spelling and one help text per option, and the one
error type for bad command-line input (``main`` prints it on one line, exit code 2)."""

from __future__ import annotations

import argparse
import math

#: Exit code of a command given bad input (the argparse convention).
EXIT_USAGE = 2


class UsageError(Exception):
    """Bad command-line input; the message names the argument and the value."""


def finite(name: str, value: float) -> float:
    """``value`` when it is a finite number, else :class:`UsageError` naming ``name``."""
    if not math.isfinite(value):
        raise UsageError(f"{name}: {value} is not a finite number")
    return value


def add_table_option(p: argparse.ArgumentParser, help_text: str | None = None) -> None:
    """``--table FILE`` (dest ``table``), with ``--tables`` kept as a hidden alias."""
    p.add_argument("--table", dest="table", metavar="FILE",
                   help=help_text or "boom table file (default: the default table for the "
                                     "aircraft, built once and cached)")
    p.add_argument("--tables", dest="table", metavar="FILE", help=argparse.SUPPRESS)


def add_zones_option(p: argparse.ArgumentParser, required: bool = False,
                     help_text: str | None = None) -> None:
    """``--zones FILE``: no-boom zones (GeoJSON)."""
    p.add_argument("--zones", metavar="FILE", required=required,
                   help=help_text or "no-boom zones (GeoJSON)")


def add_aircraft_option(p: argparse.ArgumentParser, help_text: str | None = None) -> None:
    """``--aircraft FILE``: aircraft description (TOML)."""
    p.add_argument("--aircraft", metavar="FILE",
                   help=help_text or "aircraft file (TOML; default: the bundled demo aircraft)")


def add_config_option(p: argparse.ArgumentParser) -> None:
    """``--config FILE``: advisor thresholds (TOML)."""
    p.add_argument("--config", metavar="FILE", help="advisor thresholds (TOML, see "
                                                    "advisory/pipeline/config.py)")


def add_json_option(p: argparse.ArgumentParser) -> None:
    """``--json``: print one JSON object."""
    p.add_argument("--json", action="store_true", help="print one JSON object")
