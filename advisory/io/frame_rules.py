"""The decoding rules for one unpacked frame: header, then each type's fields.

The interface control document (``docs/interface.md``, "Decoding rules") gives the rules
and their order; the first rule broken is reported as one reason code of
:data:`advisory.schema.DECODE_REASONS` with a message naming the field and the value.
:func:`advisory.io.messages.decode_frame` unpacks the payload and calls
:func:`check_map`; this general path is also the twin of the canonical air-frame kernel
(:mod:`advisory.io.air_fastpath`) in the parity tests.
"""

from __future__ import annotations

import operator
from typing import Any

from advisory.schema import (
    ADV_FIELDS,
    ADV_FLAGS,
    ADV_OPTIONAL,
    ADV_STATUSES,
    ADV_STATUSES_V1,
    AIR_FIELDS,
    AIR_LATER_OPTIONAL,
    AIR_OPTIONAL,
    AIR_REQUIRED,
    COUNTER_NAME_MAX_BYTES,
    CUE_MAX_BYTES,
    HEADER_KEYS,
    MAX_COUNTERS,
    MAX_DEPTH,
    READ_VERSIONS,
    REASON_MAX_BYTES,
    SEQ_MAX,
    STATUS_FIELDS,
    STATUS_IDENTITY_FIELDS,
    STATUS_STATES,
    ZONE_ID_MAX_BYTES,
)

_MISSING = object()
IDENTITY_MAX_BYTES = 31  #: longest identity value in a status frame (``sw``; ICD section 6)


class RejectError(Exception):
    """A map that breaks a decoding rule: ``reason`` (a DECODE_REASONS code), ``message``."""

    def __init__(self, reason: str, message: str) -> None:
        self.reason = reason
        self.message = message


def depth_ok(obj: Any, limit: int = MAX_DEPTH) -> bool:
    """True when containers in ``obj`` nest at most ``limit`` deep (obj itself = 1)."""
    t = type(obj)
    if t is dict:
        if limit < 1:
            return False
        return all(depth_ok(v, limit - 1) for v in obj.values())
    if t is list:
        if limit < 1:
            return False
        return all(depth_ok(v, limit - 1) for v in obj)
    return True


def _need(m: dict, name: str) -> Any:
    value = m.get(name, _MISSING)
    if value is _MISSING:
        raise RejectError("missing_field", f"field {name!r} is missing")
    return value


def _bad_type(name: str, value: Any, expected: str) -> RejectError:
    return RejectError("bad_type", f"field {name!r} must be {expected}, got {_short(value)}")


def _short(value: Any) -> str:
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def _dec_text(name: str, value: Any, max_bytes: int) -> str:
    if type(value) is not str:
        raise _bad_type(name, value, "a string")
    if len(value) > max_bytes or (not value.isascii()
                                  and len(value.encode("utf-8")) > max_bytes):
        raise RejectError("bad_value", f"field {name!r} is longer than {max_bytes} bytes: "
                                   f"{_short(value)}")
    if "\x00" in value:
        raise RejectError("bad_value", f"field {name!r} contains NUL: {_short(value)}")
    return value


#: The fields of the first release (every air frame an encoder writes has these keys).
_AIR_FIRST = AIR_FIELDS[:len(AIR_FIELDS) - len(AIR_LATER_OPTIONAL)]
_AIR_GETTER = operator.itemgetter(*_AIR_FIRST)
_FLOAT_ONLY = frozenset((float,))
_FLOAT_OR_NIL = frozenset((float, type(None)))
_FLOAT_NIL_OR_MISSING = frozenset((float, type(None), object))  # object: _MISSING


def _dec_air(m: dict) -> tuple[dict, int]:
    """The air-data fields of map ``m`` and how many of its keys they are.

    A quick path takes the maps every encoder writes (the first release's keys present,
    required ones float, optional ones float or nil, each later key of
    :data:`advisory.schema.AIR_LATER_OPTIONAL` float, nil or absent: any of the layouts
    of ICD section 4, and any other subset of the later keys); anything else takes the
    full rules below, which give the same answer and name the first field that breaks
    them.
    """
    try:  # quick path: every first-release key present, required all float, optional
        vals = _AIR_GETTER(m)  # float or nil; each later key float, nil or absent
    except KeyError:
        pass
    else:
        if (_FLOAT_ONLY.issuperset(map(type, vals[:8]))
                and _FLOAT_OR_NIL.issuperset(map(type, vals[8:]))):
            later = tuple(m.get(k, _MISSING) for k in AIR_LATER_OPTIONAL)
            if _FLOAT_OR_NIL.issuperset(map(type, later)):  # every later key written
                return dict(zip(AIR_FIELDS, vals + later)), len(AIR_FIELDS)
            if _FLOAT_NIL_OR_MISSING.issuperset(map(type, later)):
                missing = sum(x is _MISSING for x in later)
                later = tuple(None if x is _MISSING else x for x in later)
                return dict(zip(AIR_FIELDS, vals + later)), len(AIR_FIELDS) - missing
    out: dict[str, Any] = {}
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
            raise RejectError("missing_field", f"field {name!r} is missing")
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


def _dec_adv(m: dict, version: int = 2) -> tuple[dict, int]:
    out: dict[str, Any] = {}
    present = 0
    status = _need(m, "status")
    if type(status) is not str:
        raise _bad_type("status", status, "a string")
    statuses = ADV_STATUSES if version >= 2 else ADV_STATUSES_V1
    if status not in statuses:
        raise RejectError("bad_value", f"field 'status' must be one of {', '.join(statuses)}"
                                   f" (version {version}), got {_short(status)}")
    out["status"] = status
    present += 1
    for name in ADV_FIELDS[1:]:
        x = m.get(name, _MISSING)
        if x is not _MISSING:
            present += 1
        if name == "zone_id":
            out[name] = None if x is None or x is _MISSING else _dec_text(
                name, x, ZONE_ID_MAX_BYTES)
        elif name in ADV_FLAGS:
            if x is _MISSING:
                if name in _ADV_OPTIONAL:  # issue 13: absent means false
                    out[name] = False
                    continue
                raise RejectError("missing_field", f"field {name!r} is missing")
            if type(x) is not bool:
                raise _bad_type(name, x, "true or false")
            out[name] = x
        elif name == "cue":
            if x is _MISSING:
                raise RejectError("missing_field", f"field {name!r} is missing")
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


_ADV_OPTIONAL = frozenset(ADV_OPTIONAL)


def _dec_status(m: dict) -> tuple[dict, int]:
    state = _need(m, "state")
    if type(state) is not str:
        raise _bad_type("state", state, "a string")
    if state not in STATUS_STATES:
        raise RejectError("bad_value", f"field 'state' must be one of {', '.join(STATUS_STATES)}, "
                                   f"got {_short(state)}")
    reason = _dec_text("reason", _need(m, "reason"), REASON_MAX_BYTES)
    counters = _need(m, "counters")
    if type(counters) is not dict:
        raise _bad_type("counters", counters, "a map")
    if len(counters) > MAX_COUNTERS:
        raise RejectError("bad_value", f"field 'counters' has {len(counters)} entries, "
                                   f"more than {MAX_COUNTERS}")
    out: dict[str, Any] = {}
    for name, value in counters.items():
        if type(name) is not str:
            raise _bad_type("counters", name, "a map with string keys")
        _dec_text("counters", name, COUNTER_NAME_MAX_BYTES)
        if not name:
            raise RejectError("bad_value", "field 'counters' has an empty counter name")
        if type(value) is not int:
            raise _bad_type(f"counters.{name}", value, "an unsigned integer")
        if value < 0:
            raise RejectError("bad_value", f"counter {name!r} is negative: {value}")
        out[name] = value
    fields: dict[str, Any] = {"state": state, "reason": reason, "counters": out}
    present = 3
    for name in STATUS_IDENTITY_FIELDS:  # optional (ICD section 6): software, digests
        value = m.get(name, _MISSING)
        if value is not _MISSING:
            fields[name] = _dec_text(name, value, IDENTITY_MAX_BYTES)
            present += 1
    return fields, present


_DECODERS = {"air": _dec_air, "adv": _dec_adv, "status": _dec_status}


_KNOWN_KEYS = {kind: frozenset(HEADER_KEYS + fields) for kind, fields in (
    ("air", AIR_FIELDS), ("adv", ADV_FIELDS),
    ("status", STATUS_FIELDS + STATUS_IDENTITY_FIELDS))}
_ANY_VERSION = frozenset(v for vs in READ_VERSIONS.values() for v in vs)
_VERSIONS_TEXT = ", ".join(f"{k} {'/'.join(map(str, vs))}" for k, vs in READ_VERSIONS.items())
_KEY_NAME_MAX = 47  #: unknown key names are reported cut to this many characters


def unknown_keys(m: dict, kind: str) -> list[str]:
    """Names of the keys of frame map ``m`` (of type ``kind``) that the ICD does not define
    (bin keys shown as their ``repr``), each cut to 47 characters."""
    known = _KNOWN_KEYS[kind]
    return [(k if type(k) is str else repr(k))[:_KEY_NAME_MAX] for k in m if k not in known]


def check_map(m: Any, unknown: list[str] | None = None) -> tuple[str, int, float, dict, int]:
    """Check an unpacked payload against the decoding rules, in the ICD's order.

    Parameters
    ----------
    m : object
        What msgpack-python unpacked from the payload.
    unknown : list of str, optional
        Receives the names of unknown keys (ignored by the rules, ICD section 8, but
        counted and reported by :class:`advisory.io.messages.FrameDecoder`).

    Returns
    -------
    (type, seq, utc_s, fields, version)
        The parts of a :class:`advisory.io.messages.Frame`.

    Raises
    ------
    RejectError
        The first rule broken (``docs/interface.md``, "Decoding rules").
    """
    if type(m) is not dict:
        raise RejectError("not_a_map", f"payload is a MessagePack {type(m).__name__}, not a map")
    v = m.get("v", _MISSING)
    if type(v) is not int:
        if v is _MISSING:
            raise RejectError("missing_field", "field 'v' is missing")
        raise _bad_type("v", v, "an integer")
    if v not in _ANY_VERSION:
        raise RejectError("unsupported_version", f"field 'v' = {v}: format version not "
                                                  f"supported (this reads {_VERSIONS_TEXT})")
    kind = m.get("type", _MISSING)
    if type(kind) is not str:
        if kind is _MISSING:
            raise RejectError("missing_field", "field 'type' is missing")
        raise _bad_type("type", kind, "a string")
    dec = _DECODERS.get(kind)
    if dec is None:
        raise RejectError("unknown_type", f"field 'type' = {_short(kind)}: unknown frame type")
    if v not in READ_VERSIONS[kind]:
        raise RejectError("unsupported_version", f"field 'v' = {v}: format version not "
                                                  f"supported for {kind!r} frames (this "
                                                  f"reads {_VERSIONS_TEXT})")
    seq = m.get("seq", _MISSING)
    if type(seq) is not int:
        if seq is _MISSING:
            raise RejectError("missing_field", "field 'seq' is missing")
        raise _bad_type("seq", seq, "an integer")
    if not 0 <= seq <= SEQ_MAX:
        raise RejectError("bad_value", f"field 'seq' = {seq} is outside 0..{SEQ_MAX}")
    utc = m.get("utc_s", _MISSING)
    t = type(utc)
    if t is not float:
        if t is int:
            utc = float(utc)
        elif utc is _MISSING:
            raise RejectError("missing_field", "field 'utc_s' is missing")
        else:
            raise _bad_type("utc_s", utc, "a number")
    fields, present = _dec_adv(m, v) if kind == "adv" else dec(m)
    if len(m) != present + 4:
        if not depth_ok(m):
            raise RejectError("malformed", f"containers nested deeper than {MAX_DEPTH}")
        if unknown is not None:
            unknown.extend(unknown_keys(m, kind))
    return kind, seq, utc, fields, v
