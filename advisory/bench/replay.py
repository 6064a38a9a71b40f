"""Replay recorded flights through the live loop, on a clock the replay controls.

A record file (:mod:`advisory.io.records`) holds every chunk of bytes a service
received, with its receive times. :func:`replay_log` feeds those bytes, in order and with
their recorded receive times, to the same :class:`advisory.service.loop.AdvisoryLoop`
(deframer, decoder, validator, advisor) that ``boom-advisory run`` uses, and calls
:meth:`~advisory.service.loop.AdvisoryLoop.poll` at times taken from the recording. The
loop reads no clock for anything it publishes, so the advisory and status frames of a
replay are byte-identical at any speed and on every run; ``--speed`` only decides how
long the replay sleeps between events.

The clock
---------
* A log recorded by a live service also holds its outputs, each stamped with the time of
  the poll that produced it: the replay polls at exactly those times, so it reproduces
  the live run's outputs byte for byte (``recorded_match`` in the result says whether it
  did).
  The replay also plays the driver's part as the record tells it: the input link going
  down and up again (the service's ``input_lost`` / ``input_open`` events), the
  driver's counters (those of :data:`advisory.schema.SERVICE_COUNTERS` that its status
  frames carried) and the final frames at shutdown (the ``stopping`` event). A file that
  several runs were appended to is replayed from its last ``start`` event.
* A log with inputs only (a synthesized feed, a capture) is polled on the loop's own
  fixed-rate schedule (:meth:`~advisory.service.loop.AdvisoryLoop.next_due`) up to the last
  input.

In both cases a frame received at the same instant as a poll is fed first.

Which bytes are fed: the raw-input records (kind 3, garbage included); a log without raw
input records has its CRC-checked frame payloads (kind 1) framed again and fed instead.
A torn last record (power cut mid-write) and damaged stretches inside the file are
reported and skipped by the reader; everything else replays.

Damaged logs: a record whose time is not a finite number, or a recorded output that
cannot be decoded, is skipped and counted (``bad_records``). A jump forward by more than
:data:`MAX_GAP_S` or back by more than :data:`BACKWARDS_SLACK_S` between two records
splits the log into segments: the replay says so in its notes and goes on with the next
segment :data:`SEGMENT_PAUSE_S` after the last record of the previous one on its own
clock (so a far-future timestamp costs a few polls, not years of them). Record events are read only
through :func:`advisory.io.records.decode_event` (their codes, never their wording).

Setting a replay up is :mod:`advisory.bench.scenario` (:func:`prepare` is re-exported
here), the expected advisories :mod:`advisory.bench.expect`, the result
:mod:`advisory.bench.result`, several logs in worker processes :mod:`advisory.bench.batch`.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import math
import time
from dataclasses import asdict, replace

from advisory.bench.collect import FlightCollector
from advisory.bench.expect import compare_expected, load_expected, segments_of
from advisory.bench.result import ReplayResult
from advisory.bench.scenario import ReplayError, ReplaySetup, make_loop, prepare
from advisory.io.framing import DatagramReader, StreamDeframer, datagram, frame_stream
from advisory.io.messages import decode_frame
from advisory.io.records import (
    KIND_EVENT,
    KIND_INPUT,
    KIND_OUTPUT,
    KIND_RAW_INPUT,
    Record,
    decode_event,
    read_records,
)
from advisory.io.transports import TransportError, open_transport
from advisory.schema import SERVICE_COUNTERS
from advisory.service.loop import AdvisoryLoop

__all__ = ["prepare", "replay_log"]

Chunk = tuple[float, float, bytes]  #: (monotonic s, UTC s, bytes)
Control = tuple[float, str, str]  #: (monotonic s, kind, text) of a recorded link event
#: A recorded poll: monotonic s, UTC s, the counters of its status frame (None: no
#: status frame then), and whether it came after the recorded ``stopping`` event.
Poll = tuple[float, float, dict[str, int] | None, bool]
FEED, CONTROL, POLL = 1, 0, 2  #: event kinds; at equal times: control, then feed, then poll
MAX_GAP_S = 300.0  #: a longer jump forward between two records starts a new segment, s
#: Records may be out of time order by this much (written by different threads of a
#: service); a longer step back starts a new segment, s.
BACKWARDS_SLACK_S = 1.0
SEGMENT_PAUSE_S = 10.0  #: the replay's clock from one segment to the next, s


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
        try:
            self.transport = open_transport(url, "output")
        except (TransportError, ValueError) as exc:
            raise ReplayError(f"--send: {exc}") from None
        self.framing = framing
        self._split = StreamDeframer() if framing == "stream" else DatagramReader()
        self.sent = 0
        self.errors = 0

    def send(self, data: bytes) -> None:
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


def _inputs(records: list[Record], framing: str) -> list[Chunk]:
    """(mono, utc, bytes) to feed: raw input records, else re-framed payload records."""
    raw = [(r.mono_s, r.utc_s, bytes(r.data)) for r in records if r.kind == KIND_RAW_INPUT]
    if raw:
        return raw
    wrap = frame_stream if framing == "stream" else datagram
    return [(r.mono_s, r.utc_s, wrap(bytes(r.data))) for r in records if r.kind == KIND_INPUT]


def _last_run(records: list[Record], version: int) -> tuple[list[Record], list[str]]:
    """The records of the last run in the file (from its ``start`` event) and a note."""
    starts = [i for i, r in enumerate(records)
              if r.kind == KIND_EVENT and decode_event(r.data, version).code == "start"]
    if len(starts) > 1:  # several runs appended to one file: each has its own clock
        return records[starts[-1]:], [f"{len(starts)} runs recorded in this file; replaying "
                                      f"the last one (record {starts[-1]} on)"]
    return records, []


def _segments(records: list[Record]) -> tuple[list[Record], int, list[str]]:
    """The records on one continuous clock: (records, bad, notes).

    Records whose times are not finite are dropped (``bad``); after a jump forward by more
    than :data:`MAX_GAP_S` or back by more than :data:`BACKWARDS_SLACK_S` the following
    records are shifted to go on :data:`SEGMENT_PAUSE_S` after the last one (one note
    per segment).
    """
    out: list[Record] = []
    bad = 0
    notes: list[str] = []
    shift = 0.0
    last: float | None = None
    for r in records:
        if not (math.isfinite(r.mono_s) and math.isfinite(r.utc_s)):
            bad += 1
            continue
        m = r.mono_s + shift
        if last is not None and (m - last > MAX_GAP_S or m < last - BACKWARDS_SLACK_S):
            notes.append(f"time jumps by {m - last:+.6g} s at byte {r.offset}: new segment "
                         f"(replayed {SEGMENT_PAUSE_S:g} s after the previous one)")
            shift += last + SEGMENT_PAUSE_S - m
            m = last + SEGMENT_PAUSE_S
        out.append(replace(r, mono_s=m) if shift else r)
        last = m if last is None else max(last, m)
    if bad:
        notes.append(f"{bad} record(s) with a time that is not a number skipped")
    return out, bad, notes


def _recorded_outputs(records: list[Record]) -> tuple[list[Chunk], list[dict | None], int]:
    """The recorded outputs that decode, the counters of each (None: not a status frame),
    and how many could not be decoded (skipped)."""
    outputs: list[Chunk] = []
    counters: list[dict | None] = []
    bad = 0
    for r in records:
        if r.kind != KIND_OUTPUT:
            continue
        p = bytes(r.data)
        try:
            f = decode_frame(p)
            c = f.fields["counters"] if f.type == "status" else None
        except (ValueError, TypeError, KeyError):
            bad += 1
            continue
        outputs.append((r.mono_s, r.utc_s, p))
        counters.append(c)
    return outputs, counters, bad


def _controls(records: list[Record], version: int) -> tuple[bool, list[Control]]:
    """(recorded by a ``run`` service, link and stop events as (mono, kind, text)).

    Read from the typed events' codes and fields (record format 2), or from the text
    lines of format-1 records, always through :func:`~advisory.io.records.decode_event`.
    """
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


def _recorded_polls(recorded: list[Chunk], counters: list[dict | None],
                    controls: list[Control]) -> list[Poll]:
    """The polls of the recorded run, in time order (one per distinct output time)."""
    by_time: dict[tuple[float, float], dict[str, int] | None] = {}
    for (m, u, _p), c in zip(recorded, counters):
        key = (m, u)
        if c is not None:
            by_time[key] = c
        else:
            by_time.setdefault(key, None)
    stop_t = next((m for m, k, _t in controls if k == "stop"), math.inf)
    return [(m, u, c, m >= stop_t) for (m, u), c in sorted(by_time.items())]


def carried_counters(polls: list[Poll]) -> tuple[str, ...]:
    """Those of :data:`~advisory.schema.SERVICE_COUNTERS` the recorded status frames carry.

    A record written before a counter was added lacks it, and its replay must not
    publish it either (so the replay stays byte-identical to the recording).
    """
    seen: set[str] = set()
    for _m, _u, counters, _f in polls:
        if counters is not None:
            seen.update(k for k in SERVICE_COUNTERS if k in counters)
    return tuple(k for k in SERVICE_COUNTERS if k in seen)


class _Driver:
    """Plays the part of the ``run`` driver towards the loop during a replay: link state,
    the driver's counters, and the final frames at a recorded shutdown.

    Parameters
    ----------
    loop : AdvisoryLoop
    counters : tuple of str
        The driver's counters to keep (:func:`carried_counters`; empty for a log that a
        ``run`` service did not record).
    """

    def __init__(self, loop: AdvisoryLoop, counters: tuple[str, ...]) -> None:
        self.loop = loop
        self.up = True
        self.ever_lost = False
        self.stop_reason: str | None = None
        loop.external_counters.update(dict.fromkeys(counters, 0))

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

    def recorded_status(self, counters: dict[str, int]) -> None:
        """Take the driver's counters from a status frame the service published now."""
        ext = self.loop.external_counters
        for k in SERVICE_COUNTERS:
            if k in counters and k in ext:
                ext[k] = counters[k]


class _Run:
    """One replay in progress: feeds and polls the loop, paced, collecting the outputs."""

    def __init__(self, loop: AdvisoryLoop, driver: _Driver, pacer: _Pacer,
                 sender: _Sender | None, collector: FlightCollector | None) -> None:
        self.loop = loop
        self.driver = driver
        self.pacer = pacer
        self.sender = sender
        self.collector = collector
        self.outputs: list[Chunk] = []
        self.steps = loop.advisor.steps

    def poll(self, now: float, utc: float, final: bool = False) -> None:
        loop = self.loop
        self.pacer.wait(now)
        if final:
            out = loop.final_frames(now, utc, self.driver.stop_reason or "service stopped")
        else:
            out = loop.poll(now, utc)
        for p in out:
            self.outputs.append((now, utc, p))
        if self.collector is not None and loop.advisor.steps != self.steps:
            self.collector.on_step(now)
        self.steps = loop.advisor.steps

    def feed(self, mono: float, utc: float, data: bytes) -> None:
        self.pacer.wait(mono)
        if self.sender is not None:
            self.sender.send(data)
        self.loop.feed(data, mono, utc)

    def poll_due(self, until: float, offset: float, inclusive: bool) -> None:
        """Poll on the loop's own schedule up to ``until`` (UTC = monotonic + offset)."""
        due = self.loop.next_due()
        while due < until or (inclusive and due == until):
            self.poll(due, due + offset)
            due = self.loop.next_due()

    def drive(self, inputs: list[Chunk], controls: list[Control],
              polls: list[Poll] | None) -> None:
        """Run every event in time order; ``polls`` None: the loop's schedule."""
        events = [(m, FEED, i) for i, (m, _u, _d) in enumerate(inputs)]
        events += [(m, CONTROL, i) for i, (m, _k, _t) in enumerate(controls)]
        if polls is not None:
            events += [(m, POLL, i) for i, (m, _u, _c, _f) in enumerate(polls)]
        events.sort()
        offset = inputs[0][1] - inputs[0][0]  # utc - mono of the latest input
        final_done = False
        for t, kind, i in events:
            if polls is None:
                self.poll_due(t, offset, inclusive=False)
            if kind == FEED:
                mono, utc, data = inputs[i]
                self.feed(mono, utc, data)
                offset = utc - mono
            elif kind == CONTROL:
                self.driver.control(controls[i][1], controls[i][2])
            elif polls is not None:
                mono, utc, counters, final = polls[i]
                if counters is not None:
                    self.driver.recorded_status(counters)
                if final and final_done:
                    continue
                self.poll(mono, utc, final)
                final_done = final_done or final
        if polls is None:
            self.poll_due(inputs[-1][0], offset, inclusive=True)


def replay_log(setup: ReplaySetup, loop: AdvisoryLoop | None = None) -> ReplayResult:
    """Replay one log through the loop (see the module notes); never sleeps at ``inf``.

    Parameters
    ----------
    setup : ReplaySetup
    loop : AdvisoryLoop, optional
        A loop to drive (default :func:`~advisory.bench.scenario.make_loop`).

    Returns
    -------
    ReplayResult
    """
    wall0 = time.perf_counter()
    records, report = read_records(setup.log)
    records, notes = _last_run(records, report.version)
    records, bad, seg_notes = _segments(records)
    loop = loop or make_loop(setup)
    inputs = _inputs(records, loop.framing)
    recorded, recorded_counters, bad_out = _recorded_outputs(records)
    if bad_out:
        seg_notes.append(f"{bad_out} recorded output(s) that cannot be decoded skipped")
    service, controls = _controls(records, report.version)
    del records
    res = ReplayResult(setup=setup, read=asdict(report), recorded_outputs=len(recorded),
                       notes=notes + seg_notes, bad_records=bad + bad_out)
    if not inputs:
        res.wall_s = time.perf_counter() - wall0
        return res
    res.t0_monotonic, res.t0_utc = inputs[0][0], inputs[0][1]
    res.duration_s = inputs[-1][0] - inputs[0][0]
    if setup.clock == "recorded" and not recorded:
        raise ReplayError(f"--clock recorded: {setup.log} holds no recorded outputs")
    use_recorded = bool(recorded) and setup.clock != "schedule"
    polls = (_recorded_polls(recorded, recorded_counters, controls)
             if use_recorded or service else [])
    collector = FlightCollector(loop, res.t0_monotonic) if setup.collect else None
    driver = _Driver(loop, carried_counters(polls) if service else ())
    sender = _Sender(setup.send, loop.framing) if setup.send else None
    run = _Run(loop, driver, _Pacer(setup.speed, res.t0_monotonic), sender, collector)
    try:
        run.drive(inputs, controls, polls if use_recorded else None)
    finally:
        if sender is not None:
            res.sent, res.send_errors = sender.sent, sender.errors
            sender.close()
    res.outputs = run.outputs
    res.inputs_fed = len(inputs)
    res.counters = dict(loop.counters)
    res.segments = segments_of(res.outputs, res.t0_monotonic)
    if recorded:
        res.recorded_match, res.first_mismatch = _match(recorded, res.outputs, res.t0_monotonic)
    if setup.expect:
        res.diffs = compare_expected(res.segments, load_expected(setup.expect))
    if collector is not None:
        res.flight = collector.result()
    res.wall_s = time.perf_counter() - wall0
    return res


def _match(recorded: list[Chunk], outputs: list[Chunk], t0: float) -> tuple[bool, str]:
    """Whether the replay's outputs equal the recorded ones (and where they first differ)."""
    for i, (a, b) in enumerate(zip(recorded, outputs)):
        if a[2] != b[2] or a[0] != b[0]:
            return False, f"output {i} at {a[0] - t0:.3f} s differs from the recorded one"
    if len(recorded) != len(outputs):
        return False, (f"{len(outputs)} outputs replayed, {len(recorded)} recorded")
    return True, ""
