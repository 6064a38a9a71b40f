"""The advisor of one ground level: from one air-data state to an advisory with levels
and resolutions, for the zones its table's ground judges.

:class:`advisory.pipeline.advisor.Advisor` is the one to use: it is a
:class:`GroundAdvisor` for the zones on its table's ground and holds one more for each
higher ground level of the zone file (:mod:`.ground_levels`).

One :meth:`GroundAdvisor.step` predicts the trajectory ahead (:mod:`.trajectory`), takes
the booms still in the air from the states flown (:mod:`.in_air` and :mod:`.history`:
the advisor keeps every state it steps on, one per emission spacing, so a replay and the
live loop feed it the same way), lays the boom carpet on the ground from the tables
(:mod:`.footprint`), and finds the zones it reaches (:mod:`.conflicts`), split into the
booms emitted before the crew can act (within ``reaction_s``: nothing changes them) and
the later ones. For the later ones it flies the resolutions as trials
(:mod:`.resolutions`, :mod:`.trial`): the largest Mach reached by decelerating that
clears, the smallest left and right turns (with roll-in) that clear, both together when
neither alone does, and the act-by time, the latest moment the offered action can start
and still clear; the level is set on the act-by time with hysteresis (:mod:`.levels`).
The air data's pressure altitude becomes the geometric height in the table's atmosphere
first (:mod:`advisory.physics.pressure_altitude`). The advisory and its crew line are in
:mod:`.results` and :mod:`.cues`. A step may instead reuse the last prediction, its times
counted down, while the flight goes as it said (:mod:`.reuse`); the resolution search is
kept and renewed across steps (:mod:`.renewal`).

Statuses (:data:`advisory.schema.ADV_STATUSES`): ``no_boom`` (the boom does not reach
the ground over the look-ahead), ``clear`` (carpet on the ground, no conflict),
``advisory`` (an avoidable conflict within the look-ahead), ``caution`` and ``warning``
(the act-by time within the caution and warning leads, or nothing clears),
``unavoidable`` (a boom emitted before the crew can act reaches a zone: the zone, its
arrival time and overpressure are named, and the resolution fields still carry the
action for any avoidable conflict) and ``unavailable`` (no valid, fresh air data, or no
table): never a clear status on an invalid or stale state, nor while a boom is on its
way into a zone.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import dataclasses
import math
import time
from collections.abc import Callable
from typing import Protocol

import numpy as np

from advisory.physics.atmosphere import Atmosphere
from advisory.physics.pressure_altitude import HeightConverter
from advisory.pipeline.airdata import AirDataState, state_problem
from advisory.pipeline.confidence import boom_probability, lookup_band, z_one_sided
from advisory.pipeline.config import AdvisorConfig
from advisory.pipeline.conflicts import soonest_per_zone, split_conflicts
from advisory.pipeline.cues import LEVEL_CUE_DEG
from advisory.pipeline.edge_spread import PresentSpread, conflict_probabilities
from advisory.pipeline.footprint import CarpetPrediction, FootprintPredictor, strip_indices
from advisory.pipeline.ground_levels import masked_zones
from advisory.pipeline.history import FlownHistory, FlownPast
from advisory.pipeline.in_air import InAir, state_time
from advisory.pipeline.levels import AlertLevels, level_status
from advisory.pipeline.pitch import fpa_profile
from advisory.pipeline.profile import StreamProfile
from advisory.pipeline.renewal import Renewal
from advisory.pipeline.resolutions import (
    OtherGround,
    Resolution,
    TrialBase,
    max_mach_off_ground,
    roll_out,
)
from advisory.pipeline.results import Advisory, Conflict
from advisory.pipeline.reuse import Prediction, counted_down, departure
from advisory.pipeline.table_range import mach_outside_table, outside_table
from advisory.pipeline.trajectory import (
    SpeedOfSound,
    Trajectory,
    heading_at_deg,
    predict_trajectory,
)
from advisory.pipeline.zone_projection import ZoneFrames
from advisory.pipeline.zones import ProjectedZones, ZoneSet
from advisory.tables import lookup as lk
from advisory.tables.table import BoomTable

__all__ = ["GroundAdvisor", "OtherGround", "TableSource"]


class TableSource(Protocol):
    """What the advisor needs of a table manager: the live table. It may also have
    ``stale`` (a newer atmosphere is being built), ``poll()`` (swap a rebuilt table in)
    and ``submit_atmosphere(atm)`` (ask for a rebuild); each is used when present."""

    @property
    def table(self) -> BoomTable: ...


def _speed_of_sound_fn(atm: Atmosphere) -> Callable[[np.ndarray], np.ndarray]:
    """Speed of sound (m/s) at altitudes (m), interpolated in the table's atmosphere."""
    z, c = atm.z_m, atm.sound_speed_mps

    def a(alt: np.ndarray) -> np.ndarray:
        return np.interp(alt, z, c)

    return a


class GroundAdvisor:
    """Steps from air-data states to advisories (the zones of one ground level).

    Parameters
    ----------
    tables : BoomTable or TableSource
        The boom table, or a manager that swaps rebuilt tables in (anything with a
        ``table`` attribute, optional ``stale``, ``poll()`` and ``submit_atmosphere``).
    zones : ZoneSet
        The no-boom zones.
    config : AdvisorConfig, optional
        Thresholds (defaults documented in :mod:`advisory.pipeline.config`).
    mask : ndarray of bool, optional
        The zones of ``zones`` this ground judges (default all); the others are kept in
        the projection but never touched (:func:`.ground_levels.masked_zones`).
    zone_source : callable, optional
        ``(lat_rad, lon_rad) -> ProjectedZones`` of the whole set, when another advisor
        projects the zones (one frame for every ground level); default its own.
    """

    def __init__(self, tables: BoomTable | TableSource, zones: ZoneSet,
                 config: AdvisorConfig | None = None, mask: np.ndarray | None = None,
                 zone_source: Callable[[float, float], ProjectedZones] | None = None
                 ) -> None:
        self.config = config or AdvisorConfig()
        self.config.validate()
        self._tables = tables
        self.zones = zones
        self._mask = mask
        self._zone_source = zone_source
        self._view: tuple[ProjectedZones, ProjectedZones] | None = None  # (whole, masked)
        #: The other ground levels whose zones the resolution trials also judge, in the
        #: projection of every zone given.
        self.other_grounds: Callable[[ProjectedZones], list[OtherGround]] = _no_grounds
        self._whole: ProjectedZones | None = None  # the last projection of every zone
        self._frames = ZoneFrames(zones, self.config.reproject_km)
        self._levels = AlertLevels(self.config)
        self.last_prediction: CarpetPrediction | None = None
        self.last_trajectory: Trajectory | None = None
        self._ahead: Trajectory | None = None  # the last trajectory ahead (no past)
        self.steps = 0
        #: Steps that reused the last prediction (:mod:`.reuse`).
        self.reused_steps = 0
        #: The last prediction, for the steps that reuse it; and what the step predicting
        #: it leaves for it (state time, projection, the act-by the level was set on).
        self._last: Prediction | None = None
        self._basis: tuple[float, ProjectedZones, float | None] | None = None
        #: The resolution search, kept and renewed across steps (:mod:`.renewal`).
        self._renewal = Renewal(self.config)
        #: A boom found on its way into a zone: (conflict, monotonic arrival, found at).
        self._on_way: tuple[Conflict, float, float] | None = None
        #: The zone named while a level is held with no present conflict.
        self._held_zone: str | None = None
        self._held_name: str | None = None
        #: Profile assembled from the stream; proposed to a table manager for rebuilds.
        self.stream_profile = StreamProfile()
        # the live table and what is derived from it (renewed when a rebuilt one comes in)
        (self._table, self._predictor, self._atm, self._sound,
         self._strips) = self._table_parts(self._current_table())
        #: The flown history and the booms still in the air (:mod:`.in_air`).
        self._in_air = InAir(self._table, self.config)

    # ---- tables --------------------------------------------------------------------
    def _current_table(self) -> BoomTable:
        t = self._tables
        return t if isinstance(t, BoomTable) else t.table

    def _table_parts(self, table: BoomTable) -> tuple[
            BoomTable, FootprintPredictor, Atmosphere, Callable[[np.ndarray], np.ndarray],
            np.ndarray]:
        """The table with its footprint predictor, atmosphere, speed of sound and strips."""
        atm = table.atmosphere()
        #: The cutoff's spread and the edge ratio at the present condition (issue 16).
        self._present = PresentSpread(table, self.config)
        #: pressure altitude -> geometric height through the table's profile
        self._heights = HeightConverter(atm)
        return (table, FootprintPredictor(table), atm, _speed_of_sound_fn(atm),
                strip_indices(table.eta.size, self.config.strips))

    @property
    def table(self) -> BoomTable:
        """The live table (the table manager's present one)."""
        return self._current_table()

    @property
    def present_condition(self) -> tuple[float, float, float, float] | None:
        """(geometric height m, Mach, true heading rad, flight-path angle rad) of the last
        state predicted from (a reused step's state lies within :mod:`.reuse`'s tolerances
        of it); None before one."""
        a = self._ahead
        if a is None:
            return None
        return (float(a.alt_m[0]), float(a.mach[0]), float(a.heading_rad[0]),
                float(a.fpa_rad[0]))

    @property
    def resolution_searches(self) -> int:
        """Resolution searches started (for the benchmark)."""
        return self._renewal.searches

    @property
    def tables_stale(self) -> bool:
        """True while the table manager has a newer atmosphere being built."""
        return bool(getattr(self._tables, "stale", False))

    # ---- zones ---------------------------------------------------------------------
    def _zones_for(self, lat: float, lon: float) -> ProjectedZones:
        """The zones this ground judges, projected (:meth:`projection`, masked)."""
        self._whole = (self._zone_source or self.projection)(lat, lon)
        return self._judged(self._whole)

    def _judged(self, whole: ProjectedZones) -> ProjectedZones:
        if self._mask is None:
            return whole
        if self._view is None or self._view[0] is not whole:
            self._view = (whole, masked_zones(whole, self._mask))
        return self._view[1]

    def ground_view(self, whole: ProjectedZones) -> OtherGround:
        """This ground as another level's resolution trials judge it, in the projection
        ``whole`` of every zone."""
        return OtherGround(self._predictor, self._strips, self._judged(whole))

    def projection(self, lat: float, lon: float) -> ProjectedZones:
        """Every zone projected about a nearby origin (:class:`.zone_projection.ZoneFrames`)."""
        return self._frames.about(lat, lon)

    @property
    def _projected(self) -> ProjectedZones | None:
        return self._frames.projected

    @property
    def _frame_origin(self) -> tuple[float, float] | None:
        return self._frames.origin

    # ---- the step ------------------------------------------------------------------
    def unavailable(self, reason: str, utc_s: float | None = None) -> Advisory:
        """The advisory for a step without usable input (the level memory is kept)."""
        return Advisory("unavailable", reason=reason, tables_stale=self.tables_stale,
                        utc_s=utc_s)

    def step(self, state: AirDataState | None, now_monotonic: float | None = None) -> Advisory:
        """One advisory for one air-data state; never raises on bad input.

        Parameters
        ----------
        state : AirDataState or None
            The latest validated state (None: no valid air data).
        now_monotonic : float, optional
            The loop's monotonic clock (default ``time.monotonic()``); a state received
            more than ``stale_after_s`` earlier is stale.
        """
        now = time.monotonic() if now_monotonic is None else now_monotonic
        self.steps += 1
        poll = getattr(self._tables, "poll", None)
        if poll is not None:
            poll()
        table = self._current_table()
        if table is not self._table:
            (self._table, self._predictor, self._atm, self._sound,
             self._strips) = self._table_parts(table)
            self._in_air.new_table(table)
        if state is None:
            return self.unavailable("no valid air data")
        problem = state_problem(state)
        if problem:
            return self.unavailable(problem, state.utc_s)
        if state.rx_monotonic is not None and now - state.rx_monotonic > self.config.stale_after_s:
            return self.unavailable(
                f"air data stale ({now - state.rx_monotonic:.1f} s old)", state.utc_s)
        # From here on the state's altitude is the geometric height of its pressure
        # altitude in the table's atmosphere (the hypsometric equation): the tables, the
        # trajectory and the history are in geometric height (the selected altitude too).
        sel = state.selected_alt_m
        state = dataclasses.replace(
            state, alt_m=self._heights.height(state.alt_m),
            selected_alt_m=None if sel is None else self._heights.height(sel))
        self._learn_atmosphere(state, now)
        if state.mach <= 0.0:
            # Standing still (on the ground, or a source reporting 0): no shock at all, and
            # the trajectory ahead is undefined (it needs Mach > 0). A boom needs Mach > 1.
            return Advisory("no_boom", tables_stale=self.tables_stale, utc_s=state.utc_s)
        outside = outside_table(table, state.alt_m, state.fpa_rad) if state.mach > 1.0 else None
        if outside:
            return self.unavailable(outside, state.utc_s)  # never clamped silently
        try:
            held = self._reused(state, now)
            if held is not None:
                return held
            self._last = self._basis = None
            adv = self._step(state, now)
            if self._basis is not None and self._ahead is not None \
                    and adv.status != "unavailable":
                self._last = Prediction(self._basis[0], now, state, self._ahead,
                                        self._basis[1], self._table, adv, *self._basis[2:])
            return adv
        except Exception as exc:  # noqa: BLE001 - the loop must never die on one state
            first_line = (str(exc).strip().splitlines() or [""])[0][:80]
            return self.unavailable(f"prediction failed: {type(exc).__name__}: {first_line}",
                                    state.utc_s)

    def _reused(self, s: AirDataState, now: float) -> Advisory | None:
        """The last prediction's advisory counted down to state ``s``, when the step may
        reuse it (:mod:`.reuse`); None when it predicts again."""
        p = self._last
        every = self.config.predict_every_s
        t_state = state_time(s, now)
        dt = math.nan if p is None else t_state - p.t_state
        if p is None or every <= 0.0 or not dt >= 0.0 or self._table is not p.table \
                or self._zones_for(s.lat_rad, s.lon_rad) is not p.zones or departure(p, s, dt):
            self._renewal.departed()  # the next renewal of the resolutions searches in full
            return None
        if not (dt < every and 0.0 <= now - p.now < every) \
                or self._in_air.history.due(t_state, s.fpa_rad):
            return None
        if self._on_way is not None:
            _c, arrival, found = self._on_way
            if now >= max(arrival, found + self.config.warning_hold_s):
                return None  # the boom on its way is no longer held
        act = None if p.level_act_by is None else max(0.0, p.level_act_by - dt)
        lv = self._levels
        if lv.lower_since is not None or lv.raw(act, lv.level) != lv.level:
            return None
        adv = counted_down(p.advisory, dt, s.utc_s, self.tables_stale)
        if adv is None or self._renewal.advance():
            return None  # a time ran out, or a renewed resolution is to be offered
        self.reused_steps += 1
        return adv

    # ---- the booms already in the air ----------------------------------------------
    @property
    def history(self) -> FlownHistory:
        """The states flown, from which the booms still in the air are placed."""
        return self._in_air.history

    def _learn_atmosphere(self, s: AirDataState, now: float) -> None:
        """Feed the stream profile; hand a disagreeing profile to the table manager."""
        submit = getattr(self._tables, "submit_atmosphere", None)
        if submit is None:
            return
        self.stream_profile.add(s.alt_m, s.sat_k, s.wind_east_mps, s.wind_north_mps)
        atm = self.stream_profile.proposal(self._atm, now)
        if atm is not None:
            submit(atm)

    def _trajectory(self, s: AirDataState, pz: ProjectedZones) -> Trajectory:
        """The trajectory ahead from state ``s``, in the zones' frame."""
        # Level flight keeps the altitude, hence the sound speed: pass the value.
        level = s.fpa_rad == 0.0 and s.pitch_rate_rad_s is None and s.load_factor is None
        sound: SpeedOfSound = (
            float(np.interp(s.alt_m, self._atm.z_m, self._atm.sound_speed_mps))
            if level else self._sound)
        return predict_trajectory(
            s.lat_rad, s.lon_rad, s.alt_m, s.mach, s.heading_rad, s.gs_mps,
            speed_of_sound=sound, track_rad=s.track_rad, bank_rad=s.bank_rad,
            fpa_rad=s.fpa_rad, mach_rate_per_s=s.mach_rate_per_s or 0.0,
            wind_east_mps=s.wind_east_mps, wind_north_mps=s.wind_north_mps,
            lookahead_s=self.config.look_ahead_s, step_s=self.config.step_s, frame=pz.frame,
            pitch_rate_rad_s=s.pitch_rate_rad_s, load_factor=s.load_factor,
            target_alt_m=s.selected_alt_m, target_heading_rad=s.selected_heading_rad,
            target_mach=s.selected_mach,
            capture_rate_rad_s=math.radians(self.config.capture_pitch_rate_deg_s),
        )

    def _step(self, s: AirDataState, now: float) -> Advisory:
        cfg = self.config
        pz = self._zones_for(s.lat_rad, s.lon_rad)
        ahead = self._trajectory(s, pz)
        t_state = state_time(s, now)
        # the cutoff's spread and the edge at the confidence (issue 16); the state's true
        # heading, so that a still-air step does not locate the trajectory on the ellipsoid
        sigma, edge = self._present.at(float(ahead.alt_m[0]), float(ahead.fpa_rad[0]),
                                       float(s.heading_rad))
        lookups = (self._predictor, self._in_air.fallback_lookup)
        for lookup in lookups:
            lookup.band = lookup_band(sigma, self.config.confidence)
            lookup.stretch = None if edge is None else edge.stretch
            lookup.edge_inner = (int(self._strips[1]), int(self._strips[-2]))
        rows, codes, cuts = self._predictor.lookup(ahead)  # its buffers: copied below
        self._in_air.remember(s, t_state, ahead, rows[0], int(codes[0]), float(cuts[0]))
        beyond = mach_outside_table(self._table, s.mach, float(cuts[0]))
        if beyond:
            return self.unavailable(beyond, s.utc_s)
        whole, now_k = self._in_air.past(FlownPast(ahead, rows, codes, cuts), t_state)
        if now_k == 0:  # no past: the prediction keeps the lookups (own copies)
            whole = FlownPast(ahead, rows.copy(), codes.copy(), cuts.copy())
        traj = whole.traj
        pred = self._predictor.predict(traj, whole.rows, whole.codes, whole.cutoffs,
                                       join=now_k)
        self.last_prediction, self.last_trajectory, self._ahead = pred, traj, ahead
        fixed, later = (
            conflict_probabilities(part, pred.east_m, pred.north_m, whole.rows,
                                   pred.cutoff_mach, traj.mach, sigma, edge, pz, self._strips)
            for part in split_conflicts(pred, pz, self.zones, self._strips,
                                        cfg.focus_threshold, cfg.reaction_s))
        conflicts = soonest_per_zone(fixed, later)
        first = later[0] if later else None
        fixed = self._hold_on_way(fixed, now)
        cut_now = float(pred.cutoff_mach[now_k])  # its table lookup, already done
        res, act_by = self._renewal.update(lambda: self._trial_base(pz, ahead, sigma),
                                           cut_now, first, now)
        # an avoidable contact with nothing that clears is a warning (act-by 0)
        level_act_by = None if first is None else (0.0 if act_by is None else act_by)
        level = self._levels.update(level_act_by, now)
        self._basis = (t_state, pz, level_act_by)
        max_mach = max_mach_off_ground(cut_now, self._margin(sigma))
        p_reach = None if sigma is None else boom_probability(s.mach, cut_now, sigma)
        if sigma is not None and (named_zone := (fixed[0] if fixed else first)):
            p_reach = named_zone.probability
        reaches_now = bool(pred.on_ground[now_k])
        # ray theory unsure, or (below) the air below: say so
        near = -self._predictor.band < s.mach - cut_now < lk.NEAR_CUTOFF_BAND
        if fixed:
            status = "unavoidable"  # never clear while a boom is on its way into a zone
        elif level == 0:
            status = "clear" if pred.on_ground.any() else "no_boom"
        else:
            status = level_status(level)
        if level > 0 and first is None and not fixed:
            # held level (hysteresis) with no present conflict: keep the cue informative
            return Advisory(status, max_mach_off_ground=max_mach, reaches_ground=reaches_now,
                            cutoff_mach=cut_now, tables_stale=self.tables_stale,
                            utc_s=s.utc_s, zone_id=self._held_zone,
                            zone_name=self._held_name, near_cutoff=near,
                            cutoff_sigma=sigma, boom_probability=p_reach)
        named = fixed[0] if fixed else first
        held = first or named  # a held level names the zone last in conflict
        self._held_zone = held.zone_id if held else None
        self._held_name = held.zone_name if held else None
        r = roll_out(res or Resolution(), s)
        turning = r.turn_left_deg is not None or r.turn_right_deg is not None
        # true headings cost ~0.1 ms: only for a turn
        hdg = heading_at_deg(ahead, cfg.reaction_s) if turning else 0.0
        # the trials level the path from the action's start: say so while climbing there
        # (the angle the trials start from: the predicted profile at the reaction time)
        rate, start, end = ahead.pitch
        fpa_on = fpa_profile(np.array([cfg.reaction_s]), float(ahead.fpa_rad[0]), rate, end,
                             start)[0]
        level_off = ((turning or r.resolve_mach is not None)
                     and abs(math.degrees(float(fpa_on))) > LEVEL_CUE_DEG)
        return Advisory(
            status=status,
            zone_id=named.zone_id if named else None,
            zone_name=named.zone_name if named else None,
            time_to_contact_s=named.time_to_contact_s if named else None,
            overpressure_pa=named.overpressure_pa if named else None,
            focus=bool(named.focus) if named else False,
            max_mach_off_ground=max_mach,
            turn_left_deg=r.turn_left_deg, turn_right_deg=r.turn_right_deg,
            reaches_ground=reaches_now, cutoff_mach=cut_now,
            tables_stale=self.tables_stale, conflicts=tuple(conflicts), utc_s=s.utc_s,
            act_by_s=act_by, resolve_mach=r.resolve_mach, combined=r.combined,
            turn_left_hdg_deg=None if r.turn_left_deg is None
            else (hdg - r.turn_left_deg) % 360.0,
            turn_right_hdg_deg=None if r.turn_right_deg is None
            else (hdg + r.turn_right_deg) % 360.0, near_cutoff=near,
            cutoff_sigma=sigma, boom_probability=p_reach,
            at_limit=r.at_limit and r.kind is not None, level_off=level_off,
        )

    def _margin(self, sigma: float | None) -> float:
        """Mach margin under the cutoff: ``z sigma`` at the configured confidence, else the
        configured fixed one."""
        if sigma is None:
            return self.config.cutoff_margin_mach
        return z_one_sided(self.config.confidence) * sigma

    def _hold_on_way(self, fixed: list[Conflict], now: float) -> list[Conflict]:
        """The booms on their way into a zone, held: a boom found in the air toward a zone
        stays "unavoidable" until its predicted arrival, and at least ``warning_hold_s``
        after it was last found. A boom near a zone's edge or limit is found in one step
        and not the next; the status flickered clear / unavoidable at the step rate while
        the truth had booms over the limit on their way (campaign --known, seed 1,
        encounter 34, a pull-up)."""
        if fixed:
            c = fixed[0]
            self._on_way = (c, now + c.time_to_contact_s, now)
            return fixed
        if self._on_way is None:
            return fixed
        c, arrival, found = self._on_way
        if now < max(arrival, found + self.config.warning_hold_s):
            return [dataclasses.replace(c, time_to_contact_s=max(0.0, arrival - now))]
        self._on_way = None
        return fixed

    def _trial_base(self, pz: ProjectedZones, ahead: Trajectory,
                    sigma: float | None = None) -> TrialBase:
        """The trials' common part: this ground, and every other ground level's zones in
        the same projection (an offered action keeps the booms off all of them)."""
        others = self.other_grounds(self._whole) if self._whole is not None else []
        return TrialBase(self.config, self._predictor, self._strips, pz, ahead, others,
                         margin_mach=self._margin(sigma))


def _no_grounds(_whole: ProjectedZones) -> list[OtherGround]:
    return []
