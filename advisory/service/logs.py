"""How the ``run`` service speaks to people without ever waiting for them.

Log lines (stdlib :mod:`logging`, loggers ``advisory.*`` and captured Python warnings) go
through a :class:`logging.handlers.QueueHandler` into a bounded queue; crew cues and the
start-up caution go into a second bounded queue. One thread per stream takes lines off its
queue and writes them to the file descriptor (stderr for the log, stdout for the cues):

* nothing on the real-time path (the loop, the driver's main loop, the output writer)
  writes to a stream: it only puts a line on a queue, never blocking (``put_nowait``); a
  full queue drops the line and counts it;
* a stuck stream (a pipe nobody reads) blocks only its writer thread;
* a stream that is closed (``EBADF``, ``EPIPE``, or closed before the process started) is
  counted, never raised: every line that could not be written counts;
* :meth:`ServiceLog.close` waits for the writers at most a bounded time.

The count of lines lost either way is :attr:`ServiceLog.dropped`; the driver publishes it
as the service counter ``log_dropped`` (``advisory.schema.SERVICE_COUNTERS``).

Line format, one event per line, no colour (journald-friendly)::

    boom-advisory run: 2031-05-04T10:00:00.250Z warning: input lost: device vanished

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import datetime as _dt
import errno
import json
import logging
import logging.handlers
import os
import queue
import sys
import threading
import time
from typing import Any

from advisory.schema import SAFETY_CAUTION

PREFIX = "boom-advisory run"  #: first word of every log line
LOG_QUEUE_LINES = 1000  #: log lines waiting for the stderr writer at most
CUE_QUEUE_LINES = 200  #: lines waiting for the stdout writer at most
CLOSE_TIMEOUT_S = 1.0  #: longest wait for the writers at shutdown, s
#: Loggers whose records reach the service's log: the package's and Python's warnings.
LOGGER_NAMES = ("advisory", "py.warnings")

log = logging.getLogger("advisory.service")

#: How each record event reads for a person (stderr, journal); the record keeps the code
#: and fields, so rewording a line here never changes what a replay does.
_EVENT_TEXT = {
    "start": "start {settings}",
    "start_failed": "start failed: {reason}",
    "first_advisory": "first advisory out {after_s:.2f} s after start",
    "input_open": "input open: {url}",
    "input_open_failed": "input open failed: {reason}; retrying with backoff",
    "input_lost": "input lost: {reason}",
    "output_open": "output open: {url}",
    "output_open_failed": "output open failed: {reason}; retrying with backoff",
    "output_lost": "output lost: {reason}",
    "output_error": "output error: {reason}",
    "output_blocked": "output writer still blocked at shutdown",
    "internal_error": "internal error (going on): {reason}",
    "stopping": "stopping: {reason}",
    "stats": "{kind}",
    "shutdown": "shutdown",
    "note": "{text}",
    "source_refused": "input: refusing datagrams from {source} (input accepts {allowed}; "
                      "see --allow-from)",
    "profile_rejected": "profile refused, previous table kept: {reason}",
}
#: Log level of each record event (those not listed: INFO).
_EVENT_LEVEL = {
    "start_failed": logging.ERROR, "input_open_failed": logging.WARNING,
    "input_lost": logging.WARNING, "output_open_failed": logging.WARNING,
    "output_lost": logging.WARNING, "output_error": logging.ERROR,
    "output_blocked": logging.WARNING, "internal_error": logging.ERROR,
    "source_refused": logging.WARNING,
    "profile_rejected": logging.WARNING,
}
#: Log level of each status state's line.
_STATE_LEVEL = {"ok": logging.INFO, "degraded": logging.WARNING,
                "unavailable": logging.WARNING}


def event_text(code: str, fields: dict[str, Any]) -> str:
    """One line for a person describing a record event."""
    if code == "start":
        return "start " + json.dumps(fields.get("settings"), sort_keys=True, default=str)
    try:
        return _EVENT_TEXT[code].format(**fields)
    except (KeyError, ValueError, IndexError):
        return f"{code} {fields}"


def log_event(code: str, **fields: Any) -> None:
    """Log one record event at its level (never blocks; see the module notes)."""
    log.log(_EVENT_LEVEL.get(code, logging.INFO), "%s", event_text(code, fields))


def log_state(state: str, reason: str) -> None:
    """Log a change of the status state (``ok`` / ``degraded`` / ``unavailable``)."""
    log.log(_STATE_LEVEL.get(state, logging.WARNING), "status %s%s", state,
            f": {reason}" if reason else "")


def utc_text(utc_s: float) -> str:
    """ISO 8601 UTC with milliseconds and a ``Z``."""
    return _dt.datetime.fromtimestamp(utc_s, _dt.timezone.utc).isoformat(
        timespec="milliseconds").replace("+00:00", "Z")


def one_line(text: str) -> str:
    """``text`` with line breaks and NULs made spaces: one event is one line."""
    return text.replace("\r", " ").replace("\n", " ").replace("\x00", " ")


class _LineFormatter(logging.Formatter):
    def format(self, record: logging.LogRecord) -> str:
        return (f"{PREFIX}: {utc_text(record.created)} {record.levelname.lower()}: "
                f"{one_line(record.getMessage())}")


class LineWriter:
    """One thread writing text lines from a bounded queue to one file descriptor.

    Parameters
    ----------
    fd : int or None
        Where the lines go; None when the stream was closed before the process started
        (every line is then counted as lost).
    name : str
        Thread name.
    max_lines : int
        Queue length; a line that finds the queue full is dropped and counted.

    Attributes
    ----------
    dropped : int
        Lines dropped because the queue was full.
    failed : int
        Lines the descriptor refused (closed, broken pipe, any other write error).
    """

    def __init__(self, fd: int | None, name: str, max_lines: int) -> None:
        self.fd = fd
        self.queue: queue.Queue[str | logging.LogRecord | None] = queue.Queue(max_lines)
        self.dropped = 0
        self.failed = 0
        self._dead = fd is None
        self._count_lock = threading.Lock()
        self._thread = threading.Thread(target=self._run, name=name, daemon=True)

    @property
    def lost(self) -> int:
        """Lines not written, either way."""
        return self.dropped + self.failed

    def start(self) -> None:
        """Start the writer thread."""
        self._thread.start()

    def put(self, line: str) -> None:
        """Queue one line; never blocks (a full queue drops and counts it)."""
        try:
            self.queue.put_nowait(line)
        except queue.Full:
            self.count_drop()

    def count_drop(self) -> None:
        """Count one line dropped for a full queue (thread-safe)."""
        with self._count_lock:
            self.dropped += 1

    def _run(self) -> None:
        while True:
            item = self.queue.get()
            if item is None:
                return
            text = item if isinstance(item, str) else item.getMessage()
            self._write((text + "\n").encode("utf-8", "replace"))

    def _write(self, data: bytes) -> None:
        if self._dead or self.fd is None:
            self.failed += 1
            return
        try:
            view = memoryview(data)
            while view:
                n = os.write(self.fd, view)  # blocks only this thread on a stuck stream
                view = view[n:]
        except OSError as exc:
            self.failed += 1
            if exc.errno in (errno.EBADF, errno.EPIPE, errno.EINVAL):
                self._dead = True  # the reader is gone for good: stop trying

    def stop(self, deadline: float) -> bool:
        """Ask the thread to finish after the queued lines; wait until ``deadline``
        (monotonic, s). True when it finished."""
        for _ in range(3):
            try:
                self.queue.put_nowait(None)
                break
            except queue.Full:
                try:  # a stuck stream: make room for the stop marker
                    self.queue.get_nowait()
                    self.count_drop()
                except queue.Empty:
                    pass
        if self._thread.is_alive():
            self._thread.join(max(0.0, deadline - time.monotonic()))
        return not self._thread.is_alive()


class _DroppingQueueHandler(logging.handlers.QueueHandler):
    """A :class:`~logging.handlers.QueueHandler` that never blocks and never writes
    anywhere itself: a full queue or a failing record is counted on ``writer``."""

    def __init__(self, writer: LineWriter) -> None:
        super().__init__(writer.queue)  # type: ignore[arg-type]  # LogRecords and str lines
        self.writer = writer

    def enqueue(self, record: logging.LogRecord) -> None:
        try:
            self.queue.put_nowait(record)
        except queue.Full:
            self.writer.count_drop()

    def handleError(self, record: logging.LogRecord) -> None:  # noqa: N802 - stdlib name
        self.writer.count_drop()  # the default prints to stderr: never on this path


def _usable_fd(fd: int, stream: object) -> int | None:
    """``fd`` if the stream was open when the process started, else None.

    Python sets ``sys.stdout`` / ``sys.stderr`` to None when their descriptor was closed
    at start; that descriptor number may since belong to another file (a record, a
    socket), so nothing is written to it. A free descriptor is taken by ``/dev/null`` so
    no file opened later gets it.
    """
    try:
        os.fstat(fd)
    except OSError:
        try:
            null = os.open(os.devnull, os.O_WRONLY)
            if null != fd:
                os.dup2(null, fd)
                os.close(null)
        except OSError:
            pass
        return None
    return fd if stream is not None else None


class ServiceLog:
    """The service's log (stderr) and cue lines (stdout), each through its own queue.

    Parameters
    ----------
    level : str
        ``debug``, ``info``, ``warning`` or ``error``.
    err_fd, out_fd : int
        Descriptors of the log and of the cue lines (2 and 1).
    """

    def __init__(self, level: str = "info", err_fd: int = 2, out_fd: int = 1) -> None:
        self.err = LineWriter(_usable_fd(err_fd, sys.stderr), "boom-log", LOG_QUEUE_LINES)
        self.out = LineWriter(_usable_fd(out_fd, sys.stdout), "boom-cues", CUE_QUEUE_LINES)
        self.handler = _DroppingQueueHandler(self.err)
        self.handler.setFormatter(_LineFormatter())
        self.level = getattr(logging, level.upper())
        self._saved: list[tuple[logging.Logger, int, bool]] = []

    @property
    def dropped(self) -> int:
        """Lines lost on either stream (queue full or stream closed)."""
        return self.err.lost + self.out.lost

    def start(self) -> None:
        """Start both writers and route the ``advisory`` loggers and warnings to them."""
        self.err.start()
        self.out.start()
        logging.captureWarnings(True)
        for name in LOGGER_NAMES:
            lg = logging.getLogger(name)
            self._saved.append((lg, lg.level, lg.propagate))
            lg.setLevel(self.level)
            lg.propagate = False
            lg.addHandler(self.handler)

    def caution(self) -> None:
        """The advisory-only caution: first line on stdout, and in the log."""
        self.out.put(SAFETY_CAUTION)
        log.info("%s", SAFETY_CAUTION)

    def cue(self, line: str) -> None:
        """One crew-cue line on stdout (never blocks)."""
        self.out.put(one_line(line))

    def close(self, timeout_s: float = CLOSE_TIMEOUT_S) -> bool:
        """Unhook the loggers, let the writers finish; wait at most ``timeout_s`` in all.

        Returns True when both writers finished (False: a stream is stuck; its daemon
        thread ends with the process).
        """
        for lg, level, propagate in self._saved:
            lg.removeHandler(self.handler)
            lg.setLevel(level)
            lg.propagate = propagate
        self._saved.clear()
        logging.captureWarnings(False)
        deadline = time.monotonic() + timeout_s
        ok_err = self.err.stop(deadline)
        ok_out = self.out.stop(deadline)
        return ok_err and ok_out


__all__ = ["CLOSE_TIMEOUT_S", "LineWriter", "ServiceLog", "event_text", "log_event",
           "log_state", "one_line", "utc_text"]
