"""What the advisor says: the advisory of one step and the conflicts behind it.

:class:`Advisory` carries SI values inside; :meth:`Advisory.to_fields` gives the wire /
JSON fields (edge units named in the keys, strings cut to the wire format's limits of
:mod:`advisory.schema`) and :meth:`Advisory.to_record` the fuller record for logs and
``check --json``, with the advisory-aid caution.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from advisory import units
from advisory.pipeline.cues import crew_cue
from advisory.schema import CUE_MAX_BYTES, SAFETY_CAUTION, ZONE_ID_MAX_BYTES

__all__ = ["Conflict", "Advisory", "clip_utf8"]


@dataclass(frozen=True)
class Conflict:
    """A zone the carpet reaches within the look-ahead (SI)."""

    zone_index: int
    zone_id: str
    zone_name: str
    time_to_contact_s: float
    overpressure_pa: float
    focus: bool
    #: Index (in the prediction) of the emission whose boom touches first; -1: unknown.
    emission_index: int = -1
    #: Probability that that boom reaches the ground (issue 16); None without a spread.
    probability: float | None = None


@dataclass(frozen=True)
class Advisory:
    """What the advisor says for one step.

    Attributes
    ----------
    status : str
        One of :data:`advisory.schema.ADV_STATUSES`.
    zone_id, zone_name : str or None
        First zone in conflict.
    time_to_contact_s : float or None
        Time until the carpet reaches that zone, s.
    overpressure_pa : float or None
        Predicted overpressure there (focus included), Pa.
    focus : bool
        A focus boom is predicted at the contact.
    max_mach_off_ground : float or None
        Highest Mach at the present altitude whose boom stays off the ground (cutoff
        minus the configured margin).
    turn_left_deg, turn_right_deg : float or None
        Smallest heading changes that clear every zone over the look-ahead (None when
        none up to the search limit does, or no conflict).
    reaches_ground : bool
        The boom of the present emission reaches the ground.
    cutoff_mach : float or None
        Cutoff Mach at the present state.
    tables_stale : bool
        A newer atmosphere is known and its table is being built.
    reason : str
        Why the advisory is unavailable ('' otherwise).
    conflicts : tuple of Conflict
        Every zone in conflict, soonest first.
    utc_s : float or None
        UTC time of the air data the advisory is based on.
    act_by_s : float or None
        Seconds from the state's time to the latest moment the crew can start the
        offered action (after which it no longer clears); None: no conflict, or nothing
        clears.
    resolve_mach : float or None
        Largest Mach, reached by decelerating at the configured rate, whose booms
        (trial-flown, deceleration focus included) stay off every zone; None: no Mach
        clears alone.
    turn_left_hdg_deg, turn_right_hdg_deg : float or None
        Target heading (deg true, [0, 360)) of the left / right turn resolutions.
    combined : bool
        Neither Mach nor a turn clears alone: the offered resolution is
        ``resolve_mach`` and the turn together.
    cutoff_sigma : float or None
        Standard deviation of the present cutoff Mach from the spread of the air below
        (:mod:`advisory.pipeline.confidence`); None without sensitivity columns.
    boom_probability : float or None
        Probability that the boom reaches the zone named (that the boom of the emission
        touching it first reaches the ground), or with no zone named that the present
        boom reaches the ground: ``Phi((M - cutoff) / sigma)`` at that emission; None
        without ``cutoff_sigma``.
    near_cutoff : bool
        The present Mach lies within :data:`advisory.tables.lookup.NEAR_CUTOFF_BAND` above
        the cutoff Mach or within the lookups' band below it (the same 0.005, or ``z
        sigma`` when the cutoff is read at a confidence): whether and where the boom
        reaches the ground is uncertain (ray theory at the grazing ray, the air below); the
        prediction errs toward "the boom reaches".
    at_limit : bool
        The offered resolution keeps the booms under each zone's limit itself, not under
        ``limit_fraction`` of it: nothing clears with that room
        (:func:`advisory.pipeline.resolutions.search`).
    level_off : bool
        The offered resolution was flown with the crew levelling the flight path from the
        action's start (at the configured capture pitch rate, as every trial is:
        :mod:`advisory.pipeline.trial`) while the aircraft climbs or descends at the
        onset by more than :data:`advisory.pipeline.cues.LEVEL_CUE_DEG`: the crew line
        says so (``LVL``), so a crew that keeps climbing does not fly an unchecked action.
    """

    status: str
    zone_id: str | None = None
    zone_name: str | None = None
    time_to_contact_s: float | None = None
    overpressure_pa: float | None = None
    focus: bool = False
    max_mach_off_ground: float | None = None
    turn_left_deg: float | None = None
    turn_right_deg: float | None = None
    reaches_ground: bool = False
    cutoff_mach: float | None = None
    tables_stale: bool = False
    reason: str = ""
    conflicts: tuple[Conflict, ...] = field(default_factory=tuple)
    utc_s: float | None = None
    act_by_s: float | None = None
    resolve_mach: float | None = None
    turn_left_hdg_deg: float | None = None
    turn_right_hdg_deg: float | None = None
    combined: bool = False
    near_cutoff: bool = False
    cutoff_sigma: float | None = None
    boom_probability: float | None = None
    at_limit: bool = False
    level_off: bool = False

    @property
    def overpressure_psf(self) -> float | None:
        """Predicted overpressure at the zone, psf."""
        return None if self.overpressure_pa is None else units.pa_to_psf(self.overpressure_pa)

    @property
    def cue(self) -> str:
        """One short crew line (our own wording)."""
        return crew_cue(self)

    def to_fields(self) -> dict:
        """The advisory as wire / JSON fields (edge units named in the keys)."""
        def r(x: float | None, nd: int) -> float | None:
            return None if x is None or not math.isfinite(x) else round(float(x), nd)

        return {
            "status": self.status,
            "zone_id": clip_utf8(self.zone_id, ZONE_ID_MAX_BYTES),
            "time_to_contact_s": r(self.time_to_contact_s, 1),
            "overpressure_psf": r(self.overpressure_psf, 3),
            "focus": bool(self.focus),
            "max_mach_off_ground": r(self.max_mach_off_ground, 2),
            "turn_left_deg": r(self.turn_left_deg, 0),
            "turn_right_deg": r(self.turn_right_deg, 0),
            "tables_stale": bool(self.tables_stale),
            "cue": clip_utf8(self.cue, CUE_MAX_BYTES),
            # issue 13: optional keys after the version-1 ones (ICD sections 5 and 7)
            "act_by_s": r(self.act_by_s, 1),
            "resolve_mach": _mach_down(self.resolve_mach),
            "turn_left_hdg": _heading(self.turn_left_hdg_deg),
            "turn_right_hdg": _heading(self.turn_right_hdg_deg),
            "combined": bool(self.combined),
            "near_cutoff": bool(self.near_cutoff),  # issue 14: sent only when true
            "boom_probability": r(self.boom_probability, 2),  # issue 16: when known
            "at_limit": bool(self.at_limit),  # sent only when true
            "level_off": bool(self.level_off),  # sent only when true
        }

    def to_record(self) -> dict:
        """The fuller record for logs and ``check --json``."""
        d = self.to_fields()
        d.update({
            "zone_name": self.zone_name,
            "reaches_ground": self.reaches_ground,
            "cutoff_mach": None if self.cutoff_mach is None else round(self.cutoff_mach, 4),
            "cutoff_mach_sigma": None if self.cutoff_sigma is None
            else round(self.cutoff_sigma, 5),
            "boom_probability": None if self.boom_probability is None
            else round(self.boom_probability, 4),
            "reason": self.reason,
            "utc_s": self.utc_s,
            "conflicts": [
                {"zone_id": c.zone_id, "zone_name": c.zone_name,
                 "time_to_contact_s": round(c.time_to_contact_s, 1),
                 "overpressure_psf": round(units.pa_to_psf(c.overpressure_pa), 3),
                 "focus": c.focus,
                 "boom_probability": None if c.probability is None
                 else round(c.probability, 4)}
                for c in self.conflicts
            ],
            "caution": SAFETY_CAUTION,
        })
        return d


def _mach_down(mach: float | None) -> float | None:
    """``resolve_mach`` to the hundredth, cut down: the Mach sent never exceeds the one
    that clears (the crew line shows the same digits, :mod:`advisory.pipeline.cues`)."""
    if mach is None or not math.isfinite(mach):
        return None
    return math.floor(mach * 100.0 + 1e-6) / 100.0


def _heading(hdg: float | None) -> float | None:
    """A target heading to the whole degree in [0, 360)."""
    if hdg is None or not math.isfinite(hdg):
        return None
    return float(round(hdg) % 360)


def clip_utf8(text: str | None, limit: int) -> str | None:
    """``text`` cut to at most ``limit`` UTF-8 bytes (the wire format's string limits)."""
    if text is None:
        return None
    raw = text.encode("utf-8")
    return text if len(raw) <= limit else raw[:limit].decode("utf-8", "ignore")
