"""Setting up a replay: the record file, the scenario beside it, the table, the loop.

:func:`prepare` resolves a LOG (a record file, or a scenario directory holding
``flight.rec``) and the command's options into a :class:`ReplaySetup` of plain values
(so it can go to a worker process); :func:`make_loop` builds the advisor and loop exactly
as ``boom-advisory run`` would for it.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from advisory.bench.edge_band import MAX_CONDITIONS
from advisory.bench.expect import load_expected
from advisory.io.records import KIND_EVENT, Recorder, RecordReader, decode_event
from advisory.physics.aircraft import default_aircraft, load_aircraft
from advisory.physics.atmosphere import standard_atmosphere
from advisory.physics.profile_file import load_profile
from advisory.pipeline.advisor import Advisor
from advisory.pipeline.config import load_config
from advisory.pipeline.state import StateValidator
from advisory.pipeline.zones import ZoneSet
from advisory.schema import ADV_FORMAT_VERSION, STATUS_IDENTITY_FIELDS
from advisory.service.loop import INPUT_FORMATS, AdvisoryLoop
from advisory.tables.build import BuildInputs
from advisory.tables.cache import cached_table
from advisory.tables.grid import default_grid, load_grid
from advisory.tables.table import BoomTable
from advisory.tomlfile import read_toml

SCENARIO_FILE = "scenario.toml"  #: scenario description beside a demo log
DEFAULT_RECORD_NAME = "flight.rec"  #: record file looked for when LOG is a directory


class ReplayError(ValueError):
    """A replay that cannot start (bad log, option or scenario); the message says why."""

@dataclass(frozen=True)
class ReplaySetup:
    """Everything one replay needs (plain values, so it can go to a worker process).

    Attributes
    ----------
    log : str
        The record file.
    name : str
        Short name for tables and reports (the scenario directory or the file stem).
    zones : str
        Zone file (GeoJSON).
    table : str
        Boom table file.
    config : str or None
        Advisor thresholds (TOML) or None for the defaults.
    input_format : str
        ``stream``, ``datagram`` or ``arinc429`` (what the recorded bytes are).
    rate_hz, heartbeat_s : float
        The loop's step rate, Hz, and status heartbeat, s.
    expect : str or None
        Expected-advisory file to compare against.
    speed : float
        Replay speed relative to real time (``inf``: as fast as possible).
    send : str or None
        Transport URL that also receives the recorded input, paced at ``speed``.
    collect : bool
        Gather the track, carpet and advisory positions for a report.
    edge_conditions : int
        With ``collect``: conditions at which the carpet edge's confidence band is sampled
        at most (:mod:`advisory.bench.edge_band`; 0: no band).
    clock : str
        ``auto`` (recorded output times when the log has them, else the loop's
        schedule), ``recorded`` or ``schedule``.
    label_map : str or None
        ARINC 429 label map file.
    framing : str or None
        ``stream`` or ``datagram`` for ARINC 429 words (None: the loop's default).
    identity : dict
        The identity keys a ``run`` put in its status frames (from the record's start
        event), so that the replay's status frames are the live ones byte for byte.
    advisory_version : int
        Version of the advisory frames the ``run`` sent (from the record's start event;
        the current version when the record does not say).
    title, description : str
        From the scenario file, for people.
    """

    log: str
    name: str
    zones: str
    table: str
    config: str | None = None
    input_format: str = "stream"
    rate_hz: float = 10.0
    heartbeat_s: float = 1.0
    expect: str | None = None
    speed: float = math.inf
    send: str | None = None
    collect: bool = False
    edge_conditions: int = MAX_CONDITIONS
    clock: str = "auto"
    label_map: str | None = None
    framing: str | None = None
    identity: dict[str, str] = field(default_factory=dict)
    advisory_version: int = ADV_FORMAT_VERSION
    title: str = ""
    description: str = ""


def find_log(path: str | Path) -> Path:
    """The record file for ``path``: the file itself, or ``flight.rec`` in a directory."""
    p = Path(path)
    if p.is_dir():
        q = p / DEFAULT_RECORD_NAME
        if not q.is_file():
            raise ReplayError(f"LOG {path}: a directory without {DEFAULT_RECORD_NAME}")
        return q
    if not p.is_file():
        raise ReplayError(f"LOG {path}: no such file")
    return p


def load_scenario(log: Path) -> tuple[dict[str, Any], Path | None]:
    """The scenario file beside ``log`` (``{}`` and None when there is none)."""
    path = log.parent / SCENARIO_FILE
    if not path.is_file():
        return {}, None
    doc = read_toml(path, f"scenario file {path}", ReplayError)
    return doc, path


def _scenario_file(doc: dict, base: Path | None, key: str) -> str | None:
    value = doc.get(key)
    if value is None or base is None:
        return None
    if not isinstance(value, str):
        raise ReplayError(f"scenario file {base}: {key} must be a file name, got {value!r}")
    path = base.parent / value
    if not path.is_file():
        raise ReplayError(f"scenario file {base}: {key} = {value!r}: no such file")
    return str(path)


def scenario_table(scenario: dict, scenario_path: Path | None, aircraft_file: str | None,
                   quiet: bool = False) -> BoomTable:
    """The (cached) boom table for a scenario: its aircraft, atmosphere and grid.

    Without a scenario grid the default grid is used (slow to build the first time).
    """
    aircraft_file = aircraft_file or _scenario_file(scenario, scenario_path, "aircraft")
    aircraft = load_aircraft(aircraft_file) if aircraft_file else default_aircraft()
    atm_file = _scenario_file(scenario, scenario_path, "atmosphere")
    atm = load_profile(atm_file) if atm_file else standard_atmosphere()
    grid_file = _scenario_file(scenario, scenario_path, "grid")
    grid = load_grid(grid_file, with_wind=atm.has_wind) if grid_file \
        else default_grid(with_wind=atm.has_wind)
    return cached_table(BuildInputs(aircraft, atm, grid), quiet=quiet)


def _speed(text: str | float) -> float:
    if isinstance(text, (int, float)):
        value = float(text)
    elif str(text).strip().lower() == "max":
        return math.inf
    else:
        try:
            value = float(text)
        except ValueError:
            raise ReplayError(f"--speed: {text!r} is not a number or 'max'") from None
    if not (value > 0.0) or math.isnan(value):
        raise ReplayError(f"--speed: {text!r} must be greater than 0 (or 'max')")
    return value


def _loop_settings(log: Path) -> dict:
    """Settings a service wrote into the record's ``start`` event, if any.

    The start event of ``run`` holds the loop's
    :meth:`~advisory.service.loop.AdvisoryLoop.describe` (input format, framing, rate,
    heartbeat) and its ``zones`` and ``tables`` files; the last such event counts (a
    record file appended to by several runs).
    """
    found: dict = {}
    with RecordReader(log) as reader:
        for rec in reader:
            if rec.kind != KIND_EVENT:
                continue
            ev = decode_event(rec.data, reader.report.version)
            doc = ev.fields.get("settings") if ev.code == "start" else None
            if isinstance(doc, dict):
                found = _find_settings(doc) or found
    _check_recorded(found, log)
    return found


#: The type each recorded setting must have (a start event is data from a file).
_RECORDED_TYPES = {"input_format": str, "framing": str, "zones": str, "tables": str,
                   "rate_hz": float, "heartbeat_s": float, "identity": dict,
                   "advisory_version": int}


def _check_recorded(found: dict, log: Path) -> None:
    """ReplayError naming the first recorded setting of the wrong type or range."""
    for key, value in found.items():
        kind = _RECORDED_TYPES[key]
        if kind is float:
            ok = (isinstance(value, (int, float)) and not isinstance(value, bool)
                  and math.isfinite(value) and value > 0)
        elif kind is int:
            ok = not isinstance(value, bool) and value in (1, ADV_FORMAT_VERSION)
        elif kind is dict:
            ok = isinstance(value, dict) and all(
                k in STATUS_IDENTITY_FIELDS and (v is None or isinstance(v, str))
                for k, v in value.items())
        else:
            ok = isinstance(value, str)
        if not ok:
            text = repr(value)
            text = text if len(text) <= 60 else text[:57] + "..."
            what = {float: "a positive number", dict: "a table of identity strings",
                    int: f"1 or {ADV_FORMAT_VERSION}"}.get(kind, "a string")
            raise ReplayError(f"{log}: start event: {key} = {text} is not {what}")


def _find_settings(doc: dict) -> dict:
    if "input_format" in doc:
        return {k: doc[k] for k in ("input_format", "framing", "rate_hz", "heartbeat_s",
                                    "zones", "tables", "identity", "advisory_version")
                if doc.get(k) is not None}
    for v in doc.values():
        if isinstance(v, dict):
            found = _find_settings(v)
            if found:
                return found
    return {}


_TABLES: dict[tuple[str, int, int], BoomTable] = {}


def _load_table(path: str | Path) -> BoomTable:
    """Load (and check) a table once per process; a changed file is loaded again."""
    st = os.stat(path)
    key = (str(Path(path).resolve()), st.st_mtime_ns, st.st_size)
    table = _TABLES.get(key)
    if table is None:
        _TABLES.clear()
        table = _TABLES[key] = BoomTable.load(path)
    return table


def prepare(log: str | Path, *, zones: str | None = None, aircraft: str | None = None,
            table: str | None = None, config: str | None = None, expect: str | None = None,
            speed: str | float = "max", send: str | None = None, collect: bool = False,
            input_format: str | None = None, rate_hz: float | None = None,
            clock: str = "auto", quiet: bool = False,
            trust_log_paths: bool = False) -> ReplaySetup:
    """Resolve a LOG and the options into a :class:`ReplaySetup` (builds the table once).

    Files not given are taken from the ``scenario.toml`` beside the log (``zones``,
    ``grid``, ``atmosphere``, ``aircraft``, ``expected`` when ``expect == "auto"``,
    ``input_format``, ``rate_hz``); what a ``run`` service recorded in its start event
    comes next (input format, rate, heartbeat; its zone and table files only with
    ``trust_log_paths``, when they still exist: a log is data, and a path inside it is
    refused with one line naming the option to give instead); then the defaults
    (stream input, 10 Hz, the default table).

    Raises
    ------
    ReplayError
        Missing log or zones, a file named only inside the log, a start event value of
        the wrong type, bad option; the message names it.
    """
    path = find_log(log)
    scenario, spath = load_scenario(path)
    recorded = _loop_settings(path)

    def recorded_file(key: str) -> str | None:
        value = recorded.get(key) if spath is None else None
        if value is not None and not trust_log_paths:
            option = "--zones" if key == "zones" else "--tables"
            raise ReplayError(f"{option}: {path} names the file {value!r} in its start "
                              f"event; give {option} FILE, or --trust-log-paths to use it")
        return value if isinstance(value, str) and Path(value).is_file() else None

    zones = zones or _scenario_file(scenario, spath, "zones") or recorded_file("zones")
    if zones is None:
        raise ReplayError(f"--zones: no zone file given, no {SCENARIO_FILE} beside {path} "
                          "and none recorded")
    if not Path(zones).is_file():
        raise ReplayError(f"--zones: {zones}: no such file")
    expect = _expect_file(expect, scenario, spath, path)
    table = table or (None if aircraft else recorded_file("tables"))
    if table:
        if aircraft:
            raise ReplayError("--aircraft: cannot be combined with --table (the table fixes "
                              "the aircraft)")
        table_path = str(table)
        _load_table(table_path)  # refuse a bad table here, with its own message
    else:
        built = scenario_table(scenario, spath, aircraft, quiet=quiet).path
        if built is None:  # cached_table always returns a table loaded from its file
            raise ReplayError(f"{path}: the scenario's table has no file")
        table_path = built
    fmt, rate, heartbeat = _loop_rates(scenario, recorded, input_format, rate_hz)
    if clock not in ("auto", "recorded", "schedule"):
        raise ReplayError(f"--clock: {clock!r} is not auto, recorded or schedule")
    name = path.parent.name if path.name == DEFAULT_RECORD_NAME else path.stem
    return ReplaySetup(
        log=str(path), name=name, zones=str(zones), table=table_path,
        config=config or _scenario_file(scenario, spath, "config"),
        input_format=fmt, rate_hz=rate, heartbeat_s=heartbeat, expect=expect,
        speed=_speed(speed), send=send, collect=collect, clock=clock,
        label_map=_scenario_file(scenario, spath, "label_map"),
        framing=scenario.get("framing") or recorded.get("framing"),
        identity={k: v for k, v in recorded.get("identity", {}).items() if v},
        advisory_version=int(recorded.get("advisory_version", ADV_FORMAT_VERSION)),
        title=str(scenario.get("title", "")), description=str(scenario.get("description", "")),
    )


def _expect_file(expect: str | None, scenario: dict, spath: Path | None,
                 log: Path) -> str | None:
    """The expected-advisory file (``auto``: the scenario's), checked now."""
    if expect == "auto":
        expect = _scenario_file(scenario, spath, "expected")
        if expect is None:
            raise ReplayError(f"--expect auto: no expected file named in a {SCENARIO_FILE} "
                              f"beside {log}")
    elif expect is not None and not Path(expect).is_file():
        raise ReplayError(f"--expect: {expect}: no such file")
    if expect is not None:
        load_expected(expect)  # refuse a bad file now, naming the entry
    return expect


def _loop_rates(scenario: dict, recorded: dict, input_format: str | None,
                rate_hz: float | None) -> tuple[str, float, float]:
    """Input format, step rate (Hz) and heartbeat (s): option, scenario, record, default."""
    fmt = input_format or scenario.get("input_format") or recorded.get("input_format") \
        or "stream"
    if fmt not in INPUT_FORMATS:
        raise ReplayError(f"--input-format: {fmt!r} is not one of {', '.join(INPUT_FORMATS)}")
    rate = rate_hz or scenario.get("rate_hz") or recorded.get("rate_hz") or 10.0
    if isinstance(rate, bool) or not isinstance(rate, (int, float)) or not 0 < rate <= 1000:
        raise ReplayError(f"--rate-hz: {rate!r} must be a number in (0, 1000]")
    heartbeat = recorded.get("heartbeat_s") or scenario.get("heartbeat_s") or 1.0
    return str(fmt), float(rate), float(heartbeat)


def make_loop(setup: ReplaySetup, recorder: Recorder | None = None) -> AdvisoryLoop:
    """The advisor and loop exactly as ``run`` would build them for this set-up."""
    advisor = Advisor(_load_table(setup.table), ZoneSet.from_file(setup.zones),
                      load_config(setup.config))
    loop = AdvisoryLoop(advisor, input_format=setup.input_format, rate_hz=setup.rate_hz,
                        heartbeat_s=setup.heartbeat_s, recorder=recorder,
                        validator=StateValidator(), label_map=setup.label_map,
                        framing=setup.framing, advisory_version=setup.advisory_version)
    loop.identity = dict(setup.identity)
    return loop
