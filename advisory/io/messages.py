"""Frames on the wire: MessagePack maps in a canonical key order, with framing and CRC.

Three frame types share one header (``v``, ``type``, ``seq``, ``utc_s``):

* ``"air"``: air data in (from the avionics side),
* ``"adv"``: advisories out,
* ``"status"``: the service's health heartbeat out.

Payloads are carried either on a byte stream (serial, files) as
``COBS(payload + CRC32C(payload)) + b"\\x00"`` or in one UDP datagram as
``payload + CRC32C(payload)``; the CRC is 4 bytes, big-endian. The interface control
document ``docs/interface.md`` is the normative description; the C binding in
``bindings/c`` produces and reads the same bytes.

Encoders take plain dicts with the wire names and return ``bytes``; decoders return a
:class:`Frame` or raise :class:`FrameError` whose ``reason`` is one short code
(the same codes the C binding reports). :class:`FrameDecoder` and
:class:`StreamDeframer` never raise on bad input: they count it.

References
----------
MessagePack specification, https://github.com/msgpack/msgpack/blob/master/spec.md
(formats; the encoder choice "smallest int format, float 64, str 8/16/32" is the one
msgpack-python makes with ``use_bin_type=True``).
S. Cheshire and M. Baker, "Consistent Overhead Byte Stuffing", IEEE/ACM Trans.
Networking 7(2), 1999 (COBS). RFC 3720, 12.1 and B.4 (CRC-32C).

Notes
-----
Hot-path numba kernels (``njit(cache=True)``, plain buffers in and out) and their
plain-Python twins, each pair covered by a parity test: ``air_canonical_kernel`` reads
air frames laid out exactly as the encoder writes them (twin: the general
msgpack-python path of :func:`decode_frame`); ``unstuff_check_kernel`` and
``deframe_kernel`` unstuff and CRC-check stream frames (twins ``unstuff_check_py`` and
``deframe_py``).
"""

from __future__ import annotations

import numbers
import operator
from typing import Any, NamedTuple

import msgpack
import numpy as np

from advisory.io.cobs import cobs_encode, cobs_max_encoded_len
from advisory.io.crc32c import crc32c, crc32c_kernel, crc32c_py, crc32c_update
from advisory.jit import njit

# --------------------------------------------------------------------------- constants

FORMAT_VERSION = 1  #: the only format version this code reads and writes
FRAME_TYPES = ("air", "adv", "status")
MAX_PAYLOAD = 4096  #: largest MessagePack payload, bytes
CRC_LEN = 4  #: CRC-32C trailer, bytes, big-endian
#: Longest encoded stream frame (without delimiter): COBS of payload + CRC, plus one
#: byte of slack for senders that end a full last block with 0x01.
MAX_ENCODED = cobs_max_encoded_len(MAX_PAYLOAD + CRC_LEN) + 1
MAX_DATAGRAM = MAX_PAYLOAD + CRC_LEN
MAX_DEPTH = 16  #: deepest container nesting, counting the top-level map as 1
SEQ_MAX = 0xFFFFFFFF

HEADER_KEYS = ("v", "type", "seq", "utc_s")
AIR_REQUIRED = (
    "lat_deg", "lon_deg", "alt_ft", "mach", "heading_deg", "gs_kt", "bank_deg", "fpa_deg",
)
AIR_OPTIONAL = ("track_deg", "mach_rate_per_s", "sat_c", "wind_from_deg", "wind_kt")
AIR_FIELDS = AIR_REQUIRED + AIR_OPTIONAL  #: canonical order after the header

ADV_STATUSES = ("no_boom", "clear", "advisory", "caution", "warning", "unavailable")
ADV_FIELDS = (
    "status", "zone_id", "time_to_contact_s", "overpressure_psf", "focus",
    "max_mach_off_ground", "turn_left_deg", "turn_right_deg", "tables_stale", "cue",
)
ADV_NULLABLE_FLOATS = (
    "time_to_contact_s", "overpressure_psf", "max_mach_off_ground", "turn_left_deg",
    "turn_right_deg",
)
STATUS_STATES = ("ok", "degraded", "unavailable")
STATUS_FIELDS = ("state", "reason", "counters")

ZONE_ID_MAX_BYTES = 63
CUE_MAX_BYTES = 127
REASON_MAX_BYTES = 127
COUNTER_NAME_MAX_BYTES = 47
MAX_COUNTERS = 48
COUNTER_MAX = 2**64 - 1

#: Every reason code :func:`decode_frame` can give (the C binding uses the same names).
DECODE_REASONS = (
    "oversize", "malformed", "not_a_map", "missing_field", "bad_type", "bad_value",
    "unsupported_version", "unknown_type",
)
#: Every counter of :class:`StreamDeframer` / :class:`DatagramReader`.
LINK_COUNTERS = ("frames_ok", "bad_crc", "cobs_error", "too_short", "oversize")

_MISSING = object()


class FrameError(ValueError):
    """A payload that is not a valid frame.

    Attributes
    ----------
    reason : str
        One of :data:`DECODE_REASONS` (or a link reason for :func:`parse_datagram`).
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
        Format version (always :data:`FORMAT_VERSION`).
    """

    type: str
    seq: int
    utc_s: float
    fields: dict
    version: int = FORMAT_VERSION


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


def _header(kind: str, seq: Any, utc_s: Any) -> dict:
    if (not isinstance(seq, numbers.Integral) or isinstance(seq, (bool, np.bool_))
            or not 0 <= seq <= SEQ_MAX):
        raise ValueError(f"field 'seq' must be an integer in 0..{SEQ_MAX}, got {seq!r}")
    return {"v": FORMAT_VERSION, "type": kind, "seq": int(seq), "utc_s": _num("utc_s", utc_s)}


def _unknown(kind: str, fields: dict, known: tuple) -> None:
    extra = [k for k in fields if k not in known]
    if extra:
        raise ValueError(f"unknown {kind} field {extra[0]!r} (known: {', '.join(known)})")


def _pack(m: dict) -> bytes:
    data = msgpack.packb(m, use_bin_type=True)
    if len(data) > MAX_PAYLOAD:
        raise ValueError(f"frame of {len(data)} bytes exceeds MAX_PAYLOAD={MAX_PAYLOAD}")
    return data


def encode_air(fields: dict, seq: int, utc_s: float) -> bytes:
    """Encode an air-data frame.

    Parameters
    ----------
    fields : dict
        Wire names to values: ``lat_deg``, ``lon_deg``, ``alt_ft``, ``mach``,
        ``heading_deg``, ``gs_kt``, ``bank_deg``, ``fpa_deg`` (required numbers) and
        ``track_deg``, ``mach_rate_per_s``, ``sat_c``, ``wind_from_deg``, ``wind_kt``
        (optional: missing or ``None`` is sent as nil). Ranges are not checked here
        (the receiver's :class:`advisory.pipeline.state.StateValidator` does); NaN is sendable
        so that fault tests can send it.
    seq : int
        Sequence number, 0..2**32-1.
    utc_s : float
        UTC time of the data, seconds since 1970.

    Returns
    -------
    bytes
        MessagePack payload in canonical key order (header, then :data:`AIR_FIELDS`).

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
    for name in AIR_OPTIONAL:
        value = fields.get(name)
        m[name] = None if value is None else _num(name, value)
    return _pack(m)


def encode_adv(fields: dict, seq: int, utc_s: float) -> bytes:
    """Encode an advisory frame.

    Parameters
    ----------
    fields : dict
        ``status`` (required, one of :data:`ADV_STATUSES`); ``zone_id`` (str or None);
        ``time_to_contact_s``, ``overpressure_psf``, ``max_mach_off_ground``,
        ``turn_left_deg``, ``turn_right_deg`` (number or None); ``focus``,
        ``tables_stale`` (bool, default False); ``cue`` (str, default ``""``).
    seq : int
        Sequence number, 0..2**32-1.
    utc_s : float
        UTC time of the advisory, seconds since 1970.

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
    m = _header("adv", seq, utc_s)
    status = fields.get("status")
    if status not in ADV_STATUSES:
        raise ValueError(f"field 'status' must be one of {ADV_STATUSES}, got {status!r}")
    m["status"] = status
    m["zone_id"] = _text("zone_id", fields.get("zone_id"), ZONE_ID_MAX_BYTES, nullable=True)
    for name in ("time_to_contact_s", "overpressure_psf"):
        value = fields.get(name)
        m[name] = None if value is None else _num(name, value)
    m["focus"] = _flag("focus", fields.get("focus", False))
    for name in ("max_mach_off_ground", "turn_left_deg", "turn_right_deg"):
        value = fields.get(name)
        m[name] = None if value is None else _num(name, value)
    m["tables_stale"] = _flag("tables_stale", fields.get("tables_stale", False))
    m["cue"] = _text("cue", fields.get("cue", ""), CUE_MAX_BYTES)
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
    _unknown("status", fields, STATUS_FIELDS)
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
                or not 0 <= value <= COUNTER_MAX):
            raise ValueError(f"counter {name!r} must be an integer in 0..2**64-1, "
                             f"got {value!r}")
        out[name] = int(value)
    m["counters"] = out
    return _pack(m)


# ---------------------------------------------------------------------------- decoding

class _RejectError(Exception):
    def __init__(self, reason: str, message: str) -> None:
        self.reason = reason
        self.message = message


def _depth_ok(obj: Any, limit: int = MAX_DEPTH) -> bool:
    """True when containers in ``obj`` nest at most ``limit`` deep (obj itself = 1)."""
    t = type(obj)
    if t is dict:
        if limit < 1:
            return False
        return all(_depth_ok(v, limit - 1) for v in obj.values())
    if t is list:
        if limit < 1:
            return False
        return all(_depth_ok(v, limit - 1) for v in obj)
    return True


def _need(m: dict, name: str) -> Any:
    value = m.get(name, _MISSING)
    if value is _MISSING:
        raise _RejectError("missing_field", f"field {name!r} is missing")
    return value


def _bad_type(name: str, value: Any, expected: str) -> _RejectError:
    return _RejectError("bad_type", f"field {name!r} must be {expected}, got {_short(value)}")


def _short(value: Any) -> str:
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def _dec_text(name: str, value: Any, max_bytes: int) -> str:
    if type(value) is not str:
        raise _bad_type(name, value, "a string")
    if len(value) > max_bytes or (not value.isascii()
                                  and len(value.encode("utf-8")) > max_bytes):
        raise _RejectError("bad_value", f"field {name!r} is longer than {max_bytes} bytes: "
                                   f"{_short(value)}")
    if "\x00" in value:
        raise _RejectError("bad_value", f"field {name!r} contains NUL: {_short(value)}")
    return value


_AIR_GETTER = operator.itemgetter(*AIR_FIELDS)
_FLOAT_ONLY = frozenset((float,))
_FLOAT_OR_NIL = frozenset((float, type(None)))


def _dec_air(m: dict) -> tuple[dict, int]:
    try:  # fast path: every key present, required all float, optional float or nil
        vals = _AIR_GETTER(m)
    except KeyError:
        pass
    else:
        if (_FLOAT_ONLY.issuperset(map(type, vals[:8]))
                and _FLOAT_OR_NIL.issuperset(map(type, vals[8:]))):
            return dict(zip(AIR_FIELDS, vals)), 13
    out = {}
    present = 0
    get = m.get
    for name in AIR_REQUIRED:
        x = get(name, _MISSING)
        t = type(x)
        if t is float:
            out[name] = x
        elif t is int:
            out[name] = float(x)
        elif x is _MISSING:
            raise _RejectError("missing_field", f"field {name!r} is missing")
        else:
            raise _bad_type(name, x, "a number")
        present += 1
    for name in AIR_OPTIONAL:
        x = get(name, _MISSING)
        t = type(x)
        if t is float or x is None:
            out[name] = x
            present += 1
        elif x is _MISSING:
            out[name] = None
        elif t is int:
            out[name] = float(x)
            present += 1
        else:
            raise _bad_type(name, x, "a number or nil")
    return out, present


def _dec_adv(m: dict) -> tuple[dict, int]:
    out = {}
    present = 0
    status = _need(m, "status")
    if type(status) is not str:
        raise _bad_type("status", status, "a string")
    if status not in ADV_STATUSES:
        raise _RejectError("bad_value", f"field 'status' must be one of {', '.join(ADV_STATUSES)}, "
                                   f"got {_short(status)}")
    out["status"] = status
    present += 1
    for name in ADV_FIELDS[1:]:
        x = m.get(name, _MISSING)
        if x is not _MISSING:
            present += 1
        if name == "zone_id":
            out[name] = None if x is None or x is _MISSING else _dec_text(
                name, x, ZONE_ID_MAX_BYTES)
        elif name in ("focus", "tables_stale"):
            if x is _MISSING:
                raise _RejectError("missing_field", f"field {name!r} is missing")
            if type(x) is not bool:
                raise _bad_type(name, x, "true or false")
            out[name] = x
        elif name == "cue":
            if x is _MISSING:
                raise _RejectError("missing_field", f"field {name!r} is missing")
            out[name] = _dec_text(name, x, CUE_MAX_BYTES)
        else:
            t = type(x)
            if t is float or x is None:
                out[name] = x
            elif x is _MISSING:
                out[name] = None
            elif t is int:
                out[name] = float(x)
            else:
                raise _bad_type(name, x, "a number or nil")
    return out, present


def _dec_status(m: dict) -> tuple[dict, int]:
    state = _need(m, "state")
    if type(state) is not str:
        raise _bad_type("state", state, "a string")
    if state not in STATUS_STATES:
        raise _RejectError("bad_value", f"field 'state' must be one of {', '.join(STATUS_STATES)}, "
                                   f"got {_short(state)}")
    reason = _dec_text("reason", _need(m, "reason"), REASON_MAX_BYTES)
    counters = _need(m, "counters")
    if type(counters) is not dict:
        raise _bad_type("counters", counters, "a map")
    if len(counters) > MAX_COUNTERS:
        raise _RejectError("bad_value", f"field 'counters' has {len(counters)} entries, "
                                   f"more than {MAX_COUNTERS}")
    out = {}
    for name, value in counters.items():
        if type(name) is not str:
            raise _bad_type("counters", name, "a map with string keys")
        _dec_text("counters", name, COUNTER_NAME_MAX_BYTES)
        if not name:
            raise _RejectError("bad_value", "field 'counters' has an empty counter name")
        if type(value) is not int:
            raise _bad_type(f"counters.{name}", value, "an unsigned integer")
        if value < 0:
            raise _RejectError("bad_value", f"counter {name!r} is negative: {value}")
        out[name] = value
    return {"state": state, "reason": reason, "counters": out}, 3


def _air_template() -> tuple[np.ndarray, np.ndarray]:
    """Canonical bytes of an air frame's keys: header prefix, then each field's key."""
    head = (b"\xde" + (4 + len(AIR_FIELDS)).to_bytes(2, "big")
            + msgpack.packb("v") + b"\x01" + msgpack.packb("type") + msgpack.packb("air")
            + msgpack.packb("seq"))
    keys = [head, msgpack.packb("utc_s")] + [msgpack.packb(k) for k in AIR_FIELDS]
    offsets = np.cumsum([0] + [len(k) for k in keys]).astype(np.int64)
    return np.frombuffer(b"".join(keys), dtype=np.uint8).copy(), offsets


_AIR_KEYS, _AIR_KEY_OFFSETS = _air_template()
_AIR_FULL_MASK = (1 << len(AIR_FIELDS)) - 1
_AIR_OPTIONAL_IDX = tuple(range(len(AIR_REQUIRED), len(AIR_FIELDS)))


@njit(cache=True)
def air_canonical_kernel(buf):  # pragma: no cover - compiled
    """Read an air frame laid out exactly in canonical form, without a general unpacker.

    Parameters
    ----------
    buf : bytes or ndarray of uint8
        The payload.

    Returns
    -------
    tuple
        ``(mask, seq, utc_s, f0 .. f12)``: ``mask`` is -1 when ``buf`` is not in the
        exact canonical layout (the caller then uses the general decoder), else bit i set
        when field i of ``AIR_FIELDS`` is a float (clear: nil, value NaN placeholder).
    """
    keys = _AIR_KEYS
    offs = _AIR_KEY_OFFSETS
    n = len(buf)
    bits = np.zeros(14, dtype=np.uint64)
    vals = bits.view(np.float64)
    bad = (-1, 0, vals[0], vals[1], vals[2], vals[3], vals[4], vals[5], vals[6], vals[7],
           vals[8], vals[9], vals[10], vals[11], vals[12], vals[13])
    p = 0
    # header prefix up to the seq key
    for j in range(offs[0], offs[1]):
        if p >= n or buf[p] != keys[j]:
            return bad
        p += 1
    if p >= n:
        return bad
    c = buf[p]
    p += 1
    if c < 0x80:
        seq = np.int64(c)
    elif c == 0xCC or c == 0xCD or c == 0xCE:
        w = 1 if c == 0xCC else (2 if c == 0xCD else 4)
        if p + w > n:
            return bad
        seq = np.int64(0)
        for j in range(w):
            seq = (seq << 8) | np.int64(buf[p + j])
        p += w
    else:
        return bad
    mask = 0
    for k in range(14):  # utc_s then the 13 fields
        for j in range(offs[k + 1], offs[k + 2]):
            if p >= n or buf[p] != keys[j]:
                return bad
            p += 1
        if p >= n:
            return bad
        c = buf[p]
        p += 1
        if c == 0xCB:
            if p + 8 > n:
                return bad
            u = np.uint64(0)
            for j in range(8):
                u = (u << np.uint64(8)) | np.uint64(buf[p + j])
            bits[k] = u
            p += 8
            if k > 0:
                mask |= 1 << (k - 1)
        elif c == 0xC0 and k > 8:  # nil allowed for the optional fields only
            pass
        else:
            return bad
    if p != n:
        return bad
    return (mask, seq, vals[0], vals[1], vals[2], vals[3], vals[4], vals[5], vals[6],
            vals[7], vals[8], vals[9], vals[10], vals[11], vals[12], vals[13])


_DECODERS = {"air": _dec_air, "adv": _dec_adv, "status": _dec_status}


def _dec(m: Any) -> Frame:
    if type(m) is not dict:
        raise _RejectError("not_a_map", f"payload is a MessagePack {type(m).__name__}, not a map")
    v = m.get("v", _MISSING)
    if type(v) is not int:
        if v is _MISSING:
            raise _RejectError("missing_field", "field 'v' is missing")
        raise _bad_type("v", v, "an integer")
    if v != FORMAT_VERSION:
        raise _RejectError("unsupported_version", f"field 'v' = {v}: format version not "
                                                  f"supported (this reads {FORMAT_VERSION})")
    kind = m.get("type", _MISSING)
    if type(kind) is not str:
        if kind is _MISSING:
            raise _RejectError("missing_field", "field 'type' is missing")
        raise _bad_type("type", kind, "a string")
    dec = _DECODERS.get(kind)
    if dec is None:
        raise _RejectError("unknown_type", f"field 'type' = {_short(kind)}: unknown frame type")
    seq = m.get("seq", _MISSING)
    if type(seq) is not int:
        if seq is _MISSING:
            raise _RejectError("missing_field", "field 'seq' is missing")
        raise _bad_type("seq", seq, "an integer")
    if not 0 <= seq <= SEQ_MAX:
        raise _RejectError("bad_value", f"field 'seq' = {seq} is outside 0..{SEQ_MAX}")
    utc = m.get("utc_s", _MISSING)
    t = type(utc)
    if t is not float:
        if t is int:
            utc = float(utc)
        elif utc is _MISSING:
            raise _RejectError("missing_field", "field 'utc_s' is missing")
        else:
            raise _bad_type("utc_s", utc, "a number")
    fields, present = dec(m)
    if len(m) != present + 4 and not _depth_ok(m):
        raise _RejectError("malformed", f"containers nested deeper than {MAX_DEPTH}")
    return Frame(kind, seq, utc, fields, v)


def decode_frame(payload: bytes) -> Frame:
    """Decode one frame payload (MessagePack, CRC already checked and removed).

    Checks run in the order the ICD gives (``docs/interface.md``, "Decoding rules"), and
    the first failure is reported: size, well-formed MessagePack, map, ``v``, ``type``,
    ``seq``, ``utc_s``, then the type's fields in canonical order. Unknown fields are
    ignored; duplicate keys: the last one counts.

    Parameters
    ----------
    payload : bytes
        The MessagePack payload.

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
            if mask != _AIR_FULL_MASK:
                vals = list(vals)
                for i in _AIR_OPTIONAL_IDX:
                    if not mask >> i & 1:
                        vals[i] = None
            return Frame("air", r[1], r[2], dict(zip(AIR_FIELDS, vals)), FORMAT_VERSION)
    try:
        m = msgpack.unpackb(payload, raw=False, strict_map_key=True)
    except Exception as exc:  # any unpacker failure means malformed input
        raise FrameError("malformed", f"payload is not one well-formed MessagePack "
                                      f"object ({type(exc).__name__}: {exc})") from None
    try:
        return _dec(m)
    except _RejectError as rej:
        if rej.reason != "malformed" and not _depth_ok(m):
            raise FrameError("malformed", f"containers nested deeper than {MAX_DEPTH}") from None
        raise FrameError(rej.reason, rej.message) from None


class FrameDecoder:
    """:func:`decode_frame` that never raises: it counts every outcome.

    Attributes
    ----------
    counters : dict of str to int
        ``"decoded"`` plus one entry per reason of :data:`DECODE_REASONS`, and
        ``"unsupported_version"`` among them ("unknown versions refused and counted").
    last_error : FrameError or None
        The most recent rejection, for the log (names the field and the value).
    """

    def __init__(self) -> None:
        self.counters: dict[str, int] = dict.fromkeys(("decoded",) + DECODE_REASONS, 0)
        self.last_error: FrameError | None = None

    def decode(self, payload: bytes) -> Frame | None:
        """Decode ``payload``; return the frame, or None (and count why)."""
        try:
            frame = decode_frame(payload)
        except FrameError as exc:
            self.counters[exc.reason] += 1
            self.last_error = exc
            return None
        except Exception as exc:  # not bytes at all, or anything unforeseen
            self.counters["malformed"] += 1
            self.last_error = FrameError("malformed", f"undecodable input: {exc!r}")
            return None
        self.counters["decoded"] += 1
        return frame


# ---------------------------------------------------------------------------- framing

def frame_stream(payload: bytes) -> bytes:
    """Frame ``payload`` for a byte stream: ``COBS(payload + CRC) + b"\\x00"``.

    The CRC-32C of the payload is appended big-endian before stuffing.
    """
    if len(payload) > MAX_PAYLOAD:
        raise ValueError(f"payload of {len(payload)} bytes exceeds MAX_PAYLOAD={MAX_PAYLOAD}")
    payload = bytes(payload)
    return cobs_encode(payload + crc32c(payload).to_bytes(4, "big")) + b"\x00"


def datagram(payload: bytes) -> bytes:
    """One UDP datagram for ``payload``: ``payload + CRC32C(payload)`` (big-endian)."""
    if len(payload) > MAX_PAYLOAD:
        raise ValueError(f"payload of {len(payload)} bytes exceeds MAX_PAYLOAD={MAX_PAYLOAD}")
    payload = bytes(payload)
    return payload + crc32c(payload).to_bytes(4, "big")


def parse_datagram(data: bytes) -> bytes:
    """Check and strip the CRC of one datagram.

    Returns
    -------
    bytes
        The payload.

    Raises
    ------
    FrameError
        ``reason`` ``"too_short"`` (under 5 bytes), ``"oversize"`` (over
        :data:`MAX_DATAGRAM`) or ``"bad_crc"``.
    """
    if type(data) is not bytes:
        data = bytes(data)
    n = len(data)
    if n < CRC_LEN + 1:
        raise FrameError("too_short", f"datagram of {n} bytes is shorter than 5")
    if n > MAX_DATAGRAM:
        raise FrameError("oversize", f"datagram of {n} bytes exceeds {MAX_DATAGRAM}")
    crc = crc32c_kernel(data, 0, n - CRC_LEN, 0)
    if crc != int.from_bytes(data[n - CRC_LEN:], "big"):
        raise FrameError("bad_crc", "datagram CRC-32C mismatch")
    return data[:n - CRC_LEN]


class DatagramReader:
    """:func:`parse_datagram` that never raises; counts like :class:`StreamDeframer`."""

    def __init__(self) -> None:
        self.counters: dict[str, int] = dict.fromkeys(LINK_COUNTERS, 0)

    def feed(self, data: bytes) -> list[bytes]:
        """Return ``[payload]`` for a good datagram, ``[]`` otherwise (counted)."""
        try:
            payload = parse_datagram(data)
        except FrameError as exc:
            self.counters[exc.reason] += 1
            return []
        except Exception:
            self.counters["too_short"] += 1
            return []
        self.counters["frames_ok"] += 1
        return [payload]


@njit(cache=True)
def _unstuff_at(src, start, end, dst, base, cap):  # pragma: no cover - compiled
    """COBS-decode ``src[start:end]`` into ``dst[base:base + cap]``, check the CRC.

    Returns the payload length, or -1 COBS error, -2 under 5 bytes, -3 bad CRC, -4 over
    ``cap`` bytes (see :func:`unstuff_check_kernel`).
    """
    i = start
    n = 0
    while i < end:
        code = src[i]
        if code == 0:
            return -1
        i += 1
        k = code - 1
        if i + k > end:
            return -1
        if n + k > cap:
            return -4
        for j in range(k):
            dst[base + n + j] = src[i + j]
        n += k
        i += k
        if code != 0xFF and i < end:
            if n >= cap:
                return -4
            dst[base + n] = 0
            n += 1
    if n < 5:
        return -2
    m = n - 4
    c = crc32c_update(dst, base, base + m, np.uint32(0xFFFFFFFF)) ^ np.uint32(0xFFFFFFFF)
    b = base + m
    got = (np.uint32(dst[b]) << 24) | (np.uint32(dst[b + 1]) << 16) | (
        np.uint32(dst[b + 2]) << 8) | np.uint32(dst[b + 3])
    if c != got:
        return -3
    return m


@njit(cache=True)
def unstuff_check_kernel(src, start, end, dst):  # pragma: no cover - compiled
    """COBS-decode ``src[start:end]`` into ``dst`` and check the trailing CRC-32C.

    Parameters
    ----------
    src : bytes or ndarray of uint8
        Stream buffer.
    start, end : int
        Range of one encoded frame (no delimiter).
    dst : ndarray of uint8
        Output buffer, at least ``MAX_PAYLOAD + CRC_LEN`` long.

    Returns
    -------
    int
        Payload length (CRC removed) when good; -1 COBS error, -2 decoded frame under
        5 bytes, -3 CRC mismatch, -4 too large for ``dst``.
    """
    return _unstuff_at(src, start, end, dst, 0, dst.shape[0])


@njit(cache=True)
def deframe_kernel(buf, discarding, max_encoded, cap, out, offs, lens, counts):
    """Split ``buf`` at every 0x00 and decode each complete frame (one call per chunk).

    Parameters
    ----------
    buf : bytes or ndarray of uint8
        Pending bytes plus the new chunk.
    discarding : bool
        True when the previous chunk ended inside an oversize run (drop to the next 0x00).
    max_encoded : int
        Longest allowed encoded frame (:data:`MAX_ENCODED`).
    cap : int
        Largest decoded frame, payload plus CRC (``MAX_PAYLOAD + CRC_LEN``).
    out : ndarray of uint8
        Payload area, at least ``len(buf) + 8`` long; good payloads are packed in order.
    offs, lens : ndarray of int64
        Filled with each good payload's offset and length in ``out``.
    counts : ndarray of int64
        Link counters in :data:`LINK_COUNTERS` order, incremented in place.

    Returns
    -------
    (n_good, consumed, discarding) : (int, int, bool)
        Good payloads written; bytes up to and including the last delimiter; the new
        discarding flag.
    """
    n = len(buf)
    pos = 0
    w = 0
    k = 0
    for i in range(n):
        if buf[i] != 0:
            continue
        seg = i - pos
        if discarding:
            discarding = False
        elif seg > max_encoded:
            counts[4] += 1
        elif seg > 0:
            r = _unstuff_at(buf, pos, i, out, w, cap)
            if r >= 0:
                offs[k] = w
                lens[k] = r
                k += 1
                w += r
                counts[0] += 1
            elif r == -1:
                counts[2] += 1
            elif r == -2:
                counts[3] += 1
            elif r == -3:
                counts[1] += 1
            else:
                counts[4] += 1
        pos = i + 1
    return k, pos, discarding


def unstuff_check_py(src: bytes, start: int, end: int, dst: bytearray | np.ndarray) -> int:
    """Plain-Python twin of :func:`unstuff_check_kernel` (same returns)."""
    cap = len(dst)
    out = bytearray()
    i = start
    while i < end:
        code = src[i]
        if code == 0:
            return -1
        i += 1
        if i + code - 1 > end:
            return -1
        out += src[i:i + code - 1]
        i += code - 1
        if code != 0xFF and i < end:
            out.append(0)
        if len(out) > cap:
            return -4
    if len(out) < 5:
        return -2
    m = len(out) - 4
    if crc32c_py(out[:m]) != int.from_bytes(out[m:], "big"):
        return -3
    dst[:len(out)] = out
    return m


_KERNEL_REASON = {-1: "cobs_error", -2: "too_short", -3: "bad_crc", -4: "oversize"}


class StreamDeframer:
    """Split a byte stream into frame payloads; survives garbage and torn frames.

    Bytes accumulate until a 0x00 delimiter. Each non-empty run between delimiters is
    COBS-decoded and its CRC-32C checked; good payloads are returned, bad ones counted.
    A run longer than :data:`MAX_ENCODED` is counted once as ``"oversize"`` and dropped
    up to the next delimiter. Empty runs (repeated 0x00) are ignored, so a sender may
    put an extra 0x00 before a frame to resynchronise the receiver.

    Attributes
    ----------
    counters : dict of str to int
        :data:`LINK_COUNTERS`: ``frames_ok``, ``bad_crc``, ``cobs_error``,
        ``too_short``, ``oversize`` (a fresh dict on each access).
    """

    def __init__(self) -> None:
        self._counts = np.zeros(len(LINK_COUNTERS), dtype=np.int64)
        self._pending = b""
        self._discarding = False
        self._out = np.empty(8192, dtype=np.uint8)
        self._offs = np.empty(1024, dtype=np.int64)
        self._lens = np.empty(1024, dtype=np.int64)

    @property
    def counters(self) -> dict[str, int]:
        """Link counters by name."""
        return dict(zip(LINK_COUNTERS, self._counts.tolist(), strict=True))

    def reset(self) -> None:
        """Drop any partial frame (e.g. after the link was reopened); keep counters."""
        self._pending = b""
        self._discarding = False

    def feed(self, data: bytes) -> list[bytes]:
        """Add received bytes; return the payloads of the frames they complete.

        Never raises on any byte content.
        """
        buf = self._pending + data if self._pending else bytes(data)
        n = len(buf)
        if len(self._out) < n + 8:
            self._out = np.empty(max(2 * len(self._out), n + 8), dtype=np.uint8)
        if len(self._offs) < n // 6 + 1:  # a good frame takes at least 6 bytes
            size = max(2 * len(self._offs), n // 6 + 1)
            self._offs = np.empty(size, dtype=np.int64)
            self._lens = np.empty(size, dtype=np.int64)
        k, pos, self._discarding = deframe_kernel(
            buf, self._discarding, MAX_ENCODED, MAX_PAYLOAD + CRC_LEN, self._out, self._offs,
            self._lens, self._counts)
        rest = n - pos
        if self._discarding:
            self._pending = b""
        elif rest > MAX_ENCODED:
            self._counts[4] += 1
            self._discarding = True
            self._pending = b""
        else:
            self._pending = buf[pos:] if rest else b""
        if not k:
            return []
        lens = self._lens[:k].tolist()
        offs = self._offs[:k].tolist()
        blob = self._out[:offs[-1] + lens[-1]].tobytes()
        return [blob[o:o + m] for o, m in zip(offs, lens, strict=True)]


def deframe_py(buf: bytes, discarding: bool) -> tuple[list[bytes], int, bool, dict]:
    """Plain-Python twin of :func:`deframe_kernel` (payloads instead of offsets).

    Returns
    -------
    (payloads, consumed, discarding, counts)
    """
    counts = dict.fromkeys(LINK_COUNTERS, 0)
    out: list[bytes] = []
    dst = bytearray(MAX_PAYLOAD + CRC_LEN)
    pos = 0
    while True:
        i = buf.find(b"\x00", pos)
        if i < 0:
            break
        seg = i - pos
        if discarding:
            discarding = False
        elif seg > MAX_ENCODED:
            counts["oversize"] += 1
        elif seg:
            r = unstuff_check_py(buf, pos, i, dst)
            if r >= 0:
                out.append(bytes(dst[:r]))
                counts["frames_ok"] += 1
            else:
                counts[_KERNEL_REASON[r]] += 1
        pos = i + 1
    return out, pos, discarding, counts


