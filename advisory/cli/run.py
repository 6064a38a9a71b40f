"""``boom-advisory run``: the options of the live service and the command that starts it.

The service itself is :mod:`advisory.service.runner`; its settings, checks and exit codes
are in :mod:`advisory.service.settings`.
"""

from __future__ import annotations

import argparse

from advisory.cli.options import add_aircraft_option, add_table_option, add_zones_option
from advisory.schema import RECORD_KEEP_DEFAULT, RECORD_MAX_MB_DEFAULT, SAFETY_CAUTION
from advisory.service.settings import (
    INPUT_FORMATS,
    LOG_LEVELS,
    RunError,
    RunSettings,
    check_settings,
    read_service_config,
)
from advisory.service.startup import StartingPhase, StartupInterrupted


def add_parser(sub: argparse._SubParsersAction) -> None:
    """Register ``boom-advisory run``."""
    p = sub.add_parser(
        "run", help="the live service: air data in, advisories and status out",
        description="Read air data from a serial port or UDP, publish advisory and status "
                    "frames at a fixed rate, record everything. " + SAFETY_CAUTION)
    p.add_argument("--service-config", metavar="FILE",
                   help="service config (TOML): any of these options as keys, spelled "
                        "without the leading dashes (rate-hz = 20); options given here "
                        "override it")
    p.add_argument("--input", metavar="URL",
                   help="input transport, e.g. serial:///dev/ttyUSB0?baud=115200 or "
                        "udp://127.0.0.1:5600 (bind one interface's address)")
    p.add_argument("--output", metavar="URL",
                   help="output transport, e.g. udp://127.0.0.1:5601")
    add_zones_option(p)
    add_aircraft_option(p)
    add_table_option(p)
    p.add_argument("--record", metavar="FILE", help="record file (appended to)")
    p.add_argument("--record-max-mb", type=float, default=None, metavar="MB",
                   help="size cap of the record file; at the cap it becomes FILE.1 (older "
                        f"ones FILE.2, ...) and a new FILE starts ({RECORD_MAX_MB_DEFAULT:g})")
    p.add_argument("--record-keep", type=int, default=None, metavar="K",
                   help="rotated record files kept; the oldest beyond is deleted and its "
                        f"records counted as record_dropped ({RECORD_KEEP_DEFAULT})")
    p.add_argument("--config", metavar="FILE", help="advisor thresholds (TOML)")
    p.add_argument("--rate-hz", type=float, default=None,
                   help="advisor steps (advisory frames) per second (10)")
    p.add_argument("--input-format", choices=INPUT_FORMATS, default=None,
                   help="air-data frames on a byte stream or datagrams (default: from the "
                        "input URL) or ARINC 429 words")
    p.add_argument("--label-map", metavar="FILE",
                   help="ARINC 429 label map (TOML), with --input-format arinc429")
    p.add_argument("--profile", metavar="FILE",
                   help="atmosphere profile (CSV/TOML) to rebuild the tables for; watched "
                        "for changes")
    p.add_argument("--allow-from", metavar="ADDR[:PORT][,...]",
                   help="UDP input: the only sources accepted (default: the first source "
                        "seen is locked in; others are counted and refused)")
    p.add_argument("--auth-key", metavar="FILE",
                   help="UDP input: accept only frames authenticated with HMAC-SHA256 under "
                        "this key (hex, at least 32 bytes)")
    p.add_argument("--learn-atmosphere", action="store_true", default=None,
                   help="with --profile: also rebuild tables for a plausible atmosphere "
                        "learned from the air-data stream (off by default)")
    p.add_argument("--advisory-version", type=int, default=None, metavar="V",
                   help="version of the advisory frames sent: 2, or 1 for older receivers "
                        "(unavoidable goes as warning; interface document section 7) (2)")
    p.add_argument("--duration-s", type=float, default=None,
                   help="stop after this many seconds (tests, soak)")
    p.add_argument("--log-level", choices=LOG_LEVELS, default=None,
                   help="log detail on stderr (info; debug adds a line per refused or "
                        "rejected input)")
    p.set_defaults(func=run_command)


def run_command(args: argparse.Namespace) -> int:
    """``run``: the exit code (0 after a clean stop)."""

    settings = settings_from(args)
    check_settings(settings)  # a bad option: one line, exit 2, before anything goes out
    phase = StartingPhase(settings.output_url)
    phase.install_signals()
    phase.start()
    try:
        # Imported here, after the first starting frame went out: the service loads numpy
        # and numba and may compile (the starting frames say so meanwhile).
        from advisory.service.runner import run_service  # noqa: PLC0415
    except StartupInterrupted as exc:
        phase.final(f"service stopped ({exc.args[0]})")
        phase.restore_signals()
        return 0
    except Exception:
        if not phase.stop_reason:
            raise
        # a library interrupted mid-way by the stop signal, failing on its own after it
        phase.final(f"service stopped ({phase.stop_reason})")
        phase.restore_signals()
        return 0
    return run_service(settings, phase)


def settings_from(args: argparse.Namespace) -> RunSettings:
    """The settings: the service config file's, overridden by the options given.

    Raises
    ------
    RunError
        A bad service config, or ``--input``, ``--output`` or ``--zones`` given nowhere.
    """
    values = read_service_config(args.service_config) if args.service_config else {}
    given = {"input_url": args.input, "output_url": args.output, "zones": args.zones,
             "aircraft": args.aircraft, "table": args.table, "record": args.record,
             "config": args.config, "rate_hz": args.rate_hz,
             "input_format": args.input_format, "profile": args.profile,
             "duration_s": args.duration_s, "label_map": args.label_map,
             "log_level": args.log_level, "record_max_mb": args.record_max_mb,
             "record_keep": args.record_keep, "allow_from": args.allow_from,
             "auth_key": args.auth_key, "learn_atmosphere": args.learn_atmosphere,
             "advisory_version": args.advisory_version}
    values.update({k: v for k, v in given.items() if v is not None})
    values["service_config"] = args.service_config
    for field, option in (("input_url", "--input"), ("output_url", "--output"),
                          ("zones", "--zones")):
        if field not in values:
            raise RunError(f"{option}: required (on the command line or in the service "
                           "config)")
    return RunSettings(**values)


__all__ = ["add_parser", "run_command", "settings_from"]
