"""Canonical air frames read without a general MessagePack unpacker (the hot path).

An air-data frame written by :func:`advisory.io.messages.encode_air` has one of three
exact byte layouts: a map 16 of the header keys and :data:`advisory.schema.AIR_FIELDS`
in canonical order, every number a float 64, each optional field a float 64 or nil,
cut after the first release's fields (17 entries), after the pitch and load pair (19)
or after the flight-guidance targets (22): the later groups
(:data:`advisory.schema.AIR_LATER_GROUPS`) are written up to the last one the sender has
a value of (ICD section 4). The kernel here reads those layouts straight from the
bytes; anything else (a different key order, ints, float 32, extra keys, a later group
left out before one that is written) makes it answer "not canonical" and the caller
falls back to the general decoder, which applies every rule of the ICD
(``docs/interface.md``, "Decoding rules").

References
----------
MessagePack specification, https://github.com/msgpack/msgpack/blob/master/spec.md
(map 16 = 0xDE, positive fixint, uint 8/16/32 = 0xCC/0xCD/0xCE, float 64 = 0xCB,
nil = 0xC0, fixstr).

Notes
-----
``air_canonical_kernel`` is a numba ``njit(cache=True)`` kernel over a plain byte buffer.
Its twin is the general msgpack-python path of :func:`advisory.io.messages.decode_frame`
(parity tests in ``tests/test_wire_frames.py``).
"""

from __future__ import annotations

import msgpack  # type: ignore[import-untyped]  # msgpack ships no type hints
import numpy as np

from advisory.jit import njit
from advisory.schema import (
    AIR_FIELDS,
    AIR_LATER_GROUPS,
    AIR_LATER_OPTIONAL,
    AIR_REQUIRED,
    WIRE_FORMAT_VERSION,
)


def _air_template() -> tuple[np.ndarray, np.ndarray]:
    """Canonical bytes of an air frame's keys: header prefix (after the 3-byte map 16
    head), then each field's key."""
    head = (msgpack.packb("v") + msgpack.packb(WIRE_FORMAT_VERSION)
            + msgpack.packb("type") + msgpack.packb("air") + msgpack.packb("seq"))
    keys = [head, msgpack.packb("utc_s")] + [msgpack.packb(k) for k in AIR_FIELDS]
    offsets = np.cumsum([0] + [len(k) for k in keys]).astype(np.int64)
    return np.frombuffer(b"".join(keys), dtype=np.uint8).copy(), offsets


_AIR_KEYS, _AIR_KEY_OFFSETS = _air_template()
#: ``mask`` of :func:`air_canonical_kernel` when every field is a float.
AIR_FULL_MASK = (1 << len(AIR_FIELDS)) - 1
#: Indices in AIR_FIELDS of the optional fields (nil allowed).
AIR_OPTIONAL_IDX = tuple(range(len(AIR_REQUIRED), len(AIR_FIELDS)))
_N_ALL = len(AIR_FIELDS)
_N_FIRST = _N_ALL - len(AIR_LATER_OPTIONAL)
_N_REQ = len(AIR_REQUIRED)
#: Fields of each canonical layout (ICD section 4): the first release's, then one more
#: later group each (13, 15 and 18 fields; map sizes 17, 19 and 22 with the header).
AIR_LAYOUT_FIELDS = tuple(_N_FIRST + sum(len(g) for g in AIR_LATER_GROUPS[:k])
                          for k in range(len(AIR_LATER_GROUPS) + 1))
_LAYOUT_FIELDS = np.array(AIR_LAYOUT_FIELDS, dtype=np.int64)
if _N_ALL != 18:  # the kernel's result tuple is written out for 18 fields
    raise ImportError(f"air_canonical_kernel returns 18 fields, AIR_FIELDS has {_N_ALL}: "
                      "extend its result tuples")


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
        ``(mask, seq, utc_s, f0 .. f17)``: ``mask`` is -1 when ``buf`` is not in one of
        the three exact canonical layouts (map 16 of 17, 19 or 22 entries, see
        :data:`AIR_LAYOUT_FIELDS`; the caller then uses the general decoder), else bit i
        set when field i of ``AIR_FIELDS`` is a float (clear: nil or absent, value NaN
        or 0.0 placeholder).
    """
    keys = _AIR_KEYS
    offs = _AIR_KEY_OFFSETS
    layouts = _LAYOUT_FIELDS
    n = len(buf)
    bits = np.zeros(_N_ALL + 1, dtype=np.uint64)
    vals = bits.view(np.float64)
    bits[_N_FIRST + 1:] = np.uint64(0x7FF8000000000000)  # NaN: a later group absent
    bad = (-1, 0, vals[0], vals[1], vals[2], vals[3], vals[4], vals[5], vals[6], vals[7],
           vals[8], vals[9], vals[10], vals[11], vals[12], vals[13], vals[14], vals[15],
           vals[16], vals[17], vals[18])
    if n < 3 or buf[0] != 0xDE or buf[1] != 0:
        return bad
    nf = -1
    for j in range(len(layouts)):
        if buf[2] == 4 + layouts[j]:
            nf = layouts[j]
    if nf < 0:
        return bad
    p = 3
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
    for k in range(nf + 1):  # utc_s then the fields
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
        elif c == 0xC0 and k > _N_REQ:  # nil allowed for the optional fields only
            pass
        else:
            return bad
    if p != n:
        return bad
    return (mask, seq, vals[0], vals[1], vals[2], vals[3], vals[4], vals[5], vals[6],
            vals[7], vals[8], vals[9], vals[10], vals[11], vals[12], vals[13], vals[14],
            vals[15], vals[16], vals[17], vals[18])
