"""CRC-32C (Castagnoli), the frame check used on every byte stream and datagram.

Parameters of the code: polynomial 0x1EDC6F41 (reflected form 0x82F63B78), initial
value 0xFFFFFFFF, input and output reflected, final XOR 0xFFFFFFFF. Check value for the
nine ASCII bytes ``b"123456789"`` is 0xE3069283.

References
----------
RFC 3720 (iSCSI), section 12.1 and appendix B.4 (CRC-32C definition and examples).
G. Castagnoli, S. Braeuer, M. Herrmann, "Optimization of cyclic redundancy-check codes
with 24 and 32 parity bits", IEEE Trans. Communications 41(6), 1993 (the polynomial).

Notes
-----
``crc32c_kernel`` is a numba ``njit(cache=True)`` slicing-by-8 loop over a plain byte
buffer (``bytes`` or a ``uint8`` array); its plain-Python byte-wise twin, the readable
definition, is ``crc32c_twin`` in ``tests/twins/crc32c.py`` (parity test).
"""

from __future__ import annotations

import numpy as np

from advisory.jit import njit

POLY_REFLECTED = 0x82F63B78  #: CRC-32C polynomial, bit-reflected (RFC 3720, 12.1)
CHECK_VALUE = 0xE3069283  #: CRC-32C of b"123456789" (RFC 3720, B.4)


def _make_tables() -> np.ndarray:
    """Lookup tables for the reflected CRC-32C polynomial, ``uint32[8, 256]``.

    Row 0 is the classic byte-wise table; row k advances a byte's contribution by k more
    bytes, for slicing-by-8 (Kounavis and Berry, "A systematic approach to building high
    performance software-based CRC generators", IEEE ISCC 2005).
    """
    tables = np.zeros((8, 256), dtype=np.uint32)
    for i in range(256):
        c = i
        for _ in range(8):
            c = (c >> 1) ^ POLY_REFLECTED if c & 1 else c >> 1
        tables[0, i] = c
    for k in range(1, 8):
        for i in range(256):
            c = int(tables[k - 1, i])
            tables[k, i] = (c >> 8) ^ int(tables[0, c & 0xFF])
    return tables


TABLES = _make_tables()
TABLE = TABLES[0].copy()  #: the byte-wise table (also used by the C binding)


@njit(cache=True)
def crc32c_update(data, start, end, c):  # pragma: no cover - compiled
    """Advance the CRC-32C register ``c`` (pre-inverted) over ``data[start:end]``.

    Slicing-by-8 over whole 8-byte groups, byte-wise for the rest; returns the register
    (the caller applies the final inversion).
    """
    t = TABLES
    c = np.uint32(c)
    i = start
    while i + 8 <= end:
        lo = c ^ (np.uint32(data[i]) | (np.uint32(data[i + 1]) << 8)
                  | (np.uint32(data[i + 2]) << 16) | (np.uint32(data[i + 3]) << 24))
        c = (t[7, lo & 0xFF] ^ t[6, (lo >> 8) & 0xFF] ^ t[5, (lo >> 16) & 0xFF]
             ^ t[4, lo >> 24] ^ t[3, data[i + 4]] ^ t[2, data[i + 5]] ^ t[1, data[i + 6]]
             ^ t[0, data[i + 7]])
        i += 8
    while i < end:
        c = t[0, (c ^ data[i]) & 0xFF] ^ (c >> 8)
        i += 1
    return c


@njit(cache=True)
def crc32c_kernel(data, start, end, crc):  # pragma: no cover - compiled
    """CRC-32C of ``data[start:end]`` continuing from ``crc`` (0 for a fresh CRC).

    Parameters
    ----------
    data : bytes or ndarray of uint8
        Buffer to read.
    start, end : int
        Half-open byte range inside ``data``.
    crc : int
        CRC of the preceding bytes (0 to start), as returned by an earlier call.

    Returns
    -------
    int
        CRC-32C, 0 <= value < 2**32.
    """
    c = np.uint32((crc ^ 0xFFFFFFFF) & 0xFFFFFFFF)
    return crc32c_update(data, start, end, c) ^ np.uint32(0xFFFFFFFF)


def crc32c(data: bytes | bytearray | memoryview, crc: int = 0) -> int:
    """CRC-32C of a byte string (RFC 3720, 12.1), optionally continuing ``crc``.

    Parameters
    ----------
    data : bytes-like
        Bytes to check.
    crc : int, optional
        CRC of the preceding bytes when computing over several pieces; 0 to start.

    Returns
    -------
    int
        The CRC, 0 <= value < 2**32. ``crc32c(b"123456789") == 0xE3069283``.
    """
    if type(data) is not bytes:
        data = bytes(data)
    return int(crc32c_kernel(data, 0, len(data), crc))
