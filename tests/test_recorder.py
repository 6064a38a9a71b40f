"""The record file: round trip, torn last record, damaged stretches, a real killed writer."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from advisory.io import records as rec_mod
from advisory.io.records import (
    KIND_EVENT,
    KIND_INPUT,
    KIND_OUTPUT,
    Recorder,
    RecordFormatError,
    RecordReader,
    decode_event,
    read_records,
)


def _write(path, n=10):
    with Recorder(path, fsync_interval_s=0.0) as rec:
        for i in range(n):
            assert rec.record_input(bytes([i]) * (i + 1), rx_monotonic=100.0 + i,
                                    rx_utc=1893456000.0 + i)
            assert rec.record_output(b"out%d" % i, tx_monotonic=100.5 + i,
                                     tx_utc=1893456000.5 + i)
        rec.record_event("shutdown")
    return 2 * n + 1


def test_round_trip(tmp_path):
    p = tmp_path / "flight.rec"
    n = _write(p)
    records, rep = read_records(p)
    assert len(records) == n == rep.records
    assert not rep.torn_tail and rep.corrupt_regions == 0
    assert records[0].kind == KIND_INPUT and records[0].data == b"\x00"
    assert records[0].mono_s == 100.0 and records[0].utc_s == 1893456000.0
    assert records[1].kind == KIND_OUTPUT and records[1].data == b"out0"
    assert records[-1].kind == KIND_EVENT and decode_event(records[-1].data).code == "shutdown"
    # monotonic times never go backwards in the order written
    monos = [r.mono_s for r in records if r.kind != KIND_EVENT]
    assert monos == sorted(monos)


def test_header_layout(tmp_path):
    p = tmp_path / "h.rec"
    Recorder(p).close()
    head = p.read_bytes()
    assert len(head) == rec_mod.HEADER_LEN == 24
    assert head[:8] == b"\x8bBOOMREC" and head[8:10] == b"\x00\x02"


def test_every_torn_tail_is_reported_and_skipped(tmp_path):
    # A power cut can stop the last write anywhere: try every cut point of the last
    # record. The reader must return all complete records and flag the tail.
    p = tmp_path / "full.rec"
    n = _write(p, 3)
    data = p.read_bytes()
    records, _ = read_records(p)
    last = records[-1].offset
    for cut in range(last + 1, len(data)):
        q = tmp_path / "cut.rec"
        q.write_bytes(data[:cut])
        got, rep = read_records(q)
        assert len(got) == n - 1, cut
        assert rep.torn_tail and rep.torn_bytes == cut - last
        assert rep.corrupt_regions == 0


def test_appending_after_a_torn_tail(tmp_path):
    p = tmp_path / "a.rec"
    n = _write(p, 2)
    with open(p, "ab") as f:
        f.write(rec_mod.encode_record(KIND_INPUT, b"x" * 100, 1.0, 2.0)[:37])  # torn
    with Recorder(p) as rec:
        rec.record_input(b"after restart", rx_monotonic=5.0, rx_utc=1893456100.0)
    records, rep = read_records(p)
    assert len(records) == n + 1 and records[-1].data == b"after restart"
    assert rep.corrupt_regions == 1 and rep.skipped_bytes == 37 and not rep.torn_tail


def test_damage_inside_the_file_is_skipped(tmp_path):
    p = tmp_path / "d.rec"
    n = _write(p, 5)
    records, _ = read_records(p)
    data = bytearray(p.read_bytes())
    data[records[3].offset + 30] ^= 0xFF  # one byte of record 3's data
    p.write_bytes(bytes(data))
    got, rep = read_records(p)
    assert len(got) == n - 1
    assert [r.offset for r in got] == [r.offset for i, r in enumerate(records) if i != 3]
    assert rep.corrupt_regions == 1 and not rep.torn_tail


def test_bad_files_are_refused(tmp_path):
    bad = tmp_path / "bad.rec"
    bad.write_bytes(b"NOTAREC!" + bytes(40))
    with pytest.raises(RecordFormatError, match="not a record file"):
        RecordReader(bad)
    with pytest.raises(RecordFormatError):
        Recorder(bad)
    p = tmp_path / "v.rec"
    Recorder(p).close()
    data = bytearray(p.read_bytes())
    data[9] = 9  # version 9
    p.write_bytes(bytes(data))
    with pytest.raises(RecordFormatError, match="CRC|version"):
        RecordReader(p)


def test_torn_header(tmp_path):
    p = tmp_path / "t.rec"
    p.write_bytes(b"\x8bBOOM")  # power cut while the header was written
    records, rep = read_records(p)
    assert records == [] and rep.torn_tail
    with Recorder(p) as rec:  # starts the file again: nothing was recorded
        rec.record_event("note", text="hello")
    assert [decode_event(r.data) for r in read_records(p)[0]] == [("note", {"text": "hello"})]


def test_write_errors_are_counted_not_raised(tmp_path):
    rec = Recorder(tmp_path / "e.rec")
    rec.close()
    assert rec.write(KIND_INPUT, b"late") is False
    assert rec.write_errors == 1 and "closed" in rec.last_error
    rec2 = Recorder(tmp_path / "f.rec")
    assert rec2.write(300, b"x") is False  # bad kind: counted, no exception
    rec2.close()


_WRITER = r"""
import sys, time
from advisory.io.records import Recorder
rec = Recorder(sys.argv[1], fsync_interval_s=0.0)
i = 0
print("ready", flush=True)
while True:
    rec.record_input(b"frame %08d " % i + b"x" * 200, rx_monotonic=time.monotonic())
    i += 1
"""


def test_killed_writer_leaves_a_readable_file(tmp_path):
    # A real process killed with SIGKILL while writing (the nearest thing to a power
    # cut a test can do): every record before the kill reads back, in order.
    p = tmp_path / "killed.rec"
    proc = subprocess.Popen([sys.executable, "-c", _WRITER, str(p)], stdout=subprocess.PIPE)
    try:
        assert proc.stdout.readline().strip() == b"ready"
        end = time.monotonic() + 10.0
        while time.monotonic() < end and p.stat().st_size < 50_000:
            time.sleep(0.02)
    finally:
        proc.send_signal(signal.SIGKILL)
        proc.wait(timeout=10)
        proc.stdout.close()
    records, rep = read_records(p)
    assert len(records) > 100
    assert rep.corrupt_regions == 0
    seqs = [int(r.data.split()[1]) for r in records]
    assert seqs == list(range(len(seqs)))


@settings(max_examples=100, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.binary(max_size=2000))
def test_reader_never_raises_on_garbage_after_header(tmp_path, garbage):
    p = tmp_path / "g.rec"
    if p.exists():
        os.remove(p)
    Recorder(p).close()
    with open(p, "ab") as f:
        f.write(garbage)
    records, rep = read_records(p)
    assert rep.records == len(records)


def test_events_are_typed_maps_and_old_text_events_still_read(tmp_path):
    # Record format 2 (ICD section 13): an event is a MessagePack map with a code and the
    # fields advisory.schema.EVENT_FIELDS lists; a replay acts on the code, never on text.
    p = tmp_path / "ev.rec"
    with Recorder(p) as rec:
        rec.record_event("input_lost", reason="serial port gone")
        rec.record_event("stopping", reason="SIGTERM")
        with pytest.raises(ValueError, match="bogus"):
            rec.record_event("bogus")
        with pytest.raises(ValueError, match="fields"):
            rec.record_event("input_lost", why="x")
    records, rep = read_records(p)
    assert rep.version == 2
    assert [decode_event(r.data, rep.version) for r in records] == [
        ("input_lost", {"reason": "serial port gone"}), ("stopping", {"reason": "SIGTERM"})]
    assert decode_event(b"\xc1 not msgpack").code == "unknown"
    # a format-1 record's text lines (what the service wrote before) map to the same codes
    assert decode_event(b"input lost: serial port gone", 1) == ("input_lost",
                                                                 {"reason": "serial port gone"})
    assert decode_event(b"input open failed: no port; retrying with backoff", 1) == (
        "input_open_failed", {"reason": "no port"})
    assert decode_event(b'start {"rate_hz": 10.0}', 1) == ("start",
                                                         {"settings": {"rate_hz": 10.0}})
    assert decode_event(b"something else", 1) == ("note", {"text": "something else"})


def test_old_records_are_read_but_never_appended_to(tmp_path):
    # A format-1 record from before typed events (a live UDP run recorded by this suite,
    # kept in tests/data/records_v1) reads; appending to it is refused with one line.
    old = Path(__file__).parent / "data" / "records_v1" / "udp_sigterm.boomrec"
    records, rep = read_records(old)
    assert rep.version == 1 and not rep.torn_tail
    codes = [decode_event(r.data, 1).code for r in records if r.kind == KIND_EVENT]
    assert codes[:2] == ["input_open", "start"] and codes[-1] == "shutdown"
    copy = tmp_path / "old.boomrec"
    copy.write_bytes(old.read_bytes())
    with pytest.raises(RecordFormatError, match="version 1 can be read but not appended"):
        Recorder(copy)
