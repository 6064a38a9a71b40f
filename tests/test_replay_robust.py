"""``replay`` on hostile or damaged logs (issue 15, item 10 and item 11's start event).

Real record files written with :class:`advisory.io.records.Recorder`, the real command in
a child process with a time limit (a hang fails the test, it does not stall the suite).
Expected behaviour: issue 15's build list (common practice, no source): a far-future,
backwards or non-finite timestamp splits the log into segments and the replay says so;
a record that cannot be decoded is skipped and counted; files named inside a log are
used only with ``--trust-log-paths``; a start event with a value of the wrong type is
one line and exit code 2.
"""

from __future__ import annotations

import json
import math
import subprocess
import sys
from pathlib import Path

from advisory.io.framing import frame_stream
from advisory.io.messages import encode_status
from advisory.io.records import KIND_OUTPUT, Recorder
from tests.test_run_e2e import air_payload, zones_file  # noqa: F401 - zones_file: fixture

REPLAY = [sys.executable, "-m", "advisory.cli", "replay"]
T0 = 1000.0  # monotonic s of the first frame (invented)
UTC0 = 1.8e9  # UTC s of the first frame (invented)


def replay(*args: str, timeout_s: float = 90.0) -> subprocess.CompletedProcess:
    return subprocess.run([*REPLAY, *args], capture_output=True, text=True,
                          timeout=timeout_s)


def write_flight(rec: Recorder, seconds: float, t0: float, seq0: int = 0) -> int:
    """20 Hz air-data frames as raw stream input for ``seconds``; the next seq."""
    n = int(seconds * 20)
    for i in range(n):
        t = i / 20.0
        rec.record_raw_input(frame_stream(air_payload(seq0 + i, t)), t0 + t, UTC0 + t0 + t)
    return seq0 + n


def test_far_future_and_infinite_times_split_the_log(tmp_path, small_table_path,
                                                    zones_file) -> None:  # noqa: F811
    log = tmp_path / "gaps.rec"
    with Recorder(log) as rec:
        seq = write_flight(rec, 5.0, T0)
        rec.record_raw_input(frame_stream(air_payload(seq, 5.0)), math.inf, UTC0)
        seq = write_flight(rec, 5.0, T0 + 1e9, seq + 1)  # 31 years later
        seq = write_flight(rec, 5.0, T0 - 500.0, seq)  # and back again
        rec.record_raw_input(frame_stream(air_payload(seq, 5.0)), T0, math.nan)
    out = replay(str(log), "--zones", str(zones_file), "--tables", str(small_table_path),
                 "--json", timeout_s=90.0)
    assert out.returncode == 0, out.stderr[-2000:]
    res = json.loads(out.stdout)["results"][0]
    assert res["bad_records"] == 2  # the two records whose time is not a number
    notes = " ".join(res["notes"])
    assert notes.count("new segment") == 2, notes
    assert res["inputs_fed"] == 300
    # three 5-s segments joined by short pauses: a bounded timeline, not 31 years
    assert res["outputs"] < 3 * 15 * 10 * 2


def test_an_undecodable_record_is_skipped_and_counted(tmp_path, small_table_path,
                                                      zones_file) -> None:  # noqa: F811
    log = tmp_path / "bad_output.rec"
    with Recorder(log) as rec:
        write_flight(rec, 3.0, T0)
        for k in range(3):
            rec.write(KIND_OUTPUT, encode_status({"state": "ok", "reason": "",
                                                  "counters": {}}, k, UTC0 + k),
                      UTC0 + k, T0 + k)
        rec.write(KIND_OUTPUT, b"\xc1 not a frame", UTC0 + 1.5, T0 + 1.5)
    out = replay(str(log), "--zones", str(zones_file), "--tables", str(small_table_path),
                 "--json")
    assert out.returncode == 0, out.stderr[-2000:]
    res = json.loads(out.stdout)["results"][0]
    assert res["bad_records"] == 1
    assert res["inputs_fed"] == 60
    human = replay(str(log), "--zones", str(zones_file), "--tables", str(small_table_path))
    assert human.returncode == 0 and "1 bad record" in human.stdout, human.stdout[-2000:]


def _service_log(tmp_path: Path, settings: dict) -> Path:
    log = tmp_path / "service.rec"
    with Recorder(log) as rec:
        rec.record_event("start", settings=settings)
        write_flight(rec, 3.0, T0)
    return log


def test_files_named_in_a_log_need_trust_log_paths(tmp_path, small_table_path,
                                                   zones_file) -> None:  # noqa: F811
    log = _service_log(tmp_path, {"input_format": "stream", "framing": "stream",
                                  "rate_hz": 10.0, "heartbeat_s": 1.0,
                                  "zones": str(zones_file), "tables": str(small_table_path)})
    refused = replay(str(log), "--json")
    assert refused.returncode == 2
    lines = refused.stderr.strip().splitlines()
    assert len(lines) == 1 and "--trust-log-paths" in lines[0], refused.stderr
    trusted = replay(str(log), "--json", "--trust-log-paths")
    assert trusted.returncode == 0, trusted.stderr[-2000:]
    given = replay(str(log), "--json", "--zones", str(zones_file), "--tables",
                   str(small_table_path))
    assert given.returncode == 0, given.stderr[-2000:]
    a, b = (json.loads(p.stdout)["results"][0] for p in (trusted, given))
    assert a["outputs"] == b["outputs"] and a["inputs_fed"] == b["inputs_fed"] == 60


def test_start_event_with_a_list_is_one_line_and_exit_2(tmp_path, small_table_path,
                                                        zones_file) -> None:  # noqa: F811
    log = _service_log(tmp_path, {"input_format": "stream", "framing": "stream",
                                  "rate_hz": 10.0, "heartbeat_s": [1.0, 2.0]})
    out = replay(str(log), "--zones", str(zones_file), "--tables", str(small_table_path))
    assert out.returncode == 2, out.stderr[-2000:]
    lines = out.stderr.strip().splitlines()
    assert len(lines) == 1 and "heartbeat_s" in lines[0] and "[1.0, 2.0]" in lines[0], \
        out.stderr


MEM_CHILD = r"""
import resource, sys
from advisory.bench.replay import replay_log
from advisory.bench.scenario import prepare
setup = prepare(sys.argv[1], zones=sys.argv[2], table=sys.argv[3], quiet=True)
replay_log(prepare(sys.argv[4], zones=sys.argv[2], table=sys.argv[3], quiet=True))  # warm
before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
res = replay_log(setup)
after = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
print(res.inputs_fed, (after - before) * 1024)
"""


def test_replay_memory_does_not_grow_with_the_inputs(tmp_path, small_table_path,
                                                     zones_file) -> None:  # noqa: F811
    # 1,000 raw input records of 64 KiB each (line noise before every frame): a 64 MiB
    # log. A streaming replay holds one record at a time; the peak resident size may grow
    # by the outputs and the loop's own needs, far less than the log (common practice,
    # no source: half the log's size is the bound used here).
    big, small = tmp_path / "big.rec", tmp_path / "small.rec"
    pad = bytes(range(1, 256)) * 257  # no 0x00: one garbage stretch, then the frame
    with Recorder(big, fsync_interval_s=60.0) as rec:
        for i in range(1000):
            t = i / 20.0
            rec.record_raw_input(pad + b"\x00" + frame_stream(air_payload(i, t)), T0 + t,
                                 UTC0 + T0 + t)
    with Recorder(small) as rec:
        write_flight(rec, 1.0, T0)
    size = big.stat().st_size
    out = subprocess.run([sys.executable, "-c", MEM_CHILD, str(big), str(zones_file),
                          str(small_table_path), str(small)], capture_output=True,
                         text=True, timeout=300)
    assert out.returncode == 0, out.stderr[-2000:]
    fed, grew = map(int, out.stdout.split())
    assert fed == 1000
    assert grew < size / 2, f"peak memory grew by {grew / 2**20:.0f} MiB for a " \
                            f"{size / 2**20:.0f} MiB log"
