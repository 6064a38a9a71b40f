"""Framing: payloads on a byte stream (COBS + CRC-32C + 0x00) and in datagrams (+ CRC).

A payload travels on a byte stream (serial, files) as
``COBS(payload + CRC32C(payload)) + b"\\x00"``, and in one UDP datagram as
``payload + CRC32C(payload)``; the CRC is 4 bytes, big-endian (``docs/interface.md``,
sections 9 and 10). :class:`StreamDeframer` and :class:`DatagramReader` never raise on
bad input: they count it under :data:`advisory.schema.LINK_COUNTERS`.

References
----------
S. Cheshire and M. Baker, "Consistent Overhead Byte Stuffing", IEEE/ACM Trans.
Networking 7(2), 1999 (COBS). RFC 3720, 12.1 and B.4 (CRC-32C).

Notes
-----
Hot-path numba kernels (``njit(cache=True)``, plain buffers in and out):
``unstuff_check_kernel`` unstuffs one stream frame with the package's one COBS decoder
(:func:`advisory.io.cobs.cobs_decode_into`) and checks its CRC; ``deframe_kernel``
splits a chunk at the delimiters and counts each outcome. Their plain-Python twins are
in ``tests/twins/framing.py`` (parity tests).
"""

from __future__ import annotations

import math
from pathlib import Path

import msgpack  # type: ignore[import-untyped]  # msgpack ships no type hints
import numpy as np

from advisory.io.auth import check_auth
from advisory.io.cobs import ERR_NO_ROOM, cobs_decode_into, cobs_encode, cobs_max_encoded_len
from advisory.io.crc32c import crc32c, crc32c_kernel, crc32c_update
from advisory.io.messages import FrameError
from advisory.jit import njit
from advisory.schema import (
    AUTH_KEY_MIN_BYTES,
    AUTH_RESYNC_S,
    CRC_LEN,
    LINK_COUNTERS,
    MAX_PAYLOAD,
    SEQ_MAX,
)

#: Longest encoded stream frame (without delimiter): COBS of payload + CRC, plus one
#: byte of slack for senders that end a full last block with 0x01.
MAX_ENCODED = cobs_max_encoded_len(MAX_PAYLOAD + CRC_LEN) + 1
MAX_DATAGRAM = MAX_PAYLOAD + CRC_LEN  #: longest datagram, bytes

#: :func:`unstuff_check_kernel` return codes beyond the COBS ones of
#: :mod:`advisory.io.cobs` (``ERR_EMPTY`` .. ``ERR_NO_ROOM``, -1 .. -4).
ERR_TOO_SHORT = -5  #: decoded frame under CRC_LEN + 1 bytes
ERR_BAD_CRC = -6  #: CRC-32C mismatch

# Link counter slots, in LINK_COUNTERS order (numba reads these as constants).
_OK = LINK_COUNTERS.index("frames_ok")
_BAD_CRC = LINK_COUNTERS.index("bad_crc")
_COBS = LINK_COUNTERS.index("cobs_error")
_SHORT = LINK_COUNTERS.index("too_short")
_OVERSIZE = LINK_COUNTERS.index("oversize")


# ------------------------------------------------------------------------------ sending

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


# ---------------------------------------------------------------------------- datagrams

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


# ------------------------------------------------------------------ authenticated frames

#: Counters of :class:`AuthVerifier` (service counters, ``advisory.schema.SERVICE_COUNTERS``).
AUTH_COUNTERS = ("auth_missing", "auth_bad", "auth_replay")


def load_auth_key(path: str | Path) -> bytes:
    """The shared key of ``--auth-key FILE``: hex digits on one line, at least 32 bytes.

    Raises
    ------
    ValueError
        One line naming the option, the file and what is wrong with it.
    """
    try:
        text = Path(path).read_text(encoding="ascii").strip()
    except (OSError, UnicodeDecodeError) as exc:
        raise ValueError(f"--auth-key: {path}: cannot read ({exc})") from None
    try:
        key = bytes.fromhex(text)
    except ValueError:
        raise ValueError(f"--auth-key: {path}: the key must be hex digits on one line") \
            from None
    if len(key) < AUTH_KEY_MIN_BYTES:
        raise ValueError(f"--auth-key: {path}: key of {len(key)} bytes is shorter than "
                         f"{AUTH_KEY_MIN_BYTES}")
    return key


_HEAD_V1_TYPE = b"\xa1v\x01\xa4type"  #: canonical header start after the map header
_UINT_BYTES = {0xCC: 1, 0xCD: 2, 0xCE: 4}  #: MessagePack uint 8/16/32: value bytes


def _type_and_seq(payload: bytes) -> tuple[str, int] | None:
    """``type`` and ``seq`` of a frame (ICD section 3), or None when they are not there
    as a str and an integer in 0..2**32-1. The canonical header is read in place; any
    other layout is decoded whole."""
    p = payload
    i = 1 if p[:1] and 0x80 <= p[0] <= 0x8F else 3
    if p[i:i + 8] == _HEAD_V1_TYPE and len(p) > i + 9 and 0xA0 <= p[i + 8] <= 0xBF:
        j = i + 9 + (p[i + 8] - 0xA0)
        if p[j:j + 4] == b"\xa3seq" and len(p) > j + 4:
            b = p[j + 4]
            if b < 0x80:
                return p[i + 9:j].decode("utf-8", "replace"), b
            n = _UINT_BYTES.get(b)
            if n is not None and len(p) >= j + 5 + n:
                return (p[i + 9:j].decode("utf-8", "replace"),
                        int.from_bytes(p[j + 5:j + 5 + n], "big"))
    try:
        m = msgpack.unpackb(payload, raw=False)
        kind, seq = m["type"], m["seq"]
    except Exception:  # noqa: BLE001 - not a frame: the decoder counts it
        return None
    if isinstance(kind, str) and type(seq) is int and 0 <= seq <= SEQ_MAX:
        return kind, seq
    return None


class AuthVerifier:
    """Admits only authenticated frames that are newer than the last one (ICD 7.1).

    A payload must end with a valid HMAC-SHA256 entry (:func:`advisory.io.auth.check_auth`,
    constant-time compare); its ``seq`` must then be newer than the last
    authenticated frame of its type: ``(seq - last) mod 2**32`` in ``1 .. 2**31 - 1``.
    When no authenticated frame of that type was admitted for :data:`AUTH_RESYNC_S`,
    the next one re-anchors the sequence (a restarted sender). Never raises on bad input.

    Parameters
    ----------
    key : bytes
        The shared key.
    resync_s : float
        Silence after which the sequence re-anchors, s (monotonic).

    Attributes
    ----------
    counters : dict of str to int
        :data:`AUTH_COUNTERS`: no tag, a wrong tag, a repeated or older ``seq``.
    """

    def __init__(self, key: bytes, resync_s: float = AUTH_RESYNC_S) -> None:
        self._key = bytes(key)
        self.resync_s = float(resync_s)
        self.counters: dict[str, int] = dict.fromkeys(AUTH_COUNTERS, 0)
        self._last: dict[str, tuple[int, float]] = {}

    def admit(self, payload: bytes, now_monotonic: float) -> bool:
        """True when ``payload`` carries a valid tag and a newer ``seq`` (else counted)."""
        why = check_auth(payload, self._key)
        if why:
            self.counters[why] += 1
            return False
        head = _type_and_seq(payload)
        if head is None:  # authentic but not a frame: the decoder counts it
            return True
        kind, seq = head
        last = self._last.get(kind)
        if last is not None and now_monotonic - last[1] < self.resync_s:
            d = (seq - last[0]) & SEQ_MAX
            if d == 0 or d >= 1 << 31:
                self.counters["auth_replay"] += 1
                return False
        self._last[kind] = (seq, now_monotonic if math.isfinite(now_monotonic) else 0.0)
        return True

    def admit_datagram(self, data: bytes, now_monotonic: float) -> bool:
        """:meth:`admit` for a datagram; one with a bad CRC is left to the reader's counters."""
        try:
            payload = parse_datagram(data)
        except FrameError:
            return True
        return self.admit(payload, now_monotonic)


# ------------------------------------------------------------------------- byte streams

@njit(cache=True)
def unstuff_check_kernel(src, start, end, dst, base, cap):  # pragma: no cover - compiled
    """COBS-decode ``src[start:end]`` into ``dst[base:base + cap]`` and check its CRC-32C.

    Parameters
    ----------
    src : bytes or ndarray of uint8
        Stream buffer.
    start, end : int
        Range of one encoded frame (no delimiter).
    dst : ndarray of uint8
        Output buffer.
    base, cap : int
        Where the decoded frame starts in ``dst``, and its largest size (payload + CRC,
        ``MAX_PAYLOAD + CRC_LEN``).

    Returns
    -------
    int
        Payload length (CRC removed) when good; else a COBS error code of
        :func:`advisory.io.cobs.cobs_decode_into` (``ERR_NO_ROOM``: too large), or
        :data:`ERR_TOO_SHORT`, :data:`ERR_BAD_CRC`.
    """
    n = cobs_decode_into(src, start, end, dst, base, cap)
    if n < 0:
        return n
    if n < CRC_LEN + 1:
        return ERR_TOO_SHORT
    m = n - CRC_LEN
    c = crc32c_update(dst, base, base + m, np.uint32(0xFFFFFFFF)) ^ np.uint32(0xFFFFFFFF)
    b = base + m
    got = (np.uint32(dst[b]) << 24) | (np.uint32(dst[b + 1]) << 16) | (
        np.uint32(dst[b + 2]) << 8) | np.uint32(dst[b + 3])
    if c != got:
        return ERR_BAD_CRC
    return m


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
        Link counters in :data:`advisory.schema.LINK_COUNTERS` order, incremented in
        place: a COBS error counts as ``cobs_error``, except a frame too large to decode
        (``oversize``).

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
            counts[_OVERSIZE] += 1
        elif seg > 0:
            r = unstuff_check_kernel(buf, pos, i, out, w, cap)
            if r >= 0:
                offs[k] = w
                lens[k] = r
                k += 1
                w += r
                counts[_OK] += 1
            elif r == ERR_BAD_CRC:
                counts[_BAD_CRC] += 1
            elif r == ERR_TOO_SHORT:
                counts[_SHORT] += 1
            elif r == ERR_NO_ROOM:
                counts[_OVERSIZE] += 1
            else:
                counts[_COBS] += 1
        pos = i + 1
    return k, pos, discarding


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
        :data:`advisory.schema.LINK_COUNTERS`: ``frames_ok``, ``bad_crc``,
        ``cobs_error``, ``too_short``, ``oversize`` (a fresh dict on each access).
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
            self._counts[_OVERSIZE] += 1
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
