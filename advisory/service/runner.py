"""``boom-advisory run``: the real-time service around :class:`advisory.service.loop.AdvisoryLoop`.

The driver owns the clocks and the links; the loop owns everything between bytes in and
frames out (so ``replay`` runs the very same code). One thread reads the input with
monotonic deadlines, feeds the loop, and publishes what the loop returns; a second
thread writes the outputs from a bounded queue (:mod:`advisory.service.links`), so a full
or stuck output never blocks the loop. Log lines and crew cues go through bounded queues
to their own writer threads (:mod:`advisory.service.logs`), so a stuck or closed stderr
or stdout never blocks it either; lines lost are counted (``log_dropped``).

* Record (``--record``): every received byte string, every frame that passed its CRC,
  every output, and events (start, link lost/reopened, statistics, shutdown).
* One log line per change of the status state (``ok`` / ``degraded`` / ``unavailable``,
  with the reason) and one per link or life-cycle event.
* Stops on SIGTERM, SIGINT, SIGHUP, SIGQUIT, SIGUSR1 or SIGUSR2 (all alike, during
  start-up too: :mod:`advisory.service.startup`), after ``--duration-s``, or when a file
  input ends: publishes
  a final ``unavailable`` advisory and status, drains the output queue (at most 1 s),
  writes a statistics event, fsyncs and closes the record file, lets the log writers
  finish (at most 1 s).

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import hashlib
import math
import os
import resource
import time
from typing import Any

from advisory.io.records import Recorder
from advisory.io.transports import TransportError
from advisory.pipeline.table_range import table_range_tag
from advisory.schema import STATUS_IDENTITY_FIELDS, VERSION
from advisory.service.build import assemble
from advisory.service.health import clip
from advisory.service.links import InputLink, OutputPublisher
from advisory.service.logs import ServiceLog, log, log_event, log_state, utc_text
from advisory.service.loop import AdvisoryLoop
from advisory.service.settings import EXIT_OK, EXIT_RUNTIME, RunSettings, check_settings
from advisory.service.startup import StartingPhase, StartupInterrupted
from advisory.tables.manager import TableManager
from advisory.tables.table import BoomTable

MAX_WAIT_S = 0.25  #: longest single wait for input, s (bounds the reaction to signals)
STATS_INTERVAL_S = 60.0  #: statistics event period in the record, s
CUE_LOG_KEEP = 10000  #: crew cues kept in memory at most (half are let go beyond this)


def file_digest(path: str | None) -> str | None:
    """First 16 hex digits of the SHA-256 of a file (None: no file, or unreadable)."""
    if not path:
        return None
    h = hashlib.sha256()
    try:
        with open(path, "rb") as f:
            for block in iter(lambda: f.read(1 << 20), b""):
                h.update(block)
    except OSError:
        return None
    return h.hexdigest()[:16]


def identity(s: RunSettings) -> dict[str, str | None]:
    """What the service runs with (``advisory.schema.STATUS_IDENTITY_FIELDS``): software
    version, table, zones and config digests (the config digest covers the advisor
    config and the service config file)."""
    cfg = [d for d in (file_digest(s.config), file_digest(s.service_config)) if d]
    config_sha = (hashlib.sha256("".join(cfg).encode()).hexdigest()[:16]
                  if len(cfg) > 1 else (cfg[0] if cfg else None))
    values = (VERSION, file_digest(s.table), file_digest(s.zones), config_sha)
    return dict(zip(STATUS_IDENTITY_FIELDS, values))


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
        Write crew cues on stdout as they change (through ``logs``).
    logs : ServiceLog or None
        Where cue lines go and whose lost lines are counted as ``log_dropped``.
    """

    def __init__(self, loop: AdvisoryLoop, inp: InputLink, out: OutputPublisher,
                 recorder: Recorder | None = None, duration_s: float | None = None,
                 table_manager: TableManager | None = None, echo: bool = True,
                 logs: ServiceLog | None = None) -> None:
        self.loop = loop
        self.inp = inp
        self.out = out
        self.recorder = recorder
        self.duration_s = duration_s
        self.table_manager = table_manager
        self.echo = echo
        self.logs = logs
        self.stop_reason = ""
        self._stop = False
        self._cues_shown = 0
        self._logged_state = ""
        self.started_monotonic = time.monotonic()
        self.first_advisory_monotonic: float | None = None
        inp.on_event = self.event
        out.on_event = self.event

    def request_stop(self, reason: str) -> None:
        """Ask the main loop to finish (from a signal handler or another thread)."""
        if not self._stop:
            self.stop_reason = reason
        self._stop = True

    def event(self, code: str, **fields: Any) -> None:
        """Log one event and write it to the record (never blocks on the log)."""
        log_event(code, **fields)
        if self.recorder is not None:
            self.recorder.record_event(code, **fields)

    def _stats_event(self, kind: str) -> None:
        loop = self.loop
        step = loop.timing["step"].summary_ms()
        cpu_s = round(time.process_time(), 3)
        rss_kb = _rss_kb()
        stats = {
            "event": kind, "utc": utc_text(time.time()),
            "step": step, "feed": loop.timing["feed"].summary_ms(),
            "cpu_s": cpu_s, "rss_kb": rss_kb,
            "max_rss_kb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss,
            "output_sent": self.out.sent, "counters": loop.counters,
        }
        if self.recorder is not None:
            self.recorder.record_event("stats", kind=kind, stats=stats)
        if kind == "final":
            log.info("%s steps, step median %s ms, p99 %s ms, max %s ms; cpu %s s; "
                     "rss %.1f MiB", step["n"], step["median_ms"], step["p99_ms"],
                     step["max_ms"], cpu_s, rss_kb / 1024)

    def _publish(self, payloads: list[bytes]) -> None:
        for p in payloads:
            self.out.publish(p)
        if payloads and self.first_advisory_monotonic is None:
            self.first_advisory_monotonic = time.monotonic()
            took = self.first_advisory_monotonic - self.started_monotonic
            self.event("first_advisory", after_s=round(took, 3))
        state, reason = self.loop.status
        if state and state != self._logged_state:
            self._logged_state = state
            log_state(state, reason)
        cues = self.loop.cue_log
        while self._cues_shown < len(cues):
            utc, cue = cues[self._cues_shown]
            self._cues_shown += 1
            if self.echo and self.logs is not None:
                self.logs.cue(f"{utc_text(utc)}  {' '.join(cue.split())}")
        if len(cues) > CUE_LOG_KEEP:  # keep memory flat over long runs
            del cues[:CUE_LOG_KEEP // 2]
            self._cues_shown -= CUE_LOG_KEEP // 2

    def _check_profile(self) -> None:
        """Report a refused profile file or a failed rebuild once (the table manager
        keeps the previous table): counter ``profile_rejected``, a log line and record
        event, and the status says so (``degraded``, ICD 17.2)."""
        mgr = self.table_manager
        err = getattr(mgr, "last_error", "") if mgr is not None else ""
        if not err:
            return
        mgr.last_error = ""  # type: ignore[union-attr]  # consumed: the next one counts
        ext = self.loop.external_counters
        ext["profile_rejected"] = ext.get("profile_rejected", 0) + 1
        self.event("profile_rejected", reason=err)

    def _check_table(self) -> None:
        """A rebuilt table in force that verified short of its budgets (the base table's,
        else a higher ground level's): the status says ``degraded`` with the figures (ICD
        17.2); an event when that changes."""
        note = (getattr(self.table_manager, "verify_note", "") or ""
                or getattr(self.loop.advisor, "level_table_notes", "") or "")
        health = self.loop.health
        if note != health.table_note:
            health.table_note = note
            if note:
                self.event("table_short", reason=note)

    def _sync_counters(self) -> None:
        self._check_profile()
        self._check_table()
        ext = self.loop.external_counters
        ext["input_lost"] = self.inp.lost
        ext["input_reopened"] = self.inp.reopened
        ext["output_dropped"] = self.out.dropped
        ext["output_errors"] = self.out.errors
        ext["log_dropped"] = self.logs.dropped if self.logs is not None else 0
        # the size cap at work (write failures are the loop's record_errors)
        ext["record_dropped"] = self.recorder.rotated_out if self.recorder is not None else 0
        ext.update(self.inp.trust_counters)
        self.loop.input_note = self.inp.trust_note(time.monotonic())

    def run(self) -> int:
        """Run until stopped; returns the exit code."""
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
                ext = self.loop.external_counters
                ext["service_errors"] = ext.get("service_errors", 0) + 1
                self.event("internal_error", reason=f"{type(exc).__name__}: {exc}")
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
        wait_until = min(loop.next_wake(), now + MAX_WAIT_S, end)
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
        self.event("stopping", reason=self.stop_reason or "stop requested")
        self._sync_counters()
        self._publish(self.loop.final_frames(time.monotonic(), time.time(),
                                             f"service stopped ({self.stop_reason})"
                                             if self.stop_reason else "service stopped"))
        self.out.close(1.0)
        self.inp.close()
        if self.table_manager is not None:
            self.table_manager.close()
        close_levels = getattr(self.loop.advisor, "close", None)  # higher ground's managers
        if close_levels is not None:
            close_levels()
        self._sync_counters()
        self._stats_event("final")
        if self.recorder is not None:
            self.recorder.record_event("shutdown")
            self.recorder.close()
        return EXIT_OK


def build_service(s: RunSettings, logs: ServiceLog | None = None,
                  echo: bool = True) -> AdvisoryService:
    """The service for these settings, ready to :meth:`~AdvisoryService.run`.

    Raises
    ------
    RunError, ValueError
        Bad settings or files (exit code 2); the message names the option and value.
    TransportError
        A bad input or output URL.
    """
    parts = assemble(s)
    return AdvisoryService(parts.loop, parts.inp, parts.out, parts.recorder, s.duration_s,
                           parts.table_manager, echo, logs)


def run_service(s: RunSettings, phase: StartingPhase | None = None) -> int:
    """Build and run the service with its log and signal handling; the exit code.

    The caution comes first (stdout and log); the log writers get at most
    :data:`advisory.service.logs.CLOSE_TIMEOUT_S` to finish after the service stopped.

    Parameters
    ----------
    s : RunSettings
    phase : StartingPhase, optional
        The starting phase already publishing starting status frames and handling the
        stop signals (``boom-advisory run`` starts it before it loads this module); a new
        one is started when None.
    """
    check_settings(s)
    if phase is None:
        phase = StartingPhase(s.output_url)
        phase.install_signals()
        phase.start()
    logs = ServiceLog(s.log_level)
    logs.start()
    try:
        logs.caution()
        return _start_and_run(s, logs, phase)
    except StartupInterrupted as exc:
        reason = f"service stopped ({exc.args[0] if exc.args else 'signal'})"
        log_event("stopping", reason=f"{reason} during start-up")
        phase.final(reason)
        return EXIT_OK
    except Exception as exc:
        if not (phase.starting and phase.stop_reason):
            if phase.starting:  # a bad file or URL: say so on the output, then exit
                phase.final(clip(f"service stopped (start failed: {exc})"))
            raise
        # The stop signal interrupted a library mid-way (numba saving a kernel it was
        # compiling when the signal came: "no compiled object yet"), which then failed
        # on its own: the signal is the cause, and the stop is a clean one (ICD 17.7).
        reason = f"service stopped ({phase.stop_reason})"
        log_event("stopping", reason=f"{reason} during start-up ({type(exc).__name__})")
        phase.final(reason)
        return EXIT_OK
    except BaseException as exc:
        if phase.starting:
            phase.final(clip(f"service stopped (start failed: {exc})"))
        raise
    finally:
        phase.finish()
        phase.restore_signals()
        logs.close()


def _start_and_run(s: RunSettings, logs: ServiceLog, phase: StartingPhase) -> int:
    t0 = time.monotonic()
    parts = assemble(s, progress=phase.set_phase)
    svc = AdvisoryService(parts.loop, parts.inp, parts.out, parts.recorder, s.duration_s,
                          parts.table_manager, echo=True, logs=logs)
    svc.started_monotonic = t0
    started = {"version": VERSION, "pid": os.getpid(), "input": s.input_url,
               "output": s.output_url, "zones": s.zones, "tables": s.table,
               "profile": s.profile, "identity": identity(s), **svc.loop.describe()}
    live = getattr(svc.loop.advisor, "table", None)  # the live table's range (ICD 6)
    if isinstance(live, BoomTable):
        started["identity"]["table_range"] = table_range_tag(live)
    svc.loop.identity = {k: v for k, v in started["identity"].items() if v}
    phase.on_stop = svc.request_stop  # from now on a signal ends the run loop cleanly
    phase.starting = False
    if phase.stop_reason:
        svc.request_stop(phase.stop_reason)
    phase.finish()  # the service proper takes the output over
    try:
        svc.out.open()
        svc.inp.try_open(time.monotonic())
    except TransportError as exc:
        svc.out.close(0.0)
        if svc.recorder is not None:
            svc.recorder.record_event("start_failed", reason=str(exc))
            svc.recorder.close()
        log.error("%s", exc)
        return EXIT_RUNTIME
    svc.event("start", settings=started)
    return svc.run()


__all__ = ["AdvisoryService", "build_service", "run_service"]
