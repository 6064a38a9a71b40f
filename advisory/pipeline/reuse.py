"""When a step may reuse the last prediction, and the advisory it then gives.

A prediction (the trajectory ahead, the carpet of every emission past and ahead, the
conflicts, the resolution trials) looks 300 s ahead with emissions ``step_s`` (3 s)
apart; a tenth of a second of flight that goes as predicted changes none of it beyond
its own spacing, yet the loop steps at 10-50 Hz. So a step reuses the last prediction,
its times counted down by the air data's own time since (:func:`counted_down`), when all
of these hold; otherwise it predicts again:

* ``predict_every_s`` (:class:`advisory.pipeline.config.AdvisorConfig`) is above 0 and
  less than it has passed since the prediction, in the air data's time and in the loop's
  clock (a source that stops its clock does not freeze the advice);
* the prediction was not ``unavailable``, and the table, the zones' projection and the
  flown history's spacing (:meth:`advisory.pipeline.history.FlownHistory.due`) have not
  moved on;
* the state flies as predicted (:func:`departure`): Mach, position, altitude,
  flight-path angle, bank, heading and track, ground speed where the trajectory ahead
  has them at that time, and the inputs that shape the trajectory (wind, Mach rate,
  pitch rate, load factor, the selected altitude, heading and Mach) unchanged; and the
  present condition is the prediction's (Mach, altitude, flight-path angle and heading
  within the same tolerances of the state predicted from), since the advisory's own
  fields describe it (the cutoff Mach, the Mach kept off the ground, the probability that
  the boom reaches the ground, near cutoff): a slow-down, climb or turn, even as
  predicted, predicts every few steps (in the bundled coastal flight, a held probability
  read 0.70 where the slowing aircraft's was 0.27);
* no counted time reaches zero (a contact, an act-by moment) and the level would stay
  as it is (no pending release of a level's hysteresis: :mod:`advisory.pipeline.levels`).

A manoeuvre shows at once (a roll-in changes the bank by ``roll_rate`` / step rate each
step), so during one nearly every step predicts, as before; in steady, level, straight
flight one step in ``predict_every_s`` times the step rate does. The replay runs
the same code (``boom-advisory replay``), so a replay reproduces the live advice. What a
reused step cannot see is what only the passing time changes within the prediction's own
spacing: a boom whose emission crosses the reaction time and becomes unavoidable is named
up to ``predict_every_s`` later than predicting every step would (0.1 s in the bundled
crosswind flight; the emissions themselves are ``step_s`` apart, so either way the moment
is known to about that), and a contact time counts down smoothly where predicting every
step jumps with the emissions' phase (up to 2.5 s apart in that flight;
``tests/test_replay_golden.py`` lists every field that moved).

The tolerances are project choices (common practice, no source), each sized so that the
carpet it would move stays well inside the prediction's own spacing (3 s of flight, about
1.4 km at Mach 1.6): Mach 0.002 (near the cutoff the carpet's edge moves 1-1.5 km per
0.01, :mod:`advisory.pipeline.resolutions`: 0.3 km), 200 m of position, 30 m of
altitude, 0.1 deg of flight-path angle (a 250-m height change over the look-ahead at
Mach 1.6), 0.25 deg of bank (0.005 deg/s of turn rate at Mach 1.6: 1.6 deg of heading
over the look-ahead), 0.2 deg of heading and track (0.5 km at 150 km), 2 m/s of ground
speed and wind.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

import numpy as np

from advisory.pipeline.airdata import AirDataState
from advisory.pipeline.results import Advisory
from advisory.pipeline.trajectory import Trajectory
from advisory.pipeline.zones import ProjectedZones
from advisory.tables.table import BoomTable

__all__ = ["Prediction", "departure", "counted_down", "MACH_TOL", "POSITION_TOL_M"]

MACH_TOL = 0.002  #: Mach
POSITION_TOL_M = 200.0  #: horizontal position, m
ALT_TOL_M = 30.0  #: geometric height, m
FPA_TOL_RAD = math.radians(0.1)  #: flight-path angle, rad
BANK_TOL_RAD = math.radians(0.25)  #: bank, rad
DIRECTION_TOL_RAD = math.radians(0.2)  #: heading and track, rad
SPEED_TOL_MPS = 2.0  #: ground speed and each wind component, m/s
#: The inputs that shape the trajectory ahead, each with the change that calls for a new
#: prediction (Mach rate 1/s, pitch rate rad/s, load factor g, selected altitude m,
#: selected heading rad, selected Mach).
SHAPING_TOLS = (("wind_east_mps", SPEED_TOL_MPS), ("wind_north_mps", SPEED_TOL_MPS),
                ("mach_rate_per_s", 2e-4), ("pitch_rate_rad_s", math.radians(0.05)),
                ("load_factor", 0.01), ("selected_alt_m", 1.0),
                ("selected_heading_rad", math.radians(0.1)), ("selected_mach", 0.001))


@dataclass(frozen=True)
class Prediction:
    """What a predicting step leaves for the steps that reuse it.

    Attributes
    ----------
    t_state, now : float
        The state's own time and the loop's monotonic clock at the prediction, s.
    state : AirDataState
        The state predicted from (altitude as geometric height).
    ahead : Trajectory
        The trajectory ahead predicted from it (no past).
    zones : ProjectedZones
        The zones' projection it was judged in.
    table : BoomTable
        The table in force.
    advisory : Advisory
        Its advisory.
    level_act_by : float or None
        The act-by time the alert level was set on, s (None: no avoidable contact).
    """

    t_state: float
    now: float
    state: AirDataState
    ahead: Trajectory
    zones: ProjectedZones
    table: BoomTable
    advisory: Advisory
    level_act_by: float | None


def _wrap(a: float) -> float:
    """An angle difference in [-pi, pi), rad."""
    return (a + math.pi) % (2.0 * math.pi) - math.pi


def _direction_change(grid: np.ndarray, t: np.ndarray, dt: float) -> float:
    """The change of a predicted direction (grid bearing, rad) from its start to ``dt``
    (linear between the two samples around it, the shorter way round)."""
    j = int(np.searchsorted(t, dt))
    if j == 0:
        return 0.0
    j = min(j, t.size - 1)
    frac = (dt - t[j - 1]) / (t[j] - t[j - 1])
    at = float(grid[j - 1]) + frac * _wrap(float(grid[j] - grid[j - 1]))
    return _wrap(at - float(grid[0]))


def departure(p: Prediction, s: AirDataState, dt: float) -> str:
    """What in state ``s``, ``dt`` seconds after the prediction ``p``, departs from it
    beyond the tolerances (module notes): '' when nothing does, else the first quantity's
    name (for tests and diagnostics)."""
    a = p.ahead
    t = a.t_s
    if not 0.0 <= dt <= float(t[-1]):
        return "time"

    def at(v: np.ndarray) -> float:
        return float(np.interp(dt, t, v))

    if abs(s.mach - at(a.mach)) > MACH_TOL:
        return "mach"
    if abs(s.alt_m - at(a.alt_m)) > ALT_TOL_M:
        return "altitude"
    if abs(s.fpa_rad - at(a.fpa_rad)) > FPA_TOL_RAD:
        return "flight-path angle"
    if abs(s.bank_rad - at(a.bank_rad)) > BANK_TOL_RAD:
        return "bank"
    if abs(s.gs_mps - at(a.ground_speed_mps)) > SPEED_TOL_MPS:
        return "ground speed"
    # directions: the change flown against the change predicted (grid and true bearings
    # turn alike over a second of flight)
    turned = _wrap(s.heading_rad - p.state.heading_rad)
    if abs(_wrap(turned - _direction_change(a.heading_grid_rad, t, dt))) > DIRECTION_TOL_RAD:
        return "heading"
    if s.track_rad is not None or p.state.track_rad is not None:
        if s.track_rad is None or p.state.track_rad is None:
            return "track"
        turned = _wrap(s.track_rad - p.state.track_rad)
        if abs(_wrap(turned - _direction_change(a.track_grid_rad, t, dt))) > DIRECTION_TOL_RAD:
            return "track"
    for name, tol in SHAPING_TOLS:
        now_v, then_v = getattr(s, name), getattr(p.state, name)
        if (now_v is None) != (then_v is None):
            return name
        if now_v is not None and abs(now_v - then_v) > tol:
            return name
    e, n = a.frame.to_enu(s.lat_rad, s.lon_rad)
    if math.hypot(float(e) - at(a.east_m), float(n) - at(a.north_m)) > POSITION_TOL_M:
        return "position"
    # the present condition, which the advisory's own fields describe (the cutoff Mach,
    # the Mach kept off the ground, the boom's probability, near cutoff): a predicted
    # Mach, climb or turn changes it as it goes
    then = p.state
    for name, now_v, then_v, tol in (
            ("mach change", s.mach, then.mach, MACH_TOL),
            ("altitude change", s.alt_m, then.alt_m, ALT_TOL_M),
            ("flight-path angle change", s.fpa_rad, then.fpa_rad, FPA_TOL_RAD),
            ("heading change", _wrap(s.heading_rad - then.heading_rad), 0.0,
             DIRECTION_TOL_RAD)):
        if abs(now_v - then_v) > tol:
            return name
    return ""


def counted_down(adv: Advisory, dt: float, utc_s: float | None, tables_stale: bool
                 ) -> Advisory | None:
    """Advisory ``adv`` ``dt`` seconds later: its contact and act-by times (and every
    conflict's) less ``dt``, stamped ``utc_s``; None when a positive time would reach zero
    (a contact or an act-by moment comes: the step predicts again). A time already at zero
    (a boom held as arriving, an action due now) stays there."""
    def less(v: float) -> float:
        if v <= 0.0:
            return v
        if v - dt <= 0.0:
            raise _DueError
        return v - dt

    try:
        ttc = None if adv.time_to_contact_s is None else less(adv.time_to_contact_s)
        act = None if adv.act_by_s is None else less(adv.act_by_s)
        conflicts = tuple(dataclasses.replace(c, time_to_contact_s=less(c.time_to_contact_s))
                          for c in adv.conflicts)
    except _DueError:
        return None
    return dataclasses.replace(adv, time_to_contact_s=ttc, act_by_s=act, conflicts=conflicts,
                               utc_s=utc_s, tables_stale=tables_stale)


class _DueError(Exception):
    """A counted time reached zero."""
