"""COBS and CRC-32C against their published definitions and worked examples."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from advisory.io.cobs import (
    CobsError,
    cobs_decode,
    cobs_decode_into,
    cobs_decode_kernel,
    cobs_encode,
    cobs_max_encoded_len,
)
from advisory.io.crc32c import CHECK_VALUE, crc32c, crc32c_kernel
from tests.twins.cobs import cobs_decode_into_twin, cobs_decode_twin
from tests.twins.crc32c import crc32c_twin

# ----------------------------------------------------------------------------- CRC-32C


def test_crc32c_check_value():
    # RFC 3720 (iSCSI), appendix B.4 / the CRC catalogue "check" value: CRC-32C of the
    # nine ASCII bytes "123456789" is 0xE3069283.
    assert crc32c(b"123456789") == 0xE3069283
    assert CHECK_VALUE == 0xE3069283
    assert crc32c_twin(b"123456789") == 0xE3069283


@pytest.mark.parametrize(("data", "expected"), [
    # RFC 3720, appendix B.4, CRC examples (value from memory: 32 bytes each).
    (bytes(32), 0x8A9136AA),
    (b"\xff" * 32, 0x62A8AB43),
    (bytes(range(32)), 0x46DD794E),
    (bytes(range(31, -1, -1)), 0x113FDB5C),
])
def test_crc32c_rfc3720_examples(data, expected):
    assert crc32c(data) == expected
    assert crc32c_twin(data) == expected


def test_crc32c_empty_is_zero():
    # Definition (RFC 3720, 12.1): init 0xFFFFFFFF and final XOR 0xFFFFFFFF cancel on
    # empty input.
    assert crc32c(b"") == 0


@settings(max_examples=200, deadline=None)
@given(st.binary(max_size=600), st.integers(0, 2**32 - 1))
def test_crc32c_kernel_matches_python_twin(data, start):
    # Parity of the numba kernel with its plain-Python twin (project rule for kernels).
    assert crc32c(data, start) == crc32c_twin(data, start)
    assert int(crc32c_kernel(np.frombuffer(data, dtype=np.uint8), 0, len(data), start)) \
        == crc32c_twin(data, start)


@settings(max_examples=100, deadline=None)
@given(st.binary(max_size=300), st.binary(max_size=300))
def test_crc32c_chains(a, b):
    # Property of the running CRC: computing over a then b equals computing over a + b.
    assert crc32c(b, crc32c(a)) == crc32c(a + b)


def test_crc32c_accepts_bytearray_and_memoryview():
    assert crc32c(bytearray(b"123456789")) == crc32c(memoryview(b"123456789")) == 0xE3069283


# -------------------------------------------------------------------------------- COBS

# Worked examples in the form popularised by the Wikipedia article "Consistent Overhead
# Byte Stuffing" (value from memory), built from the code-block rules of Cheshire and
# Baker (1999).
_RUN_254 = bytes(range(1, 255))  # 01 02 .. FE
WORKED = [
    (b"\x00", b"\x01\x01"),
    (b"\x00\x00", b"\x01\x01\x01"),
    (b"\x00\x11\x00", b"\x01\x02\x11\x01"),
    (b"\x11\x22\x00\x33", b"\x03\x11\x22\x02\x33"),
    (b"\x11\x22\x33\x44", b"\x05\x11\x22\x33\x44"),
    (b"\x11\x00\x00\x00", b"\x02\x11\x01\x01\x01"),
    (_RUN_254, b"\xff" + _RUN_254),
    (b"\x00" + _RUN_254, b"\x01\xff" + _RUN_254),
    (_RUN_254 + b"\xff", b"\xff" + _RUN_254 + b"\x02\xff"),
    (bytes(range(2, 256)) + b"\x00", b"\xff" + bytes(range(2, 256)) + b"\x01\x01"),
    (bytes(range(3, 256)) + b"\x00\x01", b"\xfe" + bytes(range(3, 256)) + b"\x02\x01"),
]


@pytest.mark.parametrize(("raw", "encoded"), WORKED)
def test_cobs_worked_examples(raw, encoded):
    assert cobs_encode(raw) == encoded
    assert cobs_decode(encoded) == raw
    assert cobs_decode_twin(encoded) == raw


def test_cobs_cheshire_baker_example():
    # Cheshire and Baker (1999), the paper's example encoding of the start of an IP
    # header (value from memory): 45 00 00 2C 4C 79 00 00 40 06 4F 37
    # -> 02 45 01 04 2C 4C 79 01 05 40 06 4F 37.
    raw = bytes.fromhex("4500002c4c79000040064f37")
    encoded = bytes.fromhex("024501042c4c790105" + "40064f37")
    assert cobs_encode(raw) == encoded
    assert cobs_decode(encoded) == raw


def test_cobs_code_block_table():
    # Cheshire and Baker (1999), table of code values: 0x01 = no data bytes followed by
    # a zero; 0x02 = one data byte then zero; 0xFF = 254 data bytes, no zero after.
    assert cobs_decode(b"\x01\x01") == b"\x00"
    assert cobs_decode(b"\x02\x41\x01") == b"\x41\x00"
    assert cobs_decode(b"\xff" + b"\x41" * 254 + b"\x02\x42") == b"\x41" * 254 + b"\x42"


def test_cobs_accepts_reference_encoder_trailing_block():
    # The paper's reference encoder ends a packet whose last block is full with an
    # extra 0x01 block; our decoder accepts that form too (ICD, "COBS").
    assert cobs_decode(b"\xff" + _RUN_254 + b"\x01") == _RUN_254
    assert cobs_decode(b"\xff" + _RUN_254) == _RUN_254


def test_cobs_empty_packet():
    # An empty packet is one code byte 0x01 (Cheshire and Baker 1999: the phantom zero).
    assert cobs_encode(b"") == b"\x01"
    assert cobs_decode(b"\x01") == b""


@pytest.mark.parametrize("bad", [b"", b"\x00", b"\x03\x11", b"\x02\x11\x00\x01",
                                 b"\x05\x01\x02"])
def test_cobs_decode_rejects_invalid(bad):
    with pytest.raises(CobsError):
        cobs_decode(bad)
    with pytest.raises(CobsError):
        cobs_decode_twin(bad)


@settings(max_examples=300, deadline=None)
@given(st.binary(max_size=1200))
def test_cobs_round_trip_no_zeros_and_overhead(data):
    # Cheshire and Baker (1999), section 3: the encoding has no zero byte and its
    # overhead is at most one byte per 254 (plus the first code byte).
    enc = cobs_encode(data)
    assert b"\x00" not in enc
    assert len(enc) <= cobs_max_encoded_len(len(data))
    assert cobs_decode(enc) == data
    assert cobs_decode_twin(enc) == data


@settings(max_examples=300, deadline=None)
@given(st.binary(max_size=600))
def test_cobs_decode_kernel_matches_twin_on_any_bytes(data):
    # Kernel/twin parity, on arbitrary (mostly invalid) input: same bytes or same error.
    try:
        expected = cobs_decode_twin(data)
    except CobsError:
        expected = None
    dst = np.empty(max(len(data), 1), dtype=np.uint8)
    n = int(cobs_decode_kernel(data, 0, len(data), dst))
    got = dst[:n].tobytes() if n >= 0 else None
    assert got == expected


@settings(max_examples=300, deadline=None)
@given(st.binary(max_size=300), st.integers(0, 9), st.integers(0, 320))
def test_cobs_decode_into_matches_twin_codes(data, base, cap):
    # Kernel/twin parity of the one COBS decoder at an offset and with a capacity: the
    # same error code (empty, zero byte, truncated, no room) or the same bytes (after an
    # error the output buffer holds partial bytes: not compared).
    dst_k = np.zeros(base + cap + 1, dtype=np.uint8)
    dst_p = np.zeros(base + cap + 1, dtype=np.uint8)
    k = int(cobs_decode_into(data, 0, len(data), dst_k, base, cap))
    p = cobs_decode_into_twin(data, 0, len(data), dst_p, base, cap)
    assert k == p
    if k >= 0:
        assert dst_k.tobytes() == dst_p.tobytes()
