"""The one code path from received bytes to published frames, for ``run`` and ``replay``.

:class:`AdvisoryLoop` takes the bytes a transport delivered (:meth:`AdvisoryLoop.feed`),
records them, splits them into frames (COBS + CRC-32C on byte streams, CRC on
datagrams), decodes them (air-data frames, or ARINC 429 words assembled into the same
fields) and validates them (:class:`advisory.pipeline.state.StateValidator`). On a fixed-rate
schedule (:meth:`AdvisoryLoop.poll`) it steps the advisor on the latest valid, fresh
state and returns the frames to publish: an advisory frame every step and a status frame
at least every ``heartbeat_s`` and on every change of status state. Every output is
recorded with its time.

Determinism: the loop reads no clock for anything it publishes; it works only with the
times passed to :meth:`~AdvisoryLoop.feed` and :meth:`~AdvisoryLoop.poll`, so a replay of
recorded input with its recorded times gives byte-identical output. The only clock it
reads is a performance counter that times its own steps (:attr:`AdvisoryLoop.timing`),
which never enters a frame.

Never raises on input: every rejected byte run, frame, word or state is counted by
reason (:attr:`AdvisoryLoop.counters`) and the loop keeps publishing. Without a valid,
fresh state the advisory says ``unavailable`` (never silence, never ``clear``).

Status states (ICD ``docs/interface.md`` section 6 and 17): ``unavailable`` when the
advisory is unavailable (input link lost, no valid air data yet, air data stale, or the
advisor cannot predict); ``degraded`` when advisories flow but input was rejected, a
clock misbehaved, outputs were dropped within the last ``degraded_hold_s`` seconds, or the
tables are stale; ``ok`` otherwise.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import math
import time
from dataclasses import replace
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from advisory.io.arinc429 import Arinc429Assembler, LabelMap
from advisory.io.arinc429_labels import load_label_map
from advisory.io.framing import DatagramReader, StreamDeframer
from advisory.io.messages import FrameDecoder, encode_adv, encode_status, next_seq
from advisory.pipeline.state import AirDataState, Rejection, StateValidator
from advisory.schema import AIR_REQUIRED as REQUIRED_FIELDS
from advisory.schema import DECODE_REASONS, LINK_COUNTERS, MAX_COUNTERS, REASON_MAX_BYTES

if TYPE_CHECKING:  # pragma: no cover
    from advisory.io.records import Recorder
    from advisory.pipeline.results import Advisory

INPUT_FORMATS = ("stream", "datagram", "arinc429")
FRAMINGS = ("stream", "datagram")

#: Reason of the first status frame: the advisory-only caution, short enough for the
#: 127-byte reason field (the full sentence is ``advisory.SAFETY_CAUTION``).
STARTUP_REASON = ("started; advisory aid only, not certified flight software; local "
                  "regulations govern supersonic flight")
STOP_REASON = "service stopped"

#: Link counters that mean bad input (``frames_ok`` is good news).
_LINK_BAD = tuple(k for k in LINK_COUNTERS if k != "frames_ok")
#: Decoder counters that mean bad input; ``oversize`` is merged with the link's.
_DECODE_BAD = tuple(k for k in DECODE_REASONS if k != "oversize")
#: ARINC 429 assembler counters that mean bad input. Unknown labels and other SDIs are
#: normal on a shared bus and are counted but not taken as a problem.
_ARINC_BAD = ("bad_parity", "ssm_failure", "ssm_ncd", "ssm_test", "bad_bcd", "bad_payload")
_ARINC_ALL = ("words", "words_accepted", "bad_parity", "ssm_failure", "ssm_ncd", "ssm_test",
              "unknown_label", "sdi_mismatch", "bad_bcd", "bad_payload", "arinc_incomplete")
#: The loop's own counters, in the order they are listed in the ICD.
LOOP_COUNTERS = ("feeds", "bytes_in", "not_air", "valid", "rejected", "rebaselines", "steps",
                 "steps_missed", "adv_frames", "status_frames", "unavailable_steps",
                 "clock_backwards", "bad_time", "internal_errors")
_LOOP_BAD = ("not_air", "steps_missed", "clock_backwards", "bad_time", "internal_errors")

_DUE_SLACK_S = 1e-6  #: a poll this close before the due time steps (float rounding)

_COUNTER_TEXT = {
    "bad_crc": "frames with a bad CRC", "cobs_error": "badly stuffed frames",
    "too_short": "frames too short", "oversize": "oversize frames",
    "not_air": "frames that are not air data", "steps_missed": "steps missed (overrun)",
    "clock_backwards": "loop clock stepped backwards", "bad_time": "non-finite times",
    "internal_errors": "internal errors", "record_errors": "record writes failed",
    "input_lost": "input link lost", "input_reopened": "input link reopened",
    "output_dropped": "outputs dropped",
    "output_errors": "output link errors", "service_errors": "service errors",
}


def _clip(text: str, limit: int = REASON_MAX_BYTES) -> str:
    """``text`` without NULs, cut to at most ``limit`` UTF-8 bytes."""
    text = text.replace("\x00", " ")
    raw = text.encode("utf-8")
    return text if len(raw) <= limit else raw[:limit].decode("utf-8", "ignore")


class DurationHistogram:
    """Durations in fixed 10-microsecond bins up to 100 ms (constant memory).

    Attributes
    ----------
    count : int
    max_s : float
        Longest duration seen, s.
    total_s : float
        Sum of all durations, s.
    """

    BIN_S = 1e-5  #: bin width, s
    BINS = 10000  #: bins up to 0.1 s; longer durations fall in an overflow bin

    def __init__(self) -> None:
        self._h = np.zeros(self.BINS + 1, dtype=np.int64)
        self.count = 0
        self.max_s = 0.0
        self.total_s = 0.0

    def add(self, seconds: float) -> None:
        """Count one duration (s)."""
        i = int(seconds * 1e5)
        self._h[i if 0 <= i < self.BINS else (self.BINS if i > 0 else 0)] += 1
        self.count += 1
        self.total_s += seconds
        if seconds > self.max_s:
            self.max_s = seconds

    def quantile(self, q: float) -> float:
        """Upper edge of the bin holding quantile ``q`` (0..1), s; NaN when empty."""
        if self.count == 0:
            return math.nan
        rank = max(1, math.ceil(q * self.count))
        i = int(np.searchsorted(np.cumsum(self._h), rank))
        return self.max_s if i >= self.BINS else min((i + 1) * self.BIN_S, self.max_s)

    def summary_ms(self) -> dict[str, float | int]:
        """``n``, ``median_ms``, ``p99_ms``, ``max_ms``, ``mean_ms``."""
        n = self.count
        return {"n": n, "median_ms": round(self.quantile(0.5) * 1e3, 3),
                "p99_ms": round(self.quantile(0.99) * 1e3, 3),
                "max_ms": round(self.max_s * 1e3, 3),
                "mean_ms": round(self.total_s / n * 1e3, 4) if n else math.nan}


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
        Defaults to ``StateValidator()`` (limits of the ICD section 4).
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

    Attributes
    ----------
    last_advisory : Advisory or None
        The advisory of the most recent step.
    cue_log : list of (float, str)
        ``(utc_s, crew cue)`` appended whenever the status or the zone concerned changes.
    external_counters : dict of str to int
        Counters the driver owns (``input_lost``, ``output_dropped``, ...). They appear in
        the status frames once non-zero (so a clean run's frames equal its replay's), and
        any increase counts as a problem (status ``degraded``).
    timing : dict
        ``{"step": DurationHistogram, "feed": DurationHistogram}``: wall time of each
        advisor step and each feed (performance counter; never published in a frame).

    Raises
    ------
    ValueError
        Unknown ``input_format`` or ``framing``, non-positive ``rate_hz`` or
        ``heartbeat_s``, or a bad label map (the message names it).
    """

    def __init__(self, advisor, *, input_format: str = "stream", rate_hz: float = 10.0,
                 heartbeat_s: float = 1.0, recorder: Recorder | None = None,
                 validator: StateValidator | None = None, label_map=None,
                 framing: str | None = None, degraded_hold_s: float = 5.0,
                 channel: int = 0) -> None:
        if input_format not in INPUT_FORMATS:
            raise ValueError(f"input_format must be one of {', '.join(INPUT_FORMATS)}, "
                             f"got {input_format!r}")
        if framing is None:
            framing = "datagram" if input_format == "datagram" else "stream"
        if framing not in FRAMINGS or (input_format != "arinc429"
                                       and framing != input_format):
            raise ValueError(f"framing {framing!r} does not fit input_format {input_format!r}")
        for name, v, hi in (("rate_hz", rate_hz, 1000.0), ("heartbeat_s", heartbeat_s, 3600.0),
                            ("degraded_hold_s", degraded_hold_s, 3600.0)):
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not 0 < v <= hi:
                raise ValueError(f"{name} must be a number in (0, {hi:g}], got {v!r}")
        self.advisor = advisor
        self.input_format = input_format
        self.framing = framing
        self.rate_hz = float(rate_hz)
        self.period_s = 1.0 / self.rate_hz
        self.heartbeat_s = float(heartbeat_s)
        self.degraded_hold_s = float(degraded_hold_s)
        self.recorder = recorder
        self.channel = int(channel)
        self.validator = validator if validator is not None else StateValidator()
        self._reader = StreamDeframer() if framing == "stream" else DatagramReader()
        self._decoder: FrameDecoder | None = None
        self._assembler: Arinc429Assembler | None = None
        if input_format == "arinc429":
            if label_map is None or isinstance(label_map, LabelMap):
                lm = label_map
            elif isinstance(label_map, (str, Path)):
                lm = load_label_map(label_map)
            else:
                raise ValueError(f"label_map must be a LabelMap or a file path, "
                                 f"got {label_map!r}")
            self._assembler = Arinc429Assembler(lm, max_age_s=self.validator.limits.max_age_s)
        else:
            self._decoder = FrameDecoder()
        self._c: dict[str, int] = dict.fromkeys(LOOP_COUNTERS, 0)
        self._arinc_incomplete = 0
        self.external_counters: dict[str, int] = {}
        self.timing = {"step": DurationHistogram(), "feed": DurationHistogram()}
        self.last_advisory: Advisory | None = None
        self.cue_log: list[tuple[float, str]] = []
        self._cue_key: tuple | None = None
        # schedule
        self._next_due: float | None = None
        self._last_now: float | None = None
        self._last_status_t: float | None = None
        self._status_state: str | None = None
        self._seq_adv = 0
        self._seq_status = 0
        # input health
        self._link_up = True
        self._link_reason = ""
        self._any_input = False
        self._last_valid_rx: float | None = None
        self._missing: tuple[str, ...] = ()
        self._prev_bad: dict[str, int] = {}
        self._last_bad_t: float | None = None
        self._last_bad_text = ""
        self.last_internal_error = ""

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
            payloads = self._reader.feed(data)
            if not payloads:
                return
            self._any_input = True
            for p in payloads:
                if rec is not None:
                    rec.record_input(p, rx, rx_utc, self.channel)
                if self._assembler is None:
                    self._air(p, rx)
                else:
                    self._arinc(p, rx)
        except Exception as exc:  # noqa: BLE001 - the live loop never dies on input
            c["internal_errors"] += 1
            self.last_internal_error = f"feed: {type(exc).__name__}: {exc}"
        finally:
            self.timing["feed"].add(time.perf_counter() - t0)

    def _air(self, payload: bytes, rx: float) -> None:
        frame = self._decoder.decode(payload)
        if frame is None:
            return
        if frame.type != "air":
            self._c["not_air"] += 1
            return
        res = self.validator.validate(frame.fields, rx, frame.utc_s, rx)
        if type(res) is not Rejection:
            self._last_valid_rx = rx

    def _arinc(self, payload: bytes, rx: float) -> None:
        asm = self._assembler
        if not asm.feed_payload(payload, rx):
            return
        fields = asm.fields(rx)
        missing = tuple(n for n in REQUIRED_FIELDS if n not in fields)
        self._missing = missing
        if missing:
            self._arinc_incomplete += 1
            return
        res = self.validator.validate(fields, rx, None, rx)
        if not isinstance(res, Rejection):
            self._last_valid_rx = rx

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
        self._last_now = now
        if self._next_due is None:
            self._next_due = now
        if now < self._next_due - _DUE_SLACK_S:
            if self._last_status_t is not None and \
                    now - self._last_status_t >= self.heartbeat_s:
                return [self._status(now, utc, self._status_state or "unavailable",
                                     self._status_reason)]
            return []
        behind = now - self._next_due
        if behind >= self.period_s:
            missed = int(behind // self.period_s)
            c["steps_missed"] += missed
            self._next_due += missed * self.period_s
        self._next_due += self.period_s
        if self._next_due <= now:  # rounding
            self._next_due = now + self.period_s
        return self._step(now, utc)

    # ------------------------------------------------------------------ the step
    def _input_state(self, now: float) -> tuple[AirDataState | None, str]:
        """The state to advise on, or None and why not."""
        if not self._link_up:
            detail = f" ({self._link_reason})" if self._link_reason else ""
            return None, f"input link lost{detail}; reconnecting"
        st = self.validator.current(now)
        if st is not None:
            return st, ""
        if self._assembler is not None and self._missing:
            return None, "ARINC 429 input incomplete: missing " + ", ".join(self._missing)
        last = self._last_valid_rx
        if last is not None:
            return None, f"air data stale: last valid frame {max(now - last, 0.0):.1f} s ago"
        if not self._any_input:
            return None, "no air data received yet"
        rej = self.validator.last_rejection
        return None, "no valid air data yet" + (f" ({rej.detail})" if rej is not None else "")

    def _step(self, now: float, utc: float) -> list[bytes]:
        c = self._c
        c["steps"] += 1
        state, why = self._input_state(now)
        t0 = time.perf_counter()
        try:
            adv = self.advisor.step(state, now)
        except Exception as exc:  # noqa: BLE001 - never die; say unavailable instead
            c["internal_errors"] += 1
            self.last_internal_error = f"advisor: {type(exc).__name__}: {exc}"
            adv = self._unavailable(f"internal error: {type(exc).__name__}")
        self.timing["step"].add(time.perf_counter() - t0)
        if state is None and adv.status != "unavailable":  # cannot happen; never clear
            adv = self._unavailable(why)
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
        st_state, st_reason = self._health(now, adv)
        self._status_reason = st_reason
        if (self._last_status_t is None or st_state != self._status_state
                or now - self._last_status_t >= self.heartbeat_s - 0.5 * self.period_s):
            if self._last_status_t is None:
                st_reason = STARTUP_REASON
            out.append(self._status(now, utc, st_state, st_reason))
        return out

    _status_reason = ""

    def _unavailable(self, reason: str):
        from advisory.pipeline.results import Advisory

        return Advisory("unavailable", reason=reason)

    def _adv_payload(self, adv, now: float, utc: float) -> bytes:
        try:
            payload = encode_adv(adv.to_fields(), self._seq_adv, utc)
        except Exception as exc:  # noqa: BLE001 - an unencodable advisory: say unavailable
            self._c["internal_errors"] += 1
            self.last_internal_error = f"encode advisory: {type(exc).__name__}: {exc}"
            fallback = self._unavailable("internal error: advisory not encodable")
            payload = encode_adv(fallback.to_fields(), self._seq_adv, utc)
        self._seq_adv = next_seq(self._seq_adv)
        self._c["adv_frames"] += 1
        if self.recorder is not None:
            self.recorder.record_output(payload, now, utc, self.channel)
        return payload

    def _status(self, now: float, utc: float, state: str, reason: str) -> bytes:
        self._c["status_frames"] += 1
        payload = encode_status({"state": state, "reason": _clip(reason),
                                 "counters": self._status_counters()},
                                self._seq_status, utc)
        self._seq_status = next_seq(self._seq_status)
        self._last_status_t = now
        self._status_state = state
        if self.recorder is not None:
            self.recorder.record_output(payload, now, utc, self.channel)
        return payload

    def _health(self, now: float, adv) -> tuple[str, str]:
        """(status state, reason) for this step."""
        bad = self._bad_counts()
        if bad != self._prev_bad:
            prev = self._prev_bad
            grew = [k for k, v in bad.items() if v > prev.get(k, 0)]
            self._prev_bad = bad
            if grew:
                self._last_bad_t = now
                self._last_bad_text = self._problem_text(grew)
        if adv.status == "unavailable":
            return "unavailable", adv.reason or "advisory unavailable"
        if self._last_bad_t is not None and now - self._last_bad_t < self.degraded_hold_s:
            return "degraded", self._last_bad_text
        if adv.tables_stale:
            return "degraded", "tables stale: rebuilding for a new atmosphere"
        return "ok", ""

    def _problem_text(self, grew: list[str]) -> str:
        head = f"problems in the last {self.degraded_hold_s:g} s: "
        rej = self.validator.last_rejection
        err = self._decoder.last_error if self._decoder is not None else None
        for k in grew:
            if k in self.validator.rejections and rej is not None and rej == k:
                return head + f"input rejected ({rej.detail})"
        for k in grew:
            if k in _DECODE_BAD and err is not None and err.reason == k:
                return head + f"frame refused ({err})"
        words = [_COUNTER_TEXT.get(k, k) for k in grew]
        return head + ", ".join(words)

    # ------------------------------------------------------------------ counters
    def _bad_counts(self) -> dict[str, int]:
        """Every counter that means a problem, by name."""
        c = self._c
        bad = {k: c[k] for k in _LOOP_BAD if c[k]}
        link = self._reader.counters
        for k in _LINK_BAD:
            if link[k]:
                bad[k] = link[k]
        if self._decoder is not None:
            dc = self._decoder.counters
            for k in _DECODE_BAD:
                if dc[k]:
                    bad[k] = dc[k]
            if dc["oversize"]:
                bad["oversize"] = bad.get("oversize", 0) + dc["oversize"]
        else:
            ac = self._assembler.counters
            for k in _ARINC_BAD:
                if ac[k]:
                    bad[k] = ac[k]
        bad.update(self.validator.rejections)
        for k, v in self.external_counters.items():
            if v:
                bad[k] = v
        rec = self.recorder
        if rec is not None and rec.write_errors:
            bad["record_errors"] = rec.write_errors
        return bad

    @property
    def counters(self) -> dict[str, int]:
        """Every counter by name (a fresh dict).

        Link counters (``frames_ok``, ``bad_crc``, ``cobs_error``, ``too_short``,
        ``oversize``), decoder counters (``decoded`` and the reason codes of ICD section
        8; the decoder's ``oversize`` is added to the link's) or the ARINC 429 counters
        (``words``, ``words_accepted``, ``bad_parity``, ... , ``arinc_incomplete``), the
        validator's ``valid``, ``rejected`` (total), ``rebaselines`` and one counter per
        rejection reason code (``range:alt_ft``, ``stale``, ``jump:position``, ...), the
        loop's own (:data:`LOOP_COUNTERS`), ``record_errors`` when a record write failed,
        and the driver's :attr:`external_counters` that are not 0.
        """
        c = dict(self._c)
        v = self.validator
        c["valid"] = v.accepted
        c["rejected"] = v.rejected
        c["rebaselines"] = v.rebaselines
        out = dict(self._reader.counters)
        if self._decoder is not None:
            dc = self._decoder.counters
            out["decoded"] = dc["decoded"]
            for k in _DECODE_BAD:
                out[k] = dc[k]
            out["oversize"] += dc["oversize"]
        else:
            ac = self._assembler.counters
            for k in _ARINC_ALL[2:-1]:
                out[k] = ac[k]
            out["words"] = ac["words"]
            out["words_accepted"] = ac["accepted"]
            out["arinc_incomplete"] = self._arinc_incomplete
            del c["not_air"]
        out.update(c)
        out.update(v.rejections)
        for k, n in self.external_counters.items():
            if n:  # present once non-zero, so a clean run's frames equal its replay's
                out[k] = n
        rec = self.recorder
        if rec is not None and rec.write_errors:
            out["record_errors"] = rec.write_errors
        return out

    def _status_counters(self) -> dict[str, int]:
        """:attr:`counters` cut to the status frame's 48 entries.

        The fixed counters always come; rejection reason codes fill the remaining
        places, most frequent first (ties by name), and the rest are summed into
        ``rejected_other``.
        """
        allc = self.counters
        if len(allc) <= MAX_COUNTERS:
            return allc
        codes = self.validator.rejections
        fixed = {k: v for k, v in allc.items() if k not in codes}
        room = MAX_COUNTERS - len(fixed) - 1
        ranked = sorted(codes.items(), key=lambda kv: (-kv[1], kv[0]))
        fixed.update(ranked[:max(room, 0)])
        fixed["rejected_other"] = sum(v for _, v in ranked[max(room, 0):])
        while len(fixed) > MAX_COUNTERS:  # more external counters than room: drop them
            fixed.pop(next(k for k in reversed(fixed) if k not in LOOP_COUNTERS))
        return fixed

    # ------------------------------------------------------------------ shutdown
    def final_frames(self, now_monotonic: float, now_utc: float,
                     reason: str = STOP_REASON) -> list[bytes]:
        """An ``unavailable`` advisory and status to publish when the service stops
        (so no display keeps showing the last level); recorded like any output."""
        try:
            adv = self._unavailable(reason)
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
                "degraded_hold_s": self.degraded_hold_s}


__all__ = ["FRAMINGS", "INPUT_FORMATS", "LOOP_COUNTERS", "AdvisoryLoop", "DurationHistogram"]
