"""Twin of ``advisory/io/crc32c.py``: CRC-32C one byte at a time.

References
----------
RFC 3720 (iSCSI), section 12.1 (CRC-32C: reflected polynomial 0x82F63B78, initial value
and final XOR 0xFFFFFFFF) and appendix B.4 (examples).
"""

from __future__ import annotations


def _table() -> tuple[int, ...]:
    """Byte-wise table of the reflected polynomial 0x82F63B78 (RFC 3720, 12.1)."""
    out = []
    for i in range(256):
        c = i
        for _ in range(8):
            c = (c >> 1) ^ 0x82F63B78 if c & 1 else c >> 1
        out.append(c)
    return tuple(out)


_TABLE = _table()


def crc32c_twin(data: bytes | bytearray | memoryview, crc: int = 0) -> int:
    """Plain-Python twin of :func:`advisory.io.crc32c.crc32c` (same result, slower)."""
    c = (crc ^ 0xFFFFFFFF) & 0xFFFFFFFF
    for b in bytes(data):
        c = _TABLE[(c ^ b) & 0xFF] ^ (c >> 8)
    return c ^ 0xFFFFFFFF
