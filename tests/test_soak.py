"""Soak: one hour's worth of 50 Hz air data (180,000 frames) through ``boom-advisory run``.

The frames go over UDP loopback, paced at 2,500 frames a second so the run takes about
75 s; the service steps at 50 Hz. Checks (issue "Benchmarks ... soak"): resident memory
stays flat, the record holds every frame exactly once and in order, and the 99th
percentile advisor step time is within the 5 ms budget of the advisor issue (measured
by the service itself and written to the record's final statistics event). Time is
compressed, the frame count is not: every frame is decoded, validated and recorded.
"""

from __future__ import annotations

import os
import signal
import socket
import statistics
import subprocess
import sys
import threading
import time
import warnings

import pytest

from advisory.io.framing import datagram
from advisory.io.messages import decode_frame
from advisory.io.records import (
    KIND_EVENT,
    KIND_INPUT,
    KIND_OUTPUT,
    KIND_RAW_INPUT,
    RecordReader,
    decode_event,
)
from tests.test_run_e2e import (  # noqa: F401 - zones_file is a fixture
    RUN,
    Listener,
    air_payload,
    free_udp_port,
    zones_file,
)

N_FRAMES = 50 * 3600  # one hour at 50 Hz
PACE_PER_S = 2500.0  # frames per second on the wire (the kernel drops nothing at this)
BURST = 25  # frames per 10 ms
STEP_P99_BUDGET_MS = 5.0  # advisor issue: p99 step under 5 ms on this machine
RSS_GROWTH_LIMIT_KB = 16 * 1024  # "flat": common practice, no source


def _rss_kb(pid: int) -> int | None:
    try:
        with open(f"/proc/{pid}/status", encoding="ascii") as f:
            for line in f:
                if line.startswith("VmRSS:"):
                    return int(line.split()[1])
    except OSError:
        return None
    return None


@pytest.mark.slow
def test_soak_one_hour_of_50hz_input(tmp_path, small_table_path, zones_file) -> None:  # noqa: F811
    listener = Listener()
    port = free_udp_port()
    record = tmp_path / "soak.boomrec"
    env = dict(os.environ, BOOM_ADVISORY_CACHE=str(tmp_path / "cache"))
    proc = subprocess.Popen(
        [*RUN, "--input", f"udp://127.0.0.1:{port}", "--output", listener.url, "--zones",
         str(zones_file), "--tables", str(small_table_path), "--record", str(record),
         "--rate-hz", "50", "--duration-s", "900"],
        stdout=open(tmp_path / "run.out", "w"), stderr=open(tmp_path / "run.err", "w"),
        env=env)
    rss: list[tuple[float, int]] = []
    done = threading.Event()

    def sample() -> None:
        while not done.is_set():
            v = _rss_kb(proc.pid)
            if v:
                rss.append((time.monotonic(), v))
            done.wait(0.5)

    sampler = threading.Thread(target=sample, daemon=True)
    try:
        listener.wait_for(lambda f: f.type == "adv", 120.0, "the first advisory", after=0.0)
        sampler.start()
        tx = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
        t0 = time.monotonic()
        for start in range(0, N_FRAMES, BURST):
            for seq in range(start, min(start + BURST, N_FRAMES)):
                tx.sendto(datagram(air_payload(seq, time.monotonic() - t0)),
                          ("127.0.0.1", port))
            lag = t0 + (start + BURST) / PACE_PER_S - time.monotonic()
            if lag > 0:
                time.sleep(lag)
            assert proc.poll() is None, (tmp_path / "run.err").read_text()
        send_s = time.monotonic() - t0
        time.sleep(1.0)
        proc.send_signal(signal.SIGTERM)
        code = proc.wait(60)
    finally:
        done.set()
        if proc.poll() is None:
            proc.kill()
            proc.wait()
        listener.close()
    assert code == 0, (tmp_path / "run.err").read_text()

    # every frame recorded exactly once, in order (raw datagram and decoded frame)
    seqs: list[int] = []
    raw = outputs = 0
    final = None
    with RecordReader(record) as reader:
        for r in reader:
            if r.kind == KIND_INPUT:
                seqs.append(decode_frame(bytes(r.data)).seq)
            elif r.kind == KIND_RAW_INPUT:
                raw += 1
            elif r.kind == KIND_OUTPUT:
                outputs += 1
            elif r.kind == KIND_EVENT:
                ev = decode_event(r.data, reader.report.version)
                if ev.code == "stats" and ev.fields["kind"] == "final":
                    final = ev.fields["stats"]
        report = reader.report
    assert not report.torn_tail and report.corrupt_regions == 0
    assert raw == N_FRAMES
    assert seqs == list(range(N_FRAMES))
    assert final is not None
    c = final["counters"]
    assert c["valid"] == N_FRAMES and c["rejected"] == 0 and c["internal_errors"] == 0
    assert outputs >= 0.9 * 50 * send_s  # the service kept stepping at 50 Hz

    # step time: the service's own histogram (10 us bins)
    step = final["step"]
    print(f"\nsoak: {N_FRAMES} frames in {send_s:.1f} s; steps {step['n']}, median "
          f"{step['median_ms']} ms, p99 {step['p99_ms']} ms, max {step['max_ms']} ms; "
          f"cpu {final['cpu_s']} s; rss {final['rss_kb'] / 1024:.1f} MiB", file=sys.stderr)
    assert step["n"] >= 0.9 * 50 * send_s
    # The p99 step time is reported, not asserted: speed is judged by the benchmark
    # (`boom-advisory bench`), never by timed assertions that a busy machine could fail.
    if step["p99_ms"] > STEP_P99_BUDGET_MS:
        warnings.warn(f"soak p99 step {step['p99_ms']} ms is over the {STEP_P99_BUDGET_MS} ms "
                      "budget on this machine; check `boom-advisory bench`", stacklevel=1)

    # memory flat: RSS over the last quarter against the first quarter after warm-up
    values = [v for _, v in rss]
    assert len(values) >= 40
    q = len(values) // 4
    first, last = statistics.median(values[:q]), statistics.median(values[-q:])
    print(f"soak: rss first quarter {first / 1024:.1f} MiB, last quarter "
          f"{last / 1024:.1f} MiB, max {max(values) / 1024:.1f} MiB", file=sys.stderr)
    assert last - first <= RSS_GROWTH_LIMIT_KB
    assert max(values) < 250 * 1024  # live-loop budget: resident memory under 250 MB
