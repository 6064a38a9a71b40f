"""Read a record file for a replay as a stream: a light first pass, then the inputs.

:func:`scan_log` reads the file once and keeps only what is small: the last run's
link and stop events, its recorded outputs (to compare with and to poll at), and where
its inputs start and end. :func:`iter_inputs` then reads the file again and yields the
inputs one at a time as the replay feeds them, so a replay holds no more than one input
record at a time, whatever the size of the log.

The clock of a log (:class:`LogClock`, the same in both passes): a record whose time is
not a finite number is skipped and counted; a jump forward by more than
:data:`MAX_GAP_S` or back by more than :data:`BACKWARDS_SLACK_S` between two records
starts a new segment, placed :data:`SEGMENT_PAUSE_S` after the previous one on the
replay's clock, and says so in a note. A log appended to by several runs is replayed from
its last ``start`` event (each run has its own monotonic clock).

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import math
from collections.abc import Iterator
from dataclasses import dataclass, field

from advisory.io.framing import datagram, frame_stream
from advisory.io.messages import decode_frame
from advisory.io.records import (
    HEADER_LEN,
    KIND_EVENT,
    KIND_INPUT,
    KIND_OUTPUT,
    KIND_RAW_INPUT,
    ReadReport,
    Record,
    RecordReader,
    decode_event,
)

Chunk = tuple[float, float, bytes]  #: (monotonic s, UTC s, bytes)
Control = tuple[float, str, str]  #: (monotonic s, kind, text) of a recorded link event
FEED = 1  #: the event kind of an input (see :mod:`advisory.bench.replay`)
#: One input to feed: (monotonic s, FEED, its index, UTC s, bytes); sorts with the
#: replay's (time, kind, index) events.
InputEvent = tuple[float, int, int, float, bytes]

MAX_GAP_S = 300.0  #: a longer jump forward between two records starts a new segment, s
#: Records may be out of time order by this much (written by different threads of a
#: service); a longer step back starts a new segment, s.
BACKWARDS_SLACK_S = 1.0
SEGMENT_PAUSE_S = 10.0  #: the replay's clock from one segment to the next, s


class LogClock:
    """Places each record of one run on a continuous clock (see the module notes)."""

    def __init__(self) -> None:
        self.shift = 0.0
        self.last: float | None = None
        self.bad = 0
        self.notes: list[str] = []

    def place(self, r: Record) -> float | None:
        """The record's monotonic time on the replay's clock, s; None: skip it (bad)."""
        if not (math.isfinite(r.mono_s) and math.isfinite(r.utc_s)):
            self.bad += 1
            return None
        m = r.mono_s + self.shift
        last = self.last
        if last is not None and (m - last > MAX_GAP_S or m < last - BACKWARDS_SLACK_S):
            self.notes.append(f"time jumps by {m - last:+.6g} s at byte {r.offset}: new "
                              f"segment (replayed {SEGMENT_PAUSE_S:g} s after the previous "
                              "one)")
            self.shift += last + SEGMENT_PAUSE_S - m
            m = last + SEGMENT_PAUSE_S
        self.last = m if last is None else max(last, m)
        return m


@dataclass
class _Inputs:
    """Count, first and last of one kind of input record in the run."""

    n: int = 0
    first: tuple[float, float] | None = None
    last_mono: float = 0.0

    def add(self, mono: float, utc: float) -> None:
        if self.first is None:
            self.first = (mono, utc)
        self.n += 1
        self.last_mono = mono


@dataclass
class LogScan:
    """What the first pass found in the last run of a log.

    Attributes
    ----------
    path : str
    report : ReadReport
        The record reader's report (torn tail, damaged stretches).
    start_offset : int
        Byte offset of the last run's first record.
    service : bool
        Recorded by a ``run`` service (the run has a ``start`` event).
    controls : list of (float, str, str)
        Link and stop events: (monotonic s, ``lost``/``open_failed``/``open``/``stop``,
        text).
    recorded : list of (float, float, bytes)
        Recorded outputs that decode.
    recorded_counters : list of dict or None
        The counters of each (None: not a status frame).
    raw : bool
        Feed the raw input records (kind 3); False: the frame payloads (kind 1).
    n_inputs : int
    first_input : (float, float) or None
        Monotonic and UTC time of the first input, s.
    last_input_mono : float
        Monotonic time of the last input in file order, s.
    bad_records : int
        Records skipped: time not a number, or an output that does not decode.
    notes : list of str
    """

    path: str
    report: ReadReport
    start_offset: int = HEADER_LEN
    service: bool = False
    controls: list[Control] = field(default_factory=list)
    recorded: list[Chunk] = field(default_factory=list)
    recorded_counters: list[dict | None] = field(default_factory=list)
    raw: bool = False
    n_inputs: int = 0
    first_input: tuple[float, float] | None = None
    last_input_mono: float = 0.0
    bad_records: int = 0
    notes: list[str] = field(default_factory=list)


class _RunScan:
    """The running first pass over one run (a new one at every ``start`` event)."""

    def __init__(self, offset: int) -> None:
        self.offset = offset
        self.clock = LogClock()
        self.service = False
        self.controls: list[Control] = []
        self.recorded: list[Chunk] = []
        self.counters: list[dict | None] = []
        self.bad_out = 0
        self.raw = _Inputs()
        self.framed = _Inputs()

    def add(self, r: Record, version: int) -> None:
        ev = decode_event(r.data, version) if r.kind == KIND_EVENT else None
        if ev is not None and ev.code == "start":
            self.service = True
        m = self.clock.place(r)
        if m is None:
            return
        if r.kind == KIND_RAW_INPUT:
            self.raw.add(m, r.utc_s)
        elif r.kind == KIND_INPUT:
            self.framed.add(m, r.utc_s)
        elif r.kind == KIND_OUTPUT:
            p = bytes(r.data)
            try:
                f = decode_frame(p)
                c = f.fields["counters"] if f.type == "status" else None
            except (ValueError, TypeError, KeyError):
                self.bad_out += 1
                return
            self.recorded.append((m, r.utc_s, p))
            self.counters.append(c)
        elif ev is not None:
            self._control(m, ev.code, ev.fields)

    def _control(self, m: float, code: str, fields: dict) -> None:
        reason = fields.get("reason")
        if code == "input_lost":
            self.controls.append((m, "lost", str(reason)))
        elif code == "input_open_failed":
            self.controls.append((m, "open_failed", str(reason)))
        elif code == "input_open":
            self.controls.append((m, "open", str(fields.get("url"))))
        elif code == "stopping":
            self.controls.append((m, "stop", "service stopped" if reason == "stop requested"
                                  else f"service stopped ({reason})"))


def scan_log(path: str) -> LogScan:
    """The first pass over a record file (see :class:`LogScan`).

    Raises
    ------
    RecordFormatError
        Not a record file, damaged header or unsupported version.
    """
    with RecordReader(path) as reader:
        version = reader.report.version
        run = _RunScan(HEADER_LEN)
        starts: list[int] = []
        for i, r in enumerate(reader):
            if r.kind == KIND_EVENT and decode_event(r.data, version).code == "start":
                starts.append(i)
                if len(starts) > 1:  # several runs appended to one file: the last counts
                    run = _RunScan(r.offset)
            run.add(r, version)
        report = reader.report
    inputs = run.raw if run.raw.n else run.framed
    notes = []
    if len(starts) > 1:
        notes.append(f"{len(starts)} runs recorded in this file; replaying the last one "
                     f"(record {starts[-1]} on)")
    notes += run.clock.notes
    if run.clock.bad:
        notes.append(f"{run.clock.bad} record(s) with a time that is not a number skipped")
    if run.bad_out:
        notes.append(f"{run.bad_out} recorded output(s) that cannot be decoded skipped")
    return LogScan(path=str(path), report=report, start_offset=run.offset,
                   service=run.service, controls=run.controls, recorded=run.recorded,
                   recorded_counters=run.counters, raw=bool(run.raw.n), n_inputs=inputs.n,
                   first_input=inputs.first, last_input_mono=inputs.last_mono,
                   bad_records=run.clock.bad + run.bad_out, notes=notes)


def iter_inputs(scan: LogScan, framing: str) -> Iterator[InputEvent]:
    """The second pass: the run's inputs in file order, on the scan's clock, one at a
    time (raw input records as received, else frame payloads framed again)."""
    kind = KIND_RAW_INPUT if scan.raw else KIND_INPUT
    wrap = frame_stream if framing == "stream" else datagram
    clock = LogClock()
    i = 0
    with RecordReader(scan.path) as reader:
        for r in reader.records_from(scan.start_offset):
            m = clock.place(r)
            if m is None or r.kind != kind:
                continue
            data = bytes(r.data) if scan.raw else wrap(bytes(r.data))
            yield (m, FEED, i, r.utc_s, data)
            i += 1
