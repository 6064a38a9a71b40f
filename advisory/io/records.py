"""Append-only record file of every input frame and every output, with receive times.

File layout (all integers and floats big-endian; the ICD repeats it):

File header, 24 bytes::

    magic        8 bytes   8B 42 4F 4F 4D 52 45 43   ("\\x8bBOOMREC")
    version      uint16    2 (1: events were UTF-8 text lines; still read)
    flags        uint16    0 (reserved)
    created_utc  float64   UTC seconds since 1970 when the file was started
    header_crc   uint32    CRC-32C of the 20 bytes above

Each record, 28 bytes + data::

    sync         2 bytes   A5 5A
    length       uint32    number of data bytes (at most MAX_RECORD_DATA)
    kind         uint8     1 input frame, 2 output frame, 3 raw input bytes, 4 event
    channel      uint8     which link (0 unless the caller numbers them)
    utc_s        float64   UTC receive (or send) time, s since 1970
    mono_s       float64   time.monotonic() at receive (or send), s
    data         length bytes (a frame payload without its CRC, raw bytes, or an event:
                 a MessagePack map with ``code`` and the fields ``advisory.schema.EVENT_FIELDS``
                 lists for it; in version 1 a UTF-8 text line)
    crc          uint32    CRC-32C of everything from sync through data

Each record goes to the operating system in one ``write`` call and the file is fsync'ed
at most every ``fsync_interval_s``, so a power cut can leave at most a torn last
record. :class:`RecordReader` reports and skips a torn tail and resynchronises on the
sync bytes (checked by CRC) after any damaged region inside the file; appending to a
file with a torn tail is safe for the same reason.
"""

from __future__ import annotations

import os
import struct
import threading
import time
from pathlib import Path
from typing import Any

from advisory.io.crc32c import crc32c
from advisory.io.record_format import (
    HEADER,
    HEADER_LEN,
    KIND_EVENT,
    KIND_INPUT,
    KIND_OUTPUT,
    KIND_RAW_INPUT,
    KINDS,
    MAGIC,
    MAX_RECORD_DATA,
    READABLE_VERSIONS,
    RECORD_HEAD,
    RECORD_OVERHEAD,
    SYNC,
    VERSION,
    Event,
    RecordFormatError,
    check_header,
    decode_event,
    encode_event,
    header_bytes,
)
from advisory.io.record_reader import ReadReport, Record, RecordReader, read_records

__all__ = [
    "HEADER", "HEADER_LEN", "KINDS", "KIND_EVENT", "KIND_INPUT", "KIND_OUTPUT",
    "KIND_RAW_INPUT", "MAGIC", "MAX_RECORD_DATA", "READABLE_VERSIONS", "RECORD_HEAD",
    "RECORD_OVERHEAD", "SYNC", "VERSION", "Event", "ReadReport", "Record", "RecordFormatError",
    "RecordReader", "Recorder", "decode_event", "encode_event", "encode_record",
    "read_records",
]

def _write_all(fd: int, data: bytes, size: int) -> int:
    """Write ``data`` in one call at the end of a file of ``size`` bytes; the new size.

    Raises
    ------
    OSError
        The write failed or was short (the torn piece is cut off again when possible).
    """
    n = os.write(fd, data)
    if n != len(data):
        try:
            os.ftruncate(fd, size)
        except OSError:
            pass  # the reader skips a torn tail anyway
        raise OSError(f"short write: {n} of {len(data)} bytes (disk full or file too large)")
    return size + n


def encode_record(kind: int, data: bytes, utc_s: float, mono_s: float,
                  channel: int = 0) -> bytes:
    """The bytes of one record (see the module docstring)."""
    if not 0 <= kind <= 255 or not 0 <= channel <= 255:
        raise ValueError(f"record kind {kind!r} / channel {channel!r} must be 0..255")
    if len(data) > MAX_RECORD_DATA:
        raise ValueError(f"record data of {len(data)} bytes exceeds {MAX_RECORD_DATA}")
    body = RECORD_HEAD.pack(SYNC, len(data), kind, channel, utc_s, mono_s) + data
    return body + crc32c(body).to_bytes(4, "big")


class Recorder:
    """Append records to a file; never raises once open (write errors are counted).

    With ``max_bytes`` the record is rotated: before a record would take the file past
    ``max_bytes``, the file is renamed ``PATH.1`` (an older ``PATH.1`` becomes
    ``PATH.2``, and so on), at most ``keep`` of them are kept (the oldest is deleted,
    its records counted in :attr:`rotated_out`), and a new ``PATH`` is started with its
    own header, then a copy of the last ``start`` event (so each file names the settings
    it was recorded with). Every kept file is a complete record file of its own; nothing
    within the cap is lost. A single record larger than the cap goes alone into a fresh
    file.

    Every record goes to the operating system in one ``write`` call whose result is
    checked: a short write (full disk, file-size limit) is counted as lost, never as
    written, and the torn piece is cut off again where the file system allows.

    Parameters
    ----------
    path : str or Path
        The record file; created with a header if missing or empty, else appended to.
    fsync_interval_s : float
        Longest time between fsyncs, s (0 fsyncs after every record).
    max_bytes : int, optional
        Size cap of one record file, bytes (None: no cap, no rotation).
    keep : int
        Rotated files kept beside ``path`` (0: the full file is started afresh).

    Attributes
    ----------
    records : int
        Records written by this recorder (all of them on disk when written).
    write_errors : int
        Records lost to write errors (disk full, short write, ...); ``last_error`` says why.
    rotated_out : int
        Records this recorder wrote that were deleted with the oldest rotated file.
    rotations : int
        Files started afresh at the cap.

    Raises
    ------
    RecordFormatError
        At open, if an existing non-empty file is not a record file of this version.
    OSError
        At open, if the file cannot be opened.
    ValueError
        ``max_bytes`` not positive or ``keep`` negative.
    """

    def __init__(self, path: str | Path, fsync_interval_s: float = 1.0,
                 max_bytes: int | None = None, keep: int = 0) -> None:
        if max_bytes is not None and max_bytes <= HEADER_LEN:
            raise ValueError(f"record size cap {max_bytes!r} bytes is too small")
        if keep < 0:
            raise ValueError(f"record files to keep {keep!r} must be >= 0")
        self.path = Path(path)
        self.fsync_interval_s = fsync_interval_s
        self.max_bytes = max_bytes
        self.keep = keep
        self.records = 0
        self.write_errors = 0
        self.rotated_out = 0
        self.rotations = 0
        self.last_error: str | None = None
        self._lock = threading.Lock()
        self._fd: int | None = None
        self._size = 0
        self._file_records = 0  # records this recorder wrote into the current file
        self._kept: list[int] = []  # the same for PATH.1, PATH.2, ... (ours only)
        self._start: bytes | None = None  # the last start event, repeated after rotation
        self._open_file()
        self._last_sync = time.monotonic()

    def _open_file(self) -> None:
        """Open (or create) ``path`` for appending; sets the descriptor and size."""
        fd = os.open(self.path, os.O_RDWR | os.O_CREAT | os.O_APPEND, 0o644)
        try:
            size = os.fstat(fd).st_size
            if size >= HEADER_LEN:
                _created, version = check_header(os.pread(fd, HEADER_LEN, 0), str(self.path))
                if version != VERSION:
                    raise RecordFormatError(
                        f"{self.path}: record file version {version} can be read but not "
                        f"appended to (this writes version {VERSION}); record to a new file")
            elif size > 0:
                head = os.pread(fd, size, 0)
                if not MAGIC.startswith(head[:8]):
                    raise RecordFormatError(f"{self.path}: not a record file (bad magic)")
                os.ftruncate(fd, 0)  # a torn header: nothing recorded yet, start again
                size = 0
            if size == 0:
                _write_all(fd, header_bytes(time.time()), 0)
                os.fsync(fd)
                size = HEADER_LEN
        except BaseException:
            os.close(fd)
            raise
        self._fd = fd
        self._size = size
        self._file_records = 0

    @property
    def dropped(self) -> int:
        """Records lost from the record: not written, or rotated out beyond ``keep``."""
        return self.write_errors + self.rotated_out

    def write(self, kind: int, data: bytes, utc_s: float | None = None,
              mono_s: float | None = None, channel: int = 0) -> bool:
        """Append one record; times default to now. Returns False if it was lost."""
        now = time.monotonic()
        with self._lock:
            try:
                rec = encode_record(kind, bytes(data), time.time() if utc_s is None else utc_s,
                                    now if mono_s is None else mono_s, channel)
                if (self.max_bytes is not None and self._size + len(rec) > self.max_bytes
                        and self._size > HEADER_LEN):
                    self._rotate()
                if self._fd is None:
                    raise OSError("recorder is closed")
                self._size = _write_all(self._fd, rec, self._size)
                if now - self._last_sync >= self.fsync_interval_s:
                    os.fsync(self._fd)
                    self._last_sync = now
            except (OSError, ValueError, TypeError, struct.error) as exc:
                self.write_errors += 1
                self.last_error = f"record not written: {exc}"
                return False
            self.records += 1
            self._file_records += 1
            return True

    def _rotate(self) -> None:
        """Close the full file, shift the rotated names, start a fresh file.

        When a rename fails, the recorder goes on appending to ``path`` (whatever file
        that names now) rather than stop recording.
        """
        try:
            self._shift_files()
        finally:
            if self._fd is None:
                try:
                    self._open_file()
                except (OSError, RecordFormatError) as exc:
                    self.last_error = f"record rotation failed: {exc}"

    def _shift_files(self) -> None:
        fd, self._fd = self._fd, None
        if fd is not None:
            try:
                os.fsync(fd)
            finally:
                os.close(fd)
        self._kept.insert(0, self._file_records)
        self._file_records = 0
        self.rotations += 1
        if self.keep == 0:
            self.path.unlink(missing_ok=True)
        else:
            Path(f"{self.path}.{self.keep}").unlink(missing_ok=True)
            for i in range(self.keep - 1, 0, -1):
                older = Path(f"{self.path}.{i}")
                if older.exists():
                    older.rename(f"{self.path}.{i + 1}")
            self.path.rename(f"{self.path}.1")
        while len(self._kept) > self.keep:
            self.rotated_out += self._kept.pop()
        self._open_file()
        if self._start is not None and self._fd is not None:
            now = time.monotonic()
            rec = encode_record(KIND_EVENT, self._start, time.time(), now)
            self._size = _write_all(self._fd, rec, self._size)

    def record_input(self, payload: bytes, rx_monotonic: float | None = None,
                     rx_utc: float | None = None, channel: int = 0) -> bool:
        """Record one received frame payload with its receive times."""
        return self.write(KIND_INPUT, payload, rx_utc, rx_monotonic, channel)

    def record_raw_input(self, data: bytes, rx_monotonic: float | None = None,
                         rx_utc: float | None = None, channel: int = 0) -> bool:
        """Record raw received stream bytes (garbage included) with receive times."""
        return self.write(KIND_RAW_INPUT, data, rx_utc, rx_monotonic, channel)

    def record_output(self, payload: bytes, tx_monotonic: float | None = None,
                      tx_utc: float | None = None, channel: int = 0) -> bool:
        """Record one sent frame payload with its send times."""
        return self.write(KIND_OUTPUT, payload, tx_utc, tx_monotonic, channel)

    def record_event(self, code: str, channel: int = 0, **fields: Any) -> bool:
        """Record one typed event (see :func:`encode_event`): link lost, shutdown, ...

        Raises
        ------
        ValueError
            An unknown code or the wrong fields (a programming error, not bad input).
        """
        data = encode_event(code, **fields)
        if code == "start":
            self._start = data
        return self.write(KIND_EVENT, data, channel=channel)

    def flush(self) -> None:
        """fsync now."""
        if self._fd is not None:
            try:
                os.fsync(self._fd)
            except OSError as exc:
                self.last_error = f"fsync failed: {exc}"
            self._last_sync = time.monotonic()

    def close(self) -> None:
        """fsync and close (safe twice)."""
        with self._lock:
            fd, self._fd = self._fd, None
        if fd is not None:
            try:
                os.fsync(fd)
            except OSError:
                pass
            os.close(fd)

    def __enter__(self) -> Recorder:
        return self

    def __exit__(self, *exc) -> None:
        self.close()
