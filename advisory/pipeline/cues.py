"""The crew line of an advisory: at most 40 characters, unambiguous, our own wording.

The levels keep their trade names (ADVISORY, CAUTION, WARNING); everything else is plain
words. What the line holds, by status (issue 13, "the crew's line"):

* conflict levels: ``<LEVEL> <zone> <action> ACT <time>``, e.g.
  ``CAUTION Larkmoor M1.12 ACT 42S``, ``WARNING Fenwick R TO 075 ACT 8S``,
  ``WARNING Fenwick M1.08+L TO 245 ACT 20S`` (Mach and turn together, ``combined``).

  - *action*: ``M1.12`` is the Mach to decelerate to (``resolve_mach``, cut down to the
    hundredth so the number shown never exceeds the Mach that clears); ``L TO 245`` /
    ``R TO 075`` is the turn direction and the **target heading** (three digits, deg
    true), never a bare number that could be a change or a heading. A Mach outside
    0-10 or a change over 360 deg is not shown (not a resolution). One action is shown:
    the Mach when one clears alone (it keeps the cleared route), else the turn with the
    smaller heading change; both when neither clears alone. Without a target heading
    (an advisor that gives only the change) the turn reads ``R BY 20`` (a change,
    said as one). ``NOTHING CLEARS`` when no resolution was found.
  - ``LVL`` after the action (``M1.12 LVL``, ``R TO 075 LVL``): level the flight path
    while acting (``level_off``). Every trial the resolutions fly levels the path from
    the action's start at the configured capture pitch rate (as the scenarios' crew does
    on taking over, ``docs/scenarios.md``); when the aircraft still climbs or descends
    at the onset by more than :data:`LEVEL_CUE_DEG`, a crew told only the Mach or the
    turn could keep climbing and fly something no trial checked, so the line says it.
  - *time*: ``ACT 42S`` is the time left to **start** the action (``act_by_s``), cut
    down to the whole second; ``ACT NOW`` under one second. Without an act-by time (no
    action clears) the time until the boom reaches the zone follows the zone instead:
    ``CAUTION Larkmoor IN 64S NOTHING CLEARS``. Ten minutes or more read ``12MIN``
    (whole minutes, cut down). A level held by the hysteresis after its conflict went
    (no contact, no time, no action) reads ``WARNING Larkmoor CONTACT GONE`` until it is
    released.
* ``unavoidable``: ``BOOM DUE <zone> IN <time> <psf> PSF``, the arrival time and the
  overpressure so the crew can tell the ground, e.g. ``BOOM DUE Larkmoor IN 42S 2.9 PSF``
  (``99+ PSF`` from 99.95 psf).
* ``unavailable``: plain words only, never the detail: ``BOOM PREDICTION OFF - NO AIR
  DATA``, ``... - SYSTEM FAULT``, ``... - STOPPED``, ``... - STARTING``, ``... -
  OUTSIDE TABLE`` (the flight condition lies outside the live table:
  :mod:`advisory.pipeline.table_range`) or ``BOOM PREDICTION OFF``. The detail
  (error text, URL, errno) is the advisory's ``reason``, which the status frame's
  ``reason`` carries (:meth:`advisory.service.health.LoopHealth.assess`).
* ``no_boom``: ``NO BOOM ON GROUND``; ``clear``: ``BOOM ON GROUND, ZONES CLEAR``; either
  within the near-cutoff band (``near_cutoff``): ``NEAR CUTOFF, BOOM MAY REACH, ZONES CLEAR``
  (whether the boom reaches is uncertain there; the prediction assumes it does).

Focus and overpressure in conflict lines: left to the display. A focus boom changes how
loud the boom is, not what the crew does about it; the level already ranks it (the
advisor's levels use the overpressure with focus included), and the frame carries
``overpressure_psf`` and ``focus`` beside the cue for the display to show in its own
place. In 40 characters the zone, the action and the time to act come first; the old
bare word "FOCUS" told the crew nothing it could act on. The ``unavoidable`` line gives
the psf (focus included) because that is the number the ground needs.
``tables_stale`` is likewise left to the display and the status frame (``degraded``).

Zone names, shortened by rule so that the action and the time always survive: the
name (whitespace runs made one space, control characters dropped; ``zone_id`` when
there is no name, ``ZONE`` when neither) gets the characters the fixed parts leave of
the 40 (and of :data:`advisory.schema.CUE_MAX_BYTES` UTF-8 bytes, so the wire never cuts
the line). A name that does not fit is cut to its longest run of whole leading words
that fits with the marker ``.`` after it (``Larkmoor National Park`` -> ``Larkmoor.``);
when not even the first word fits, that word is cut to fit with the marker
(``Larkm.``). So a shortened name always ends with ``.`` and what precedes it is the
start of the name: a reader never takes a cut word for a whole one. With room for fewer
than two characters the zone is left out (the frame's ``zone_id`` names it).

Characters are Unicode code points (``len``); every line is also at most
:data:`advisory.schema.CUE_MAX_BYTES` UTF-8 bytes. No phrase is taken from an existing
alerting system.
"""

from __future__ import annotations

import math
from typing import Protocol

from advisory.pipeline.table_range import OUTSIDE_TABLE
from advisory.schema import CUE_MAX_BYTES

__all__ = ["CUE_MAX_CHARS", "LEVEL_CUE_DEG", "CueFacts", "crew_cue", "unavailable_cue",
           "shorten_name", "ZONE_CUT_MARK"]

CUE_MAX_CHARS = 40  #: longest crew line, characters (issue 13)
#: Flight-path angle at the action's start (deg, either sign) from which the line says
#: ``LVL``: the trials level the path from there (project choice, no source: 0.5 deg is
#: about 800 ft/min at Mach 1.6, well above the air data's noise, and a level-off from
#: it at 1 deg/s takes half a second).
LEVEL_CUE_DEG = 0.5
_LEVEL_OFF = "LVL"
ZONE_CUT_MARK = "."  #: ends a zone name that was shortened
_LEVEL_WORD = {"advisory": "ADVISORY", "caution": "CAUTION", "warning": "WARNING"}
_NO_ACTION = "NOTHING CLEARS"
_HELD = "CONTACT GONE"  #: a level held after its conflict went (no time, no action)
_NEAR_CUTOFF = "NEAR CUTOFF, BOOM MAY REACH, ZONES CLEAR"  #: clear or no boom, near cutoff


class CueFacts(Protocol):
    """What the crew line is made from (:class:`advisory.pipeline.results.Advisory` has it)."""

    @property
    def status(self) -> str: ...
    @property
    def reason(self) -> str: ...
    @property
    def zone_id(self) -> str | None: ...
    @property
    def zone_name(self) -> str | None: ...
    @property
    def time_to_contact_s(self) -> float | None: ...
    @property
    def overpressure_psf(self) -> float | None: ...
    @property
    def turn_left_deg(self) -> float | None: ...
    @property
    def turn_right_deg(self) -> float | None: ...
    @property
    def act_by_s(self) -> float | None: ...
    @property
    def resolve_mach(self) -> float | None: ...
    @property
    def turn_left_hdg_deg(self) -> float | None: ...
    @property
    def turn_right_hdg_deg(self) -> float | None: ...
    @property
    def combined(self) -> bool: ...
    @property
    def near_cutoff(self) -> bool: ...
    @property
    def level_off(self) -> bool: ...


def crew_cue(a: CueFacts) -> str:
    """The crew line for an advisory: at most :data:`CUE_MAX_CHARS` characters and
    :data:`advisory.schema.CUE_MAX_BYTES` UTF-8 bytes (wording of our own; the module
    docstring gives the rules)."""
    status = a.status
    if status == "unavailable":
        return unavailable_cue(a.reason)
    if status in ("no_boom", "clear") and a.near_cutoff:
        return _NEAR_CUTOFF
    if status == "no_boom":
        return "NO BOOM ON GROUND"
    if status == "clear":
        return "BOOM ON GROUND, ZONES CLEAR"
    name = (a.zone_name if a.zone_name and a.zone_name.strip() else None) or a.zone_id or "ZONE"
    if status == "unavoidable":
        tail = []
        t = _finite(a.time_to_contact_s)
        if t is not None:
            tail.append("IN " + _seconds(t))
        psf = _finite(a.overpressure_psf)
        if psf is not None:
            tail.append(f"{max(psf, 0.0):.1f} PSF" if psf < 99.95 else "99+ PSF")
        return _assemble("BOOM DUE", name, " ".join(tail))
    level = _LEVEL_WORD.get(status, status.upper()[:8])
    action = action_text(a)
    act_by = _finite(a.act_by_s)
    ttc = _finite(a.time_to_contact_s)
    if act_by is None and ttc is None and not action:
        # the level is held (hysteresis) while the present prediction has no contact
        return _assemble(level, name, _HELD)
    if act_by is not None:
        parts = [action or _NO_ACTION, "ACT NOW" if act_by < 1.0 else "ACT " + _seconds(act_by)]
    else:  # no act-by time: when the boom gets there, then what (if anything) clears
        parts = ["" if ttc is None else "IN " + _seconds(ttc), action or _NO_ACTION]
    return _assemble(level, name, " ".join(p for p in parts if p))


def action_text(a: CueFacts) -> str:
    """The action part of a conflict line ('' when the advisory offers none)."""
    mach = _finite(a.resolve_mach)
    if mach is not None and not 0.0 < mach < 10.0:
        mach = None  # not a Mach an aircraft can be asked to fly
    mach_text = "" if mach is None else f"M{math.floor(mach * 100.0 + 1e-6) / 100.0:.2f}"
    turn = _turn_text(a)
    if a.combined and mach_text and turn:
        text = f"{mach_text}+{turn}"
    else:
        text = mach_text or turn
    return f"{text} {_LEVEL_OFF}" if text and a.level_off else text


def _turn_text(a: CueFacts) -> str:
    """The turn with the smaller heading change: ``R TO 075`` (target heading), or
    ``R BY 20`` when only the change is known."""
    best: tuple[float, str] | None = None
    for side, hdg, change in (("R", a.turn_right_hdg_deg, a.turn_right_deg),
                              ("L", a.turn_left_hdg_deg, a.turn_left_deg)):
        h, d = _finite(hdg), _finite(change)
        if d is not None and abs(d) > 360.0:
            d = None  # not a heading change
        if h is not None:
            text = f"{side} TO {round(h) % 360:03d}"
        elif d is not None:
            text = f"{side} BY {round(abs(d))}"
        else:
            continue
        key = abs(d) if d is not None else math.inf
        if best is None or key < best[0]:
            best = (key, text)
    return "" if best is None else best[1]


def unavailable_cue(reason: str | None) -> str:
    """Plain words for an ``unavailable`` advisory; the detail stays in ``reason``."""
    r = (reason or "").lower()
    if r.startswith("service stopped"):
        return "BOOM PREDICTION OFF - STOPPED"
    if r.startswith("starting"):
        return "BOOM PREDICTION OFF - STARTING"
    if any(w in r for w in ("internal error", "prediction failed", "not encodable")):
        return "BOOM PREDICTION OFF - SYSTEM FAULT"
    if r.startswith(OUTSIDE_TABLE):
        return "BOOM PREDICTION OFF - OUTSIDE TABLE"
    if any(w in r for w in ("air data", "input", "arinc", "stale")):
        return "BOOM PREDICTION OFF - NO AIR DATA"
    return "BOOM PREDICTION OFF"


def shorten_name(name: str, max_chars: int, max_bytes: int = CUE_MAX_BYTES) -> str:
    """``name`` made to fit ``max_chars`` characters and ``max_bytes`` UTF-8 bytes.

    Whitespace runs become one space and control characters are dropped. A name that
    does not fit keeps its longest run of whole leading words that fits with
    :data:`ZONE_CUT_MARK` after it; if not even the first word fits, that word is cut to
    fit with the mark. '' when fewer than two characters (one and the mark) fit.
    """
    clean = " ".join("".join(ch for ch in name if ch.isprintable() or ch.isspace()).split())

    def fits(s: str) -> bool:
        return len(s) <= max_chars and len(s.encode("utf-8")) <= max_bytes

    if clean and fits(clean):
        return clean
    words = clean.split(" ")
    for n in range(len(words) - 1, 0, -1):
        cand = " ".join(words[:n]) + ZONE_CUT_MARK
        if fits(cand):
            return cand
    first = words[0]
    for n in range(min(len(first), max_chars) - 1, 0, -1):
        cand = first[:n] + ZONE_CUT_MARK
        if fits(cand):
            return cand
    return ""


def _assemble(head: str, name: str, tail: str) -> str:
    """``head zone tail`` with the zone shortened to what ``head`` and ``tail`` leave."""
    fixed = len(head) + len(tail) + 2
    fixed_bytes = len(head.encode("utf-8")) + len(tail.encode("utf-8")) + 2
    zone = shorten_name(name, CUE_MAX_CHARS - fixed, CUE_MAX_BYTES - fixed_bytes)
    return " ".join(p for p in (head, zone, tail) if p)


def _seconds(t: float) -> str:
    """A time span, cut down to the whole second (``42S``) or, from 10 min, the whole
    minute (``12MIN``); at most ``9999MIN``."""
    t = max(t, 0.0)
    if t < 600.0:
        return f"{int(t)}S"
    return f"{min(int(t // 60.0), 9999)}MIN"


def _finite(x: float | None) -> float | None:
    return None if x is None or not math.isfinite(x) else float(x)
