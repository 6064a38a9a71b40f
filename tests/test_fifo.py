"""``file://`` FIFOs never hang the service (issue 15, item 5).

Real FIFOs (``os.mkfifo``), the real ``run`` process, UDP on 127.0.0.1; every wait is
bounded. Expected behaviour (issue 15's build list, common practice, no source): a FIFO
is opened non-blocking; an input FIFO with no writer yet, or whose writer went away,
leaves the service publishing status frames (the input link reported lost and retried);
an output FIFO with no reader yet is an output link that is down, reported and retried,
and start-up goes on.
"""

from __future__ import annotations

import os
import signal
import socket
import time

from advisory.io.framing import StreamDeframer, frame_stream
from advisory.io.messages import decode_frame
from advisory.io.records import KIND_EVENT, decode_event, read_records
from tests.test_run_e2e import (  # noqa: F401 - zones_file is a fixture
    READY_TIMEOUT_S,
    Listener,
    Sender,
    free_udp_port,
    running_status,
    start_run,
    stop,
    zones_file,
)


def _event_codes(record) -> list[str]:
    try:
        records, rep = read_records(record)
    except (OSError, ValueError):
        return []
    return [decode_event(r.data, rep.version).code for r in records if r.kind == KIND_EVENT]


def _wait_event(record, code: str, timeout_s: float) -> None:
    end = time.monotonic() + timeout_s
    while time.monotonic() < end:
        if code in _event_codes(record):
            return
        time.sleep(0.1)
    raise AssertionError(f"no {code!r} event in {timeout_s} s; events: {_event_codes(record)}")


def _writer(path, timeout_s: float = 3.0) -> int:
    """A write end; O_NONBLOCK fails (ENXIO) instead of hanging while the service holds
    no read end (it reopens 0.1 s after a writer left), so retry for a bounded time."""
    end = time.monotonic() + timeout_s
    while True:
        try:
            return os.open(path, os.O_WRONLY | os.O_NONBLOCK)
        except OSError:
            if time.monotonic() > end:
                raise
            time.sleep(0.05)


def test_input_fifo_without_writer_starts_and_survives_writers(tmp_path, small_table_path,
                                                                 zones_file):  # noqa: F811
    fifo = tmp_path / "air.fifo"
    os.mkfifo(fifo)
    record = tmp_path / "run.rec"
    listener = Listener()
    proc = start_run(tmp_path, "--input", f"file://{fifo}", "--output", listener.url,
                     "--zones", str(zones_file), "--tables", str(small_table_path),
                     "--record", str(record), "--duration-s", "300")
    try:
        # no writer yet: start-up ends and status frames flow (no hang in open())
        listener.wait_for(running_status, READY_TIMEOUT_S,
                          "a status frame while the FIFO has no writer")
        for round_ in range(2):  # a writer, it goes away, a new writer
            fd = _writer(fifo)
            sender = Sender(lambda b, fd=fd: os.write(fd, b), frame_stream, rate_hz=20.0)
            try:
                listener.wait_for(lambda f: f.type == "adv" and f.fields["status"] == "advisory",
                                  15.0, f"an advisory from writer {round_ + 1}")
            finally:
                sender.close()
                os.close(fd)
            # the writer left: reported as input lost; the service keeps publishing
            _wait_event(record, "input_lost", 5.0)
            t_gone = time.monotonic()
            listener.wait_for(lambda f: f.type == "status", 3.0, "status after the writer left",
                              after=t_gone)
            assert proc.poll() is None
        codes = _event_codes(record)
        assert codes.count("input_lost") >= 2 and codes.count("input_open") >= 2
    finally:
        rc = stop(proc, signal.SIGTERM)
        listener.close()
    assert rc == 0, (tmp_path / "run.err").read_text()[-2000:]


def test_output_fifo_without_reader_does_not_block_start(tmp_path, small_table_path,
                                                         zones_file):  # noqa: F811
    fifo = tmp_path / "out.fifo"
    os.mkfifo(fifo)
    record = tmp_path / "run.rec"
    port = free_udp_port()
    proc = start_run(tmp_path, "--input", f"udp://127.0.0.1:{port}", "--output",
                     f"file://{fifo}", "--zones", str(zones_file), "--tables",
                     str(small_table_path), "--record", str(record), "--duration-s", "300")
    try:
        # no reader: the service starts anyway and says the output is down
        _wait_event(record, "start", READY_TIMEOUT_S)
        assert "output_open_failed" in _event_codes(record)
        err = (tmp_path / "run.err").read_text()
        assert "no reader" in err, err[-2000:]
        # a reader comes: frames arrive (the output link is retried)
        fd = os.open(fifo, os.O_RDONLY | os.O_NONBLOCK)
        deframer, frames = StreamDeframer(), []
        end = time.monotonic() + 10.0
        while not any(f.type == "status" for f in frames) and time.monotonic() < end:
            time.sleep(0.05)
            try:
                data = os.read(fd, 65536)
            except BlockingIOError:
                continue
            frames += [decode_frame(p) for p in deframer.feed(data)]
        assert any(f.type == "status" for f in frames), "no status frame through the FIFO"
        os.close(fd)  # the reader goes: the service goes on
        time.sleep(1.5)
        assert proc.poll() is None
        _wait_event(record, "output_lost", 5.0)
        with socket.socket(socket.AF_INET, socket.SOCK_DGRAM) as s:  # input still served
            s.sendto(b"\x00", ("127.0.0.1", port))
    finally:
        rc = stop(proc, signal.SIGTERM)
    assert rc == 0, (tmp_path / "run.err").read_text()[-2000:]
