"""A step reuses the last prediction while the flight goes as predicted (issue 13's replay
budget): the advice stays what predicting every step gives, and a departure predicts at
once (advisory.pipeline.reuse).

The references are outside the code under test where the advice has one (level flight
toward a zone: the carpet front moves at ground speed, so the time to contact falls one
second per second, closed form; positions along the flight from geographiclib, Karney's
geodesics), and otherwise the same advisor predicting on every step
(``predict_every_s = 0``, the behaviour before reuse), whose advice the earlier tests
check against the tracer and the truth harness.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from geographiclib.geodesic import Geodesic

from advisory import units
from advisory.bench.demo import demo_flights_dir
from advisory.bench.expect import segments_of
from advisory.bench.replay import replay_log
from advisory.bench.scenario import prepare
from advisory.pipeline.advisor import Advisor
from advisory.pipeline.config import AdvisorConfig, ConfigError, load_config
from advisory.pipeline.results import Advisory, Conflict
from advisory.pipeline.reuse import counted_down, departure
from advisory.pipeline.state import AirDataState
from tests.test_advisor import ALT_FT, C_45K, LAT0, LON0, point_along, square, zoneset

GEOD = Geodesic.WGS84
MACH = 1.6
GS_MPS = MACH * C_45K  # still air: ground speed = true airspeed
UTC0 = 1.9e9
EVERY_STEP = AdvisorConfig(predict_every_s=0.0)


def cruise(t: float, **changes) -> AirDataState:
    """Level flight east from (LAT0, LON0) at Mach 1.6, 45,000 ft, ``t`` s in (position
    and heading along the geodesic, geographiclib), with ``changes`` to the fields."""
    g = GEOD.Direct(LAT0, LON0, 90.0, GS_MPS * t)
    fields = dict(lat_deg=g["lat2"], lon_deg=g["lon2"], alt_ft=ALT_FT, mach=MACH,
                  heading_deg=g["azi2"], gs_kt=GS_MPS / units.KT, bank_deg=0.0, fpa_deg=0.0)
    fields.update(changes)
    return AirDataState.from_fields(fields, utc_s=UTC0 + t, rx_monotonic=t)


def town_ahead(km: float = 150.0):
    lat, lon = point_along(km * 1e3)
    return zoneset(square("town", lat, lon))


def test_steady_flight_reuses_and_the_contact_time_counts_down(small_table) -> None:
    # Level flight straight at a town 150 km ahead, 10 Hz steps for 5 s: the carpet front
    # moves with the aircraft at ground speed, so the time to contact falls one second per
    # second (closed form). Most steps reuse the prediction; each gives the status and zone
    # of predicting every step, and the contact time within 2 s of the closed form (the
    # tolerance of test_advisor's contact-time check: the emissions are 3 s apart).
    zones = town_ahead()
    reuse, every = Advisor(small_table, zones), Advisor(small_table, zones, EVERY_STEP)
    first = None
    for i in range(51):
        t = i / 10.0
        a, b = reuse.step(cruise(t), t), every.step(cruise(t), t)
        assert (a.status, a.zone_id) == (b.status, b.zone_id) == ("advisory", "town")
        assert a.time_to_contact_s is not None and b.time_to_contact_s is not None
        first = a.time_to_contact_s if first is None else first
        assert a.time_to_contact_s == pytest.approx(first - t, abs=2.0)
        assert a.time_to_contact_s == pytest.approx(b.time_to_contact_s, abs=2.0)
        assert a.act_by_s is not None and b.act_by_s is not None
        assert a.act_by_s == pytest.approx(b.act_by_s, abs=2.0)
        assert a.utc_s == UTC0 + t
    # one prediction a second (at 0-5 s), the rest reused
    assert reuse.reused_steps == 51 - 6
    assert every.reused_steps == 0


@pytest.mark.parametrize("change", [
    {"mach": MACH + 0.005},            # a Mach change (tolerance 0.002)
    {"bank_deg": 1.0},                 # a roll-in begins (0.25 deg)
    {"heading_deg": 90.5},             # a heading change (0.2 deg)
    {"alt_ft": ALT_FT + 200.0},        # an altitude change (30 m)
    {"fpa_deg": 0.5},                  # a climb begins (0.1 deg)
    {"wind_from_deg": 270.0, "wind_kt": 10.0},   # wind now given (2 m/s)
    {"selected_alt_ft": 50000.0},      # a new selected altitude
], ids=["mach", "bank", "heading", "altitude", "climb", "wind", "selected-altitude"])
def test_a_departure_predicts_at_once(small_table, change) -> None:
    # The flight goes as predicted for 2 s, then one state departs: that very step
    # predicts again (no step is reused) and says what predicting every step says.
    zones = town_ahead()
    reuse, every = Advisor(small_table, zones), Advisor(small_table, zones, EVERY_STEP)
    for i in range(21):
        t = i / 10.0
        reuse.step(cruise(t), t)
        every.step(cruise(t), t)
    before = reuse.reused_steps
    t = 2.15
    a, b = reuse.step(cruise(t, **change), t), every.step(cruise(t, **change), t)
    assert reuse.reused_steps == before
    assert (a.status, a.zone_id, a.time_to_contact_s, a.overpressure_pa) == \
           (b.status, b.zone_id, b.time_to_contact_s, b.overpressure_pa)


def test_departure_names_what_departs(small_table) -> None:
    # One prediction, then states 0.5 s later: exactly along the geodesic nothing departs;
    # each change beyond its tolerance (advisory.pipeline.reuse) is named.
    adv = Advisor(small_table, town_ahead())
    adv.step(cruise(0.0), 0.0)
    p = adv._last
    assert p is not None
    on = dataclasses.replace(cruise(0.5), alt_m=p.state.alt_m)  # geometric height, as p's
    assert departure(p, on, 0.5) == ""
    g = GEOD.Direct(LAT0, LON0, 0.0, 300.0)  # 300 m north of where it should be
    moved = dataclasses.replace(on, lat_rad=math.radians(g["lat2"]) + on.lat_rad
                                - math.radians(LAT0))
    cases = {
        "mach": dataclasses.replace(on, mach=on.mach + 0.003),
        "altitude": dataclasses.replace(on, alt_m=on.alt_m + 40.0),
        "flight-path angle": dataclasses.replace(on, fpa_rad=math.radians(0.15)),
        "bank": dataclasses.replace(on, bank_rad=math.radians(0.4)),
        "ground speed": dataclasses.replace(on, gs_mps=on.gs_mps + 3.0),
        "heading": dataclasses.replace(on, heading_rad=on.heading_rad + math.radians(0.3)),
        "track": dataclasses.replace(on, track_rad=on.heading_rad),
        "mach_rate_per_s": dataclasses.replace(on, mach_rate_per_s=0.001),
        "pitch_rate_rad_s": dataclasses.replace(on, pitch_rate_rad_s=0.0),
        "selected_mach": dataclasses.replace(on, selected_mach=1.4),
        "position": moved,
    }
    for name, s in cases.items():
        assert departure(p, s, 0.5) == name
    assert departure(p, on, 400.0) == "time"  # beyond the look-ahead


def test_a_predicted_slow_down_still_predicts_every_few_steps(small_table) -> None:
    # A slow-down at 0.01 Mach/s, flown exactly as predicted: the present Mach leaves
    # the one predicted from by more than 0.002 within 0.3 s, and the advisory's own
    # fields (cutoff, probability of a boom on the ground) describe the present: the step
    # predicts again (in the bundled coastal flight a held probability read 0.70 where the
    # slowing aircraft's was 0.27, advisory.pipeline.reuse).
    adv = Advisor(small_table, town_ahead())
    adv.step(cruise(0.0, mach_rate_per_s=-0.01), 0.0)
    p = adv._last
    assert p is not None
    for dt, expect in ((0.1, ""), (0.3, "mach change")):
        s = dataclasses.replace(cruise(dt, mach=MACH - 0.01 * dt, mach_rate_per_s=-0.01),
                                alt_m=p.state.alt_m)
        lat, lon = p.ahead.frame.from_enu(float(np.interp(dt, p.ahead.t_s, p.ahead.east_m)),
                                          float(np.interp(dt, p.ahead.t_s, p.ahead.north_m)))
        s = dataclasses.replace(s, lat_rad=float(lat), lon_rad=float(lon),
                                gs_mps=float(np.interp(dt, p.ahead.t_s,
                                                       p.ahead.ground_speed_mps)))
        assert departure(p, s, dt) == expect


def _adv(ttc: float, act: float | None, conflict_ttc: float) -> Advisory:
    c = Conflict(0, "town", "Town", conflict_ttc, 50.0, False)
    return Advisory("caution", zone_id="town", time_to_contact_s=ttc, act_by_s=act,
                    conflicts=(c,), utc_s=UTC0)


def test_counted_down_until_a_time_runs_out() -> None:
    # Times fall by the time passed (hand-computed); a positive time reaching zero calls
    # for a new prediction (None); a time already at zero (a boom held as arriving, an
    # action due now) stays there.
    a = counted_down(_adv(2.0, 0.5, 3.0), 0.4, UTC0 + 0.4, True)
    assert a is not None
    assert (a.time_to_contact_s, a.act_by_s, a.conflicts[0].time_to_contact_s) == \
           pytest.approx((1.6, 0.1, 2.6))
    assert a.utc_s == UTC0 + 0.4 and a.tables_stale and a.status == "caution"
    assert counted_down(_adv(2.0, 0.5, 3.0), 0.6, None, False) is None   # act-by runs out
    assert counted_down(_adv(0.3, None, 3.0), 0.4, None, False) is None  # contact comes
    held = counted_down(_adv(0.0, 0.0, 0.0), 0.4, None, False)
    assert held is not None and held.time_to_contact_s == 0.0 and held.act_by_s == 0.0


def test_a_frozen_air_data_clock_does_not_freeze_the_advice(small_table) -> None:
    # The source repeats one time stamp while the loop's clock runs on: after
    # predict_every_s of the loop's clock the step predicts again.
    adv = Advisor(small_table, town_ahead())
    for i in range(16):
        now = i / 10.0
        a = adv.step(dataclasses.replace(cruise(0.0), rx_monotonic=now), now)
        assert a.status == "advisory"
    assert adv.reused_steps == 14  # predicted at 0 and at 1.0 s (loop clock)


def test_predict_every_s_is_a_checked_config_key(tmp_path) -> None:
    # [prediction] predict_every_s: 0 predicts every step; out of [0, 10] is refused with
    # a line naming the key and the value.
    f = tmp_path / "advisor.toml"
    f.write_text("[prediction]\npredict_every_s = 0.5\n")
    assert load_config(f).predict_every_s == 0.5
    f.write_text("[prediction]\npredict_every_s = 20\n")
    with pytest.raises(ConfigError, match="predict_every_s = 20"):
        load_config(f)


def _segments(flight: str, config: str | None) -> list:
    setup = prepare(str(demo_flights_dir() / flight), config=config, quiet=True)
    res = replay_log(setup)
    return segments_of(res.outputs, res.outputs[0][0] if res.outputs else 0.0)


@pytest.mark.parametrize("flight", sorted(p.name for p in demo_flights_dir().iterdir()
                                          if (p / "flight.rec").exists()))
def test_replays_say_what_predicting_every_step_says(flight, tmp_path) -> None:
    # Every bundled demo flight replayed with the default configuration and with
    # predict_every_s = 0: the same statuses and zones in the same order, each change
    # within one reuse interval (1 s) of the other's.
    cfg = tmp_path / "every_step.toml"
    cfg.write_text("[prediction]\npredict_every_s = 0\n")
    a, b = _segments(flight, None), _segments(flight, str(cfg))
    assert [(s.status, s.zone_id) for s in a] == [(s.status, s.zone_id) for s in b]
    for x, y in zip(a, b):
        assert x.t_start_s == pytest.approx(y.t_start_s, abs=1.0)


def test_a_first_offer_near_the_cutoff_waits_for_the_next_search() -> None:
    # advisory.pipeline.renewal: near the cutoff (Resolution.near) a first offer after a
    # search that found none is held back until the next full search finds one too; away
    # from it, or once something is on offer, a search's result stands at once. Hand-made
    # results (the searches themselves are flown in test_checked_resolutions, whose
    # near-cutoff-279 is the measured case).
    from advisory.pipeline.renewal import Renewal
    from advisory.pipeline.resolutions import Resolution

    turn = Resolution(turn_left_deg=5.0, kind="left", act_by_s=30.0, near=True)
    nothing = Resolution(near=True)
    r = Renewal(AdvisorConfig())
    r._take(nothing, 0.0)
    r._take(turn, 1.0)
    assert r._result is not None and r._result.kind is None  # held back
    r._take(turn, 2.0)
    assert r._result is turn and r._result_t0 == 2.0  # confirmed by the next search
    r._take(nothing, 3.0)
    r._take(turn, 4.0)
    r._take(nothing, 5.0)  # flipped back: never offered
    assert r._result is nothing
    far = dataclasses.replace(turn, near=False)
    r._take(far, 6.0)
    assert r._result is far  # away from the cutoff: at once
    r2 = Renewal(AdvisorConfig())
    mach = dataclasses.replace(turn, kind="mach", resolve_mach=1.12, turn_left_deg=None,
                               near=False)
    r2._take(mach, 0.0)
    assert r2._result is mach
    r2._take(turn, 1.0)
    assert r2._result is turn  # something was on offer already: replaced at once
