"""``boom-advisory run`` end to end: the real process on real parts.

UDP on 127.0.0.1, a real pseudo-terminal pair for the serial port (pulled and plugged
back), a real record file, signals. The expected behaviour is the project's interface
specification (``docs/interface.md`` sections 1, 5, 6, 9, 12, 13 and 17); the zones and
the flight are invented. Every wait is bounded; loopback only.
"""

from __future__ import annotations

import json
import math
import os
import select
import signal
import socket
import subprocess
import sys
import threading
import time
import tty
from pathlib import Path

import pytest

from advisory import units
from advisory.io.framing import StreamDeframer, datagram, frame_stream, parse_datagram
from advisory.io.messages import decode_frame, encode_air
from advisory.io.records import (
    KIND_EVENT,
    KIND_INPUT,
    KIND_OUTPUT,
    KIND_RAW_INPUT,
    decode_event,
    read_records,
)
from advisory.physics.atmosphere import standard_atmosphere
from advisory.pipeline.advisor import Advisor
from advisory.pipeline.zones import ZoneSet
from advisory.service.loop import AdvisoryLoop
from advisory.tables.table import BoomTable

RUN = [sys.executable, "-m", "advisory.cli", "run"]
READY_TIMEOUT_S = 120.0  # a fresh clone compiles the numba kernels on first start
LAT0, LON0 = 40.0, -100.0
ALT_FT = 45000.0
MACH = 1.6
GS_MPS = MACH * float(standard_atmosphere().at(units.ft_to_m(ALT_FT)).sound_speed_mps)
M_PER_DEG_LON = 111320.0 * math.cos(math.radians(LAT0))  # spherical approximation


def square(zone_id: str, lat: float, lon: float, half_km: float = 3.0) -> dict:
    dlat = half_km / 111.0
    dlon = half_km / (111.0 * math.cos(math.radians(lat)))
    ring = [[lon - dlon, lat - dlat], [lon + dlon, lat - dlat], [lon + dlon, lat + dlat],
            [lon - dlon, lat + dlat], [lon - dlon, lat - dlat]]
    return {"type": "Feature", "geometry": {"type": "Polygon", "coordinates": [ring]},
            "properties": {"id": zone_id, "name": zone_id.title(), "limit_psf": 0.0,
                           "margin_km": 0.0}}


@pytest.fixture()
def zones_file(tmp_path) -> Path:
    """An invented town 130 km ahead of the flight: an "advisory" all test long."""
    path = tmp_path / "zones.geojson"
    path.write_text(json.dumps({"type": "FeatureCollection", "features": [
        square("millbrook", LAT0, LON0 + 130e3 / M_PER_DEG_LON)]}))
    return path


def air_payload(seq: int, t: float) -> bytes:
    """Level flight east at Mach 1.6, 45,000 ft, ``t`` s after the sender started."""
    return encode_air({"lat_deg": LAT0, "lon_deg": LON0 + GS_MPS * t / M_PER_DEG_LON,
                       "alt_ft": ALT_FT, "mach": MACH, "heading_deg": 90.0,
                       "gs_kt": GS_MPS / units.KT, "bank_deg": 0.0, "fpa_deg": 0.0},
                      seq, time.time())


def free_udp_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_DGRAM) as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]



def running_status(f) -> bool:
    """A status frame of the running service, not a starting one (ICD 17.7)."""
    return f.type == "status" and not f.fields["reason"].startswith("starting")

class Listener(threading.Thread):
    """Collects the service's UDP output: (monotonic receive time, Frame)."""

    def __init__(self) -> None:
        super().__init__(daemon=True)
        self.sock = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
        self.sock.bind(("127.0.0.1", 0))
        self.sock.settimeout(0.1)
        self.frames: list[tuple[float, object]] = []
        self.bad = 0
        self._halt = threading.Event()
        self.start()

    @property
    def url(self) -> str:
        return f"udp://127.0.0.1:{self.sock.getsockname()[1]}"

    def run(self) -> None:
        while not self._halt.is_set():
            try:
                data = self.sock.recv(9000)
            except OSError:
                continue
            try:
                self.frames.append((time.monotonic(), decode_frame(parse_datagram(data))))
            except ValueError:
                self.bad += 1

    def wait_for(self, pred, timeout_s: float, what: str, after: float | None = None):
        """The first frame received from now on (or since ``after``) that fits ``pred``."""
        start = time.monotonic()
        after = start if after is None else after
        end = start + timeout_s
        seen = 0
        while time.monotonic() < end:
            frames = self.frames[seen:]
            seen += len(frames)
            for t, f in frames:
                if t >= after and pred(f):
                    return t, f
            time.sleep(0.02)
        raise AssertionError(f"timed out after {timeout_s} s waiting for {what}; last "
                             f"frames: {[f.fields for _, f in self.frames[-3:]]}")

    def since(self, t0: float, kind: str | None = None) -> list:
        return [f for t, f in list(self.frames) if t >= t0 and (kind is None or f.type == kind)]

    def close(self) -> None:
        """Stop, then read whatever is still queued in the socket (bounded)."""
        self._halt.set()
        self.join(1.0)
        self.sock.settimeout(0.2)
        for _ in range(10000):
            try:
                data = self.sock.recv(9000)
            except OSError:
                break
            try:
                self.frames.append((time.monotonic(), decode_frame(parse_datagram(data))))
            except ValueError:
                self.bad += 1
        self.sock.close()


class Sender(threading.Thread):
    """Sends air data at ``rate_hz`` through ``write(bytes)``; position follows real time."""

    def __init__(self, write, wrap, rate_hz: float = 20.0) -> None:
        super().__init__(daemon=True)
        self.write = write
        self.wrap = wrap
        self.period = 1.0 / rate_hz
        self.sent: list[int] = []
        self.extra: list[bytes] = []  # raw extras to slip in (garbage)
        self.lock = threading.Lock()
        self._halt = threading.Event()
        self.t0 = time.monotonic()
        self.start()

    def run(self) -> None:
        seq = 0
        nxt = time.monotonic()
        while not self._halt.is_set() and seq < 10000:
            with self.lock:
                extras, self.extra = self.extra, []
                try:
                    for e in extras:
                        self.write(e)
                    self.write(self.wrap(air_payload(seq, time.monotonic() - self.t0)))
                    self.sent.append(seq)
                except OSError:
                    pass  # cable pulled: the frame is lost, as on a real line
            seq += 1
            nxt += self.period
            time.sleep(max(0.0, nxt - time.monotonic()))

    def close(self) -> None:
        self._halt.set()
        self.join(2.0)


def start_run(tmp_path: Path, *args: str) -> subprocess.Popen:
    env = dict(os.environ, BOOM_ADVISORY_CACHE=str(tmp_path / "cache"),
               PYTHONUNBUFFERED="1")
    return subprocess.Popen([*RUN, *args], stdout=open(tmp_path / "run.out", "w"),
                            stderr=open(tmp_path / "run.err", "w"), env=env)


def stop(proc: subprocess.Popen, sig: int = signal.SIGTERM, timeout_s: float = 20.0) -> int:
    if proc.poll() is None:
        proc.send_signal(sig)
    try:
        return proc.wait(timeout_s)
    except subprocess.TimeoutExpired:
        proc.kill()
        proc.wait(5)
        raise AssertionError("run did not stop on the signal") from None


def end_run(proc: subprocess.Popen, *closing) -> None:
    """Tear-down of an end-to-end test: kill the service if it still runs, then close
    each of ``closing`` (sockets, listeners)."""
    if proc.poll() is None:
        proc.kill()
        proc.wait()
    for thing in closing:
        thing.close()


def outputs_in(path: Path) -> list:
    records, _ = read_records(path)
    return [decode_frame(r.data) for r in records if r.kind == KIND_OUTPUT]


def last_status(frames) -> dict:
    return [f for f in frames if f.type == "status"][-1].fields


# ----------------------------------------------------------------------------------- UDP

def test_udp_end_to_end_and_sigterm(tmp_path, small_table_path, zones_file) -> None:
    # ICD sections 1, 5, 6, 10, 13 and 17: UDP in and out, SIGTERM, the record complete.
    listener = Listener()
    port = free_udp_port()
    record = tmp_path / "flight.boomrec"
    proc = start_run(tmp_path, "--input", f"udp://127.0.0.1:{port}", "--output",
                     listener.url, "--zones", str(zones_file), "--tables",
                     str(small_table_path), "--record", str(record), "--rate-hz", "10")
    sender = None
    try:
        # the first status of the running service (not a starting one, ICD 17.7)
        listener.wait_for(running_status, READY_TIMEOUT_S, "first status", after=0.0)
        tx = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
        sender = Sender(lambda d: tx.sendto(d, ("127.0.0.1", port)), datagram)
        t_adv, _ = listener.wait_for(lambda f: f.type == "adv" and f.fields["status"]
                                     == "advisory", 20.0, "an advisory")
        time.sleep(1.5)
        with sender.lock:  # a garbage datagram and a bad-CRC one
            sender.extra += [b"\x01\x02\x03", datagram(air_payload(0, 0.0))[:-1] + b"\x00"]
        time.sleep(2.0)
        sender.close()
        t_end = time.monotonic()
        code = stop(proc)
    finally:
        end_run(proc)
        if sender is not None:
            sender.close()
        listener.close()
    assert code == 0, (tmp_path / "run.err").read_text()
    out = (tmp_path / "run.out").read_text().splitlines()
    assert out[0].startswith("CAUTION:") and "not certified" in out[0]
    assert any("ADVISORY Mill" in line for line in out)  # issue 13 crew line (zone may be cut)
    # ICD sections 1, 5, 6: one advisory per step at 10 Hz, status at least 1 Hz
    adv = listener.since(t_adv, "adv")
    assert adv and {f.fields["status"] for f in adv[:-1]} == {"advisory"}
    assert {f.fields["zone_id"] for f in adv[:-1]} == {"millbrook"}
    assert [f.seq for f in adv] == list(range(adv[0].seq, adv[0].seq + len(adv)))
    st = [(t, f) for t, f in listener.frames if f.type == "status" and t_adv <= t <= t_end]
    gaps = [b[0] - a[0] for a, b in zip(st, st[1:])]
    assert st and max(gaps) < 1.3, gaps
    assert {f.fields["state"] for _, f in st} <= {"ok", "degraded"}
    assert "degraded" in {f.fields["state"] for _, f in st}  # after the garbage
    # the last frames say the service stopped (never leave a display on a stale level)
    assert adv[-1].fields["status"] == "unavailable"
    assert adv[-1].fields["cue"] == "BOOM PREDICTION OFF - STOPPED"  # SIGTERM: status reason
    final = last_status(listener.since(0.0))
    assert final["state"] == "unavailable" and "SIGTERM" in final["reason"]
    c = final["counters"]
    assert c["too_short"] == 1 and c["bad_crc"] == 1
    # ICD section 13/17: the record is complete: every datagram sent, in order, and every
    # output that was published
    records, report = read_records(record)
    assert not report.torn_tail and report.corrupt_regions == 0
    inputs = [decode_frame(r.data).seq for r in records if r.kind == KIND_INPUT]
    assert inputs == sender.sent
    assert sum(r.kind == KIND_RAW_INPUT for r in records) == len(sender.sent) + 2
    recorded = [decode_frame(r.data) for r in records if r.kind == KIND_OUTPUT]
    received = [f for _, f in listener.frames  # starting frames (ICD 17.7) are not recorded
                if not (f.type == "status" and f.fields["reason"].startswith("starting"))]
    assert recorded == received  # nothing lost on loopback, nothing reordered
    events = [decode_event(r.data) for r in records if r.kind == KIND_EVENT]
    assert events[0].code == "input_open" and events[1].code == "start"
    assert events[1].fields["settings"]["input_format"] == "datagram"
    assert any(e.code == "stats" and e.fields["kind"] == "final" for e in events)
    assert events[-1].code == "shutdown"
    # ICD section 17.4: the raw input records fed to a fresh loop, polled at the recorded
    # output times, give the recorded outputs byte for byte (the two frames published at
    # shutdown come from the service, not from a poll)
    loop = AdvisoryLoop(Advisor(BoomTable.load(small_table_path), ZoneSet.from_file(zones_file)),
                        input_format="datagram", rate_hz=10.0)
    # the identity the service put in its status frames (ICD section 6), from its start event
    loop.identity = {k: v for k, v in events[1].fields["settings"]["identity"].items() if v}
    replayed: list[bytes] = []
    polled: set[tuple[float, float]] = set()
    last_outputs = [r for r in records if r.kind == KIND_OUTPUT][-2:]
    for r in records:
        if r.kind == KIND_RAW_INPUT:
            loop.feed(bytes(r.data), r.mono_s, r.utc_s)
        elif r.kind == KIND_OUTPUT and r not in last_outputs \
                and (r.mono_s, r.utc_s) not in polled:
            polled.add((r.mono_s, r.utc_s))
            replayed += loop.poll(r.mono_s, r.utc_s)
    assert replayed == [bytes(r.data) for r in records if r.kind == KIND_OUTPUT][:-2]


# -------------------------------------------------------------------------------- serial

class Pty:
    """A pseudo-terminal pair reachable through a symlink, so it can vanish and return."""

    def __init__(self, link: Path) -> None:
        self.link = link
        self.master: int | None = None
        self.slave: int | None = None
        self.plug()

    def plug(self) -> None:
        self.master, self.slave = os.openpty()
        tty.setraw(self.slave)  # raw line discipline before anyone writes
        os.set_blocking(self.master, False)
        if self.link.is_symlink():
            self.link.unlink()
        self.link.symlink_to(os.ttyname(self.slave))

    def pull(self) -> None:
        """The cable comes out: both ends close and the device node is gone."""
        for fd in (self.master, self.slave):
            if fd is not None:
                os.close(fd)
        self.master = self.slave = None
        self.link.unlink()

    def write(self, data: bytes) -> None:
        if self.master is None:
            raise OSError("cable pulled")
        try:
            os.write(self.master, data)
        except BlockingIOError:
            pass

    def close(self) -> None:
        if self.master is not None:
            self.pull()


def test_serial_end_to_end_with_pulled_cable(tmp_path, small_table_path, zones_file) -> None:
    # ICD sections 9, 12, 17: stream frames over a serial port; a pulled cable makes the
    # advisories "unavailable" (never silence), the service reopens the port with backoff
    # and advisories resume.
    pty = Pty(tmp_path / "ttyBOOM0")
    listener = Listener()
    record = tmp_path / "serial.boomrec"
    proc = start_run(tmp_path, "--input", f"serial://{pty.link}?baud=115200", "--output",
                     listener.url, "--zones", str(zones_file), "--tables",
                     str(small_table_path), "--record", str(record))
    sender = Sender(pty.write, frame_stream)
    try:
        listener.wait_for(lambda f: f.type == "adv" and f.fields["status"] == "advisory",
                          READY_TIMEOUT_S, "an advisory over serial")
        with sender.lock:
            pty.pull()
        t_pull = time.monotonic()
        listener.wait_for(lambda f: f.type == "status" and f.fields["state"] == "unavailable"
                          and "input link lost" in f.fields["reason"], 5.0,
                          "unavailable after the pull")
        time.sleep(1.5)  # cable out for a while: reopen attempts fail
        with sender.lock:
            pty.plug()
        t_plug = time.monotonic()
        t_back, _ = listener.wait_for(
            lambda f: f.type == "adv" and f.fields["status"] == "advisory", 15.0,
            "advisories after the cable came back")
        time.sleep(1.0)
        sender.close()
        code = stop(proc, signal.SIGINT)
    finally:
        end_run(proc, sender, listener, pty)
    assert code == 0, (tmp_path / "run.err").read_text()
    between = [f for t, f in listener.frames if t_pull + 0.6 < t < t_plug + 0.05]
    assert between, "nothing published while the cable was out"
    assert {f.fields["status"] for f in between if f.type == "adv"} == {"unavailable"}
    assert {f.fields["state"] for f in between if f.type == "status"} == {"unavailable"}
    assert t_back - t_plug < 5.0  # backoff is capped at 2 s
    c = last_status(listener.since(0.0))["counters"]
    assert c["input_lost"] >= 1 and c["input_reopened"] >= 1
    events = [decode_event(r.data) for r in read_records(record)[0] if r.kind == KIND_EVENT]
    assert any(e.code == "input_lost" for e in events)
    assert sum(e.code == "input_open" for e in events) >= 2
    assert events[-1].code == "shutdown"


def test_full_output_drops_and_counts_without_blocking(tmp_path, small_table_path,
                                                       zones_file) -> None:
    # ICD section 17.5. A serial output nobody reads: its buffer is full from the start.
    # The loop must not block: outputs keep being recorded at the step rate, drops are
    # counted, the status says degraded; once the far end reads again, frames flow.
    pty = Pty(tmp_path / "ttyOUT0")
    filled = 0
    os.set_blocking(pty.slave, False)
    for chunk in (4096, 1):  # fill the slave-to-master direction to the last byte
        while filled < 1 << 22:  # (bounded)
            try:
                filled += os.write(pty.slave, b"\x55" * chunk)
            except BlockingIOError:
                break
    port = free_udp_port()
    record = tmp_path / "full.boomrec"
    proc = start_run(tmp_path, "--input", f"udp://127.0.0.1:{port}", "--output",
                     f"serial://{pty.link}?write_timeout=0.2", "--zones", str(zones_file),
                     "--tables", str(small_table_path), "--record", str(record),
                     "--rate-hz", "20")
    tx = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
    sender = Sender(lambda d: tx.sendto(d, ("127.0.0.1", port)), datagram)
    try:
        end = time.monotonic() + READY_TIMEOUT_S
        while time.monotonic() < end and not (record.exists() and any(
                f.type == "adv" and f.fields["status"] == "advisory"
                for f in outputs_in(record))):
            assert proc.poll() is None, (tmp_path / "run.err").read_text()
            time.sleep(0.2)
        t0 = time.monotonic()
        n0 = len(outputs_in(record))
        time.sleep(3.0)
        n1 = len(outputs_in(record))
        rate = (n1 - n0) / (time.monotonic() - t0)
        assert proc.poll() is None
        frames = outputs_in(record)
        st = last_status(frames)
        # drain the far end: frames get through again
        got = StreamDeframer()
        payloads: list[bytes] = []
        end = time.monotonic() + 10.0
        while time.monotonic() < end and len(payloads) < 20:
            r, _, _ = select.select([pty.master], [], [], 0.1)
            if r:
                payloads += got.feed(os.read(pty.master, 65536))
        sender.close()
        code = stop(proc)
    finally:
        end_run(proc, sender, pty)
    assert filled > 0
    assert rate > 15.0  # 20 advisory frames a second plus status: the loop never blocked
    # ICD 17.5: a terminal output's stale backlog is flushed before each frame (the bytes
    # that filled this line were never ours; whether the line is still found full at the
    # service's first write depends on the start-up frames, so the drop counter is not
    # asserted here: the serial-output test of test_output_fresh.py covers the counting).
    # What must hold: the loop never blocked, the status never stuck, and once the far
    # end reads, the latest frames arrive (not a backlog).
    assert st["state"] in ("ok", "degraded"), st
    assert len(payloads) >= 20 and {decode_frame(p).type for p in payloads} >= {"adv"}
    newest = max(f.utc_s for f in frames)
    assert all(newest - decode_frame(p).utc_s < 15.0 for p in payloads)
    assert code == 0, (tmp_path / "run.err").read_text()


# ------------------------------------------------------------------- bad files and options

def _corrupt_table(tmp_path: Path, src: Path) -> Path:
    data = bytearray(src.read_bytes())
    data[len(data) // 2] ^= 0xFF  # one flipped byte in the payload
    bad = tmp_path / "corrupt.boomtable"
    bad.write_bytes(bytes(data))
    return bad


@pytest.mark.parametrize("case", ["corrupt_table", "truncated_table", "zones_no_limit",
                                  "zones_not_json", "bad_url", "bad_rate"])
def test_bad_files_give_a_clear_error(case, tmp_path, small_table_path, zones_file) -> None:
    # Design brief, "Errors": one clear message naming the file or option, non-zero exit.
    table, zones, url, rate = str(small_table_path), str(zones_file), "udp://127.0.0.1:9", "10"
    expect = ""
    if case == "corrupt_table":
        table = str(_corrupt_table(tmp_path, small_table_path))
        expect = "corrupt.boomtable"
    elif case == "truncated_table":
        short = tmp_path / "short.boomtable"
        short.write_bytes(small_table_path.read_bytes()[:1000])
        table, expect = str(short), "short.boomtable"
    elif case == "zones_no_limit":
        doc = json.loads(zones_file.read_text())
        del doc["features"][0]["properties"]["limit_psf"]
        bad = tmp_path / "nolimit.geojson"
        bad.write_text(json.dumps(doc))
        zones, expect = str(bad), "limit_psf"
    elif case == "zones_not_json":
        bad = tmp_path / "broken.geojson"
        bad.write_text('{"type": "FeatureCollection", "features": [')
        zones, expect = str(bad), "broken.geojson"
    elif case == "bad_url":
        url, expect = "tcp://127.0.0.1:9", "tcp"
    else:
        rate, expect = "-5", "--rate-hz"
    proc = subprocess.run([*RUN, "--input", url, "--output", "udp://127.0.0.1:9", "--zones",
                           zones, "--tables", table, "--rate-hz", rate],
                          capture_output=True, text=True, timeout=120)
    assert proc.returncode == 2, proc.stderr
    err = proc.stderr.strip().splitlines()
    assert err and err[-1].startswith("boom-advisory run: error:") and expect in err[-1], err


def test_udp_port_in_use_is_a_runtime_error(tmp_path, small_table_path, zones_file) -> None:
    # ICD section 17.5: an input that cannot be opened at start is exit code 1.
    with socket.socket(socket.AF_INET, socket.SOCK_DGRAM) as busy:
        busy.bind(("127.0.0.1", 0))
        port = busy.getsockname()[1]
        proc = subprocess.run([*RUN, "--input", f"udp://127.0.0.1:{port}", "--output",
                               "udp://127.0.0.1:9", "--zones", str(zones_file), "--tables",
                               str(small_table_path)], capture_output=True, text=True,
                              timeout=120)
    assert proc.returncode == 1
    assert f"udp://127.0.0.1:{port}" in proc.stderr and "error" in proc.stderr


# -------------------------------------------------------------------------- table rebuild

def test_profile_rebuilds_tables_off_the_hot_path(tmp_path, small_table_path,
                                                  zones_file) -> None:
    # Issue "Precomputed tables": a new atmosphere is built in another process while the
    # advisories go on flagged tables_stale; after the swap the flag clears.
    profile = tmp_path / "warm_day.csv"  # an invented, warmer-than-standard day, no wind
    profile.write_text("alt_ft,temp_c\n0,25\n36000,-50\n60000,-52\n")
    listener = Listener()
    port = free_udp_port()
    proc = start_run(tmp_path, "--input", f"udp://127.0.0.1:{port}", "--output",
                     listener.url, "--zones", str(zones_file), "--tables",
                     str(small_table_path), "--profile", str(profile), "--duration-s", "90")
    tx = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
    sender = Sender(lambda d: tx.sendto(d, ("127.0.0.1", port)), datagram)
    try:
        _, first = listener.wait_for(lambda f: f.type == "adv" and f.fields["status"]
                                     == "advisory", READY_TIMEOUT_S, "an advisory", after=0.0)
        stale_seen = first.fields["tables_stale"]
        t_fresh, _ = listener.wait_for(lambda f: f.type == "adv" and f.fields["status"]
                                       == "advisory" and not f.fields["tables_stale"], 80.0,
                                       "advisories on the rebuilt table")
        code = stop(proc)
    finally:
        end_run(proc, sender, listener)
    assert stale_seen, "the first advisories should be flagged tables_stale"
    # ICD section 17.2: stale tables make the status degraded (the first status frame's
    # reason is the start-up caution; a quick rebuild may leave only that one)
    before = [f.fields for t, f in listener.frames if f.type == "status" and t < t_fresh
              and not f.fields["reason"].startswith("starting")]  # ICD 17.7: not recorded
    assert before and {s["state"] for s in before} == {"degraded"}
    assert all("tables stale" in s["reason"] for s in before[1:])
    assert code == 0, (tmp_path / "run.err").read_text()
