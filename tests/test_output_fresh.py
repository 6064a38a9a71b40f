"""After an output stall the display gets the latest frames, not a backlog.

A real pseudo-terminal pair stands for the serial link to a display; the display stops
reading for 10 s, then reads again. Expected behaviour: the design brief ("advisory +
status frames out, never a stale backlog") and ``docs/interface.md`` section 17.5. A
writer cannot reach the bytes already inside the reader's own line-discipline buffer
(4096 bytes on Linux, ``N_TTY_BUF_SIZE``: value from memory), so what may still be old
after the stall is bounded by that, and everything beyond it is recent (utc within
~1 s of the resume; common practice, no source, for the 1 s).
"""

from __future__ import annotations

import os
import select
import time
import tty

from advisory.io.framing import StreamDeframer
from advisory.io.messages import decode_frame
from tests.test_run_e2e import free_udp_port, start_run, stop, zones_file  # noqa: F401

READER_BUFFER_BYTES = 4096  # Linux n_tty read buffer (value from memory)
STALL_S = 10.0


def _read_for(fd: int, seconds: float) -> bytes:
    out = bytearray()
    end = time.monotonic() + seconds
    while time.monotonic() < end:
        ready, _, _ = select.select([fd], [], [], 0.05)
        if ready:
            try:
                out += os.read(fd, 65536)
            except BlockingIOError:
                pass
    return bytes(out)


def test_serial_output_after_a_stall_is_recent(tmp_path, small_table_path,
                                               zones_file) -> None:  # noqa: F811
    master, slave = os.openpty()
    tty.setraw(slave)
    os.set_blocking(master, False)
    proc = start_run(tmp_path, "--input", f"udp://127.0.0.1:{free_udp_port()}",
                     "--output", f"serial://{os.ttyname(slave)}", "--zones",
                     str(zones_file), "--table", str(small_table_path))
    try:
        deframer = StreamDeframer()
        end = time.monotonic() + 120.0
        running = False
        while not running and time.monotonic() < end:  # until the service proper runs
            frames = [decode_frame(p) for p in deframer.feed(_read_for(master, 0.5))]
            running = any(f.type == "adv" for f in frames)
        assert running, (tmp_path / "run.err").read_text()[-2000:]
        _read_for(master, 2.0)  # steady state, read as it comes
        time.sleep(STALL_S)  # the display stops reading
        resume_utc = time.time()
        burst = _read_for(master, 0.3)  # what is waiting, and the first fresh frames
        assert stop(proc) == 0
    finally:
        if proc.poll() is None:
            proc.kill()
        os.close(master)
        os.close(slave)
    deframer = StreamDeframer()
    old_bytes = 0
    fresh = 0
    for p in deframer.feed(b"\x00" + burst):
        f = decode_frame(p)
        if f.utc_s < resume_utc - 1.0:
            assert fresh == 0, "an old frame after a fresh one"
            old_bytes += len(p) + 6  # payload, CRC, COBS overhead and delimiter (about)
        else:
            fresh += 1
    assert fresh > 0
    assert old_bytes <= READER_BUFFER_BYTES + 1024, f"{old_bytes} bytes of backlog"
