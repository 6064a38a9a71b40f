"""Transports: serial, UDP (unicast and multicast) and files, behind one small interface.

Every transport has ``open()``, ``receive(deadline_monotonic) -> bytes | None``,
``send(data)`` and ``close()`` (safe to call twice), and the attribute ``is_stream``:
stream transports (serial, file) return arbitrary chunks of a byte stream, to be split
by :class:`advisory.io.messages.StreamDeframer`; datagram transports (UDP) return one
datagram per call, to be checked by :func:`advisory.io.messages.parse_datagram`.
:class:`FramedLink` does that split and the matching framing on send.

URLs (chosen on the command line, see :func:`open_transport`):

* ``serial:///dev/ttyUSB0?baud=115200`` (also ``parity=N|E|O``, ``bytesize=8``,
  ``stopbits=1``, ``rtscts=0``, ``xonxoff=0``, ``write_timeout=1.0``); any other URL
  that pyserial's ``serial_for_url`` accepts (``loop://``, ``socket://host:port``,
  ``rfc2217://...``) is handed to pyserial unchanged.
* ``udp://0.0.0.0:5600`` to receive (bind), ``udp://127.0.0.1:5601`` to send;
  multicast groups ``udp://239.1.2.3:5600?iface=192.168.1.10&ttl=1&loop=1`` (``iface``
  an IPv4 address or an interface name; receiving joins the group).
* ``file:///path/to/capture.bin`` (``file:relative/path`` also): input reads the file
  as a byte stream (``follow=1`` keeps waiting for appended bytes, like ``tail -f``);
  output appends (``mode=truncate`` to start afresh).

Receive waits at most until ``deadline_monotonic`` (a ``time.monotonic()`` value) and
returns None when nothing arrived. A link that is gone (cable pulled, device removed)
raises :class:`TransportError`; the caller closes, backs off and reopens.
"""

from __future__ import annotations

import errno
import ipaddress
import select
import socket
import struct
import time
from typing import Protocol
from urllib.parse import parse_qs, unquote, urlsplit

from advisory.io.messages import (
    MAX_DATAGRAM,
    DatagramReader,
    StreamDeframer,
    datagram,
    frame_stream,
)

ROLES = ("input", "output")
UDP_RECV_SIZE = 8192  #: larger than any valid datagram, so oversize ones are seen as such


class TransportError(Exception):
    """The link failed (cannot open, device gone, send failed); the message says which."""


class SendBufferFullError(TransportError):
    """The output could not take the data now (full socket buffer); the data is dropped."""


class Transport(Protocol):
    """The interface every transport offers."""

    url: str
    is_stream: bool

    def open(self) -> None:
        """Open the link (idempotent)."""

    def receive(self, deadline_monotonic: float) -> bytes | None:
        """Bytes received before the deadline, or None."""

    def send(self, data: bytes) -> None:
        """Send ``data`` (already framed)."""

    def close(self) -> None:
        """Close the link; safe to call more than once."""


def _query(url: str) -> tuple:
    parts = urlsplit(url)
    q = {k: v[-1] for k, v in parse_qs(parts.query, keep_blank_values=True).items()}
    return parts, q


def _flag(q: dict, key: str, default: bool, url: str) -> bool:
    v = q.pop(key, None)
    if v is None:
        return default
    if v.lower() in ("1", "true", "yes", "on"):
        return True
    if v.lower() in ("0", "false", "no", "off"):
        return False
    raise ValueError(f"{url}: option {key}={v!r} must be 0 or 1")


def _number(q: dict, key: str, default: float, url: str, kind: type = float) -> float:
    v = q.pop(key, None)
    if v is None:
        return default
    try:
        return kind(v)
    except ValueError:
        raise ValueError(f"{url}: option {key}={v!r} must be a {kind.__name__}") from None


def _no_more(q: dict, url: str) -> None:
    if q:
        raise ValueError(f"{url}: unknown option {sorted(q)[0]!r}")


class _Base:
    url: str
    is_stream: bool

    def __enter__(self):
        self.open()
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def __repr__(self) -> str:
        return f"{type(self).__name__}({self.url!r})"


# ------------------------------------------------------------------------------ serial

class SerialTransport(_Base):
    """A serial port through pyserial (real devices, pseudo-terminals, ``loop://``).

    Parameters
    ----------
    url : str
        ``serial:///dev/ttyUSB0?baud=115200`` or any pyserial URL such as ``loop://``.
    """

    is_stream = True

    def __init__(self, url: str) -> None:
        self.url = url
        self._port = None
        self._fd: int | None = None
        parts, q = _query(url)
        self._kwargs: dict = {}
        if parts.scheme == "serial":
            self._target = unquote(parts.netloc + parts.path)
            if not self._target:
                raise ValueError(f"{url}: no serial device named (serial:///dev/ttyX)")
            self._kwargs = {
                "baudrate": int(_number(q, "baud", 115200, url, int)),
                "parity": q.pop("parity", "N").upper(),
                "bytesize": int(_number(q, "bytesize", 8, url, int)),
                "stopbits": _number(q, "stopbits", 1, url),
                "rtscts": _flag(q, "rtscts", False, url),
                "xonxoff": _flag(q, "xonxoff", False, url),
                "write_timeout": _number(q, "write_timeout", 1.0, url),
                "exclusive": _flag(q, "exclusive", False, url),
            }
            if self._kwargs["stopbits"] == int(self._kwargs["stopbits"]):
                self._kwargs["stopbits"] = int(self._kwargs["stopbits"])
            if self._kwargs["parity"] not in ("N", "E", "O", "M", "S"):
                raise ValueError(f"{url}: parity must be N, E or O")
            _no_more(q, url)
        else:
            self._target = url  # pyserial's own URL, options and all
            self._kwargs = {"write_timeout": 1.0}

    def open(self) -> None:
        """Open the port; raises :class:`TransportError` when it cannot."""
        if self._port is not None:
            return
        import serial  # pyserial

        try:
            port = serial.serial_for_url(self._target, timeout=0, **self._kwargs)
        except (serial.SerialException, OSError, ValueError) as exc:
            raise TransportError(f"cannot open serial port {self.url!r}: {exc}") from None
        self._port = port
        try:
            self._fd = port.fileno()
        except Exception:  # URL handlers without a file descriptor (loop://)
            self._fd = None

    def receive(self, deadline_monotonic: float) -> bytes | None:
        """Bytes that arrived before the deadline (at least one), or None."""
        import serial

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
        import serial

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

    def _require_open(self):
        if self._port is None:
            raise TransportError(f"serial port {self.url!r} is not open")
        return self._port


# --------------------------------------------------------------------------------- UDP

class UdpTransport(_Base):
    """UDP unicast or multicast, one frame per datagram.

    Parameters
    ----------
    url : str
        ``udp://HOST:PORT[?iface=...&ttl=1&loop=1]``.
    role : str
        ``"input"``: bind to HOST:PORT (join the group if HOST is multicast);
        ``"output"``: send to HOST:PORT.
    """

    is_stream = False

    def __init__(self, url: str, role: str) -> None:
        self.url = url
        self.role = role
        parts, q = _query(url)
        host = parts.hostname
        try:
            port = parts.port
        except ValueError:
            port = None
        if not host or port is None:
            raise ValueError(f"{url}: expected udp://HOST:PORT")
        try:
            self._addr = ipaddress.IPv4Address(host)
        except ValueError:
            try:
                self._addr = ipaddress.IPv4Address(socket.gethostbyname(host))
            except OSError:
                raise ValueError(f"{url}: cannot resolve host {host!r}") from None
        self._port = port
        self._multicast = self._addr.is_multicast
        self._iface = q.pop("iface", None)
        self._ttl = int(_number(q, "ttl", 1, url, int))
        self._loop = _flag(q, "loop", True, url)
        _no_more(q, url)
        if role == "output" and self._addr.is_unspecified:
            raise ValueError(f"{url}: cannot send to {host}; name the receiver's address")
        self._sock: socket.socket | None = None

    def _iface_addr(self) -> tuple[str, int]:
        """(IPv4 address, interface index) for ``iface``; ("0.0.0.0", 0) when unset."""
        if not self._iface:
            return "0.0.0.0", 0
        try:
            ipaddress.IPv4Address(self._iface)
            return self._iface, 0
        except ValueError:
            try:
                return "0.0.0.0", socket.if_nametoindex(self._iface)
            except OSError:
                raise TransportError(f"{self.url}: no network interface {self._iface!r}") \
                    from None

    def open(self) -> None:
        """Create and bind (input) or configure (output) the socket."""
        if self._sock is not None:
            return
        sock = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
        try:
            sock.setblocking(False)
            host = str(self._addr)
            if self.role == "input":
                if self._multicast:
                    sock.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
                sock.bind((host, self._port))
                if self._multicast:
                    addr, index = self._iface_addr()
                    if index:  # struct ip_mreqn (Linux): group, address, ifindex
                        mreq = socket.inet_aton(host) + socket.inet_aton(addr) + struct.pack(
                            "@i", index)
                    else:  # struct ip_mreq: group, interface address
                        mreq = socket.inet_aton(host) + socket.inet_aton(addr)
                    sock.setsockopt(socket.IPPROTO_IP, socket.IP_ADD_MEMBERSHIP, mreq)
            elif self._multicast:
                addr, index = self._iface_addr()
                if index:
                    mreqn = socket.inet_aton("0.0.0.0") + socket.inet_aton(addr) + struct.pack(
                        "@i", index)
                    sock.setsockopt(socket.IPPROTO_IP, socket.IP_MULTICAST_IF, mreqn)
                else:
                    sock.setsockopt(socket.IPPROTO_IP, socket.IP_MULTICAST_IF,
                                    socket.inet_aton(addr))
                sock.setsockopt(socket.IPPROTO_IP, socket.IP_MULTICAST_TTL, self._ttl)
                sock.setsockopt(socket.IPPROTO_IP, socket.IP_MULTICAST_LOOP, int(self._loop))
        except OSError as exc:
            sock.close()
            raise TransportError(f"cannot open {self.url!r} for {self.role}: {exc}") from None
        self._sock = sock

    @property
    def local_address(self) -> tuple[str, int] | None:
        """The socket's bound (host, port), e.g. to learn an ephemeral port."""
        return None if self._sock is None else self._sock.getsockname()

    def receive(self, deadline_monotonic: float) -> bytes | None:
        """One datagram that arrived before the deadline, or None."""
        sock = self._require_open()
        while True:
            try:
                return sock.recv(UDP_RECV_SIZE)
            except BlockingIOError:
                pass
            except InterruptedError:
                continue
            except OSError as exc:
                if exc.errno == errno.ECONNREFUSED:  # stale ICMP from an earlier send
                    continue
                raise TransportError(f"{self.url}: receive failed: {exc}") from None
            remaining = deadline_monotonic - time.monotonic()
            if remaining <= 0:
                return None
            ready, _, _ = select.select([sock], [], [], remaining)
            if not ready:
                return None

    def send(self, data: bytes) -> None:
        """Send one datagram; :class:`SendBufferFullError` when the socket cannot take it."""
        sock = self._require_open()
        if len(data) > MAX_DATAGRAM:
            raise TransportError(f"{self.url}: datagram of {len(data)} bytes exceeds "
                                 f"{MAX_DATAGRAM}")
        try:
            sock.sendto(data, (str(self._addr), self._port))
        except (BlockingIOError, InterruptedError):
            raise SendBufferFullError(f"{self.url}: send buffer full, datagram dropped") from None
        except OSError as exc:
            if exc.errno in (errno.ENOBUFS, errno.EAGAIN):
                raise SendBufferFullError(f"{self.url}: {exc}, datagram dropped") from None
            raise TransportError(f"{self.url}: send failed: {exc}") from None

    def close(self) -> None:
        """Close the socket (safe twice)."""
        sock, self._sock = self._sock, None
        if sock is not None:
            sock.close()

    def _require_open(self) -> socket.socket:
        if self._sock is None:
            raise TransportError(f"{self.url!r} is not open")
        return self._sock


# -------------------------------------------------------------------------------- file

class FileTransport(_Base):
    """A file as a byte-stream source (capture replay) or sink (capture).

    Parameters
    ----------
    url : str
        ``file:///abs/path`` or ``file:rel/path``; input option ``follow=1``, ``chunk=N``;
        output option ``mode=append|truncate``.
    role : str
        ``"input"`` or ``"output"``.
    """

    is_stream = True

    def __init__(self, url: str, role: str) -> None:
        self.url = url
        self.role = role
        parts, q = _query(url)
        self.path = unquote(parts.netloc + parts.path) if parts.netloc else unquote(parts.path)
        if not self.path:
            raise ValueError(f"{url}: no file named")
        self._follow = _flag(q, "follow", False, url) if role == "input" else False
        self._chunk = int(_number(q, "chunk", 65536, url, int)) if role == "input" else 0
        mode = q.pop("mode", "append") if role == "output" else "read"
        if mode not in ("append", "truncate", "read"):
            raise ValueError(f"{url}: mode must be append or truncate, got {mode!r}")
        self._mode = {"append": "ab", "truncate": "wb", "read": "rb"}[mode]
        _no_more(q, url)
        self._f = None
        self.at_eof = False  #: input reached the end of the file (and does not follow)

    def open(self) -> None:
        """Open the file."""
        if self._f is not None:
            return
        try:
            self._f = open(self.path, self._mode, buffering=0)  # noqa: SIM115
        except OSError as exc:
            raise TransportError(f"cannot open {self.url!r}: {exc}") from None
        self.at_eof = False

    def receive(self, deadline_monotonic: float) -> bytes | None:
        """The next chunk of the file, or None at its end (after waiting if following)."""
        f = self._require_open()
        if self.role != "input":
            raise TransportError(f"{self.url!r} is open for output")
        while True:
            try:
                data = f.read(self._chunk)
            except OSError as exc:
                raise TransportError(f"{self.url}: read failed: {exc}") from None
            if data:
                return data
            if not self._follow:
                self.at_eof = True
                return None
            remaining = deadline_monotonic - time.monotonic()
            if remaining <= 0:
                return None
            time.sleep(min(0.02, remaining))

    def send(self, data: bytes) -> None:
        """Append ``data`` to the file."""
        f = self._require_open()
        if self.role != "output":
            raise TransportError(f"{self.url!r} is open for input")
        try:
            f.write(data)
        except OSError as exc:
            raise TransportError(f"{self.url}: write failed: {exc}") from None

    def close(self) -> None:
        """Close the file (safe twice)."""
        f, self._f = self._f, None
        if f is not None:
            f.close()

    def _require_open(self):
        if self._f is None:
            raise TransportError(f"{self.url!r} is not open")
        return self._f


# ----------------------------------------------------------------------------- factory

def make_transport(url: str, role: str) -> SerialTransport | UdpTransport | FileTransport:
    """The transport for ``url`` (not opened yet).

    Raises
    ------
    ValueError
        Unknown scheme, bad role or bad option; the message names the URL.
    """
    if role not in ROLES:
        raise ValueError(f"role must be one of {ROLES}, got {role!r}")
    if not isinstance(url, str) or "://" not in url and not url.startswith("file:"):
        raise ValueError(f"{url!r} is not a transport URL (serial://, udp://, file://, "
                         "loop://)")
    scheme = url.split(":", 1)[0].lower()
    if scheme == "udp":
        return UdpTransport(url, role)
    if scheme == "file":
        return FileTransport(url, role)
    if scheme in ("serial", "loop", "socket", "rfc2217", "spy", "alt", "hwgrep", "cp2110"):
        return SerialTransport(url)
    raise ValueError(f"{url!r}: unknown transport scheme {scheme!r} (serial, udp, file or a "
                     "pyserial URL such as loop://)")


def open_transport(url: str, role: str) -> SerialTransport | UdpTransport | FileTransport:
    """Make and open the transport chosen by ``url`` for ``role`` ("input"/"output").

    Raises
    ------
    ValueError
        Bad URL.
    TransportError
        The link cannot be opened.
    """
    t = make_transport(url, role)
    t.open()
    return t


# ------------------------------------------------------------------------------- link

class FramedLink:
    """Frame payloads onto a transport and back: COBS+CRC on streams, CRC on datagrams.

    Parameters
    ----------
    transport : Transport
        An opened (or to-be-opened) transport.

    Attributes
    ----------
    counters : dict of str to int
        Link counters (``frames_ok``, ``bad_crc``, ``cobs_error``, ``too_short``,
        ``oversize``) plus ``sent`` and ``send_dropped``.
    """

    def __init__(self, transport: Transport) -> None:
        self.transport = transport
        self._reader = StreamDeframer() if transport.is_stream else DatagramReader()
        self._extra = {"sent": 0, "send_dropped": 0}

    @property
    def counters(self) -> dict[str, int]:
        """Current counters (a fresh dict)."""
        return {**self._reader.counters, **self._extra}

    def receive(self, deadline_monotonic: float) -> list[bytes]:
        """Payloads completed by the bytes received before the deadline (maybe empty)."""
        data = self.transport.receive(deadline_monotonic)
        if not data:
            return []
        return self._reader.feed(data)

    def send(self, payload: bytes) -> bool:
        """Frame and send one payload; False when the output dropped it (counted).

        Raises
        ------
        TransportError
            The link itself failed (other than a full buffer).
        """
        data = frame_stream(payload) if self.transport.is_stream else datagram(payload)
        try:
            self.transport.send(data)
        except SendBufferFullError:
            self._extra["send_dropped"] += 1
            return False
        self._extra["sent"] += 1
        return True

    def reset(self) -> None:
        """Forget a partial frame (after the transport was reopened)."""
        if isinstance(self._reader, StreamDeframer):
            self._reader.reset()

    def close(self) -> None:
        """Close the transport (safe twice)."""
        self.transport.close()


__all__ = [
    "FileTransport", "FramedLink", "SendBufferFullError", "SerialTransport", "Transport",
    "TransportError", "UdpTransport", "make_transport", "open_transport",
]
