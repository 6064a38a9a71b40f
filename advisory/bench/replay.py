"""Replay recorded flights through the live loop, on a clock the replay controls.

A record file (:mod:`advisory.io.records`) holds every chunk of bytes a service
received, with its receive times. :func:`replay_log` feeds those bytes, in order and with
their recorded receive times, to the same :class:`advisory.service.loop.AdvisoryLoop` (deframer,
decoder, validator, advisor) that ``boom-advisory run`` uses, and calls
:meth:`~advisory.service.loop.AdvisoryLoop.poll` at times taken from the recording. The loop
reads no clock for anything it publishes, so the advisory and status frames of a replay
are byte-identical at any speed and on every run; ``--speed`` only decides how long the
replay sleeps between events.

The clock
---------
* A log recorded by a live service also holds its outputs, each stamped with the time of
  the poll that produced it: the replay polls at exactly those times, so it reproduces
  the live run's outputs byte for byte (``recorded_match`` in the result says whether it
  did).
  The replay also plays the driver's part as the record tells it: the input link going
  down and up again (the service's ``input lost`` / ``input open`` events), the
  driver's counters (:data:`SERVICE_COUNTERS`, as its status frames carried them) and
  the final frames at shutdown (the ``stopping`` event). A file that several runs were
  appended to is replayed from its last ``start`` event.
* A log with inputs only (a synthesized feed, a capture) is polled on the loop's own
  fixed-rate schedule (:meth:`~advisory.service.loop.AdvisoryLoop.next_due`) up to the last
  input.

In both cases a frame received at the same instant as a poll is fed first.

Which bytes are fed: the raw-input records (kind 3, garbage included); a log without raw
input records has its CRC-checked frame payloads (kind 1) framed again and fed instead.
A torn last record (power cut mid-write) and damaged stretches inside the file are
reported and skipped by the reader; everything else replays.

Expected advisories (``--expect``)
----------------------------------
A JSON file of our own, either a list of entries or an object with the list under
``"advisories"``::

    {"advisories": [
      {"status": "advisory", "zone_id": "marrowick", "t_from_s": 0.0},
      {"status": "caution", "zone_id": "marrowick", "t_from_s": 82.3, "tolerance_s": 3},
      {"status": "no_boom", "zone_id": null, "t_from_s": 118.2, "t_to_s": 150.0}
    ]}

The replay's advisory frames are cut into *segments*: runs of consecutive frames with the
same ``status`` and ``zone_id``. The segments must match the entries one for one, in
order: same status; same zone (when the entry has a ``zone_id`` key; ``null`` means no
zone); the segment starts at ``t_from_s`` and, when given, ends (the next segment starts
or the replay ends) at ``t_to_s``, each within ``tolerance_s`` (default 1 s). An entry
with ``"optional": true`` may be missing (a brief intermediate level); a ``"note"`` is for
people. Times are seconds after the first input record of the log. Every mismatch is printed and the
command exits with status 1.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import argparse
import json
import math
import multiprocessing as mp
import os
import sys
import time
from dataclasses import asdict, dataclass, field
from pathlib import Path

from advisory import SAFETY_CAUTION

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

SCENARIO_FILE = "scenario.toml"  #: scenario description beside a demo log
DEFAULT_RECORD_NAME = "flight.rec"  #: record file looked for when LOG is a directory
DEFAULT_TOLERANCE_S = 1.0  #: default time tolerance of an expected entry, s
CONFLICT_STATUSES = ("advisory", "caution", "warning")
#: Counters of the loop that mean bad input or trouble (summed into ``errors``).
ERROR_COUNTERS = (
    "bad_crc", "cobs_error", "too_short", "oversize", "malformed", "not_a_map",
    "missing_field", "bad_type", "bad_value", "unsupported_version", "unknown_type",
    "not_air", "rejected", "bad_parity", "ssm_failure", "ssm_ncd", "ssm_test", "bad_bcd",
    "bad_payload", "bad_time", "clock_backwards", "internal_errors",
)


class ReplayError(ValueError):
    """A replay that cannot start (bad log, option or scenario); the message says why."""


class ExpectFileError(ValueError):
    """An expected-advisory file that cannot be used; the message names the entry."""


# ----------------------------------------------------------------------------- set-up

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
    clock : str
        ``auto`` (recorded output times when the log has them, else the loop's
        schedule), ``recorded`` or ``schedule``.
    label_map : str or None
        ARINC 429 label map file.
    framing : str or None
        ``stream`` or ``datagram`` for ARINC 429 words (None: the loop's default).
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
    clock: str = "auto"
    label_map: str | None = None
    framing: str | None = None
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


def load_scenario(log: Path) -> tuple[dict, Path | None]:
    """The scenario file beside ``log`` (``{}`` and None when there is none)."""
    path = log.parent / SCENARIO_FILE
    if not path.is_file():
        return {}, None
    try:
        doc = tomllib.loads(path.read_text(encoding="utf-8"))
    except (OSError, tomllib.TOMLDecodeError) as exc:
        raise ReplayError(f"scenario file {path}: cannot read ({exc})") from exc
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
                   quiet: bool = False):
    """The (cached) boom table for a scenario: its aircraft, atmosphere and grid.

    Without a scenario grid the default grid is used (slow to build the first time).
    """
    from advisory.physics.aircraft import default_aircraft, load_aircraft
    from advisory.physics.atmosphere import load_profile, standard_atmosphere
    from advisory.tables.build import BuildInputs
    from advisory.tables.cache import cached_table
    from advisory.tables.grid import default_grid, load_grid

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
    from advisory.io.records import KIND_EVENT, RecordReader, decode_event

    found: dict = {}
    with RecordReader(log) as reader:
        for rec in reader:
            if rec.kind != KIND_EVENT:
                continue
            ev = decode_event(rec.data, reader.report.version)
            doc = ev.fields.get("settings") if ev.code == "start" else None
            if isinstance(doc, dict):
                found = _find_settings(doc) or found
    return found


def _find_settings(doc: dict) -> dict:
    if "input_format" in doc:
        return {k: doc[k] for k in ("input_format", "framing", "rate_hz", "heartbeat_s",
                                    "zones", "tables") if doc.get(k) is not None}
    for v in doc.values():
        if isinstance(v, dict):
            found = _find_settings(v)
            if found:
                return found
    return {}


_TABLES: dict[tuple, object] = {}


def _load_table(path: str | Path):
    """Load (and check) a table once per process; a changed file is loaded again."""
    from advisory.tables.table import BoomTable

    st = os.stat(path)
    key = (str(Path(path).resolve()), st.st_mtime_ns, st.st_size)
    table = _TABLES.get(key)
    if table is None:
        _TABLES.clear()
        table = _TABLES[key] = BoomTable.load(path)
    return table


def prepare(log: str | Path, *, zones: str | None = None, aircraft: str | None = None,
            tables: str | None = None, config: str | None = None, expect: str | None = None,
            speed: str | float = "max", send: str | None = None, collect: bool = False,
            input_format: str | None = None, rate_hz: float | None = None,
            clock: str = "auto", quiet: bool = False) -> ReplaySetup:
    """Resolve a LOG and the options into a :class:`ReplaySetup` (builds the table once).

    Files not given are taken from the ``scenario.toml`` beside the log (``zones``,
    ``grid``, ``atmosphere``, ``aircraft``, ``expected`` when ``expect == "auto"``,
    ``input_format``, ``rate_hz``); what a ``run`` service recorded in its start event
    comes next (its zone and table files when they still exist, input format, rate,
    heartbeat); then the defaults (stream input, 10 Hz, the default table).

    Raises
    ------
    ReplayError
        Missing log or zones, bad option; the message names it.
    """
    from advisory.service.loop import INPUT_FORMATS

    path = find_log(log)
    scenario, spath = load_scenario(path)
    recorded = _loop_settings(path)

    def recorded_file(key: str) -> str | None:
        value = recorded.get(key) if spath is None else None
        return value if isinstance(value, str) and Path(value).is_file() else None

    zones = zones or _scenario_file(scenario, spath, "zones") or recorded_file("zones")
    if zones is None:
        raise ReplayError(f"--zones: no zone file given, no {SCENARIO_FILE} beside {path} "
                          "and none recorded")
    if not Path(zones).is_file():
        raise ReplayError(f"--zones: {zones}: no such file")
    if expect == "auto":
        expect = _scenario_file(scenario, spath, "expected")
        if expect is None:
            raise ReplayError(f"--expect auto: no expected file named in a {SCENARIO_FILE} "
                              f"beside {path}")
    elif expect is not None and not Path(expect).is_file():
        raise ReplayError(f"--expect: {expect}: no such file")
    if expect is not None:
        load_expected(expect)  # refuse a bad file now, naming the entry
    tables = tables or (None if aircraft else recorded_file("tables"))
    if tables:
        if aircraft:
            raise ReplayError("--aircraft: cannot be combined with --tables (the table fixes "
                              "the aircraft)")
        table_path = str(tables)

        _load_table(table_path)  # refuse a bad table here, with its own message
    else:
        table = scenario_table(scenario, spath, aircraft, quiet=quiet)
        table_path = table.path
    config = config or _scenario_file(scenario, spath, "config")
    fmt = input_format or scenario.get("input_format") or recorded.get("input_format") \
        or "stream"
    if fmt not in INPUT_FORMATS:
        raise ReplayError(f"--input-format: {fmt!r} is not one of {', '.join(INPUT_FORMATS)}")
    rate = rate_hz or scenario.get("rate_hz") or recorded.get("rate_hz") or 10.0
    if isinstance(rate, bool) or not isinstance(rate, (int, float)) or not 0 < rate <= 1000:
        raise ReplayError(f"--rate-hz: {rate!r} must be a number in (0, 1000]")
    heartbeat = recorded.get("heartbeat_s") or scenario.get("heartbeat_s") or 1.0
    if clock not in ("auto", "recorded", "schedule"):
        raise ReplayError(f"--clock: {clock!r} is not auto, recorded or schedule")
    name = path.parent.name if path.name == DEFAULT_RECORD_NAME else path.stem
    return ReplaySetup(
        log=str(path), name=name, zones=str(zones), table=table_path, config=config,
        input_format=fmt, rate_hz=float(rate), heartbeat_s=float(heartbeat), expect=expect,
        speed=_speed(speed), send=send, collect=collect, clock=clock,
        label_map=_scenario_file(scenario, spath, "label_map"),
        framing=scenario.get("framing") or recorded.get("framing"),
        title=str(scenario.get("title", "")), description=str(scenario.get("description", "")),
    )


# ----------------------------------------------------------------------------- expected

@dataclass(frozen=True)
class Expectation:
    """One expected advisory segment (see the module notes)."""

    status: str
    zone_id: str | None
    zone_given: bool
    t_from_s: float
    t_to_s: float | None
    tolerance_s: float
    optional: bool = False

    def describe(self) -> str:
        zone = f" ({self.zone_id or 'no zone'})" if self.zone_given else ""
        to = f" to {self.t_to_s:.1f} s" if self.t_to_s is not None else ""
        opt = " [optional]" if self.optional else ""
        return (f"{self.status}{zone} from {self.t_from_s:.1f} s{to} "
                f"(+/- {self.tolerance_s:g} s){opt}")


def load_expected(path: str | Path) -> list[Expectation]:
    """Read an expected-advisory file.

    Raises
    ------
    ExpectFileError
        Unreadable, not JSON, or an entry with a bad or missing field (named).
    """
    from advisory.schema import ADV_STATUSES

    path = Path(path)
    try:
        doc = json.loads(path.read_text(encoding="utf-8"))
    except OSError as exc:
        raise ExpectFileError(f"expected file {path}: cannot read ({exc.strerror})") from exc
    except json.JSONDecodeError as exc:
        raise ExpectFileError(f"expected file {path}: not valid JSON ({exc})") from exc
    entries = doc.get("advisories") if isinstance(doc, dict) else doc
    if not isinstance(entries, list):
        raise ExpectFileError(f"expected file {path}: needs a list of entries (or an object "
                              "with 'advisories')")
    out = []
    for i, e in enumerate(entries):
        where = f"expected file {path}: entry {i}"
        if not isinstance(e, dict):
            raise ExpectFileError(f"{where}: must be an object, got {e!r}")
        unknown = set(e) - {"status", "zone_id", "t_from_s", "t_to_s", "tolerance_s",
                            "optional", "note"}
        if unknown:
            raise ExpectFileError(f"{where}: unknown key(s) {sorted(unknown)}")
        status = e.get("status")
        if status not in ADV_STATUSES:
            raise ExpectFileError(f"{where}: status {status!r} is not one of "
                                  f"{', '.join(ADV_STATUSES)}")
        zone = e.get("zone_id")
        if zone is not None and not isinstance(zone, str):
            raise ExpectFileError(f"{where}: zone_id must be a string or null, got {zone!r}")

        def num(key: str, required: bool, default=None, _e=e, _where=where):
            v = _e.get(key, default)
            if v is None and not required:
                return None
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
                raise ExpectFileError(f"{_where}: {key} must be a number, got {v!r}")
            return float(v)

        t_from = num("t_from_s", True)
        t_to = num("t_to_s", False)
        tol = num("tolerance_s", True, DEFAULT_TOLERANCE_S)
        if tol < 0:
            raise ExpectFileError(f"{where}: tolerance_s must be >= 0, got {tol!r}")
        if t_to is not None and t_to < t_from:
            raise ExpectFileError(f"{where}: t_to_s {t_to!r} is before t_from_s {t_from!r}")
        optional = e.get("optional", False)
        if not isinstance(optional, bool):
            raise ExpectFileError(f"{where}: optional must be true or false, got {optional!r}")
        out.append(Expectation(status, zone, "zone_id" in e, t_from, t_to, tol, optional))
    return out


@dataclass
class Segment:
    """A run of consecutive advisory frames with the same status and zone.

    Attributes
    ----------
    status : str
    zone_id : str or None
    t_start_s, t_end_s : float
        Start (first frame) and end (next segment's first frame, or the end of the
        replay), s after the first input record.
    frames : int
    cue : str
        The crew cue of the first frame.
    worst_psf : float or None
        Highest predicted overpressure at the zone over the segment, psf.
    min_time_to_contact_s : float or None
    focus : bool
        A focus boom was predicted at the zone in some frame.
    """

    status: str
    zone_id: str | None
    t_start_s: float
    t_end_s: float
    frames: int = 0
    cue: str = ""
    worst_psf: float | None = None
    min_time_to_contact_s: float | None = None
    focus: bool = False


def _problems(s: Segment, e: Expectation) -> list[str]:
    problems = []
    if s.status != e.status:
        problems.append("status")
    if e.zone_given and s.zone_id != e.zone_id:
        problems.append("zone")
    if abs(s.t_start_s - e.t_from_s) > e.tolerance_s + 1e-9:
        problems.append("start time")
    if e.t_to_s is not None and abs(s.t_end_s - e.t_to_s) > e.tolerance_s + 1e-9:
        problems.append("end time")
    return problems


def compare_expected(segments: list[Segment], expected: list[Expectation]) -> list[str]:
    """Differences between replayed segments and expectations ([] when they match).

    Entries and segments are paired in order; an ``optional`` entry that does not fit the
    next segment is passed over.
    """
    diffs = []
    i = k = 0
    while i < len(expected) or k < len(segments):
        s = segments[k] if k < len(segments) else None
        got = "" if s is None else (f"{s.status} ({s.zone_id or 'no zone'}) from "
                                    f"{s.t_start_s:.1f} s to {s.t_end_s:.1f} s")
        if i >= len(expected):
            diffs.append(f"segment #{k + 1}: unexpected {got}")
            k += 1
            continue
        e = expected[i]
        if s is None:
            if not e.optional:
                diffs.append(f"entry #{i + 1}: expected {e.describe()}, but the replay has "
                             f"only {len(segments)} segment(s)")
            i += 1
            continue
        problems = _problems(s, e)
        if problems and e.optional:
            i += 1
            continue
        if problems:
            diffs.append(f"entry #{i + 1} / segment #{k + 1}: {', '.join(problems)} differ: "
                         f"expected {e.describe()}; got {got}")
        i += 1
        k += 1
    return diffs


# ----------------------------------------------------------------------------- results

@dataclass
class ReplayResult:
    """What one replay produced (plain values; picklable).

    Attributes
    ----------
    setup : ReplaySetup
    outputs : list of (float, float, bytes)
        Every output payload with the monotonic and UTC time of the poll that made it.
    recorded_match : bool or None
        The log held outputs of a live run and the replay reproduced them byte for byte
        (None: the log held no outputs).
    recorded_outputs : int
        Output records in the log.
    first_mismatch : str
        Where the replay first differed from the recorded outputs ('' if it did not).
    t0_monotonic, t0_utc : float
        Receive times of the first input record (the time origin of every ``t_s``).
    duration_s : float
        Last minus first input receive time, s.
    segments : list of Segment
    counters : dict
        The loop's counters at the end.
    read : dict
        The record reader's report (``torn_tail``, ``torn_bytes``, ``corrupt_regions``,
        ``skipped_bytes``, ``records``).
    inputs_fed : int
    sent, send_errors : int
        Chunks sent to ``--send`` and send failures.
    wall_s : float
        Wall time of the replay, s.
    diffs : list of str or None
        Mismatches against the expected file (None when none was given).
    flight : dict or None
        Report data (track, carpet rows, where advisories fired) when collected.
    notes : list of str
        What the replay had to decide about the log (several runs in one file, ...).
    """

    setup: ReplaySetup
    outputs: list = field(default_factory=list)
    recorded_match: bool | None = None
    recorded_outputs: int = 0
    first_mismatch: str = ""
    t0_monotonic: float = 0.0
    t0_utc: float = 0.0
    duration_s: float = 0.0
    segments: list = field(default_factory=list)
    counters: dict = field(default_factory=dict)
    read: dict = field(default_factory=dict)
    inputs_fed: int = 0
    sent: int = 0
    send_errors: int = 0
    wall_s: float = 0.0
    diffs: list | None = None
    flight: dict | None = None
    notes: list = field(default_factory=list)

    @property
    def name(self) -> str:
        return self.setup.name

    @property
    def advisory_payloads(self) -> list[bytes]:
        """The advisory frame payloads, in order."""
        from advisory.io.messages import decode_frame

        return [p for _, _, p in self.outputs if decode_frame(p).type == "adv"]

    @property
    def conflicts(self) -> int:
        """Conflict episodes: runs of advisory/caution/warning segments."""
        n, inside = 0, False
        for s in self.segments:
            c = s.status in CONFLICT_STATUSES
            if c and not inside:
                n += 1
            inside = c
        return n

    @property
    def first_warning_s(self) -> float | None:
        """Time of the first warning, s (None: none)."""
        return next((s.t_start_s for s in self.segments if s.status == "warning"), None)

    @property
    def worst_psf(self) -> float | None:
        """Highest predicted overpressure at a zone in conflict, psf."""
        vals = [s.worst_psf for s in self.segments if s.worst_psf is not None]
        return max(vals) if vals else None

    @property
    def error_counts(self) -> dict[str, int]:
        """Input problems by kind: loop counters, torn tail, damaged stretches."""
        out = {k: int(self.counters.get(k, 0)) for k in ERROR_COUNTERS
               if self.counters.get(k, 0)}
        if self.read.get("torn_tail"):
            out["torn_record"] = 1
        if self.read.get("corrupt_regions"):
            out["damaged_stretches"] = int(self.read["corrupt_regions"])
        return out

    @property
    def errors(self) -> int:
        """Total count of :attr:`error_counts`."""
        return sum(self.error_counts.values())

    @property
    def unavailable_s(self) -> float:
        """Time spent ``unavailable``, s."""
        return sum(s.t_end_s - s.t_start_s for s in self.segments if s.status == "unavailable")

    def summary(self) -> dict:
        """One row of the summary table (JSON-ready, edge units in the keys)."""
        return {
            "log": self.setup.log, "name": self.name, "duration_s": round(self.duration_s, 2),
            "conflicts": self.conflicts,
            "first_warning_s": None if self.first_warning_s is None
            else round(self.first_warning_s, 2),
            "worst_overpressure_psf": None if self.worst_psf is None
            else round(self.worst_psf, 3),
            "errors": self.errors, "unavailable_s": round(self.unavailable_s, 2),
            "expected": None if self.diffs is None else (not self.diffs),
        }

    def to_json(self) -> dict:
        """The result as a JSON-ready dict (without the raw payloads and report data)."""
        d = self.summary()
        d.update({
            "title": self.setup.title,
            "segments": [asdict(s) for s in self.segments],
            "error_counts": self.error_counts,
            "counters": self.counters,
            "read": self.read,
            "inputs_fed": self.inputs_fed,
            "outputs": len(self.outputs),
            "advisory_frames": int(self.counters.get("adv_frames", 0)),
            "recorded_outputs": self.recorded_outputs,
            "recorded_match": self.recorded_match,
            "first_mismatch": self.first_mismatch,
            "differences": self.diffs,
            "wall_s": round(self.wall_s, 3),
            "speedup": round(self.duration_s / self.wall_s, 1) if self.wall_s > 0 else None,
        })
        if self.setup.send:
            d.update({"sent": self.sent, "send_errors": self.send_errors})
        return d


# ----------------------------------------------------------------------------- the replay

class _Pacer:
    """Sleeps so that log time advances at ``speed`` times real time (never for inf)."""

    def __init__(self, speed: float, t0_log: float) -> None:
        self.speed = speed
        self.t0_log = t0_log
        self.t0_wall = time.monotonic()

    def wait(self, t_log: float) -> None:
        if math.isinf(self.speed):
            return
        delay = self.t0_wall + (t_log - self.t0_log) / self.speed - time.monotonic()
        if delay > 0:
            time.sleep(delay)


class _Sender:
    """Sends the recorded input to a transport, framed for it (``--send``)."""

    def __init__(self, url: str, framing: str) -> None:
        from advisory.io.framing import DatagramReader, StreamDeframer
        from advisory.io.transports import TransportError, open_transport

        try:
            self.transport = open_transport(url, "output")
        except (TransportError, ValueError) as exc:
            raise ReplayError(f"--send: {exc}") from None
        self.framing = framing
        self._split = StreamDeframer() if framing == "stream" else DatagramReader()
        self.sent = 0
        self.errors = 0

    def send(self, data: bytes) -> None:
        from advisory.io.framing import datagram, frame_stream
        from advisory.io.transports import TransportError

        if self.transport.is_stream == (self.framing == "stream"):
            chunks = [data]  # same kind of link: the bytes exactly as received
        elif self.transport.is_stream:
            chunks = [frame_stream(p) for p in self._split.feed(data)]
        else:
            chunks = [datagram(p) for p in self._split.feed(data)]
        for c in chunks:
            try:
                self.transport.send(c)
                self.sent += 1
            except TransportError:
                self.errors += 1

    def close(self) -> None:
        self.transport.close()


def _inputs(records: list, framing: str) -> list[tuple[float, float, bytes]]:
    """(mono, utc, bytes) to feed: raw input records, else re-framed payload records."""
    from advisory.io.framing import datagram, frame_stream
    from advisory.io.records import KIND_INPUT, KIND_RAW_INPUT

    raw = [(r.mono_s, r.utc_s, bytes(r.data)) for r in records if r.kind == KIND_RAW_INPUT]
    if raw:
        return raw
    wrap = frame_stream if framing == "stream" else datagram
    return [(r.mono_s, r.utc_s, wrap(bytes(r.data))) for r in records if r.kind == KIND_INPUT]


def make_loop(setup: ReplaySetup, recorder=None):
    """The advisor and loop exactly as ``run`` would build them for this set-up."""
    from advisory.pipeline.advisor import Advisor
    from advisory.pipeline.config import load_config
    from advisory.pipeline.state import StateValidator
    from advisory.pipeline.zones import ZoneSet
    from advisory.service.loop import AdvisoryLoop

    advisor = Advisor(_load_table(setup.table), ZoneSet.from_file(setup.zones),
                      load_config(setup.config))
    return AdvisoryLoop(advisor, input_format=setup.input_format, rate_hz=setup.rate_hz,
                        heartbeat_s=setup.heartbeat_s, recorder=recorder,
                        validator=StateValidator(), label_map=setup.label_map,
                        framing=setup.framing)


#: Counters the ``run`` driver keeps and hands to the loop before every poll
#: (:attr:`advisory.service.loop.AdvisoryLoop.external_counters`); a replay of a service log
#: restores them from the record (link events, recorded status frames).
SERVICE_COUNTERS = ("input_lost", "input_reopened", "output_dropped", "output_errors")

def _controls(records: list, version: int) -> tuple[bool, list[tuple[float, str, str]]]:
    """(recorded by a ``run`` service, link and stop events as (mono, kind, text)).

    Read from the typed events' codes and fields (record format 2), or from the text
    lines of format-1 records through :func:`~advisory.io.records.decode_event`.
    """
    from advisory.io.records import KIND_EVENT, decode_event

    service = False
    out = []
    for r in records:
        if r.kind != KIND_EVENT:
            continue
        ev = decode_event(r.data, version)
        reason = ev.fields.get("reason")
        if ev.code == "start":
            service = True
        elif ev.code == "input_lost":
            out.append((r.mono_s, "lost", str(reason)))
        elif ev.code == "input_open_failed":
            out.append((r.mono_s, "open_failed", str(reason)))
        elif ev.code == "input_open":
            out.append((r.mono_s, "open", str(ev.fields.get("url"))))
        elif ev.code == "stopping":
            out.append((r.mono_s, "stop", "service stopped" if reason == "stop requested"
                        else f"service stopped ({reason})"))
    return service, out


class _Driver:
    """Plays the part of the ``run`` driver towards the loop during a replay: link state,
    the driver's counters, and the final frames at a recorded shutdown."""

    def __init__(self, loop, service: bool) -> None:
        self.loop = loop
        self.up = True
        self.ever_lost = False
        self.stop_reason: str | None = None
        if service:
            loop.external_counters.update(dict.fromkeys(SERVICE_COUNTERS, 0))

    def control(self, kind: str, text: str) -> None:
        ext = self.loop.external_counters
        if kind == "lost":
            ext["input_lost"] = ext.get("input_lost", 0) + 1
            self.ever_lost = True
            self.up = False
            self.loop.set_input_link(False, text)
        elif kind == "open_failed" and self.up and not self.ever_lost:
            self.up = False  # the first open failed: the service starts with the link down
            self.loop.set_input_link(False, text)
        elif kind == "open" and not self.up:
            if self.ever_lost:
                ext["input_reopened"] = ext.get("input_reopened", 0) + 1
            self.up = True
            self.loop.set_input_link(True, "")
        elif kind == "stop":
            self.stop_reason = text

    def recorded_status(self, counters: dict) -> None:
        """Take the driver's counters from a status frame the service published now."""
        ext = self.loop.external_counters
        for k in SERVICE_COUNTERS:
            if k in counters and k in ext:
                ext[k] = counters[k]


def replay_log(setup: ReplaySetup, loop=None) -> ReplayResult:
    """Replay one log through the loop (see the module notes); never sleeps at ``inf``.

    Parameters
    ----------
    setup : ReplaySetup
    loop : AdvisoryLoop, optional
        A loop to drive (default :func:`make_loop`).

    Returns
    -------
    ReplayResult
    """
    from advisory.io.messages import decode_frame
    from advisory.io.records import KIND_EVENT, KIND_OUTPUT, decode_event, read_records

    wall0 = time.perf_counter()
    records, report = read_records(setup.log)
    notes = []
    starts = [i for i, r in enumerate(records)
              if r.kind == KIND_EVENT and decode_event(r.data, report.version).code == "start"]
    if len(starts) > 1:  # several runs appended to one file: each has its own clock
        notes.append(f"{len(starts)} runs recorded in this file; replaying the last one "
                     f"(record {starts[-1]} on)")
        records = records[starts[-1]:]
    loop = loop or make_loop(setup)
    inputs = _inputs(records, loop.framing)
    recorded = [(r.mono_s, r.utc_s, bytes(r.data)) for r in records if r.kind == KIND_OUTPUT]
    service, controls = _controls(records, report.version)
    del records
    res = ReplayResult(setup=setup, read=asdict(report), recorded_outputs=len(recorded),
                       notes=notes)
    if not inputs:
        res.wall_s = time.perf_counter() - wall0
        return res
    res.t0_monotonic, res.t0_utc = inputs[0][0], inputs[0][1]
    res.duration_s = inputs[-1][0] - inputs[0][0]
    use_recorded = bool(recorded) and setup.clock != "schedule"
    if setup.clock == "recorded" and not recorded:
        raise ReplayError(f"--clock recorded: {setup.log} holds no recorded outputs")
    collector = None
    if setup.collect:
        from advisory.bench.report import FlightCollector

        collector = FlightCollector(loop, res.t0_monotonic)
    driver = _Driver(loop, service)
    pacer = _Pacer(setup.speed, res.t0_monotonic)
    sender = _Sender(setup.send, loop.framing) if setup.send else None
    outputs = res.outputs
    steps = loop.advisor.steps

    def poll(now: float, utc: float, final: bool = False) -> None:
        nonlocal steps
        pacer.wait(now)
        if final:
            out = loop.final_frames(now, utc, driver.stop_reason or "service stopped")
        else:
            out = loop.poll(now, utc)
        for p in out:
            outputs.append((now, utc, p))
        if collector is not None and loop.advisor.steps != steps:
            collector.on_step(now)
        steps = loop.advisor.steps

    def feed(mono: float, utc: float, data: bytes) -> None:
        pacer.wait(mono)
        if sender is not None:
            sender.send(data)
        loop.feed(data, mono, utc)

    # one time-ordered stream: at equal times link events first, then input, then polls
    FEED, CONTROL, POLL = 1, 0, 2
    events = [(m, FEED, i) for i, (m, _u, _d) in enumerate(inputs)]
    events += [(m, CONTROL, i) for i, (m, _k, _t) in enumerate(controls)]
    polls: list[tuple[float, float, dict | None, bool]] = []
    if use_recorded:
        by_time: dict[tuple[float, float], dict | None] = {}
        for m, u, p in recorded:
            f = decode_frame(p)
            key = (m, u)
            if f.type == "status":
                by_time[key] = f.fields["counters"]
            else:
                by_time.setdefault(key, None)
        stop_t = next((m for m, k, _t in controls if k == "stop"), math.inf)
        polls = [(m, u, c, m >= stop_t) for (m, u), c in sorted(by_time.items())]
        events += [(m, POLL, i) for i, (m, _u, _c, _f) in enumerate(polls)]
    events.sort()
    offset = inputs[0][1] - inputs[0][0]  # utc - mono of the latest input
    final_done = False
    try:
        for t, kind, i in events:
            if not use_recorded:
                due = loop.next_due()
                while due < t:
                    poll(due, due + offset)
                    due = loop.next_due()
            if kind == FEED:
                mono, utc, data = inputs[i]
                feed(mono, utc, data)
                offset = utc - mono
            elif kind == CONTROL:
                driver.control(controls[i][1], controls[i][2])
            else:
                mono, utc, counters, final = polls[i]
                if counters is not None:
                    driver.recorded_status(counters)
                if final and final_done:
                    continue
                poll(mono, utc, final)
                final_done = final_done or final
        if not use_recorded:
            end = inputs[-1][0]
            due = loop.next_due()
            while due <= end:
                poll(due, due + offset)
                due = loop.next_due()
    finally:
        if sender is not None:
            res.sent, res.send_errors = sender.sent, sender.errors
            sender.close()
    res.inputs_fed = len(inputs)
    res.counters = dict(loop.counters)
    res.segments = segments_of(outputs, res.t0_monotonic)
    if recorded:
        res.recorded_match, res.first_mismatch = _match(recorded, outputs, res.t0_monotonic)
    if setup.expect:
        res.diffs = compare_expected(res.segments, load_expected(setup.expect))
    if collector is not None:
        res.flight = collector.result()
    res.wall_s = time.perf_counter() - wall0
    return res


def segments_of(outputs: list, t0: float) -> list[Segment]:
    """Cut the advisory frames of ``outputs`` into segments (see :class:`Segment`)."""
    from advisory.io.messages import decode_frame

    segs: list[Segment] = []
    t_last = None
    for mono, _utc, payload in outputs:
        f = decode_frame(payload)
        if f.type != "adv":
            continue
        a = f.fields
        t = mono - t0
        t_last = t
        s = segs[-1] if segs else None
        if s is None or s.status != a["status"] or s.zone_id != a["zone_id"]:
            if s is not None:
                s.t_end_s = t
            s = Segment(a["status"], a["zone_id"], t, t, cue=a["cue"])
            segs.append(s)
        s.frames += 1
        psf, ttc = a["overpressure_psf"], a["time_to_contact_s"]
        if psf is not None and (s.worst_psf is None or psf > s.worst_psf):
            s.worst_psf = psf
        if ttc is not None and (s.min_time_to_contact_s is None
                                or ttc < s.min_time_to_contact_s):
            s.min_time_to_contact_s = ttc
        s.focus = s.focus or bool(a["focus"])
    if segs and t_last is not None:
        segs[-1].t_end_s = t_last
    return segs


def _match(recorded: list, outputs: list, t0: float) -> tuple[bool, str]:
    """Whether the replay's outputs equal the recorded ones (and where they first differ)."""
    for i, (a, b) in enumerate(zip(recorded, outputs)):
        if a[2] != b[2] or a[0] != b[0]:
            return False, f"output {i} at {a[0] - t0:.3f} s differs from the recorded one"
    if len(recorded) != len(outputs):
        return False, (f"{len(outputs)} outputs replayed, {len(recorded)} recorded")
    return True, ""


def _replay_job(setup: ReplaySetup) -> ReplayResult:
    return replay_log(setup)


def replay_many(setups: list[ReplaySetup], jobs: int | None = None):
    """Replay several logs in parallel worker processes; yields results in input order.

    The longest logs are handed out first, so the cores stay busy to the end.

    Parameters
    ----------
    setups : list of ReplaySetup
    jobs : int, optional
        Worker processes (default: one per core, at most one per log). 1 replays in this
        process.
    """
    jobs = min(jobs or os.cpu_count() or 1, len(setups))
    if jobs <= 1:
        for s in setups:
            yield replay_log(s)
        return
    method = "fork" if "fork" in mp.get_all_start_methods() else "spawn"
    order = sorted(range(len(setups)), key=lambda i: -os.path.getsize(setups[i].log))
    with mp.get_context(method).Pool(jobs) as pool:
        pending = {i: pool.apply_async(_replay_job, (setups[i],)) for i in order}
        for i in range(len(setups)):
            yield pending[i].get()


# ----------------------------------------------------------------------------- output

def _fmt(v, spec: str, unit: str = "") -> str:
    return "-" if v is None else f"{v:{spec}}{unit}"


def summary_table(results: list[ReplayResult]) -> str:
    """The per-log summary table (plain text)."""
    head = ("log", "duration", "conflicts", "first warning", "worst psf", "errors",
            "expected")
    rows = []
    for r in results:
        exp = "-" if r.diffs is None else ("match" if not r.diffs else
                                            f"{len(r.diffs)} diff(s)")
        rows.append((r.name, _fmt(r.duration_s, ".1f", " s"), str(r.conflicts),
                     _fmt(r.first_warning_s, ".1f", " s"), _fmt(r.worst_psf, ".2f"),
                     str(r.errors), exp))
    widths = [max(len(h), *(len(row[i]) for row in rows)) if rows else len(h)
              for i, h in enumerate(head)]
    def line(cells) -> str:
        return "  ".join(c.ljust(w) if i == 0 else c.rjust(w)
                         for i, (c, w) in enumerate(zip(cells, widths)))
    return "\n".join([line(head), line(["-" * w for w in widths])] + [line(r) for r in rows])


def cue_lines(result: ReplayResult) -> list[str]:
    """The crew cues as they fired, one line each with the time after the log start."""
    return [f"T+{s.t_start_s:6.1f} s  {s.cue}" for s in result.segments]


def read_notes(result: ReplayResult) -> list[str]:
    """Human notes on what the record reader skipped."""
    rd = result.read
    notes = [f"{result.name}: {n}" for n in result.notes]
    if rd.get("torn_tail"):
        notes.append(f"{result.name}: torn last record ({rd['torn_bytes']} bytes at the end of "
                     "the file, e.g. a power cut mid-write) detected and skipped; the rest "
                     "replayed")
    if rd.get("corrupt_regions"):
        notes.append(f"{result.name}: {rd['corrupt_regions']} damaged stretch(es) "
                     f"({rd['skipped_bytes']} bytes) skipped")
    return notes


def add_parser(sub: argparse._SubParsersAction) -> None:
    """Register ``boom-advisory replay``."""
    p = sub.add_parser(
        "replay", help="replay recorded flight logs through the live loop",
        description="Feed recorded input through the same decoder, validator and advisor "
                    "as 'run', on the recorded clock (identical output at any speed). "
                    + SAFETY_CAUTION)
    p.add_argument("logs", nargs="+", metavar="LOG",
                   help="record file(s), or scenario directories holding flight.rec")
    p.add_argument("--speed", default="max", metavar="1|10|max",
                   help="replay speed relative to real time (default max)")
    p.add_argument("--zones", metavar="FILE",
                   help="no-boom zones (GeoJSON); default: the scenario.toml beside the "
                        "log names it, else the zone file a 'run' recorded in its start "
                        "event")
    p.add_argument("--aircraft", metavar="FILE", help="aircraft file (default: scenario's "
                   "or the bundled demo aircraft)")
    p.add_argument("--tables", metavar="FILE",
                   help="boom table file (default: built once from the scenario and "
                        "cached, else the one a 'run' recorded, else the default table)")
    p.add_argument("--config", metavar="FILE", help="advisor thresholds (TOML)")
    p.add_argument("--expect", metavar="FILE",
                   help="expected advisories (JSON); 'auto': the expected.json named by "
                        "each log's scenario.toml")
    p.add_argument("--report", metavar="DIR", help="write report.html and PNG figures here")
    p.add_argument("--json", action="store_true", help="print one JSON object")
    p.add_argument("--send", metavar="URL",
                   help="also send the recorded input to this transport (e.g. "
                        "udp://127.0.0.1:5600) at --speed, to drive a live 'run'")
    p.add_argument("--input-format", choices=("stream", "datagram", "arinc429"),
                   help="what the recorded bytes are (default: scenario, recorded "
                        "settings, else stream)")
    p.add_argument("--rate-hz", type=float, help="advisor steps per second (default: "
                   "scenario, recorded settings, else 10)")
    p.add_argument("--clock", choices=("auto", "recorded", "schedule"), default="auto",
                   help="poll times: recorded outputs' times (auto when present) or the "
                        "loop's schedule")
    p.add_argument("--jobs", type=int, default=0,
                   help="worker processes for several logs (default: one per core)")
    p.set_defaults(func=run_replay)


def run_replay(args: argparse.Namespace) -> int:
    """``replay``: exit 0, or 1 when a log differs from its expected advisories."""
    if args.send and len(args.logs) > 1:
        raise ReplayError("--send: give exactly one LOG to send")
    if args.jobs < 0:
        raise ReplayError(f"--jobs: {args.jobs} must be >= 0")
    human = not args.json
    if human:
        print(SAFETY_CAUTION)
    setups = [prepare(log, zones=args.zones, aircraft=args.aircraft, tables=args.tables,
                      config=args.config, expect=args.expect, speed=args.speed,
                      send=args.send, collect=bool(args.report),
                      input_format=args.input_format, rate_hz=args.rate_hz,
                      clock=args.clock, quiet=args.json)
              for log in args.logs]
    results = []
    for res in replay_many(setups, args.jobs or None):
        results.append(res)
        if human:
            print(f"\n== {res.name} ({res.setup.log})")
            for line in cue_lines(res):
                print("  " + line)
            for note in read_notes(res):
                print("  note: " + note)
            if res.recorded_match is not None:
                print("  recorded outputs: " + ("reproduced byte for byte"
                                                if res.recorded_match else res.first_mismatch))
            if res.setup.send:
                print(f"  sent {res.sent} chunk(s) to {res.setup.send}"
                      + (f", {res.send_errors} failed" if res.send_errors else ""))
            if res.diffs:
                print(f"  DIFFERENCES from {res.setup.expect}:")
                for d in res.diffs:
                    print("    " + d)
            elif res.diffs is not None:
                print(f"  matches {res.setup.expect}")
        for note in read_notes(res):
            if not human:
                print("note: " + note, file=sys.stderr)
    report_path = None
    if args.report:
        from advisory.bench.report import write_report

        report_path = write_report(results, args.report)
    if args.json:
        print(json.dumps({"caution": SAFETY_CAUTION,
                          "results": [r.to_json() for r in results],
                          "report": None if report_path is None else str(report_path)},
                         indent=2))
    else:
        print()
        print(summary_table(results))
        if report_path is not None:
            print(f"\nreport: {report_path}")
        print(SAFETY_CAUTION)
    return 1 if any(r.diffs for r in results) else 0
