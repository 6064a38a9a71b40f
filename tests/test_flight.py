"""Flight simulator and air-data feed of the bench (advisory.bench.flight, advisory.bench.feed).

Each check names its source beside it: closed forms of the coordinated turn and of
constant-rate Mach and flight-path changes, the standard-rate turn, geographiclib
(Karney's WGS 84 geodesics) for distances, ambiance for the speed of sound (U.S.
Standard Atmosphere 1976), and the committed demo records.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
from ambiance import Atmosphere as AmbianceAtmosphere
from geographiclib.geodesic import Geodesic

from advisory import units
from advisory.bench.feed import Fault, FeedEncoder, FeedSettings, encode_samples
from advisory.bench.flight import FlightState, FlightTrack, Pilot, Segment
from advisory.io.framing import StreamDeframer, parse_datagram
from advisory.io.messages import decode_frame
from advisory.physics.atmosphere import standard_atmosphere
from tests.test_pressure_altitude import standard_day_height_m
from tests.test_replay import MAKER

DEMO = Path(__file__).resolve().parent.parent / "replay_logs"
ALT_FT = 45000.0
MACH = 1.4
G0 = 9.80665  # standard gravity, m/s^2 (U.S. Standard Atmosphere 1976)


def sound_speed() -> float:
    """Speed of sound at 45,000 ft from ambiance (U.S. Standard Atmosphere 1976)."""
    return float(AmbianceAtmosphere(ALT_FT * 0.3048).speed_of_sound[0])


def fly(schedule, duration_s: float, dt: float = 0.05, **start) -> tuple[list[dict], FlightTrack]:
    kw = dict(lat_deg=30.0, lon_deg=-140.0, alt_ft=ALT_FT, mach=MACH, heading_deg=0.0)
    kw.update(start)
    state = FlightState(standard_atmosphere(), **kw)
    pilot, track, samples = Pilot(schedule), FlightTrack(), []
    for i in range(int(round(duration_s / dt)) + 1):
        pilot.update(state, dt)
        track.add(state)
        samples.append(state.step(dt, i * dt))
    return samples, track


def test_steady_turn_rate_and_radius_follow_the_closed_form() -> None:
    # Coordinated level turn: rate g tan(bank) / V, radius V^2 / (g tan(bank)) (closed
    # form, any flight-mechanics textbook); V from ambiance's speed of sound.
    bank = 30.0
    v = MACH * sound_speed()
    rate = math.degrees(G0 * math.tan(math.radians(bank)) / v)
    radius = v**2 / (G0 * math.tan(math.radians(bank)))
    half_turn_s = 180.0 / rate
    samples, _ = fly([], half_turn_s + 1.0, bank_deg=bank)
    hd = np.unwrap(np.radians([s["heading_deg"] for s in samples]))
    t = np.array([s["t_s"] for s in samples])
    assert np.degrees(np.polyfit(t, hd, 1)[0]) == pytest.approx(rate, rel=2e-3)
    # after half a turn the aircraft is one diameter from where it started
    i = int(np.argmin(np.abs(t - half_turn_s)))
    d = Geodesic.WGS84.Inverse(samples[0]["lat_deg"], samples[0]["lon_deg"],
                               samples[i]["lat_deg"], samples[i]["lon_deg"])["s12"]
    assert d == pytest.approx(2.0 * radius, rel=5e-3)


def test_standard_rate_turn() -> None:
    # A standard-rate turn is 3 deg/s (FAA-H-8083-3 Airplane Flying Handbook; value from
    # memory); its bank at TAS V is atan(V omega / g) (closed form of the coordinated turn).
    v = MACH * sound_speed()
    bank = math.degrees(math.atan(v * math.radians(3.0) / G0))
    samples, _ = fly([], 20.0, bank_deg=bank)
    hd = np.degrees(np.unwrap(np.radians([s["heading_deg"] for s in samples])))
    assert (hd[-1] - hd[0]) / 20.0 == pytest.approx(3.0, rel=2e-3)


def test_turn_segment_rolls_out_on_the_asked_heading() -> None:
    # A 90 deg right turn at 30 deg bank and 5 deg/s roll rate ends near heading 90 and
    # wings level (common practice, no source: roll-out anticipation of half the roll time).
    sched = [Segment("hold", duration_s=5.0),
             Segment("turn", bank_deg=30.0, roll_rate_deg_s=5.0, heading_change_deg=90.0)]
    samples, _ = fly(sched, 200.0)
    assert samples[-1]["bank_deg"] == 0.0
    assert samples[-1]["heading_deg"] == pytest.approx(90.0, abs=1.5)
    # the bank rolls at the roll rate: 30 deg after 6 s of rolling
    t_full = next(s["t_s"] for s in samples if s["bank_deg"] == 30.0)
    assert t_full == pytest.approx(5.0 + 30.0 / 5.0, abs=0.06)


def test_mach_ramp_takes_the_closed_form_time() -> None:
    # Constant-rate Mach change: from 1.40 to 1.10 at 0.012 per s takes 0.30 / 0.012 = 25 s
    # (closed form); the wire's mach_rate_per_s is -0.012 while it changes.
    sched = [Segment("hold", duration_s=10.0),
             Segment("mach", target_mach=1.10, mach_rate_per_s=0.012)]
    samples, _ = fly(sched, 60.0)
    t_reach = next(s["t_s"] for s in samples if s["mach"] == 1.10)
    assert t_reach == pytest.approx(35.0, abs=0.06)
    mid = next(s for s in samples if s["t_s"] >= 20.0)
    assert mid["mach_rate_per_s"] == -0.012
    assert mid["mach"] == pytest.approx(1.40 - 0.012 * 10.0, abs=1e-3)
    assert samples[-1]["mach_rate_per_s"] == 0.0


def test_climb_to_an_altitude() -> None:
    # Climb at 3 deg flight-path angle: climb rate V sin(fpa) (closed form) while steady;
    # levels off within 60 ft of the target altitude (common practice, no source).
    v = MACH * sound_speed()
    sched = [Segment("climb", fpa_deg=3.0, pitch_rate_deg_s=1.0, target_alt_ft=47000.0)]
    samples, _ = fly(sched, 200.0)
    steady = [s for s in samples if s["fpa_deg"] == 3.0]
    assert len(steady) > 20
    a, b = steady[0], steady[-1]
    # the samples carry pressure altitude: on a standard day, the geopotential altitude of
    # the height flown (USSA 1976 eq. 18, via the reference library ambiance)
    za, zb = (standard_day_height_m(units.ft_to_m(s["alt_ft"])) for s in (a, b))
    vz = (zb - za) / (b["t_s"] - a["t_s"])
    # V changes a little with altitude (sound speed is constant in the isothermal layer
    # above 36,089 ft: U.S. Standard Atmosphere 1976)
    assert vz == pytest.approx(v * math.sin(math.radians(3.0)), rel=2e-3)
    assert samples[-1]["fpa_deg"] == 0.0
    assert samples[-1]["alt_ft"] == pytest.approx(47000.0, abs=60.0)


def test_flown_path_carries_turn_rate_load_factor_and_bank() -> None:
    # Level coordinated turn: load factor 1 / cos(bank) (closed form).
    _, track = fly([], 10.0, bank_deg=45.0)
    path = track.flown_path((30.0, -140.0), 0.5)
    assert path.load_factor is not None and path.bank_rad is not None
    assert path.turn_rate_rps is not None
    assert np.allclose(path.load_factor[2:-2], 1.0 / math.cos(math.radians(45.0)), rtol=1e-6)
    assert np.allclose(path.bank_rad, math.radians(45.0))
    v = MACH * sound_speed()
    assert np.allclose(path.turn_rate_rps, G0 / v, rtol=2e-3)  # tan 45 = 1
    assert path.time_s[-1] == pytest.approx(10.0)


def test_demo_records_are_regenerated_bit_for_bit(tmp_path: Path) -> None:
    # The committed demo records are the generator's output, byte for byte (file header
    # included: it carries the flight's start time, not the wall clock).
    for sc in MAKER.scenarios():
        MAKER.make(sc, tmp_path)
        new = (tmp_path / sc.name / "flight.rec").read_bytes()
        assert new == (DEMO / sc.name / "flight.rec").read_bytes(), sc.name


def _payloads(chunks) -> list:
    d = StreamDeframer()
    return [decode_frame(p) for _m, _u, data in chunks for p in d.feed(data)]


def test_feed_frozen_fault_repeats_the_values_and_noise_moves_them() -> None:
    # Common practice, no source: a stuck source repeats its last values with advancing
    # sequence numbers; noise changes only the noisy fields.
    samples, _ = fly([Segment("mach", target_mach=1.2, mach_rate_per_s=0.01)], 4.0)
    frozen = FeedSettings(faults=(Fault("frozen", 1.0, 2.0),))
    frames = _payloads(encode_samples(FeedEncoder(frozen, 1, 100.0, 2e9), samples))
    mach = [f.fields["mach"] for f in frames]
    t = [s["t_s"] for s in samples]
    inside = [m for m, ts in zip(mach, t) if 1.0 <= ts < 2.0]
    assert len(set(inside)) == 1 and inside[0] == mach[t.index(1.0) - 1]
    assert mach[-1] < inside[0]
    noisy = FeedSettings(noise={"mach": 0.01})
    frames_n = _payloads(encode_samples(FeedEncoder(noisy, 1, 100.0, 2e9), samples))
    clean = _payloads(encode_samples(FeedEncoder(FeedSettings(), 1, 100.0, 2e9), samples))
    dm = np.array([a.fields["mach"] - b.fields["mach"] for a, b in zip(frames_n, clean)])
    assert 0.005 < dm.std() < 0.02
    assert all(a.fields["alt_ft"] == b.fields["alt_ft"] for a, b in zip(frames_n, clean))


def test_feed_datagrams_and_dropout() -> None:
    # One datagram per frame with its CRC (docs/interface.md); a dropout sends nothing.
    samples, _ = fly([], 2.0)
    s = FeedSettings(format="datagram", faults=(Fault("dropout", 0.5, 1.0),))
    enc = FeedEncoder(s, 3, 100.0, 2e9)
    chunks = encode_samples(enc, samples)
    assert len(chunks) == len(samples) - 10 and enc.counts["dropped"] == 10
    frames = [decode_frame(parse_datagram(c[2])) for c in chunks]
    assert [f.fields["lat_deg"] for f in frames[:3]] == [x["lat_deg"] for x in samples[:3]]
    rx = [c[0] for c in chunks]
    assert all(b > a for a, b in zip(rx, rx[1:]))
    assert all(0.004 <= c[0] - 100.0 - x["t_s"] < 0.004 + 0.003 + 1e-9
               for c, x in zip(chunks[:10], samples[:10]))


def test_crew_take_over_ends_the_scheduled_turn_and_flies_the_resolution() -> None:
    # docs/scenarios.md (flight model): once the crew acts it rolls wings level, drops the
    # rest of the schedule and flies its resolution (common practice, no source).
    state = FlightState(standard_atmosphere(), 30.0, -140.0, ALT_FT, MACH, 0.0)
    pilot = Pilot([Segment("turn", bank_deg=30.0, duration_s=100.0),
                   Segment("mach", target_mach=1.8, mach_rate_per_s=0.05)])
    dt = 0.05
    for i in range(400):
        if i == 200:
            pilot.take_over(Segment("mach", target_mach=1.1, mach_rate_per_s=0.02), state)
        pilot.update(state, dt)
        state.step(dt, i * dt)
    assert state.bank_deg == 0.0 and pilot.queue == []
    # 10 s of deceleration at 0.02 per s from 1.4 (closed form)
    assert state.mach == pytest.approx(1.4 - 0.02 * 10.0, abs=2e-3)
