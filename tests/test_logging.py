"""``boom-advisory run`` with a stderr nobody reads, and with a stderr that is closed.

The real process on real parts: UDP on 127.0.0.1 (bounded count and time), real pipes.
The expectations are the project's interface specification (``docs/interface.md``
section 17: advisory frames every step, status frames at least once a second, clean stop
with exit code 0 on SIGTERM, the ``log_dropped`` counter) and the design rule that the
live loop never blocks on logging or output. A pipe's capacity of 64 KiB is the Linux
default (pipe(7); value from memory); the test fills the pipe itself, so it does not
depend on that figure.
"""

from __future__ import annotations

import json
import math
import os
import signal
import socket
import subprocess
import sys
import threading
import time
from pathlib import Path

import pytest

from advisory import units
from advisory.io.framing import datagram
from advisory.io.messages import encode_air
from advisory.physics.atmosphere import standard_atmosphere
from tests.test_run_e2e import Listener, Sender, free_udp_port, square

RUN = [sys.executable, "-m", "advisory.cli", "run"]
#: A fresh clone compiles the numba kernels on the first start; with a warm cache the
#: service is up in seconds and each test takes well under a minute.
READY_TIMEOUT_S = 120.0
STOP_TIMEOUT_S = 5.0  #: "stops within a few seconds" (the service's own bound is ~2 s)
LAT0, LON0 = 40.0, -100.0
M_PER_DEG_LON = 111320.0 * math.cos(math.radians(LAT0))  # spherical approximation


@pytest.fixture()
def zones(tmp_path) -> Path:
    """An invented town 130 km east of the flight of ``tests.test_run_e2e``."""
    path = tmp_path / "zones.geojson"
    path.write_text(json.dumps({"type": "FeatureCollection", "features": [
        square("lowfield", LAT0, LON0 + 130e3 / M_PER_DEG_LON)]}))
    return path


def _env(tmp_path: Path) -> dict[str, str]:
    return dict(os.environ, BOOM_ADVISORY_CACHE=str(tmp_path / "cache"))


def _full_pipe() -> tuple[int, int]:
    """(read end, write end) of a pipe whose buffer is already full: the first write
    to it blocks until somebody reads (and nobody will)."""
    r, w = os.pipe()
    os.set_blocking(w, False)
    for _ in range(1 << 16):  # bounded: a pipe holds at most a few MiB
        try:
            os.write(w, b"x" * 4096)
        except BlockingIOError:
            break
    for _ in range(4096):  # top up the last partial page
        try:
            os.write(w, b"x")
        except BlockingIOError:
            break
    os.set_blocking(w, True)
    return r, w


def _rejected_datagram(seq: int) -> bytes:
    """A well-framed air-data frame the validator must reject (Mach 9 is outside the
    ICD section 4 range 0-4)."""
    sound = float(standard_atmosphere().at(units.ft_to_m(45000.0)).sound_speed_mps)
    return datagram(encode_air({"lat_deg": LAT0, "lon_deg": LON0, "alt_ft": 45000.0,
                                "mach": 9.0, "heading_deg": 90.0,
                                "gs_kt": 1.6 * sound / units.KT, "bank_deg": 0.0,
                                "fpa_deg": 0.0}, seq, time.time()))


def _flood(port: int, seconds: float, per_s: int) -> int:
    """Send refused and rejected datagrams to 127.0.0.1:``port``; how many were sent."""
    tx = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
    bad = [b"\x01\x02\x03", _rejected_datagram(1)]
    sent = 0
    t0 = time.monotonic()
    try:
        while time.monotonic() - t0 < seconds:
            for _ in range(per_s // 20):
                tx.sendto(bad[sent % 2], ("127.0.0.1", port))
                sent += 1
            time.sleep(0.05)
    finally:
        tx.close()
    return sent


def _stop(proc: subprocess.Popen) -> tuple[int, float]:
    """SIGTERM; (exit code, seconds it took)."""
    t0 = time.monotonic()
    proc.send_signal(signal.SIGTERM)
    try:
        code = proc.wait(STOP_TIMEOUT_S)
    except subprocess.TimeoutExpired:
        proc.kill()
        proc.wait(5)
        raise AssertionError(f"run did not stop within {STOP_TIMEOUT_S} s of SIGTERM") \
            from None
    return code, time.monotonic() - t0


def _log_dropped(listener: Listener) -> int:
    st = [f.fields for _, f in list(listener.frames) if f.type == "status"]
    return max((s["counters"].get("log_dropped", 0) for s in st), default=0)


def test_stuck_stderr_never_stops_the_advisories(tmp_path, small_table_path, zones) -> None:
    # Design rule: the live loop never blocks on logging. stderr is a pipe that is full
    # from the start and never read; DEBUG logging plus a flood of refused and rejected
    # frames (about 24,000 log lines of 100-200 bytes, megabytes against the pipe's
    # 64 KiB) must not delay an advisory frame by more than 1 s (ICD 17.1: one per step at
    # 10 Hz), the lines lost are counted (log_dropped), and SIGTERM still stops it.
    listener = Listener()
    port = free_udp_port()
    r, w = _full_pipe()
    out = open(tmp_path / "run.out", "w")
    proc = subprocess.Popen(
        [*RUN, "--input", f"udp://127.0.0.1:{port}", "--output", listener.url, "--zones",
         str(zones), "--table", str(small_table_path), "--rate-hz", "10",
         "--log-level", "debug",
         # the flood comes from another socket of this host: admit the address (any
         # port) so its frames reach the decoder and the validator (ICD section 10)
         "--allow-from", "127.0.0.1"], stdout=out, stderr=w, env=_env(tmp_path))
    os.close(w)
    tx = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
    sender = None
    try:
        listener.wait_for(lambda f: f.type == "adv", READY_TIMEOUT_S, "the first advisory",
                          after=0.0)
        sender = Sender(lambda d: tx.sendto(d, ("127.0.0.1", port)), datagram)
        listener.wait_for(lambda f: f.type == "adv" and f.fields["status"] == "advisory",
                          20.0, "an advisory on good air data")
        t0 = time.monotonic()
        flood = threading.Thread(target=lambda: _flood(port, 12.0, 2000), daemon=True)
        flood.start()
        flood.join(30.0)
        time.sleep(1.0)
        t1 = time.monotonic()
        assert proc.poll() is None, "run died with a stuck stderr"
        listener.wait_for(lambda f: f.type == "status"
                          and f.fields["counters"].get("log_dropped", 0) > 0, 5.0,
                          "a status frame reporting log_dropped")
        code, took = _stop(proc)
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait(5)
        if sender is not None:
            sender.close()
        tx.close()
        listener.close()
        out.close()
        os.close(r)
    assert code == 0
    assert took < STOP_TIMEOUT_S
    adv_times = [t for t, f in listener.frames if f.type == "adv" and t0 <= t <= t1]
    gaps = [b - a for a, b in zip([t0, *adv_times], [*adv_times, t1])]
    assert adv_times and max(gaps) <= 1.0, max(gaps)
    statuses = [f.fields for t, f in listener.frames if f.type == "status" and t0 <= t <= t1]
    counters = statuses[-1]["counters"]
    refused = counters.get("too_short", 0) + counters.get("range:mach", 0)
    assert refused > 5000, counters  # one DEBUG line each: far beyond 64 KiB
    assert _log_dropped(listener) > 1000
    lines = (tmp_path / "run.out").read_text().splitlines()
    assert lines and lines[0].startswith("CAUTION:") and "not certified" in lines[0]


@pytest.mark.parametrize("how", ["closed_fd", "broken_pipe"])
def test_closed_stderr_is_counted_not_fatal(how, tmp_path, small_table_path, zones) -> None:
    # A stderr that is closed (EBADF: no descriptor 2 at all) or whose reader has gone
    # (EPIPE): the service runs, publishes, counts the lines it could not write
    # (log_dropped, ICD 17.3) and exits 0 on SIGTERM (ICD 17.5).
    listener = Listener()
    port = free_udp_port()
    args = [*RUN, "--input", f"udp://127.0.0.1:{port}", "--output", listener.url, "--zones",
            str(zones), "--table", str(small_table_path), "--rate-hz", "10"]
    out = open(tmp_path / "run.out", "w")
    if how == "closed_fd":  # the shell closes descriptor 2, then becomes the service
        proc = subprocess.Popen(["sh", "-c", 'exec "$@" 2>&-', "sh", *args], stdout=out,
                                env=_env(tmp_path))
    else:
        r, w = os.pipe()
        proc = subprocess.Popen(args, stdout=out, stderr=w, env=_env(tmp_path))
        os.close(w)
        os.close(r)  # nobody will ever read: every write is EPIPE
    tx = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
    sender = None
    try:
        listener.wait_for(lambda f: f.type == "adv", READY_TIMEOUT_S, "the first advisory",
                          after=0.0)
        sender = Sender(lambda d: tx.sendto(d, ("127.0.0.1", port)), datagram)
        listener.wait_for(lambda f: f.type == "adv" and f.fields["status"] == "advisory",
                          20.0, "an advisory on good air data")
        with sender.lock:  # a refused frame: one more status change to log
            sender.extra.append(b"\x01\x02\x03")
        listener.wait_for(lambda f: f.type == "status"
                          and f.fields["counters"].get("log_dropped", 0) > 0, 5.0,
                          "a status frame reporting log_dropped")
        assert proc.poll() is None
        code, _ = _stop(proc)
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait(5)
        if sender is not None:
            sender.close()
        tx.close()
        listener.close()
        out.close()
    assert code == 0
    final = [f.fields for _, f in listener.frames if f.type == "status"][-1]
    assert final["state"] == "unavailable" and "SIGTERM" in final["reason"]
    assert _log_dropped(listener) >= 3  # at least the caution, input open and start lines
    lines = (tmp_path / "run.out").read_text().splitlines()
    assert lines and lines[0].startswith("CAUTION:") and "not certified" in lines[0]
