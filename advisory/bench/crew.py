"""The crew model of the closed loop: reads the advisory frames, flies the resolution.

A crew in mode ``ignore`` never acts. A crew in mode ``follow`` watches the decoded
advisory frames (``status``, ``zone_id``, ``resolve_mach``, ``turn_left_deg``,
``turn_right_deg``, ``combined``); from the first frame at or above its ``act_on`` level
it takes ``reaction_s`` to act, and then flies the resolution that frame offered:

* a Mach resolution: decelerate at ``decel_mach_per_s`` to ``resolve_mach`` (the Mach
  the advisor tried and found clear); a frame without the ``resolve_mach`` key (a log
  from before it existed) offers ``max_mach_off_ground`` instead;
* a turn resolution: bank at ``bank_deg`` with ``roll_rate_deg_s`` toward the offered
  heading change, then roll out;
* a combined resolution (``combined`` true): the deceleration and the turn together.

When the frame offers both, the crew takes the Mach resolution: slowing keeps the
aircraft on its planned ground track and needs no manoeuvre near the ground track's
neighbours (fewer manoeuvres, common practice, no source). Between two turns it takes
the smaller heading change (left on a tie). A cue without any resolution is noted and
not acted on.
The crew acts once (the first cue that offers a resolution); the flight simulator then
flies that resolution and holds (:class:`advisory.bench.flight.Pilot`).

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from advisory.bench.flight import Segment
from advisory.bench.sim_scenario import CrewSpec
from advisory.schema import STATUS_RANK


@dataclass(frozen=True)
class CrewAction:
    """What the crew decided: at ``t_s`` (s of flight) fly ``segment`` for ``zone_id``
    (and ``also``, the deceleration of a combined resolution, at the same time); ``kind``
    is ``mach``, ``turn`` or ``combined``; ``cue_t_s`` is when the cue was first seen."""

    t_s: float
    cue_t_s: float
    zone_id: str | None
    kind: str
    segment: Segment
    also: Segment | None = None

    def segments(self) -> tuple[Segment, ...]:
        """The segments to fly from ``t_s``, the deceleration first."""
        return (self.segment,) if self.also is None else (self.also, self.segment)


class Crew:
    """The crew (see the module notes). Feed it every advisory frame with :meth:`see`;
    :meth:`due` hands over the action whose time has come."""

    def __init__(self, spec: CrewSpec) -> None:
        self.spec = spec
        self.threshold = STATUS_RANK[spec.act_on]
        self.pending: CrewAction | None = None
        self.actions: list[CrewAction] = []
        self.first_cue_s: float | None = None

    def see(self, t_s: float, fields: dict[str, Any]) -> None:
        """Read one advisory frame (decoded fields) received at flight time ``t_s``."""
        if self.spec.mode != "follow" or self.pending is not None or self.actions:
            return
        if STATUS_RANK.get(str(fields.get("status")), -1) < self.threshold:
            return
        if self.first_cue_s is None:
            self.first_cue_s = t_s
        choice = self.choose(fields)
        if choice is None:
            return
        kind, segment = choice[0], choice[1]
        also = choice[2] if len(choice) > 2 else None
        self.pending = CrewAction(t_s + self.spec.reaction_s, t_s, fields.get("zone_id"),
                                  kind, segment, also)

    def choose(self, fields: dict[str, Any]) -> tuple[Any, ...] | None:
        """The resolution this crew flies for a frame: (kind, segment) or, for a combined
        resolution, (``combined``, turn segment, deceleration segment); None when the
        frame offers none."""
        s = self.spec
        mach = fields["resolve_mach"] if "resolve_mach" in fields else \
            fields.get("max_mach_off_ground")
        slow = None if mach is None else Segment(
            "mach", target_mach=float(mach), mach_rate_per_s=s.decel_mach_per_s)
        combined = bool(fields.get("combined", False))
        if slow is not None and not combined:
            return "mach", slow
        turns = [(abs(float(v)), sign) for v, sign in
                 ((fields.get("turn_left_deg"), -1.0), (fields.get("turn_right_deg"), 1.0))
                 if v is not None]
        if not turns:
            return None if slow is None else ("mach", slow)
        change, sign = min(turns)
        turn = Segment("turn", bank_deg=sign * s.bank_deg, roll_rate_deg_s=s.roll_rate_deg_s,
                       heading_change_deg=sign * change)
        if combined and slow is not None:
            return "combined", turn, slow
        return "turn", turn

    def due(self, t_s: float) -> CrewAction | None:
        """The pending action if its time has come by ``t_s`` (then it is taken)."""
        a = self.pending
        if a is None or t_s < a.t_s:
            return None
        self.pending = None
        self.actions.append(a)
        return a
