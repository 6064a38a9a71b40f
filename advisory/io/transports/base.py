"""What every transport shares: the interface, the errors, URL options, and FramedLink.

A transport moves bytes; :class:`FramedLink` puts payloads on it and takes them off:
COBS + CRC-32C framing on byte streams, one CRC-checked payload per datagram
(:mod:`advisory.io.framing`).
"""

from __future__ import annotations

from abc import ABC, abstractmethod
from typing import Any, Protocol
from urllib.parse import SplitResult, parse_qs, urlsplit

from advisory.io.framing import DatagramReader, StreamDeframer, datagram, frame_stream

ROLES = ("input", "output")


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


def split_url(url: str) -> tuple[SplitResult, dict[str, str]]:
    """The URL's parts and its query options (the last value of each), for popping."""
    parts = urlsplit(url)
    q = {k: v[-1] for k, v in parse_qs(parts.query, keep_blank_values=True).items()}
    return parts, q


def pop_flag(q: dict[str, str], key: str, default: bool, url: str) -> bool:
    """Remove option ``key`` from ``q``: 1/true/yes/on or 0/false/no/off, else ``default``."""
    v = q.pop(key, None)
    if v is None:
        return default
    if v.lower() in ("1", "true", "yes", "on"):
        return True
    if v.lower() in ("0", "false", "no", "off"):
        return False
    raise ValueError(f"{url}: option {key}={v!r} must be 0 or 1")


def pop_number(q: dict[str, str], key: str, default: float, url: str,
               kind: type = float) -> Any:
    """Remove option ``key`` from ``q`` as a ``kind`` (float or int), else ``default``."""
    v = q.pop(key, None)
    if v is None:
        return default
    try:
        return kind(v)
    except ValueError:
        raise ValueError(f"{url}: option {key}={v!r} must be a {kind.__name__}") from None


def no_more_options(q: dict[str, str], url: str) -> None:
    """ValueError naming the first option left in ``q`` (one no transport knows)."""
    if q:
        raise ValueError(f"{url}: unknown option {sorted(q)[0]!r}")


class BaseTransport(ABC):
    """Common base of the transports: context manager and ``repr``."""

    url: str
    is_stream: bool
    #: A failed open is worth retrying with backoff (a serial port, a FIFO without a
    #: reader yet); False: a failed first open is fatal to the caller.
    retry_open: bool = False

    @abstractmethod
    def open(self) -> None:
        """Open the link (idempotent)."""

    @abstractmethod
    def receive(self, deadline_monotonic: float) -> bytes | None:
        """Bytes received before the deadline, or None."""

    @abstractmethod
    def send(self, data: bytes) -> None:
        """Send ``data`` (already framed)."""

    @abstractmethod
    def close(self) -> None:
        """Close the link; safe to call more than once."""

    def __enter__(self) -> BaseTransport:
        self.open()
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def __repr__(self) -> str:
        return f"{type(self).__name__}({self.url!r})"


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
