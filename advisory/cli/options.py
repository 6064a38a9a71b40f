"""Option definitions shared by the sub-commands: one spelling and one help text each."""

from __future__ import annotations

import argparse


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
