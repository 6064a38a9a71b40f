"""Twin of ``advisory/io/cobs.py``: the COBS decoder written for a reader.

References
----------
S. Cheshire and M. Baker, "Consistent Overhead Byte Stuffing", IEEE/ACM Transactions on
Networking 7(2), 159-172, 1999 (code-block definition).
"""

from __future__ import annotations

from advisory.io.cobs import (
    ERR_EMPTY,
    ERR_NO_ROOM,
    ERR_TRUNCATED,
    ERR_ZERO_BYTE,
    CobsError,
    cobs_error_text,
)


def cobs_decode_into_twin(src: bytes, start: int, end: int, dst: bytearray | object,
                          base: int, cap: int) -> int:
    """Twin of :func:`advisory.io.cobs.cobs_decode_into` (same arguments and returns).

    Decodes the whole range into a fresh buffer, then writes it to ``dst[base:]``; the
    error codes come out in the kernel's order (truncation before lack of room).
    """
    if end <= start:
        return ERR_EMPTY
    out = bytearray()
    i = start
    while i < end:
        code = src[i]
        if code == 0:
            return ERR_ZERO_BYTE
        i += 1
        block = src[i:i + code - 1]
        if i + code - 1 > end:
            return ERR_TRUNCATED
        if len(out) + len(block) > cap:
            return ERR_NO_ROOM
        if 0 in block:
            return ERR_ZERO_BYTE
        out += block
        i += code - 1
        if code != 0xFF and i < end:  # the block stands for its bytes and a zero
            if len(out) >= cap:
                return ERR_NO_ROOM
            out.append(0)
    dst[base:base + len(out)] = out  # type: ignore[index]  # bytearray or uint8 array
    return len(out)


def cobs_decode_twin(data: bytes | bytearray | memoryview) -> bytes:
    """Twin of :func:`advisory.io.cobs.cobs_decode` (same results and errors)."""
    src = bytes(data)
    dst = bytearray(max(len(src), 1))
    n = cobs_decode_into_twin(src, 0, len(src), dst, 0, len(dst))
    if n < 0:
        raise CobsError(cobs_error_text(n))
    return bytes(dst[:n])
