"""The common part of a resolution search's trials, and each trial's emission times.

A :class:`TrialBase` holds what every trial of one search shares: the trajectory ahead's
start state as trial parameters (:data:`advisory.pipeline.trial.TRIAL_PARAMS`), the
table, the carpet strips and azimuth nodes the trials read, the zones and the limits the
trials hold their booms to (``limit_fraction`` of each zone's limit, the prediction's
error; :meth:`TrialBase.hold_to` changes it), and other ground levels' zones
(:class:`OtherGround`). :meth:`TrialBase.clears` flies one trial
(:func:`advisory.pipeline.trial.trial_clears_kernel`) on the emission times it needs:

* the trajectory's own (every ``step_s``), with the reaction time and the onset added
  (every boom emitted from the reaction time on is the trial's to keep off);
* a Mach trial's look-ahead stretched ``M0 / M`` times (at most :data:`MAX_STRETCH`), so
  it covers the same ground as the prediction, and the moments its deceleration passes
  the cutoff Mach plus each of :data:`NEAR_CUTOFF_EXCESS` (booms emitted just above
  cutoff travel far ahead and focus);
* every :data:`ROLL_SPACING_S` while the trial rolls (a roll sweeps the carpet's edge
  across the ground and folds it; emissions 3 s apart blur the fold).

The search itself (which trials, in what order) is :mod:`advisory.pipeline.resolutions`.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from advisory import units
from advisory.pipeline.config import AdvisorConfig
from advisory.pipeline.footprint import FootprintPredictor
from advisory.pipeline.trajectory import Trajectory
from advisory.pipeline.trial import TRIAL_PARAMS, trial_clears_kernel, trial_nodes
from advisory.pipeline.zones import ProjectedZones
from advisory.tables.table import BoomTable

__all__ = ["OtherGround", "TrialBase", "MAX_STRETCH", "NEAR_CUTOFF_EXCESS", "ROLL_SPACING_S"]

#: Emission spacing of a trial while it rolls, s (as the flown history's while the nose
#: moves, :data:`advisory.pipeline.history.PITCH_SPACING_S`; project choice).
ROLL_SPACING_S = 1.0
#: Longest stretch of a Mach trial's look-ahead (:meth:`TrialBase.stretch`).
MAX_STRETCH = 2.0
#: Mach excesses over cutoff at which a deceleration's trial also emits (the table's
#: near-cutoff rows are this fine too; project choice).
NEAR_CUTOFF_EXCESS = np.array([0.0005, 0.001, 0.002, 0.003, 0.005, 0.008, 0.012, 0.02,
                               0.03, 0.05])


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
        #: The fraction of each zone's limit the trials hold the booms to.
        self.fraction = cfg.limit_fraction
        self._other_nodes = [trial_nodes(g.strips) for g in self.others]

    def hold_to(self, fraction: float) -> bool:
        """Hold the trials' booms to ``fraction`` of each zone's limit from now on; False
        (nothing changed) when no zone has a limit above 0 or the fraction is the same."""
        limits = [self.pz.limit_pa, *(g.pz.limit_pa for g in self.others)]
        if fraction == self.fraction or not any(bool(np.any(x > 0.0)) for x in limits):
            return False
        self.fraction = fraction
        self.limit_pa = np.ascontiguousarray(self.pz.limit_pa * fraction)
        self._other_limits = [np.ascontiguousarray(g.pz.limit_pa * fraction)
                              for g in self.others]
        return True

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

    def _roll_times(self, onset: float, bank: float) -> list[float]:
        """Emission times every :data:`ROLL_SPACING_S` while the trial rolls from the
        present bank to ``bank`` (rad; NaN: wings level) after ``onset``: a roll sweeps
        the carpet's edge across the ground, and booms 3 s apart blur the fold it makes
        (found on campaign --known, seed 2, encounter 28, with the 1-deg truth: a
        roll-out's booms folded onto a zone at 1.82 psf, limit 0.58, between the trial's
        emissions)."""
        roll_s = abs((0.0 if math.isnan(bank) else bank) - self.params[3]) / self.params[19]
        n = int(roll_s / ROLL_SPACING_S)
        return [onset + k * ROLL_SPACING_S for k in range(1, n + 1)] + [onset + roll_s]

    def _judged_from(self, onset: float, target_mach: float,
                     bank: float = math.nan) -> tuple[np.ndarray, int]:
        """The emission times of a trial (the stretched ones and the near-cutoff moments
        for a Mach trial) with the reaction time and the onset added, and the index of
        the first judged one (the reaction time's). Every boom emitted from the reaction
        time on is the trial's to keep off (those before it are the advisor's
        unavoidable ones); on the ``step_s`` grid alone the emissions between the
        reaction time and the next grid time went unjudged, and a crew acting at the last
        moment put them into the zone (campaign --known, seed 1, encounter 11).

        The grids with the reaction time are made once per search (:attr:`t_judged`);
        a trial only merges its onset (and near-cutoff moments) in."""
        rolls = self._roll_times(onset, bank)
        if math.isnan(target_mach):
            t = _merged(self.t_judged, self._judged_set, [onset, *rolls])
        else:
            t = _merged(self._long_judged, self._long_set,
                        [*self._near_cutoff_times(onset, target_mach), onset, *rolls])
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
        t, k0 = self._judged_from(onset, target_mach, bank)
        if not self._clears_on(self.table, self.strips, self.nodes, self.pz, self.limit_pa,
                               self.focus_cap, t, k0, p, self.band, self.edge_ratio):
            return False
        own_cutoff = self.cutoff_now
        try:
            for g, cut, limit, nodes in zip(self.others, self.other_cutoffs,
                                            self._other_limits, self._other_nodes,
                                            strict=True):
                self.cutoff_now = cut  # its near-cutoff emissions at its own cutoff Mach
                t, k0 = self._judged_from(onset, target_mach, bank)
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
            t, k0, p, hdg_offset, has_wind, tb.ax_alt,
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
    if ahead.t_s.size > 1 and math.isnan(ahead.mach_hold):
        mdot = float((ahead.mach[-1] - ahead.mach[0]) / (ahead.t_s[-1] - ahead.t_s[0]))
    elif ahead.t_s.size > 1:  # the change stops at the selected Mach: its first step's rate
        mdot = float((ahead.mach[1] - ahead.mach[0]) / (ahead.t_s[1] - ahead.t_s[0]))
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
    p[14:20] = (cfg.reaction_s, math.nan, cfg.decel_mach_per_s, math.nan, math.nan,
                math.radians(cfg.roll_rate_deg_s))
    # the angle as predicted until the onset, then levelled by the crew at the capture rate
    p[20:] = (fpa, *ahead.pitch, math.radians(cfg.capture_pitch_rate_deg_s), ahead.mach_hold)
    return p
