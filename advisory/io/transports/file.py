"""Files as a byte stream: capture replay (input) and capture (output).

``file:///path/to/capture.bin`` (``file:relative/path`` also): input reads the file as a
byte stream (``follow=1`` keeps waiting for appended bytes, like ``tail -f``; ``chunk=N``
bytes per read); output appends (``mode=truncate`` to start afresh).
"""

from __future__ import annotations

import time
from typing import IO
from urllib.parse import unquote

from advisory.io.transports.base import (
    BaseTransport,
    TransportError,
    no_more_options,
    pop_flag,
    pop_number,
    split_url,
)


class FileTransport(BaseTransport):
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
        parts, q = split_url(url)
        self.path = unquote(parts.netloc + parts.path) if parts.netloc else unquote(parts.path)
        if not self.path:
            raise ValueError(f"{url}: no file named")
        self._follow = pop_flag(q, "follow", False, url) if role == "input" else False
        self._chunk = int(pop_number(q, "chunk", 65536, url, int)) if role == "input" else 0
        mode = q.pop("mode", "append") if role == "output" else "read"
        if mode not in ("append", "truncate", "read"):
            raise ValueError(f"{url}: mode must be append or truncate, got {mode!r}")
        self._mode = {"append": "ab", "truncate": "wb", "read": "rb"}[mode]
        no_more_options(q, url)
        self._f: IO[bytes] | None = None
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

    def _require_open(self) -> IO[bytes]:
        if self._f is None:
            raise TransportError(f"{self.url!r} is not open")
        return self._f
