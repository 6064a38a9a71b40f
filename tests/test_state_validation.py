"""AirDataState conversions and the StateValidator's checks (never raises, counts)."""

from __future__ import annotations

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from advisory.io.messages import decode_frame, encode_air
from advisory.pipeline.state import AirDataState, Rejection, StateValidator, ValidatorLimits

BASE = {"lat_deg": 40.0, "lon_deg": -100.0, "alt_ft": 45000.0, "mach": 1.4,
        "heading_deg": 90.0, "gs_kt": 740.0, "bank_deg": 0.0, "fpa_deg": 0.0}
T0 = 1893456000.0  # 2030-01-01T00:00:00Z


def _ok(v: StateValidator, fields, rx, utc=None):
    r = v.validate(fields, rx, utc, now_monotonic=rx)
    assert isinstance(r, AirDataState), getattr(r, "detail", r)
    return r


def _rej(v: StateValidator, fields, rx, utc=None, now=None):
    r = v.validate(fields, rx, utc, now_monotonic=rx if now is None else now)
    assert isinstance(r, Rejection), r
    return r


# --------------------------------------------------------------------------- conversion

def test_units_at_the_edge():
    # Exact unit definitions: 1 ft = 0.3048 m, 1 kt = 1852/3600 m/s (NIST SP 811, B.8/B.9);
    # 0 degC = 273.15 K.
    s = AirDataState.from_fields(dict(BASE, sat_c=-56.5, track_deg=95.0), utc_s=T0,
                                 rx_monotonic=3.0)
    assert s.alt_m == pytest.approx(13716.0, abs=1e-9)
    assert s.gs_mps == pytest.approx(740.0 * 1852.0 / 3600.0, rel=1e-15)
    assert s.sat_k == pytest.approx(216.65, abs=1e-12)
    assert s.heading_rad == pytest.approx(math.pi / 2)
    assert s.track_rad == pytest.approx(math.radians(95.0))
    assert s.lat_rad == pytest.approx(math.radians(40.0))
    assert (s.utc_s, s.rx_monotonic) == (T0, 3.0)


def test_wind_from_west_blows_toward_east():
    # Meteorological convention (WMO): direction the wind comes FROM; a west wind moves
    # air toward the east. 20 kt = 10.2889 m/s.
    s = AirDataState.from_fields(dict(BASE, wind_from_deg=270.0, wind_kt=20.0))
    assert s.wind_east_mps == pytest.approx(20 * 1852 / 3600)
    assert s.wind_north_mps == pytest.approx(0.0, abs=1e-12)


def test_to_fields_inverts_from_fields():
    f = dict(BASE, track_deg=91.0, mach_rate_per_s=0.002, sat_c=-50.0, wind_from_deg=225.0,
             wind_kt=35.0)
    back = AirDataState.from_fields(f).to_fields()
    for k, v in f.items():
        assert back[k] == pytest.approx(v, abs=1e-9), k


def test_from_fields_errors_name_the_field():
    with pytest.raises(ValueError, match="'mach'"):
        AirDataState.from_fields({k: v for k, v in BASE.items() if k != "mach"})
    with pytest.raises(ValueError, match="'gs_kt'.*'fast'"):
        AirDataState.from_fields(dict(BASE, gs_kt="fast"))
    with pytest.raises(ValueError, match="wind"):
        AirDataState.from_fields(dict(BASE, wind_kt=10.0))


def test_state_is_frozen():
    s = AirDataState.from_fields(BASE)
    with pytest.raises(AttributeError):
        s.mach = 2.0  # type: ignore[misc]


def test_validator_state_equals_from_fields():
    v = StateValidator()
    # a head wind: Mach, sat_c, wind and ground speed agree (the ground-speed check)
    f = dict(BASE, sat_c=-56.5, wind_from_deg=90.0, wind_kt=40.0, track_deg=89.0)
    assert _ok(v, f, 5.0, T0) == AirDataState.from_fields(f, utc_s=T0, rx_monotonic=5.0)


def test_ints_are_accepted_like_floats():
    v = StateValidator()
    a = _ok(v, {k: int(x) for k, x in BASE.items() if k != "mach"} | {"mach": 1.4}, 1.0)
    assert a == AirDataState.from_fields(BASE, rx_monotonic=1.0)


# ----------------------------------------------------------------------- field checks

@pytest.mark.parametrize(("field", "value", "code"), [
    ("lat_deg", 90.5, "range:lat_deg"),
    ("lon_deg", -181.0, "range:lon_deg"),
    ("alt_ft", 150000.0, "range:alt_ft"),
    ("alt_ft", -2000.0, "range:alt_ft"),
    ("mach", -0.1, "range:mach"),
    ("mach", 7.0, "range:mach"),
    ("heading_deg", 361.0, "range:heading_deg"),
    ("gs_kt", -5.0, "range:gs_kt"),
    ("bank_deg", 85.0, "range:bank_deg"),
    ("fpa_deg", -31.0, "range:fpa_deg"),
    ("mach", math.nan, "nonfinite:mach"),
    ("alt_ft", math.inf, "nonfinite:alt_ft"),
    ("lat_deg", None, "missing:lat_deg"),
    ("gs_kt", "740", "type:gs_kt"),
    ("bank_deg", True, "type:bank_deg"),
    ("sat_c", 80.0, "range:sat_c"),
    ("sat_c", math.nan, "nonfinite:sat_c"),
    ("track_deg", "north", "type:track_deg"),
    ("mach_rate_per_s", 3.0, "range:mach_rate_per_s"),
])
def test_bad_fields_rejected_and_counted(field, value, code):
    v = StateValidator()
    r = _rej(v, dict(BASE, **{field: value}), 1.0)
    assert r == code
    assert field in r.detail
    if value is not None and not isinstance(value, str):
        assert repr(float(value)) in r.detail or repr(value) in r.detail
    assert v.rejections == {code: 1} and v.accepted == 0


def test_wind_must_come_in_pairs():
    v = StateValidator()
    assert _rej(v, dict(BASE, wind_kt=20.0), 1.0) == "wind_incomplete"


def test_not_a_mapping():
    v = StateValidator()
    for bad in (None, 42, "lat_deg=40", [1, 2]):
        assert _rej(v, bad, 1.0) == "not_a_mapping"
    assert v.rejections["not_a_mapping"] == 4


# -------------------------------------------------------------------- time and clock

def test_stale_frame():
    v = StateValidator(ValidatorLimits(max_age_s=0.5))
    r = _rej(v, BASE, 1.0, now=1.6)
    assert r == "stale" and "0.600" in r.detail
    _ok(v, BASE, 1.7)


def test_current_and_is_stale_follow_the_feed():
    v = StateValidator()
    assert v.current(0.0) is None and v.is_stale(0.0)
    s = _ok(v, BASE, 10.0)
    assert v.current(10.4) is s
    assert v.current(10.6) is None and v.is_stale(10.6)


def test_rx_time_backwards():
    v = StateValidator()
    _ok(v, BASE, 10.0)
    assert _rej(v, BASE, 9.0) == "rx_backwards"


def test_clock_step_forward_rejected_once_then_accepted():
    v = StateValidator()
    _ok(v, BASE, 10.00, T0)
    _ok(v, BASE, 10.02, T0 + 0.02)
    assert _rej(v, BASE, 10.04, T0 + 3600.0) == "clock_step"
    _ok(v, BASE, 10.06, T0 + 3600.02)  # consistent with the new clock
    assert v.rejections == {"clock_step": 1}


def test_clock_step_backwards():
    v = StateValidator()
    _ok(v, BASE, 10.00, T0)
    assert _rej(v, BASE, 10.02, T0 - 5.0) == "utc_backwards"
    _ok(v, BASE, 10.04, T0 - 4.98)


def test_utc_out_of_range_and_nan():
    v = StateValidator()
    assert _rej(v, BASE, 1.0, 12.0) == "range:utc_s"
    assert _rej(v, BASE, 1.0, math.nan) == "nonfinite:utc_s"


# -------------------------------------------------------------------------- jumps

def _step(base, dt, **change):
    return dict(base, **change), dt


def test_position_jump_rejected():
    v = StateValidator()
    _ok(v, BASE, 1.00)
    r = _rej(v, dict(BASE, lat_deg=40.5), 1.02)  # 55 km in 20 ms
    assert r == "jump:position" and "m in 0.020 s" in r.detail


@pytest.mark.parametrize(("field", "value"), [
    ("alt_ft", 47000.0), ("mach", 1.9), ("heading_deg", 130.0), ("gs_kt", 900.0),
    ("bank_deg", 30.0), ("fpa_deg", 15.0),
])
def test_field_jumps_rejected(field, value):
    v = StateValidator()
    _ok(v, BASE, 1.00)
    r = _rej(v, dict(BASE, **{field: value}), 1.02)
    assert r == f"jump:{field}" and field in r.detail


def test_heading_wraps_through_north():
    v = StateValidator()
    _ok(v, dict(BASE, heading_deg=359.5), 1.00)
    _ok(v, dict(BASE, heading_deg=0.5), 1.02)


def test_consistent_new_track_is_taken_after_three_frames_and_one_second():
    # A genuine step (e.g. the source was reset to a corrected position) is refused until
    # at least three mutually consistent frames agree over at least 1 s (ICD section 4;
    # a shorter glitch never becomes the track). Motion check off: the invented frames
    # keep one position.
    v = StateValidator(ValidatorLimits(motion_fraction=0.0))
    _ok(v, BASE, 1.00)
    moved = dict(BASE, lat_deg=40.5)
    t = 1.02
    while t < 2.0:
        assert _rej(v, moved, t) == "jump:position"
        t += 0.02
    _ok(v, moved, 2.02)
    assert v.rebaselines == 1
    _ok(v, moved, 2.04)


def test_isolated_spike_never_becomes_the_track():
    v = StateValidator(ValidatorLimits(motion_fraction=0.0))  # one invented position
    t = 1.0
    for i in range(30):
        f = dict(BASE, lat_deg=50.0) if i % 2 else BASE  # every other frame a spike
        v.validate(f, t, now_monotonic=t)
        t += 0.02
    assert v.rebaselines == 0 and v.rejections == {"jump:position": 15}


def test_a_realistic_turn_is_accepted_throughout():
    # Coordinated level turn: rate = g tan(bank) / V (standard flight-mechanics result,
    # e.g. any flight-dynamics textbook; common practice). 25 deg bank at 740 kt,
    # 20 Hz for 30 s, position integrated on a sphere of mean radius.
    g, v_mps = 9.80665, 740 * 1852 / 3600
    rate = g * math.tan(math.radians(25.0)) / v_mps
    val = StateValidator()
    lat, lon, hdg = math.radians(40.0), math.radians(-100.0), 0.0
    for i in range(600):
        t = 100.0 + i * 0.05
        f = dict(BASE, lat_deg=math.degrees(lat), lon_deg=math.degrees(lon),
                 heading_deg=math.degrees(hdg) % 360.0, bank_deg=25.0)
        _ok(val, f, t, T0 + i * 0.05)
        hdg += rate * 0.05
        lat += v_mps * math.cos(hdg) * 0.05 / 6371008.8
        lon += v_mps * math.sin(hdg) * 0.05 / (6371008.8 * math.cos(lat))
    assert val.accepted == 600 and val.rejected == 0


def test_decoded_frames_validate_directly():
    v = StateValidator()
    frame = decode_frame(encode_air(BASE, 1, T0))
    s = v.validate_frame(frame, rx_monotonic=2.0, now_monotonic=2.0)
    assert isinstance(s, AirDataState) and s.utc_s == T0


# ---------------------------------------------------------------------- never raises

_any = st.one_of(st.none(), st.booleans(), st.integers(), st.floats(), st.text(max_size=5),
                 st.binary(max_size=5), st.lists(st.integers(), max_size=2))


@settings(max_examples=400, deadline=None)
@given(st.one_of(
    st.dictionaries(st.sampled_from(list(BASE) + ["sat_c", "wind_kt", "wind_from_deg",
                                                  "track_deg", "x"]), _any),
    st.fixed_dictionaries({k: st.one_of(st.floats(), st.integers()) for k in BASE}),
    _any), _any, _any)
def test_validator_never_raises(fields, rx, utc):
    v = StateValidator()
    r = v.validate(fields, rx, utc)
    assert isinstance(r, (AirDataState, Rejection))
    assert v.accepted + v.rejected == 1
