"""The truth's act-by (issue 13, done-when: "every avoidable exposure alerted at least the
configured reaction time before its act-by moment").

The act-by is measured with the truth (:mod:`advisory.bench.truth`: rays traced per
emission through the true atmosphere, independent of the advisor's tables) along flights
the bench simulator flies without the advisor; these tests hold it to its definition
(docs/scenarios.md): an action started at the act-by keeps every later boom under the
zone's limit, one started a little later does not.
"""

from __future__ import annotations

from dataclasses import replace

import pytest

from advisory.bench.campaign_sample import sample_encounter
from advisory.bench.closed_loop import simulate
from advisory.bench.flight import Segment
from advisory.bench.scoring import zone_hits
from advisory.bench.sim_scenario import scenario_from_dict
from advisory.bench.sim_world import build_world
from advisory.bench.truth_act_by import TOLERANCE_S, actions, peak_after, schedule_until


def test_the_flight_as_planned_up_to_a_moment_keeps_what_had_begun():
    # worked by hand from the definition: segments at 10 s, an untimed hold after it,
    # 40 s and 80 s
    sc = scenario_from_dict(sample_encounter(1, 40, known=True).doc)
    turn = Segment("turn", at_s=10.0, bank_deg=20.0, heading_change_deg=10.0)
    hold = Segment("hold", duration_s=5.0)
    climb = Segment("climb", at_s=40.0, fpa_deg=-2.0, target_alt_ft=40000.0)
    slow = Segment("mach", at_s=80.0, target_mach=1.5, mach_rate_per_s=0.01)
    sc = replace(sc, schedule=(turn, hold, climb, slow))
    assert schedule_until(sc, 5.0) == ()
    assert schedule_until(sc, 10.0) == (turn, hold)
    assert schedule_until(sc, 50.0) == (turn, hold, climb)
    assert schedule_until(sc, 100.0) == (turn, hold, climb, slow)


def _ignore_run(index: int):
    doc = sample_encounter(1, index, known=True).doc
    doc["crew"]["mode"] = "ignore"
    for zone in doc["zones"]:  # as known encounters were flown before they kept terrain
        zone["ground_elevation_ft"] = 0.0
    sc = scenario_from_dict(doc)
    world = build_world(sc, quiet=True, build_workers=1)
    return sc, world, simulate(sc, world=world)


@pytest.mark.slow
def test_an_avoidable_exposure_holds_at_its_act_by_and_not_after():
    # campaign --known, seed 1, encounter 40: Mach 1.91 at 47,700 ft, a zone off the track
    # with a 0.51 psf limit, no manoeuvre planned. Against the truth itself: the action
    # found keeps every boom emitted from the act-by on under the limit; started two
    # bisection steps later, no action of the crew's does.
    sc, world, res = _ignore_run(40)
    (e,) = [e for e in res.score.exposures if e["exceeds_limit"]]
    act = e["truth_act_by"]
    zone = world.truth_zones[0]
    assert act["visible_s"] == 0.0 and act["earliest_s"] == sc.crew.reaction_s
    assert act["avoidable"] and act["action"] in actions(sc)
    t = act["act_by_s"]
    emitted, _, psf, _ = zone_hits(res.truth, zone)
    assert act["earliest_s"] <= t < float(emitted[psf > zone.limit_psf].min())
    assert peak_after(sc, world, zone, t, actions(sc)[act["action"]]) <= zone.limit_psf
    later = t + 2.0 * TOLERANCE_S
    assert all(peak_after(sc, world, zone, later, segs) > zone.limit_psf
               for segs in actions(sc).values())
    assert act["alerted_in_time"] == (act["first_alert_s"] <= t - sc.crew.reaction_s)
    # the follow run carries no act-by (it is the ignore run's question)
    doc = sample_encounter(1, 40, known=True).doc
    doc["crew"]["mode"] = "follow"
    follow = simulate(scenario_from_dict(doc), world=world)
    assert all("truth_act_by" not in x for x in follow.score.exposures)


@pytest.mark.slow
def test_a_flight_already_heading_into_the_zone_is_avoidable_before_its_planned_turn():
    # encounter 15: Mach 1.89 at 33,200 ft toward a zone (1.36 psf limit), a 40-deg turn
    # planned at 37.3 s. The straight flight alone puts a boom over the limit in the
    # zone, so the flight led into it from the start (visible at 0, not at the turn):
    # the crew's own deceleration from the reaction time on keeps the later booms under
    # the limit in truth.
    sc, world, res = _ignore_run(15)
    (e,) = [e for e in res.score.exposures if e["exceeds_limit"]]
    act = e["truth_act_by"]
    assert act["visible_s"] == 0.0 and act["avoidable"], act
    zone = world.truth_zones[0]
    straight = peak_after(sc, world, zone, 0.0, (), schedule_until(sc, 0.0))
    assert straight > zone.limit_psf


@pytest.mark.slow
def test_a_planned_push_over_near_cutoff_is_not_avoidable_before_it_begins():
    # encounter 18: level at Mach 1.144 (no boom reaches the ground) until a descent
    # planned at 37.1 s; the first boom over the limit is emitted before the crew could
    # react to it (37.1 + 5 s), so no advisor could have given the crew time to act.
    sc, world, res = _ignore_run(18)
    (e,) = [e for e in res.score.exposures if e["exceeds_limit"]]
    act = e["truth_act_by"]
    assert act["visible_s"] == pytest.approx(37.1)
    assert not act["avoidable"] and act["act_by_s"] is None
    assert act["flights"] == 1  # the level flight without the descent: no boom over it


def test_an_alert_at_the_first_step_is_in_time_when_the_crew_must_act_at_once():
    # The definition (module notes of advisory.bench.truth_act_by, docs/scenarios.md),
    # worked by hand: a 5 s reaction time and an act-by at the earliest start, 5.0 s (the
    # flight led into the zone from the start, visible at 0): the crew had to act the
    # moment it could, and an alert at the advisor's first step (campaign --known, seed
    # 1, encounter 223: 0.006 s; the step lands within 0.004 + 0.003 + 0.1 s of a sample
    # being sent) is as soon as any advisor can speak. Before, it counted as late.
    from advisory.bench.truth_act_by import alerted_in_time, first_step_s

    sc = scenario_from_dict(sample_encounter(1, 223, known=True).doc)
    step = first_step_s(sc)
    assert step == pytest.approx(0.004 + 0.003 + 1.0 / 10.0)
    assert alerted_in_time(0.006, 5.0, 0.0, 5.0, step)
    assert not alerted_in_time(0.2, 5.0, 0.0, 5.0, step)  # after the first step
    assert not alerted_in_time(None, 5.0, 0.0, 5.0, step)
    # an act-by later than the earliest start keeps the reaction time in full
    assert alerted_in_time(2.0, 7.0, 0.0, 5.0, step)
    assert not alerted_in_time(2.01, 7.0, 0.0, 5.0, step)
    # visible from a planned manoeuvre at 30 s: the first step after it
    assert alerted_in_time(30.05, 35.0, 30.0, 5.0, step)
    assert not alerted_in_time(29.0 + 2.0, 35.0, 30.0, 5.0, step)
