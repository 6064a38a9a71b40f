"""The service's two links: the input with reconnect and backoff, and the output written
from a bounded queue by its own thread.

* Input (:class:`InputLink`): any transport URL (``docs/interface.md`` section 12). A
  serial port that fails (cable pulled, adapter unplugged, absent at start) is closed and
  reopened with exponential backoff (0.1 s doubling to 2 s). A UDP or file input that
  cannot be opened at start is a fatal error (the caller exits 1). A FIFO input opens
  at once (non-blocking); its writer going away is a lost link, reopened the same way.
* Output (:class:`OutputPublisher`): a full or stuck output never blocks the loop; when
  the queue is full the oldest frame is dropped and counted (``output_dropped``). A
  serial output that fails, or a FIFO output without a reader yet, is reopened the same
  way as the input.
* Freshness: a frame older than its step (a frame published at least half a step
  period, ``max_age_s``, later is already waiting) is dropped and counted, never sent;
  on a terminal output (serial port, pseudo-terminal) the bytes of earlier frames still
  queued in the kernel when the next frame is written (the receiver stopped reading, or
  flow control holds the line) are discarded with ``tcflush(TCOFLUSH)`` first, so after
  a stall the receiver gets the latest frames, not a backlog.

Both report what happens to them through ``on_event(code, **fields)`` with the record's
event codes (``advisory.schema.EVENT_FIELDS``); neither writes to a stream itself.
"""

from __future__ import annotations

import fcntl
import math
import os
import queue
import select
import socket
import struct
import termios
import threading
import time
from collections.abc import Callable
from typing import Any

from advisory.io.transports import (
    FramedLink,
    SendBufferFullError,
    TransportError,
    UdpTransport,
    make_transport,
)

#: Receives one link event: its code and fields (``advisory.schema.EVENT_FIELDS``).
EventSink = Callable[..., Any]

BACKOFF_START_S = 0.1  #: first reconnect delay, s
BACKOFF_MAX_S = 2.0  #: longest reconnect delay, s
OUTPUT_QUEUE = 32  #: output frames waiting for the writer thread at most (about 3 s)
UDP_RCVBUF_BYTES = 4 << 20  #: receive buffer asked for on UDP inputs (kernel may cap it)
#: Device major numbers of Unix98 pseudo-terminal slaves (Linux ``devices.txt``; value
#: from memory): the kernel reports no output queue for them (``TIOCOUTQ`` is 0).
PTY_SLAVE_MAJORS = range(136, 144)


def no_event(code: str, **fields: Any) -> None:
    """Event sink until the service exists."""


class InputLink:
    """The input transport with reconnect and exponential backoff.

    Parameters
    ----------
    url : str
        Transport URL (``docs/interface.md`` section 12).
    on_event : callable
        Called as ``on_event(code, **fields)`` for each link event (opened, lost,
        open failed).
    """

    def __init__(self, url: str, on_event: EventSink = no_event) -> None:
        self.url = url
        self.transport = make_transport(url, "input")
        self.is_stream = self.transport.is_stream
        self.retry = self.transport.retry_open
        self.up = False
        self.reason = "not opened yet"
        self.next_try = -math.inf
        self.backoff = BACKOFF_START_S
        self.lost = 0
        self.reopened = 0
        self.on_event = on_event
        self._last_error = ""

    def try_open(self, now: float) -> bool:
        """Open when the backoff allows; True when the link is up afterwards.

        Raises
        ------
        TransportError
            The first open of a non-serial input failed (nothing to wait for).
        """
        if self.up:
            return True
        if now < self.next_try:
            return False
        try:
            self.transport.open()
        except TransportError as exc:
            if not self.retry and self.lost == 0 and self.reopened == 0:
                raise
            self.reason = str(exc)
            if self.reason != self._last_error:
                self.on_event("input_open_failed", reason=str(exc))
                self._last_error = self.reason
            self.next_try = now + self.backoff
            self.backoff = min(self.backoff * 2.0, BACKOFF_MAX_S)
            return False
        if isinstance(self.transport, UdpTransport):
            _enlarge_receive_buffer(self.transport)
        if self.lost:
            self.reopened += 1
        self.up = True
        self.reason = ""
        self._last_error = ""
        self.backoff = BACKOFF_START_S
        self.on_event("input_open", url=self.url)
        return True

    def receive(self, deadline: float) -> bytes | None:
        """Bytes before the deadline, or None; a failure marks the link down."""
        try:
            data = self.transport.receive(deadline)
        except TransportError as exc:
            self.mark_lost(str(exc))
            return None
        gate = getattr(self.transport, "gate", None)
        while gate is not None and gate.new_sources:  # one event per new refused source
            self.on_event("source_refused", source=gate.new_sources.pop(0),
                          allowed=gate.allowed_text)
        return data

    @property
    def trust_counters(self) -> dict[str, int]:
        """Refused sources and authentication failures (UDP inputs; else empty)."""
        return dict(getattr(self.transport, "trust_counters", {}))

    def trust_note(self, now: float) -> str:
        """A status note naming a refused source that is sending now (else ``""``)."""
        gate = getattr(self.transport, "gate", None)
        return gate.note(now) if gate is not None else ""

    def mark_lost(self, reason: str) -> None:
        """Close the link and schedule a reopen."""
        self.transport.close()
        self.up = False
        self.lost += 1
        self.reason = reason
        self.next_try = time.monotonic() + BACKOFF_START_S
        self.backoff = BACKOFF_START_S * 2.0
        self.on_event("input_lost", reason=reason)

    @property
    def at_eof(self) -> bool:
        """A file input reached its end (and does not follow)."""
        return bool(getattr(self.transport, "at_eof", False))

    def close(self) -> None:
        """Close (safe twice)."""
        self.transport.close()


def _enlarge_receive_buffer(transport: UdpTransport) -> None:
    """Ask for a larger socket receive buffer so bursts survive a slow step."""
    sock = getattr(transport, "_sock", None)
    if sock is not None:
        try:
            sock.setsockopt(socket.SOL_SOCKET, socket.SO_RCVBUF, UDP_RCVBUF_BYTES)
        except OSError:
            pass


# ----------------------------------------------------------------------------- output

class OutputPublisher:
    """Writes output payloads from a bounded queue on its own thread.

    ``publish`` never blocks: when the queue is full the oldest frame is dropped and
    counted.
    The writer frames each payload for the transport; a full transport
    (:class:`SendBufferFullError`) drops that frame, a failed one is closed and
    reopened with backoff (frames meanwhile are dropped). After a failed write on a
    byte stream the next frame is preceded by an extra 0x00 so a torn frame costs the
    receiver only itself (ICD section 9).

    Attributes
    ----------
    dropped : int
        Frames not sent (queue full, transport full, link down).
    errors : int
        Output link failures.
    sent : int
    """

    def __init__(self, url: str, on_event: EventSink = no_event,
                 max_age_s: float | None = None) -> None:
        self.url = url
        self.transport = make_transport(url, "output")
        self.link = FramedLink(self.transport)
        self.max_age_s = max_age_s
        self.dropped = 0
        self.stale = 0
        self.flushed = 0
        self.errors = 0
        self.sent = 0
        self._q: queue.Queue[tuple[bytes, float] | None] = queue.Queue(maxsize=OUTPUT_QUEUE)
        self._newest = -math.inf  #: monotonic time of the newest frame published, s
        self.on_event = on_event
        self._up = False
        self._resync = False
        self._thread: threading.Thread | None = None
        self._next_try = -math.inf
        self._backoff = BACKOFF_START_S

    def open(self) -> None:
        """Open the output; a serial output that fails is retried by the writer.

        Raises
        ------
        TransportError
            An output that is not worth retrying (not a serial port, not a FIFO waiting
            for its reader) cannot be opened.
        """
        try:
            self.transport.open()
            self._up = True
        except TransportError as exc:
            if not self.transport.retry_open:  # serial ports, FIFOs without a reader
                raise
            self.on_event("output_open_failed", reason=str(exc))
        self._thread = threading.Thread(target=self._run, name="boom-output", daemon=True)
        self._thread.start()

    def publish(self, payload: bytes) -> None:
        """Queue one payload for sending; never blocks.

        When the queue is full the oldest waiting frame is dropped (and counted), so what
        reaches a display after a stall is the latest, not a backlog.
        """
        item = (payload, time.monotonic())
        self._newest = item[1]
        for _ in range(2):
            try:
                self._q.put_nowait(item)
                return
            except queue.Full:
                try:
                    self._q.get_nowait()
                    self.dropped += 1
                except queue.Empty:
                    pass
        self.dropped += 1

    def _run(self) -> None:
        while True:
            item = self._q.get()
            if item is None:
                return
            payload, queued = item
            if self.max_age_s is not None and self._newest - queued >= 0.5 * self.max_age_s:
                self.stale += 1  # a later step's frame is waiting: never send the older
                self.dropped += 1
                continue
            if not self._up and not self._reopen():
                self.dropped += 1
                continue
            try:
                self._flush_backlog()
                if self._resync and self.transport.is_stream:
                    self.transport.send(b"\x00")
                self._resync = False
                if self.link.send(payload):
                    self.sent += 1
                else:
                    self.dropped += 1
                    self._resync = True
            except SendBufferFullError:
                self.dropped += 1
                self._resync = True
            except TransportError as exc:
                self.errors += 1
                self.dropped += 1
                self._up = False
                self.transport.close()
                self._next_try = time.monotonic() + self._backoff
                self.on_event("output_lost", reason=str(exc))
            except Exception as exc:  # noqa: BLE001 - the writer must not die
                self.errors += 1
                self.dropped += 1
                self.on_event("output_error", reason=f"{type(exc).__name__}: {exc}")

    def _flush_backlog(self) -> None:
        """On a terminal output, discard what earlier frames left queued in the kernel.

        A serial port reports its queued bytes (``TIOCOUTQ``); a pseudo-terminal reports
        none, so its queue is flushed before every frame (a receiver that reads keeps it
        empty: only a backlog is lost, and a full one is counted as a drop). Whatever may
        have been cut is followed by an extra 0x00 (ICD section 9).
        """
        fd = getattr(self.transport, "_fd", None)  # serial transports only
        if fd is None or not self.transport.is_stream:
            return
        try:
            if not os.isatty(fd):
                return
            pty = os.major(os.fstat(fd).st_rdev) in PTY_SLAVE_MAJORS
            pending = struct.unpack("i", fcntl.ioctl(fd, termios.TIOCOUTQ, b"\0" * 4))[0]
            full = pty and not select.select([], [fd], [], 0.0)[1]
            if pending > 0 or pty:
                termios.tcflush(fd, termios.TCOFLUSH)
                self._resync = True
            if pending > 0 or full:  # at least one earlier frame was never delivered
                self.flushed += 1
                self.dropped += 1
        except OSError:
            pass  # not a terminal after all, or closed: the write says what is wrong

    def _reopen(self) -> bool:
        now = time.monotonic()
        if now < self._next_try:
            return False
        try:
            self.transport.open()
        except TransportError:
            self._next_try = now + self._backoff
            self._backoff = min(self._backoff * 2.0, BACKOFF_MAX_S)
            return False
        self._up = True
        self._resync = True
        self._backoff = BACKOFF_START_S
        self.on_event("output_open", url=self.url)
        return True

    def close(self, timeout_s: float = 1.0) -> None:
        """Send what is queued (at most ``timeout_s``), stop the writer, close (twice-safe)."""
        th, self._thread = self._thread, None
        if th is not None:
            deadline = time.monotonic() + timeout_s
            while True:
                try:
                    self._q.put(None, timeout=max(0.0, deadline - time.monotonic()))
                    break
                except queue.Full:
                    try:  # stuck output: make room for the stop marker
                        self._q.get_nowait()
                        self.dropped += 1
                    except queue.Empty:
                        pass
            th.join(max(0.0, deadline - time.monotonic()) + 0.1)
            if th.is_alive():  # a blocked write; the daemon thread dies with the process
                self.on_event("output_blocked")
        self.link.close()


__all__ = ["BACKOFF_MAX_S", "BACKOFF_START_S", "OUTPUT_QUEUE", "EventSink", "InputLink",
           "OutputPublisher", "no_event"]
