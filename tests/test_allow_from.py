"""Who may send to a UDP input, and who may choose the atmosphere (issue 15, item 8).

The measured failure: a spoofer sending at three times the real rate on another track
took over the service (most of its frames accepted, most real ones rejected). The rule
(``docs/interface.md`` section 10, "Who may send"): the sources of ``--allow-from``, or
else the first source (address and port) whose datagram passes its CRC; every other
datagram is counted (``source_refused``), never reaches the loop or the record, and the
status names a refused source that is sending while no valid air data flows. Expected
values are the interface document's rule (common practice, no source). Real UDP on
127.0.0.1 with two sender sockets, a real ``run`` process and a real record file.
"""

from __future__ import annotations

import json
import socket
import time

import pytest

import advisory.io.transports.udp as udp
import advisory.pipeline.profile as profile_mod
from advisory import units
from advisory.io.framing import datagram
from advisory.io.messages import decode_frame, encode_air
from advisory.io.records import KIND_EVENT, KIND_INPUT, decode_event, read_records
from advisory.physics.atmosphere import standard_atmosphere
from advisory.pipeline.advisor import Advisor
from advisory.pipeline.airdata import AirDataState
from advisory.pipeline.zones import ZoneSet
from advisory.service.settings import RunError, RunSettings, check_settings
from tests.test_run_e2e import (
    ALT_FT,
    GS_MPS,
    LAT0,
    LON0,
    M_PER_DEG_LON,
    READY_TIMEOUT_S,
    Listener,
    air_payload,
    end_run,
    free_udp_port,
    running_status,
    square,
    start_run,
    stop,
    zones_file,  # noqa: F401 - the fixture: an invented town 130 km ahead of the track
)


def spoof_payload(seq: int, t: float) -> bytes:
    """Another track: 30 km north of the real one, flying north at Mach 1.2, 30,000 ft."""
    return encode_air({"lat_deg": LAT0 + 0.27 + 350.0 * t / 111e3, "lon_deg": LON0 + 0.5,
                       "alt_ft": 30000.0, "mach": 1.2, "heading_deg": 0.0,
                       "gs_kt": 350.0 / units.KT, "bank_deg": 0.0, "fpa_deg": 0.0},
                      seq, time.time())


def sock() -> socket.socket:
    s = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
    s.bind(("127.0.0.1", 0))
    return s


def recorded(path):
    records, _ = read_records(path)
    inputs = [decode_frame(r.data) for r in records if r.kind == KIND_INPUT]
    events = [decode_event(r.data) for r in records if r.kind == KIND_EVENT]
    return inputs, events


def drive(port: int, real: socket.socket, spoof: socket.socket, seconds: float,
          real_too: bool = True, first: str = "real") -> tuple[int, int]:
    """Real frames at 5 Hz and spoofed ones at 15 Hz (three times the rate) for
    ``seconds``; ``first`` sends one frame before the other starts. (real, spoofed) sent."""
    n_real = n_spoof = 0
    t0 = time.monotonic()
    if first == "spoof":
        spoof.sendto(datagram(spoof_payload(10_000, 0.0)), ("127.0.0.1", port))
        n_spoof += 1
        time.sleep(0.05)
    for i in range(round(seconds * 15)):
        t = i / 15.0
        time.sleep(max(0.0, t0 + t - time.monotonic()))
        if real_too and i % 3 == 0:
            real.sendto(datagram(air_payload(i // 3, t)), ("127.0.0.1", port))
            n_real += 1
        spoof.sendto(datagram(spoof_payload(10_001 + i, t)), ("127.0.0.1", port))
        n_spoof += 1
    return n_real, n_spoof


def test_spoofer_at_three_times_the_rate_never_takes_over(tmp_path, small_table_path,
                                                          zones_file) -> None:  # noqa: F811
    listener = Listener()
    port = free_udp_port()
    record = tmp_path / "trust.boomrec"
    proc = start_run(tmp_path, "--input", f"udp://127.0.0.1:{port}", "--output",
                     listener.url, "--zones", str(zones_file), "--tables",
                     str(small_table_path), "--record", str(record))
    real, spoof = sock(), sock()
    try:
        listener.wait_for(running_status, READY_TIMEOUT_S, "first status",
                          after=0.0)
        n_real, n_spoof = drive(port, real, spoof, 3.0)  # 15 real, 45 spoofed
        t_alone = time.monotonic()
        _, n_alone = drive(port, real, spoof, 2.0, real_too=False)  # the real one silent
        time.sleep(0.5)  # let the service take the last datagrams before it stops
        code = stop(proc)
    finally:
        end_run(proc, listener, real, spoof)
    assert code == 0, (tmp_path / "run.err").read_text()
    inputs, events = recorded(record)
    # ICD section 10: only the first source is admitted; every real frame got through
    assert (n_real, n_spoof) == (15, 45)
    assert len(inputs) == n_real, [f.fields["lat_deg"] for f in inputs]
    assert all(f.fields["lat_deg"] == LAT0 for f in inputs)  # none from the other track
    final = [f for f in listener.since(0.0, "status")][-1].fields["counters"]
    assert final["valid"] == n_real, final
    assert final["source_refused"] == n_spoof + n_alone
    refused = [e.fields for e in events if e.code == "source_refused"]
    assert len(refused) == 1 and refused[0]["source"].startswith("127.0.0.1:")
    log = (tmp_path / "run.err").read_text()  # one log line per new refused source
    assert log.count("input: refusing datagrams from " + refused[0]["source"]) == 1, log
    # the real source silent, the other one sending: the status names it, not accepted
    late = [f for f in listener.since(t_alone + 1.0, "status")
            if "SIGTERM" not in f.fields["reason"]]
    assert late and all(f.fields["state"] == "unavailable" for f in late)
    assert all(refused[0]["source"] in f.fields["reason"] for f in late), late[-1].fields


def test_allow_from_admits_only_the_named_source(tmp_path, small_table_path,
                                                 zones_file) -> None:  # noqa: F811
    listener = Listener()
    port = free_udp_port()
    record = tmp_path / "allow.boomrec"
    real, spoof = sock(), sock()
    proc = start_run(tmp_path, "--input", f"udp://127.0.0.1:{port}", "--output",
                     listener.url, "--zones", str(zones_file), "--tables",
                     str(small_table_path), "--record", str(record),
                     "--allow-from", f"127.0.0.1:{real.getsockname()[1]},10.0.0.1")
    try:
        listener.wait_for(running_status, READY_TIMEOUT_S, "first status",
                          after=0.0)
        # the spoofer sends first: without --allow-from it would have been locked in
        n_real, n_spoof = drive(port, real, spoof, 2.0, first="spoof")
        time.sleep(0.5)
        code = stop(proc)
    finally:
        end_run(proc, listener, real, spoof)
    assert code == 0, (tmp_path / "run.err").read_text()
    inputs, _ = recorded(record)
    assert len(inputs) == n_real and all(f.fields["lat_deg"] == LAT0 for f in inputs)
    final = [f for f in listener.since(0.0, "status")][-1].fields["counters"]
    assert final["valid"] == n_real and final["source_refused"] == n_spoof


def test_bad_allow_from_is_one_line_and_exit_2(tmp_path, small_table_path,
                                               zones_file) -> None:  # noqa: F811
    # Project rule: bad option -> one line naming it and the value, exit code 2.
    proc = start_run(tmp_path, "--input", "udp://127.0.0.1:9", "--output",
                     "udp://127.0.0.1:9", "--zones", str(zones_file), "--tables",
                     str(small_table_path), "--allow-from", "0.0.0.0")
    assert proc.wait(120) == 2
    err = [x for x in (tmp_path / "run.err").read_text().splitlines() if "CAUTION" not in x]
    assert len(err) == 1 and "--allow-from" in err[0] and "0.0.0.0" in err[0], err


# ------------------------------------------------------------------------ the gate alone

def test_source_gate_locks_the_first_good_source() -> None:
    # ICD section 10: the first source whose datagram passes its CRC is locked in
    # (address and port); a bad datagram locks nothing. Common practice, no source.
    gate = udp.SourceGate()
    good = datagram(air_payload(0, 0.0))
    assert gate.admit(b"\x01\x02\x03\x04\x05\x06", "127.0.0.1", 4001, 0.0)  # bad: no lock
    assert gate.locked is None
    assert gate.admit(good, "127.0.0.1", 4002, 0.0)
    assert gate.locked == ("127.0.0.1", 4002)
    assert not gate.admit(good, "127.0.0.1", 4003, 0.1)  # same address, other port
    assert not gate.admit(good, "127.0.0.1", 4003, 0.2)
    assert gate.admit(good, "127.0.0.1", 4002, 0.3)
    assert gate.refused == 2 and gate.new_sources == ["127.0.0.1:4003"]
    assert "127.0.0.1:4003" in gate.note(1.0) and gate.note(10.0) == ""


def test_allowed_sources_by_address_or_address_and_port() -> None:
    allowed = udp.parse_allow_from("10.1.2.3, 127.0.0.1:5000")
    gate = udp.SourceGate(allowed)
    good = datagram(air_payload(0, 0.0))
    assert gate.admit(good, "10.1.2.3", 1, 0.0) and gate.admit(good, "10.1.2.3", 2, 0.0)
    assert gate.admit(good, "127.0.0.1", 5000, 0.0)
    assert not gate.admit(good, "127.0.0.1", 5001, 0.0)
    for bad in ("0.0.0.0", "239.1.2.3", "10.1.2", "10.1.2.3:0", "host.example:1", ""):
        try:
            udp.parse_allow_from(bad)
        except ValueError as exc:
            assert "--allow-from" in str(exc)
        else:
            raise AssertionError(f"{bad!r} accepted")


def test_many_random_ports_log_a_bounded_number_of_lines() -> None:
    gate = udp.SourceGate()
    good = datagram(air_payload(0, 0.0))
    gate.admit(good, "127.0.0.1", 1, 0.0)
    for port in range(2, 2000):
        gate.admit(good, "127.0.0.1", port, 0.0)
    assert gate.refused == 1998
    assert len(gate.new_sources) <= 34  # MAX_LOGGED_SOURCES plus one closing line


# --------------------------------------------------------------- atmosphere learning

def crafted(prof, offset_k: float, wind_mps: float = 0.0) -> None:
    """A sender's choice of atmosphere: levels 30,000-46,000 ft, 25 samples each."""
    std = standard_atmosphere()
    for alt_ft in range(30000, 46000, 200):
        z = units.ft_to_m(alt_ft)
        for _ in range(25):
            prof.add(z, std.at(z).temperature_k + offset_k, wind_mps, 0.0)


def test_atmosphere_learning_is_off_by_default() -> None:
    # Issue 15 item 8: 20 s of crafted frames made the service rebuild for an atmosphere
    # of the sender's choosing. Off by default: nothing is ever proposed.
    prof = profile_mod.StreamProfile()
    crafted(prof, 20.0)
    assert prof.proposal(standard_atmosphere(), 0.0) is None


def test_learned_atmosphere_must_be_plausible() -> None:
    std = standard_atmosphere()
    on = dict(enabled=True)
    ok = profile_mod.StreamProfile(**on)
    crafted(ok, 8.0, 30.0)
    assert ok.proposal(std, 0.0) is not None  # plausible: ISA+8 K, 30 m/s
    hot = profile_mod.StreamProfile(**on)
    crafted(hot, 60.0)  # beyond +-35 K from the standard atmosphere (engineering choice)
    assert hot.proposal(std, 0.0) is None and hot.refused == 1
    windy = profile_mod.StreamProfile(**on)
    crafted(windy, 0.0, 180.0)  # beyond 120 m/s (value from memory: jet-stream extremes)
    assert windy.proposal(std, 0.0) is None and "wind" in windy.last_refusal
    # Autoconvective lapse rate g0/R = 34.2 K/km (U.S. Standard Atmosphere 1976
    # constants g0 = 9.80665 m/s^2, R = 287.053 J/(kg K)).
    assert profile_mod.MAX_GRADIENT_K_PER_M * 1000 == pytest.approx(34.16, abs=0.01)
    steep = profile_mod.StreamProfile(**on)
    for k, alt_ft in enumerate(range(30500, 36500, 1000)):  # +-20 K every 305 m
        z = units.ft_to_m(alt_ft)
        for _ in range(25):
            steep.add(z, std.at(z).temperature_k + (20.0 if k % 2 else -20.0), 0.0, 0.0)
    assert steep.proposal(std, 0.0) is None and "gradient" in steep.last_refusal


def test_real_track_helpers_agree() -> None:
    # the real track moves at the ground speed the frames claim (sanity of the fixture)
    a = decode_frame(air_payload(0, 0.0)).fields
    b = decode_frame(air_payload(1, 1.0)).fields
    assert (b["lon_deg"] - a["lon_deg"]) * M_PER_DEG_LON == pytest.approx(GS_MPS, rel=1e-9)
    assert a["alt_ft"] == ALT_FT


class SubmitLog:
    """A table source that only notes the atmospheres the advisor asks to rebuild for
    (the manager's interface, ``advisory.pipeline.advisor.TableSource``; no I/O)."""

    def __init__(self, table) -> None:
        self.table = table
        self.submitted: list = []

    def submit_atmosphere(self, atm) -> None:
        self.submitted.append(atm)


def test_advisor_does_not_learn_from_crafted_frames_by_default(small_table, tmp_path) -> None:
    # Issue 15 item 8 as measured: 20 s of crafted frames (20 Hz, climbing through
    # 42,000-48,000 ft with a temperature of the sender's choosing) made the service
    # rebuild its tables. By default the advisor never asks for a rebuild.
    zones = tmp_path / "zones.geojson"
    zones.write_text(json.dumps({"type": "FeatureCollection", "features": [
        square("millbrook", LAT0, LON0 + 130e3 / M_PER_DEG_LON)]}))
    std = standard_atmosphere()
    runs = {}
    for name, prof in (("default", None),
                       ("enabled", profile_mod.StreamProfile(enabled=True))):
        src = SubmitLog(small_table)
        adv = Advisor(src, ZoneSet.from_file(zones))
        if prof is not None:
            adv.stream_profile = prof
        for k in range(400):
            alt_ft = 42000.0 + 15.0 * k
            sat_c = std.at(units.ft_to_m(alt_ft)).temperature_k - 273.15 + 12.0
            st = AirDataState.from_fields(
                {"lat_deg": LAT0, "lon_deg": LON0 + GS_MPS * k * 0.05 / M_PER_DEG_LON,
                 "alt_ft": alt_ft, "mach": 1.6, "heading_deg": 90.0,
                 "gs_kt": GS_MPS / units.KT, "bank_deg": 0.0, "fpa_deg": 0.0,
                 "sat_c": sat_c}, rx_monotonic=k * 0.05)
            adv.step(st, k * 0.05)
        runs[name] = len(src.submitted)
    assert runs == {"default": 0, "enabled": 1}  # enabled: ISA+12 K is plausible


def test_trust_options_need_a_udp_input() -> None:
    # Project rule: a bad option is one line naming it (exit 2 in the command).
    for kw in ({"allow_from": "127.0.0.1"}, {"auth_key": "k.hex"}):
        with pytest.raises(RunError, match="--allow-from|--auth-key"):
            check_settings(RunSettings("serial:///dev/ttyUSB0", "udp://127.0.0.1:1", "z",
                                       **kw))
    with pytest.raises(RunError, match="--learn-atmosphere"):
        check_settings(RunSettings("udp://127.0.0.1:2", "udp://127.0.0.1:1", "z",
                                   learn_atmosphere=True))
