"""Transports end to end on real parts: a pseudo-terminal pair, pyserial's loop://,
UDP sockets on 127.0.0.1, real files. Bounded in count and time; loopback only."""

from __future__ import annotations

import os
import socket
import time

import pytest

from advisory.io.framing import DatagramReader, StreamDeframer, datagram, frame_stream
from advisory.io.messages import decode_frame, encode_air, encode_status
from advisory.io.transports import (
    FileTransport,
    FramedLink,
    SerialTransport,
    TransportError,
    UdpTransport,
    make_transport,
    open_transport,
)

AIR = {"lat_deg": 40.0, "lon_deg": -100.0, "alt_ft": 45000.0, "mach": 1.4,
       "heading_deg": 90.0, "gs_kt": 740.0, "bank_deg": 0.0, "fpa_deg": 0.0}
N = 40  # frames per end-to-end test


def _payloads(n=N):
    return [encode_air(dict(AIR, lon_deg=-100.0 + i * 1e-3), i, 1893456000.0 + i * 0.05)
            for i in range(n)]


def _collect(link: FramedLink, n: int, timeout_s: float = 3.0) -> list[bytes]:
    got: list[bytes] = []
    end = time.monotonic() + timeout_s
    while len(got) < n and time.monotonic() < end:
        got += link.receive(min(end, time.monotonic() + 0.2))
    return got


def _read_fd(fd: int, n: int, timeout_s: float = 3.0) -> bytes:
    import select

    buf = b""
    end = time.monotonic() + timeout_s
    while len(buf) < n and time.monotonic() < end:
        r, _, _ = select.select([fd], [], [], 0.1)
        if r:
            buf += os.read(fd, 65536)
    return buf


@pytest.fixture
def pty_pair():
    master, slave = os.openpty()
    name = os.ttyname(slave)
    yield master, slave, name
    for fd in (master, slave):
        try:
            os.close(fd)
        except OSError:
            pass


# ------------------------------------------------------------------------------ serial

def test_serial_over_pty_both_directions(pty_pair):
    master, _slave, name = pty_pair
    link = FramedLink(open_transport(f"serial://{name}?baud=115200", "input"))
    try:
        payloads = _payloads()
        garbage = bytes(range(1, 200)) * 3
        os.write(master, b"".join(frame_stream(p) for p in payloads[:N // 2]) + garbage
                 + b"\x00" + b"".join(frame_stream(p) for p in payloads[N // 2:]))
        got = _collect(link, N)
        assert got == payloads
        assert link.counters["frames_ok"] == N
        assert link.counters["cobs_error"] + link.counters["bad_crc"] >= 1  # the garbage
        # and out through the same port
        status = encode_status({"state": "ok", "counters": {"frames_ok": N}}, 1, 1.0)
        assert link.send(status)
        wire = _read_fd(master, len(frame_stream(status)))
        assert StreamDeframer().feed(wire) == [status]
    finally:
        link.close()
        link.close()  # safe twice


def test_serial_pulled_cable_raises_then_reopens(pty_pair):
    master, _slave, name = pty_pair
    t = open_transport(f"serial://{name}", "input")
    os.close(master)  # the other end goes away: like a pulled cable
    with pytest.raises(TransportError):
        for _ in range(5):
            t.receive(time.monotonic() + 0.2)
    t.close()
    t.close()
    # a new port (as after replugging) opens and works through the same class
    master2, slave2 = os.openpty()
    try:
        t2 = open_transport(f"serial://{os.ttyname(slave2)}", "input")
        os.write(master2, frame_stream(_payloads(1)[0]))
        assert FramedLink(t2).receive(time.monotonic() + 1.0) == _payloads(1)
        t2.close()
    finally:
        os.close(master2)
        os.close(slave2)


def test_serial_receive_times_out_with_none(pty_pair):
    _master, _slave, name = pty_pair
    t = open_transport(f"serial://{name}", "input")
    start = time.monotonic()
    assert t.receive(start + 0.1) is None
    assert 0.05 <= time.monotonic() - start < 1.0
    t.close()


def test_serial_loop_url_end_to_end():
    link = FramedLink(open_transport("loop://", "input"))
    try:
        payloads = _payloads(5)
        for p in payloads:
            assert link.send(p)
        assert _collect(link, 5) == payloads
        assert link.receive(time.monotonic() + 0.05) == []
    finally:
        link.close()


def test_serial_missing_device_is_a_transport_error(tmp_path):
    with pytest.raises(TransportError, match="cannot open"):
        open_transport(f"serial://{tmp_path}/no-such-tty?baud=9600", "input")


# --------------------------------------------------------------------------------- UDP

def test_udp_unicast_end_to_end():
    rx = open_transport("udp://127.0.0.1:0", "input")
    port = rx.local_address[1]
    tx = open_transport(f"udp://127.0.0.1:{port}", "output")
    try:
        rlink, tlink = FramedLink(rx), FramedLink(tx)
        payloads = _payloads()
        for p in payloads:
            assert tlink.send(p)
        got = _collect(rlink, N)
        assert got == payloads  # loopback: no loss, no reordering at this rate
        # garbage datagrams are counted, the link keeps going
        raw = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
        raw.sendto(b"\x01\x02", ("127.0.0.1", port))
        raw.sendto(b"not a frame at all", ("127.0.0.1", port))
        raw.close()
        tlink.send(payloads[0])
        assert _collect(rlink, 1) == [payloads[0]]
        c = rlink.counters
        assert c["too_short"] == 1 and c["bad_crc"] == 1 and c["frames_ok"] == N + 1
        assert decode_frame(got[-1]).seq == N - 1
    finally:
        rx.close()
        tx.close()
        rx.close()


def test_udp_receive_deadline():
    rx = open_transport("udp://127.0.0.1:0", "input")
    start = time.monotonic()
    assert rx.receive(start + 0.1) is None
    assert 0.05 <= time.monotonic() - start < 1.0
    rx.close()


def test_udp_multicast_on_loopback():
    group = "239.255.77.31"
    try:
        rx = open_transport(f"udp://{group}:0?iface=127.0.0.1", "input")
    except TransportError as exc:
        pytest.skip(f"multicast not available on this host's loopback: {exc}")
    port = rx.local_address[1]
    tx = open_transport(f"udp://{group}:{port}?iface=127.0.0.1&ttl=0&loop=1", "output")
    try:
        p = _payloads(1)[0]
        tx.send(datagram(p))
        data = rx.receive(time.monotonic() + 1.0)
        if data is None:
            pytest.skip("multicast loopback delivery disabled on this host")
        assert DatagramReader().feed(data) == [p]
    finally:
        rx.close()
        tx.close()


def test_udp_output_to_unspecified_address_is_refused():
    with pytest.raises(ValueError, match="0.0.0.0"):
        make_transport("udp://0.0.0.0:5600", "output")


# -------------------------------------------------------------------------------- file

def test_file_sink_then_source(tmp_path):
    path = tmp_path / "capture.bin"
    out = FramedLink(open_transport(f"file://{path}?mode=truncate", "output"))
    payloads = _payloads()
    for p in payloads:
        out.send(p)
    out.close()
    src = open_transport(f"file://{path}?chunk=100", "input")
    link = FramedLink(src)
    got = []
    while not src.at_eof:
        got += link.receive(time.monotonic() + 0.1)
    assert got == payloads
    src.close()


def test_file_relative_url_and_follow(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "feed.bin").write_bytes(b"")
    t = open_transport("file:feed.bin?follow=1", "input")
    start = time.monotonic()
    assert t.receive(start + 0.1) is None and not t.at_eof
    with open(tmp_path / "feed.bin", "ab") as f:
        f.write(b"abc")
    assert t.receive(time.monotonic() + 1.0) == b"abc"
    t.close()


# ----------------------------------------------------------------------------- factory

@pytest.mark.parametrize(("url", "role", "kind"), [
    ("serial:///dev/ttyUSB0?baud=115200", "input", SerialTransport),
    ("loop://", "output", SerialTransport),
    ("udp://0.0.0.0:5600", "input", UdpTransport),
    ("udp://127.0.0.1:5601", "output", UdpTransport),
    ("udp://239.1.2.3:5600?iface=127.0.0.1", "input", UdpTransport),
    ("file:///tmp/x.bin", "input", FileTransport),
])
def test_factory_picks_by_url(url, role, kind):
    assert isinstance(make_transport(url, role), kind)


@pytest.mark.parametrize(("url", "role", "match"), [
    ("tcp://127.0.0.1:5600", "input", "unknown transport scheme"),
    ("/dev/ttyUSB0", "input", "not a transport URL"),
    ("udp://127.0.0.1", "input", "HOST:PORT"),
    ("udp://127.0.0.1:5600?colour=red", "input", "colour"),
    ("serial:///dev/ttyUSB0?baud=fast", "input", "baud"),
    ("serial:///dev/ttyUSB0?parity=X", "input", "parity"),
    ("udp://127.0.0.1:5600", "sideways", "role"),
    ("file:///tmp/x.bin?mode=rewind", "output", "mode"),
])
def test_factory_rejects_bad_urls(url, role, match):
    with pytest.raises(ValueError, match=match):
        make_transport(url, role)


def test_unopened_transport_raises_clear_error():
    t = make_transport("udp://127.0.0.1:5601", "output")
    with pytest.raises(TransportError, match="not open"):
        t.send(b"x")
    t.close()
