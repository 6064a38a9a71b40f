"""Frames on the wire: MessagePack maps in a canonical key order.

Three frame types share one header (``v``, ``type``, ``seq``, ``utc_s``):

* ``"air"``: air data in (from the avionics side),
* ``"adv"``: advisories out,
* ``"status"``: the service's health heartbeat out.

Encoders take plain dicts with the wire names and return the MessagePack payload;
:func:`decode_frame` returns a :class:`Frame` or raises :class:`FrameError` whose
``reason`` is one short code (the same codes the C binding reports);
:class:`FrameDecoder` never raises on bad input: it counts it. How a payload is carried
(byte stream or datagram, with its CRC) is :mod:`advisory.io.framing`. The field names,
limits and reason codes are facts of :mod:`advisory.schema`; the interface control
document ``docs/interface.md`` is the normative description, and the C binding in
``bindings/c`` produces and reads the same bytes.

References
----------
MessagePack specification, https://github.com/msgpack/msgpack/blob/master/spec.md
(formats; the encoder choice "smallest int format, float 64, str 8/16/32" is the one
msgpack-python makes with ``use_bin_type=True``).

Notes
-----
Air frames laid out exactly as the encoder writes them are read by the numba kernel
:func:`advisory.io.air_fastpath.air_canonical_kernel`; anything else takes the general
msgpack-python path (:func:`_dec`), which is also the kernel's twin in the parity tests.
"""

from __future__ import annotations

import logging
import numbers
from typing import Any, NamedTuple

import msgpack  # type: ignore[import-untyped]  # msgpack ships no type hints
import numpy as np

from advisory.io.air_fastpath import (
    AIR_FULL_MASK,
    AIR_LAYOUT_FIELDS,
    AIR_OPTIONAL_IDX,
    air_canonical_kernel,
)
from advisory.io.frame_rules import RejectError, check_map, depth_ok
from advisory.schema import (
    ADV_FIELDS,
    ADV_FLAGS,
    ADV_FORMAT_VERSION,
    ADV_SENT_WHEN_KNOWN,
    ADV_SENT_WHEN_TRUE,
    ADV_STATUSES,
    AIR_FIELDS,
    AIR_LATER_GROUPS,
    AIR_REQUIRED,
    COUNTER_MAX,
    COUNTER_NAME_MAX_BYTES,
    CUE_MAX_BYTES,
    DECODE_REASONS,
    MAX_COUNTERS,
    MAX_DEPTH,
    MAX_PAYLOAD,
    REASON_MAX_BYTES,
    SEQ_MAX,
    STATUS_FIELDS,
    STATUS_IDENTITY_FIELDS,
    STATUS_STATES,
    WIRE_FORMAT_VERSION,
    ZONE_ID_MAX_BYTES,
)

_log = logging.getLogger("advisory.io.messages")


class FrameError(ValueError):
    """A payload that is not a valid frame.

    Attributes
    ----------
    reason : str
        One of :data:`advisory.schema.DECODE_REASONS` (or a link reason for
        :func:`advisory.io.framing.parse_datagram`).
    """

    def __init__(self, reason: str, message: str) -> None:
        super().__init__(message)
        self.reason = reason


class Frame(NamedTuple):
    """One decoded frame.

    Attributes
    ----------
    type : str
        ``"air"``, ``"adv"`` or ``"status"``.
    seq : int
        Sequence number, 0..2**32-1, wraps.
    utc_s : float
        Sender's UTC time, seconds since 1970-01-01T00:00:00Z.
    fields : dict
        The type's fields with their wire names, in canonical order; absent nullable
        fields are ``None``; numbers are ``float``; unknown fields are dropped.
    version : int
        Format version of the frame (:data:`advisory.schema.READ_VERSIONS`).
    """

    type: str
    seq: int
    utc_s: float
    fields: dict
    version: int = WIRE_FORMAT_VERSION


def next_seq(seq: int) -> int:
    """The sequence number after ``seq`` (uint32, wraps to 0 after 2**32-1)."""
    return (seq + 1) & SEQ_MAX


# ---------------------------------------------------------------------------- encoding

def _num(name: str, value: Any) -> float:
    """``value`` as a float, or ValueError naming the field and the value."""
    if type(value) is float:
        return value
    if isinstance(value, numbers.Real) and not isinstance(value, (bool, np.bool_)):
        return float(value)
    raise ValueError(f"field {name!r} must be a number, got {value!r}")


def _text(name: str, value: Any, max_bytes: int, nullable: bool = False) -> str | None:
    if value is None and nullable:
        return None
    if not isinstance(value, str):
        raise ValueError(f"field {name!r} must be a string, got {value!r}")
    if "\x00" in value:
        raise ValueError(f"field {name!r} must not contain NUL, got {value!r}")
    if len(value.encode("utf-8")) > max_bytes:
        raise ValueError(f"field {name!r} is longer than {max_bytes} UTF-8 bytes: {value!r}")
    return value


def _header(kind: str, seq: Any, utc_s: Any, version: int = WIRE_FORMAT_VERSION) -> dict:
    if (not isinstance(seq, numbers.Integral) or isinstance(seq, (bool, np.bool_))
            or not 0 <= int(seq) <= SEQ_MAX):
        raise ValueError(f"field 'seq' must be an integer in 0..{SEQ_MAX}, got {seq!r}")
    return {"v": version, "type": kind, "seq": int(seq),
            "utc_s": _num("utc_s", utc_s)}


def _unknown(kind: str, fields: dict, known: tuple) -> None:
    extra = [k for k in fields if k not in known]
    if extra:
        raise ValueError(f"unknown {kind} field {extra[0]!r} (known: {', '.join(known)})")


def _pack(m: dict) -> bytes:
    data = msgpack.packb(m, use_bin_type=True)
    if len(data) > MAX_PAYLOAD:
        raise ValueError(f"frame of {len(data)} bytes exceeds MAX_PAYLOAD={MAX_PAYLOAD}")
    return data


#: The optional keys an encoder writes, by the number of later groups written (0: the
#: first release's frame): the canonical layouts' fields (ICD section 4).
_AIR_WRITTEN = tuple(AIR_FIELDS[len(AIR_REQUIRED):n] for n in AIR_LAYOUT_FIELDS)


def encode_air(fields: dict, seq: int, utc_s: float) -> bytes:
    """Encode an air-data frame.

    Parameters
    ----------
    fields : dict
        Wire names to values: ``lat_deg``, ``lon_deg``, ``alt_ft``, ``mach``,
        ``heading_deg``, ``gs_kt``, ``bank_deg``, ``fpa_deg`` (required numbers) and
        ``track_deg``, ``mach_rate_per_s``, ``sat_c``, ``wind_from_deg``, ``wind_kt``,
        ``pitch_rate_dps``, ``load_factor``, ``selected_alt_ft``,
        ``selected_heading_deg``, ``selected_mach`` (optional: missing or ``None`` is sent
        as nil). The optional fields appended after the first release come in groups,
        :data:`advisory.schema.AIR_LATER_GROUPS` (the pitch and load pair, then the
        flight-guidance targets): every group up to the last one with a value is
        written (nil for a key of those groups not given) and no group after it (ICD
        sections 4 and 7). Ranges are not checked here (the receiver's
        :class:`advisory.pipeline.state.StateValidator` does); NaN is sendable so that
        fault tests can send it.
    seq : int
        Sequence number, 0..2**32-1.
    utc_s : float
        UTC time of the data, seconds since 1970.

    Returns
    -------
    bytes
        MessagePack payload in canonical key order: the header, then
        :data:`AIR_FIELDS` up to the end of the last later group written. Without any
        later field it is the first release's map of 17 entries, with the pair only a
        map of 19, with a target a map of 22.

    Raises
    ------
    ValueError
        Missing required field, non-numeric value, unknown field or bad ``seq``.
    """
    _unknown("air-data", fields, AIR_FIELDS)
    m = _header("air", seq, utc_s)
    for name in AIR_REQUIRED:
        value = fields.get(name)
        if value is None:
            raise ValueError(f"air-data field {name!r} is required")
        m[name] = _num(name, value)
    groups = 0  # later groups to write: up to the last one the sender has a value of
    for i, group in enumerate(AIR_LATER_GROUPS, 1):
        if any(fields.get(name) is not None for name in group):
            groups = i
    for name in _AIR_WRITTEN[groups]:
        value = fields.get(name)
        m[name] = None if value is None else _num(name, value)
    return _pack(m)


def encode_adv(fields: dict, seq: int, utc_s: float,
               version: int = ADV_FORMAT_VERSION) -> bytes:
    """Encode an advisory frame.

    Parameters
    ----------
    fields : dict
        ``status`` (required, one of :data:`ADV_STATUSES`); ``zone_id`` (str or None);
        ``focus``, ``tables_stale``, ``combined``, ``near_cutoff``, ``at_limit``,
        ``level_off`` (bool, default False; the last three are sent only when true);
        ``boom_probability`` (number, sent only
        when not None); ``cue`` (str,
        default ``""``); the other :data:`ADV_FIELDS` are numbers or None.
    seq : int
        Sequence number, 0..2**32-1.
    utc_s : float
        UTC time of the advisory, seconds since 1970.
    version : int
        :data:`ADV_FORMAT_VERSION`, or 1 for older receivers (ICD section 7): the status
        ``unavoidable``, which version 1 lacks, then goes as ``warning``.

    Returns
    -------
    bytes
        MessagePack payload in canonical key order (header, then :data:`ADV_FIELDS`).

    Raises
    ------
    ValueError
        Bad or unknown field (the message names the field and the value).
    """
    _unknown("advisory", fields, ADV_FIELDS)
    if version not in (1, ADV_FORMAT_VERSION):
        raise ValueError(f"advisory frame version must be 1 or {ADV_FORMAT_VERSION}, "
                         f"got {version!r}")
    m = _header("adv", seq, utc_s, version)
    status = fields.get("status")
    if status not in ADV_STATUSES:
        raise ValueError(f"field 'status' must be one of {ADV_STATUSES}, got {status!r}")
    m["status"] = "warning" if version == 1 and status == "unavoidable" else status
    m["zone_id"] = _text("zone_id", fields.get("zone_id"), ZONE_ID_MAX_BYTES, nullable=True)
    for name in ADV_FIELDS[2:]:
        if name in ADV_SENT_WHEN_TRUE:
            if _flag(name, fields.get(name, False)):
                m[name] = True
        elif name in ADV_SENT_WHEN_KNOWN:
            if fields.get(name) is not None:
                m[name] = _num(name, fields[name])
        elif name in ADV_FLAGS:
            m[name] = _flag(name, fields.get(name, False))
        elif name == "cue":
            m[name] = _text("cue", fields.get("cue", ""), CUE_MAX_BYTES)
        else:
            value = fields.get(name)
            m[name] = None if value is None else _num(name, value)
    return _pack(m)


def _flag(name: str, value: Any) -> bool:
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    raise ValueError(f"field {name!r} must be true or false, got {value!r}")


def encode_status(fields: dict, seq: int, utc_s: float) -> bytes:
    """Encode a status (heartbeat) frame.

    Parameters
    ----------
    fields : dict
        ``state`` (one of :data:`STATUS_STATES`), ``reason`` (str, default ``""``),
        ``counters`` (dict name -> non-negative int, default empty; sent sorted by name;
        at most :data:`MAX_COUNTERS`, names 1..47 UTF-8 bytes).
    seq : int
        Sequence number, 0..2**32-1.
    utc_s : float
        UTC time, seconds since 1970.

    Returns
    -------
    bytes
        MessagePack payload in canonical key order.

    Raises
    ------
    ValueError
        Bad or unknown field.
    """
    _unknown("status", fields, STATUS_FIELDS + STATUS_IDENTITY_FIELDS)
    m = _header("status", seq, utc_s)
    state = fields.get("state")
    if state not in STATUS_STATES:
        raise ValueError(f"field 'state' must be one of {STATUS_STATES}, got {state!r}")
    m["state"] = state
    m["reason"] = _text("reason", fields.get("reason", ""), REASON_MAX_BYTES)
    counters = fields.get("counters") or {}
    if not isinstance(counters, dict) or len(counters) > MAX_COUNTERS:
        raise ValueError(f"field 'counters' must be a dict of at most {MAX_COUNTERS} "
                         f"entries, got {counters!r}")
    out = {}
    for name in sorted(counters):
        _text("counters", name, COUNTER_NAME_MAX_BYTES)
        if not name:
            raise ValueError("field 'counters' has an empty counter name")
        value = counters[name]
        if (not isinstance(value, numbers.Integral) or isinstance(value, (bool, np.bool_))
                or not 0 <= int(value) <= COUNTER_MAX):
            raise ValueError(f"counter {name!r} must be an integer in 0..2**64-1, "
                             f"got {value!r}")
        out[name] = int(value)
    m["counters"] = out
    for name in STATUS_IDENTITY_FIELDS:  # optional identity keys: written only when given
        value = fields.get(name)
        if value is not None:
            m[name] = _identity(name, value)
    return _pack(m)


def _identity(name: str, value: Any) -> str:
    """An identity key's value: ``sw`` and ``table_range`` 1..31 printable ASCII bytes
    (the software version, the live table's range), the digests exactly 16 lowercase hex
    digits (``docs/interface.md`` section 6)."""
    if name in ("sw", "table_range"):
        if (isinstance(value, str) and 1 <= len(value) <= 31 and value.isascii()
                and value.isprintable()):
            return value
        raise ValueError(f"field {name!r} must be 1..31 printable ASCII characters, "
                         f"got {value!r}")
    if (isinstance(value, str) and len(value) == 16
            and all(ch in "0123456789abcdef" for ch in value)):
        return value
    raise ValueError(f"field {name!r} must be 16 lowercase hex digits, got {value!r}")


# ---------------------------------------------------------------------------- decoding

def decode_frame(payload: bytes, unknown: list[str] | None = None) -> Frame:
    """Decode one frame payload (MessagePack, CRC already checked and removed).

    Checks run in the order the ICD gives (``docs/interface.md``, "Decoding rules"), and
    the first failure is reported: size, well-formed MessagePack, map, ``v``, ``type``,
    ``seq``, ``utc_s``, then the type's fields in canonical order. Unknown fields are
    ignored; duplicate keys: the last one counts.

    Parameters
    ----------
    payload : bytes
        The MessagePack payload.
    unknown : list of str, optional
        Receives the names of keys the ICD does not define (the frame is still decoded).

    Returns
    -------
    Frame

    Raises
    ------
    FrameError
        With ``reason`` one of :data:`DECODE_REASONS` and a message naming the field and
        the value.
    """
    if len(payload) > MAX_PAYLOAD:
        raise FrameError("oversize", f"payload of {len(payload)} bytes exceeds {MAX_PAYLOAD}")
    if type(payload) is bytes and payload[:1] == b"\xde":
        r = air_canonical_kernel(payload)
        mask = r[0]
        if mask >= 0:
            vals = r[3:]
            if mask != AIR_FULL_MASK:
                vals = list(vals)
                for i in AIR_OPTIONAL_IDX:
                    if not mask >> i & 1:
                        vals[i] = None
            return Frame("air", r[1], r[2], dict(zip(AIR_FIELDS, vals)), WIRE_FORMAT_VERSION)
    try:
        m = msgpack.unpackb(payload, raw=False, strict_map_key=True)
    except Exception as exc:  # any unpacker failure means malformed input
        raise FrameError("malformed", f"payload is not one well-formed MessagePack "
                                      f"object ({type(exc).__name__}: {exc})") from None
    try:
        return Frame(*check_map(m, unknown))
    except RejectError as rej:
        if rej.reason != "malformed" and not depth_ok(m):
            raise FrameError("malformed", f"containers nested deeper than {MAX_DEPTH}") from None
        raise FrameError(rej.reason, rej.message) from None


class FrameDecoder:
    """:func:`decode_frame` that never raises: it counts every outcome.

    Attributes
    ----------
    counters : dict of str to int
        ``"decoded"`` plus one entry per reason of :data:`DECODE_REASONS`, and
        ``"unsupported_version"`` among them ("unknown versions refused and counted"):
        each payload is counted once, by its outcome.
    unknown_keys : int
        Keys the ICD does not define, in frames that were still decoded (ICD section 8:
        ignored, counted).
    last_error : FrameError or None
        The most recent rejection, for the log (names the field and the value).
    unknown_seen : set of str
        Unknown key names already reported (one warning per name, at most
        ``MAX_UNKNOWN_REPORTED`` names, so a sender of random keys cannot flood the log).
    """

    MAX_UNKNOWN_REPORTED = 32

    def __init__(self) -> None:
        self.counters: dict[str, int] = dict.fromkeys(("decoded",) + DECODE_REASONS, 0)
        self.unknown_keys = 0
        self.last_error: FrameError | None = None
        self.unknown_seen: set[str] = set()
        self._unknown: list[str] = []

    def decode(self, payload: bytes) -> Frame | None:
        """Decode ``payload``; return the frame, or None (and count why)."""
        unknown = self._unknown
        try:
            frame = decode_frame(payload, unknown)
        except FrameError as exc:
            unknown.clear()
            self.counters[exc.reason] += 1
            self.last_error = exc
            return None
        except Exception as exc:  # not bytes at all, or anything unforeseen
            self.counters["malformed"] += 1
            self.last_error = FrameError("malformed", f"undecodable input: {exc!r}")
            unknown.clear()
            return None
        self.counters["decoded"] += 1
        if unknown:
            self._report_unknown(frame.type, unknown)
        return frame

    def _report_unknown(self, kind: str, names: list[str]) -> None:
        self.unknown_keys += len(names)
        seen = self.unknown_seen
        for name in names:
            if name not in seen and len(seen) < self.MAX_UNKNOWN_REPORTED:
                seen.add(name)
                _log.warning("unknown key %r in %s frames ignored (ICD section 8); further "
                             "ones are counted as unknown_keys", name, kind)
        names.clear()
