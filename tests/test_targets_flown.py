"""The selected targets in flown encounters, checked with the truth harness.

Campaign ``--known`` encounters of seed 1 (``advisory.bench.campaign_sample``), flown in
the closed loop with the truth of :mod:`advisory.bench.truth` (its own ray tracing of the
flown path, independent of the advisor's tables) and the truth's act-by search
(:mod:`advisory.bench.truth_act_by`). Before the targets were sent and used (main at
60b519a, the 1,000-encounter journal of stop 35), the advisor held a climb for the whole
look-ahead and a turn for ever:

* 3, 245, 316 (climbs that level off; 316 at 64,000 ft, Mach 1.6): the level-off is a
  push-over at 1 deg/s whose focus carries the booms over the zone's limit; the advisor
  named the zone only once level, as unavoidable, after the truth's act-by moment (first
  alert / act-by: 3 at 77.9 / 49.7 s, 245 at 45.1 / 43.9 s, 316 at 69.0 / 45.5 s).
* 4 (a 22.5-deg turn): the turn held for ever swept the carpet over the zone: a caution
  from 21.2 s and a warning from 49.7 s where no boom came.
"""

from __future__ import annotations

import dataclasses

import pytest

from advisory.bench.campaign_sample import sample_encounter
from advisory.bench.closed_loop import simulate
from advisory.bench.sim_scenario import scenario_from_dict


def _flown(index: int, limit_psf: float, crew: str = "ignore"):
    sc = scenario_from_dict(sample_encounter(1, index, known=True).doc)
    assert sc.zones[0].limit_psf == pytest.approx(limit_psf)  # the encounter meant
    assert sc.source.targets  # the campaign's feed sends the selected targets
    return simulate(dataclasses.replace(sc, crew=dataclasses.replace(sc.crew, mode=crew)))


@pytest.mark.parametrize("index, limit_psf", [
    pytest.param(3, 1.39, id="level-off-3"), pytest.param(245, 1.46, id="level-off-245"),
    pytest.param(316, 1.12, id="level-off-316")])
def test_a_level_off_focus_is_named_in_time_to_act(index, limit_psf) -> None:
    res = _flown(index, limit_psf).as_json()
    over = [e for e in res["exposures"] if e["exceeds_limit"]]
    assert over, "the truth has no booms over the limit: not the encounter meant"
    act = over[0]["truth_act_by"]
    assert act["avoidable"]
    # named at least the crew's reaction time before the truth's act-by moment
    assert act["alerted_in_time"], (
        f"first alert {act['first_alert_s']}, truth's act-by {act['act_by_s']:.1f} s")


def test_a_turn_that_rolls_out_short_of_the_zone_raises_no_alert() -> None:
    res = _flown(4, 0.87).as_json()
    assert res["exposures"] == []  # the truth: no boom reaches the zone
    assert res["nuisance_alerts"] == []
