"""Resolutions, each flown as a trial before it is offered, and the time left to act.

Every candidate is a trial flight (:mod:`advisory.pipeline.trial`): the trajectory ahead
re-flown from the present state with the crew's action starting after the configured
reaction time, its carpet laid from the table with the focus of its own trajectory, and
the zones searched for the emissions the action can still change (those from the
reaction time on, the reaction time and the onset themselves included; booms emitted
earlier are the advisor's "unavoidable" ones). A zone with an overpressure limit is held
to ``limit_fraction`` of it in the trials (the prediction's error; the alerts use the
limit itself), so an offered resolution does not sit on the limit.

* **Mach** (``resolve_mach``): decelerate at ``decel_mach_per_s`` (wings rolled level at
  ``roll_rate_deg_s``) to a target Mach. A slower aircraft covers less ground in the
  look-ahead, so these trials are flown ``M0 / M`` times longer (the same ground as the
  prediction): a target above cutoff that only delays a contact beyond the look-ahead is
  not offered. Booms emitted just above cutoff travel far ahead (and focus), so these
  trials also emit where the deceleration passes cutoff plus small excesses
  (:data:`NEAR_CUTOFF_EXCESS`), not only every ``step_s``. The lowest candidate is the
  present cutoff Mach less the margin (none when the table's cutoff is read at the
  configured confidence, :mod:`advisory.pipeline.confidence`; else the fixed
  ``cutoff_margin_mach``), rounded down to 0.01 (every boom after it stays off the
  ground), the lowest cutoff over every ground level with zones (higher ground is
  reached at a lower Mach; every trial is judged on every level's zones,
  :class:`OtherGround`); when it clears, the largest clearing target between it and the
  present Mach is found by bisection on a 0.01 grid (assuming that a lower target clears
  when a higher one does, true but near odd geometry). Below a target that failed, the
  value offered is that target less ``mach_hold_margin``, not below the lowest
  candidate, tried once more (a crew holds a Mach to about 0.01, and near cutoff the
  carpet's edge moves 1-1.5 km per 0.01; the measured case: ``hold-margin-s2-79`` in
  ``tests/test_checked_resolutions.py``); when that try fails (odd geometry) the target
  itself is: every value offered is a trial that cleared. When the lowest candidate does
  not clear, no Mach alone clears.
* **Turns** (``turn_left_deg`` / ``turn_right_deg``): roll at ``roll_rate_deg_s`` to
  ``turn_bank_deg``, hold, roll out at the heading change; heading changes are tried on
  a coarse list (10, 20, 30, 45, 60, 90, 135, 180 deg up to ``max_turn_deg``) and refined
  in ``turn_step_deg`` steps between the last failing and the first clearing one.
* **Combined**: when neither alone clears, the lowest Mach candidate together with the
  smallest turn each way that clears with it (``combined`` True).
* **Act-by** (``act_by_s``): for the action the crew is offered first (the Mach when it
  clears alone, else the smaller turn, left on a tie, else the combination), the latest
  onset that still clears, by bisection to :data:`ACT_BY_TOLERANCE_S` between the
  reaction time (clears) and the first contact (the action must begin before the
  emission that reaches the zone); assumes a later onset never clears when an earlier one
  does not (common practice, no source). The value offered is the latest onset that
  cleared less one emission spacing (``step_s``) and the bisection tolerance: booms are
  laid every ``step_s`` in a trial, so one between two of them can reach the zone sooner.

The search is a generator (:func:`search`) that yields after every trial, so the advisor
can spread a refresh over several steps with a bounded number of trials each; the number
of trials is fixed by the inputs (no clock), so replays stay deterministic. The lists,
tolerances and the crew's preference are project choices (common practice, no source).
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable, Generator, Sequence
from dataclasses import dataclass

import numpy as np

from advisory import units
from advisory.pipeline.airdata import AirDataState
from advisory.pipeline.config import AdvisorConfig
from advisory.pipeline.footprint import FootprintPredictor
from advisory.pipeline.trajectory import Trajectory
from advisory.pipeline.trial import TRIAL_PARAMS, trial_clears_kernel, trial_nodes
from advisory.pipeline.zones import ProjectedZones
from advisory.tables.table import BoomTable

__all__ = ["max_mach_off_ground", "TrialBase", "Resolution", "search", "run_search", "roll_out",
           "COARSE_TURNS_DEG", "ACT_BY_TOLERANCE_S"]

#: Heading changes tried first, deg (then refined between the last fail and first clear).
COARSE_TURNS_DEG = (10.0, 20.0, 30.0, 45.0, 60.0, 90.0, 135.0, 180.0)
#: Precision of the act-by bisection, s.
ACT_BY_TOLERANCE_S = 1.0
MACH_GRID = 0.01  #: resolution of the offered Mach
#: Longest stretch of a Mach trial's look-ahead (:meth:`TrialBase.stretch`).
MAX_STRETCH = 2.0
#: Mach excesses over cutoff at which a deceleration's trial also emits (the table's
#: near-cutoff rows are this fine too; project choice).
NEAR_CUTOFF_EXCESS = np.array([0.0005, 0.001, 0.002, 0.003, 0.005, 0.008, 0.012, 0.02,
                               0.03, 0.05])


def max_mach_off_ground(cutoff_mach: float, margin_mach: float) -> float:
    """Highest Mach (rounded down to 0.01) whose boom stays off the ground: the cutoff
    Mach less the configured margin."""
    return math.floor(100.0 * (cutoff_mach - margin_mach) + 1e-9) / 100.0


@dataclass(frozen=True, eq=False)
class OtherGround:
    """Another ground level's part in the trials (:mod:`advisory.pipeline.ground_levels`):
    its table (in ``predictor``), carpet strips and its zones in the trials' projection
    (the others masked)."""

    predictor: FootprintPredictor
    strips: np.ndarray
    pz: ProjectedZones


class TrialBase:
    """Everything the trials of one search share: the trajectory ahead's start state, the
    table, the zones and the first emission judged.

    Parameters
    ----------
    cfg : AdvisorConfig
        Reaction time, deceleration, roll rate, bank, focus threshold.
    predictor : FootprintPredictor
        The live table (and its focus cap).
    strips : ndarray
        int64 azimuth nodes of the carpet strips. The trials read the carpet at the nodes
        of :func:`advisory.pipeline.trial.trial_nodes` (every node of the two outer
        strips, the strip nodes between), each stretch between two of them cut to its part
        louder than the limit (:mod:`advisory.pipeline.conflicts`); the strips' inner
        nodes carry the edge ratio's widened edges, as in the prediction.
    pz : ProjectedZones
        The zones in the trajectory's frame.
    ahead : Trajectory
        The trajectory ahead from the present state (t = 0 first).
    others : sequence of OtherGround, optional
        Other ground levels (zones on higher ground, judged with their own tables): a
        trial clears only when it clears every one of them too, and the lowest Mach
        tried is below the lowest of their cutoff Mach numbers.
    """

    def __init__(self, cfg: AdvisorConfig, predictor: FootprintPredictor,
                 strips: np.ndarray, pz: ProjectedZones, ahead: Trajectory,
                 others: Sequence[OtherGround] = (), margin_mach: float | None = None) -> None:
        self.cfg = cfg
        #: Mach margin under the cutoff for the lowest Mach tried: the configured fixed one,
        #: or 0 when the table's cutoff is read at the confidence's edge (issue 16).
        self.margin_mach = cfg.cutoff_margin_mach if margin_mach is None else margin_mach
        self.table = predictor.table
        self.focus_cap = predictor.focus_cap
        self.band = predictor.band  # the prediction's lookup band below the cutoff
        self.edge_ratio = predictor.stretch  # and its edge ratio (issue 16)
        self.strips = np.ascontiguousarray(strips, dtype=np.int64)
        self.nodes = trial_nodes(self.strips)  #: the azimuth nodes the trials read
        self.pz = pz
        #: The zones' limits the trials hold the booms to (``limit_fraction`` of each).
        self.limit_pa = np.ascontiguousarray(pz.limit_pa * cfg.limit_fraction)
        self.ahead = ahead
        self.t = np.ascontiguousarray(ahead.t_s, dtype=np.float64)
        self.mach0 = float(ahead.mach[0])
        self.fpa = float(ahead.fpa_rad[0])
        self.has_wind = bool(self.table.has_wind)
        self.hdg_offset = (float(ahead.heading_rad[0] - ahead.heading_grid_rad[0])
                           if self.has_wind else 0.0)
        self.params = _base_params(ahead, cfg)
        self.trials = 0
        self.t_long = self.t
        #: The emission times with the reaction time added (:meth:`_judged_from`), and
        #: ``k0``, the index of the reaction time there: the first emission judged.
        self.t_judged = _merged(self.t, set(self.t.tolist()), (cfg.reaction_s,))
        self.k0 = int(np.searchsorted(self.t_judged, cfg.reaction_s, side="left"))
        self._judged_set = set(self.t_judged.tolist())  # its values, to merge others in
        self._long_judged, self._long_set = self.t_judged, self._judged_set  # t_long's
        #: Cutoff Mach at the present state (set by :func:`search`; 0 when unknown).
        self.cutoff_now = 0.0
        self._near: tuple[float, list[float]] = (math.nan, [])  # cutoff_now + excesses
        self.others = tuple(others)
        #: The others' cutoff Mach numbers at the present state.
        self.other_cutoffs = [
            g.predictor.table.cutoff_mach(float(ahead.alt_m[0]), self.fpa,
                                          float(ahead.heading_rad[0])) for g in self.others]
        self._other_limits = [np.ascontiguousarray(g.pz.limit_pa * cfg.limit_fraction)
                              for g in self.others]
        self._other_nodes = [trial_nodes(g.strips) for g in self.others]

    def stretch(self, slowest_mach: float) -> None:
        """Make the trials that change the Mach cover the same ground as the prediction:
        flown down to ``slowest_mach``, the aircraft needs ``M0 / M`` times longer (at most
        :data:`MAX_STRETCH` times), and a Mach above cutoff only delays a contact beyond
        the look-ahead rather than avoiding it."""
        factor = min(max(self.mach0 / max(slowest_mach, 0.1), 1.0), MAX_STRETCH)
        if factor <= 1.0 or self.t.size < 2:
            return
        step = float(self.t[1] - self.t[0])
        end = self.horizon_s * factor
        extra = np.arange(self.horizon_s + step, end + 0.5 * step, step)
        self.t_long = np.ascontiguousarray(np.concatenate([self.t, extra]))
        self._long_judged = _merged(self.t_long, set(self.t_long.tolist()),
                                    (self.cfg.reaction_s,))
        self._long_set = set(self._long_judged.tolist())

    def _near_cutoff_times(self, onset: float, target_mach: float) -> list[float]:
        """The moments the deceleration passes the cutoff Mach plus each of
        :data:`NEAR_CUTOFF_EXCESS` (booms emitted just above cutoff travel far ahead, and
        a few seconds of emissions span them all), to be added to the stretched emission
        times; none when the target is not below the Mach at the onset."""
        m_on = self.mach0 + self.params[5] * onset
        if not (self.cutoff_now > 0.0 and target_mach < m_on):
            return []
        if self._near[0] != self.cutoff_now:  # the same float sums as a numpy array
            self._near = (self.cutoff_now,
                          [self.cutoff_now + float(x) for x in NEAR_CUTOFF_EXCESS])
        rate = self.cfg.decel_mach_per_s
        end = min(onset + (m_on - target_mach) / rate, float(self.t_long[-1]))
        ts = [onset + (m_on - c) / rate for c in self._near[1]]
        return [x for x in ts if onset < x < end]

    def _judged_from(self, onset: float, target_mach: float) -> tuple[np.ndarray, int]:
        """The emission times of a trial (the stretched ones and the near-cutoff moments
        for a Mach trial) with the reaction time and the onset added, and the index of
        the first judged one (the reaction time's). Every boom emitted from the reaction
        time on is the trial's to keep off (those before it are the advisor's
        unavoidable ones); on the ``step_s`` grid alone the emissions between the
        reaction time and the next grid time went unjudged, and a crew acting at the last
        moment put them into the zone (campaign --known, seed 1, encounter 11).

        The grids with the reaction time are made once per search (:attr:`t_judged`);
        a trial only merges its onset (and near-cutoff moments) in."""
        if math.isnan(target_mach):
            t = _merged(self.t_judged, self._judged_set, (onset,))
        else:
            t = _merged(self._long_judged, self._long_set,
                        [*self._near_cutoff_times(onset, target_mach), onset])
        if t is self.t_judged:
            return t, self.k0
        return t, int(np.searchsorted(t, self.cfg.reaction_s, side="left"))

    @property
    def horizon_s(self) -> float:
        """The last emission time of the trials, s."""
        return float(self.t[-1])

    def clears(self, onset: float, target_mach: float = math.nan,
               bank: float = math.nan, turn: float = math.nan) -> bool:
        """One trial: action at ``onset`` (s) toward ``target_mach`` (NaN: present
        schedule), bank ``bank`` (rad, NaN: wings level) rolling out after the heading
        change ``turn`` (rad, signed; NaN: none). True when no judged boom reaches a zone.
        """
        self.trials += 1
        if self.t[-1] <= self.cfg.reaction_s:
            return True  # nothing after the reaction time within the look-ahead
        p = self.params.copy()
        p[14], p[15], p[17], p[18] = onset, target_mach, bank, turn
        t, k0 = self._judged_from(onset, target_mach)
        if not self._clears_on(self.table, self.strips, self.nodes, self.pz, self.limit_pa,
                               self.focus_cap, t, k0, p, self.band, self.edge_ratio):
            return False
        own_cutoff = self.cutoff_now
        try:
            for g, cut, limit, nodes in zip(self.others, self.other_cutoffs,
                                            self._other_limits, self._other_nodes,
                                            strict=True):
                self.cutoff_now = cut  # its near-cutoff emissions at its own cutoff Mach
                t, k0 = self._judged_from(onset, target_mach)
                if not self._clears_on(g.predictor.table, g.strips, nodes, g.pz, limit,
                                       g.predictor.focus_cap, t, k0, p, g.predictor.band,
                                       g.predictor.stretch):
                    return False
        finally:
            self.cutoff_now = own_cutoff
        return True

    def lowest_cutoff(self, cutoff_now: float) -> float:
        """The lowest cutoff Mach of this ground (``cutoff_now``) and the others."""
        return min([cutoff_now, *self.other_cutoffs])

    def _clears_on(self, tb: BoomTable, strips: np.ndarray, nodes: np.ndarray,
                   pz: ProjectedZones, limit_pa: np.ndarray, focus_cap: float,
                   t: np.ndarray, k0: int, p: np.ndarray, band: float,
                   stretch: np.ndarray | None) -> bool:
        """The trial ``p`` judged on one ground: its table, strips, the azimuth nodes read
        (:func:`advisory.pipeline.trial.trial_nodes` of the strips), zones, lookup band
        and edge ratio."""
        has_wind = bool(tb.has_wind)
        hdg_offset = self.hdg_offset if has_wind == self.has_wind else (
            float(self.ahead.heading_rad[0] - self.ahead.heading_grid_rad[0])
            if has_wind else 0.0)
        return bool(trial_clears_kernel(
            t, k0, p, self.fpa, hdg_offset, has_wind, tb.ax_alt,
            tb.ax_mex, tb.ax_fpa, tb.ax_hdg, tb.cutoff, tb.cells, tb.lift_args(),
            nodes,
            pz.x, pz.y,
            pz.ring_start, pz.part_start, pz.zone_start, pz.zone_bbox, pz.ring_chunk,
            pz.chunk_edges, pz.chunk_bbox, pz.margin_m, limit_pa, focus_cap,
            self.cfg.focus_threshold, band, stretch, int(strips[1]), int(strips[-2])))


def _merged(t: np.ndarray, values: set[float], extra: Sequence[float]) -> np.ndarray:
    """``t`` (ascending, no repeats; ``values`` the set of its values) with the values of
    ``extra`` below ``t[-1]`` merged in, each once: the array
    ``np.unique(np.concatenate([t, extra]))`` (restricted to those values) gives, without
    its cost; ``t`` itself when nothing is new."""
    end = float(t[-1])
    fresh = sorted({x for x in extra if x < end and x not in values})
    if not fresh:
        return t
    out = np.concatenate((t, np.asarray(fresh, dtype=np.float64)))
    out.sort(kind="stable")
    return out


def _base_params(ahead: Trajectory, cfg: AdvisorConfig) -> np.ndarray:
    """The trial parameters (:data:`TRIAL_PARAMS`) of ``ahead``'s start state; the action
    entries are filled per trial."""
    mdot = 0.0
    if ahead.t_s.size > 1:
        mdot = float((ahead.mach[-1] - ahead.mach[0]) / (ahead.t_s[-1] - ahead.t_s[0]))
    fpa = float(ahead.fpa_rad[0])
    vh = float(ahead.tas_mps[0]) * math.cos(fpa)
    psi0 = float(ahead.heading_grid_rad[0])
    ge = float(ahead.ground_speed_mps[0]) * math.sin(float(ahead.track_grid_rad[0]))
    gn = float(ahead.ground_speed_mps[0]) * math.cos(float(ahead.track_grid_rad[0]))
    p = np.zeros(len(TRIAL_PARAMS))
    p[:14] = (float(ahead.alt_m[0]), math.sin(fpa), math.cos(fpa), float(ahead.bank_rad[0]),
              float(ahead.mach[0]), mdot, float(ahead.tas_mps[0] / ahead.mach[0]), psi0,
              ge - vh * math.sin(psi0), gn - vh * math.cos(psi0), float(ahead.east_m[0]),
              float(ahead.north_m[0]), ahead.frame.radius_m, units.G0)
    p[14:] = (cfg.reaction_s, math.nan, cfg.decel_mach_per_s, math.nan, math.nan,
              math.radians(cfg.roll_rate_deg_s))
    return p


@dataclass(frozen=True)
class Resolution:
    """What a search found (times from the state the search started on).

    ``kind`` is the action offered first: ``mach``, ``left``, ``right``, ``combined_left``,
    ``combined_right`` or None (nothing clears); ``act_by_s`` the latest onset of that
    action that still clears (None when nothing clears); ``trials`` the trials flown.
    """

    resolve_mach: float | None = None
    turn_left_deg: float | None = None
    turn_right_deg: float | None = None
    combined: bool = False
    kind: str | None = None
    act_by_s: float | None = None
    trials: int = 0


Search = Generator[None, None, Resolution]


def search(base: TrialBase, cutoff_now: float, contact_s: float) -> Search:
    """The resolution search (module notes); yields after every trial.

    Parameters
    ----------
    base : TrialBase
    cutoff_now : float
        Cutoff Mach at the present state.
    contact_s : float
        Time to the first avoidable contact, s (the act-by search's upper end).
    """
    cfg = base.cfg
    onset = cfg.reaction_s
    found: list[bool] = []

    def trial(**kw: float) -> Generator[None, None, bool]:
        ok = base.clears(onset, **kw)
        found.append(ok)
        yield
        return ok

    lo = max_mach_off_ground(base.lowest_cutoff(cutoff_now), base.margin_mach)
    hi = math.floor(base.mach0 / MACH_GRID + 1e-9) * MACH_GRID
    lo = min(lo, hi)
    base.stretch(lo)
    base.cutoff_now = cutoff_now
    mach: float | None = None
    if (yield from trial(target_mach=lo)):
        good, bad = lo, hi + MACH_GRID
        while bad - good > MACH_GRID * 1.5:
            mid = round(math.floor(0.5 * (good + bad) / MACH_GRID + 1e-9) * MACH_GRID, 2)
            if mid <= good:
                break
            if (yield from trial(target_mach=mid)):
                good = mid
            else:
                bad = mid
        mach = round(good, 2)
        held = round(max(max_mach_off_ground(good, cfg.mach_hold_margin), lo), 2)
        # only below a target that failed (at the present Mach, what clears is the
        # roll-out or holding the speed: :func:`roll_out`)
        if bad <= hi + 1e-9 and held < mach and (yield from trial(target_mach=held)):
            mach = held
    bank = math.radians(cfg.turn_bank_deg)
    coarse = [a for a in COARSE_TURNS_DEG if a <= cfg.max_turn_deg]
    if not coarse or coarse[-1] < cfg.max_turn_deg:
        coarse.append(cfg.max_turn_deg)

    def turn_trial(target_mach: float) -> Callable[[float, int], Generator[None, None, bool]]:
        def f(delta_deg: float, side: int) -> Generator[None, None, bool]:
            return trial(target_mach=target_mach, bank=side * bank,
                         turn=side * math.radians(delta_deg))
        return f

    turns = turn_trial(math.nan)
    left = yield from _smallest_clearing(turns, -1, coarse, cfg.turn_step_deg)
    right = yield from _smallest_clearing(turns, 1, coarse, cfg.turn_step_deg)
    combined = False
    if mach is None and left is None and right is None:
        with_mach = turn_trial(lo)
        left = yield from _smallest_clearing(with_mach, -1, coarse, cfg.turn_step_deg)
        right = yield from _smallest_clearing(with_mach, 1, coarse, cfg.turn_step_deg)
        if left is not None or right is not None:
            combined, mach = True, lo
    kind, action = _first_action(mach, left, right, combined, bank)
    act_by = None
    if action is not None:
        latest = yield from _latest_onset(base, action, onset, contact_s)
        # Offered with a margin of one emission spacing and the bisection tolerance: the
        # trial's booms are laid every ``step_s``, so a boom between two of them can reach
        # the zone that much sooner. Measured in the bundled turn flight with the truth
        # harness: the trial's latest roll-out was 49 s, the truth's 44-48 s (issue 13).
        act_by = max(0.0, latest - cfg.step_s - ACT_BY_TOLERANCE_S)
    return Resolution(mach, left, right, combined, kind, act_by, base.trials)


def _first_action(mach: float | None, left: float | None, right: float | None,
                  combined: bool, bank: float) -> tuple[str | None, dict | None]:
    """The action the crew is offered first, as trial keywords (module notes)."""
    turns = [(v, side, name) for v, side, name in ((left, -1, "left"), (right, 1, "right"))
             if v is not None]
    if mach is not None and not combined:
        return "mach", {"target_mach": mach}
    if not turns:
        return None, None
    change, side, name = min(turns, key=lambda x: (x[0], x[1]))
    kw = {"bank": side * bank, "turn": side * math.radians(change)}
    if combined:
        kw["target_mach"] = mach if mach is not None else math.nan
        name = f"combined_{name}"
    return name, kw


def _latest_onset(base: TrialBase, action: dict, onset: float, contact_s: float
                  ) -> Generator[None, None, float]:
    """The latest onset (s) of ``action`` that still clears, by bisection (module notes)."""
    good = onset
    bad = min(max(contact_s, onset), base.horizon_s)  # the contact is within the look-ahead
    if bad - good <= ACT_BY_TOLERANCE_S:
        return good
    ok = base.clears(bad, **action)
    yield
    if ok:
        return bad
    while bad - good > ACT_BY_TOLERANCE_S:
        mid = 0.5 * (good + bad)
        ok = base.clears(mid, **action)
        yield
        if ok:
            good = mid
        else:
            bad = mid
    return good


def _smallest_clearing(clears: Callable[[float, int], Generator[None, None, bool]], side: int,
                       coarse: list[float], step: float
                       ) -> Generator[None, None, float | None]:
    """The first clearing heading change of the coarse list on one side, refined in
    ``step`` between the last failing one and it (deg); None when none clears."""
    lo, found = 0.0, None
    for a in coarse:
        if (yield from clears(a, side)):
            found = a
            break
        lo = a
    if found is not None:
        a = lo + step
        while a < found - 1e-9:  # refine between the last fail and first clear
            if (yield from clears(a, side)):
                found = a
                break
            a += step
    return found


def run_search(gen: Search, budget: int | None = None) -> Resolution | None:
    """Advance ``gen`` by at most ``budget`` trials (None: to the end); its result when it
    has finished, else None."""
    n = 0
    try:
        while budget is None or n < budget:
            next(gen)
            n += 1
    except StopIteration as stop:
        return stop.value  # type: ignore[no-any-return]
    return None


#: A Mach trial at the present Mach (to this much) clears only by its roll-out, Mach.
SAME_MACH = 0.005
#: Bank from which a roll-out is a turn resolution, rad (common practice, no source).
ROLL_OUT_BANK_RAD = math.radians(5.0)


def roll_out(r: Resolution, s: AirDataState) -> Resolution:
    """A Mach resolution at the present Mach while banked, said as what it is: the trial
    rolls the wings level after the reaction time and holds the speed, so what clears is
    the roll-out, on the heading reached then (a turn of 0 deg from the onset heading, in
    the direction of the bank). "M1.50" at Mach 1.50 would tell the crew nothing; the
    crew model would hold the bank and fly on into the zone."""
    if (r.resolve_mach is None or r.combined or r.resolve_mach < s.mach - SAME_MACH
            or abs(s.bank_rad) < ROLL_OUT_BANK_RAD):
        return r
    if s.bank_rad > 0.0:
        return dataclasses.replace(r, resolve_mach=None, turn_right_deg=0.0)
    return dataclasses.replace(r, resolve_mach=None, turn_left_deg=0.0)
