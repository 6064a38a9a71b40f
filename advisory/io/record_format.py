"""The record file's format: constants, header, events (the layout is in
:mod:`advisory.io.records` and the ICD, section 13).

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import struct
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


def header_bytes(created_utc: float) -> bytes:
    head = HEADER.pack(MAGIC, VERSION, 0, created_utc)
    return head + crc32c(head).to_bytes(4, "big")


def check_header(head: bytes, where: str) -> tuple[float, int]:
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

