"""Transports: serial, UDP (unicast and multicast) and files, behind one small interface.

Every transport has ``open()``, ``receive(deadline_monotonic) -> bytes | None``,
``send(data)`` and ``close()`` (safe to call twice), and the attribute ``is_stream``:
stream transports (serial, file) return arbitrary chunks of a byte stream, to be split
by :class:`advisory.io.framing.StreamDeframer`; datagram transports (UDP) return one
datagram per call, to be checked by :func:`advisory.io.framing.parse_datagram`.
:class:`FramedLink` does that split and the matching framing on send.

One module per URL scheme (:mod:`~advisory.io.transports.serial`,
:mod:`~advisory.io.transports.udp`, :mod:`~advisory.io.transports.file`), each
documenting its URL options; the shared interface, errors and :class:`FramedLink` are in
:mod:`~advisory.io.transports.base`. This module keeps the registry that maps a URL
scheme to its transport class (:func:`register`, :func:`make_transport`,
:func:`open_transport`).

Receive waits at most until ``deadline_monotonic`` (a ``time.monotonic()`` value) and
returns None when nothing arrived. A link that is gone (cable pulled, device removed)
raises :class:`TransportError`; the caller closes, backs off and reopens.
"""

from __future__ import annotations

from advisory.io.transports.base import (
    ROLES,
    BaseTransport,
    FramedLink,
    SendBufferFullError,
    Transport,
    TransportError,
)
from advisory.io.transports.file import FileTransport
from advisory.io.transports.serial import SCHEMES as SERIAL_SCHEMES
from advisory.io.transports.serial import SerialTransport
from advisory.io.transports.udp import UdpTransport

_REGISTRY: dict[str, type[BaseTransport]] = {}


def register(scheme: str, cls: type[BaseTransport]) -> None:
    """Make ``cls(url, role)`` the transport for URLs of ``scheme`` (case-insensitive)."""
    _REGISTRY[scheme.lower()] = cls


register("udp", UdpTransport)
register("file", FileTransport)
for _scheme in SERIAL_SCHEMES:
    register(_scheme, SerialTransport)


def make_transport(url: str, role: str) -> BaseTransport:
    """The transport for ``url`` (not opened yet), looked up by its scheme.

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
    cls = _REGISTRY.get(scheme)
    if cls is None:
        raise ValueError(f"{url!r}: unknown transport scheme {scheme!r} (serial, udp, file "
                         "or a pyserial URL such as loop://)")
    return cls(url, role)  # type: ignore[call-arg]  # every registered class takes (url, role)


def open_transport(url: str, role: str) -> BaseTransport:
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


__all__ = [
    "ROLES", "BaseTransport", "FileTransport", "FramedLink", "SendBufferFullError",
    "SerialTransport", "Transport", "TransportError", "UdpTransport", "make_transport",
    "open_transport", "register",
]
