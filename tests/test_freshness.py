"""Input freshness and plausibility (issue 15, High 1 and the input items of Low).

Frozen data must not pass as fresh: a repeated or old ``seq`` (ICD ``docs/interface.md``
section 3: +1 per frame, wraps from 2^32-1 to 0), a sender clock that does not advance,
a position that does not move with the ground speed (section 4, "Freshness and
plausibility"); the data then go stale within 1 s and the advisory says unavailable with
the reason. Legitimate cases pass: seq wrap-around, a sender restart, gaps, slow
aircraft, positions refreshed at 5 Hz. The limits are engineering choices (common
practice, no source) listed in the ICD.
"""

from __future__ import annotations

import math
import socket
import subprocess
import sys
import time

import pytest
from ambiance import Atmosphere

from advisory import units
from advisory.io.arinc429 import DEFAULT_LABELS, Arinc429Assembler, encode_bnr
from advisory.io.arinc429_labels import parse_label_map
from advisory.io.framing import datagram
from advisory.io.messages import Frame, decode_frame, encode_air
from advisory.pipeline.state import AirDataState, Rejection, StateValidator
from advisory.schema import FRESHNESS_REASONS
from tests.test_run_e2e import (  # noqa: F401 - zones_file is a fixture
    READY_TIMEOUT_S,
    Listener,
    free_udp_port,
    running_status,
    start_run,
    stop,
    zones_file,
)

LAT0, LON0 = 40.0, -100.0
ALT_FT = 45000.0
MACH = 1.6
# Speed of sound at 45,000 ft (13,716 m) from the reference library ambiance (U.S.
# Standard Atmosphere 1976): about 295.07 m/s.
A_45K = float(Atmosphere(ALT_FT * 0.3048).speed_of_sound[0])
GS_MPS = MACH * A_45K  # no wind: ground speed = true airspeed
M_PER_DEG_LAT = 111195.0  # mean-radius sphere, 6371.0088 km (NIMA TR8350.2 R1)
M_PER_DEG_LON = M_PER_DEG_LAT * math.cos(math.radians(LAT0))
U0 = 1893456000.0  # 2030-01-01T00:00:00Z
PERIOD = 0.05  # 20 Hz


def fields_at(t: float, **over) -> dict:
    """Level flight east at Mach 1.6, 45,000 ft, no wind, ``t`` s into the flight."""
    f = {"lat_deg": LAT0, "lon_deg": LON0 + GS_MPS * t / M_PER_DEG_LON, "alt_ft": ALT_FT,
         "mach": MACH, "heading_deg": 90.0, "gs_kt": GS_MPS / units.KT, "bank_deg": 0.0,
         "fpa_deg": 0.0}
    f.update(over)
    return f


def frame(fields: dict, seq: int, utc: float) -> Frame:
    """A decoded air frame as the loop hands it to the validator."""
    return Frame("air", seq, utc, fields)


def feed(v: StateValidator, t: float, seq: int, utc: float | None = None,
         **over) -> AirDataState | Rejection:
    return v.validate_frame(frame(fields_at(t, **over), seq, U0 + t if utc is None else utc),
                            t, t)


def fly(v: StateValidator, t0: float, t1: float, seq0: int = 0) -> int:
    """Clean frames from t0 to t1 at 20 Hz, all accepted; returns the next seq."""
    seq = seq0
    for k in range(round((t1 - t0) / PERIOD)):
        res = feed(v, t0 + k * PERIOD, seq & 0xFFFFFFFF)
        assert isinstance(res, AirDataState), getattr(res, "detail", res)
        seq += 1
    return seq


def first_stale(v: StateValidator, times) -> float | None:
    """The first of ``times`` at which the validator has no fresh state."""
    return next((t for t in times if v.current(t) is None), None)


# ------------------------------------------------------------------------------ seq

def test_the_same_datagram_resent_goes_stale_within_one_second():
    # The measured failure: one datagram re-sent at 20 Hz for 60 s was always
    # accepted. Now: accepted once, every repeat refused as seq_repeat, stale in < 1 s.
    v = StateValidator()
    fly(v, 0.0, 2.0)
    frame = decode_frame(encode_air(fields_at(2.0), 40, U0 + 2.0))
    times = [2.0 + k * PERIOD for k in range(1200)]  # 60 s at 20 Hz
    results = [v.validate_frame(frame, t, t) for t in times]
    assert isinstance(results[0], AirDataState)
    assert all(r == "seq_repeat" for r in results[1:])
    assert v.rejections == {"seq_repeat": 1199}
    stale_at = first_stale(v, times)
    assert stale_at is not None and stale_at - 2.0 <= 1.0  # ICD section 4: within 1 s
    assert v.not_fresh == "seq_repeat" and "seq 40" in v.not_fresh.detail


def test_seq_wraps_from_max_to_zero():
    # ICD section 3: seq wraps from 2^32-1 to 0; the wrap is the next frame, not a step back.
    v = StateValidator()
    fly(v, 0.0, 1.0, seq0=2**32 - 10)
    assert v.rejections == {}


def test_gap_is_lost_frames_and_accepted():
    v = StateValidator()
    fly(v, 0.0, 0.5)
    assert isinstance(feed(v, 0.5, 500), AirDataState)  # ICD section 3: a gap = lost frames


def test_reordered_frame_refused_then_stream_goes_on():
    v = StateValidator()
    nxt = fly(v, 0.0, 0.5)  # seqs 0..9
    assert feed(v, 0.5, nxt - 3) == "seq_back"
    assert isinstance(feed(v, 0.55, nxt), AirDataState)
    assert v.seq_restarts == 0


def test_sender_restart_is_taken_after_three_frames_numbered_on():
    # Stated rule (ICD section 4): after a step back, three frames in a row each at most
    # 16 ahead of the one before are a sender restart; the third is accepted.
    v = StateValidator()
    fly(v, 0.0, 1.0, seq0=5000)
    assert feed(v, 1.00, 0) == "seq_back"
    assert feed(v, 1.05, 1) == "seq_back"
    assert isinstance(feed(v, 1.10, 2), AirDataState)
    assert v.seq_restarts == 1
    assert isinstance(feed(v, 1.15, 3), AirDataState)


def test_replayed_old_frames_out_of_order_never_become_a_restart():
    v = StateValidator()
    fly(v, 0.0, 1.0, seq0=1000)
    for k, s in enumerate((10, 500, 12, 900, 11)):  # not numbered on from one another
        assert feed(v, 1.0 + k * PERIOD, s) == "seq_back"
    assert v.seq_restarts == 0


# ------------------------------------------------------------------------------ clock

def test_frozen_clock_goes_stale_within_one_second():
    # Position and seq advance, utc_s does not: the sender's clock is frozen.
    v = StateValidator()
    seq = fly(v, 0.0, 2.0)
    times = [2.0 + k * PERIOD for k in range(40)]
    res = [feed(v, t, seq + k, utc=U0 + 2.0) for k, t in enumerate(times)]
    assert isinstance(res[0], AirDataState)
    assert all(r == "utc_frozen" for r in res[1:])
    stale_at = first_stale(v, times)
    assert stale_at is not None and stale_at - 2.0 <= 1.0
    # the clock runs again: accepted at once (consistent with the time passed here)
    assert isinstance(feed(v, 4.0, seq + 40), AirDataState)


# ----------------------------------------------------------------------------- motion

def test_frozen_position_with_advancing_clock_goes_stale_within_one_second():
    # seq and utc_s advance, the position stays where it was at t = 2 s while the
    # ground speed says 917 kt (about 472 m/s: 0.47 km per second not flown).
    v = StateValidator()
    seq = fly(v, 0.0, 2.0)
    frozen = fields_at(2.0)
    times = [2.0 + k * PERIOD for k in range(40)]
    res = [feed(v, t, seq + k, lat_deg=frozen["lat_deg"], lon_deg=frozen["lon_deg"])
           for k, t in enumerate(times)]
    assert "position_frozen" in res
    stale_at = first_stale(v, times)
    assert stale_at is not None and stale_at - 2.0 <= 1.0
    assert v.not_fresh == "position_frozen" and "frozen" in v.not_fresh.detail
    # moving again with the flight: accepted
    assert isinstance(feed(v, 4.0, seq + 40), AirDataState)


def test_slow_aircraft_that_hardly_moves_is_not_frozen():
    # Taxi at 5 kt: 2.6 m/s x 0.4 s is below the 50 m position noise (legitimate).
    v = StateValidator()
    for k in range(200):
        t = k * PERIOD
        res = v.validate_frame(frame(dict(fields_at(0.0), alt_ft=0.0, mach=0.0, gs_kt=5.0),
                                     k, U0 + t), t, t)
        assert isinstance(res, AirDataState), getattr(res, "detail", res)


def test_position_refreshed_at_5_hz_in_20_hz_frames_passes():
    # A navigation source updating position at 5 Hz inside 20 Hz air-data frames.
    v = StateValidator()
    for k in range(200):
        t = k * PERIOD
        pos = fields_at(math.floor(t * 5.0) / 5.0)
        res = feed(v, t, k, lat_deg=pos["lat_deg"], lon_deg=pos["lon_deg"])
        assert isinstance(res, AirDataState), getattr(res, "detail", res)


def _arinc_payload(f: dict) -> bytes:
    words = [encode_bnr(s.label, f[s.field], s.sig_bits, s.range)
             for s in DEFAULT_LABELS.values() if f.get(s.field) is not None]
    return b"".join(w.to_bytes(4, "big") for w in words)


def test_arinc_bus_repeating_frozen_position_words_goes_stale():
    # ARINC 429 words (ARINC 429 Part 1, value from memory, as the default label map):
    # the bus keeps sending the position of t = 2 s while ground speed says 917 kt.
    asm = Arinc429Assembler()
    v = StateValidator()
    frozen = _arinc_payload(fields_at(2.0))
    codes = []
    times = [k * PERIOD for k in range(80)]
    for t in times:
        asm.feed_payload(_arinc_payload(fields_at(t)) if t < 2.0 else frozen, t)
        res = v.validate(asm.fields(t), t, None, t)
        codes.append(res if isinstance(res, Rejection) else "ok")
    assert set(codes[:40]) == {"ok"}
    assert "position_frozen" in codes[40:]
    stale_at = first_stale(v, times[40:])
    assert stale_at is not None and stale_at - 2.0 <= 1.0


# ------------------------------------------------------------------------ plausibility

def test_ground_speed_in_metres_per_second_is_refused():
    # 472 m/s sent as 472 "kt" (243 m/s): Mach 1.6 at 45,000 ft is 917 kt true
    # airspeed (ambiance); no wind up to 243 kt closes a gap of 445 kt.
    v = StateValidator()
    res = v.validate_frame(frame(fields_at(0.0, gs_kt=GS_MPS), 0, U0), 0.0, 0.0)
    assert res == "inconsistent:gs_kt" and "'gs_kt'" in res.detail and "m/s" in res.detail


def test_ground_speed_with_wind_sent_is_checked_tightly():
    # Mach 1.2 at 45,000 ft (354 m/s): without wind the check is loose (any wind up to
    # 243 kt); with the wind sent (40 kt from the west, a tail wind heading east) the
    # m/s mistake is refused and the right value passes.
    tas = 1.2 * A_45K
    tail = 40.0 * units.KT
    right = (tas + tail) / units.KT
    ok = StateValidator().validate(fields_at(0.0, mach=1.2, gs_kt=right, wind_from_deg=270.0,
                                             wind_kt=40.0), 0.0, U0, 0.0)
    assert isinstance(ok, AirDataState), getattr(ok, "detail", ok)
    bad = StateValidator().validate(fields_at(0.0, mach=1.2, gs_kt=tas + tail,
                                              wind_from_deg=270.0, wind_kt=40.0),
                                    0.0, U0, 0.0)
    assert bad == "inconsistent:gs_kt"


def test_short_position_glitch_is_never_accepted():
    # The case: for 0.2 s the position reads 1 deg of latitude (111 km) north.
    # A new track needs consistent frames over at least 1 s (ICD section 4).
    v = StateValidator()
    seq = fly(v, 0.0, 2.0)
    for k in range(4):  # 2.00, 2.05, 2.10, 2.15
        t = 2.0 + k * PERIOD
        assert feed(v, t, seq + k, lat_deg=LAT0 + 1.0) == "jump:position"
    fly(v, 2.2, 3.0, seq0=seq + 4)
    assert v.rebaselines == 0 and v.rejections == {"jump:position": 4}


def test_freshness_reasons_are_schema_facts():
    assert FRESHNESS_REASONS == ("seq_repeat", "seq_back", "utc_frozen", "position_frozen")


# -------------------------------------------------------------------------- label maps

@pytest.mark.parametrize("key", ["range", "resolution", "scale", "offset"])
@pytest.mark.parametrize("value", ["nan", "inf", "-inf"])
def test_label_map_with_nonfinite_number_is_refused(key, value):
    # TOML 1.0 allows nan and inf floats; a scaling of nan or inf is never meant.
    rng = "" if key == "range" else "range = 131072.0\n"
    text = f'[labels.203]\nfield = "alt_ft"\n{rng}{key} = {value}\n'
    with pytest.raises(ValueError, match=f"label 203: {key} must be a finite number"):
        parse_label_map(text, "map.toml")


def test_run_refuses_a_nonfinite_label_map_with_exit_2(tmp_path, small_table_path,
                                                      zones_file):  # noqa: F811
    # ICD section 17.5: a bad label map is one line naming the file, and exit code 2.
    bad = tmp_path / "labels.toml"
    bad.write_text('[labels.203]\nfield = "alt_ft"\nrange = nan\n')
    proc = subprocess.run(
        [sys.executable, "-m", "advisory.cli", "run", "--input",
         f"udp://127.0.0.1:{free_udp_port()}", "--input-format", "arinc429",
         "--output", f"udp://127.0.0.1:{free_udp_port()}", "--zones", str(zones_file),
         "--tables", str(small_table_path),
         "--label-map", str(bad), "--duration-s", "1"],
        capture_output=True, text=True, timeout=120)
    assert proc.returncode == 2, proc.stderr
    assert "range must be a finite number" in proc.stderr and "Traceback" not in proc.stderr


# ---------------------------------------------------------------------------- Mach 0

def test_mach_zero_is_no_boom(small_table):
    # A boom needs supersonic flight (Mach > 1): common practice, no source. Mach 0 (on
    # the ground, or a source that reports 0) is "no boom", not "prediction failed".
    from advisory.pipeline.advisor import Advisor
    from advisory.pipeline.zones import ZoneSet

    adv = Advisor(small_table, ZoneSet.from_geojson({"type": "FeatureCollection",
                                                     "features": []}))
    st = AirDataState.from_fields(fields_at(0.0, mach=0.0, gs_kt=0.0, alt_ft=0.0),
                                  utc_s=U0, rx_monotonic=0.0)
    a = adv.step(st, 0.0)
    assert a.status == "no_boom", a.reason


# ------------------------------------------------------------------------- end to end

def test_run_same_datagram_resent_leaves_ok_within_one_second(tmp_path, small_table_path,
                                                              zones_file):  # noqa: F811
    # The measured failure over real UDP on 127.0.0.1: the sender keeps re-sending
    # its last datagram at 20 Hz. The status leaves ok within 1 s (measured on the
    # service's own step clock, the frames' utc_s) and the advisory says unavailable
    # with the reason.
    listener = Listener()
    port = free_udp_port()
    proc = start_run(tmp_path, "--input", f"udp://127.0.0.1:{port}", "--output",
                     listener.url, "--zones", str(zones_file), "--tables",
                     str(small_table_path), "--rate-hz", "10")
    tx = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
    try:
        listener.wait_for(running_status, READY_TIMEOUT_S, "first status",
                          after=0.0)
        t0 = time.monotonic()
        seq = 0
        last = b""
        ok_seen = False
        while time.monotonic() - t0 < 20.0 and not ok_seen:
            last = datagram(encode_air(fields_at(time.monotonic() - t0), seq, time.time()))
            tx.sendto(last, ("127.0.0.1", port))
            seq += 1
            time.sleep(PERIOD)
            ok_seen = any(f.type == "status" and f.fields["state"] == "ok"
                          for f in listener.since(t0))
        assert ok_seen, "the status never became ok on clean traffic"
        for _ in range(20):  # one more second of clean traffic
            tx.sendto(datagram(encode_air(fields_at(time.monotonic() - t0), seq,
                                          time.time())), ("127.0.0.1", port))
            seq += 1
            time.sleep(PERIOD)
        last = datagram(encode_air(fields_at(time.monotonic() - t0), seq, time.time()))
        tx.sendto(last, ("127.0.0.1", port))
        t_freeze = time.monotonic()
        utc_freeze = time.time()
        while time.monotonic() - t_freeze < 3.0:
            time.sleep(PERIOD)
            tx.sendto(last, ("127.0.0.1", port))  # the same datagram, byte for byte
        after = listener.since(t_freeze)
    finally:
        stop(proc)
        listener.close()
        tx.close()
    left = [f for f in after if f.type == "status" and f.fields["state"] != "ok"]
    assert left, [f.fields for f in after if f.type == "status"]
    assert left[0].utc_s - utc_freeze <= 1.0  # degraded first (input rejected), then:
    gone = [f for f in left if f.fields["state"] == "unavailable"]
    assert gone and gone[0].utc_s - utc_freeze <= 1.0
    assert "stale" in gone[0].fields["reason"] and "seq" in gone[0].fields["reason"]
    advs = [f for f in after if f.type == "adv" and f.utc_s - utc_freeze > 1.0]
    assert advs and all(f.fields["status"] == "unavailable" for f in advs)
    assert all(f.fields["time_to_contact_s"] is None for f in advs)
    assert left[-1].fields["counters"]["seq_repeat"] >= 40


# ------------------------------------------------------------------------ unknown keys

def test_unknown_keys_are_counted_and_reported_once_per_key(caplog):
    # ICD section 8: unknown keys are ignored (the frame is decoded) - and now counted
    # (``unknown_keys``) with one warning per distinct name.
    import msgpack

    from advisory.io.messages import FrameDecoder

    dec = FrameDecoder()
    m = {"v": 1, "type": "air", "seq": 1, "utc_s": U0, **fields_at(0.0),
         "airspeed_kt": 600.0, "flap": 0}
    with caplog.at_level("WARNING", logger="advisory.io.messages"):
        for seq in range(5):
            f = dec.decode(msgpack.packb(dict(m, seq=seq)))
            assert f is not None and f.fields["mach"] == MACH
    assert dec.unknown_keys == 10 and dec.counters["decoded"] == 5
    assert dec.unknown_seen == {"airspeed_kt", "flap"}
    lines = [r.getMessage() for r in caplog.records]
    assert len(lines) == 2 and any("'airspeed_kt'" in x for x in lines)
