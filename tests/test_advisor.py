"""Advisor scenarios built in the tests, against independent geometry and the tracer."""

from __future__ import annotations

import dataclasses
import json
import math

import numpy as np
import pytest
from geographiclib.geodesic import Geodesic
from hypothesis import given, settings
from hypothesis import strategies as st

from advisory import units
from advisory.cli import main
from advisory.cli.check import advisory_text
from advisory.physics.atmosphere import standard_atmosphere
from advisory.physics.carpet import compute_carpet
from advisory.physics.rays import FlightCondition, RayTracer
from advisory.pipeline.advisor import Advisor
from advisory.pipeline.config import AdvisorConfig, ConfigError, load_config
from advisory.pipeline.conflicts import find_conflicts
from advisory.pipeline.levels import AlertLevels
from advisory.pipeline.results import Advisory
from advisory.pipeline.state import AirDataState
from advisory.pipeline.zones import ZoneSet
from tests.conftest import build_small_table, make_atmosphere
from tests.twins.conflicts import find_conflicts_twin

GEOD = Geodesic.WGS84
LAT0, LON0 = 40.0, -100.0
ALT_FT = 45000.0
C_45K = float(standard_atmosphere().at(units.ft_to_m(ALT_FT)).sound_speed_mps)


def square(zone_id: str, lat: float, lon: float, half_km: float = 2.0, limit_psf: float = 0.0,
           margin_km: float = 0.0) -> dict:
    """A small square GeoJSON feature centred on (lat, lon) (invented zone)."""
    dlat = half_km / 111.0
    dlon = half_km / (111.0 * math.cos(math.radians(lat)))
    ring = [[lon - dlon, lat - dlat], [lon + dlon, lat - dlat], [lon + dlon, lat + dlat],
            [lon - dlon, lat + dlat], [lon - dlon, lat - dlat]]
    return {"type": "Feature", "geometry": {"type": "Polygon", "coordinates": [ring]},
            "properties": {"id": zone_id, "name": zone_id.title(), "limit_psf": limit_psf,
                           "margin_km": margin_km}}


def zoneset(*features) -> ZoneSet:
    return ZoneSet.from_geojson({"type": "FeatureCollection", "features": list(features)})


def point_along(distance_m: float, azimuth_deg: float = 90.0) -> tuple[float, float]:
    g = GEOD.Direct(LAT0, LON0, azimuth_deg, distance_m)
    return g["lat2"], g["lon2"]


def state(mach: float = 1.6, heading: float = 90.0, bank: float = 0.0, alt_ft: float = ALT_FT,
          **extra) -> AirDataState:
    fields = dict(lat_deg=LAT0, lon_deg=LON0, alt_ft=alt_ft, mach=mach, heading_deg=heading,
                  gs_kt=mach * C_45K / units.KT, bank_deg=bank, fpa_deg=0.0)
    fields.update(extra)
    return AirDataState.from_fields(fields, rx_monotonic=0.0)


def test_level_flight_contact_time_is_distance_over_ground_speed(small_table) -> None:
    # Scenario: level flight straight at a small zone 150 km ahead. The carpet front
    # moves with the aircraft at ground speed, so contact = (distance to the zone's near
    # edge - centerline ground offset) / ground speed + centerline travel time, with the
    # distance from geographiclib (Karney's geodesics) and the offset and travel time
    # from direct tracing. Within 2 s (issue requirement).
    lat, lon = point_along(150e3)
    adv = Advisor(small_table, zoneset(square("town", lat, lon)))
    a = adv.step(state(), now_monotonic=0.0)
    assert a.status == "advisory" and a.zone_id == "town"
    near_edge = GEOD.Inverse(LAT0, LON0, lat, lon - 2.0 / (111.0 * math.cos(math.radians(lat))))
    carpet = compute_carpet(RayTracer(standard_atmosphere()),
                            FlightCondition(1.6, units.ft_to_m(ALT_FT), math.radians(90.0)))
    gs = 1.6 * C_45K
    expect = (near_edge["s12"] - carpet.centerline_along_m) / gs + carpet.centerline_travel_time_s
    assert a.time_to_contact_s == pytest.approx(expect, abs=2.0)


def test_levels_rise_as_the_zone_nears(small_table) -> None:
    # Levels are set on the time left to act (issue 13; leads in advisory.pipeline.config):
    # 150 km ahead there is time (advisory); 35 km ahead the slow-down must start within
    # the warning lead, or nothing clears (warning); 10 km ahead the booms emitted in the
    # last seconds land on the zone (the carpet front lies 12.3 km ahead of the aircraft,
    # direct tracing; the zone spans 8-12 km): unavoidable.
    cfg = AdvisorConfig()
    results = {}
    for d_km in (150.0, 35.0, 10.0):
        lat, lon = point_along(d_km * 1e3)
        a = Advisor(small_table, zoneset(square("town", lat, lon)), cfg).step(state(), 0.0)
        results[d_km] = a
    assert results[150.0].status == "advisory"
    assert results[150.0].act_by_s is not None and results[150.0].act_by_s > cfg.caution_act_s
    a35 = results[35.0]
    assert a35.status == "warning"
    assert a35.act_by_s is None or a35.act_by_s <= cfg.warning_act_s
    assert results[10.0].status == "unavoidable" and results[10.0].zone_id == "town"


def test_below_cutoff_no_conflict(small_table) -> None:
    # Scenario: Mach 1.12 at 45,000 ft is below cutoff (1.153 in the standard atmosphere,
    # Snell's law): no boom on the ground, no conflict, even with a zone ahead.
    lat, lon = point_along(60e3)
    a = Advisor(small_table, zoneset(square("town", lat, lon))).step(state(mach=1.12), 0.0)
    assert a.status == "no_boom"
    assert a.zone_id is None and not a.reaches_ground
    assert a.cutoff_mach == pytest.approx(1.1533, abs=2e-3)


def test_turn_takes_the_carpet_away(small_table) -> None:
    # Scenario: the zone lies ahead; holding a 30-degree bank turns the track (and the
    # carpet) away before the carpet gets there.
    lat, lon = point_along(120e3)
    zones = zoneset(square("park", lat, lon))
    straight = Advisor(small_table, zones).step(state(), 0.0)
    turning = Advisor(small_table, zones).step(state(bank=30.0), 0.0)
    assert straight.zone_id == "park"
    assert turning.zone_id is None and turning.status == "clear"


def test_resolutions_clear_and_mach_is_below_cutoff(small_table) -> None:
    lat, lon = point_along(120e3)
    zones = zoneset(square("park", lat, lon, half_km=3.0, margin_km=1.0))
    a = Advisor(small_table, zones).step(state(), 0.0)
    assert a.status in ("advisory", "caution", "warning")
    assert a.max_mach_off_ground == pytest.approx(1.13, abs=0.011)  # cutoff 1.153 - 0.02
    assert a.turn_left_deg is not None and a.turn_right_deg is not None
    # target headings (issue 13 contract): the heading at the onset (straight flight: the
    # present 090) turned by the change, deg true in [0, 360)
    assert a.turn_right_hdg_deg == pytest.approx((90.0 + a.turn_right_deg) % 360.0, abs=0.5)
    assert a.turn_left_hdg_deg == pytest.approx((90.0 - a.turn_left_deg) % 360.0, abs=0.5)
    # after the suggested turn, holding the new heading clears the zone
    for turn in (-a.turn_left_deg, a.turn_right_deg):
        after = Advisor(small_table, zones).step(state(heading=90.0 + turn), 0.0)
        assert after.zone_id is None, turn
    # and slowing below the suggested Mach takes the boom off the ground
    slow = Advisor(small_table, zones).step(state(mach=a.max_mach_off_ground), 0.0)
    assert slow.status == "no_boom"


def test_overpressure_limit_zone(small_table) -> None:
    # A zone that tolerates 5 psf is not in conflict with a ~1 psf carpet; at 0.5 psf it is.
    lat, lon = point_along(100e3)
    tolerant = Advisor(small_table, zoneset(square("range", lat, lon, limit_psf=5.0)))
    strict = Advisor(small_table, zoneset(square("range", lat, lon, limit_psf=0.5)))
    assert tolerant.step(state(), 0.0).zone_id is None
    a = strict.step(state(), 0.0)
    assert a.zone_id == "range" and a.overpressure_psf > 0.5


def test_crosswind_shifts_the_carpet_onto_a_zone(tmp_path) -> None:
    # Scenario: a zone just beyond the calm carpet's left edge (aircraft eastbound). A
    # wind toward the north (the aircraft's left) growing with height shifts the carpet
    # left (Snell's law in a moving medium, checked in test_carpet) onto the zone.
    std = standard_atmosphere()
    z = std.z_m
    wind = make_atmosphere(z, std.sound_speed_mps, wind_north=40.0 * np.clip(z / 12000.0, 0, 1))
    calm_table = build_small_table(tmp_path / "calm.boomtable", with_wind=False)
    windy_table = build_small_table(tmp_path / "windy.boomtable", atmosphere=wind,
                                    with_wind=True)
    fc = FlightCondition(1.6, units.ft_to_m(ALT_FT), math.radians(90.0))
    calm_left = compute_carpet(RayTracer(std), fc).half_width_left_m
    windy_left = compute_carpet(RayTracer(wind), fc).half_width_left_m
    assert windy_left > calm_left + 2000.0
    lateral = 0.5 * (calm_left + windy_left)  # between the two edges, to the left (north)
    g = GEOD.Direct(*point_along(150e3), 0.0, lateral)
    zones = zoneset(square("shore", g["lat2"], g["lon2"], half_km=0.5))
    st_ = state(wind_from_deg=180.0, wind_kt=40.0 / units.KT)
    # the tables' own carpets (confidence 0: the edge not widened for air not known)
    table_edge = AdvisorConfig(confidence=0.0)
    assert Advisor(calm_table, zones, table_edge).step(state(), 0.0).zone_id is None
    assert Advisor(windy_table, zones, table_edge).step(st_, 0.0).zone_id == "shore"
    # at the default confidence (95 %) the calm carpet's widened edge may reach the shore,
    # but as unlikely; inside the windy carpet it is likely (issue 16)
    calm = Advisor(calm_table, zones).step(state(), 0.0)
    windy = Advisor(windy_table, zones).step(st_, 0.0)
    assert calm.zone_id is None or calm.boom_probability < 0.5, calm.boom_probability
    assert windy.zone_id == "shore" and windy.boom_probability > 0.5, windy.boom_probability


def test_hysteresis_no_flicker() -> None:
    # The time left to act dithers 4 s either side of the warning lead; the level must not
    # flicker (the band is 10 s; common practice, no source). Checked on the level logic
    # itself: an aircraft cannot jump back and forth along its track, and since issue 13
    # the advisor keeps the booms of the states it was given (its flown history).
    cfg = AdvisorConfig()
    levels = AlertLevels(cfg)
    seen = [levels.update(cfg.warning_act_s + (4.0 if i % 2 else -4.0), float(i))
            for i in range(40)]
    changes = sum(1 for a, b in zip(seen, seen[1:]) if a != b)
    assert seen[0] == 3 and changes == 0, seen


def test_warning_is_held_until_clear_for_hold_time(small_table) -> None:
    cfg = AdvisorConfig(warning_hold_s=20.0)
    zones = zoneset(square("town", *point_along(35e3)))
    adv = Advisor(small_table, zones, cfg)
    assert adv.step(state(), 0.0).status == "warning"
    lat, lon = point_along(200e3, 270.0)  # far to the west, flying west: raw level clear
    away = dict(state(heading=270.0).to_fields(), lat_deg=lat, lon_deg=lon)
    statuses = []
    for t in range(1, 30):
        s = AirDataState.from_fields(away, rx_monotonic=float(t))
        statuses.append(adv.step(s, now_monotonic=float(t)).status)
    assert all(x == "warning" for x in statuses[:19])
    assert statuses[-1] in ("clear", "no_boom")


@settings(max_examples=40, deadline=None)
@given(field=st.sampled_from(["mach", "alt_ft", "lat_deg", "gs_kt", "bank_deg"]),
       bad=st.sampled_from([float("nan"), float("inf"), -1e9, 1e9]))
def test_never_clear_on_invalid_state(small_table, field, bad) -> None:
    # Property: an invalid state never gives a clear status.
    fields = state().to_fields()
    fields[field] = bad
    s = AirDataState.from_fields(fields, rx_monotonic=0.0)
    a = Advisor(small_table, zoneset()).step(s, now_monotonic=0.0)
    assert a.status == "unavailable" and a.reason


def test_never_clear_on_stale_state(small_table) -> None:
    adv = Advisor(small_table, zoneset())
    a = adv.step(state(), now_monotonic=5.0)  # received at 0, now 5 s later
    assert a.status == "unavailable" and "stale" in a.reason
    assert adv.step(None).status == "unavailable"


def test_conflict_kernel_matches_numpy_twin(small_table) -> None:
    # Parity: numba conflict search and its numpy twin.
    feats = [square(f"z{i}", *point_along(60e3 + 15e3 * i, 90.0 + 3.0 * (i - 3)),
                    half_km=1.0 + i % 3, limit_psf=[0.0, 0.8, 1.2][i % 3], margin_km=i % 2)
             for i in range(8)]
    zones = zoneset(*feats)
    adv = Advisor(small_table, zones)
    adv.step(state(bank=5.0), 0.0)
    pz = adv._projected
    a = find_conflicts(adv.last_prediction, pz, zones, adv._strips, 1.25)
    b = find_conflicts_twin(adv.last_prediction, pz, zones, adv._strips, 1.25)
    assert [c.zone_id for c in a] == [c.zone_id for c in b]
    for x, y in zip(a, b):
        assert x.time_to_contact_s == pytest.approx(y.time_to_contact_s, abs=1e-6)
        assert x.overpressure_pa == pytest.approx(y.overpressure_pa, rel=1e-9)


def test_config_file(tmp_path) -> None:
    f = tmp_path / "advisor.toml"
    f.write_text("[levels]\ncaution_lead_s = 150\nwarning_lead_s = 45\n[focus]\nthreshold = 2\n")
    cfg = load_config(f)
    assert cfg.caution_lead_s == 150 and cfg.focus_threshold == 2
    f.write_text("[levels]\nwarning_lead_s = -3\n")
    with pytest.raises(ConfigError, match="warning_lead_s"):
        load_config(f)
    f.write_text("[levls]\n")
    with pytest.raises(ConfigError, match="unknown section"):
        load_config(f)


def test_check_command_json_and_text(small_table_path, tmp_path, capsys) -> None:
    lat, lon = point_along(30e3)
    zfile = tmp_path / "zones.geojson"
    zfile.write_text(json.dumps({"type": "FeatureCollection",
                                 "features": [square("town", lat, lon)]}))
    sfile = tmp_path / "state.json"
    sfile.write_text(json.dumps(state().to_fields()))
    argv = ["check", "--state", str(sfile), "--zones", str(zfile), "--table",
            str(small_table_path)]
    assert main([*argv, "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    for key in ("status", "zone_id", "time_to_contact_s", "overpressure_psf", "focus",
                "max_mach_off_ground", "turn_left_deg", "turn_right_deg"):
        assert key in out
    assert out["status"] in ("caution", "warning") and out["zone_id"] == "town"
    assert main(argv) == 0
    text = capsys.readouterr().out
    assert "town" in text.lower() and "CAUTION: boom-advisory is an advisory aid" in text
    # the text says what the advisory frame says: the checked resolutions and the time
    # left to act (issue 13, Build 3)
    assert "checked resolutions: " in text
    if out["resolve_mach"] is not None:
        assert f"slow to Mach {out['resolve_mach']:.2f}" in text
    for side in ("left", "right"):
        if out[f"turn_{side}_deg"] is not None:
            assert (f"turn {side} {out[f'turn_{side}_deg']:.0f} deg to heading "
                    f"{out[f'turn_{side}_hdg_deg']:03.0f}") in text
    if out["act_by_s"] is not None:
        assert f"act within {math.floor(out['act_by_s'])} s" in text
        assert f"ACT {math.floor(out['act_by_s'])}S" in text  # the crew's line agrees
    bad = dict(state().to_fields(), mach="fast")
    sfile.write_text(json.dumps(bad))
    assert main(argv) == 2
    assert "mach" in capsys.readouterr().err


def test_check_text_for_booms_already_on_their_way() -> None:
    # an unavoidable status says so plainly; resolutions only when some clear later booms
    s0 = state()
    fixed = Advisory("unavoidable", zone_id="town", zone_name="Town", time_to_contact_s=80.0,
                     overpressure_pa=50.0, cutoff_mach=1.15, max_mach_off_ground=1.13)
    text = advisory_text(fixed, s0)
    assert "already on their way" in text and "checked resolutions" not in text
    both = dataclasses.replace(fixed, resolve_mach=1.12, act_by_s=12.0)
    text = advisory_text(both, s0)
    assert "keep later booms off" in text and "slow to Mach 1.12" in text
    assert "act within 12 s" in text


def test_top_level_api() -> None:
    import advisory

    assert advisory.Advisor is Advisor
