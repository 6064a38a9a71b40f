"""Scoring of a flight against hand-made truths and status segments.

Every expected value below is worked out by hand in the comments from the definitions
of docs/scenarios.md ("What simulate reports"); none comes from the code under test.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from advisory.bench.expect import Segment
from advisory.bench.scoring import (
    FlightScore,
    alert_episodes,
    intersect_spans,
    merge_spans,
    score_flight,
)
from advisory.bench.truth import BoomEvents, Truth
from advisory.bench.truth_zones import TruthZone


def _square(x0: float, y0: float, side: float) -> np.ndarray:
    return np.array([[x0, y0], [x0 + side, y0], [x0 + side, y0 + side], [x0, y0 + side]])


ZONE_A = TruthZone("town_a", (_square(0.0, 0.0, 1000.0),), limit_psf=0.0)
ZONE_B = TruthZone("town_b", (_square(10000.0, 0.0, 1000.0),), limit_psf=0.5)


def _events(rows: list[tuple[float, float, float, float, float]], elevation: float = 0.0
            ) -> BoomEvents:
    """Boom events from (emission_s, arrival_s, east_m, north_m, psf) rows."""
    a = np.array(rows, dtype=float).reshape(-1, 5)
    n = a.shape[0]
    return BoomEvents(
        ground_elevation_m=elevation, emission_time_s=a[:, 0], azimuth_rad=np.zeros(n),
        arrival_s=a[:, 1], east_m=a[:, 2], north_m=a[:, 3], lat_deg=np.full(n, math.nan),
        lon_deg=np.full(n, math.nan), overpressure_psf=a[:, 4], duration_ms=np.full(n, 100.0),
        focus=np.zeros(n, bool), amplification=np.ones(n), edge=np.zeros(n, bool))


def _truth(rows, elevation: float = 0.0) -> Truth:
    return Truth(maps={}, events={elevation: _events(rows, elevation)}, exposures=[])


# Four booms: three land in town_a, one (emitted 30 s) lands between the towns.
ROWS = [
    (10.0, 70.0, 500.0, 500.0, 1.0),
    (12.0, 75.0, 600.0, 600.0, 1.5),
    (30.0, 95.0, 5000.0, 5000.0, 2.0),
    (50.0, 110.0, 100.0, 900.0, 0.8),
]

SEGMENTS = [
    Segment("clear", None, 0.0, 20.0),
    Segment("advisory", "town_a", 20.0, 40.0),
    Segment("caution", "town_a", 40.0, 60.0),
    Segment("no_boom", None, 60.0, 100.0),
    Segment("unavailable", None, 100.0, 105.0),
    Segment("advisory", "town_b", 105.0, 115.0),
    Segment("caution", "town_b", 115.0, 120.0),
    Segment("clear", None, 120.0, 130.0),
]


def test_exposure_fields_worked_by_hand():
    score = score_flight(_truth(ROWS), SEGMENTS, reaction_s=5.0, zones=[ZONE_A, ZONE_B])
    assert isinstance(score, FlightScore)
    assert [e["zone_id"] for e in score.exposures] == ["town_a"]  # town_b: no boom lands
    e = score.exposures[0]
    assert e["first_arrival_s"] == pytest.approx(70.0)  # min(70, 75, 110)
    assert e["last_arrival_s"] == pytest.approx(110.0)  # max(70, 75, 110)
    assert e["peak_psf"] == pytest.approx(1.5)  # max(1.0, 1.5, 0.8); the 2.0 is outside
    assert e["exceeds_limit"] is True  # 1.5 > 0
    assert e["unavoidable_from_s"] == pytest.approx(10.0)  # earliest emission in the zone
    assert e["first_advisory_s"] == pytest.approx(20.0)
    assert e["first_caution_s"] == pytest.approx(40.0)
    assert e["first_warning_s"] is None
    assert e["lead_time_s"] == pytest.approx(-10.0)  # 10 - 20: the alert came after
    # On the way: [10, 70] u [12, 75] u [50, 110] = [10, 110]; quiet: [0, 20], [60, 100],
    # [120, 130]; their intersection: [10, 20] and [60, 100].
    assert e["missed"] == [[pytest.approx(10.0), pytest.approx(20.0)],
                           [pytest.approx(60.0), pytest.approx(100.0)]]
    # Alerted at 20 s, before the first arrival at 70 s, but the lead time -10 s is
    # shorter than the 5 s reaction time: late.
    assert e["outcome"] == "late"
    # town_b was alerted (advisory then caution, one episode 105-120 s) and no boom reached it.
    assert score.nuisance_alerts == [{"zone_id": "town_b", "t0_s": 105.0, "t1_s": 120.0,
                                      "level": "caution"}]
    assert score.unavailable_s == pytest.approx(5.0)  # 100-105 s
    doc = score.as_json()
    assert set(doc) == {"exposures", "nuisance_alerts", "unavailable_s"}
    assert set(doc["exposures"][0]) == {
        "zone_id", "first_arrival_s", "last_arrival_s", "peak_psf", "exceeds_limit",
        "unavoidable_from_s", "first_advisory_s", "first_caution_s", "first_warning_s",
        "first_unavoidable_s", "lead_time_s", "missed",
        "outcome",  # docs/scenarios.md, "What simulate reports"
        "first_arrival_inside_s", "peak_psf_inside"}  # the extras for the zone itself
    assert e["first_arrival_inside_s"] == pytest.approx(70.0)  # no margin: all inside
    assert e["peak_psf_inside"] == pytest.approx(1.5)


def test_truth_clock_is_shifted_by_t0():
    shifted = [(a + 1000.0, b + 1000.0, x, y, p) for a, b, x, y, p in ROWS]
    s0 = score_flight(_truth(ROWS), SEGMENTS, 5.0, zones=[ZONE_A])
    s1 = score_flight(_truth(shifted), SEGMENTS, 5.0, t0_s=1000.0, zones=[ZONE_A])
    assert s1.as_json() == s0.as_json()


def test_alerted_in_time_and_missed_outright():
    early = [Segment("caution", "town_a", 0.0, 100.0), Segment("clear", None, 100.0, 130.0)]
    e = score_flight(_truth(ROWS), early, 5.0, zones=[ZONE_A]).exposures[0]
    # First alert at 0 s; lead 10 - 0 = 10 s >= 5 s reaction: alerted. Quiet from 100 s
    # while the last boom (emitted 50 s) arrives at 110 s: missed [100, 110].
    assert e["lead_time_s"] == pytest.approx(10.0)
    assert e["outcome"] == "alerted"
    assert e["first_advisory_s"] is None and e["first_caution_s"] == 0.0
    assert e["missed"] == [[pytest.approx(100.0), pytest.approx(110.0)]]

    silent = [Segment("no_boom", None, 0.0, 130.0)]
    e = score_flight(_truth(ROWS), silent, 5.0, zones=[ZONE_A]).exposures[0]
    assert e["outcome"] == "missed" and e["lead_time_s"] is None
    assert e["missed"] == [[pytest.approx(10.0), pytest.approx(110.0)]]  # the whole way

    # An alert naming the zone only after its first arrival (70 s) is a miss too.
    after = [Segment("no_boom", None, 0.0, 80.0), Segment("warning", "town_a", 80.0, 130.0)]
    e = score_flight(_truth(ROWS), after, 5.0, zones=[ZONE_A]).exposures[0]
    assert e["outcome"] == "missed" and e["first_warning_s"] == 80.0
    assert e["lead_time_s"] == pytest.approx(-70.0)  # 10 - 80
    assert e["missed"] == [[pytest.approx(10.0), pytest.approx(80.0)]]


def test_alert_for_another_zone_is_not_a_miss_nor_a_first_alert():
    segs = [Segment("warning", "town_b", 0.0, 130.0)]
    score = score_flight(_truth(ROWS), segs, 5.0, zones=[ZONE_A, ZONE_B])
    e = score.exposures[0]
    assert e["missed"] == []  # the status never said clear or no boom
    assert e["outcome"] == "missed"  # but nothing named town_a
    assert len(score.nuisance_alerts) == 1  # town_b alerted, no boom there


def test_margin_and_elevation():
    # A boom 300 m east of town_a's edge: outside it, inside a 500 m margin.
    rows = [(5.0, 60.0, 1300.0, 500.0, 0.7)]
    plain = TruthZone("town_a", (_square(0.0, 0.0, 1000.0),), 0.0, margin_m=0.0,
                      ground_elevation_m=300.0)
    wide = TruthZone("town_a", (_square(0.0, 0.0, 1000.0),), 1.0, margin_m=500.0,
                     ground_elevation_m=300.0)
    truth = _truth(rows, elevation=300.0)
    assert score_flight(truth, [], 5.0, zones=[plain]).exposures == []
    e = score_flight(truth, [], 5.0, zones=[wide]).exposures[0]
    assert e["peak_psf"] == pytest.approx(0.7) and e["exceeds_limit"] is False  # 0.7 < 1.0
    assert e["first_arrival_inside_s"] is None and e["peak_psf_inside"] is None  # margin only
    # The same events traced to sea level say nothing about a zone at 300 m.
    assert score_flight(_truth(rows, 0.0), [], 5.0, zones=[wide]).exposures == []


def test_episodes_and_spans():
    segs = [Segment("advisory", "a", 0.0, 5.0), Segment("caution", "a", 5.0, 9.0),
            Segment("advisory", "b", 9.0, 12.0), Segment("clear", None, 12.0, 13.0),
            Segment("advisory", "b", 13.0, 14.0)]
    # a: one episode 0-9 (advisory then caution); b: 9-12; a clear breaks b's second one.
    assert [(e["zone_id"], e["t0_s"], e["t1_s"], e["level"]) for e in alert_episodes(segs)] == [
        ("a", 0.0, 9.0, "caution"), ("b", 9.0, 12.0, "advisory"), ("b", 13.0, 14.0, "advisory")]
    assert merge_spans([(5, 6), (0, 2), (1, 3), (6, 7)]) == [(0, 3), (5, 7)]
    assert intersect_spans([(0, 3), (5, 7)], [(2, 6)]) == [(2, 3), (5, 6)]
    assert intersect_spans([(0, 1)], [(1, 2)]) == []  # touching only: no time in common


def test_bad_reaction_time():
    with pytest.raises(ValueError, match="reaction_s"):
        score_flight(_truth(ROWS), [], -1.0, zones=[ZONE_A])
