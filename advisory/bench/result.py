"""What one replay produced (:class:`ReplayResult`) and how it reads for people: the
summary table, the crew cues as they fired, notes on what the record reader skipped.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import asdict, dataclass, field
from typing import Any

from advisory.bench.expect import Segment
from advisory.bench.scenario import ReplaySetup
from advisory.io.messages import decode_frame
from advisory.schema import CONFLICT_STATUSES

#: Counters of the loop that mean bad input or trouble (summed into ``errors``).
ERROR_COUNTERS = (
    "bad_crc", "cobs_error", "too_short", "oversize", "malformed", "not_a_map",
    "missing_field", "bad_type", "bad_value", "unsupported_version", "unknown_type",
    "not_air", "rejected", "bad_parity", "ssm_failure", "ssm_ncd", "ssm_test", "bad_bcd",
    "bad_payload", "bad_time", "clock_backwards", "internal_errors",
)


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
        Output records in the log (those that decode).
    bad_records : int
        Records skipped because their time is not a number or (a recorded output) they
        cannot be decoded.
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
    truth : dict or None
        With ``replay --truth``: the ground truth's score of the flight
        (:func:`advisory.bench.replay_truth.truth_json`: ``exposures``,
        ``nuisance_alerts``, ``unavailable_s`` and provenance).
    truth_figure : dict or None
        What the report draws of the truth (:func:`advisory.bench.replay_truth.figure_data`).
    """

    setup: ReplaySetup
    outputs: list[tuple[float, float, bytes]] = field(default_factory=list)
    recorded_match: bool | None = None
    recorded_outputs: int = 0
    bad_records: int = 0
    first_mismatch: str = ""
    t0_monotonic: float = 0.0
    t0_utc: float = 0.0
    duration_s: float = 0.0
    segments: list[Segment] = field(default_factory=list)
    counters: dict[str, int] = field(default_factory=dict)
    read: dict[str, Any] = field(default_factory=dict)
    inputs_fed: int = 0
    sent: int = 0
    send_errors: int = 0
    wall_s: float = 0.0
    diffs: list[str] | None = None
    flight: dict[str, Any] | None = None
    notes: list[str] = field(default_factory=list)
    truth: dict[str, Any] | None = None
    truth_figure: dict[str, Any] | None = None

    @property
    def name(self) -> str:
        return self.setup.name

    @property
    def advisory_payloads(self) -> list[bytes]:
        """The advisory frame payloads, in order."""
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

    def summary(self) -> dict[str, Any]:
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

    def to_json(self) -> dict[str, Any]:
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
            "bad_records": self.bad_records,
            "notes": list(self.notes),
            "recorded_match": self.recorded_match,
            "first_mismatch": self.first_mismatch,
            "differences": self.diffs,
            "wall_s": round(self.wall_s, 3),
            "speedup": round(self.duration_s / self.wall_s, 1) if self.wall_s > 0 else None,
        })
        if self.setup.send:
            d.update({"sent": self.sent, "send_errors": self.send_errors})
        if self.truth is not None:
            d["truth"] = self.truth
        return d



def _fmt(v: float | None, spec: str, unit: str = "") -> str:
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

    def line(cells: Sequence[str]) -> str:
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
