"""The one code path from received bytes to published frames, for ``run`` and ``replay``.

:class:`AdvisoryLoop` takes the bytes a transport delivered (:meth:`AdvisoryLoop.feed`),
records them, splits them into frames (COBS + CRC-32C on byte streams, CRC on
datagrams), decodes them (air-data frames, or ARINC 429 words assembled into the same
fields) and validates them (:class:`advisory.pipeline.state.StateValidator`). On a fixed-rate
schedule (:meth:`AdvisoryLoop.poll`) it steps the advisor on the latest valid, fresh
state and returns the frames to publish: an advisory frame every step and a status frame
at least every ``heartbeat_s`` and on every change of status state
(:mod:`advisory.service.health` says which state and why). Every output is recorded with
its time. The heartbeat is kept on the step schedule's nominal times with a margin of
:data:`HEARTBEAT_MARGIN_S`, so steps that run up to that much late (a busy computer)
still keep status frames within ``heartbeat_s`` of each other (ICD section 1).

Determinism: the loop reads no clock for anything it publishes; it works only with the
times passed to :meth:`~AdvisoryLoop.feed` and :meth:`~AdvisoryLoop.poll`, so a replay of
recorded input with its recorded times gives byte-identical output. The only clock it
reads is a performance counter that times its own steps (:attr:`AdvisoryLoop.timing`),
which never enters a frame.

Never raises on input: every rejected byte run, frame, word or state is counted by
reason (:attr:`AdvisoryLoop.counters`) and the loop keeps publishing. Without a valid,
fresh state the advisory says ``unavailable`` (never silence, never ``clear``). Each
rejection is also logged at DEBUG level (logger ``advisory.service.input``; nothing is
formatted unless that level is on); the loop never writes to a stream itself.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import logging
import math
import time
from dataclasses import replace
from pathlib import Path
from typing import Any, Protocol

from advisory.io.arinc429 import Arinc429Assembler, LabelMap
from advisory.io.arinc429_labels import label_map_of
from advisory.io.framing import DatagramReader, StreamDeframer
from advisory.io.messages import FrameDecoder, encode_adv, encode_status, next_seq
from advisory.io.records import Recorder
from advisory.pipeline.config import AdvisorConfig
from advisory.pipeline.results import Advisory
from advisory.pipeline.state import AirDataState, Rejection, StateValidator, ValidatorLimits
from advisory.schema import ADV_FORMAT_VERSION, AIR_REQUIRED, LINK_COUNTERS
from advisory.service.health import DurationHistogram, LoopHealth, clip, no_state_reason
from advisory.service.settings import FRAMINGS, INPUT_FORMATS, check_loop_options

#: Reason of the first status frame: the advisory-only caution, short enough for the
#: 127-byte reason field (the full sentence is ``advisory.SAFETY_CAUTION``).
STARTUP_REASON = ("started; advisory aid only, not certified flight software; local "
                  "regulations govern supersonic flight")
STOP_REASON = "service stopped"

_DUE_SLACK_S = 1e-6  #: a poll this close before the due time steps (float rounding)
#: A status frame is due this long before ``heartbeat_s`` has passed (on the schedule's
#: nominal step times), so scheduling jitter up to this much keeps the heartbeat, s.
#: Issue 15 measured gaps of 1.03 s with the status due exactly at ``heartbeat_s``.
HEARTBEAT_MARGIN_S = 0.1
_LINK_BAD = tuple(k for k in LINK_COUNTERS if k != "frames_ok")

_input_log = logging.getLogger("advisory.service.input")


class AdvisorLike(Protocol):
    """What the loop needs of an advisor (:class:`advisory.pipeline.advisor.Advisor`)."""

    config: AdvisorConfig
    steps: int  #: steps taken so far (a replay watches it to know when a step ran)

    def step(self, state: AirDataState | None, now_monotonic: float) -> Advisory: ...


class AdvisoryLoop:
    """Received bytes in, advisory and status frame payloads out, on a fixed schedule.

    Parameters
    ----------
    advisor : advisory.pipeline.advisor.Advisor
        Stepped once per period with the latest valid state (or None).
    input_format : str
        ``"stream"`` (air-data frames, COBS + CRC-32C + 0x00), ``"datagram"`` (air-data
        frames, one per datagram with its CRC) or ``"arinc429"`` (ARINC 429 words in the
        frame payloads; framed as ``framing`` says).
    rate_hz : float
        Advisor steps per second (the ICD's 10-50 Hz; up to 1000 accepted).
    heartbeat_s : float
        Longest time between status frames, s.
    recorder : Recorder, optional
        Gets every fed byte string (raw input), every frame payload that passed its CRC
        (input) and every output payload, each with its time.
    validator : StateValidator, optional
        Defaults to a validator whose maximum age of air data is the advisor config's
        ``stale_after_s`` (the one staleness limit; ``advisory.schema.STALE_AFTER_S`` by
        default) and whose other limits are those of the ICD section 4.
    label_map : LabelMap or path, optional
        ARINC 429 label map (object or TOML file); defaults to the built-in map.
    framing : str, optional
        ``"stream"`` or ``"datagram"``; default ``"datagram"`` for ``input_format
        "datagram"``, else ``"stream"``. Needed only for ARINC 429 words on UDP.
    degraded_hold_s : float
        How long a problem (rejected input, dropped output, ...) keeps the status
        ``degraded``, s.
    channel : int
        Channel number written in the input records.
    advisory_version : int
        Version of the advisory frames sent: :data:`ADV_FORMAT_VERSION`, or 1 for older
        receivers (ICD section 7: ``unavoidable`` goes as ``warning``).

    Attributes
    ----------
    last_advisory : Advisory or None
        The advisory of the most recent step.
    status : tuple of (str, str)
        Status state and reason of the most recent step (``("", "")`` before the first);
        the driver logs a line when the state changes.
    cue_log : list of (float, str)
        ``(utc_s, crew cue)`` appended whenever the status or the zone concerned changes.
    external_counters : dict of str to int
        Counters the driver owns (``input_lost``, ``output_dropped``, ...). They appear in
        the status frames once non-zero (so a clean run's frames equal its replay's), and
        any increase but ``log_dropped``'s counts as a problem (status ``degraded``).
    timing : dict
        ``{"step": DurationHistogram, "feed": DurationHistogram}``: wall time of each
        advisor step and each feed (performance counter; never published in a frame).

    Raises
    ------
    ValueError
        Unknown ``input_format`` or ``framing``, non-positive ``rate_hz`` or
        ``heartbeat_s``, or a bad label map (the message names it).
    """

    def __init__(self, advisor: AdvisorLike, *, input_format: str = "stream",
                 rate_hz: float = 10.0, heartbeat_s: float = 1.0,
                 recorder: Recorder | None = None, validator: StateValidator | None = None,
                 label_map: LabelMap | str | Path | None = None, framing: str | None = None,
                 degraded_hold_s: float = 5.0, channel: int = 0,
                 advisory_version: int = ADV_FORMAT_VERSION) -> None:
        framing = check_loop_options(input_format, framing, rate_hz, heartbeat_s,
                                     degraded_hold_s, advisory_version)
        self.advisory_version = int(advisory_version)
        self.advisor = advisor
        self.input_format = input_format
        self.framing = framing
        self.rate_hz = float(rate_hz)
        self.period_s = 1.0 / self.rate_hz
        self.heartbeat_s = float(heartbeat_s)
        #: Identity keys every status frame carries (``advisory.schema.STATUS_IDENTITY_FIELDS``:
        #: software version, table / zones / config digests; ICD section 6); empty: none.
        self.identity: dict[str, str] = {}
        self.degraded_hold_s = float(degraded_hold_s)
        self.channel = int(channel)
        if validator is None:
            validator = StateValidator(ValidatorLimits(max_age_s=advisor.config.stale_after_s))
        self.validator = validator
        self._reader: StreamDeframer | DatagramReader = (
            StreamDeframer() if framing == "stream" else DatagramReader())
        self._decoder: FrameDecoder | None = None
        self._assembler: Arinc429Assembler | None = None
        if input_format == "arinc429":
            self._assembler = Arinc429Assembler(label_map_of(label_map),
                                                max_age_s=self.validator.limits.max_age_s)
        else:
            self._decoder = FrameDecoder()
        self.health = LoopHealth(self._reader, self._decoder, self._assembler, self.validator,
                                 self.degraded_hold_s)
        self._c = self.health.c
        self.recorder = recorder
        self.external_counters = self.health.external
        self.timing = {"step": DurationHistogram(), "feed": DurationHistogram()}
        self.last_advisory: Advisory | None = None
        self.status: tuple[str, str] = ("", "")
        self.cue_log: list[tuple[float, str]] = []
        self._cue_key: tuple[str, str | None] | None = None
        # schedule
        self._next_due: float | None = None
        self._last_now: float | None = None
        self._last_status_t: float | None = None
        #: The nominal schedule time of the step that sent the last status frame.
        self._last_status_nominal: float | None = None
        self._status_state: str | None = None
        self._status_reason = ""
        self._seq_adv = 0
        self._seq_status = 0
        # input health
        self._link_up = True
        self._link_reason = ""
        self._any_input = False
        self._last_valid_rx: float | None = None
        self._missing: tuple[str, ...] = ()
        self.last_internal_error = ""
        #: Added to the reason when no state can be given (the driver names a refused
        #: UDP source here, so a second source never takes over silently).
        self.input_note = ""

    @property
    def recorder(self) -> Recorder | None:
        """The record the loop writes to (None: no record); settable."""
        return self.health.recorder

    @recorder.setter
    def recorder(self, rec: Recorder | None) -> None:
        self.health.recorder = rec

    # ------------------------------------------------------------------ input side
    def feed(self, data: bytes, rx_monotonic: float, rx_utc: float) -> None:
        """Record the raw input with its receive times, deframe, decode, validate.

        Parameters
        ----------
        data : bytes
            What one transport receive returned: a chunk of a byte stream (any split,
            garbage included) or one datagram.
        rx_monotonic : float
            ``time.monotonic()`` at receipt, s (the replay's clock in a replay).
        rx_utc : float
            UTC at receipt, s since 1970 (for the record only).

        Never raises.
        """
        t0 = time.perf_counter()
        c = self._c
        try:
            c["feeds"] += 1
            rec = self.recorder
            if rec is not None:
                rec.record_raw_input(data, rx_monotonic, rx_utc, self.channel)
            c["bytes_in"] += len(data)
            rx = float(rx_monotonic)
            if not math.isfinite(rx):
                c["bad_time"] += 1
                return
            if self._next_due is None:
                self._next_due = rx
            debug = _input_log.isEnabledFor(logging.DEBUG)
            bad_before = self._link_bad() if debug else 0
            payloads = self._reader.feed(data)
            if debug and self._link_bad() != bad_before:
                _input_log.debug("input refused: %d bytes that are not a good frame "
                                 "(link counters %s)", len(data), self._reader.counters)
            if not payloads:
                return
            self._any_input = True
            for p in payloads:
                if rec is not None:
                    rec.record_input(p, rx, rx_utc, self.channel)
                if self._assembler is None:
                    self._air(p, rx, debug)
                else:
                    self._arinc(self._assembler, p, rx, debug)
        except Exception as exc:  # noqa: BLE001 - the live loop never dies on input
            c["internal_errors"] += 1
            self.last_internal_error = f"feed: {type(exc).__name__}: {exc}"
        finally:
            self.timing["feed"].add(time.perf_counter() - t0)

    def _link_bad(self) -> int:
        counters = self._reader.counters
        return sum(counters[k] for k in _LINK_BAD)

    def _air(self, payload: bytes, rx: float, debug: bool) -> None:
        decoder = self._decoder
        assert decoder is not None  # noqa: S101 - set for every input format but ARINC 429
        frame = decoder.decode(payload)
        if frame is None:
            if debug:
                _input_log.debug("frame refused: %s", decoder.last_error)
            return
        if frame.type != "air":
            self._c["not_air"] += 1
            if debug:
                _input_log.debug("frame refused: type %r is not air data", frame.type)
            return
        res = self.validator.validate(frame.fields, rx, frame.utc_s, rx, frame.seq)
        if type(res) is not Rejection:
            self._last_valid_rx = rx
        elif debug:
            _input_log.debug("input rejected: %s", res.detail)

    def _arinc(self, asm: Arinc429Assembler, payload: bytes, rx: float, debug: bool) -> None:
        if not asm.feed_payload(payload, rx):
            if debug:
                _input_log.debug("ARINC 429 payload refused (counters %s)", asm.counters)
            return
        fields = asm.fields(rx)
        missing = tuple(n for n in AIR_REQUIRED if n not in fields)
        self._missing = missing
        if missing:
            self.health.arinc_incomplete += 1
            return
        res = self.validator.validate(fields, rx, None, rx)
        if not isinstance(res, Rejection):
            self._last_valid_rx = rx
        elif debug:
            _input_log.debug("input rejected: %s", res.detail)

    def set_input_link(self, up: bool, reason: str = "") -> None:
        """Tell the loop whether the input link is up (the driver calls this).

        While it is down every advisory is ``unavailable`` with ``reason``.
        """
        self._link_up = bool(up)
        self._link_reason = "" if up else str(reason)
        if not up and isinstance(self._reader, StreamDeframer):
            self._reader.reset()  # a partial frame from the old link must not merge

    # ------------------------------------------------------------------ schedule
    def next_due(self) -> float:
        """Monotonic time of the next scheduled step, s.

        ``inf`` until the loop has seen a time (the first :meth:`feed` or :meth:`poll`
        anchors the schedule at its time; the first step is due then).
        """
        return math.inf if self._next_due is None else self._next_due

    def next_wake(self) -> float:
        """Monotonic time the loop next has something to send, s: the next step, or a
        heartbeat status frame between steps when the step rate is slower than the
        heartbeat (``inf`` until the schedule is anchored). At step rates faster than the
        heartbeat the steps carry it and this is :meth:`next_due`."""
        due = self.next_due()
        if self._last_status_t is not None and \
                self.period_s > self.heartbeat_s - HEARTBEAT_MARGIN_S:
            due = min(due, self._last_status_t + self.heartbeat_s - HEARTBEAT_MARGIN_S)
        return due

    def poll(self, now_monotonic: float, now_utc: float) -> list[bytes]:
        """Step when due and return the output payloads (unframed MessagePack).

        When a step is due on the fixed-rate schedule, step the advisor on the latest
        valid, fresh state (None if none or stale) and return an advisory frame, plus a
        status frame when ``heartbeat_s`` has passed since the last one or the status
        state changed. Each output is recorded with ``now_monotonic`` / ``now_utc``.
        Steps that fell more than one period behind are skipped and counted
        (``steps_missed``); a clock that steps backwards is counted
        (``clock_backwards``) and re-anchors the schedule.

        Never raises; uses only the times passed in.
        """
        c = self._c
        try:
            now = float(now_monotonic)
            utc = float(now_utc)
        except (TypeError, ValueError):
            c["bad_time"] += 1
            return []
        if not math.isfinite(now):
            c["bad_time"] += 1
            return []
        if not math.isfinite(utc):
            c["bad_time"] += 1
            utc = 0.0
        try:
            return self._poll(now, utc)
        except Exception as exc:  # noqa: BLE001 - the live loop never dies
            c["internal_errors"] += 1
            self.last_internal_error = f"poll: {type(exc).__name__}: {exc}"
            return []

    def _poll(self, now: float, utc: float) -> list[bytes]:
        c = self._c
        if self._last_now is not None and now < self._last_now:
            c["clock_backwards"] += 1
            self._next_due = now
            if self._last_status_t is not None and self._last_status_t > now:
                self._last_status_t = now - self.heartbeat_s
                self._last_status_nominal = None
        self._last_now = now
        if self._next_due is None:
            self._next_due = now
        if now < self._next_due - _DUE_SLACK_S:
            if self._last_status_t is not None and \
                    now - self._last_status_t >= self.heartbeat_s - HEARTBEAT_MARGIN_S:
                self._last_status_nominal = now
                return [self._status(now, utc, self._status_state or "unavailable",
                                     self._status_reason)]
            return []
        behind = now - self._next_due
        if behind >= self.period_s:
            missed = int(behind // self.period_s)
            c["steps_missed"] += missed
            self._next_due += missed * self.period_s
        nominal = self._next_due
        self._next_due += self.period_s
        if self._next_due <= now:  # rounding
            self._next_due = now + self.period_s
        return self._step(now, utc, nominal)

    # ------------------------------------------------------------------ the step
    def _input_state(self, now: float) -> tuple[AirDataState | None, str]:
        """The state to advise on, or None and why not (with :attr:`input_note`)."""
        st = self.validator.current(now) if self._link_up else None
        if st is not None:
            return st, ""
        missing = self._missing if self._assembler is not None else ()
        why = no_state_reason(now, self.validator, link_reason=None if self._link_up
                              else self._link_reason, missing=missing,
                              last_valid_rx=self._last_valid_rx, any_input=self._any_input)
        if self.input_note:
            why = f"{why}; {self.input_note}"
        return None, why

    def _step(self, now: float, utc: float, nominal: float) -> list[bytes]:
        c = self._c
        c["steps"] += 1
        state, why = self._input_state(now)
        t0 = time.perf_counter()
        try:
            adv = self.advisor.step(state, now)
        except Exception as exc:  # noqa: BLE001 - never die; say unavailable instead
            c["internal_errors"] += 1
            self.last_internal_error = f"advisor: {type(exc).__name__}: {exc}"
            adv = Advisory("unavailable", reason=f"internal error: {type(exc).__name__}")
        self.timing["step"].add(time.perf_counter() - t0)
        if state is None and adv.status != "unavailable":  # cannot happen; never clear
            adv = Advisory("unavailable", reason=why)
        elif state is None and why:
            adv = replace(adv, reason=why)
        if adv.status == "unavailable":
            c["unavailable_steps"] += 1
        self.last_advisory = adv
        key = (adv.status, adv.zone_id)
        if key != self._cue_key:
            self._cue_key = key
            self.cue_log.append((utc, adv.cue))
        out = [self._adv_payload(adv, now, utc)]
        st_state, st_reason = self.health.assess(now, adv)
        self._status_reason = st_reason
        self.status = (st_state, st_reason)
        last = self._last_status_nominal
        if (self._last_status_t is None or last is None or st_state != self._status_state
                or nominal - last >= self.heartbeat_s - HEARTBEAT_MARGIN_S
                - 0.5 * self.period_s):
            if self._last_status_t is None:
                st_reason = STARTUP_REASON
            out.append(self._status(now, utc, st_state, st_reason))
            self._last_status_nominal = nominal
        return out

    def _adv_payload(self, adv: Advisory, now: float, utc: float) -> bytes:
        try:
            payload = encode_adv(adv.to_fields(), self._seq_adv, utc, self.advisory_version)
        except Exception as exc:  # noqa: BLE001 - an unencodable advisory: say unavailable
            self._c["internal_errors"] += 1
            self.last_internal_error = f"encode advisory: {type(exc).__name__}: {exc}"
            fallback = Advisory("unavailable", reason="internal error: advisory not encodable")
            payload = encode_adv(fallback.to_fields(), self._seq_adv, utc,
                                 self.advisory_version)
        self._seq_adv = next_seq(self._seq_adv)
        self._c["adv_frames"] += 1
        if self.recorder is not None:
            self.recorder.record_output(payload, now, utc, self.channel)
        return payload

    def _status(self, now: float, utc: float, state: str, reason: str) -> bytes:
        self._c["status_frames"] += 1
        payload = encode_status({"state": state, "reason": clip(reason),
                                 "counters": self.health.status_counters(), **self.identity},
                                self._seq_status, utc)
        self._seq_status = next_seq(self._seq_status)
        self._last_status_t = now
        self._status_state = state
        if self.recorder is not None:
            self.recorder.record_output(payload, now, utc, self.channel)
        return payload

    # ------------------------------------------------------------------ counters
    @property
    def counters(self) -> dict[str, int]:
        """Every counter by name (a fresh dict): link, decoder or ARINC 429, validator
        (one per rejection code), the loop's own, ``record_errors`` and the driver's
        :attr:`external_counters` that are not 0 (ICD section 17.3;
        :meth:`advisory.service.health.LoopHealth.counters`)."""
        return self.health.counters()

    # ------------------------------------------------------------------ shutdown
    def final_frames(self, now_monotonic: float, now_utc: float,
                     reason: str = STOP_REASON) -> list[bytes]:
        """An ``unavailable`` advisory and status to publish when the service stops
        (so no display keeps showing the last level); recorded like any output."""
        try:
            adv = Advisory("unavailable", reason=reason)
            self.status = ("unavailable", reason)
            return [self._adv_payload(adv, now_monotonic, now_utc),
                    self._status(now_monotonic, now_utc, "unavailable", reason)]
        except Exception as exc:  # noqa: BLE001
            self._c["internal_errors"] += 1
            self.last_internal_error = f"final frames: {type(exc).__name__}: {exc}"
            return []

    def describe(self) -> dict[str, Any]:
        """The loop's settings, for a start-up record event."""
        return {"input_format": self.input_format, "framing": self.framing,
                "rate_hz": self.rate_hz, "heartbeat_s": self.heartbeat_s,
                "degraded_hold_s": self.degraded_hold_s,
                "advisory_version": self.advisory_version}


__all__ = ["FRAMINGS", "INPUT_FORMATS", "STARTUP_REASON", "STOP_REASON", "AdvisorLike",
           "AdvisoryLoop"]
