"""``boom-advisory run``: the real-time service around :class:`advisory.service.loop.AdvisoryLoop`.

The driver owns the clocks and the links; the loop owns everything between bytes in and
frames out (so ``replay`` runs the very same code). One thread reads the input with
monotonic deadlines, feeds the loop, and publishes what the loop returns; a second
thread writes the outputs from a bounded queue, so a full or stuck output never blocks
the loop (when the queue is full the oldest frame is dropped, counted as
``output_dropped``).

* Input: any transport URL (``docs/interface.md`` section 12). A serial port that fails
  (cable pulled, adapter unplugged, absent at start) is closed and reopened with
  exponential backoff (0.1 s doubling to 2 s) while the advisories say ``unavailable``.
  A UDP or file input that cannot be opened at start is a fatal error (exit 1).
* Output: advisory frames every step and status frames at least once a second, framed
  for the output transport. A serial output that fails is reopened the same way.
* Record (``--record``): every received byte string, every frame that passed its CRC,
  every output, and events (start, link lost/reopened, statistics, shutdown).
* Tables: ``--tables FILE``, or the default table for the aircraft (built once, cached).
  ``--profile FILE`` rebuilds the table for that atmosphere profile off the hot path
  (:class:`advisory.tables.manager.TableManager`), at start when the profile differs
  from the table's atmosphere and again whenever the file changes; the advisories say
  ``tables_stale`` meanwhile.
* Stops on SIGINT/SIGTERM, after ``--duration-s``, or when a file input ends: publishes
  a final ``unavailable`` advisory and status, drains the output queue (at most 1 s),
  writes a statistics event, fsyncs and closes the record file.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import argparse
import datetime as _dt
import json
import math
import os
import queue
import resource
import signal
import sys
import threading
import time
from dataclasses import dataclass, replace
from pathlib import Path

from advisory import SAFETY_CAUTION, __version__
from advisory.io.transports import (
    FramedLink,
    SendBufferFullError,
    SerialTransport,
    TransportError,
    UdpTransport,
    make_transport,
)
from advisory.service.loop import INPUT_FORMATS, AdvisoryLoop

EXIT_OK = 0
EXIT_RUNTIME = 1
EXIT_USAGE = 2

BACKOFF_START_S = 0.1  #: first reconnect delay, s
BACKOFF_MAX_S = 2.0  #: longest reconnect delay, s
MAX_WAIT_S = 0.25  #: longest single wait for input, s (bounds the reaction to signals)
OUTPUT_QUEUE = 32  #: output frames waiting for the writer thread at most (about 3 s)
STATS_INTERVAL_S = 60.0  #: statistics event period in the record, s
UDP_RCVBUF_BYTES = 4 << 20  #: receive buffer asked for on UDP inputs (kernel may cap it)


class RunError(ValueError):
    """A bad ``run`` setting or file; the message names the option and the value."""


@dataclass(frozen=True)
class RunSettings:
    """Everything ``boom-advisory run`` is told (see :func:`add_parser` for the meaning)."""

    input_url: str
    output_url: str
    zones: str
    aircraft: str | None = None
    tables: str | None = None
    record: str | None = None
    config: str | None = None
    rate_hz: float = 10.0
    input_format: str | None = None
    profile: str | None = None
    duration_s: float | None = None
    label_map: str | None = None
    heartbeat_s: float = 1.0


#: How each record event reads for a person (stderr, journal); the record keeps the code
#: and fields, so rewording a line here never changes what a replay does.
_EVENT_TEXT = {
    "start": "start {settings}",
    "start_failed": "start failed: {reason}",
    "first_advisory": "first advisory out {after_s:.2f} s after start",
    "input_open": "input open: {url}",
    "input_open_failed": "input open failed: {reason}; retrying with backoff",
    "input_lost": "input lost: {reason}",
    "output_open": "output open: {url}",
    "output_open_failed": "output open failed: {reason}; retrying with backoff",
    "output_lost": "output lost: {reason}",
    "output_error": "output error: {reason}",
    "output_blocked": "output writer still blocked at shutdown",
    "internal_error": "internal error (going on): {reason}",
    "stopping": "stopping: {reason}",
    "stats": "{kind}",
    "shutdown": "shutdown",
    "note": "{text}",
}


def event_text(code: str, fields: dict) -> str:
    """One line for a person describing a record event."""
    if code == "start":
        return "start " + json.dumps(fields.get("settings"), sort_keys=True)
    try:
        return _EVENT_TEXT[code].format(**fields)
    except (KeyError, ValueError, IndexError):
        return f"{code} {fields}"


def _utc_text(utc_s: float) -> str:
    return _dt.datetime.fromtimestamp(utc_s, _dt.timezone.utc).isoformat(
        timespec="milliseconds").replace("+00:00", "Z")


def _rss_kb() -> int:
    """Resident set size of this process, KiB (Linux /proc; 0 elsewhere)."""
    try:
        with open("/proc/self/status", encoding="ascii") as f:
            for line in f:
                if line.startswith("VmRSS:"):
                    return int(line.split()[1])
    except OSError:
        pass
    return 0


# ------------------------------------------------------------------------------ input

class InputLink:
    """The input transport with reconnect and exponential backoff.

    Parameters
    ----------
    url : str
        Transport URL (``docs/interface.md`` section 12).
    on_event : callable
        Called with one line of text for each link event (opened, lost, retrying).
    """

    def __init__(self, url: str, on_event) -> None:
        self.url = url
        self.transport = make_transport(url, "input")
        self.is_stream = self.transport.is_stream
        self.retry = isinstance(self.transport, SerialTransport)
        self.up = False
        self.reason = "not opened yet"
        self.next_try = -math.inf
        self.backoff = BACKOFF_START_S
        self.lost = 0
        self.reopened = 0
        self.on_event = on_event
        self._last_error = ""

    def try_open(self, now: float) -> bool:
        """Open when the backoff allows; True when the link is up afterwards.

        Raises
        ------
        TransportError
            The first open of a non-serial input failed (nothing to wait for).
        """
        if self.up:
            return True
        if now < self.next_try:
            return False
        try:
            self.transport.open()
        except TransportError as exc:
            if not self.retry and self.lost == 0 and self.reopened == 0:
                raise
            self.reason = str(exc)
            if self.reason != self._last_error:
                self.on_event("input_open_failed", reason=str(exc))
                self._last_error = self.reason
            self.next_try = now + self.backoff
            self.backoff = min(self.backoff * 2.0, BACKOFF_MAX_S)
            return False
        if isinstance(self.transport, UdpTransport):
            _enlarge_receive_buffer(self.transport)
        if self.lost:
            self.reopened += 1
        self.up = True
        self.reason = ""
        self._last_error = ""
        self.backoff = BACKOFF_START_S
        self.on_event("input_open", url=self.url)
        return True

    def receive(self, deadline: float) -> bytes | None:
        """Bytes before the deadline, or None; a failure marks the link down."""
        try:
            return self.transport.receive(deadline)
        except TransportError as exc:
            self.mark_lost(str(exc))
            return None

    def mark_lost(self, reason: str) -> None:
        """Close the link and schedule a reopen."""
        self.transport.close()
        self.up = False
        self.lost += 1
        self.reason = reason
        self.next_try = time.monotonic() + BACKOFF_START_S
        self.backoff = BACKOFF_START_S * 2.0
        self.on_event("input_lost", reason=reason)

    @property
    def at_eof(self) -> bool:
        """A file input reached its end (and does not follow)."""
        return bool(getattr(self.transport, "at_eof", False))

    def close(self) -> None:
        """Close (safe twice)."""
        self.transport.close()


def _enlarge_receive_buffer(transport: UdpTransport) -> None:
    """Ask for a larger socket receive buffer so bursts survive a slow step."""
    import socket

    sock = getattr(transport, "_sock", None)
    if sock is not None:
        try:
            sock.setsockopt(socket.SOL_SOCKET, socket.SO_RCVBUF, UDP_RCVBUF_BYTES)
        except OSError:
            pass


# ----------------------------------------------------------------------------- output

class OutputPublisher:
    """Writes output payloads from a bounded queue on its own thread.

    ``publish`` never blocks: when the queue is full the oldest frame is dropped and
    counted.
    The writer frames each payload for the transport; a full transport
    (:class:`SendBufferFullError`) drops that frame, a failed one is closed and
    reopened with backoff (frames meanwhile are dropped). After a failed write on a
    byte stream the next frame is preceded by an extra 0x00 so a torn frame costs the
    receiver only itself (ICD section 9).

    Attributes
    ----------
    dropped : int
        Frames not sent (queue full, transport full, link down).
    errors : int
        Output link failures.
    sent : int
    """

    def __init__(self, url: str, on_event) -> None:
        self.url = url
        self.transport = make_transport(url, "output")
        self.link = FramedLink(self.transport)
        self.dropped = 0
        self.errors = 0
        self.sent = 0
        self._q: queue.Queue[bytes | None] = queue.Queue(maxsize=OUTPUT_QUEUE)
        self.on_event = on_event
        self._up = False
        self._resync = False
        self._thread: threading.Thread | None = None
        self._next_try = -math.inf
        self._backoff = BACKOFF_START_S

    def open(self) -> None:
        """Open the output; a serial output that fails is retried by the writer.

        Raises
        ------
        TransportError
            A non-serial output cannot be opened.
        """
        try:
            self.transport.open()
            self._up = True
        except TransportError as exc:
            if not isinstance(self.transport, SerialTransport):
                raise
            self.on_event("output_open_failed", reason=str(exc))
        self._thread = threading.Thread(target=self._run, name="boom-output", daemon=True)
        self._thread.start()

    def publish(self, payload: bytes) -> None:
        """Queue one payload for sending; never blocks.

        When the queue is full the oldest waiting frame is dropped (and counted), so what
        reaches a display after a stall is the latest, not a backlog.
        """
        for _ in range(2):
            try:
                self._q.put_nowait(payload)
                return
            except queue.Full:
                try:
                    self._q.get_nowait()
                    self.dropped += 1
                except queue.Empty:
                    pass
        self.dropped += 1

    def _run(self) -> None:
        while True:
            payload = self._q.get()
            if payload is None:
                return
            if not self._up and not self._reopen():
                self.dropped += 1
                continue
            try:
                if self._resync and self.transport.is_stream:
                    self.transport.send(b"\x00")
                self._resync = False
                if self.link.send(payload):
                    self.sent += 1
                else:
                    self.dropped += 1
                    self._resync = True
            except SendBufferFullError:
                self.dropped += 1
                self._resync = True
            except TransportError as exc:
                self.errors += 1
                self.dropped += 1
                self._up = False
                self.transport.close()
                self._next_try = time.monotonic() + self._backoff
                self.on_event("output_lost", reason=str(exc))
            except Exception as exc:  # noqa: BLE001 - the writer must not die
                self.errors += 1
                self.dropped += 1
                self.on_event("output_error", reason=f"{type(exc).__name__}: {exc}")

    def _reopen(self) -> bool:
        now = time.monotonic()
        if now < self._next_try:
            return False
        try:
            self.transport.open()
        except TransportError:
            self._next_try = now + self._backoff
            self._backoff = min(self._backoff * 2.0, BACKOFF_MAX_S)
            return False
        self._up = True
        self._resync = True
        self._backoff = BACKOFF_START_S
        self.on_event("output_open", url=self.url)
        return True

    def close(self, timeout_s: float = 1.0) -> None:
        """Send what is queued (at most ``timeout_s``), stop the writer, close (twice-safe)."""
        th, self._thread = self._thread, None
        if th is not None:
            deadline = time.monotonic() + timeout_s
            while True:
                try:
                    self._q.put(None, timeout=max(0.0, deadline - time.monotonic()))
                    break
                except queue.Full:
                    try:  # stuck output: make room for the stop marker
                        self._q.get_nowait()
                        self.dropped += 1
                    except queue.Empty:
                        pass
            th.join(max(0.0, deadline - time.monotonic()) + 0.1)
            if th.is_alive():  # a blocked write; the daemon thread dies with the process
                self.on_event("output_blocked")
        self.link.close()


# ---------------------------------------------------------------------------- service

class AdvisoryService:
    """The ``run`` driver: links, clocks, signals and the record around the loop.

    Parameters
    ----------
    loop : AdvisoryLoop
    inp : InputLink
    out : OutputPublisher
    recorder : Recorder or None
    duration_s : float or None
        Stop after this long, s.
    table_manager : TableManager or None
        Closed at shutdown.
    echo : bool
        Print crew cues on stdout as they change.
    """

    def __init__(self, loop: AdvisoryLoop, inp: InputLink, out: OutputPublisher,
                 recorder=None, duration_s: float | None = None, table_manager=None,
                 echo: bool = True) -> None:
        self.loop = loop
        self.inp = inp
        self.out = out
        self.recorder = recorder
        self.duration_s = duration_s
        self.table_manager = table_manager
        self.echo = echo
        self.stop_reason = ""
        self._stop = False
        self._cues_shown = 0
        self.started_monotonic = time.monotonic()
        self.first_advisory_monotonic: float | None = None

    def request_stop(self, reason: str) -> None:
        """Ask the main loop to finish (from a signal handler or another thread)."""
        if not self._stop:
            self.stop_reason = reason
        self._stop = True

    def _event(self, code: str, **fields) -> None:
        print(f"boom-advisory run: {event_text(code, fields)}", file=sys.stderr, flush=True)
        if self.recorder is not None:
            self.recorder.record_event(code, **fields)

    def _stats_event(self, kind: str) -> None:
        loop = self.loop
        stats = {
            "event": kind, "utc": _utc_text(time.time()),
            "step": loop.timing["step"].summary_ms(), "feed": loop.timing["feed"].summary_ms(),
            "cpu_s": round(time.process_time(), 3), "rss_kb": _rss_kb(),
            "max_rss_kb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss,
            "output_sent": self.out.sent, "counters": loop.counters,
        }
        if self.recorder is not None:
            self.recorder.record_event("stats", kind=kind, stats=stats)
        if kind == "final":
            s = stats["step"]
            print(f"boom-advisory run: {s['n']} steps, step median {s['median_ms']} ms, "
                  f"p99 {s['p99_ms']} ms, max {s['max_ms']} ms; cpu {stats['cpu_s']} s; "
                  f"rss {stats['rss_kb'] / 1024:.1f} MiB", file=sys.stderr, flush=True)

    def _publish(self, payloads: list[bytes]) -> None:
        for p in payloads:
            self.out.publish(p)
        if payloads and self.first_advisory_monotonic is None:
            self.first_advisory_monotonic = time.monotonic()
            took = self.first_advisory_monotonic - self.started_monotonic
            self._event("first_advisory", after_s=round(took, 3))
        log = self.loop.cue_log
        while self._cues_shown < len(log):
            utc, cue = log[self._cues_shown]
            self._cues_shown += 1
            if self.echo:
                line = " ".join(cue.split())  # one line per cue, whatever the text holds
                print(f"{_utc_text(utc)}  {line}", flush=True)
        if len(log) > 10000:  # keep memory flat over long runs
            del log[:5000]
            self._cues_shown -= 5000

    def _sync_counters(self) -> None:
        ext = self.loop.external_counters
        ext["input_lost"] = self.inp.lost
        ext["input_reopened"] = self.inp.reopened
        ext["output_dropped"] = self.out.dropped
        ext["output_errors"] = self.out.errors

    def run(self) -> int:
        """Run until stopped; returns the exit code."""
        loop = self.loop
        start = time.monotonic()
        end = math.inf if self.duration_s is None else start + self.duration_s
        next_stats = start + STATS_INTERVAL_S
        link_up = None
        while not self._stop:
            now = time.monotonic()
            if now >= end:
                self.request_stop(f"duration {self.duration_s:g} s reached")
                break
            try:
                link_up, next_stats = self._iterate(now, end, link_up, next_stats)
            except Exception as exc:  # noqa: BLE001 - the service never dies on one iteration
                ext = loop.external_counters
                ext["service_errors"] = ext.get("service_errors", 0) + 1
                self._event("internal_error", reason=f"{type(exc).__name__}: {exc}")
                time.sleep(0.05)
        return self._shutdown()

    def _iterate(self, now: float, end: float, link_up: bool | None,
                 next_stats: float) -> tuple[bool | None, float]:
        """One pass: (re)open, receive until the next step or a short deadline, poll."""
        loop, inp = self.loop, self.inp
        mono, wall = time.monotonic, time.time
        if not inp.up:
            inp.try_open(now)
        if inp.up != link_up:
            link_up = inp.up
            loop.set_input_link(link_up, inp.reason)
        wait_until = min(loop.next_due(), now + MAX_WAIT_S, end)
        if inp.up:
            data = inp.receive(wait_until)
            if data:
                loop.feed(data, mono(), wall())
            elif not inp.up:
                loop.set_input_link(False, inp.reason)
                link_up = False
            elif inp.at_eof:
                self.request_stop("input file ended")
        else:
            if inp.next_try < wait_until:
                wait_until = max(inp.next_try, now)
            time.sleep(max(0.0, wait_until - mono()))
        self._sync_counters()
        self._publish(loop.poll(mono(), wall()))
        if now >= next_stats:
            next_stats = now + STATS_INTERVAL_S
            self._stats_event("stats")
        return link_up, next_stats

    def _shutdown(self) -> int:
        self._event("stopping", reason=self.stop_reason or "stop requested")
        self._sync_counters()
        self._publish(self.loop.final_frames(time.monotonic(), time.time(),
                                             f"service stopped ({self.stop_reason})"
                                             if self.stop_reason else "service stopped"))
        self.out.close(1.0)
        self.inp.close()
        if self.table_manager is not None:
            self.table_manager.close()
        self._sync_counters()
        self._stats_event("final")
        if self.recorder is not None:
            self.recorder.record_event("shutdown")
            self.recorder.close()
        return EXIT_OK


# ------------------------------------------------------------------------------ setup

def _check_settings(s: RunSettings) -> None:
    if not (isinstance(s.rate_hz, (int, float)) and math.isfinite(s.rate_hz)
            and 0.1 <= s.rate_hz <= 100.0):
        raise RunError(f"--rate-hz: {s.rate_hz} must be in [0.1, 100]")
    if s.duration_s is not None and not (math.isfinite(s.duration_s) and s.duration_s > 0):
        raise RunError(f"--duration-s: {s.duration_s} must be a positive number of seconds")
    if s.input_format is not None and s.input_format not in INPUT_FORMATS:
        raise RunError(f"--input-format: {s.input_format!r} must be one of "
                       f"{', '.join(INPUT_FORMATS)}")
    if s.tables and s.aircraft:
        raise RunError("--aircraft: cannot be combined with --tables (the table fixes the "
                       "aircraft)")
    if s.label_map and s.input_format != "arinc429":
        raise RunError("--label-map: only with --input-format arinc429")


def _load_tables(s: RunSettings):
    """(table or manager, manager or None) for the settings."""
    from advisory.tables.table import BoomTable

    if s.tables:
        if not Path(s.tables).is_file():
            raise RunError(f"--tables: {s.tables}: no such file")
        table = BoomTable.load(s.tables)
    else:
        from advisory.tables.cache import default_table

        table = default_table(s.aircraft)
    if not s.profile:
        return table, None
    from advisory.physics.aircraft import aircraft_from_dict
    from advisory.physics.atmosphere import load_profile
    from advisory.physics.signature import DEFAULT_REFLECTION_FACTOR
    from advisory.tables.build import BuildInputs
    from advisory.tables.grid import WIND_HEADINGS_DEG
    from advisory.tables.manager import TableManager

    atm = load_profile(s.profile)
    grid = table.grid
    windy = bool(abs(atm.wind_east_mps).max() > 0 or abs(atm.wind_north_mps).max() > 0)
    if windy and len(grid.headings_rad) == 1:  # a windy atmosphere needs the heading axis
        grid = replace(grid, headings_rad=tuple(math.radians(h) for h in WIND_HEADINGS_DEG))
    inputs = BuildInputs(aircraft_from_dict(table.header["aircraft"], "table header"),
                         table.atmosphere(), grid,
                         float(table.header.get("reflection_factor",
                                                DEFAULT_REFLECTION_FACTOR)))
    mgr = TableManager(table, inputs)
    if atm.description != table.header.get("atmosphere"):
        mgr.submit_atmosphere(atm)
    mgr.watch_profile_file(s.profile)
    return mgr, mgr


def _warm_up(table, zones, config) -> None:
    """One throw-away step so the first real step does not load compiled kernels."""
    from advisory import units
    from advisory.physics.atmosphere import standard_atmosphere
    from advisory.pipeline.advisor import Advisor
    from advisory.pipeline.state import AirDataState

    try:
        alt = float(table.ax_alt[len(table.ax_alt) // 2])
        mach = table.cutoff_mach(alt) + 0.3
        sound = float(standard_atmosphere().at(alt).sound_speed_mps)
        lat, lon = 0.0, 0.0
        if len(zones):  # a degree south of the first zone, heading for it
            ring = zones[0].polygons[0][0]
            lon, lat = float(ring[0, 0]) / units.DEG, float(ring[0, 1]) / units.DEG
        fields = {"lat_deg": max(min(lat - 1.0, 89.0), -89.0), "lon_deg": lon,
                  "alt_ft": units.m_to_ft(alt), "mach": mach, "heading_deg": 0.0,
                  "gs_kt": mach * sound / units.KT, "bank_deg": 0.0, "fpa_deg": 0.0}
        st = AirDataState.from_fields(fields, rx_monotonic=0.0)
        Advisor(table, zones, config).step(st, 0.0)
    except Exception:  # noqa: BLE001, S110 - warm-up is best effort
        pass


def build_service(s: RunSettings, echo: bool = True) -> AdvisoryService:
    """Load files, open the record and the links; the service ready to :meth:`run`.

    Raises
    ------
    RunError, ValueError
        Bad settings or files (exit code 2); the message names the option and value.
    TransportError
        An input or output that cannot be opened (exit code 1).
    """
    from advisory.io.records import Recorder
    from advisory.pipeline.advisor import Advisor
    from advisory.pipeline.config import load_config
    from advisory.pipeline.zones import ZoneSet

    _check_settings(s)
    if not Path(s.zones).is_file():
        raise RunError(f"--zones: {s.zones}: no such file")
    zones = ZoneSet.from_file(s.zones)
    config = load_config(s.config)
    tables, manager = _load_tables(s)
    inp = InputLink(s.input_url, _no_event)
    fmt = s.input_format or ("stream" if inp.is_stream else "datagram")
    framing = "stream" if inp.is_stream else "datagram"
    if fmt in ("stream", "datagram") and fmt != framing:
        raise RunError(f"--input-format: {fmt} does not fit --input {s.input_url} (a "
                       f"{framing} transport)")
    out = OutputPublisher(s.output_url, _no_event)
    advisor = Advisor(tables, zones, config)
    _warm_up(tables if manager is None else manager.table, zones, config)
    loop = AdvisoryLoop(advisor, input_format=fmt, framing=framing, rate_hz=s.rate_hz,
                        heartbeat_s=s.heartbeat_s, label_map=s.label_map)
    recorder = None
    if s.record:
        try:
            recorder = Recorder(s.record)
        except OSError as exc:
            raise RunError(f"--record: {s.record}: cannot open ({exc.strerror})") from None
    loop.recorder = recorder
    svc = AdvisoryService(loop, inp, out, recorder, s.duration_s, manager, echo)
    inp.on_event = svc._event
    out.on_event = svc._event
    return svc


def _no_event(code: str, **fields) -> None:
    """Event sink until the service exists."""


def run_service(s: RunSettings) -> int:
    """Build and run the service with signal handling; returns the exit code."""
    print(SAFETY_CAUTION, flush=True)
    t0 = time.monotonic()
    svc = build_service(s)
    svc.started_monotonic = t0
    started = {"version": __version__, "pid": os.getpid(), "input": s.input_url,
               "output": s.output_url, "zones": s.zones, "tables": s.tables,
               "profile": s.profile, **svc.loop.describe()}
    try:
        svc.out.open()
        svc.inp.try_open(time.monotonic())
    except TransportError as exc:
        svc.out.close(0.0)
        if svc.recorder is not None:
            svc.recorder.record_event("start_failed", reason=str(exc))
            svc.recorder.close()
        print(f"boom-advisory run: error: {exc}", file=sys.stderr, flush=True)
        return EXIT_RUNTIME
    svc._event("start", settings=started)
    old = {}

    def on_signal(signum, _frame) -> None:
        svc.request_stop(signal.Signals(signum).name)

    for sig in (signal.SIGINT, signal.SIGTERM):
        old[sig] = signal.signal(sig, on_signal)
    try:
        code = svc.run()
    finally:
        for sig, handler in old.items():
            signal.signal(sig, handler)
    return code


# -------------------------------------------------------------------------------- CLI

def add_parser(sub: argparse._SubParsersAction) -> None:
    """Register ``boom-advisory run``."""
    p = sub.add_parser(
        "run", help="the live service: air data in, advisories and status out",
        description="Read air data from a serial port or UDP, publish advisory and status "
                    "frames at a fixed rate, record everything. " + SAFETY_CAUTION)
    p.add_argument("--input", required=True, metavar="URL",
                   help="input transport, e.g. serial:///dev/ttyUSB0?baud=115200 or "
                        "udp://0.0.0.0:5600")
    p.add_argument("--output", required=True, metavar="URL",
                   help="output transport, e.g. udp://127.0.0.1:5601")
    p.add_argument("--zones", required=True, metavar="FILE", help="no-boom zones (GeoJSON)")
    p.add_argument("--aircraft", metavar="FILE", help="aircraft file (default: bundled demo)")
    p.add_argument("--tables", metavar="FILE",
                   help="boom table (default: built once for the aircraft and cached)")
    p.add_argument("--record", metavar="FILE", help="record file (appended to)")
    p.add_argument("--config", metavar="FILE", help="advisor thresholds (TOML)")
    p.add_argument("--rate-hz", type=float, default=10.0,
                   help="advisor steps (advisory frames) per second (10)")
    p.add_argument("--input-format", choices=INPUT_FORMATS, default=None,
                   help="air-data frames on a byte stream or datagrams (default: from the "
                        "input URL) or ARINC 429 words")
    p.add_argument("--label-map", metavar="FILE",
                   help="ARINC 429 label map (TOML), with --input-format arinc429")
    p.add_argument("--profile", metavar="FILE",
                   help="atmosphere profile (CSV/TOML) to rebuild the tables for; watched "
                        "for changes")
    p.add_argument("--duration-s", type=float, default=None,
                   help="stop after this many seconds (tests, soak)")
    p.set_defaults(func=run_command)


def run_command(args: argparse.Namespace) -> int:
    """``run``: the exit code (0 after a clean stop)."""
    settings = RunSettings(
        input_url=args.input, output_url=args.output, zones=args.zones,
        aircraft=args.aircraft, tables=args.tables, record=args.record, config=args.config,
        rate_hz=args.rate_hz, input_format=args.input_format, profile=args.profile,
        duration_s=args.duration_s, label_map=args.label_map,
    )
    return run_service(settings)


__all__ = ["AdvisoryService", "InputLink", "OutputPublisher", "RunError", "RunSettings",
           "add_parser", "build_service", "run_command", "run_service"]
