"""The truth's act-by: how late a crew could still act and keep a zone's later booms off.

For an exposure (a zone whose booms exceed its limit when the crew ignores the cues) the
flight is flown again without the advisor, with a crew action taking over at a time
``t`` (the schedule's segments begun before ``t`` flown as planned, the later ones
dropped, as the crew's take-over does in the closed loop), and traced in truth
(:func:`advisory.bench.truth.trace_truth`, from the action's start on, a little more
coarsely than the closed loop's truth: :data:`EMISSION_S`, :data:`AZIMUTH_DEG`). The
action *clears* at ``t`` when no boom emitted from ``t`` on lands in the zone (or its
margin) above the zone's limit: the
booms emitted before were on their way already. The actions are the crew's own
(its deceleration, bank and roll rate): slowing to Mach 1.0, a 90-deg turn either way,
and each turn with the deceleration.

* ``visible_s``: when the flight led into the zone: 0 when the flight planned up to the
  start (then holding) already puts a boom over the limit, else the start of the first
  planned segment from which it does (:func:`visible_from`): no advisor can foresee a
  planned manoeuvre.
* ``avoidable``: some action started at ``visible_s`` plus the crew's reaction time
  clears.
* ``act_by_s``: the latest start that still clears, by bisection to
  :data:`TOLERANCE_S` between that earliest start and the first emission over the limit,
  with the actions that cleared at the earliest start (assumes a later start never
  clears when an earlier one does not: common practice, no source).
* ``alerted_in_time``: the first alert naming the zone (any alert status, ``unavoidable``
  included: a boom on its way names the zone too) came at least
  the reaction time before ``act_by_s``; or, when the act-by is the earliest start
  itself (the crew had to act the moment it could), at the advisor's first step after
  the flight led into the zone (:func:`first_step_s`: no advisor speaks before air data
  reach it; the act-by is known only to :data:`TOLERANCE_S`). Before, an alert at the
  first step, 6 ms after the start, counted as late against an act-by of 5.0 s with a
  5 s reaction time (campaign --known, seed 1, encounter 223).

This module is the bench's; the core never imports it. ADVISORY AID ONLY: not certified
flight software; local regulations and licensed practice govern supersonic flight.
"""

from __future__ import annotations

import math
from typing import Any

from advisory.bench.flight import FlightState, FlightTrack, Pilot, Segment
from advisory.bench.scoring import zone_hits
from advisory.bench.sim_scenario import Scenario
from advisory.bench.sim_world import World
from advisory.bench.truth import TruthSettings, trace_truth
from advisory.bench.truth_zones import TruthZone

#: Precision of the act-by bisection, s.
TOLERANCE_S = 1.0
#: Longest internal simulator step, s (as the closed loop's).
STEP_S = 0.025
#: Heading change of the turn actions, deg.
TURN_DEG = 90.0
#: The act-by's truth flights are traced at least this coarsely (emission spacing, s;
#: azimuth step, deg; every second atmosphere node, which moves overpressures by under
#: 0.05 %, :class:`advisory.bench.truth.TruthSettings`): a campaign flies a few dozen of
#: them per avoidable exposure (project choice).
EMISSION_S = 0.25
AZIMUTH_DEG = 2.0


def actions(sc: Scenario) -> dict[str, tuple[Segment, ...]]:
    """The crew's actions, by name: the segments it takes over with (module notes)."""
    c = sc.crew
    slow = Segment("mach", target_mach=1.0, mach_rate_per_s=c.decel_mach_per_s)

    def turn(sign: float) -> Segment:
        return Segment("turn", bank_deg=sign * c.bank_deg, roll_rate_deg_s=c.roll_rate_deg_s,
                       heading_change_deg=sign * TURN_DEG)

    return {"mach": (slow,), "left": (turn(-1.0),), "right": (turn(1.0),),
            "mach_left": (slow, turn(-1.0)), "mach_right": (slow, turn(1.0))}


def peak_after(sc: Scenario, world: World, zone: TruthZone, t_act: float,
               segments: tuple[Segment, ...], schedule: tuple[Segment, ...] | None = None
               ) -> float:
    """Peak overpressure (psf) in ``zone`` of the booms emitted from ``t_act`` on, with the
    crew taking over with ``segments`` at ``t_act`` (none: the schedule flown on), the
    scenario's schedule or ``schedule`` flown before (0 when none lands)."""
    st = sc.start
    state = FlightState(world.true_atmosphere, st.lat_deg, st.lon_deg, st.alt_ft, st.mach,
                        st.heading_deg, st.fpa_deg, st.bank_deg)
    pilot = Pilot(sc.schedule if schedule is None else schedule)
    track = FlightTrack()
    n = int(math.ceil(sc.duration_s / STEP_S))
    dt = sc.duration_s / n
    acted = not segments
    for i in range(n + 1):
        t = i * dt
        if not acted and t >= t_act - 0.5 * dt:
            for seg in segments:
                pilot.take_over(seg, state)
            acted = True
        pilot.update(state, dt)
        track.add(state)
        state.step(dt, t)
    # only the booms emitted from the action on are judged: trace those (and one second
    # before, for the tube areas' differences at the first of them)
    track.rows = [r for r in track.rows if r[0] >= t_act - 1.0]
    path = track.flown_path(world.origin_deg, max(sc.truth.emission_interval_s, EMISSION_S))
    settings = TruthSettings(azimuth_step_deg=max(sc.truth.azimuth_step_deg, AZIMUTH_DEG),
                             level_stride=2)
    truth = trace_truth(path, world.true_atmosphere, world.aircraft, [zone],
                        settings=settings)
    emitted, _, psf, _ = zone_hits(truth, zone)
    after = psf[emitted >= t_act - 1e-9]
    return float(after.max()) if after.size else 0.0


def schedule_until(sc: Scenario, t_s: float) -> tuple[Segment, ...]:
    """The schedule's segments begun by ``t_s``: those with a fixed start at or before it
    and, in the queue's order, the ones without a fixed start before the first later one
    (the flight as it was planned up to ``t_s``, holding afterwards)."""
    out = []
    for seg in sc.schedule:
        if seg.at_s is not None and seg.at_s > t_s:
            break
        out.append(seg)
    return tuple(out)


def visible_from(sc: Scenario, world: World, zone: TruthZone, first_over_s: float
                 ) -> tuple[float, int]:
    """When the flight led into the zone (s) and the truth flights flown to find it.

    The candidates are 0 and the fixed starts of the schedule's segments up to
    ``first_over_s``; the first candidate whose flight (the schedule up to it, then
    holding: :func:`schedule_until`) puts a boom over the zone's limit is the answer. A
    planned manoeuvre that leads into the zone is not foreseeable before it begins; a
    flight already on its way into the zone is, whatever is planned later."""
    starts = sorted({0.0, *(float(seg.at_s) for seg in sc.schedule
                            if seg.at_s is not None and seg.at_s <= first_over_s)})
    flights = 0
    for c in starts[:-1]:
        flights += 1
        if peak_after(sc, world, zone, 0.0, (), schedule_until(sc, c)) > zone.limit_psf:
            return c, flights
    return starts[-1], flights


def truth_act_by(sc: Scenario, world: World, exposure: dict[str, Any], emitted_over: float
                 ) -> dict[str, Any]:
    """The truth's act-by of one exposure (module notes).

    Parameters
    ----------
    sc, world : Scenario, World
        The encounter as flown with the crew ignoring the cues.
    exposure : dict
        Its exposure (:func:`advisory.bench.scoring.score_exposure`): ``zone_id`` and the
        first alerts.
    emitted_over : float
        Emission time of the first boom over the zone's limit, s.

    Returns
    -------
    dict
        ``visible_s``, ``earliest_s``, ``avoidable``, ``action`` (the name of the action
        that cleared at ``act_by_s``, the last one the bisection found clearing; None
        when not avoidable), ``act_by_s`` (None when not
        avoidable), ``first_alert_s``, ``alerted_in_time`` (None when not avoidable),
        ``flights`` (truth flights flown).
    """
    zone = next(z for z in world.truth_zones if z.zone_id == exposure["zone_id"])
    react = sc.crew.reaction_s
    visible, flights = visible_from(sc, world, zone, emitted_over)
    earliest = visible + react
    alerts = [exposure.get(k) for k in ("first_advisory_s", "first_caution_s",
                                         "first_warning_s", "first_unavoidable_s")]
    first_alert = min((a for a in alerts if a is not None), default=None)
    out: dict[str, Any] = {"visible_s": visible, "earliest_s": earliest, "avoidable": False,
                           "action": None, "act_by_s": None, "first_alert_s": first_alert,
                           "alerted_in_time": None, "flights": flights}
    if earliest >= emitted_over:
        return out
    acts = actions(sc)

    def clears(t: float, names: list[str]) -> list[str]:
        ok = []
        for name in names:
            out["flights"] += 1
            if peak_after(sc, world, zone, t, acts[name]) <= zone.limit_psf:
                ok.append(name)
                break  # one clearing action is enough at this start
        return ok

    good = clears(earliest, list(acts))
    if not good:
        return out
    names = good + [n for n in acts if n not in good]
    lo, hi = earliest, emitted_over
    best = good[0]
    while hi - lo > TOLERANCE_S:
        mid = 0.5 * (lo + hi)
        ok = clears(mid, names)
        if ok:
            lo, best = mid, ok[0]
            names = ok + [n for n in names if n not in ok]
        else:
            hi = mid
    out.update(avoidable=True, action=best, act_by_s=lo,
               alerted_in_time=alerted_in_time(first_alert, lo, visible, react,
                                               first_step_s(sc)))
    return out


def alerted_in_time(first_alert: float | None, act_by: float, visible: float,
                    react: float, first_step: float) -> bool:
    """Whether the first alert ``first_alert`` (s, None: none) came the reaction time
    ``react`` before ``act_by``, or, when ``act_by`` is the earliest start
    (``visible + react``), by the advisor's first step ``first_step`` (s after a sample
    is sent) after ``visible`` (module notes)."""
    if first_alert is None:
        return False
    deadline = act_by - react
    if act_by <= visible + react:  # act at once: the first step is as soon as any can be
        deadline = max(deadline, visible + first_step)
    return first_alert <= deadline


def first_step_s(sc: Scenario) -> float:
    """Latest time after a sample is sent that the advisor has stepped on it, s: the
    source's latency and jitter plus one advisor step period (module notes)."""
    return sc.source.latency_s + sc.source.jitter_s + 1.0 / sc.advisor.rate_hz
