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

import json
import mmap
import os
import struct
import time
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Any, NamedTuple

import msgpack  # type: ignore[import-untyped]  # msgpack ships no type hints

from advisory.io.crc32c import crc32c
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


#: Version-1 records held events as text lines; the prefixes that the service wrote,
#: each mapped to its typed code and the field its remainder fills. Read-only: only
#: old records are parsed this way.
_V1_PREFIXES = (
    ("input open failed: ", "input_open_failed", "reason"),
    ("input open: ", "input_open", "url"),
    ("input lost: ", "input_lost", "reason"),
    ("output open failed: ", "output_open_failed", "reason"),
    ("output open: ", "output_open", "url"),
    ("output lost: ", "output_lost", "reason"),
    ("output error: ", "output_error", "reason"),
    ("internal error (going on): ", "internal_error", "reason"),
    ("start failed: ", "start_failed", "reason"),
    ("stopping: ", "stopping", "reason"),
)


def _decode_v1_event(text: str) -> Event:
    if text.startswith("start {") or text.startswith("stats {"):
        try:
            doc = json.loads(text[6:])
        except ValueError:
            return Event("note", {"text": text})
        if text.startswith("start"):
            return Event("start", {"settings": doc})
        return Event("stats", {"kind": doc.get("event", "stats"), "stats": doc})
    if text == "shutdown":
        return Event("shutdown", {})
    if text == "output writer still blocked at shutdown":
        return Event("output_blocked", {})
    if text.startswith("first advisory out ") and text.endswith(" s after start"):
        try:
            return Event("first_advisory", {"after_s": float(text.split()[3])})
        except (ValueError, IndexError):
            return Event("note", {"text": text})
    for prefix, code, field_name in _V1_PREFIXES:
        if text.startswith(prefix):
            rest = text[len(prefix):]
            if code == "input_open_failed":
                rest = rest.removesuffix("; retrying with backoff")
            return Event(code, {field_name: rest})
    return Event("note", {"text": text})


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
        return _decode_v1_event(data.decode("utf-8", "replace"))
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

    Parameters
    ----------
    path : str or Path
        The record file; created with a header if missing or empty, else appended to.
    fsync_interval_s : float
        Longest time between fsyncs, s (0 fsyncs after every record).

    Attributes
    ----------
    records : int
        Records written by this recorder.
    write_errors : int
        Records lost to write errors (disk full, ...); ``last_error`` says why.

    Raises
    ------
    RecordFormatError
        At open, if an existing non-empty file is not a record file of this version.
    OSError
        At open, if the file cannot be opened.
    """

    def __init__(self, path: str | Path, fsync_interval_s: float = 1.0) -> None:
        self.path = Path(path)
        self.fsync_interval_s = fsync_interval_s
        self.records = 0
        self.write_errors = 0
        self.last_error: str | None = None
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
                os.write(fd, _header_bytes(time.time()))
                os.fsync(fd)
        except BaseException:
            os.close(fd)
            raise
        self._fd: int | None = fd
        self._last_sync = time.monotonic()

    def write(self, kind: int, data: bytes, utc_s: float | None = None,
              mono_s: float | None = None, channel: int = 0) -> bool:
        """Append one record; times default to now. Returns False if it was lost."""
        if self._fd is None:
            self.write_errors += 1
            self.last_error = "recorder is closed"
            return False
        now = time.monotonic()
        try:
            rec = encode_record(kind, bytes(data), time.time() if utc_s is None else utc_s,
                                now if mono_s is None else mono_s, channel)
            os.write(self._fd, rec)
            if now - self._last_sync >= self.fsync_interval_s:
                os.fsync(self._fd)
                self._last_sync = now
        except (OSError, ValueError, TypeError, struct.error) as exc:
            self.write_errors += 1
            self.last_error = f"record not written: {exc}"
            return False
        self.records += 1
        return True

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
        return self.write(KIND_EVENT, encode_event(code, **fields), channel=channel)

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
        mm = self._mm
        if mm is None:
            return
        rep = self.report
        end = len(mm)
        pos = HEADER_LEN
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
