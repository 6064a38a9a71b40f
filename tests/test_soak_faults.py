"""Soak with faults: 10 minutes of ``boom-advisory run`` on normal traffic mixed with the
High faults of issue 15 (the issue's "done when").

A real ``run`` over UDP on 127.0.0.1 gets 20 Hz air data in a repeating cycle of phases:
normal flight; the same datagram re-sent byte for byte; a frozen sender clock; a frozen
position; bursts of garbage datagrams. Its standard error is a pipe nobody drains, at
log level debug (a line per refused frame fills it within seconds). Checks, from the
interface document ``docs/interface.md``:

* it keeps publishing: no gap over 1 s between output frames (section 17.1: an advisory
  every step, a status at least every 1 s);
* the status reflects the faults: within 1 s of each frozen span's start an
  ``unavailable`` status (sections 4 and 17.2), and ``ok`` again before the next fault
  (after the 5-s degraded hold);
* the record is complete (section 17.4): one raw-input record per datagram sent, and
  the service's own counters agree with what was sent.

``SOAK_S`` is the duration of the traffic; ``BOOM_SOAK_FAULTS_S`` may shorten it for a
local run (CI runs the full 10 minutes).
"""

from __future__ import annotations

import os
import random
import signal
import socket
import subprocess
import time

import pytest

from advisory.io.framing import datagram
from advisory.io.messages import encode_air
from advisory.io.records import KIND_EVENT, KIND_RAW_INPUT, RecordReader, decode_event
from tests.test_freshness import fields_at
from tests.test_run_e2e import (  # noqa: F401 - zones_file is a fixture
    READY_TIMEOUT_S,
    RUN,
    Listener,
    free_udp_port,
    running_status,
    zones_file,
)

SOAK_S = float(os.environ.get("BOOM_SOAK_FAULTS_S", "600"))  #: traffic time, s (10 min)
PERIOD = 0.05  #: 20 Hz input
MAX_GAP_S = 1.0  #: ICD 17.1: status at least every 1 s, an advisory every step
STALE_WITHIN_S = 1.0  #: issue 15 High 1: frozen data stale within 1 s
#: One cycle of phases: (name, seconds). Normal spans are twice the 5-s degraded hold:
#: the status is back to ok about 5 s into each (measured: 4.95-5.15 s), and one step
#: overrun on a busy machine (itself 5 s of ``degraded``, rightly) still leaves room.
CYCLE = (("normal", 10.0), ("resent", 3.0), ("normal", 10.0), ("frozen_clock", 3.0),
         ("normal", 10.0), ("frozen_position", 3.0), ("normal", 10.0), ("garbage", 2.0))
FROZEN = ("resent", "frozen_clock", "frozen_position")


class Traffic:
    """The sender: one datagram per 50 ms as the current phase says; counts what it sent."""

    def __init__(self, port: int) -> None:
        self.sock = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
        self.addr = ("127.0.0.1", port)
        self.sent = 0
        self.garbage = 0
        self.seq = 0
        self.t0 = time.monotonic()
        self.rng = random.Random(15)
        self.spans: list[tuple[str, float, float]] = []  # (phase, utc start, utc end)

    def send(self, data: bytes) -> None:
        self.sock.sendto(data, self.addr)
        self.sent += 1

    def air(self, utc: float | None = None, pos_t: float | None = None) -> bytes:
        t = time.monotonic() - self.t0
        f = fields_at(t)
        if pos_t is not None:
            frozen = fields_at(pos_t)
            f["lat_deg"], f["lon_deg"] = frozen["lat_deg"], frozen["lon_deg"]
        self.seq += 1
        return datagram(encode_air(f, self.seq, time.time() if utc is None else utc))

    def phase(self, name: str, seconds: float) -> None:
        start_utc = time.time()
        end = time.monotonic() + seconds
        t_frozen = time.monotonic() - self.t0
        same = self.air()
        nxt = time.monotonic()
        while time.monotonic() < end:
            if name == "resent":
                self.send(same)
            elif name == "frozen_clock":
                self.send(self.air(utc=start_utc))
            elif name == "frozen_position":
                self.send(self.air(pos_t=t_frozen))
            else:
                self.send(self.air())
                if name == "garbage":
                    for _ in range(10):  # a burst of junk beside the good frames
                        self.send(self.rng.randbytes(self.rng.randint(1, 300)))
                        self.garbage += 1
            nxt += PERIOD
            time.sleep(max(0.0, nxt - time.monotonic()))
        self.spans.append((name, start_utc, time.time()))

    def close(self) -> None:
        self.sock.close()


@pytest.mark.slow
def test_soak_with_faults_keeps_publishing(tmp_path, small_table_path, zones_file):  # noqa: F811
    listener = Listener()
    port = free_udp_port()
    record = tmp_path / "soak.boomrec"
    env = dict(os.environ, BOOM_ADVISORY_CACHE=str(tmp_path / "cache"))
    proc = subprocess.Popen(
        [*RUN, "--input", f"udp://127.0.0.1:{port}", "--output", listener.url, "--zones",
         str(zones_file), "--tables", str(small_table_path), "--record", str(record),
         "--rate-hz", "10", "--log-level", "debug"],
        stdout=open(tmp_path / "run.out", "w"), stderr=subprocess.PIPE, env=env)
    traffic = Traffic(port)
    try:
        listener.wait_for(running_status, READY_TIMEOUT_S, "first status",
                          after=0.0)
        t_start = time.monotonic()
        traffic.phase("normal", 5.0)  # settle: the first status ok
        while time.monotonic() - t_start < SOAK_S:
            for name, seconds in CYCLE:
                traffic.phase(name, seconds)
                assert proc.poll() is None, "run died"
        t_end = time.monotonic()
        time.sleep(0.5)
        proc.send_signal(signal.SIGTERM)
        code = proc.wait(60)
    finally:
        traffic.close()
        if proc.poll() is None:
            proc.kill()
            proc.wait()
        listener.close()
        if proc.stderr is not None:
            proc.stderr.close()
    assert code == 0

    # it kept publishing: no gap over 1 s between output frames while traffic ran
    times = [t for t, _ in listener.frames if t_start <= t <= t_end]
    gaps = [b - a for a, b in zip(times, times[1:])]
    assert times and max(gaps) <= MAX_GAP_S, f"largest gap {max(gaps):.2f} s"

    # the status reflects each frozen span, and comes back to ok before the next fault
    status = [f for _, f in listener.frames if f.type == "status"]
    for k, (name, u0, u1) in enumerate(traffic.spans):
        if name in FROZEN:
            gone = [f for f in status if u0 <= f.utc_s <= u1
                    and f.fields["state"] == "unavailable"]
            assert gone, f"{name} at {u0}: the status never became unavailable"
            assert gone[0].utc_s - u0 <= STALE_WITHIN_S, (name, gone[0].utc_s - u0)
            nxt = traffic.spans[k + 1] if k + 1 < len(traffic.spans) else None
            if nxt is not None and nxt[0] == "normal":
                back = [f for f in status if nxt[1] <= f.utc_s <= nxt[2]
                        and f.fields["state"] == "ok"]
                seen = [(round(f.utc_s - nxt[1], 2), f.fields["state"],
                         f.fields.get("reason", "")) for f in status
                        if nxt[1] - 1.0 <= f.utc_s <= nxt[2]]
                assert back, f"after {name} at {u0}: the status never came back to ok: {seen}"

    # the record is complete: every datagram sent is in it, the counters agree
    raw = 0
    final = None
    with RecordReader(record) as reader:
        for r in reader:
            if r.kind == KIND_RAW_INPUT:
                raw += 1
            elif r.kind == KIND_EVENT:
                ev = decode_event(r.data, reader.report.version)
                if ev.code == "stats" and ev.fields["kind"] == "final":
                    final = ev.fields["stats"]
        report = reader.report
    assert not report.torn_tail and report.corrupt_regions == 0
    assert raw == traffic.sent
    assert final is not None
    c = final["counters"]
    assert c["feeds"] == traffic.sent
    assert c["valid"] + c["rejected"] == traffic.sent - traffic.garbage
    assert c["seq_repeat"] > 0 and c["utc_frozen"] > 0 and c["position_frozen"] > 0
    assert c["internal_errors"] == 0
    print(f"\nsoak with faults: {traffic.sent} datagrams ({traffic.garbage} garbage) in "
          f"{t_end - t_start:.0f} s; largest output gap {max(gaps):.3f} s; log lines "
          f"dropped {c.get('log_dropped', 0)}")
