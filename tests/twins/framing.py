"""Twins of ``advisory/io/framing.py``: unstuffing with the CRC check, and deframing.

References
----------
``docs/interface.md``, section 9 (a stream frame is ``COBS(payload + CRC-32C) + 0x00``;
what the receiver counts). RFC 3720, 12.1 (CRC-32C, big-endian trailer here).
"""

from __future__ import annotations

from advisory.io.cobs import ERR_NO_ROOM
from advisory.io.framing import ERR_BAD_CRC, ERR_TOO_SHORT
from advisory.schema import LINK_COUNTERS
from tests.twins.cobs import cobs_decode_into_twin
from tests.twins.crc32c import crc32c_twin


def unstuff_check_twin(src: bytes, start: int, end: int, dst, base: int, cap: int) -> int:
    """Twin of :func:`advisory.io.framing.unstuff_check_kernel` (same arguments, returns)."""
    n = cobs_decode_into_twin(src, start, end, dst, base, cap)
    if n < 0:
        return n
    if n < 5:  # the CRC's 4 bytes and at least one payload byte
        return ERR_TOO_SHORT
    frame = bytes(dst[base:base + n])
    payload, trailer = frame[:-4], frame[-4:]
    if crc32c_twin(payload) != int.from_bytes(trailer, "big"):
        return ERR_BAD_CRC
    return len(payload)


def _reason(code: int) -> str:
    """The link counter a failed :func:`unstuff_check_twin` result is counted under."""
    if code == ERR_BAD_CRC:
        return "bad_crc"
    if code == ERR_TOO_SHORT:
        return "too_short"
    if code == ERR_NO_ROOM:
        return "oversize"
    return "cobs_error"


def deframe_twin(buf: bytes, discarding: bool, max_encoded: int, cap: int, out, offs, lens,
                 counts) -> tuple[int, int, bool]:
    """Twin of :func:`advisory.io.framing.deframe_kernel` (same arguments and returns).

    Fills ``out``, ``offs``, ``lens`` and adds to ``counts`` (LINK_COUNTERS order) in
    place, like the kernel.
    """
    slot = {name: i for i, name in enumerate(LINK_COUNTERS)}
    written = 0
    good = 0
    pos = 0
    while True:
        i = buf.find(b"\x00", pos)
        if i < 0:
            break
        length = i - pos
        if discarding:  # the tail of an oversize run: drop it, resume after the delimiter
            discarding = False
        elif length > max_encoded:
            counts[slot["oversize"]] += 1
        elif length:  # empty runs (repeated delimiters) are ignored
            r = unstuff_check_twin(buf, pos, i, out, written, cap)
            if r >= 0:
                offs[good], lens[good] = written, r
                good += 1
                written += r
                counts[slot["frames_ok"]] += 1
            else:
                counts[slot[_reason(r)]] += 1
        pos = i + 1
    return good, pos, discarding
