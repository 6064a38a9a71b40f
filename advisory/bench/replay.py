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

Streaming: the log is read in two passes (:mod:`advisory.bench.logscan`): a first one
keeps only the small things (link events, recorded outputs, where the inputs are), the
second feeds the inputs one record at a time, so memory does not grow with the inputs.

Damaged logs: a record whose time is not a finite number, or a recorded output that
cannot be decoded, is skipped and counted (``bad_records``). A jump forward by more than
:data:`MAX_GAP_S` or back by more than :data:`BACKWARDS_SLACK_S` between two records
splits the log into segments: the replay says so in its notes and goes on with the next
segment :data:`SEGMENT_PAUSE_S` after the last record of the previous one on its own
clock (so a far-future timestamp costs a few polls, not years of them).

Setting a replay up is :mod:`advisory.bench.scenario` (:func:`prepare` is re-exported
here), the expected advisories :mod:`advisory.bench.expect`, the result
:mod:`advisory.bench.result`, several logs in worker processes :mod:`advisory.bench.batch`.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import heapq
import math
import time
from collections.abc import Iterator
from dataclasses import asdict
from typing import Any, cast

from advisory.bench.collect import FlightCollector
from advisory.bench.expect import compare_expected, load_expected, segments_of
from advisory.bench.logscan import (
    BACKWARDS_SLACK_S,
    FEED,
    MAX_GAP_S,
    SEGMENT_PAUSE_S,
    Chunk,
    Control,
    InputEvent,
    iter_inputs,
    scan_log,
)
from advisory.bench.result import ReplayResult
from advisory.bench.scenario import ReplayError, ReplaySetup, make_loop, prepare
from advisory.io.framing import DatagramReader, StreamDeframer, datagram, frame_stream
from advisory.io.transports import TransportError, open_transport
from advisory.schema import SERVICE_COUNTERS
from advisory.service.loop import AdvisoryLoop

__all__ = ["BACKWARDS_SLACK_S", "MAX_GAP_S", "SEGMENT_PAUSE_S", "prepare", "replay_log"]

#: A recorded poll: monotonic s, UTC s, the counters of its status frame (None: no
#: status frame then), and whether it came after the recorded ``stopping`` event.
Poll = tuple[float, float, dict[str, int] | None, bool]
CONTROL, POLL = 0, 2  #: event kinds; at equal times: control, then feed (FEED), then poll


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
        """Poll on the loop's own schedule (steps and heartbeats) up to ``until``
        (UTC = monotonic + offset)."""
        due = self.loop.next_wake()
        while due < until or (inclusive and due == until):
            self.poll(due, due + offset)
            due = self.loop.next_wake()

    def drive(self, inputs: Iterator[InputEvent], offset: float, last_input: float,
              controls: list[Control], polls: list[Poll] | None) -> int:
        """Run every event in time order; ``polls`` None: the loop's schedule.

        ``inputs`` come one at a time in file order (:func:`~advisory.bench.logscan.
        iter_inputs`) and are merged with the recorded events; ``offset`` is UTC minus
        monotonic time of the first input, ``last_input`` the monotonic time of the last.
        Returns the number of inputs fed.
        """
        others: list[tuple[float, int, int]] = [(m, CONTROL, i)
                                                for i, (m, _k, _t) in enumerate(controls)]
        if polls is not None:
            others += [(m, POLL, i) for i, (m, _u, _c, _f) in enumerate(polls)]
        others.sort()
        final_done = False
        fed = 0
        merged = cast(Iterator[tuple[Any, ...]], heapq.merge(inputs, others))
        for event in merged:
            t, kind, i = event[0], event[1], event[2]
            if polls is None:
                self.poll_due(t, offset, inclusive=False)
            if kind == FEED:
                utc, data = event[3], event[4]
                self.feed(t, utc, data)
                offset = utc - t
                fed += 1
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
            self.poll_due(last_input, offset, inclusive=True)
        return fed


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
    scan = scan_log(setup.log)
    loop = loop or make_loop(setup)
    recorded = scan.recorded
    res = ReplayResult(setup=setup, read=asdict(scan.report), recorded_outputs=len(recorded),
                       notes=scan.notes, bad_records=scan.bad_records)
    if scan.first_input is None:
        res.wall_s = time.perf_counter() - wall0
        return res
    res.t0_monotonic, res.t0_utc = scan.first_input
    res.duration_s = scan.last_input_mono - res.t0_monotonic
    if setup.clock == "recorded" and not recorded:
        raise ReplayError(f"--clock recorded: {setup.log} holds no recorded outputs")
    use_recorded = bool(recorded) and setup.clock != "schedule"
    controls = scan.controls
    polls = (_recorded_polls(recorded, scan.recorded_counters, controls)
             if use_recorded or scan.service else [])
    collector = (FlightCollector(loop, res.t0_monotonic, edge_conditions=setup.edge_conditions)
                 if setup.collect else None)
    driver = _Driver(loop, carried_counters(polls) if scan.service else ())
    sender = _Sender(setup.send, loop.framing) if setup.send else None
    run = _Run(loop, driver, _Pacer(setup.speed, res.t0_monotonic), sender, collector)
    try:
        res.inputs_fed = run.drive(iter_inputs(scan, loop.framing),
                                   res.t0_utc - res.t0_monotonic, scan.last_input_mono,
                                   controls, polls if use_recorded else None)
    finally:
        if sender is not None:
            res.sent, res.send_errors = sender.sent, sender.errors
            sender.close()
    res.outputs = run.outputs
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
