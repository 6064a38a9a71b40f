"""The loop's health: its counters, the status state and reason, and duration bins.

Status states (ICD ``docs/interface.md`` sections 6 and 17.2): ``unavailable`` when the
advisory is unavailable (input link lost, no valid air data yet, air data stale, or the
advisor cannot predict); ``degraded`` when advisories flow but input was rejected, a
clock misbehaved, outputs were dropped within the last ``degraded_hold_s`` seconds, or the
tables are stale; ``ok`` otherwise.

:class:`LoopHealth` owns every counter the loop publishes (ICD section 17.3) and reads
the counters of the loop's deframer, decoder or ARINC 429 assembler, validator and
recorder; :class:`DurationHistogram` bins step and feed durations (never published in a
frame, so replays stay byte-identical).
"""

from __future__ import annotations

import math

import numpy as np

from advisory.io.arinc429 import Arinc429Assembler
from advisory.io.framing import DatagramReader, StreamDeframer
from advisory.io.messages import FrameDecoder
from advisory.io.records import Recorder
from advisory.pipeline.results import Advisory
from advisory.pipeline.state import StateValidator
from advisory.schema import DECODE_REASONS, LINK_COUNTERS, MAX_COUNTERS, REASON_MAX_BYTES

#: The loop's own counters, in the order they are listed in the ICD.
LOOP_COUNTERS = ("feeds", "bytes_in", "not_air", "valid", "rejected", "rebaselines", "steps",
                 "steps_missed", "adv_frames", "status_frames", "unavailable_steps",
                 "clock_backwards", "bad_time", "internal_errors")
_LOOP_BAD = ("not_air", "steps_missed", "clock_backwards", "bad_time", "internal_errors")
#: Link counters that mean bad input (``frames_ok`` is good news).
_LINK_BAD = tuple(k for k in LINK_COUNTERS if k != "frames_ok")
#: Decoder counters that mean bad input; ``oversize`` is merged with the link's.
_DECODE_BAD = tuple(k for k in DECODE_REASONS if k != "oversize")
#: ARINC 429 assembler counters that mean bad input. Unknown labels and other SDIs are
#: normal on a shared bus and are counted but not taken as a problem.
_ARINC_BAD = ("bad_parity", "ssm_failure", "ssm_ncd", "ssm_test", "bad_bcd", "bad_payload")
_ARINC_ALL = ("words", "words_accepted", "bad_parity", "ssm_failure", "ssm_ncd", "ssm_test",
              "unknown_label", "sdi_mismatch", "bad_bcd", "bad_payload", "arinc_incomplete")
#: Driver counters that are published but are no problem for the advisory itself (a log
#: line that could not be written says nothing about the advice).
_EXTERNAL_INFO = ("log_dropped", "record_dropped")

_COUNTER_TEXT = {
    "bad_crc": "frames with a bad CRC", "cobs_error": "badly stuffed frames",
    "too_short": "frames too short", "oversize": "oversize frames",
    "not_air": "frames that are not air data", "steps_missed": "steps missed (overrun)",
    "clock_backwards": "loop clock stepped backwards", "bad_time": "non-finite times",
    "internal_errors": "internal errors", "record_errors": "record writes failed",
    "input_lost": "input link lost", "input_reopened": "input link reopened",
    "output_dropped": "outputs dropped",
    "output_errors": "output link errors", "service_errors": "service errors",
    "source_refused": "datagrams from other sources refused",
    "auth_missing": "frames without an authentication tag",
    "auth_bad": "frames with a wrong authentication tag",
    "auth_replay": "authenticated frames replayed or out of order",
    "profile_rejected": "profile refused (previous table kept)",
}


def clip(text: str, limit: int = REASON_MAX_BYTES) -> str:
    """``text`` without NULs, cut to at most ``limit`` UTF-8 bytes."""
    text = text.replace("\x00", " ")
    raw = text.encode("utf-8")
    return text if len(raw) <= limit else raw[:limit].decode("utf-8", "ignore")


def no_state_reason(now: float, validator: StateValidator, *, link_reason: str | None,
                    missing: tuple[str, ...], last_valid_rx: float | None,
                    any_input: bool) -> str:
    """Why the loop has no state to advise on, in one line for the advisory's reason.

    Parameters
    ----------
    now : float
        Monotonic time of the step, s.
    validator : StateValidator
        The loop's validator (its latest rejection and freshness refusal).
    link_reason : str or None
        None while the input link is up; else why it is down ("" if not known).
    missing : tuple of str
        Required fields the ARINC 429 words have not given yet (empty otherwise).
    last_valid_rx : float or None
        Monotonic receive time of the last valid frame, s.
    any_input : bool
        Whether any frame has been received.
    """
    if link_reason is not None:
        detail = f" ({link_reason})" if link_reason else ""
        return f"input link lost{detail}; reconnecting"
    if missing:
        return "ARINC 429 input incomplete: missing " + ", ".join(missing)
    if last_valid_rx is not None:
        why = f"air data stale: last valid frame {max(now - last_valid_rx, 0.0):.1f} s ago"
        not_fresh = validator.not_fresh  # frozen or repeated data: say which
        return why if not_fresh is None else f"{why} ({not_fresh.detail})"
    if not any_input:
        return "no air data received yet"
    rej = validator.last_rejection
    return "no valid air data yet" + (f" ({rej.detail})" if rej is not None else "")


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


class LoopHealth:
    """Counters of one loop and its status state.

    Parameters
    ----------
    reader : StreamDeframer or DatagramReader
        The loop's framing stage.
    decoder : FrameDecoder or None
        The air-data frame decoder (None for ARINC 429 input).
    assembler : Arinc429Assembler or None
        The ARINC 429 assembler (None for air-data frames).
    validator : StateValidator
    degraded_hold_s : float
        How long a problem keeps the status ``degraded``, s.

    Attributes
    ----------
    c : dict of str to int
        The loop's own counters (:data:`LOOP_COUNTERS`); the loop counts into it.
    external : dict of str to int
        Counters the driver owns (``input_lost``, ``output_dropped``, ...).
    arinc_incomplete : int
        ARINC 429 payloads after which required fields were still missing.
    recorder : Recorder or None
        Its ``write_errors`` are published as ``record_errors``.
    """

    def __init__(self, reader: StreamDeframer | DatagramReader, decoder: FrameDecoder | None,
                 assembler: Arinc429Assembler | None, validator: StateValidator,
                 degraded_hold_s: float) -> None:
        self.reader = reader
        self.decoder = decoder
        self.assembler = assembler
        self.validator = validator
        self.degraded_hold_s = degraded_hold_s
        self.c: dict[str, int] = dict.fromkeys(LOOP_COUNTERS, 0)
        self.external: dict[str, int] = {}
        self.arinc_incomplete = 0
        self.recorder: Recorder | None = None
        self._prev_bad: dict[str, int] = {}
        self._last_bad_t: float | None = None
        self._last_bad_text = ""
        #: The live table verified short of its budgets (a rebuilt one), or "".
        self.table_note = ""

    # ------------------------------------------------------------------ status state
    def assess(self, now: float, adv: Advisory) -> tuple[str, str]:
        """(status state, reason) for the step at ``now`` whose advisory is ``adv``."""
        bad = self.bad_counts()
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
        if self.table_note:
            return "degraded", clip(self.table_note)
        return "ok", ""

    def _problem_text(self, grew: list[str]) -> str:
        head = f"problems in the last {self.degraded_hold_s:g} s: "
        rej = self.validator.last_rejection
        err = self.decoder.last_error if self.decoder is not None else None
        for k in grew:
            if k in self.validator.rejections and rej is not None and rej == k:
                return head + f"input rejected ({rej.detail})"
        for k in grew:
            if k in _DECODE_BAD and err is not None and err.reason == k:
                return head + f"frame refused ({err})"
        words = [_COUNTER_TEXT.get(k, k) for k in grew]
        return head + ", ".join(words)

    # ------------------------------------------------------------------ counters
    def bad_counts(self) -> dict[str, int]:
        """Every counter that means a problem, by name."""
        c = self.c
        bad = {k: c[k] for k in _LOOP_BAD if c[k]}
        link = self.reader.counters
        for k in _LINK_BAD:
            if link[k]:
                bad[k] = link[k]
        if self.decoder is not None:
            dc = self.decoder.counters
            for k in _DECODE_BAD:
                if dc[k]:
                    bad[k] = dc[k]
            if dc["oversize"]:
                bad["oversize"] = bad.get("oversize", 0) + dc["oversize"]
        elif self.assembler is not None:
            ac = self.assembler.counters
            for k in _ARINC_BAD:
                if ac[k]:
                    bad[k] = ac[k]
        bad.update(self.validator.rejections)
        for k, v in self.external.items():
            if v and k not in _EXTERNAL_INFO:
                bad[k] = v
        rec = self.recorder
        if rec is not None and rec.write_errors:
            bad["record_errors"] = rec.write_errors
        return bad

    def counters(self) -> dict[str, int]:
        """Every counter by name (a fresh dict); see ``AdvisoryLoop.counters``."""
        c = dict(self.c)
        v = self.validator
        c["valid"] = v.accepted
        c["rejected"] = v.rejected
        c["rebaselines"] = v.rebaselines
        out = dict(self.reader.counters)
        if self.decoder is not None:
            dc = self.decoder.counters
            out["decoded"] = dc["decoded"]
            for k in _DECODE_BAD:
                out[k] = dc[k]
            out["oversize"] += dc["oversize"]
            if self.decoder.unknown_keys:  # present once not 0: clean runs keep their frames
                out["unknown_keys"] = self.decoder.unknown_keys
        elif self.assembler is not None:
            ac = self.assembler.counters
            for k in _ARINC_ALL[2:-1]:
                out[k] = ac[k]
            out["words"] = ac["words"]
            out["words_accepted"] = ac["accepted"]
            out["arinc_incomplete"] = self.arinc_incomplete
            del c["not_air"]
        out.update(c)
        out.update(v.rejections)
        for k, n in self.external.items():
            if n:  # present once non-zero, so a clean run's frames equal its replay's
                out[k] = n
        rec = self.recorder
        if rec is not None and rec.write_errors:
            out["record_errors"] = rec.write_errors
        return out

    def status_counters(self) -> dict[str, int]:
        """:meth:`counters` cut to the status frame's 48 entries.

        The fixed counters always come; rejection reason codes fill the remaining
        places, most frequent first (ties by name), and the rest are summed into
        ``rejected_other``.
        """
        allc = self.counters()
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


__all__ = ["LOOP_COUNTERS", "DurationHistogram", "LoopHealth", "clip", "no_state_reason"]
