"""The advisor: from one air-data state to an advisory with levels and resolutions.

One :meth:`Advisor.step` predicts the trajectory ahead, lays the boom carpet on the
ground from the tables, finds the first no-boom zone it reaches (within the zone's
margin, above the zone's overpressure limit), sets the alert level from the time to
contact with hysteresis, and searches resolutions: the highest Mach at the present
altitude whose boom stays off the ground, and the smallest left and right heading
changes that clear every zone over the look-ahead.

Statuses: ``no_boom`` (the boom does not reach the ground over the look-ahead),
``clear`` (carpet on the ground, no conflict), ``advisory`` (a conflict within the
look-ahead), ``caution`` and ``warning`` (contact sooner than the caution and warning
lead times) and ``unavailable`` (no valid, fresh air data, or no table): never a clear
status on an invalid or stale state.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field, replace

import numpy as np

from advisory import SAFETY_CAUTION, units
from advisory.geo import contact
from advisory.geo import polygons as gk
from advisory.geo.frame import LocalFrame
from advisory.jit import njit
from advisory.physics.atmosphere import Atmosphere
from advisory.pipeline.config import AdvisorConfig
from advisory.pipeline.footprint import (
    CarpetPrediction,
    FootprintPredictor,
    focus_kernel,
    place_kernel,
    strip_indices,
)
from advisory.pipeline.state import AirDataState
from advisory.pipeline.trajectory import Trajectory, predict_trajectory, propagate_kernel
from advisory.pipeline.zones import ProjectedZones, ZoneSet
from advisory.tables import lookup as lk
from advisory.tables.table import BoomTable

STATUSES = ("no_boom", "clear", "advisory", "caution", "warning", "unavailable")
_RANK = {"no_boom": 0, "clear": 0, "advisory": 1, "caution": 2, "warning": 3}
_EXCLUDE = -1.0e12  # margin that takes a zone out of a contact search
_MEAN_EARTH_RADIUS_M = 6371008.8  # IUGG mean radius R1 of WGS 84 (NIMA TR8350.2)


@dataclass(frozen=True)
class Conflict:
    """A zone the carpet reaches within the look-ahead (SI)."""

    zone_index: int
    zone_id: str
    zone_name: str
    time_to_contact_s: float
    overpressure_pa: float
    focus: bool


@dataclass(frozen=True)
class Advisory:
    """What the advisor says for one step.

    Attributes
    ----------
    status : str
        One of :data:`STATUSES`.
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
            "zone_id": _clip_utf8(self.zone_id, 63),
            "time_to_contact_s": r(self.time_to_contact_s, 1),
            "overpressure_psf": r(self.overpressure_psf, 3),
            "focus": bool(self.focus),
            "max_mach_off_ground": r(self.max_mach_off_ground, 2),
            "turn_left_deg": r(self.turn_left_deg, 0),
            "turn_right_deg": r(self.turn_right_deg, 0),
            "tables_stale": bool(self.tables_stale),
            "cue": _clip_utf8(self.cue, 127),
        }

    def to_record(self) -> dict:
        """The fuller record for logs and ``check --json``."""
        d = self.to_fields()
        d.update({
            "zone_name": self.zone_name,
            "reaches_ground": self.reaches_ground,
            "cutoff_mach": None if self.cutoff_mach is None else round(self.cutoff_mach, 4),
            "reason": self.reason,
            "utc_s": self.utc_s,
            "conflicts": [
                {"zone_id": c.zone_id, "zone_name": c.zone_name,
                 "time_to_contact_s": round(c.time_to_contact_s, 1),
                 "overpressure_psf": round(units.pa_to_psf(c.overpressure_pa), 3),
                 "focus": c.focus}
                for c in self.conflicts
            ],
            "caution": SAFETY_CAUTION,
        })
        return d


def _clip_utf8(text: str | None, limit: int) -> str | None:
    """``text`` cut to at most ``limit`` UTF-8 bytes (the wire format's string limits)."""
    if text is None:
        return None
    raw = text.encode("utf-8")
    return text if len(raw) <= limit else raw[:limit].decode("utf-8", "ignore")


def crew_cue(a: Advisory) -> str:
    """The short crew line for an advisory (wording of our own)."""
    if a.status == "unavailable":
        return f"BOOM ADVISORY UNAVAILABLE: {a.reason or 'no valid air data'}"
    if a.status == "no_boom":
        cut = f" (cutoff M{a.cutoff_mach:.2f})" if a.cutoff_mach and a.cutoff_mach < 5 else ""
        return f"Boom not reaching the ground{cut}"
    if a.status == "clear":
        return "Boom on the ground, clear of protected zones"
    fixes = []
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
    head = {"advisory": "Boom advisory", "caution": "BOOM CAUTION", "warning": "BOOM WARNING"}
    return f"{head[a.status]}: {where} in {ttc:.0f} s, {psf:.1f} psf{focus}{fix}{stale}"


class _Levels:
    """Alert level with hysteresis: up at once, down only after a band and a hold time."""

    def __init__(self, cfg: AdvisorConfig) -> None:
        self.cfg = cfg
        self.level = 0
        self.lower_since: float | None = None
        self.last_ttc: float | None = None

    def raw(self, ttc: float | None, current: int) -> int:
        c = self.cfg
        if ttc is None:
            return 0
        def lead(level: int) -> float:
            base = {3: c.warning_lead_s, 2: c.caution_lead_s}[level]
            return base + (c.band_s if current >= level else 0.0)

        for level in (3, 2):
            if ttc <= lead(level):
                return level
        return 1  # any predicted contact is at least an advisory

    def update(self, ttc: float | None, now: float) -> int:
        target = self.raw(ttc, self.level)
        if target >= self.level:
            self.level = target
            self.lower_since = None
            return self.level
        if self.lower_since is None:
            self.lower_since = now
        hold = self.cfg.warning_hold_s if self.level == 3 else self.cfg.release_s
        if now - self.lower_since >= hold:
            self.level = target
            self.lower_since = None
        return self.level


def _speed_of_sound_fn(atm: Atmosphere):
    z, c = atm.z_m, atm.sound_speed_mps

    def a(alt: np.ndarray) -> np.ndarray:
        return np.interp(alt, z, c)

    return a


class Advisor:
    """Steps from air-data states to advisories.

    Parameters
    ----------
    tables : BoomTable or TableManager
        The boom table, or a manager that swaps rebuilt tables in (anything with a
        ``table`` attribute, optional ``stale`` and ``poll()``).
    zones : ZoneSet
        The no-boom zones.
    config : AdvisorConfig, optional
        Thresholds (defaults documented in :mod:`advisory.pipeline.config`).
    """

    def __init__(self, tables, zones: ZoneSet, config: AdvisorConfig | None = None) -> None:
        self.config = config or AdvisorConfig()
        self.config.validate()
        self._tables = tables
        self.zones = zones
        self._table: BoomTable | None = None
        self._projected: ProjectedZones | None = None
        self._frame_origin: tuple[float, float] | None = None
        self._levels = _Levels(self.config)
        self.last_prediction: CarpetPrediction | None = None
        self.last_trajectory: Trajectory | None = None
        self.steps = 0
        #: Steps on which the turn-resolution search ran (for the benchmark).
        self.resolution_searches = 0
        from advisory.tables.manager import StreamProfile

        #: Profile assembled from the stream; proposed to a table manager for rebuilds.
        self.stream_profile = StreamProfile()
        self._use_table(self._current_table())

    # ---- tables --------------------------------------------------------------------
    def _current_table(self) -> BoomTable:
        return self._tables if isinstance(self._tables, BoomTable) else self._tables.table

    def _use_table(self, table: BoomTable) -> None:
        self._table = table
        self._predictor = FootprintPredictor(table)
        self._atm = table.atmosphere()
        self._sound = _speed_of_sound_fn(self._atm)
        self._strips = strip_indices(table.eta.size, self.config.strips)

    @property
    def tables_stale(self) -> bool:
        """True while the table manager has a newer atmosphere being built."""
        return bool(getattr(self._tables, "stale", False))

    # ---- zones ---------------------------------------------------------------------
    def _zones_for(self, lat: float, lon: float) -> ProjectedZones:
        """Zones projected about a nearby origin; re-projected past ``reproject_km``.

        The distance test is a haversine on the mean Earth radius (good to 0.5 %, plenty
        for a re-projection threshold); geodesics proper are for the projection itself.
        """
        if self._frame_origin is not None:
            lat0, lon0 = self._frame_origin
            h = (math.sin(0.5 * (lat - lat0)) ** 2
                 + math.cos(lat0) * math.cos(lat) * math.sin(0.5 * (lon - lon0)) ** 2)
            d = 2.0 * _MEAN_EARTH_RADIUS_M * math.asin(min(1.0, math.sqrt(h)))
            if d < self.config.reproject_km * 1e3:
                return self._projected
        frame = LocalFrame(lat, lon)
        self._projected = self.zones.project(frame)
        self._frame_origin = (lat, lon)
        return self._projected

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
            self._use_table(table)
        if state is None:
            return self.unavailable("no valid air data")
        problem = _state_problem(state)
        if problem:
            return self.unavailable(problem, state.utc_s)
        if state.rx_monotonic is not None and now - state.rx_monotonic > self.config.stale_after_s:
            return self.unavailable(
                f"air data stale ({now - state.rx_monotonic:.1f} s old)", state.utc_s)
        self._learn_atmosphere(state, now)
        try:
            return self._step(state, now)
        except Exception as exc:  # noqa: BLE001 - the loop must never die on one state
            first_line = (str(exc).strip().splitlines() or [""])[0][:80]
            return self.unavailable(f"prediction failed: {type(exc).__name__}: {first_line}",
                                    state.utc_s)

    def _in_air_s(self, s: AirDataState, cfg: AdvisorConfig) -> float:
        """How far back booms may still be on their way down: the longest travel time of
        the present footprint plus one step (at most ``in_air_s``)."""
        fp = self._table.footprint(s.alt_m, s.mach, s.fpa_rad, s.heading_rad)
        if not fp.reaches_ground:
            return cfg.in_air_s
        longest = float(np.max(fp.rows[:, lk.Q_TIME])) + cfg.step_s
        return min(cfg.in_air_s, longest)

    def _learn_atmosphere(self, s: AirDataState, now: float) -> None:
        """Feed the stream profile; hand a disagreeing profile to the table manager."""
        submit = getattr(self._tables, "submit_atmosphere", None)
        if submit is None:
            return
        self.stream_profile.add(s.alt_m, s.sat_k, s.wind_east_mps, s.wind_north_mps)
        atm = self.stream_profile.proposal(self._atm, now)
        if atm is not None:
            submit(atm)

    def _trajectory(self, s: AirDataState, pz: ProjectedZones, bank: float | None = None,
                    roll_out: float | None = None) -> Trajectory:
        # Level flight keeps the altitude, hence the sound speed: pass the value.
        sound = (float(np.interp(s.alt_m, self._atm.z_m, self._atm.sound_speed_mps))
                 if s.fpa_rad == 0.0 else self._sound)
        return predict_trajectory(
            s.lat_rad, s.lon_rad, s.alt_m, s.mach, s.heading_rad, s.gs_mps,
            speed_of_sound=sound, track_rad=s.track_rad,
            bank_rad=s.bank_rad if bank is None else bank, fpa_rad=s.fpa_rad,
            mach_rate_per_s=s.mach_rate_per_s or 0.0, wind_east_mps=s.wind_east_mps,
            wind_north_mps=s.wind_north_mps, lookahead_s=self.config.look_ahead_s,
            step_s=self.config.step_s, roll_out_heading_rad=roll_out, frame=pz.frame,
        )

    def _step(self, s: AirDataState, now: float) -> Advisory:
        cfg = self.config
        pz = self._zones_for(s.lat_rad, s.lon_rad)
        ahead = self._trajectory(s, pz)
        self._past = past_trajectory(ahead, self._in_air_s(s, cfg), cfg.step_s)
        traj = join_trajectories(self._past, ahead)
        pred = self._predictor.predict(traj)
        self.last_prediction, self.last_trajectory, self._ahead = pred, traj, ahead
        conflicts = find_conflicts(pred, pz, self.zones, self._strips, cfg.focus_threshold)
        first = conflicts[0] if conflicts else None
        level = self._levels.update(first.time_to_contact_s if first else None, now)
        now_k = self._past.t_s.size  # the present emission point in the prediction
        cut_now = float(pred.cutoff_mach[now_k])  # its table lookup, already done
        max_mach = math.floor(100.0 * (cut_now - cfg.cutoff_margin_mach)) / 100.0
        reaches_now = bool(pred.on_ground[now_k])
        if level == 0:
            status = "clear" if pred.on_ground.any() else "no_boom"
        else:
            status = ("advisory", "caution", "warning")[level - 1]
        left = right = None
        if level > 0 and first is not None:
            left, right = self._cached_resolutions(s, pz, pred, first.zone_id, level, now)
        if level > 0 and first is None:
            # held level (hysteresis) with no present conflict: keep the cue informative
            return Advisory(status, max_mach_off_ground=max_mach, reaches_ground=reaches_now,
                            cutoff_mach=cut_now, tables_stale=self.tables_stale,
                            utc_s=s.utc_s, zone_id=self._held_zone,
                            zone_name=self._held_name)
        self._held_zone = first.zone_id if first else None
        self._held_name = first.zone_name if first else None
        return Advisory(
            status=status,
            zone_id=first.zone_id if first else None,
            zone_name=first.zone_name if first else None,
            time_to_contact_s=first.time_to_contact_s if first else None,
            overpressure_pa=first.overpressure_pa if first else None,
            focus=bool(first.focus) if first else False,
            max_mach_off_ground=max_mach,
            turn_left_deg=left, turn_right_deg=right,
            reaches_ground=reaches_now, cutoff_mach=cut_now,
            tables_stale=self.tables_stale, conflicts=tuple(conflicts), utc_s=s.utc_s,
        )

    _held_zone: str | None = None
    _held_name: str | None = None
    _resolution_cache: tuple | None = None

    def _cached_resolutions(self, s: AirDataState, pz: ProjectedZones, pred: CarpetPrediction,
                            zone_id: str, level: int, now: float
                            ) -> tuple[float | None, float | None]:
        """Turn resolutions, searched again after ``refresh_s`` or when the zone in
        conflict or the level changes (they change slowly; the search is the costly
        part of a step)."""
        c = self._resolution_cache
        if (c is not None and c[0] == zone_id and c[1] == level
                and 0.0 <= now - c[2] < self.config.refresh_s):
            return c[3]
        res = self._turn_resolutions(s, pz, pred)
        self._resolution_cache = (zone_id, level, now, res)
        return res

    def _turn_resolutions(self, s: AirDataState, pz: ProjectedZones,
                          base: CarpetPrediction) -> tuple[float | None, float | None]:
        """Smallest left and right heading changes (deg) that clear every zone.

        Booms already emitted (the extrapolated past, up to now) cannot be moved: when
        they alone reach a zone no turn clears, and the search is skipped. Otherwise each
        trial turns the trajectory ahead only.
        """
        cfg = self.config
        self.resolution_searches += 1
        n_past = self._past.t_s.size
        if n_past and find_conflicts(_head(base, n_past + 1), pz, self.zones, self._strips,
                                     cfg.focus_threshold, first_only=True):
            return None, None
        bank = math.radians(cfg.turn_bank_deg)
        ahead = self._ahead
        reuse = not self._table.has_wind
        rows = codes = cut = None
        if reuse:  # the trials share the altitude and Mach schedule, hence the table rows
            rows, codes, cut = self._predictor.lookup(ahead)
            rows, codes, cut = rows.copy(), codes.copy(), cut.copy()

        if reuse:
            t, mach, sound, params = _kernel_inputs(ahead, ahead.t_s, 0.0, math.nan)
            dp = np.ascontiguousarray(rows[:, :, lk.Q_DP])

        def clears(delta_deg: float, side: int) -> bool:
            if reuse:  # one compiled call per trial
                params[3] = side * bank
                params[4] = math.radians(delta_deg) * side
                return bool(trial_clears_kernel(
                    t, mach, sound, params, rows, codes, dp, self._strips, pz.x, pz.y,
                    pz.ring_start, pz.part_start, pz.zone_start, pz.zone_bbox, pz.ring_chunk,
                    pz.chunk_edges, pz.chunk_bbox, pz.margin_m, pz.limit_pa,
                    self._predictor.focus_cap, cfg.focus_threshold))
            traj = turned_trajectory(ahead, side * bank, math.radians(delta_deg) * side)
            pred = self._predictor.predict(traj)
            return not find_conflicts(pred, pz, self.zones, self._strips, cfg.focus_threshold,
                                      first_only=True)

        coarse = [a for a in (10.0, 20.0, 30.0, 45.0, 60.0, 90.0, 135.0, 180.0)
                  if a <= cfg.max_turn_deg]
        if not coarse or coarse[-1] < cfg.max_turn_deg:
            coarse.append(cfg.max_turn_deg)
        out = []
        for side in (-1, 1):
            lo, found = 0.0, None
            for a in coarse:
                if clears(a, side):
                    found = a
                    break
                lo = a
            if found is not None:
                step = cfg.turn_step_deg
                a = lo + step
                while a < found - 1e-9:  # refine between the last fail and first clear
                    if clears(a, side):
                        found = a
                        break
                    a += step
            out.append(found)
        return out[0], out[1]


def _head(pred: CarpetPrediction, stop: int) -> CarpetPrediction:
    """The first ``stop`` emissions of a prediction."""
    return CarpetPrediction(
        t_emit_s=pred.t_emit_s[:stop], codes=pred.codes[:stop],
        cutoff_mach=pred.cutoff_mach[:stop], east_m=pred.east_m[:stop],
        north_m=pred.north_m[:stop], arrival_s=pred.arrival_s[:stop],
        overpressure_pa=pred.overpressure_pa[:stop], duration_s=pred.duration_s[:stop],
        focus_factor=pred.focus_factor[:stop], edge_flag=pred.edge_flag[:stop],
    )


@njit(cache=True)
def trial_clears_kernel(t, mach, a, params, rows, codes, dp, strip_nodes, x, y, ring_start,
                        part_start, zone_start, zone_bbox, ring_chunk, chunk_edges, chunk_bbox,
                        margins, limits, focus_cap, focus_threshold):
    """One resolution trial in compiled code: trajectory, carpet, focus, zone contact.

    Same steps as :func:`turned_trajectory`, :meth:`FootprintPredictor.predict` and
    :func:`find_conflicts` (their composition is the readable twin, checked in a parity
    test). Returns True when no zone is reached.
    """
    out = propagate_kernel(t, mach, a, params)
    nk = t.size
    nj = rows.shape[1]
    e = np.empty((nk, nj))
    n = np.empty((nk, nj))
    ta = np.empty((nk, nj))
    de = np.empty((nk, nj))
    dn = np.empty((nk, nj))
    place_kernel(t, out[0], out[1], out[4], rows, codes, e, n, ta, de, dn)
    vg_e = np.empty(nk)
    vg_n = np.empty(nk)
    for k in range(nk):
        vg_e[k] = out[8, k] * math.sin(out[7, k])
        vg_n[k] = out[8, k] * math.cos(out[7, k])
    amp = np.ones((nk, nj))
    focus_kernel(t, e, n, de, dn, vg_e, vg_n, codes, focus_cap, amp)
    on_ground = np.empty(nk, dtype=np.bool_)
    eff = np.empty((nk, nj))
    for k in range(nk):
        on_ground[k] = codes[k] != lk.NO_BOOM
        for j in range(nj):
            eff[k, j] = dp[k, j] * amp[k, j] if on_ground[k] else 0.0
    nz = limits.size
    best_t = np.full(nz, np.inf)
    best_dp = np.zeros(nz)
    best_focus = np.zeros(nz, dtype=np.bool_)
    conflict_kernel(e, n, ta, eff, amp, on_ground, strip_nodes, x, y, ring_start, part_start,
                    zone_start, zone_bbox, ring_chunk, chunk_edges, chunk_bbox, margins, limits,
                    focus_threshold, True, best_t, best_dp, best_focus)
    for z in range(nz):
        if best_t[z] < np.inf:
            return False
    return True


def _kernel_inputs(base: Trajectory, t: np.ndarray, bank_rad: float, turn_limit: float
                   ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Inputs of :func:`propagate_kernel` that re-fly ``base``'s start state over ``t``."""
    i0 = int(np.argmin(np.abs(base.t_s)))
    mdot = 0.0
    if base.t_s.size > 1:
        mdot = float((base.mach[-1] - base.mach[0]) / (base.t_s[-1] - base.t_s[0]))
    mach = np.maximum(base.mach[i0] + mdot * t, 0.1)
    a = np.full_like(t, float(base.tas_mps[i0] / base.mach[i0]))
    fpa = float(base.fpa_rad[i0])
    cos_g = math.cos(fpa)
    psi0 = float(base.heading_grid_rad[i0])
    ge = base.ground_speed_mps[i0] * math.sin(base.track_grid_rad[i0])
    gn = base.ground_speed_mps[i0] * math.cos(base.track_grid_rad[i0])
    vh = base.tas_mps[i0] * cos_g
    params = np.array([base.alt_m[i0], math.sin(fpa), cos_g, bank_rad, turn_limit, psi0,
                       ge - vh * math.sin(psi0), gn - vh * math.cos(psi0), base.east_m[i0],
                       base.north_m[i0], base.frame.radius_m, units.G0])
    return np.ascontiguousarray(t, dtype=np.float64), mach, a, params


def _propagate_like(base: Trajectory, t: np.ndarray, bank_rad: float, turn_limit: float
                    ) -> Trajectory:
    """Run the trajectory kernel over times ``t`` from ``base``'s start state."""
    t, mach, a, params = _kernel_inputs(base, t, bank_rad, turn_limit)
    fpa = math.asin(float(params[1]))
    out = propagate_kernel(t, mach, a, params)
    return Trajectory(
        t_s=t, alt_m=out[2], mach=mach, tas_mps=out[3], heading_grid_rad=out[4],
        track_grid_rad=out[7], ground_speed_mps=out[8], bank_rad=out[6],
        fpa_rad=np.full_like(t, fpa), turn_rate_rad_s=out[5], east_m=out[0], north_m=out[1],
        frame=base.frame, wind_east_mps=base.wind_east_mps,
        wind_north_mps=base.wind_north_mps, wind_inferred=base.wind_inferred,
    )


def past_trajectory(ahead: Trajectory, back_s: float, step_s: float) -> Trajectory:
    """The recent past, extrapolated back from the present manoeuvre (time-ascending,
    ending just before t = 0): the emission points whose booms may still be in the air.

    Assumes the aircraft flew the present manoeuvre (bank, Mach rate, climb) for the
    last ``back_s`` seconds.
    """
    n = max(int(math.ceil(back_s / step_s - 1e-9)), 0)
    t = -np.arange(n + 1, dtype=np.float64) * step_s
    if n:
        t[-1] = -back_s
    back = _propagate_like(ahead, t, float(ahead.bank_rad[0]), math.nan)
    sel = slice(n, 0, -1)  # reversed, t = 0 dropped

    def rev(a: np.ndarray) -> np.ndarray:
        return np.ascontiguousarray(a[sel])

    return Trajectory(
        t_s=rev(back.t_s), alt_m=rev(back.alt_m), mach=rev(back.mach),
        tas_mps=rev(back.tas_mps), heading_grid_rad=rev(back.heading_grid_rad),
        track_grid_rad=rev(back.track_grid_rad), ground_speed_mps=rev(back.ground_speed_mps),
        bank_rad=rev(back.bank_rad), fpa_rad=rev(back.fpa_rad),
        turn_rate_rad_s=rev(back.turn_rate_rad_s), east_m=rev(back.east_m),
        north_m=rev(back.north_m), frame=ahead.frame, wind_east_mps=ahead.wind_east_mps,
        wind_north_mps=ahead.wind_north_mps, wind_inferred=ahead.wind_inferred,
    )


_TRAJ_ARRAYS = ("t_s", "alt_m", "mach", "tas_mps", "heading_grid_rad", "track_grid_rad",
                "ground_speed_mps", "bank_rad", "fpa_rad", "turn_rate_rad_s", "east_m",
                "north_m")


def join_trajectories(past: Trajectory, ahead: Trajectory) -> Trajectory:
    """``past`` followed by ``ahead`` (one time-ascending trajectory)."""
    arrays = {k: np.concatenate([getattr(past, k), getattr(ahead, k)]) for k in _TRAJ_ARRAYS}
    return Trajectory(**arrays, frame=ahead.frame, wind_east_mps=ahead.wind_east_mps,
                      wind_north_mps=ahead.wind_north_mps, wind_inferred=ahead.wind_inferred)


def turned_trajectory(base: Trajectory, bank_rad: float, heading_change_rad: float
                      ) -> Trajectory:
    """``base`` (starting at t = 0) flown with a turn at ``bank_rad`` that rolls out after
    ``heading_change_rad``: same Mach and climb schedule and wind, a different lateral
    path (a resolution trial). Uses the trajectory kernel directly.
    """
    return _propagate_like(base, base.t_s, bank_rad, heading_change_rad)


def _state_problem(s: AirDataState) -> str:
    """A reason the state cannot be advised on ('' when it can)."""
    checks = (("lat", s.lat_rad, -math.pi / 2, math.pi / 2), ("lon", s.lon_rad, -7.0, 7.0),
              ("alt", s.alt_m, -500.0, 30000.0), ("mach", s.mach, 0.0, 5.0),
              ("heading", s.heading_rad, -7.0, 7.0), ("gs", s.gs_mps, 0.0, 2000.0),
              ("bank", s.bank_rad, -1.4, 1.4), ("fpa", s.fpa_rad, -0.6, 0.6))
    for name, v, lo, hi in checks:
        if v is None or not math.isfinite(v) or not (lo <= v <= hi):
            return f"invalid air data: {name} = {v!r}"
    return ""


def find_conflicts(pred: CarpetPrediction, pz: ProjectedZones, zones: ZoneSet,
                   strip_nodes: np.ndarray, focus_threshold: float,
                   first_only: bool = False) -> list[Conflict]:
    """Zones the predicted carpet reaches, soonest first (numba kernel; see the twin)."""
    n_zones = len(pz)
    if n_zones == 0 or not pred.on_ground.any():
        return []
    best_t = np.full(n_zones, np.inf)
    best_dp = np.zeros(n_zones)
    best_focus = np.zeros(n_zones, dtype=np.bool_)
    conflict_kernel(
        pred.east_m, pred.north_m, pred.arrival_s, pred.effective_overpressure_pa,
        pred.focus_factor, pred.on_ground, np.ascontiguousarray(strip_nodes, dtype=np.int64),
        pz.x, pz.y, pz.ring_start, pz.part_start, pz.zone_start, pz.zone_bbox, pz.ring_chunk,
        pz.chunk_edges, pz.chunk_bbox, pz.margin_m, pz.limit_pa, float(focus_threshold),
        bool(first_only), best_t, best_dp, best_focus,
    )
    return _conflicts_from(zones, best_t, best_dp, best_focus)


def _conflicts_from(zones: ZoneSet, best_t: np.ndarray, best_dp: np.ndarray,
                    best_focus: np.ndarray) -> list[Conflict]:
    out = []
    for z in np.argsort(best_t, kind="stable"):
        if not np.isfinite(best_t[z]):
            break
        zone = zones.zones[int(z)]
        out.append(Conflict(int(z), zone.id, zone.name or zone.id, float(best_t[z]),
                            float(best_dp[z]), bool(best_focus[z])))
    return out


@njit(cache=True)
def _kernel_contact_time(e, n, arrival, k, start, j0, j1, margin, x, y, ring_start,
                         part_start, zone_start, z):
    """Numba version of :func:`_contact_time`."""
    t_k = min(arrival[k, j0], arrival[k, j1])
    if k <= start:
        return t_k
    t_prev = min(arrival[k - 1, j0], arrival[k - 1, j1])
    d_prev, _ = gk.segment_zone_distance(e[k - 1, j0], n[k - 1, j0], e[k - 1, j1],
                                         n[k - 1, j1], x, y, ring_start, part_start,
                                         zone_start, z)
    d_k, _ = gk.segment_zone_distance(e[k, j0], n[k, j0], e[k, j1], n[k, j1], x, y,
                                      ring_start, part_start, zone_start, z)
    d_prev -= margin
    d_k -= margin
    if not (math.isfinite(d_prev) and math.isfinite(d_k)) or d_prev <= 0.0:
        return min(t_prev, t_k)
    if d_k <= 0.0:
        f = d_prev / (d_prev - d_k)
    else:
        f = d_prev / (d_prev + d_k)
    f = min(max(f, 0.0), 1.0)
    return t_prev + f * (t_k - t_prev)


@njit(cache=True)
def conflict_kernel(e, n, arrival, dp, focus, on_ground, strip_nodes, x, y, ring_start,
                    part_start, zone_start, zone_bbox, ring_chunk, chunk_edges, chunk_bbox,
                    margins, limits, focus_threshold, first_only, best_t, best_dp, best_focus):
    """First contact of the carpet strips with each zone (see :func:`find_conflicts_numpy`).

    Writes ``best_t`` (s, inf for none), ``best_dp`` (Pa) and ``best_focus`` per zone.
    """
    nz = limits.size
    nk = e.shape[0]
    m = np.empty(nz)
    found = False
    for zl in range(nz):
        lim = limits[zl]
        seen = False
        for zp in range(zl):
            if limits[zp] == lim:
                seen = True
        if seen:
            continue
        for z in range(nz):
            m[z] = margins[z] if limits[z] == lim else -1.0e12
        for s in range(strip_nodes.size - 1):
            j0 = strip_nodes[s]
            j1 = strip_nodes[s + 1]
            k = 0
            while k < nk:
                if not (on_ground[k] and max(dp[k, j0], dp[k, j1]) > lim
                        and max(arrival[k, j0], arrival[k, j1]) >= 0.0):
                    k += 1
                    continue
                start = k
                while (k < nk and on_ground[k] and max(dp[k, j0], dp[k, j1]) > lim
                       and max(arrival[k, j0], arrival[k, j1]) >= 0.0):
                    k += 1
                stop = k
                ax = e[start:stop, j0].copy()
                ay = n[start:stop, j0].copy()
                bx = e[start:stop, j1].copy()
                by = n[start:stop, j1].copy()
                hits = contact.first_contact(ax, ay, bx, by, x, y, part_start, zone_start,
                                        zone_bbox, ring_chunk, chunk_edges, chunk_bbox, m, True)
                for z in range(nz):
                    if hits[z] < 0:
                        continue
                    kk = start + hits[z]
                    t = max(_kernel_contact_time(e, n, arrival, kk, start, j0, j1, m[z], x, y,
                                                 ring_start, part_start, zone_start, z), 0.0)
                    if t < best_t[z]:
                        k0 = kk - 1 if kk > start else kk
                        big = 0.0
                        foc = 1.0
                        for q in range(k0, kk + 1):
                            big = max(big, dp[q, j0], dp[q, j1])
                            foc = max(foc, focus[q, j0], focus[q, j1])
                        best_t[z] = t
                        best_dp[z] = big
                        best_focus[z] = foc >= focus_threshold
                        found = True
                if first_only and found:
                    return


def find_conflicts_numpy(pred: CarpetPrediction, pz: ProjectedZones, zones: ZoneSet,
                         strip_nodes: np.ndarray, focus_threshold: float,
                         first_only: bool = False) -> list[Conflict]:
    """Zones the predicted carpet reaches, soonest first (readable twin of the kernel).

    The carpet is cut into strips between the azimuth nodes ``strip_nodes``; each strip
    is a series of ground segments over emission time, tested against the zones (within
    each zone's margin, the band between successive emissions included). A zone with an
    overpressure limit is tested only against strip segments where the focus-amplified
    overpressure at either end exceeds the limit (conservative).
    """
    n_zones = len(pz)
    if n_zones == 0 or not pred.on_ground.any():
        return []
    dp = pred.effective_overpressure_pa
    limits = pz.limit_pa
    groups = sorted(set(float(v) for v in limits))
    best_t = np.full(n_zones, np.inf)
    best_dp = np.zeros(n_zones)
    best_focus = np.zeros(n_zones, dtype=bool)
    for lim in groups:
        margin = np.where(limits == lim, pz.margin_m, _EXCLUDE)
        for j0, j1 in zip(strip_nodes[:-1], strip_nodes[1:]):
            seg_dp = np.maximum(dp[:, j0], dp[:, j1])
            still_arriving = np.maximum(pred.arrival_s[:, j0], pred.arrival_s[:, j1]) >= 0.0
            valid = pred.on_ground & (seg_dp > lim) & still_arriving
            if not valid.any():
                continue
            for start, stop in _runs(valid):
                ax = pred.east_m[start:stop, j0]
                ay = pred.north_m[start:stop, j0]
                bx = pred.east_m[start:stop, j1]
                by = pred.north_m[start:stop, j1]
                hits = pz.first_contact(ax, ay, bx, by, swept=True, margin_m=margin)
                for z in np.nonzero(hits >= 0)[0]:
                    k = start + int(hits[z])
                    ks = [k - 1, k] if k > start else [k]
                    t = max(_contact_time(pred, pz, int(z), k, start, j0, j1, margin[z]), 0.0)
                    if t < best_t[z]:
                        best_t[z] = t
                        best_dp[z] = float(np.max(dp[ks][:, [j0, j1]]))
                        best_focus[z] = bool(np.max(pred.focus_factor[ks][:, [j0, j1]])
                                             >= focus_threshold)
                if first_only and np.isfinite(best_t).any():
                    break
            if first_only and np.isfinite(best_t).any():
                break
        if first_only and np.isfinite(best_t).any():
            break
    return _conflicts_from(zones, best_t, best_dp, best_focus)


def _contact_time(pred: CarpetPrediction, pz: ProjectedZones, z: int, k: int, start: int,
                  j0: int, j1: int, margin: float) -> float:
    """Arrival time of the carpet strip (j0, j1) at zone ``z``, first touched at ``k``.

    Between the last clear segment ``k - 1`` and the touching one ``k`` the contact is
    placed by linear interpolation of the segments' distances to the zone (less its
    margin), and the strip's earliest arrival time is interpolated the same way.
    """
    t_k = float(np.nanmin(pred.arrival_s[k, [j0, j1]]))
    if k <= start:
        return t_k
    t_prev = float(np.nanmin(pred.arrival_s[k - 1, [j0, j1]]))
    e, n = pred.east_m, pred.north_m
    d_prev, _ = pz.segment_distance(z, e[k - 1, j0], n[k - 1, j0], e[k - 1, j1], n[k - 1, j1])
    d_k, _ = pz.segment_distance(z, e[k, j0], n[k, j0], e[k, j1], n[k, j1])
    d_prev -= margin
    d_k -= margin
    if not (math.isfinite(d_prev) and math.isfinite(d_k)) or d_prev <= 0.0:
        return min(t_prev, t_k)
    f = d_prev / (d_prev - d_k) if d_k <= 0.0 else d_prev / (d_prev + d_k)
    return t_prev + min(max(f, 0.0), 1.0) * (t_k - t_prev)


def _runs(mask: np.ndarray) -> list[tuple[int, int]]:
    """Half-open index ranges of consecutive True values."""
    idx = np.flatnonzero(np.diff(np.concatenate([[0], mask.astype(np.int8), [0]])))
    return list(zip(idx[::2].tolist(), idx[1::2].tolist()))


def state_from_fields(fields: dict, rx_monotonic: float | None = None) -> AirDataState:
    """An :class:`AirDataState` from wire/state-file field names (see docs/interface.md)."""
    st = AirDataState.from_fields(fields)
    return replace(st, rx_monotonic=rx_monotonic) if rx_monotonic is not None else st
