"""ARINC 429 input: 32-bit words decoded into the air-data field dict.

Word layout (bits numbered 1..32, bit 1 the least significant bit of the integer):

==========  =====================================================================
bits 1-8    label, sent most significant bit first, so bit 1 holds the label's MSB
            ("bit-reversed"); written as three octal digits, e.g. 203
bits 9-10   SDI (source/destination identifier)
bits 11-29  data: BNR (two's complement, sign in bit 29) or BCD (5 digits)
bits 30-31  SSM (sign/status matrix)
bit 32      parity: the 32 bits hold an odd number of ones
==========  =====================================================================

SSM meaning: for BNR 00 failure warning, 01 no computed data, 10 functional test,
11 normal operation; for BCD 00 plus (north, east, right, to, above), 01 no computed
data, 10 functional test, 11 minus. Words with bad parity, failure warning, no computed
data or functional test are rejected and counted.

BNR scaling: a label with ``sig_bits`` significant bits and full scale ``range`` has its
most significant data bit in bit 28 worth ``range / 2``; the resolution is
``range / 2**sig_bits``; bit 29 is the sign (two's complement).

The label map (which label feeds which wire field, with its encoding and scaling) comes
from a TOML file (read by :mod:`advisory.io.arinc429_labels`; format in
``docs/interface.md``); defaults cover the usual air-data labels.

References
----------
ARINC Specification 429 Part 1, "Digital Information Transfer System", sections 2.1
(word format, label transmission order, parity, SSM) and attachment 2 (label
assignments, ranges and significant bits). Every default label, range and bit count
below is a value from memory of that document, not checked against it: an integrator
must confirm them against the equipment's own interface description.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field
from typing import Literal, NamedTuple

from advisory.schema import STALE_AFTER_S

ByteOrder = Literal["big", "little"]  #: how a 4-byte word sits in a frame payload

SSM_FAILURE = 0b00  #: BNR: failure warning
SSM_NCD = 0b01  #: no computed data (BNR and BCD)
SSM_TEST = 0b10  #: functional test (BNR and BCD)
SSM_NORMAL = 0b11  #: BNR: normal operation
SSM_BCD_PLUS = 0b00  #: BCD: plus, north, east, right, to, above
SSM_BCD_MINUS = 0b11  #: BCD: minus, south, west, left, from, below

COUNTERS = (
    "words", "accepted", "bad_parity", "ssm_failure", "ssm_ncd", "ssm_test",
    "unknown_label", "sdi_mismatch", "bad_bcd", "bad_payload",
)


def _reverse8(x: int) -> int:
    return int(f"{x & 0xFF:08b}"[::-1], 2)


_REV8 = tuple(_reverse8(i) for i in range(256))


def parity_ok(word: int) -> bool:
    """True when the 32-bit ``word`` has odd parity (ARINC 429 Part 1, 2.1.4)."""
    return (word & 0xFFFFFFFF).bit_count() & 1 == 1


def label_from_octal(text: str | int) -> int:
    """Label number from its usual octal spelling: ``"203"`` -> 0o203 (= 131)."""
    s = str(text).strip()
    if not s or len(s) > 3 or any(c not in "01234567" for c in s) or int(s, 8) > 0o377:
        raise ValueError(f"ARINC 429 label {text!r} is not a 3-digit octal number 000-377")
    return int(s, 8)


class Word(NamedTuple):
    """The parts of one ARINC 429 word.

    Attributes
    ----------
    label : int
        Label number (``0o203`` for label 203).
    sdi : int
        Bits 9-10.
    data : int
        Bits 11-29 as an unsigned 19-bit integer.
    ssm : int
        Bits 30-31.
    parity_ok : bool
        Odd parity over the 32 bits.
    """

    label: int
    sdi: int
    data: int
    ssm: int
    parity_ok: bool

    @property
    def label_octal(self) -> str:
        """The label as three octal digits, e.g. ``"203"``."""
        return f"{self.label:03o}"


def decode_word(word: int, label_bit_reversed: bool = True) -> Word:
    """Split a 32-bit word into label, SDI, data, SSM and parity.

    Parameters
    ----------
    word : int
        The word, bit 1 as the least significant bit.
    label_bit_reversed : bool
        True (the usual convention) when bits 1-8 hold the label MSB first; False for
        adapters that already reversed it.
    """
    word &= 0xFFFFFFFF
    raw = word & 0xFF
    return Word(_REV8[raw] if label_bit_reversed else raw, (word >> 8) & 0x3,
                (word >> 10) & 0x7FFFF, (word >> 29) & 0x3, parity_ok(word))


def encode_word(label: int, sdi: int, data: int, ssm: int,
                label_bit_reversed: bool = True) -> int:
    """Assemble a word and set bit 32 for odd parity (inverse of :func:`decode_word`)."""
    if not 0 <= label <= 0o377 or not 0 <= sdi <= 3 or not 0 <= data < 1 << 19 \
            or not 0 <= ssm <= 3:
        raise ValueError(f"ARINC 429 word parts out of range: label={label:o} sdi={sdi} "
                         f"data={data} ssm={ssm}")
    low = _REV8[label] if label_bit_reversed else label
    w = low | sdi << 8 | data << 10 | ssm << 29
    if not parity_ok(w):
        w |= 1 << 31
    return w


def bnr_value(word: int, sig_bits: int, full_range: float) -> float:
    """Value of a BNR word: two's complement, sign bit 29, MSB bit 28 worth range/2."""
    raw = (word >> (28 - sig_bits)) & ((1 << sig_bits) - 1)
    if word >> 28 & 1:
        raw -= 1 << sig_bits
    return raw * (full_range / (1 << sig_bits))


def encode_bnr(label: int, value: float, sig_bits: int, full_range: float,
               ssm: int = SSM_NORMAL, sdi: int = 0, label_bit_reversed: bool = True) -> int:
    """A BNR word for ``value`` (rounded to the resolution, clipped to the range).

    ``sig_bits`` above 18 extends the data into bits 9-10 (the SDI bits), as the
    present-position labels do; ``sdi`` must then be 0.
    """
    if not 1 <= sig_bits <= 20 or (sig_bits > 18 and sdi):
        raise ValueError(f"BNR sig_bits={sig_bits} with sdi={sdi} does not fit a word")
    res = full_range / (1 << sig_bits)
    n = round(value / res)
    n = max(-(1 << sig_bits), min((1 << sig_bits) - 1, n))
    bits = (n & ((1 << (sig_bits + 1)) - 1)) << (28 - sig_bits)  # sign lands in bit 29
    w = encode_word(label, 0, 0, ssm, label_bit_reversed) & 0x7FFFFFFF
    w |= bits | sdi << 8
    if not parity_ok(w):
        w |= 1 << 31
    return w


def bcd_value(word: int, digits: int, resolution: float) -> float | None:
    """Value of a BCD word (``digits`` digits from bit 29 down), or None for a bad digit.

    The most significant digit has 3 bits (bits 27-29), the others 4 bits each; the
    sign comes from the SSM (11 = minus).
    """
    data = (word >> 10) & 0x7FFFF
    n = 0
    for k in range(digits):
        if k == 0:
            d = data >> 16 & 0x7
        else:
            d = data >> (16 - 4 * k) & 0xF
        if d > 9:
            return None
        n = n * 10 + d
    value = n * resolution
    return -value if (word >> 29) & 3 == SSM_BCD_MINUS else value


def encode_bcd(label: int, value: float, digits: int, resolution: float, sdi: int = 0,
               label_bit_reversed: bool = True) -> int:
    """A BCD word for ``value`` (sign in the SSM: 00 plus, 11 minus)."""
    n = round(abs(value) / resolution)
    text = f"{n:0{digits}d}"
    if len(text) > digits or int(text[0]) > 7:
        raise ValueError(f"BCD value {value!r} does not fit {digits} digits")
    data = 0
    for k, ch in enumerate(text):
        shift = 16 if k == 0 else 16 - 4 * k
        data |= int(ch) << shift
    ssm = SSM_BCD_MINUS if value < 0 else SSM_BCD_PLUS
    return encode_word(label, sdi, data, ssm, label_bit_reversed)


@dataclass(frozen=True)
class LabelSpec:
    """How one label becomes one wire field.

    Attributes
    ----------
    label : int
        Label number (``0o203``).
    field : str
        Wire field name it feeds (one of :data:`advisory.schema.AIR_FIELDS`).
    encoding : str
        ``"bnr"`` or ``"bcd"``.
    sig_bits : int
        BNR significant bits (1..20; above 18 the data extends into bits 9-10, the SDI
        bits, as on the present-position labels).
    range : float
        BNR full scale (value of the sign bit's magnitude), in ``field``'s unit.
    digits : int
        BCD digits (1..5).
    resolution : float
        BCD weight of the least significant digit.
    sdi : int or None
        Accept only this SDI; None accepts any.
    wrap_360 : bool
        Map an angle from -180..180 to 0..360 (headings, tracks, wind direction).
    scale, offset : float
        Applied last: ``field = value * scale + offset`` (unit changes).
    """

    label: int
    field: str
    encoding: str = "bnr"
    sig_bits: int = 18
    range: float = 1.0
    digits: int = 5
    resolution: float = 1.0
    sdi: int | None = None
    wrap_360: bool = False
    scale: float = 1.0
    offset: float = 0.0

    def value(self, word: int) -> float | None:
        """The field value carried by ``word`` (None for an invalid BCD digit)."""
        v: float | None
        if self.encoding == "bnr":
            v = bnr_value(word, self.sig_bits, self.range)
        else:
            v = bcd_value(word, self.digits, self.resolution)
            if v is None:
                return None
        if self.wrap_360:
            v %= 360.0
        return v * self.scale + self.offset


def _spec(label: str, field_name: str, sig_bits: int, full_range: float,
          wrap: bool = False) -> LabelSpec:
    return LabelSpec(label_from_octal(label), field_name, "bnr", sig_bits, full_range,
                     wrap_360=wrap)


#: Default label map: the usual air-data and inertial labels. Every label number, range
#: and bit count here is a value from memory of ARINC 429 attachment 2; confirm against
#: the installed equipment's interface description.
DEFAULT_LABELS: dict[int, LabelSpec] = {s.label: s for s in (
    # The flight-guidance targets the crew has selected (label numbers, bits and ranges
    # all values from memory; each resolution is range / 2**sig_bits):
    _spec("101", "selected_heading_deg", 12, 180.0, wrap=True),  # deg, resolution 0.044
    _spec("102", "selected_alt_ft", 16, 65536.0),  # ft, resolution 1 ft, up to 65,535 ft
    _spec("106", "selected_mach", 12, 4.096),  # Mach, resolution 0.001
    _spec("203", "alt_ft", 17, 131072.0),  # pressure altitude, ft, resolution 1 ft
    _spec("205", "mach", 16, 4.096),  # Mach, resolution 0.0000625
    _spec("213", "sat_c", 11, 512.0),  # static air temperature, degC, resolution 0.25
    _spec("310", "lat_deg", 20, 180.0),  # present position latitude, deg (bits 9-28)
    _spec("311", "lon_deg", 20, 180.0),  # present position longitude, deg (bits 9-28)
    _spec("312", "gs_kt", 15, 4096.0),  # ground speed, kt, resolution 0.125
    _spec("313", "track_deg", 15, 180.0, wrap=True),  # track angle true, deg
    _spec("314", "heading_deg", 15, 180.0, wrap=True),  # true heading, deg
    _spec("315", "wind_kt", 8, 256.0),  # wind speed, kt
    _spec("316", "wind_from_deg", 8, 180.0, wrap=True),  # wind direction true, deg
    _spec("322", "fpa_deg", 12, 180.0),  # flight path angle, deg
    _spec("325", "bank_deg", 14, 180.0),  # roll angle, deg, right wing down positive
    _spec("326", "pitch_rate_dps", 13, 128.0),  # body pitch rate, deg/s, nose up positive
    # body normal acceleration, g, read as the load factor (1 in level flight): confirm
    # the equipment's sign and zero (scale = -1 or offset = 1 in a label map fix them)
    _spec("333", "load_factor", 12, 4.0),
)}


@dataclass
class LabelMap:
    """Label specifications plus how words are packed into frame payloads.

    Attributes
    ----------
    labels : dict of int to LabelSpec
    byte_order : str
        ``"big"`` or ``"little"``: how each 4-byte word sits in a payload.
    label_bit_reversed : bool
        See :func:`decode_word`.
    """

    labels: dict[int, LabelSpec] = field(default_factory=lambda: dict(DEFAULT_LABELS))
    byte_order: ByteOrder = "big"
    label_bit_reversed: bool = True


def words_from_payload(payload: bytes, byte_order: ByteOrder = "big") -> list[int]:
    """Split a frame payload into 32-bit words (4 bytes each, ``byte_order``).

    Raises
    ------
    ValueError
        If the payload length is not a positive multiple of 4.
    """
    n = len(payload)
    if n == 0 or n % 4:
        raise ValueError(f"ARINC 429 payload of {n} bytes is not a whole number of words")
    return [int.from_bytes(payload[i:i + 4], byte_order) for i in range(0, n, 4)]


def payload_from_words(words: list[int], byte_order: ByteOrder = "big") -> bytes:
    """Pack 32-bit words into a frame payload (inverse of :func:`words_from_payload`)."""
    return b"".join((w & 0xFFFFFFFF).to_bytes(4, byte_order) for w in words)


class Arinc429Assembler:
    """Collect ARINC 429 words into the latest air-data field dict.

    Parameters
    ----------
    label_map : LabelMap, optional
        Defaults to :data:`DEFAULT_LABELS`.
    max_age_s : float
        A field not refreshed for this long (monotonic) is left out of :meth:`fields`.

    Attributes
    ----------
    counters : dict of str to int
        :data:`COUNTERS`; every rejected word is counted under its reason.
    last_rx : float or None
        Monotonic time of the most recent accepted word.
    """

    def __init__(self, label_map: LabelMap | None = None, max_age_s: float = STALE_AFTER_S) -> None:
        self.label_map = label_map or LabelMap()
        self.max_age_s = max_age_s
        self.counters: dict[str, int] = dict.fromkeys(COUNTERS, 0)
        self.last_rx: float | None = None
        self._values: dict[str, tuple[float, float]] = {}

    def feed_word(self, word: int, rx_monotonic: float) -> str | None:
        """Decode one word; return the field it updated, or None (rejected or unmapped)."""
        c = self.counters
        c["words"] += 1
        if not isinstance(word, int) or not 0 <= word <= 0xFFFFFFFF:
            c["bad_payload"] += 1
            return None
        if not parity_ok(word):
            c["bad_parity"] += 1
            return None
        lm = self.label_map
        raw = word & 0xFF
        spec = lm.labels.get(_REV8[raw] if lm.label_bit_reversed else raw)
        if spec is None:
            c["unknown_label"] += 1
            return None
        if spec.sdi is not None and (word >> 8) & 3 != spec.sdi:  # (never when sig_bits > 18)
            c["sdi_mismatch"] += 1
            return None
        ssm = (word >> 29) & 3
        if ssm == SSM_NCD:
            c["ssm_ncd"] += 1
            return None
        if ssm == SSM_TEST:
            c["ssm_test"] += 1
            return None
        if ssm == SSM_FAILURE and spec.encoding == "bnr":
            c["ssm_failure"] += 1
            return None
        value = spec.value(word)
        if value is None:
            c["bad_bcd"] += 1
            return None
        self._values[spec.field] = (value, rx_monotonic)
        self.last_rx = rx_monotonic
        c["accepted"] += 1
        return spec.field

    def feed_payload(self, payload: bytes, rx_monotonic: float) -> int:
        """Feed every word of one frame payload; return how many were accepted."""
        try:
            words = words_from_payload(payload, self.label_map.byte_order)
        except (ValueError, TypeError):
            self.counters["bad_payload"] += 1
            return 0
        return sum(self.feed_word(w, rx_monotonic) is not None for w in words)

    def fields(self, now_monotonic: float | None = None) -> dict[str, float]:
        """The fresh fields (wire names), ready for :class:`advisory.pipeline.state.StateValidator`.

        Fields older than ``max_age_s`` are left out, so a silent source shows up as a
        missing field rather than as an old value.
        """
        now = time.monotonic() if now_monotonic is None else now_monotonic
        limit = self.max_age_s
        return {k: v for k, (v, t) in self._values.items() if now - t <= limit}
