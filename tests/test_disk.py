"""Bounded disk (issue 15, item 9): record size cap with rotation, short writes detected,
rebuilt tables cleaned up.

Real files and real OS failures: a file-size limit (``RLIMIT_FSIZE`` set in a child
process, so writes past it fail with EFBIG or are cut short, as on a full disk), a real
``run`` process flooded over UDP on 127.0.0.1. Expected behaviour: issue 15's build list
(common practice, no source): every kept file stays under its cap, nothing is lost within
the cap (the kept files hold every input, in order), what is dropped is counted, a short
write is never counted as written.
"""

from __future__ import annotations

import json
import os
import signal
import socket
import subprocess
import sys
import time
from pathlib import Path

import pytest

from advisory.io.framing import datagram
from advisory.io.messages import decode_frame
from advisory.io.records import (
    HEADER_LEN,
    KIND_EVENT,
    KIND_INPUT,
    Recorder,
    decode_event,
    read_records,
)
from tests.test_run_e2e import (  # noqa: F401 - zones_file is a fixture
    READY_TIMEOUT_S,
    Listener,
    air_payload,
    free_udp_port,
    running_status,
    start_run,
    stop,
    zones_file,
)

CHILD = r"""
import json, resource, sys
from advisory.io.records import Recorder
warm = Recorder(sys.argv[1] + ".warm", fsync_interval_s=0.0)  # compile / cache the kernels
warm.write(1, b"x")  # before the limit, so numba's cache writes are not cut short
warm.close()
limit = int(sys.argv[2])
resource.setrlimit(resource.RLIMIT_FSIZE, (limit, limit))
rec = Recorder(sys.argv[1], fsync_interval_s=0.0)
ok = sum(rec.write(1, bytes(range(256)) * 3) for _ in range(100))
print(json.dumps({"ok": ok, "records": rec.records, "write_errors": rec.write_errors,
                  "dropped": rec.dropped, "last_error": rec.last_error}))
rec.close()
"""


def test_short_write_past_a_file_size_limit_is_never_counted(tmp_path) -> None:
    # 100 records of 28 + 768 bytes against a 20,000-byte limit: about 25 fit; the one
    # that straddles the limit is cut short by the kernel (write returns fewer bytes),
    # the rest fail with EFBIG (POSIX setrlimit, RLIMIT_FSIZE).
    path = tmp_path / "limited.rec"
    out = subprocess.run([sys.executable, "-c", CHILD, str(path), "20000"],
                         capture_output=True, text=True, timeout=60,
                         env=dict(os.environ))
    assert out.returncode == 0, out.stderr
    got = json.loads(out.stdout)
    records, report = read_records(path)
    assert got["records"] == got["ok"] == len(records)  # what is counted is on disk
    assert got["write_errors"] == got["dropped"] == 100 - len(records)
    assert 20 <= len(records) <= 25
    assert "short write" in got["last_error"] or "too large" in got["last_error"]
    assert report.corrupt_regions == 0


def _seqs(path: Path) -> list[int]:
    records, report = read_records(path)
    assert not report.torn_tail and report.corrupt_regions == 0
    return [decode_frame(bytes(r.data)).seq for r in records if r.kind == KIND_INPUT]


def test_recorder_rotates_at_its_cap_and_counts_what_it_drops(tmp_path) -> None:
    path = tmp_path / "flight.rec"
    cap, n = 20_000, 1000
    with Recorder(path, max_bytes=cap, keep=2) as rec:
        for seq in range(n):
            assert rec.record_input(air_payload(seq, seq * 0.05))
    files = [path, Path(f"{path}.1"), Path(f"{path}.2")]
    assert all(f.exists() for f in files) and not Path(f"{path}.3").exists()
    assert all(HEADER_LEN < f.stat().st_size <= cap for f in files)
    kept = _seqs(files[2]) + _seqs(files[1]) + _seqs(files[0])  # oldest first
    assert kept == list(range(n - len(kept), n))  # nothing lost within the cap
    assert rec.dropped == rec.rotated_out == n - len(kept) > 0
    assert rec.write_errors == 0


def test_run_flooded_over_udp_keeps_its_record_under_the_cap(tmp_path, small_table_path,
                                                            zones_file) -> None:  # noqa: F811
    port = free_udp_port()
    record = tmp_path / "flood.rec"
    listener = Listener()
    proc = start_run(tmp_path, "--input", f"udp://127.0.0.1:{port}", "--output",
                     listener.url, "--zones", str(zones_file), "--tables",
                     str(small_table_path), "--record", str(record),
                     "--record-max-mb", "0.2", "--record-keep", "2", "--duration-s", "300")
    try:
        listener.wait_for(running_status, READY_TIMEOUT_S, "the first status")
        n = 6000
        with socket.socket(socket.AF_INET, socket.SOCK_DGRAM) as s:
            t0 = time.monotonic()
            for seq in range(n):  # about 2,000 datagrams a second, ~2 MB of record
                s.sendto(datagram(air_payload(seq, seq * 0.05)), ("127.0.0.1", port))
                if seq % 200 == 199:
                    time.sleep(max(0.0, t0 + (seq + 1) / 2000.0 - time.monotonic()))
        time.sleep(1.0)
    finally:
        rc = stop(proc, signal.SIGTERM)
        listener.close()
    assert rc == 0, (tmp_path / "run.err").read_text()[-2000:]
    cap = 200_000
    files = [record, Path(f"{record}.1"), Path(f"{record}.2")]
    assert all(f.exists() for f in files) and not Path(f"{record}.3").exists()
    assert all(f.stat().st_size <= cap for f in files), [f.stat().st_size for f in files]
    kept = _seqs(files[2]) + _seqs(files[1]) + _seqs(files[0])
    assert kept == list(range(n - len(kept), n))  # every input within the cap, in order
    # the service counts what rotation dropped (its final status frame and stats event)
    last_status = [f for _t, f in listener.frames if f.type == "status"][-1]
    assert last_status.fields["counters"]["record_dropped"] > 0
    for f in files:  # each file names the settings it was recorded with
        first = read_records(f)[0][0]
        assert first.kind == KIND_EVENT and decode_event(first.data).code == "start"
    records, rep = read_records(record)
    stats = [decode_event(r.data, rep.version) for r in records if r.kind == KIND_EVENT]
    final = [e for e in stats if e.code == "stats" and e.fields["kind"] == "final"]
    assert final and final[-1].fields["stats"]["counters"]["record_dropped"] > 0


@pytest.mark.parametrize(("opt", "value"), [("--record-max-mb", "0"),
                                            ("--record-max-mb", "nan"),
                                            ("--record-keep", "-1")])
def test_bad_record_limits_are_one_line_and_exit_2(tmp_path, opt, value,
                                                   zones_file) -> None:  # noqa: F811
    out = subprocess.run([sys.executable, "-m", "advisory.cli", "run", "--input",
                          "udp://127.0.0.1:9", "--output", "udp://127.0.0.1:9", "--zones",
                          str(zones_file), "--record", str(tmp_path / "r.rec"), opt, value],
                         capture_output=True, text=True, timeout=120)
    assert out.returncode == 2
    lines = [ln for ln in out.stderr.splitlines() if opt in ln]
    assert len(lines) == 1 and value in lines[0], out.stderr


@pytest.mark.slow
def test_rebuilt_tables_are_deleted_but_the_one_in_force_and_the_one_before(
        tmp_path, monkeypatch) -> None:
    # issue 15 item 9: rebuilt tables piled up in TMPDIR and were never deleted
    import tempfile

    from advisory.physics.aircraft import default_aircraft
    from advisory.physics.atmosphere import standard_atmosphere
    from advisory.tables.build import BuildInputs, build_table_arrays, provenance
    from advisory.tables.manager import TableManager
    from advisory.tables.store import write_table_file
    from advisory.tables.table import BoomTable
    from tests.test_rebuild import TINY, wait_for_swap

    tmpdir = tmp_path / "tmp"
    tmpdir.mkdir()
    monkeypatch.setattr(tempfile, "tempdir", str(tmpdir))  # the manager's TMPDIR
    inputs = BuildInputs(default_aircraft(), standard_atmosphere(), TINY)
    first = tmp_path / "first.boomtable"
    write_table_file(first, provenance(inputs, 0.0), build_table_arrays(inputs, workers=1))
    manager = TableManager(BoomTable.load(first), inputs)
    try:
        for k in (5.0, 10.0, 15.0):
            manager.submit_atmosphere(standard_atmosphere(temp_offset_k=k))
            assert wait_for_swap(manager)
        left = sorted(tmpdir.rglob("*.boomtable"))
        assert len(left) == 2 and manager.table.path in map(str, left)
        assert manager.table.header["atmosphere"]["temp_offset_k"] == 15.0
    finally:
        manager.close()
    assert list(tmpdir.iterdir()) == []  # the private directory is gone
    assert first.exists()  # a table the manager did not write is never deleted
