"""UDP unicast and multicast, one frame per datagram.

``udp://0.0.0.0:5600`` to receive (bind), ``udp://127.0.0.1:5601`` to send; multicast
groups ``udp://239.1.2.3:5600?iface=192.168.1.10&ttl=1&loop=1`` (``iface`` an IPv4
address or an interface name; receiving joins the group).
"""

from __future__ import annotations

import errno
import ipaddress
import select
import socket
import struct
import time

from advisory.io.framing import MAX_DATAGRAM
from advisory.io.transports.base import (
    BaseTransport,
    SendBufferFullError,
    TransportError,
    no_more_options,
    pop_flag,
    pop_number,
    split_url,
)

UDP_RECV_SIZE = 8192  #: larger than any valid datagram, so oversize ones are seen as such


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
