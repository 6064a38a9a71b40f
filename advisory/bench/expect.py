"""Expected advisories: the ``--expect`` file, the segments of a replay and their comparison.

The expected file is a JSON file of our own, either a list of entries or an object with
the list under ``"advisories"``::

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
people. Times are seconds after the first input record of the log.

The object may also hold ``"truth_exposures"``: the ids of the zones that booms of the
flight really reach, by the truth harness (``replay --truth``; an empty list: none). The
advisories are compared by ``--expect``; the test suite checks ``truth_exposures``
against the truth, so a demo flight's expectations never contradict where its booms land.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass
from pathlib import Path

from advisory.io.messages import decode_frame
from advisory.schema import ADV_STATUSES

DEFAULT_TOLERANCE_S = 1.0  #: default time tolerance of an expected entry, s


class ExpectFileError(ValueError):
    """An expected-advisory file that cannot be used; the message names the entry."""


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


def segments_of(outputs: list, t0: float) -> list[Segment]:
    """Cut the advisory frames of ``outputs`` into segments (see :class:`Segment`)."""
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
