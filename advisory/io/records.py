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

import mmap
import os
import struct
import threading
import time
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Any, NamedTuple

import msgpack  # type: ignore[import-untyped]  # msgpack ships no type hints

from advisory.io.crc32c import crc32c
from advisory.io.records_v1 import decode_v1_event
from advisory.schema import EVENT_FIELDS

MAGIC = b"\x8bBOOMREC"
VERSION = 2  #: the version this code writes
READABLE_VERSIONS = (1, 2)  #: the versions this code reads
SYNC = b"\xa5\x5a"
HEADER = struct.Struct(">8sHHd")  # + uint32 CRC
HEADER_LEN = HEADER.size + 4  # 24
RECORD_HEAD = struct.Struct(">2sIBBdd")  # 24 bytes
RECORD_OVERHEAD = RECORD_HEAD.size + 4  # 28
MAX_RECORD_DATA = 1 << 20  #: largest data field, bytes (1 MiB)

KIND_INPUT = 1  #: one input frame payload (CRC checked and removed)
KIND_OUTPUT = 2  #: one output frame payload
KIND_RAW_INPUT = 3  #: raw bytes as received from a stream (garbage included)
KIND_EVENT = 4  #: a typed event (see :func:`encode_event`): link lost, reopened, shutdown
KINDS = {KIND_INPUT: "input", KIND_OUTPUT: "output", KIND_RAW_INPUT: "raw_input",
         KIND_EVENT: "event"}


class RecordFormatError(ValueError):
    """The file is not a record file this code can read (the message says why)."""


class Event(NamedTuple):
    """One record-file event: its code (a key of ``advisory.schema.EVENT_FIELDS``, or
    ``"unknown"`` for one this code cannot read) and its fields."""

    code: str
    fields: dict[str, Any]


def encode_event(code: str, **fields: Any) -> bytes:
    """The data of one event record: a MessagePack map ``{"code": code, **fields}``.

    Raises
    ------
    ValueError
        ``code`` is not in ``EVENT_FIELDS`` or the fields are not the ones it lists.
    """
    want = EVENT_FIELDS.get(code)
    if want is None:
        raise ValueError(f"event code {code!r} is not one of {', '.join(EVENT_FIELDS)}")
    if set(fields) != set(want):
        raise ValueError(f"event {code!r} takes the fields {want}, got {tuple(fields)}")
    return msgpack.packb({"code": code, **fields}, use_bin_type=True)


def decode_event(data: bytes, version: int = VERSION) -> Event:
    """The event held in one event record's data (never raises).

    Parameters
    ----------
    data : bytes
    version : int
        The record file's version (:attr:`ReadReport.version`): 2 reads MessagePack
        maps, 1 the text lines older records hold.

    Returns
    -------
    Event
        ``Event("unknown", {"data": data})`` for data this code cannot read.
    """
    data = bytes(data)
    if version == 1:
        return Event(*decode_v1_event(data.decode("utf-8", "replace")))
    try:
        doc = msgpack.unpackb(data, raw=False, strict_map_key=True)
    except Exception:  # noqa: BLE001 - any undecodable event is reported as unknown
        return Event("unknown", {"data": data})
    if not isinstance(doc, dict) or not isinstance(doc.get("code"), str):
        return Event("unknown", {"data": data})
    code = doc.pop("code")
    if code not in EVENT_FIELDS:
        return Event("unknown", {"data": data})
    return Event(code, doc)


def _header_bytes(created_utc: float) -> bytes:
    head = HEADER.pack(MAGIC, VERSION, 0, created_utc)
    return head + crc32c(head).to_bytes(4, "big")


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
                _created, version = _check_header(os.pread(fd, HEADER_LEN, 0), str(self.path))
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
                _write_all(fd, _header_bytes(time.time()), 0)
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


def _check_header(head: bytes, where: str) -> tuple[float, int]:
    """(created UTC, version) of a record file header; raises if it cannot be read."""
    magic, version, _flags, created = HEADER.unpack_from(head)
    if magic != MAGIC:
        raise RecordFormatError(f"{where}: not a record file (bad magic {magic!r})")
    if crc32c(head[:HEADER.size]) != int.from_bytes(head[HEADER.size:HEADER_LEN], "big"):
        raise RecordFormatError(f"{where}: record file header is damaged (CRC mismatch)")
    if version not in READABLE_VERSIONS:
        raise RecordFormatError(f"{where}: record file version {version} is not supported "
                                f"(this reads {', '.join(map(str, READABLE_VERSIONS))})")
    return created, version


@dataclass(frozen=True)
class Record:
    """One record read back.

    Attributes
    ----------
    kind : int
        ``KIND_INPUT``, ``KIND_OUTPUT``, ``KIND_RAW_INPUT`` or ``KIND_EVENT``.
    channel : int
    utc_s : float
        UTC time, s since 1970.
    mono_s : float
        Monotonic time, s.
    data : bytes
    offset : int
        Byte offset of the record in the file.
    """

    kind: int
    channel: int
    utc_s: float
    mono_s: float
    data: bytes
    offset: int


@dataclass
class ReadReport:
    """What the reader found besides the records.

    Attributes
    ----------
    created_utc : float or None
        From the header (None for a torn header).
    version : int
        The file's format version (pass it to :func:`decode_event`).
    records : int
        Good records read.
    torn_tail : bool
        The file ends in an incomplete or damaged record (e.g. power cut mid-write),
        which was skipped.
    torn_bytes : int
        Size of that tail.
    corrupt_regions : int
        Damaged stretches inside the file that were skipped (good records follow each).
    skipped_bytes : int
        Bytes in those stretches.
    """

    created_utc: float | None = None
    version: int = VERSION
    records: int = 0
    torn_tail: bool = False
    torn_bytes: int = 0
    corrupt_regions: int = 0
    skipped_bytes: int = 0


class RecordReader:
    """Read a record file, skipping a torn tail and damaged stretches.

    Iterate for :class:`Record` objects; :attr:`report` is complete once iteration ends.

    Parameters
    ----------
    path : str or Path

    Raises
    ------
    RecordFormatError
        Not a record file, damaged header or unsupported version.
    """

    def __init__(self, path: str | Path) -> None:
        self.path = Path(path)
        self.report = ReadReport()
        with open(self.path, "rb") as f:
            size = os.fstat(f.fileno()).st_size
            if size < HEADER_LEN:
                head = f.read()
                if not MAGIC.startswith(head[:8]):
                    raise RecordFormatError(f"{self.path}: not a record file (bad magic)")
                self.report.torn_tail = True
                self.report.torn_bytes = size
                self._mm = None
                return
            self._mm = mmap.mmap(f.fileno(), 0, access=mmap.ACCESS_READ)
        try:
            self.report.created_utc, self.report.version = _check_header(
                self._mm[:HEADER_LEN], str(self.path))
        except RecordFormatError:
            self.close()
            raise

    def _valid_at(self, pos: int) -> int:
        """End offset of a complete, CRC-good record at ``pos``, or -1."""
        mm = self._mm
        if mm is None:  # closed
            return -1
        end = len(mm)
        if end - pos < RECORD_OVERHEAD or mm[pos:pos + 2] != SYNC:
            return -1
        length = int.from_bytes(mm[pos + 2:pos + 6], "big")
        if length > MAX_RECORD_DATA:
            return -1
        stop = pos + RECORD_HEAD.size + length
        if stop + 4 > end:
            return -1
        if crc32c(mm[pos:stop]) != int.from_bytes(mm[stop:stop + 4], "big"):
            return -1
        return stop + 4

    def __iter__(self) -> Iterator[Record]:
        return self.records_from(HEADER_LEN)

    def records_from(self, offset: int) -> Iterator[Record]:
        """The records from byte ``offset`` on (a record's :attr:`Record.offset`, or the
        end of the header); the report counts what this iteration finds."""
        mm = self._mm
        if mm is None:
            return
        rep = self.report
        end = len(mm)
        pos = max(HEADER_LEN, offset)
        while pos < end:
            stop = self._valid_at(pos)
            if stop < 0:
                nxt = mm.find(SYNC, pos + 1)
                while nxt >= 0 and self._valid_at(nxt) < 0:
                    nxt = mm.find(SYNC, nxt + 1)
                if nxt < 0:
                    rep.torn_tail = True
                    rep.torn_bytes = end - pos
                    break
                rep.corrupt_regions += 1
                rep.skipped_bytes += nxt - pos
                pos = nxt
                continue
            _sync, length, kind, channel, utc_s, mono_s = RECORD_HEAD.unpack_from(mm, pos)
            data = mm[pos + RECORD_HEAD.size:pos + RECORD_HEAD.size + length]
            rep.records += 1
            yield Record(kind, channel, utc_s, mono_s, data, pos)
            pos = stop

    def close(self) -> None:
        """Release the file mapping (safe twice)."""
        mm, self._mm = self._mm, None
        if mm is not None:
            mm.close()

    def __enter__(self) -> RecordReader:
        return self

    def __exit__(self, *exc) -> None:
        self.close()


def read_records(path: str | Path) -> tuple[list[Record], ReadReport]:
    """All good records of a file and the report (torn tail, damaged stretches)."""
    with RecordReader(path) as reader:
        records = list(reader)
        return records, reader.report
