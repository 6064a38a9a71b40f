"""Serial ports through pyserial: real devices, pseudo-terminals, and pyserial URLs.

``serial:///dev/ttyUSB0?baud=115200`` (also ``parity=N|E|O``, ``bytesize=8``,
``stopbits=1``, ``rtscts=0``, ``xonxoff=0``, ``write_timeout=1.0``, ``exclusive=1``);
any other URL that pyserial's ``serial_for_url`` accepts (``loop://``,
``socket://host:port``, ``rfc2217://...``) is handed to pyserial unchanged.

A ``serial:`` port is opened exclusively by default (pyserial's ``exclusive``: an
advisory ``flock`` on the device), so a second reader cannot take bytes from the
service: the second open is refused with one line saying the port is in use.
``exclusive=0`` shares the port on request.
"""

from __future__ import annotations

import select
import time
from typing import Any
from urllib.parse import unquote

import serial  # type: ignore[import-untyped]  # pyserial ships no type hints

from advisory.io.transports.base import (
    BaseTransport,
    SendBufferFullError,
    TransportError,
    no_more_options,
    pop_flag,
    pop_number,
    split_url,
)

#: URL schemes handed to pyserial (``serial`` is ours; the others are pyserial's own).
SCHEMES = ("serial", "loop", "socket", "rfc2217", "spy", "alt", "hwgrep", "cp2110")


class SerialTransport(BaseTransport):
    """A serial port through pyserial (real devices, pseudo-terminals, ``loop://``).

    Parameters
    ----------
    url : str
        ``serial:///dev/ttyUSB0?baud=115200`` or any pyserial URL such as ``loop://``.
    role : str
        ``"input"`` or ``"output"`` (a serial port is used the same way for both).
    """

    is_stream = True
    retry_open = True  #: a port absent at start may be plugged in later

    def __init__(self, url: str, role: str = "input") -> None:
        self.url = url
        self.role = role
        self._port: Any = None
        self._fd: int | None = None
        parts, q = split_url(url)
        self._kwargs: dict[str, Any] = {}
        if parts.scheme == "serial":
            self._target = unquote(parts.netloc + parts.path)
            if not self._target:
                raise ValueError(f"{url}: no serial device named (serial:///dev/ttyX)")
            self._kwargs = {
                "baudrate": int(pop_number(q, "baud", 115200, url, int)),
                "parity": q.pop("parity", "N").upper(),
                "bytesize": int(pop_number(q, "bytesize", 8, url, int)),
                "stopbits": pop_number(q, "stopbits", 1, url),
                "rtscts": pop_flag(q, "rtscts", False, url),
                "xonxoff": pop_flag(q, "xonxoff", False, url),
                "write_timeout": pop_number(q, "write_timeout", 1.0, url),
                "exclusive": pop_flag(q, "exclusive", True, url),
            }
            if self._kwargs["stopbits"] == int(self._kwargs["stopbits"]):
                self._kwargs["stopbits"] = int(self._kwargs["stopbits"])
            if self._kwargs["parity"] not in ("N", "E", "O", "M", "S"):
                raise ValueError(f"{url}: parity must be N, E or O")
            no_more_options(q, url)
        else:
            self._target = url  # pyserial's own URL, options and all
            self._kwargs = {"write_timeout": 1.0}

    def open(self) -> None:
        """Open the port; raises :class:`TransportError` when it cannot."""
        if self._port is not None:
            return
        try:
            port = serial.serial_for_url(self._target, timeout=0, **self._kwargs)
        except (serial.SerialException, OSError, ValueError) as exc:
            if self._kwargs.get("exclusive") and "exclusively lock" in str(exc):
                raise TransportError(
                    f"cannot open serial port {self.url!r}: {self._target} is in use by "
                    "another program (opened exclusively; exclusive=0 in the URL shares "
                    "it)") from None
            raise TransportError(f"cannot open serial port {self.url!r}: {exc}") from None
        self._port = port
        try:
            self._fd = port.fileno()
        except Exception:  # URL handlers without a file descriptor (loop://)
            self._fd = None

    def receive(self, deadline_monotonic: float) -> bytes | None:
        """Bytes that arrived before the deadline (at least one), or None."""
        port = self._require_open()
        try:
            if self._fd is not None:
                remaining = max(0.0, deadline_monotonic - time.monotonic())
                ready, _, _ = select.select([self._fd], [], [], remaining)
                if not ready:
                    return None
                data = port.read(max(1, port.in_waiting))
                if not data:  # readable but nothing: device gone
                    raise TransportError(f"serial port {self.url!r}: device disconnected")
                return data
            while True:
                remaining = deadline_monotonic - time.monotonic()
                port.timeout = max(0.0, remaining)
                data = port.read(1)
                if data:
                    waiting = port.in_waiting
                    return data + port.read(waiting) if waiting else data
                if remaining <= 0:
                    return None
        except (serial.SerialException, OSError) as exc:
            raise TransportError(f"serial port {self.url!r}: {exc}") from None

    def send(self, data: bytes) -> None:
        """Write ``data``; raises :class:`TransportError` on failure or write timeout."""
        port = self._require_open()
        try:
            port.write(data)
        except serial.SerialTimeoutException as exc:
            raise SendBufferFullError(f"serial port {self.url!r}: write timed out "
                                      f"({exc})") from None
        except (serial.SerialException, OSError) as exc:
            raise TransportError(f"serial port {self.url!r}: {exc}") from None

    def close(self) -> None:
        """Close the port (safe twice)."""
        port, self._port, self._fd = self._port, None, None
        if port is not None:
            try:
                port.close()
            except Exception:  # a vanished device may fail to close; it is closed anyway
                pass

    def _require_open(self) -> Any:
        if self._port is None:
            raise TransportError(f"serial port {self.url!r} is not open")
        return self._port
