"""Consistent Overhead Byte Stuffing (COBS): a byte string with no zero bytes.

COBS rewrites a packet so that it contains no 0x00, which then serves as the frame
delimiter on a byte stream. The packet is cut at each zero (plus one phantom zero at
its end); each piece becomes a *code block*: one code byte ``n`` (1..255) followed by
``n - 1`` data bytes, the block standing for those bytes followed by a zero, except
that code 0xFF stands for 254 data bytes **not** followed by a zero.

Conventions used here (the ICD, ``docs/interface.md``, repeats them):

* The encoder does not write a final ``0x01`` block after a packet that ends with a
  full 254-byte block (the common modern form). The decoder accepts both this form and
  the form with the extra ``0x01`` block written by the reference encoder of Cheshire
  and Baker, so either kind of sender interoperates.
* An empty input encodes to ``b"\\x01"``; an empty encoded string is invalid.

References
----------
S. Cheshire and M. Baker, "Consistent Overhead Byte Stuffing", IEEE/ACM Transactions on
Networking 7(2), 159-172, 1999 (code-block definition, reference encoder and decoder).

Notes
-----
``cobs_decode_into`` is a numba ``njit(cache=True)`` kernel over plain buffers, the
package's one COBS decoder (its plain-Python twin, ``cobs_decode_twin`` in
``tests/twins/cobs.py``, is checked against it by a parity test). The encoder runs at
the output rate only and is plain Python built on ``bytes.split`` (one ``join`` when
every piece between zeros is shorter than a full block, the common case).
"""

from __future__ import annotations

import numpy as np

from advisory.jit import njit

#: Kernel return codes (negative); a non-negative return is the decoded length.
ERR_EMPTY = -1
ERR_ZERO_BYTE = -2
ERR_TRUNCATED = -3
ERR_NO_ROOM = -4

_ERR_TEXT = {
    ERR_EMPTY: "empty COBS frame",
    ERR_ZERO_BYTE: "zero byte inside a COBS frame",
    ERR_TRUNCATED: "COBS code byte points past the end of the frame",
    ERR_NO_ROOM: "decoded frame larger than the output buffer",
}


#: The code byte of a block of ``n`` data bytes followed by a zero (``n`` < 254).
_CODE_BYTE = [bytes((n + 1,)) for n in range(254)]


class CobsError(ValueError):
    """Raised by :func:`cobs_decode` for a byte string that is not valid COBS."""


def cobs_max_encoded_len(n: int) -> int:
    """Largest COBS encoding of an ``n``-byte packet: ``n + n // 254 + 1``.

    The ``+1`` covers the first code byte; one more code byte per started 254-byte run
    (Cheshire and Baker 1999, section 3: overhead at most one byte in 254).
    """
    return n + n // 254 + 1


def cobs_encode(data: bytes | bytearray | memoryview) -> bytes:
    """Encode ``data`` with COBS (no zero byte in the result, no delimiter added).

    Parameters
    ----------
    data : bytes-like
        The packet.

    Returns
    -------
    bytes
        The encoded packet, ``1 <= len <= cobs_max_encoded_len(len(data))``.
    """
    chunks = bytes(data).split(b"\x00")
    if max(map(len, chunks)) < 254:  # the common case: one block per piece
        return b"".join([_CODE_BYTE[len(c)] + c for c in chunks])
    out = bytearray()
    last = len(chunks) - 1
    for k, chunk in enumerate(chunks):
        n = len(chunk)
        pos = 0
        while n - pos >= 254:
            out.append(0xFF)
            out += chunk[pos:pos + 254]
            pos += 254
        if k == last and n > 0 and pos == n:
            break  # ends on a full block: no trailing 0x01 (see module notes)
        out.append(n - pos + 1)
        out += chunk[pos:]
    return bytes(out)


@njit(cache=True)
def cobs_decode_into(src, start, end, dst, base, cap):  # pragma: no cover - compiled
    """Decode COBS ``src[start:end]`` into ``dst[base:base + cap]``.

    The one COBS decoder of the package: :func:`cobs_decode` and the stream deframer
    (:func:`advisory.io.framing.unstuff_check_kernel`) both use it.

    Parameters
    ----------
    src : bytes or ndarray of uint8
        Encoded bytes (without the 0x00 delimiter).
    start, end : int
        Half-open range of the encoded frame inside ``src``.
    dst : ndarray of uint8
        Output buffer.
    base, cap : int
        Where the decoded bytes start in ``dst``, and how many may be written.

    Returns
    -------
    int
        Decoded length (>= 0), or a negative error code: :data:`ERR_EMPTY`,
        :data:`ERR_ZERO_BYTE`, :data:`ERR_TRUNCATED` (a code byte points past the end;
        checked before room), :data:`ERR_NO_ROOM` (more than ``cap`` bytes).
    """
    if end <= start:
        return ERR_EMPTY
    i = start
    n = 0
    while i < end:
        code = src[i]
        if code == 0:
            return ERR_ZERO_BYTE
        i += 1
        k = code - 1
        if i + k > end:
            return ERR_TRUNCATED
        if n + k > cap:
            return ERR_NO_ROOM
        for j in range(k):
            b = src[i + j]
            if b == 0:
                return ERR_ZERO_BYTE
            dst[base + n + j] = b
        n += k
        i += k
        if code != 0xFF and i < end:
            if n >= cap:
                return ERR_NO_ROOM
            dst[base + n] = 0
            n += 1
    return n


@njit(cache=True)
def cobs_decode_kernel(src, start, end, dst):  # pragma: no cover - compiled
    """Decode COBS ``src[start:end]`` into ``dst`` (from index 0, up to its length).

    Returns the decoded length, or a negative error code of :func:`cobs_decode_into`.
    """
    return cobs_decode_into(src, start, end, dst, 0, dst.shape[0])


def cobs_decode(data: bytes | bytearray | memoryview) -> bytes:
    """Decode one COBS-encoded packet (without its delimiter).

    Parameters
    ----------
    data : bytes-like
        Encoded packet.

    Returns
    -------
    bytes
        The original packet.

    Raises
    ------
    CobsError
        If ``data`` is empty, contains a zero byte, or a code byte points past its end.
    """
    if type(data) is not bytes:
        data = bytes(data)
    dst = np.empty(max(len(data), 1), dtype=np.uint8)
    n = cobs_decode_kernel(data, 0, len(data), dst)
    if n < 0:
        raise CobsError(_ERR_TEXT[int(n)])
    return dst[:n].tobytes()


def cobs_error_text(code: int) -> str:
    """Human text for a negative :func:`cobs_decode_kernel` return code."""
    return _ERR_TEXT.get(int(code), f"COBS error {code}")
