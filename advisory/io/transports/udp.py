"""UDP unicast and multicast, one frame per datagram, and who may send to an input.

``udp://127.0.0.1:5600`` to receive (bind to one interface's address, never 0.0.0.0 in
an installation), ``udp://127.0.0.1:5601`` to send; multicast groups
``udp://239.1.2.3:5600?iface=192.168.1.10&ttl=1&loop=1`` (``iface`` an IPv4 address or
an interface name; receiving joins the group).

An input admits datagrams from one source only (:class:`SourceGate`,
``docs/interface.md`` section 10): the sources named by ``--allow-from``, or else the
first source (address and port) whose datagram passes its CRC. Others are counted
(``source_refused``) and never reach the loop or the record. With ``--auth-key`` the
datagrams must also be authenticated (:class:`advisory.io.framing.AuthVerifier`).
"""

from __future__ import annotations

import errno
import ipaddress
import math
import select
import socket
import struct
import time
from dataclasses import dataclass, field

from advisory.io.framing import MAX_DATAGRAM, AuthVerifier, parse_datagram
from advisory.io.messages import FrameError
from advisory.io.transports.base import (
    BaseTransport,
    SendBufferFullError,
    TransportError,
    no_more_options,
    pop_flag,
    pop_number,
    split_url,
)
from advisory.schema import MAX_LOGGED_SOURCES

UDP_RECV_SIZE = 8192  #: larger than any valid datagram, so oversize ones are seen as such
#: A refused source is named in the status for this long after its last datagram, s
#: (twice the heartbeat: engineering choice, no source).
REFUSED_NOTE_S = 2.0


@dataclass(frozen=True)
class AllowedSource:
    """One ``--allow-from`` entry: an IPv4 address, and a port or None for any port."""

    host: str
    port: int | None = None

    def matches(self, host: str, port: int) -> bool:
        """True when a datagram from ``host:port`` is allowed by this entry."""
        return host == self.host and (self.port is None or port == self.port)

    def __str__(self) -> str:
        return self.host if self.port is None else f"{self.host}:{self.port}"


def parse_allow_from(text: str) -> tuple[AllowedSource, ...]:
    """``ADDR[:PORT][,ADDR[:PORT]...]`` as entries.

    Raises
    ------
    ValueError
        One line naming ``--allow-from`` and the bad entry.
    """
    out = []
    for item in (x.strip() for x in str(text).split(",")):
        host, _, port_text = item.partition(":")
        try:
            addr = ipaddress.IPv4Address(host)
            port = int(port_text) if port_text else None
            if port is not None and not 1 <= port <= 65535:
                raise ValueError
        except ValueError:
            raise ValueError(f"--allow-from: {item!r} must be an IPv4 address, optionally "
                             f"with :PORT (1..65535)") from None
        if addr.is_unspecified or addr.is_multicast:
            raise ValueError(f"--allow-from: {item!r} is not a sender's address")
        out.append(AllowedSource(str(addr), port))
    return tuple(out)


@dataclass
class SourceGate:
    """Who may send to a UDP input: the allowed sources, or the first one seen.

    Without ``allowed``, the first source (address and port) whose datagram passes its
    CRC is locked in; before that, datagrams from anyone pass (bad ones are counted by
    the reader and lock nothing). A refused datagram is counted; each new refused source
    is queued once in :attr:`new_sources` for a log line (at most
    :data:`advisory.schema.MAX_LOGGED_SOURCES`). A second source is never accepted
    without ``--allow-from``, even when the locked one has gone silent.
    """

    allowed: tuple[AllowedSource, ...] = ()
    locked: tuple[str, int] | None = None
    refused: int = 0
    new_sources: list[str] = field(default_factory=list)
    last_refused: str = ""
    last_refused_t: float = -math.inf
    _seen: set[str] = field(default_factory=set)

    def admit(self, data: bytes, host: str, port: int, now: float) -> bool:
        """True when a datagram from ``host:port`` may pass (refusals are counted)."""
        if self.allowed:
            ok = any(a.matches(host, port) for a in self.allowed)
        elif self.locked is None:
            try:
                parse_datagram(data)
            except FrameError:
                return True
            self.locked = (host, port)
            return True
        else:
            ok = self.locked == (host, port)
        if ok:
            return True
        self.refused += 1
        name = f"{host}:{port}"
        self.last_refused, self.last_refused_t = name, now
        if name not in self._seen and len(self._seen) <= MAX_LOGGED_SOURCES:
            self._seen.add(name)
            self.new_sources.append(name if len(self._seen) <= MAX_LOGGED_SOURCES
                                    else "further sources (no more lines)")
        return False

    @property
    def allowed_text(self) -> str:
        """Who is allowed, for log lines and the status."""
        if self.allowed:
            return ",".join(str(a) for a in self.allowed)
        return "first source" if self.locked is None else f"{self.locked[0]}:{self.locked[1]}"

    def note(self, now: float) -> str:
        """A status note while a refused source is sending (else ``""``)."""
        if now - self.last_refused_t > REFUSED_NOTE_S:
            return ""
        return (f"refusing datagrams from {self.last_refused} (input accepts "
                f"{self.allowed_text}; see --allow-from)")


class UdpTransport(BaseTransport):
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
        parts, q = split_url(url)
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
        self._ttl = int(pop_number(q, "ttl", 1, url, int))
        self._loop = pop_flag(q, "loop", True, url)
        no_more_options(q, url)
        if role == "output" and self._addr.is_unspecified:
            raise ValueError(f"{url}: cannot send to {host}; name the receiver's address")
        self._sock: socket.socket | None = None
        #: Who may send (inputs): set by the service; None admits every source.
        self.gate: SourceGate | None = None
        #: Authenticated frames only (inputs), when set.
        self.auth: AuthVerifier | None = None

    @property
    def trust_counters(self) -> dict[str, int]:
        """``source_refused`` and the authentication counters (service counters)."""
        out = {"source_refused": self.gate.refused if self.gate is not None else 0}
        if self.auth is not None:
            out.update(self.auth.counters)
        return out

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
        """One admitted datagram that arrived before the deadline, or None.

        Datagrams the :attr:`gate` or :attr:`auth` refuse are counted and skipped.
        """
        sock = self._require_open()
        while True:
            try:
                data, src = sock.recvfrom(UDP_RECV_SIZE)
                if self.auth is None and self.gate is None:
                    return data
                now = time.monotonic()
                if self.auth is not None and not self.auth.admit_datagram(data, now):
                    continue
                if self.gate is not None and not self.gate.admit(data, src[0], src[1], now):
                    continue
                return data
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
