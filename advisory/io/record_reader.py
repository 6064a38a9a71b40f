"""Reading record files: every record in order, torn tails and damaged stretches
skipped and reported (the layout is in :mod:`advisory.io.records`).

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import mmap
import os
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path

from advisory.io.crc32c import crc32c
from advisory.io.record_format import (
    HEADER_LEN,
    MAGIC,
    MAX_RECORD_DATA,
    RECORD_HEAD,
    RECORD_OVERHEAD,
    SYNC,
    VERSION,
    RecordFormatError,
    check_header,
)


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
            self.report.created_utc, self.report.version = check_header(
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
