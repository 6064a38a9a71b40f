"""The crew line of an advisory: one short, unambiguous sentence (wording of our own).

The levels keep their trade names (advisory, caution, warning); everything else is
plain words. The line names the zone, the time to contact, the overpressure and the
resolutions found, and says when the advice is unavailable and why.
"""

from __future__ import annotations

from typing import Protocol

__all__ = ["CueFacts", "crew_cue"]


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
    def focus(self) -> bool: ...
    @property
    def cutoff_mach(self) -> float | None: ...
    @property
    def max_mach_off_ground(self) -> float | None: ...
    @property
    def turn_left_deg(self) -> float | None: ...
    @property
    def turn_right_deg(self) -> float | None: ...
    @property
    def tables_stale(self) -> bool: ...


def crew_cue(a: CueFacts) -> str:
    """The short crew line for an advisory (wording of our own)."""
    if a.status == "unavailable":
        return f"BOOM ADVISORY UNAVAILABLE: {a.reason or 'no valid air data'}"
    if a.status == "no_boom":
        cut = f" (cutoff M{a.cutoff_mach:.2f})" if a.cutoff_mach and a.cutoff_mach < 5 else ""
        return f"Boom not reaching the ground{cut}"
    if a.status == "clear":
        return "Boom on the ground, clear of protected zones"
    fixes: list[str] = []
    if a.max_mach_off_ground is not None:
        fixes.append(f"M{a.max_mach_off_ground:.2f} or less")
    if a.turn_left_deg is not None:
        fixes.append(f"left {a.turn_left_deg:.0f}")
    if a.turn_right_deg is not None:
        fixes.append(f"right {a.turn_right_deg:.0f}")
    fix = (" - " + " / ".join(fixes)) if fixes else ""
    where = a.zone_name or a.zone_id or "zone"
    ttc = a.time_to_contact_s or 0.0
    psf = a.overpressure_psf or 0.0
    focus = " FOCUS" if a.focus else ""
    stale = " [tables stale]" if a.tables_stale else ""
    head = {"advisory": "Boom advisory", "caution": "BOOM CAUTION", "warning": "BOOM WARNING",
            "unavoidable": "BOOM UNAVOIDABLE"}
    return f"{head[a.status]}: {where} in {ttc:.0f} s, {psf:.1f} psf{focus}{fix}{stale}"
