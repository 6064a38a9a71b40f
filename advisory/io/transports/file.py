"""Files and FIFOs as a byte stream: capture replay (input) and capture (output).

``file:///path/to/capture.bin`` (``file:relative/path`` also): input reads the file as a
byte stream (``follow=1`` keeps waiting for appended bytes, like ``tail -f``; ``chunk=N``
bytes per read); output appends (``mode=truncate`` to start afresh).

A FIFO (named pipe) is opened non-blocking, so neither end ever hangs the service:

* input: the open succeeds at once; until a writer comes, nothing arrives (the receive
  waits until its deadline). A writer that goes away is a lost link
  (:class:`TransportError` "FIFO writer closed"): the caller closes, reopens and waits
  for the next writer. A FIFO never reaches an end of input.
* output: with no reader yet the open fails with "no reader on FIFO" and
  :attr:`FileTransport.retry_open` is True (the caller retries with backoff); a full
  pipe drops the frame (:class:`SendBufferFullError`); a reader that goes away is a lost
  link.

Every write is checked: fewer bytes written than given (a full pipe, a file-size
limit, a full disk) is never taken as sent.
"""

from __future__ import annotations

import errno
import os
import select
import stat
import time
from urllib.parse import unquote

from advisory.io.transports.base import (
    BaseTransport,
    SendBufferFullError,
    TransportError,
    no_more_options,
    pop_flag,
    pop_number,
    split_url,
)

_FLAGS = {"append": os.O_WRONLY | os.O_CREAT | os.O_APPEND,
          "truncate": os.O_WRONLY | os.O_CREAT | os.O_TRUNC,
          "read": os.O_RDONLY}


class FileTransport(BaseTransport):
    """A file or FIFO as a byte-stream source (capture replay) or sink (capture).

    Parameters
    ----------
    url : str
        ``file:///abs/path`` or ``file:rel/path``; input option ``follow=1``, ``chunk=N``;
        output option ``mode=append|truncate``.
    role : str
        ``"input"`` or ``"output"``.

    Attributes
    ----------
    is_fifo : bool
        The path was a FIFO at the last open.
    retry_open : bool
        A failed open is worth retrying (a FIFO without a reader yet).
    at_eof : bool
        Input reached the end of a regular file (and does not follow).
    """

    is_stream = True

    def __init__(self, url: str, role: str) -> None:
        self.url = url
        self.role = role
        parts, q = split_url(url)
        self.path = unquote(parts.netloc + parts.path) if parts.netloc else unquote(parts.path)
        if not self.path:
            raise ValueError(f"{url}: no file named")
        self._follow = pop_flag(q, "follow", False, url) if role == "input" else False
        self._chunk = int(pop_number(q, "chunk", 65536, url, int)) if role == "input" else 0
        mode = q.pop("mode", "append") if role == "output" else "read"
        if mode not in _FLAGS:
            raise ValueError(f"{url}: mode must be append or truncate, got {mode!r}")
        self._flags = _FLAGS[mode]
        no_more_options(q, url)
        self._fd: int | None = None
        self.is_fifo = False
        self.retry_open = False
        self.at_eof = False

    def open(self) -> None:
        """Open the file (a FIFO non-blocking).

        Raises
        ------
        TransportError
            Cannot open; for an output FIFO without a reader, "no reader on FIFO" with
            :attr:`retry_open` set.
        """
        if self._fd is not None:
            return
        try:
            self.is_fifo = stat.S_ISFIFO(os.stat(self.path).st_mode)
        except OSError:
            self.is_fifo = False  # created by the open below (output) or refused there
        flags = self._flags | (os.O_NONBLOCK if self.is_fifo else 0)
        try:
            self._fd = os.open(self.path, flags | getattr(os, "O_CLOEXEC", 0), 0o644)
        except OSError as exc:
            if self.is_fifo and exc.errno == errno.ENXIO:
                self.retry_open = True
                raise TransportError(f"cannot open {self.url!r}: no reader on FIFO "
                                     f"{self.path} yet") from None
            raise TransportError(f"cannot open {self.url!r}: {exc}") from None
        self.retry_open = self.is_fifo and self.role == "output"
        self.at_eof = False

    def receive(self, deadline_monotonic: float) -> bytes | None:
        """The next chunk, or None at the end of a file or at the deadline.

        Raises
        ------
        TransportError
            Read failed, or a FIFO's writer closed it.
        """
        fd = self._require_open()
        if self.role != "input":
            raise TransportError(f"{self.url!r} is open for output")
        while True:
            if self.is_fifo:
                remaining = max(0.0, deadline_monotonic - time.monotonic())
                ready, _, _ = select.select([fd], [], [], remaining)
                if not ready:
                    return None
            try:
                data = os.read(fd, self._chunk)
            except BlockingIOError:
                continue  # woken without data; select again until the deadline
            except OSError as exc:
                raise TransportError(f"{self.url}: read failed: {exc}") from None
            if data:
                return data
            if self.is_fifo:
                raise TransportError(f"{self.url}: FIFO writer closed (waiting for a new one)")
            if not self._follow:
                self.at_eof = True
                return None
            remaining = deadline_monotonic - time.monotonic()
            if remaining <= 0:
                return None
            time.sleep(min(0.02, remaining))

    def send(self, data: bytes) -> None:
        """Write ``data`` in one ``write`` call.

        Raises
        ------
        SendBufferFullError
            A full FIFO took nothing or only part of ``data`` (the rest is dropped).
        TransportError
            The write failed or was short on a file (disk full, file-size limit), or a
            FIFO's reader went away.
        """
        fd = self._require_open()
        if self.role != "output":
            raise TransportError(f"{self.url!r} is open for input")
        try:
            n = os.write(fd, data)
        except BlockingIOError:
            raise SendBufferFullError(f"{self.url}: FIFO full, frame dropped") from None
        except BrokenPipeError:
            raise TransportError(f"{self.url}: FIFO reader closed") from None
        except OSError as exc:
            raise TransportError(f"{self.url}: write failed: {exc}") from None
        if n < len(data):
            if self.is_fifo:
                raise SendBufferFullError(f"{self.url}: FIFO full, {n} of {len(data)} "
                                          "bytes written")
            raise TransportError(f"{self.url}: short write, {n} of {len(data)} bytes "
                                 "written")

    def close(self) -> None:
        """Close the file (safe twice)."""
        fd, self._fd = self._fd, None
        if fd is not None:
            os.close(fd)

    def _require_open(self) -> int:
        if self._fd is None:
            raise TransportError(f"{self.url!r} is not open")
        return self._fd
