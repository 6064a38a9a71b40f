"""The advisor: from one air-data state to an advisory with levels and resolutions, for
zones on every ground the zone file names.

:class:`Advisor` is a :class:`~advisory.pipeline.ground_advisor.GroundAdvisor` for the
zones on its table's ground (and those of unknown elevation), and holds one more for each
higher ground level (:mod:`.ground_levels`), each with the table traced to that ground
(:mod:`advisory.tables.levels`). Every level steps the same state in the same projection
of the zones; each level's resolution trials also judge the zones of every other level,
so an offered action keeps the booms off all of them. The advisories are merged
(:func:`merge_advisories`): the most severe status and its zone, the lowest cutoff Mach
(higher ground is reached at a lower Mach), every conflict.

With every zone on the table's ground it is the one-level advisor and nothing more.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable

from advisory import units
from advisory.pipeline.airdata import AirDataState
from advisory.pipeline.config import AdvisorConfig
from advisory.pipeline.ground_advisor import GroundAdvisor, OtherGround, TableSource
from advisory.pipeline.ground_levels import zone_levels
from advisory.pipeline.profile import StreamProfile
from advisory.pipeline.results import Advisory
from advisory.pipeline.zones import ProjectedZones, ZoneSet
from advisory.schema import STATUS_RANK
from advisory.tables.levels import level_table
from advisory.tables.table import BoomTable

__all__ = ["Advisor", "TableSource", "merge_advisories"]

#: ``(table, ground_m) -> table or source`` for a higher ground level.
LevelTables = Callable[[BoomTable, float], "BoomTable | TableSource"]


class Advisor(GroundAdvisor):
    """Steps from air-data states to advisories, every zone judged on its own ground.

    Parameters
    ----------
    tables : BoomTable or TableSource
        The boom table, or a manager that swaps rebuilt tables in (anything with a
        ``table`` attribute, optional ``stale``, ``poll()`` and ``submit_atmosphere``).
    zones : ZoneSet
        The no-boom zones (each at its ``ground_elevation_ft``).
    config : AdvisorConfig, optional
        Thresholds (defaults documented in :mod:`advisory.pipeline.config`).
    level_tables : callable, optional
        ``(table, ground_m) -> BoomTable or TableSource`` for each higher ground level;
        default :func:`advisory.tables.levels.level_table` (built once, then cached).
    """

    def __init__(self, tables: BoomTable | TableSource, zones: ZoneSet,
                 config: AdvisorConfig | None = None,
                 level_tables: LevelTables | None = None) -> None:
        table = tables if isinstance(tables, BoomTable) else tables.table
        levels = zone_levels(zones, table.grid.ground_elevation_m)
        base_mask = levels.pop(table.grid.ground_elevation_m)
        self.levels: list[GroundAdvisor] = []
        super().__init__(tables, zones, config, mask=base_mask if levels else None)
        make = level_tables or level_table
        for ground_m, mask in levels.items():
            lv = GroundAdvisor(make(table, ground_m), zones, self.config, mask=mask,
                               zone_source=self._shared_projection)
            lv.stream_profile = StreamProfile(enabled=False)  # the levels follow the base
            self.levels.append(lv)
        grounds: list[GroundAdvisor] = [self, *self.levels]
        for g in grounds:
            g.other_grounds = _others_of(g, grounds)
        self._level_base = table  # the base table the level tables were made from
        #: The last step's advisory for the base table's own ground alone (before the
        #: levels merge: its cutoff Mach and sigma are of that ground), None before one.
        self.base_advisory: Advisory | None = None

    def _shared_projection(self, lat: float, lon: float) -> ProjectedZones:
        """The base's projection of every zone (made in its step, just before)."""
        whole = self._whole
        return whole if whole is not None else self.projection(lat, lon)

    @property
    def ground_levels_m(self) -> tuple[float, ...]:
        """The ground elevations judged, m: the table's, then each higher level's."""
        return (self.table.grid.ground_elevation_m,
                *(lv.table.grid.ground_elevation_m for lv in self.levels))

    @property
    def tables_stale(self) -> bool:
        """True while a table manager (of any level) has a newer atmosphere being built."""
        return super().tables_stale or any(lv.tables_stale for lv in self.levels)

    def step(self, state: AirDataState | None, now_monotonic: float | None = None) -> Advisory:
        """One advisory for one air-data state (every ground level); never raises on bad
        input. See :meth:`GroundAdvisor.step`."""
        base = super().step(state, now_monotonic)
        self.base_advisory = base  # the table's own ground (calibration, issue 16)
        if not self.levels:
            return base
        self._follow_base_atmosphere()
        advs = [base]
        for lv in self.levels:
            a = lv.step(state, now_monotonic)
            if a.status == "unavailable" and base.status != "unavailable":
                # say which zones cannot be judged (the aircraft lower than the level's
                # table reaches, a failed prediction): never clear over them
                ground = units.m_to_ft(lv.table.grid.ground_elevation_m)
                a = dataclasses.replace(a, reason=f"zones on {ground:,.0f}-ft ground: "
                                                  f"{a.reason}"[:127])
            advs.append(a)
        return merge_advisories(advs)

    def _follow_base_atmosphere(self) -> None:
        """A rebuilt table came into the base level: the levels' managers rebuild theirs
        for the same air (a level on a plain table keeps it)."""
        table = self.table
        if table is self._level_base:
            return
        self._level_base = table
        atm = table.atmosphere()
        for lv in self.levels:
            submit = getattr(lv._tables, "submit_atmosphere", None)
            if submit is not None:
                submit(atm)

    @property
    def level_table_notes(self) -> str:
        """What the verification of the levels' rebuilt tables found short of the budgets,
        each with its ground ('' when every level's table holds them or none was rebuilt;
        :func:`advisory.tables.manager.verify_note`)."""
        notes = []
        for lv in self.levels:
            note = getattr(lv._tables, "verify_note", "") or ""
            if note:
                ground = units.m_to_ft(lv.table.grid.ground_elevation_m)
                notes.append(f"zones on {ground:,.0f}-ft ground: {note}")
        return "; ".join(notes)

    def close(self) -> None:
        """Stop the levels' table managers (rebuild processes, temporary files)."""
        for lv in self.levels:
            close = getattr(lv._tables, "close", None)
            if close is not None:
                close()


def _others_of(me: GroundAdvisor, grounds: list[GroundAdvisor]
               ) -> Callable[[ProjectedZones], list[OtherGround]]:
    def others(whole: ProjectedZones) -> list[OtherGround]:
        return [g.ground_view(whole) for g in grounds if g is not me]
    return others


def merge_advisories(advs: list[Advisory]) -> Advisory:
    """One advisory from those of every ground level (the base level's first).

    ``unavailable`` from any level wins (its reason; a level outside its table is no
    less unavailable). Otherwise the most severe status
    (:data:`advisory.schema.STATUS_RANK`) names the zone, with its resolution (flown
    against every level's zones); on a tie the sooner contact, then the sooner act-by
    time. Across levels: the lowest cutoff Mach and the lowest Mach that keeps the boom
    off the ground (higher ground is reached at a lower Mach); the boom on the ground,
    near cutoff and stale tables when any level has them; every conflict, in order of
    contact time; ``clear`` rather than ``no_boom`` when any level's carpet reaches its
    ground.
    """
    for a in advs:
        if a.status == "unavailable":
            return a
    best = max(advs, key=_priority)
    cutoffs = [a.cutoff_mach for a in advs if a.cutoff_mach is not None]
    off = [a.max_mach_off_ground for a in advs if a.max_mach_off_ground is not None]
    status = best.status
    if status == "no_boom" and any(a.status == "clear" for a in advs):
        status = "clear"
    conflicts = sorted((c for a in advs for c in a.conflicts),
                       key=lambda c: c.time_to_contact_s)
    return dataclasses.replace(
        best, status=status, cutoff_mach=min(cutoffs) if cutoffs else best.cutoff_mach,
        max_mach_off_ground=min(off) if off else best.max_mach_off_ground,
        reaches_ground=any(a.reaches_ground for a in advs),
        near_cutoff=any(a.near_cutoff for a in advs),
        tables_stale=any(a.tables_stale for a in advs), conflicts=tuple(conflicts))


def _priority(a: Advisory) -> tuple[int, float, float]:
    """Severity, then the sooner contact (the zone the crew meets first), then the sooner
    act-by time (every level's trials judge every zone, so their act-by times agree but
    for the search's tolerance)."""
    rank = STATUS_RANK.get(a.status, 0)
    act = a.act_by_s if a.act_by_s is not None else math.inf
    contact = a.time_to_contact_s if a.time_to_contact_s is not None else math.inf
    return (rank, -contact, -act)
