"""Replay harness: the recorded clock, speeds, torn records, expectations, batch, --send,
and a live ``boom-advisory run`` reproduced byte for byte.

What is checked against something outside the replay code: the live service itself
(``advisory/service.py`` over real UDP sockets on 127.0.0.1, its own record file), the
record-file layout of the ICD (``docs/interface.md`` section 13, used to cut a record in
half the way a power cut would), and invented short flights synthesized with
``replay_logs/make_demo_logs.py``. Timing windows of the expected segments follow from
the validator's 0.5 s freshness limit (ICD section 4).
"""

from __future__ import annotations

import importlib.util
import json
import math
import os
import shutil
import signal
import socket
import subprocess
import sys
import threading
import time
from pathlib import Path

import pytest

from advisory.bench.batch import replay_many
from advisory.bench.expect import (
    Expectation,
    ExpectFileError,
    Segment,
    compare_expected,
    load_expected,
)
from advisory.bench.replay import carried_counters, replay_log
from advisory.bench.scenario import ReplayError, prepare
from advisory.cli import main
from advisory.io.framing import StreamDeframer, parse_datagram
from advisory.io.messages import decode_frame
from advisory.io.records import (
    KIND_EVENT,
    KIND_INPUT,
    KIND_RAW_INPUT,
    Recorder,
    encode_event,
    read_records,
)

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "replay_logs"


def _load_maker():
    if "make_demo_logs" in sys.modules:
        return sys.modules["make_demo_logs"]
    spec = importlib.util.spec_from_file_location("make_demo_logs",
                                                  DEMO / "make_demo_logs.py")
    mod = importlib.util.module_from_spec(spec)
    sys.modules.setdefault("make_demo_logs", mod)
    spec.loader.exec_module(mod)
    return mod


MAKER = _load_maker()


@pytest.fixture(scope="session", autouse=True)
def table_cache(tmp_path_factory):
    """One table cache for the whole session (and the replay worker processes)."""
    path = tmp_path_factory.getbasetemp() / "boom-advisory-cache"
    path.mkdir(exist_ok=True)
    old = os.environ.get("BOOM_ADVISORY_CACHE")
    os.environ["BOOM_ADVISORY_CACHE"] = str(path)
    yield path
    if old is None:
        os.environ.pop("BOOM_ADVISORY_CACHE", None)
    else:
        os.environ["BOOM_ADVISORY_CACHE"] = old


DEFAULT_FAULTS = (MAKER.Fault("dropout", 2.0, 3.5), MAKER.Fault("garbage", 4.0, 5.0))


def short_flight(root: Path, name: str = "short", duration_s: float = 6.0,
                 faults=DEFAULT_FAULTS, **kw) -> Path:
    """A few seconds of invented flight: eastbound Mach 1.4, a town 100 km ahead.

    100 km: far enough that slowing down still clears with over a minute to spare, so the
    conflict is an *advisory* (levels on the time left to act, issue 13; from 60 km it is
    a warning)."""
    lat0, lon0 = 30.2, -140.9
    sc = MAKER.Scenario(
        name=name, title=f"Short test flight {name}", description="invented test flight",
        lat_deg=lat0, lon_deg=lon0, alt_ft=45000.0, mach=1.4, heading_deg=90.0,
        duration_s=duration_s,
        zones=(MAKER.town("testford", "Testford", *MAKER.ahead(lat0, lon0, 90.0, 100.0), 3.0),),
        grid=MAKER.CALM_GRID, faults=tuple(faults), seed=7, **kw)
    MAKER.make(sc, root)
    return root / name


def statuses(res) -> list[tuple[str, str | None]]:
    return [(s.status, s.zone_id) for s in res.segments]


# ------------------------------------------------------------------ clock and speed

def test_identical_at_speed_1_and_max_and_on_every_run(tmp_path) -> None:
    # Issue requirement: byte-identical advisory output at any speed and on every run
    # (the loop reads no clock for what it publishes).
    d = short_flight(tmp_path, duration_s=3.0, faults=(MAKER.Fault("dropout", 1.0, 1.8),))
    fast = replay_log(prepare(d, speed="max"))
    again = replay_log(prepare(d, speed="max"))
    t0 = time.monotonic()
    real = replay_log(prepare(d, speed=1))
    wall = time.monotonic() - t0
    assert fast.outputs and fast.outputs == again.outputs == real.outputs
    assert statuses(fast) == [("advisory", "testford"), ("unavailable", None),
                              ("advisory", "testford")]
    # pacing, not performance: at speed 1 the replay sleeps through the flight's 3 s
    assert wall >= 0.9 * real.duration_s


def test_schedule_polls_at_the_loop_rate(tmp_path) -> None:
    # 10 Hz steps (ICD section 1) over the flight, each an advisory frame, and a status
    # frame at least once a second.
    d = short_flight(tmp_path, duration_s=4.0, faults=())
    res = replay_log(prepare(d))
    adv = [(m, decode_frame(p)) for m, _u, p in res.outputs]
    times = [m for m, f in adv if f.type == "adv"]
    assert len(times) == pytest.approx(res.duration_s * 10 + 1, abs=1)
    gaps = [b - a for a, b in zip(times, times[1:])]
    assert max(gaps) == pytest.approx(0.1, abs=1e-6) and min(gaps) == pytest.approx(0.1, abs=1e-6)
    st = [m for m, f in adv if f.type == "status"]
    assert max(b - a for a, b in zip(st, st[1:])) <= 1.0 + 1e-6


def test_dropout_is_unavailable_never_clear(tmp_path) -> None:
    # ICD section 4/5: no fresh valid data for 0.5 s -> unavailable, until data returns.
    d = short_flight(tmp_path)
    res = replay_log(prepare(d))
    seg = res.segments
    assert [s.status for s in seg] == ["advisory", "unavailable", "advisory"]
    assert seg[1].t_start_s == pytest.approx(2.5, abs=0.11)
    assert seg[1].t_end_s == pytest.approx(3.5, abs=0.11)
    assert res.counters["cobs_error"] + res.counters["bad_crc"] + res.counters["too_short"] > 0


# ------------------------------------------------------------------ torn and damaged records

def _record_offsets(path: Path) -> list[int]:
    records, _ = read_records(path)
    return [r.offset for r in records]


def test_torn_last_record_is_reported_and_skipped(tmp_path, capsys) -> None:
    # A power cut mid-write leaves the first bytes of the last record only (ICD section 13).
    d = short_flight(tmp_path, duration_s=3.0, faults=())
    log = d / "flight.rec"
    data = log.read_bytes()
    last = _record_offsets(log)[-1]
    whole = tmp_path / "whole"
    torn = tmp_path / "torn"
    for p, cut in ((whole, last), (torn, last + 17)):
        shutil.copytree(d, p)
        (p / "flight.rec").write_bytes(data[:cut])
    ref = replay_log(prepare(whole))
    res = replay_log(prepare(torn))
    assert res.read["torn_tail"] and res.read["torn_bytes"] == 17
    assert not ref.read["torn_tail"]
    assert res.outputs == ref.outputs and res.outputs
    assert res.error_counts.get("torn_record") == 1
    assert main(["replay", str(torn)]) == 0
    out = capsys.readouterr().out
    assert "torn last record (17 bytes" in out and "skipped" in out


def test_damaged_stretch_inside_the_file_is_skipped(tmp_path) -> None:
    d = short_flight(tmp_path, duration_s=3.0, faults=())
    log = d / "flight.rec"
    data = bytearray(log.read_bytes())
    offs = _record_offsets(log)
    mid = offs[len(offs) // 2]
    data[mid + 30] ^= 0xFF  # a flipped byte: that record's CRC fails
    log.write_bytes(bytes(data))
    res = replay_log(prepare(d))
    assert res.read["corrupt_regions"] == 1 and not res.read["torn_tail"]
    assert res.inputs_fed == len(offs) - 2  # minus the event record and the damaged one
    assert [s.status for s in res.segments] == ["advisory"]


# ------------------------------------------------------------------ expected advisories

def _seg(status, zone, t0, t1) -> Segment:
    return Segment(status, zone, t0, t1)


def test_compare_expected_rules() -> None:
    segs = [_seg("clear", None, 0.0, 30.0), _seg("caution", "park", 30.0, 50.0),
            _seg("clear", None, 50.0, 90.0)]
    ok = [Expectation("clear", None, True, 0.0, None, 0.5),
          Expectation("advisory", "park", True, 29.0, None, 3.0, optional=True),
          Expectation("caution", "park", True, 31.0, 52.0, 2.0),
          Expectation("clear", None, False, 50.0, 90.0, 1.0)]
    assert compare_expected(segs, ok) == []
    late = [ok[0], ok[2], Expectation("clear", None, True, 55.0, None, 1.0)]
    diffs = compare_expected(segs, late)
    assert len(diffs) == 1 and "start time" in diffs[0] and "55.0" in diffs[0]
    wrong_zone = [ok[0], Expectation("caution", "town", True, 30.0, None, 1.0), ok[3]]
    assert "zone" in compare_expected(segs, wrong_zone)[0]
    missing = compare_expected(segs, ok + [Expectation("warning", None, False, 80.0, None, 1)])
    assert len(missing) == 1 and "only 3 segment(s)" in missing[0]
    extra = compare_expected(segs + [_seg("warning", "park", 90.0, 91.0)], ok)
    assert len(extra) == 1 and "unexpected warning" in extra[0]


def test_expected_file_errors_name_the_entry(tmp_path) -> None:
    bad = tmp_path / "bad.json"
    for doc, words in (
        ([{"status": "loud", "t_from_s": 0}], "entry 0: status 'loud'"),
        ({"advisories": [{"status": "clear"}]}, "t_from_s must be a number"),
        ([{"status": "clear", "t_from_s": 5, "t_to_s": 1}], "before t_from_s"),
        ([{"status": "clear", "t_from_s": 0, "when": 1}], "unknown key(s) ['when']"),
        ({"advisory": []}, "needs a list"),
    ):
        bad.write_text(json.dumps(doc))
        with pytest.raises(ExpectFileError, match=r".*"):
            load_expected(bad)
        try:
            load_expected(bad)
        except ExpectFileError as exc:
            assert words in str(exc) and str(bad) in str(exc)
    bad.write_text("{not json")
    with pytest.raises(ExpectFileError, match="not valid JSON"):
        load_expected(bad)


def test_expect_mismatch_exits_1_with_the_differences(tmp_path, capsys) -> None:
    d = short_flight(tmp_path)
    exp = tmp_path / "expected.json"
    exp.write_text(json.dumps([
        {"status": "advisory", "zone_id": "testford", "t_from_s": 0.0},
        {"status": "unavailable", "zone_id": None, "t_from_s": 2.5, "t_to_s": 3.5,
         "tolerance_s": 0.2},
        {"status": "clear", "zone_id": None, "t_from_s": 3.5},
    ]))
    assert main(["replay", str(d), "--expect", str(exp)]) == 1
    out = capsys.readouterr().out
    assert "DIFFERENCES" in out and "entry #3 / segment #3: status, zone differ" in out
    exp.write_text(json.dumps([
        {"status": "advisory", "zone_id": "testford", "t_from_s": 0.0},
        {"status": "unavailable", "zone_id": None, "t_from_s": 2.5, "t_to_s": 3.5,
         "tolerance_s": 0.2},
        {"status": "advisory", "zone_id": "testford", "t_from_s": 3.5, "t_to_s": 6.0},
    ]))
    assert main(["replay", str(d), "--expect", str(exp)]) == 0
    assert "matches" in capsys.readouterr().out


def test_bad_arguments_name_the_option(tmp_path, capsys) -> None:
    d = short_flight(tmp_path, duration_s=1.0, faults=())
    for argv, words in (
        (["replay", str(tmp_path / "nothing.rec")], "no such file"),
        (["replay", str(d), "--speed", "fast"], "--speed: 'fast'"),
        (["replay", str(d), "--speed", "0"], "must be greater than 0"),
        (["replay", str(d), "--expect", str(tmp_path / "none.json")], "--expect"),
        (["replay", str(d / "flight.rec"), "--zones", str(tmp_path / "z.geojson")],
         "--zones"),
        (["replay", str(d), str(d), "--send", "udp://127.0.0.1:9"], "--send"),
        (["replay", str(d), "--edge-band", "-1"], "--edge-band: -1 is not in 0..100"),
    ):
        assert main(argv) == 2, argv
        err = capsys.readouterr().err
        assert words in err, (argv, err)
    not_a_log = tmp_path / "x.rec"
    not_a_log.write_bytes(b"hello world, not a record file at all")
    shutil.copy(d / "zones.geojson", tmp_path / "zones.geojson")
    assert main(["replay", str(not_a_log), "--zones", str(tmp_path / "zones.geojson"),
                 "--tables", prepare(d).table]) == 2
    assert "not a record file" in capsys.readouterr().err
    with pytest.raises(ReplayError, match="--clock"):
        prepare(d, clock="wall")


# ------------------------------------------------------------------ batch, formats, --send

def test_batch_runs_in_parallel_with_one_summary(tmp_path, capsys) -> None:
    a = short_flight(tmp_path, "alpha", duration_s=3.0, faults=())
    b = short_flight(tmp_path, "bravo", duration_s=6.0)
    assert main(["replay", str(a), str(b), "--json", "--jobs", "2"]) == 0
    doc = json.loads(capsys.readouterr().out)
    rows = {r["name"]: r for r in doc["results"]}
    assert set(rows) == {"alpha", "bravo"} and "advisory aid" in doc["caution"]
    assert rows["alpha"]["duration_s"] == pytest.approx(3.0, abs=0.01)
    assert rows["alpha"]["conflicts"] == 1 and rows["alpha"]["errors"] == 0
    assert rows["bravo"]["conflicts"] == 2 and rows["bravo"]["unavailable_s"] > 1.0
    assert rows["bravo"]["errors"] > 0 and rows["alpha"]["worst_overpressure_psf"] > 0
    # the parallel results are the in-process ones
    serial = [replay_log(prepare(p)) for p in (a, b)]
    parallel = list(replay_many([prepare(a), prepare(b)], jobs=2))
    assert [r.outputs for r in parallel] == [r.outputs for r in serial]
    assert main(["replay", str(a), str(b)]) == 0
    text = capsys.readouterr().out
    assert "first warning" in text and "alpha" in text and "bravo" in text
    assert text.count("advisory aid, not certified") == 2


def test_payload_records_are_reframed_when_no_raw_input(tmp_path) -> None:
    # A log holding only CRC-checked payloads (kind 1) replays like the raw stream.
    d = short_flight(tmp_path, duration_s=3.0, faults=())
    records, _ = read_records(d / "flight.rec")
    src = tmp_path / "payloads" / "flight.rec"
    src.parent.mkdir()
    for f in ("zones.geojson", "grid.toml", "scenario.toml"):
        shutil.copy(d / f, src.parent / f)
    deframer = StreamDeframer()
    with Recorder(src) as rec:
        for r in records:
            if r.kind == KIND_RAW_INPUT:
                for p in deframer.feed(bytes(r.data)):
                    rec.record_input(p, r.mono_s, r.utc_s)
    assert not any(r.kind == KIND_RAW_INPUT for r in read_records(src)[0])
    assert any(r.kind == KIND_INPUT for r in read_records(src)[0])
    assert replay_log(prepare(src)).outputs == replay_log(prepare(d)).outputs


def test_send_delivers_the_recorded_frames_over_udp(tmp_path) -> None:
    # --send: every good frame of the (stream) log arrives as one datagram with its CRC
    # (ICD section 10), in order; garbage between frames is not forwarded to UDP.
    d = short_flight(tmp_path, duration_s=2.0, faults=(MAKER.Fault("garbage", 0.5, 1.0),))
    rx = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
    rx.bind(("127.0.0.1", 0))
    rx.settimeout(0.2)
    port = rx.getsockname()[1]
    got: list[bytes] = []
    done = threading.Event()

    def receive() -> None:
        while True:
            try:
                got.append(parse_datagram(rx.recv(8192)))
            except TimeoutError:
                if done.is_set():
                    return

    th = threading.Thread(target=receive, daemon=True)
    th.start()
    res = replay_log(prepare(d, speed=10, send=f"udp://127.0.0.1:{port}"))
    done.set()
    th.join(5.0)
    rx.close()
    deframer = StreamDeframer()
    frames = [p for r in read_records(d / "flight.rec")[0] if r.kind == KIND_RAW_INPUT
              for p in deframer.feed(bytes(r.data))]
    assert res.sent == len(frames) and len(frames) > 30 and res.send_errors == 0
    assert got == frames


# ------------------------------------------------------------------ live run reproduced

def _wait_datagram(sock: socket.socket, timeout_s: float) -> bool:
    sock.settimeout(0.5)
    end = time.monotonic() + timeout_s
    while time.monotonic() < end:
        try:
            frame = decode_frame(parse_datagram(sock.recv(8192)))
        except TimeoutError:
            continue
        # the running service's first frame, not a starting one (ICD 17.7)
        if not (frame.type == "status" and frame.fields["reason"].startswith("starting")):
            return True
    return False


def test_replay_reproduces_a_live_run_byte_for_byte(tmp_path) -> None:
    # The real service (a separate process) reads the flight over UDP on 127.0.0.1 and
    # records everything; replaying its record gives exactly its outputs, frame for
    # frame and byte for byte, through the same loop.
    d = short_flight(tmp_path, duration_s=4.0, faults=(MAKER.Fault("dropout", 1.5, 2.5),))
    setup = prepare(d)
    out_sock = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
    out_sock.bind(("127.0.0.1", 0))
    probe = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
    probe.bind(("127.0.0.1", 0))
    in_port = probe.getsockname()[1]
    probe.close()
    record = tmp_path / "live.rec"
    proc = subprocess.Popen(
        [sys.executable, "-m", "advisory.cli", "run", "--input", f"udp://127.0.0.1:{in_port}",
         "--output", f"udp://127.0.0.1:{out_sock.getsockname()[1]}", "--zones", setup.zones,
         "--tables", setup.table, "--record", str(record), "--rate-hz", "10"],
        stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, env=os.environ.copy())
    try:
        # a fresh clone compiles the numba kernels on the first start: bounded wait
        assert _wait_datagram(out_sock, 120.0), "the service published nothing"
        sent = replay_log(prepare(d, speed=1, send=f"udp://127.0.0.1:{in_port}"))
        assert sent.sent == 61
        time.sleep(0.7)
        proc.send_signal(signal.SIGTERM)
        proc.wait(timeout=20)
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait(timeout=10)
        out_sock.close()
    assert proc.returncode == 0, proc.stderr.read().decode()
    # zones, table, input format and rate come from the service's start event (the
    # files named in it only when asked to trust them: issue 15, item 10)
    live = replay_log(prepare(record, trust_log_paths=True))
    assert live.setup.zones == setup.zones and live.setup.table == setup.table
    assert live.recorded_outputs > 40
    assert live.recorded_match, live.first_mismatch
    assert live.setup.input_format == "datagram"  # taken from the service's start event
    assert [s.status for s in live.segments][-1] == "unavailable"  # the shutdown frame
    assert "advisory" in [s.status for s in live.segments]
    # the schedule clock on the same record also replays (not necessarily identically)
    sched = replay_log(prepare(record, zones=setup.zones, table=setup.table,
                               clock="schedule"))
    assert sched.outputs and math.isfinite(sched.duration_s)


def test_several_runs_in_one_record_replay_the_last(tmp_path) -> None:
    # The recorder appends (ICD section 13): a file can hold several runs, each with its
    # own monotonic clock. The replay takes the last run, and says so.
    a = short_flight(tmp_path, "first", duration_s=2.0, faults=())
    b = short_flight(tmp_path, "second", duration_s=3.0, faults=(),
                     mono_start_s=50.0)  # a reboot: the monotonic clock starts low again
    start = encode_event("start", settings={"input_format": "stream", "rate_hz": 10.0,
                                            "heartbeat_s": 1.0})
    both = tmp_path / "both"
    shutil.copytree(b, both)
    (both / "flight.rec").unlink()
    with Recorder(both / "flight.rec") as rec:
        for src in (a, b):
            records, _ = read_records(src / "flight.rec")
            rec.write(KIND_EVENT, start, records[0].utc_s, records[0].mono_s)
            for r in records:
                rec.write(r.kind, bytes(r.data), r.utc_s, r.mono_s, r.channel)
    res = replay_log(prepare(both))
    ref = replay_log(prepare(b))
    assert res.notes and "2 runs recorded" in res.notes[0]
    assert res.duration_s == pytest.approx(3.0, abs=0.01)
    # the same frames through the same loop; the service's counters appear in the status
    # frames of a 'run' log, so compare the advisory frames
    assert res.advisory_payloads == ref.advisory_payloads


def test_only_the_driver_counters_the_record_carries_are_kept() -> None:
    # Rule of issue 11 (no outside source): a record written before a driver counter was
    # added lacks it in every status frame, so its replay must not publish it either.
    polls = [(0.0, 0.0, {"frames_ok": 3, "output_errors": 2}, False),
             (0.1, 0.1, None, False),
             (0.2, 0.2, {"input_lost": 1, "frames_ok": 4}, False)]
    assert set(carried_counters(polls)) == {"input_lost", "output_errors"}
    assert carried_counters([(0.0, 0.0, None, False)]) == ()

