"""The booms still in the air: the flown history an advisor keeps, and the emission
points it places from it (:mod:`.history` holds the buffer and the joining).

:class:`InAir` is the part of :class:`advisory.pipeline.ground_advisor.GroundAdvisor`
that remembers what was flown: every state stepped on is offered to a
:class:`~advisory.pipeline.history.FlownHistory` (one entry per emission spacing, closer
while the flight-path angle changes, with the table rows of its state and the table
generation in force then), the window reaches back the longest travel time of the
present footprint and of the states held (at most ``in_air_s``), and the part of that
window older than the history (a fresh advisor) is the present state flown backwards
(:func:`~advisory.pipeline.history.past_trajectory`), kept apart from the flown part by
a separator.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import math

import numpy as np

from advisory.pipeline.airdata import AirDataState
from advisory.pipeline.config import AdvisorConfig
from advisory.pipeline.footprint import FootprintPredictor
from advisory.pipeline.history import FlownHistory, FlownPast, join_past, past_trajectory
from advisory.pipeline.trajectory import Trajectory, subset_trajectory
from advisory.tables import lookup as lk
from advisory.tables.table import BoomTable

__all__ = ["InAir", "state_time"]


def state_time(s: AirDataState, now: float) -> float:
    """The state's own time (s): its UTC stamp, else its receive time, else now."""
    if s.utc_s is not None:
        return s.utc_s
    return s.rx_monotonic if s.rx_monotonic is not None else now


class InAir:
    """The flown history of one advisor and the emission points still in the air.

    Parameters
    ----------
    table : BoomTable
        The live table (its azimuth nodes and longest travel time).
    config : AdvisorConfig
        ``step_s`` (the emission spacing) and ``in_air_s`` (the absolute cap).
    """

    def __init__(self, table: BoomTable, config: AdvisorConfig) -> None:
        self.config = config
        #: Generation of the live table (stored with each flown-history entry).
        self.table_gen = 0
        #: The states flown, from which the booms still in the air are placed.
        self.history = FlownHistory(table.eta.size, config.step_s, self._window_s(table))
        #: the fallback past's lookups (own buffers: its length differs from the ahead's)
        self.fallback_lookup = FootprintPredictor(table)

    def _window_s(self, table: BoomTable) -> float:
        """How far back the flown history must reach: the table's longest travel time
        (over every cell) plus two emission spacings, at most ``in_air_s``."""
        return min(self.config.in_air_s, table.max_travel_time_s + 2.0 * self.config.step_s)

    def new_table(self, table: BoomTable) -> None:
        """A table came in: entries keep the rows of the table in force when flown; the
        buffer grows for longer travel times (emptied only when the azimuth nodes
        differ, since rows of two node sets cannot be laid side by side)."""
        self.table_gen += 1
        self.fallback_lookup = FootprintPredictor(table)
        window = self._window_s(table)
        if table.eta.size != self.history.n_eta:
            self.history = FlownHistory(table.eta.size, self.config.step_s, window)
        else:
            self.history.grow(window)

    def _back_s(self, present_rows: np.ndarray, present_code: int) -> float:
        """How far back booms may still be on their way down: the longest travel time of
        the present footprint (its table rows) and of the flown states held, plus one
        step (at most ``in_air_s``); with neither on the ground, the table's longest."""
        h = self.history
        longest = float(np.max(h.travel[:len(h)])) if len(h) else -math.inf
        if present_code != lk.NO_BOOM:
            longest = max(longest, float(np.max(present_rows[:, lk.Q_TIME])))
        if not math.isfinite(longest):
            return h.window_s
        return min(self.config.in_air_s, longest + self.config.step_s)

    def past(self, ahead: FlownPast, t_now: float) -> tuple[FlownPast, int]:
        """The emission points whose booms may still be in the air, from the flown
        history, followed by those ahead (with their lookups), and the index of the
        present one (module notes)."""
        cfg, h = self.config, self.history
        win = h.window(t_now, ahead.traj.frame)
        back_s = self._back_s(ahead.rows[0], int(ahead.codes[0]))
        have_s = t_now - h.oldest_t if len(h) else 0.0  # how far back the history goes
        fallback = None
        if have_s < back_s - 1e-6:
            back = past_trajectory(ahead.traj, back_s, cfg.step_s)
            keep = np.flatnonzero(back.t_s < -have_s - 0.5 * cfg.step_s)
            if keep.size:
                part = subset_trajectory(back, keep)
                fallback = FlownPast(part, *self.fallback_lookup.lookup(part))  # copied
        tail_break = win is not None and t_now - h.newest_t > h.gap_s
        return join_past(win, fallback, ahead, tail_break)

    def remember(self, s: AirDataState, t_now: float, ahead: Trajectory, rows: np.ndarray,
                 code: int, cutoff: float) -> None:
        """Offer the present state (with its table rows) to the flown history."""
        h = self.history
        if not h.due(t_now, s.fpa_rad):
            return  # not due (the common case: no work)
        e0, n0 = float(ahead.east_m[0]), float(ahead.north_m[0])
        track = s.track_rad
        if track is None:
            track = float(ahead.frame.grid_to_azimuth(e0, n0, float(ahead.track_grid_rad[0])))
        h.offer(t_now, s.lat_rad, s.lon_rad,
                (s.alt_m, s.mach, float(ahead.tas_mps[0]), s.heading_rad, track,
                 float(ahead.ground_speed_mps[0]), s.fpa_rad, s.bank_rad,
                 float(ahead.turn_rate_rad_s[0])),
                self.table_gen, rows, code, cutoff)
