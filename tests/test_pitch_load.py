"""Pitch rate and load factor (issue 13, Why 6): push-over and pull-up foci predicted.

The advisor used to hold the flight-path angle constant over the look-ahead, so a
push-over (nose down at more than about 1 deg/s at Mach 1.6, 50,000 ft) put a fold of
the ray map on the ground that it never predicted. With the optional air-data fields
``pitch_rate_dps`` and ``load_factor`` the trajectory ahead changes its flight-path angle
for a bounded time, and the footprint's ray-tube factor finds the fold.

Sources beside each check: the project's truth harness (``advisory.bench.truth``, a
direct ray tracer with no tables) flying the same manoeuvre in the bench simulator;
closed forms of the point-mass equations of motion and the Euler-angle kinematics
(*Flight Dynamics*, Princeton University Press, 2004, ch. 2; value from memory).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from advisory import units
from advisory.bench.flight import FlightState, FlightTrack, Pilot, Segment
from advisory.bench.truth import TruthSettings, trace_truth
from advisory.physics.aircraft import default_aircraft
from advisory.physics.atmosphere import standard_atmosphere
from advisory.physics.signature import FOCUS_AMPLIFICATION_CAP
from advisory.pipeline.advisor import Advisor
from advisory.pipeline.config import AdvisorConfig
from advisory.pipeline.state import AirDataState
from advisory.pipeline.zones import ZoneSet

LAT0, LON0, HDG = 40.0, -100.0, 90.0
ALT_FT, MACH = 50000.0, 1.6
LEAD_S = 4.0  # level flight before the pitch manoeuvre, s
PITCH_S = 5.0  # length of the pitch manoeuvre, s
DT = 0.05  # simulator step, s


def pitch_grid():
    """A small table grid around 50,000 ft with a flight-path-angle axis (a push-over
    needs the carpet of dive angles; the default grid has one, the test grid not)."""
    from advisory.tables.grid import DEFAULT_MACH_EXCESS, TableGrid

    return TableGrid(
        altitudes_m=tuple(units.ft_to_m(a) for a in range(42000, 51001, 1000)),
        mach_excess=tuple(x for x in DEFAULT_MACH_EXCESS if 0.15 <= x <= 0.9),
        fpa_rad=tuple(math.radians(f) for f in (-12.0, -8.0, -4.0, 0.0, 4.0, 8.0, 12.0)),
        n_eta=21,
    )


@pytest.fixture(scope="module")
def pitch_table(tmp_path_factory):
    from advisory.tables.build import BuildInputs, build_table_arrays, provenance
    from advisory.tables.store import write_table_file
    from advisory.tables.table import BoomTable

    path = tmp_path_factory.mktemp("pitch") / "pitch.boomtable"
    inputs = BuildInputs(default_aircraft(), standard_atmosphere(), pitch_grid())
    write_table_file(path, provenance(inputs, 0.0), build_table_arrays(inputs, workers=2))
    return BoomTable.load(path)


def far_zone() -> ZoneSet:
    """One small invented zone far to the north (the focus, not a conflict, is tested)."""
    lat, lon = LAT0 + 2.0, LON0
    ring = [[lon - 0.01, lat - 0.01], [lon + 0.01, lat - 0.01], [lon + 0.01, lat + 0.01],
            [lon - 0.01, lat + 0.01], [lon - 0.01, lat - 0.01]]
    return ZoneSet.from_geojson({"type": "FeatureCollection", "features": [
        {"type": "Feature", "geometry": {"type": "Polygon", "coordinates": [ring]},
         "properties": {"id": "far", "name": "Far", "limit_psf": 0.0}}]})


def fly(rate_dps: float, after_s: float = 30.0):
    """The bench simulator flying level, then a pitch manoeuvre at ``rate_dps`` for
    PITCH_S, then holding the flight-path angle; samples and the true track."""
    state = FlightState(standard_atmosphere(), LAT0, LON0, ALT_FT, MACH, HDG, pitch_load=True)
    pilot = Pilot([Segment("hold", duration_s=LEAD_S),
                   Segment("pitch", pitch_rate_deg_s=rate_dps, duration_s=PITCH_S)])
    track, samples = FlightTrack(), []
    n = int(round((LEAD_S + PITCH_S + after_s) / DT)) + 1
    for i in range(n):
        pilot.update(state, DT)
        track.add(state)
        samples.append(state.step(DT, i * DT))
    return samples, track


def truth_folds(track: FlightTrack, half_width_deg: float = 10.0):
    """Emission times and ground points (lat, lon deg) of the truth's fold near the
    carpet's centre line (|azimuth| <= half_width_deg)."""
    path = track.flown_path((LAT0, LON0))
    truth = trace_truth(path, standard_atmosphere(), default_aircraft(),
                        settings=TruthSettings(azimuth_step_deg=2.0, level_stride=2))
    ev = truth.events[0.0]
    sel = ev.focus & (np.abs(np.degrees(ev.azimuth_rad)) <= half_width_deg)
    return ev.emission_time_s[sel], ev.lat_deg[sel], ev.lon_deg[sel]


def advise_at(table, sample: dict, drop: str | None = None):
    """The advisor's prediction from one simulator sample (without field ``drop``)."""
    fields = {k: v for k, v in sample.items() if k not in ("t_s", drop)}
    adv = Advisor(table, far_zone(), AdvisorConfig(look_ahead_s=40.0, step_s=1.0,
                                                   in_air_s=0.0, caution_lead_s=30.0,
                                                   warning_lead_s=15.0))
    adv.step(AirDataState.from_fields(fields, rx_monotonic=0.0), now_monotonic=0.0)
    return adv


def predicted_folds(adv: Advisor, t0: float, half: int = 2):
    """Emission times (flight time) and ground points (lat, lon deg) where the advisor's
    ray-tube factor marks a fold near the carpet's centre line (``half`` nodes either
    side of it)."""
    pred, traj = adv.last_prediction, adv.last_trajectory
    assert pred is not None and traj is not None
    nj = pred.focus_factor.shape[1]
    mid = slice(nj // 2 - half, nj // 2 + half + 1)
    fold = (pred.focus_factor[:, mid] >= FOCUS_AMPLIFICATION_CAP - 1e-9) & pred.on_ground[:, None]
    k, j = np.nonzero(fold)
    lat, lon = traj.frame.from_enu(pred.east_m[:, mid][k, j], pred.north_m[:, mid][k, j])
    return pred.t_emit_s[k] + t0, np.degrees(lat), np.degrees(lon), pred


def _distance_km(lat1, lon1, lat2, lon2) -> float:
    from geographiclib.geodesic import Geodesic

    return Geodesic.WGS84.Inverse(lat1, lon1, lat2, lon2)["s12"] / 1000.0


@pytest.mark.slow
@pytest.mark.parametrize("drop", ["load_factor", "pitch_rate_dps"])
def test_push_over_focus_is_predicted_near_the_truths(pitch_table, drop) -> None:
    # Why 6. Truth: the bench simulator flies a push-over at -1.5 deg/s from level flight
    # at Mach 1.6, 50,000 ft; the direct tracer (bench/truth.py) finds the fold of the
    # ray map. The advisor, given the pitch rate at the start of the push-over, must
    # predict a fold near the truth's (from the pitch rate alone, and from the load
    # factor alone): emitted within 3 s of it, on the ground within
    # 5 km of it (tolerances: common practice, no source; the 1 s emission step, the
    # 4 deg fpa nodes of the table and the assumed length of the manoeuvre).
    rate = -1.5
    samples, track = fly(rate)
    t_truth, lat_truth, lon_truth = truth_folds(track)
    assert t_truth.size > 0, "truth: no fold for the push-over (the test's premise)"
    i = int(round((LEAD_S + 0.5) / DT))  # half a second into the push-over
    sample = samples[i]
    adv = advise_at(pitch_table, sample, drop)
    t_pred, lat_pred, lon_pred, pred = predicted_folds(adv, sample["t_s"])
    assert t_pred.size > 0, (
        f"no focus predicted for a push-over at {rate} deg/s (Mach {MACH}, {ALT_FT:.0f} ft): "
        f"largest focus factor {float(np.max(pred.focus_factor[pred.on_ground])):.3f}, "
        f"the truth has a fold for emissions at {t_truth.min():.1f}-{t_truth.max():.1f} s")
    # the predicted fold nearest to the truth's
    every = range(0, t_truth.size, max(1, t_truth.size // 50))
    d = min(_distance_km(a, b, lat_truth[m], lon_truth[m])
            for a, b in zip(lat_pred, lon_pred, strict=True) for m in every)
    assert d < 5.0, f"predicted fold {d:.1f} km from the truth's"
    dt = float(np.abs(t_pred[:, None] - t_truth[None, :]).min())
    assert dt < 3.0, f"predicted fold emitted {dt:.1f} s from the truth's"


@pytest.mark.slow
def test_pull_up_predicts_no_false_focus(pitch_table) -> None:
    # A pull-up at +1.5 deg/s stretches the ray tubes below (the Mach cone tilts its
    # downward rays back): the truth has no fold near the centre line and the advisor
    # must not predict one.
    rate = 1.5
    samples, track = fly(rate)
    t_truth, _, _ = truth_folds(track)
    assert t_truth.size == 0, f"truth: a fold for the pull-up at {t_truth[:5]} s"
    i = int(round((LEAD_S + 0.5) / DT))
    adv = advise_at(pitch_table, samples[i])
    t_pred, _, _, pred = predicted_folds(adv, samples[i]["t_s"])
    assert t_pred.size == 0, f"false focus predicted at {t_pred[:5]} s"


# ------------------------------------------------------------------ trajectory, fast checks

def test_pitching_kernel_matches_numpy_twin() -> None:
    # numba kernel with a flight-path-angle rate (params of 14) against its numpy twin
    # (tests/twins/trajectory.py) and against its own Python run
    from advisory.pipeline.trajectory import propagate_kernel
    from tests.test_trajectory import G, python_twin
    from tests.twins.trajectory import propagate_kernel_twin

    rng = np.random.default_rng(13)
    for _ in range(6):
        n = int(rng.integers(2, 200))
        t = np.cumsum(np.r_[0.0, rng.uniform(0.5, 3.0, n - 1)]) - rng.uniform(0.0, 20.0)
        mach = rng.uniform(0.9, 2.0) + rng.uniform(-0.003, 0.003) * t
        a = 295.0 + rng.uniform(-5, 5) * np.sin(t / 50.0)
        g0 = rng.uniform(-0.1, 0.1)
        params = np.array([rng.uniform(0, 15000), math.sin(g0), math.cos(g0),
                           rng.uniform(-0.6, 0.6), math.nan, rng.uniform(0, 6.3),
                           *rng.uniform(-30, 30, 2), *rng.uniform(-3e5, 3e5, 2), 6.37e6, G,
                           rng.uniform(-0.05, 0.05), rng.uniform(0.0, 30.0)])
        got = propagate_kernel(t, mach, a, params)
        np.testing.assert_allclose(got, propagate_kernel_twin(t, mach, a, params), rtol=1e-9,
                                   atol=1e-6)
        np.testing.assert_allclose(got, python_twin(propagate_kernel)(t, mach, a, params),
                                   rtol=1e-12, atol=1e-9)


def _level_start(**kw):
    from advisory.pipeline.trajectory import predict_trajectory

    c = 295.07  # speed of sound, m/s, held (the closed forms take the speed constant)
    args = dict(speed_of_sound=c, wind_east_mps=0.0, wind_north_mps=0.0, lookahead_s=20.0,
                step_s=0.25)
    args.update(kw)
    return predict_trajectory(math.radians(LAT0), math.radians(LON0), 15000.0, MACH, 0.0,
                              MACH * c, **args), MACH * c


def test_push_over_altitude_follows_the_closed_form() -> None:
    # Constant speed V and flight-path rate w from level flight: gamma = w t and
    # h(t) = h0 + V (1 - cos(w t)) / w (integral of V sin(gamma); closed form), until
    # the hold ends (PITCH_HOLD_S), then a straight line at the angle reached.
    from advisory.pipeline.pitch import PITCH_HOLD_S

    w = math.radians(-1.5)
    tr, v = _level_start(pitch_rate_rad_s=w)
    t = tr.t_s
    tc = np.minimum(t, PITCH_HOLD_S)
    expect = 15000.0 + v * (1.0 - np.cos(w * tc)) / w
    expect += v * np.sin(w * PITCH_HOLD_S) * (t - tc)
    np.testing.assert_allclose(tr.alt_m, expect, atol=0.5)
    np.testing.assert_allclose(tr.fpa_rad, w * tc, atol=1e-12)


@pytest.mark.parametrize("bank_deg", [0.0, 30.0])
def test_load_factor_and_pitch_rate_of_a_level_turn_give_no_pitch(bank_deg) -> None:
    # A level coordinated turn has load factor 1 / cos(bank) and body pitch rate
    # psi_dot sin(bank) (Euler-angle kinematics; Flight Dynamics, Princeton University
    # Press 2004, ch. 2, value from memory): neither is a pull-up.
    from advisory.pipeline.pitch import flight_path_rate

    b = math.radians(bank_deg)
    v = MACH * 295.07
    psi_dot = 9.80665 * math.tan(b) / v
    assert flight_path_rate(0.0, b, v, None, 1.0 / math.cos(b)) == 0.0
    assert flight_path_rate(0.0, b, v, psi_dot * math.sin(b), None) == 0.0
    # and a wings-level pull-up at n g climbs at g (n - 1) / V (point-mass equations)
    assert flight_path_rate(0.0, 0.0, v, None, 1.3) == pytest.approx(9.80665 * 0.3 / v)


def test_load_factor_is_preferred_and_the_hold_is_bounded() -> None:
    # Load factor over pitch rate (module notes of advisory.pipeline.pitch); the angle
    # stops at the documented limit (10 deg) before the hold time when it gets there.
    from advisory.pipeline.pitch import PITCH_FPA_LIMIT_RAD

    tr, v = _level_start(pitch_rate_rad_s=math.radians(5.0), load_factor=1.0)
    assert np.all(tr.fpa_rad == 0.0)
    tr, v = _level_start(pitch_rate_rad_s=math.radians(-5.0))
    assert tr.fpa_rad.min() == pytest.approx(-PITCH_FPA_LIMIT_RAD, abs=1e-12)
    assert tr.fpa_rad[tr.t_s >= 2.0].max() == pytest.approx(-PITCH_FPA_LIMIT_RAD, abs=1e-12)


# ------------------------------------------------------------------ simulator and feed

def test_simulator_writes_pitch_rate_and_load_factor() -> None:
    # Wings-level push-over at rate w: body pitch rate w and load factor
    # cos(gamma) + V w / g (point-mass equation normal to the path; closed form: negative
    # here, -0.26 g, the push-over of Why 6 is a negative-g manoeuvre); a level
    # coordinated turn: q = psi_dot sin(bank), n = 1 / cos(bank) (closed forms). Samples
    # go through the feed's encoder and the decoder unchanged (real bytes).
    from advisory.io.messages import decode_frame, encode_air

    state = FlightState(standard_atmosphere(), LAT0, LON0, ALT_FT, MACH, HDG, pitch_load=True)
    pilot = Pilot([Segment("pitch", pitch_rate_deg_s=-1.5, duration_s=4.0)])
    samples = []
    for i in range(40):
        pilot.update(state, DT)
        samples.append(state.step(DT, i * DT))
    s = samples[20]
    v = MACH * float(standard_atmosphere().at(units.ft_to_m(ALT_FT)).sound_speed_mps)
    w = math.radians(-1.5)
    assert s["pitch_rate_dps"] == pytest.approx(-1.5, abs=1e-9)
    n = math.cos(math.radians(s["fpa_deg"])) + v * w / 9.80665
    assert s["load_factor"] == pytest.approx(n, rel=1e-3) and n < 0.0
    fields = {k: x for k, x in s.items() if k != "t_s"}
    decoded = decode_frame(encode_air(fields, 7, 1.8e9)).fields
    assert {k: x for k, x in decoded.items() if x is not None} == fields  # nil: not sent
    state = FlightState(standard_atmosphere(), LAT0, LON0, ALT_FT, MACH, HDG, bank_deg=30.0,
                        pitch_load=True)
    s = state.step(DT, 0.0)
    b = math.radians(30.0)
    assert s["pitch_rate_dps"] == pytest.approx(
        math.degrees(9.80665 * math.tan(b) / v * math.sin(b)), rel=1e-3)
    assert s["load_factor"] == pytest.approx(1.0 / math.cos(b), rel=1e-9)
    # off by default: the demo flights' records keep their bytes
    assert "pitch_rate_dps" not in FlightState(standard_atmosphere(), LAT0, LON0, ALT_FT, MACH,
                                               HDG).step(DT)


# ------------------------------------------------------------------ validation

def test_validator_accepts_and_refuses_the_new_fields() -> None:
    # Accepted ranges (ICD section 4; common practice, no source): |pitch rate| <= 30
    # deg/s, load factor -3 .. 9 g. Bad input gets one line naming the field and value.
    from advisory.pipeline.state import Rejection, StateValidator

    base = {"lat_deg": LAT0, "lon_deg": LON0, "alt_ft": ALT_FT, "mach": MACH,
            "heading_deg": HDG, "gs_kt": 917.0, "bank_deg": 0.0, "fpa_deg": 0.0}
    st = StateValidator().validate(dict(base, pitch_rate_dps=-1.5, load_factor=-0.25), 1.0,
                                   now_monotonic=1.0)
    assert isinstance(st, AirDataState)
    assert st.pitch_rate_rad_s == pytest.approx(math.radians(-1.5), rel=1e-15)
    assert st.load_factor == -0.25
    st = StateValidator().validate(base, 1.0, now_monotonic=1.0)
    assert isinstance(st, AirDataState) and st.pitch_rate_rad_s is None
    assert st.load_factor is None
    for field, value, code in [("pitch_rate_dps", 45.0, "range:pitch_rate_dps"),
                               ("load_factor", 9.5, "range:load_factor"),
                               ("load_factor", math.nan, "nonfinite:load_factor"),
                               ("pitch_rate_dps", "up", "type:pitch_rate_dps")]:
        rej = StateValidator().validate(dict(base, **{field: value}), 1.0, now_monotonic=1.0)
        assert isinstance(rej, Rejection) and rej == code, rej
        assert field in rej.detail and repr(value)[:4] in rej.detail, rej.detail
    # the state's fields round-trip (AirDataState.to_fields / from_fields)
    st = AirDataState.from_fields(dict(base, pitch_rate_dps=2.5, load_factor=1.2))
    back = st.to_fields()
    assert back["pitch_rate_dps"] == pytest.approx(2.5) and back["load_factor"] == 1.2
