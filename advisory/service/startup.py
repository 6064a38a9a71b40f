"""The service's first seconds: status frames from the first second of life, and every
termination signal handled from the very start.

Light on purpose (standard library, ``msgpack`` and pyserial only: no numpy, no numba),
so that ``boom-advisory run`` publishes ``unavailable`` status frames whose reason says
what it is waiting for (``starting: compiling kernels``, ``starting: loading table``,
``starting: building table``, ...) within a second of being started, while the main
thread imports, compiles and builds. A thread sends one such frame every
:data:`STARTING_PERIOD_S` until the service proper takes the output over.

Signals (``docs/interface.md`` section 17.7): SIGTERM, SIGINT, SIGHUP, SIGQUIT, SIGUSR1
and SIGUSR2 all stop the service cleanly (final ``unavailable`` advisory and status
frames, exit 0), during start-up too: a signal during start-up raises
:class:`StartupInterrupted` in the main thread (a ``BaseException``, so best-effort
``except Exception`` blocks do not swallow it), and again at the next start-up step.
A library may still swallow it (seen: numba's type inference, which then went on
compiling for tens of seconds); so the starting thread, :data:`STOP_GRACE_S` after the
signal, sends the final frames itself and ends the process with exit code 0 (nothing
is half-written then: tables and numba's cache files are written under a temporary name
and renamed into place).

The frames are encoded here without :mod:`advisory.io.messages` (which loads the numba
kernels): MessagePack maps in the canonical key order of ``docs/interface.md`` sections
3, 5 and 6, CRC-32C (RFC 3720 section 12.1, reflected polynomial 0x82F63B78) and COBS
(Cheshire and Baker, IEEE/ACM Trans. Networking 7(2), 1999) in plain Python; a test
checks them byte for byte against the package's encoders.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import os
import signal
import socket
import threading
import time
from collections.abc import Callable
from types import FrameType
from typing import Any
from urllib.parse import parse_qs, unquote, urlsplit

import msgpack  # type: ignore[import-untyped]  # msgpack ships no type hints

from advisory.pipeline.cues import unavailable_cue
from advisory.schema import ADV_FORMAT_VERSION, WIRE_FORMAT_VERSION

STARTING_PERIOD_S = 0.5  #: one starting status frame this often, s
#: Longest wait from a stop signal during start-up to the end of the process, s
#: (engineering choice: a supervisor's stop timeout is commonly 10 s or more).
STOP_GRACE_S = 2.0
#: Signals that stop the service (all cleanly, with final frames and exit code 0).
STOP_SIGNALS = (signal.SIGTERM, signal.SIGINT, signal.SIGHUP, signal.SIGQUIT,
                signal.SIGUSR1, signal.SIGUSR2)


class StartupInterrupted(BaseException):
    """A stop signal arrived while the service was starting (the signal name in args)."""


def _crc_table() -> list[int]:
    table = []
    for n in range(256):
        c = n
        for _ in range(8):
            c = (c >> 1) ^ 0x82F63B78 if c & 1 else c >> 1
        table.append(c)
    return table


_CRC_TABLE = _crc_table()


def crc32c_py(data: bytes) -> int:
    """CRC-32C (Castagnoli; RFC 3720 section 12.1), plain Python for short frames."""
    c = 0xFFFFFFFF
    for b in data:
        c = _CRC_TABLE[(c ^ b) & 0xFF] ^ (c >> 8)
    return c ^ 0xFFFFFFFF


def cobs_encode_py(data: bytes) -> bytes:
    """COBS encoding (Cheshire and Baker 1999), plain Python, no delimiter added."""
    out = bytearray()
    block = bytearray()
    for b in data:
        if b == 0:
            out.append(len(block) + 1)
            out += block
            block.clear()
        else:
            block.append(b)
            if len(block) == 254:
                out.append(255)
                out += block
                block.clear()
    out.append(len(block) + 1)
    out += block
    return bytes(out)


def status_payload(state: str, reason: str, seq: int, utc_s: float) -> bytes:
    """A status frame payload without counters (``docs/interface.md`` section 6)."""
    return msgpack.packb({"v": WIRE_FORMAT_VERSION, "type": "status", "seq": seq,
                          "utc_s": float(utc_s), "state": state, "reason": reason,
                          "counters": {}}, use_bin_type=True)


def unavailable_adv_payload(reason: str, seq: int, utc_s: float) -> bytes:
    """An ``unavailable`` advisory frame payload (``docs/interface.md`` section 5)."""
    return msgpack.packb({"v": ADV_FORMAT_VERSION, "type": "adv", "seq": seq,
                          "utc_s": float(utc_s), "status": "unavailable", "zone_id": None,
                          "time_to_contact_s": None, "overpressure_psf": None,
                          "focus": False, "max_mach_off_ground": None,
                          "turn_left_deg": None, "turn_right_deg": None,
                          "tables_stale": False, "cue": unavailable_cue(reason),
                          "act_by_s": None, "resolve_mach": None, "turn_left_hdg": None,
                          "turn_right_hdg": None, "combined": False}, use_bin_type=True)


class _LightOutput:
    """The output URL opened without the package's transports: UDP and serial only
    (another scheme gets no starting frames; the service proper opens it later)."""

    def __init__(self, url: str) -> None:
        self.url = url
        self._sock: socket.socket | None = None
        self._port: Any = None

    def open(self) -> bool:
        parts = urlsplit(self.url)
        try:
            if parts.scheme == "udp" and parts.hostname and parts.port:
                self._sock = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
                self._sock.connect((parts.hostname, parts.port))
                return True
            if parts.scheme == "serial":
                # pyserial is imported here, not at the top: only a serial output needs it
                import serial  # type: ignore[import-untyped]  # noqa: PLC0415
                q = parse_qs(parts.query)
                baud = int(q.get("baud", ["115200"])[0])
                self._port = serial.Serial(unquote(parts.netloc + parts.path), baud,
                                           timeout=0, write_timeout=0.2)
                return True
        except Exception:  # noqa: BLE001 - no starting frames; the service reports it later
            self.close()
        return False

    def send(self, payload: bytes) -> None:
        if self._sock is None and self._port is None:
            return
        crc = crc32c_py(payload).to_bytes(4, "big")
        try:
            if self._sock is not None:
                self._sock.send(payload + crc)
            elif self._port is not None:
                self._port.write(b"\x00" + cobs_encode_py(payload + crc) + b"\x00")
        except Exception:  # noqa: BLE001, S110 - a full or absent receiver: next frame
            pass

    def close(self) -> None:
        sock, self._sock = self._sock, None
        port, self._port = self._port, None
        for thing in (sock, port):
            if thing is not None:
                try:
                    thing.close()
                except Exception:  # noqa: BLE001, S110 - closing is best effort
                    pass


class StartingPhase:
    """Starting status frames on the output, and the stop signals, until the service runs.

    Parameters
    ----------
    output_url : str
        The service's output (UDP or serial get starting frames).

    Attributes
    ----------
    phase : str
        What the service is waiting for (set by the start-up code; read by the thread).
    stop_reason : str
        The name of the stop signal received, or ``""``.
    """

    def __init__(self, output_url: str) -> None:
        self.out = _LightOutput(output_url)
        self.phase = "loading"
        self.stop_reason = ""
        self.starting = True
        self.on_stop: Callable[[str], None] | None = None
        self._seq = 0
        self._stop_at = 0.0
        self._final_sent = False
        self._lock = threading.Lock()
        self._halt = threading.Event()
        self._thread: threading.Thread | None = None
        self._old: dict[int, Any] = {}

    def install_signals(self) -> None:
        """Handle every stop signal from now on (main thread only)."""
        for sig in STOP_SIGNALS:
            self._old[sig] = signal.signal(sig, self._on_signal)

    def restore_signals(self) -> None:
        """Put back the handlers found by :meth:`install_signals`."""
        for sig, handler in self._old.items():
            signal.signal(sig, handler)
        self._old.clear()

    def _on_signal(self, signum: int, _frame: FrameType | None) -> None:
        name = signal.Signals(signum).name
        if not self.stop_reason:
            self.stop_reason = name
            self._stop_at = time.monotonic()
        if self.on_stop is not None:
            self.on_stop(name)
        elif self.starting:
            raise StartupInterrupted(name)

    def start(self) -> None:
        """Open the output and send a starting frame now and every period (the thread
        also ends a start that a stop signal did not end; it runs for every output)."""
        self.out.open()
        self._thread = threading.Thread(target=self._run, name="boom-starting",
                                        daemon=True)
        self._thread.start()

    def set_phase(self, text: str) -> None:
        """Say what the service waits for now (``compiling kernels``, ...).

        Raises
        ------
        StartupInterrupted
            A stop signal came during start-up (a library swallowed the first raise).
        """
        if self.stop_reason and self.starting:
            raise StartupInterrupted(self.stop_reason)
        self.phase = text

    def _send_status(self, state: str, reason: str) -> None:
        with self._lock:
            self.out.send(status_payload(state, reason, self._seq, time.time()))
            self._seq = (self._seq + 1) & 0xFFFFFFFF

    def _run(self) -> None:
        while not self._halt.is_set():
            if (self._stop_at and self.starting
                    and time.monotonic() - self._stop_at >= STOP_GRACE_S):
                self._hard_stop()
            self._send_status("unavailable", f"starting: {self.phase}"[:127])
            self._halt.wait(min(STARTING_PERIOD_S, STOP_GRACE_S / 4)
                            if self._stop_at else STARTING_PERIOD_S)

    def _hard_stop(self) -> None:
        """The main thread did not stop within :data:`STOP_GRACE_S` of the stop signal:
        the final frames from here, one line on standard error, exit code 0."""
        reason = f"service stopped ({self.stop_reason})"
        self.final(reason)
        line = (f"stopping: {reason} during start-up; the start did not end within "
                f"{STOP_GRACE_S:g} s of the signal\n")
        try:
            os.write(2, line.encode())
        except OSError:  # no standard error: the frames said it
            pass
        os._exit(0)

    def finish(self) -> None:
        """Stop the starting frames and free the output for the service proper."""
        self._halt.set()
        th, self._thread = self._thread, None
        if th is not None and th is not threading.current_thread():
            th.join(1.0)
        self.out.close()

    def final(self, reason: str) -> None:
        """Final ``unavailable`` advisory and status frames (a stop during start-up);
        sent once."""
        self._halt.set()
        with self._lock:
            if self._final_sent:
                return
            self._final_sent = True
            now = time.time()
            self.out.send(unavailable_adv_payload(reason, 0, now))
            self.out.send(status_payload("unavailable", reason, self._seq, now))
            self._seq = (self._seq + 1) & 0xFFFFFFFF
        self.finish()


__all__ = ["STARTING_PERIOD_S", "STOP_GRACE_S", "STOP_SIGNALS", "StartingPhase",
           "StartupInterrupted", "cobs_encode_py", "crc32c_py", "status_payload",
           "unavailable_adv_payload"]
