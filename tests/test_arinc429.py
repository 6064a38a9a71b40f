"""ARINC 429 word decoding, label map and assembly into a validated air-data state.

Word layout, label bit order, parity and SSM meanings are checked against ARINC
Specification 429 Part 1, section 2.1 (value from memory: the document is not at hand),
by building words bit by bit here, independently of the encoder under test.
"""

from __future__ import annotations

import math

import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from advisory.io import arinc429 as a429
from advisory.io.arinc429_labels import load_label_map, parse_label_map
from advisory.io.framing import StreamDeframer, frame_stream
from advisory.pipeline.state import AirDataState, StateValidator


def _word_by_hand(label_octal: str, sdi: int, data19: int, ssm: int) -> int:
    """Build a word from the spec's bit table (ARINC 429 Part 1, 2.1; value from memory):
    bit 1 carries the label's most significant bit, bits 9-10 SDI, 11-29 data, 30-31 SSM,
    bit 32 odd parity."""
    label_bits = f"{int(label_octal, 8):08b}"  # MSB first, as transmitted
    w = 0
    for i, b in enumerate(label_bits):  # i = 0 -> bit 1 (LSB of the integer)
        w |= int(b) << i
    w |= sdi << 8 | data19 << 10 | ssm << 29
    ones = bin(w).count("1")
    if ones % 2 == 0:
        w |= 1 << 31
    return w


def test_label_is_bit_reversed_octal():
    # Label 203 (octal) = 10 000 011 sent MSB first: the low byte reads 1100 0001 = 0xC1.
    w = _word_by_hand("203", 0, 0, 3)
    assert w & 0xFF == 0xC1
    word = a429.decode_word(w)
    assert word.label == 0o203 and word.label_octal == "203"
    assert a429.decode_word(w, label_bit_reversed=False).label == 0xC1


def test_fields_of_a_hand_built_word():
    w = _word_by_hand("310", 2, 0x5A5A5, 1)
    word = a429.decode_word(w)
    assert (word.label, word.sdi, word.data, word.ssm, word.parity_ok) == (
        0o310, 2, 0x5A5A5, 1, True)
    assert a429.encode_word(0o310, 2, 0x5A5A5, 1) == w


def test_parity_is_odd_and_single_bit_errors_are_caught():
    w = a429.encode_bnr(0o205, 1.4, 16, 4.096)
    assert bin(w).count("1") % 2 == 1  # ARINC 429 Part 1, 2.1.4: odd parity
    asm = a429.Arinc429Assembler()
    for bit in range(32):
        assert asm.feed_word(w ^ (1 << bit), 0.0) is None
    assert asm.counters["bad_parity"] == 32
    assert asm.feed_word(w, 0.0) == "mach"


def test_bnr_altitude_by_hand():
    # Label 203, 17 significant bits, range 131072 ft -> 1 ft per count (value from
    # memory of attachment 2). 45,000 ft = 45000 counts in bits 12-28, sign bit 29 clear.
    w = _word_by_hand("203", 0, 45000 << 1, 3)
    assert a429.bnr_value(w, 17, 131072.0) == 45000.0
    assert a429.encode_bnr(0o203, 45000.0, 17, 131072.0) == w


def test_bnr_negative_is_twos_complement():
    # -500 ft: two's complement over sign + 17 bits.
    raw = (-500) & ((1 << 18) - 1)
    w = _word_by_hand("203", 0, raw << 1, 3)
    assert a429.bnr_value(w, 17, 131072.0) == -500.0


def test_bnr_20_bit_latitude_uses_sdi_bits():
    # Present-position labels carry 20 significant bits, bits 9-28 (value from memory);
    # resolution 180 / 2**20 deg.
    lat = -33.87654
    w = a429.encode_bnr(0o310, lat, 20, 180.0)
    assert abs(a429.bnr_value(w, 20, 180.0) - lat) <= 180.0 / 2**20 / 2
    assert a429.decode_word(w).label == 0o310


@settings(max_examples=200, deadline=None)
@given(st.integers(1, 20), st.floats(-0.999, 0.999))
def test_bnr_round_trip_within_half_resolution(bits, frac):
    rng = 512.0
    value = frac * rng
    # the largest code is 2**bits - 1 counts: values within half a count of it or below
    assume(value < (2**bits - 0.5) * rng / 2**bits)
    w = a429.encode_bnr(0o213, value, bits, rng)
    assert abs(a429.bnr_value(w, bits, rng) - value) <= rng / 2**bits / 2 + 1e-12
    assert a429.parity_ok(w)


def test_bcd_digits_and_sign():
    # BCD: MSD in bits 27-29 (3 bits), then 4-bit digits down to bit 11; SSM 11 = minus
    # (ARINC 429 Part 1, 2.1.5; value from memory).
    data = (1 << 16) | (2 << 12) | (3 << 8) | (4 << 4) | 5
    w_plus = _word_by_hand("012", 0, data, 0)
    w_minus = _word_by_hand("012", 0, data, 3)
    assert a429.bcd_value(w_plus, 5, 0.1) == pytest.approx(1234.5)
    assert a429.bcd_value(w_minus, 5, 0.1) == pytest.approx(-1234.5)
    assert a429.bcd_value(_word_by_hand("012", 0, 0xA << 12, 0), 5, 1.0) is None
    assert a429.bcd_value(a429.encode_bcd(0o012, -451.0, 4, 1.0), 4, 1.0) == -451.0


def test_ssm_rejections_counted():
    asm = a429.Arinc429Assembler()
    for ssm, counter in [(0, "ssm_failure"), (1, "ssm_ncd"), (2, "ssm_test")]:
        assert asm.feed_word(a429.encode_bnr(0o203, 45000.0, 17, 131072.0, ssm=ssm), 0.0) is None
        assert asm.counters[counter] == 1
    assert asm.feed_word(a429.encode_bnr(0o203, 45000.0, 17, 131072.0), 0.0) == "alt_ft"
    assert asm.counters["accepted"] == 1


def test_bcd_ssm_plus_is_accepted_ncd_rejected():
    lm = parse_label_map('[labels.012]\nfield = "gs_kt"\nencoding = "bcd"\n'
                         'digits = 4\nresolution = 1.0\n')
    asm = a429.Arinc429Assembler(lm)
    assert asm.feed_word(a429.encode_bcd(0o012, 620.0, 4, 1.0), 0.0) == "gs_kt"
    ncd = (a429.encode_bcd(0o012, 620.0, 4, 1.0) & ~(3 << 29) & 0x7FFFFFFF) | (1 << 29)
    if not a429.parity_ok(ncd):
        ncd |= 1 << 31
    assert asm.feed_word(ncd, 0.0) is None and asm.counters["ssm_ncd"] == 1
    assert asm.fields(0.0) == {"gs_kt": 620.0}


def test_unknown_label_and_sdi_filter():
    lm = parse_label_map('[labels.205]\nfield = "mach"\nsig_bits = 16\nrange = 4.096\n'
                         'sdi = 1\n')
    asm = a429.Arinc429Assembler(lm)
    assert asm.feed_word(a429.encode_bnr(0o377, 1.0, 16, 4.096), 0.0) is None
    assert asm.counters["unknown_label"] == 1
    assert asm.feed_word(a429.encode_bnr(0o205, 1.4, 16, 4.096, sdi=2), 0.0) is None
    assert asm.counters["sdi_mismatch"] == 1
    assert asm.feed_word(a429.encode_bnr(0o205, 1.4, 16, 4.096, sdi=1), 0.0) == "mach"


def test_label_map_toml_overrides_and_errors():
    lm = parse_label_map('byte_order = "little"\n[labels.203]\nfield = "alt_ft"\n'
                         'sig_bits = 16\nrange = 65536.0\nscale = 2.0\n')
    assert lm.byte_order == "little"
    assert lm.labels[0o203].sig_bits == 16 and lm.labels[0o203].scale == 2.0
    assert lm.labels[0o205] == a429.DEFAULT_LABELS[0o205]  # other defaults kept
    only = parse_label_map('replace_defaults = true\n[labels.205]\nfield = "mach"\n'
                         'range = 4.096\nsig_bits = 16\n')
    assert list(only.labels) == [0o205]
    for text, match in [
        ('[labels.209]\nfield = "alt_ft"\nrange = 1.0\n', "209"),
        ('[labels.203]\nfield = "altitude"\nrange = 1.0\n', "altitude"),
        ('[labels.203]\nfield = "alt_ft"\n', "needs range"),
        ('[labels.203]\nfield = "alt_ft"\nrange = 1.0\nsig_bits = 25\n', "sig_bits"),
        ('[labels.203]\nfield = "alt_ft"\nrange = 1.0\ncolour = "red"\n', "colour"),
        ('byte_order = "middle"\n', "byte_order"),
        ("not toml [", "TOML"),
        # issue 15 (Low): label maps with NaN / inf scaling were accepted; a zero scale
        # reads every value as 0 (common practice, no source: a scale is never 0)
        ('[labels.203]\nfield = "alt_ft"\nrange = nan\n', "range must be a finite"),
        ('[labels.203]\nfield = "alt_ft"\nrange = 1.0\nscale = inf\n', "scale must be a"),
        ('[labels.203]\nfield = "alt_ft"\nrange = 1.0\noffset = nan\n', "offset must"),
        ('[labels.203]\nfield = "alt_ft"\nrange = 1.0\nscale = 0\n', "scale must not"),
    ]:
        with pytest.raises(ValueError, match=match):
            parse_label_map(text)


def test_load_label_map_from_file(tmp_path):
    p = tmp_path / "labels.toml"
    p.write_text('[labels.325]\nfield = "bank_deg"\nsig_bits = 14\nrange = 180.0\n')
    assert load_label_map(p).labels[0o325].field == "bank_deg"
    assert load_label_map(None).labels == a429.DEFAULT_LABELS
    with pytest.raises(ValueError, match="cannot read"):
        load_label_map(tmp_path / "missing.toml")


def _flight_words(lat, lon, alt, mach, hdg, gs, bank, fpa):
    d = a429.DEFAULT_LABELS
    vals = {"lat_deg": lat, "lon_deg": lon, "alt_ft": alt, "mach": mach,
            "heading_deg": hdg if hdg <= 180 else hdg - 360, "gs_kt": gs, "bank_deg": bank,
            "fpa_deg": fpa, "sat_c": -56.5, "wind_kt": 30.0, "wind_from_deg": -90.0}
    return [a429.encode_bnr(s.label, vals[s.field], s.sig_bits, s.range)
            for s in d.values() if s.field in vals]


def test_words_to_validated_state_over_a_framed_stream():
    # End to end: words packed into frame payloads, COBS-framed as an adapter would
    # send them, deframed, assembled and validated.
    lm = a429.LabelMap()
    asm = a429.Arinc429Assembler(lm)
    words = _flight_words(40.25, -99.75, 45000.0, 1.4, 270.0, 740.0, -20.0, 0.5)
    stream = frame_stream(a429.payload_from_words(words[:6])) + frame_stream(
        a429.payload_from_words(words[6:]))
    for payload in StreamDeframer().feed(stream):
        asm.feed_payload(payload, 10.0)
    fields = asm.fields(10.1)
    assert asm.counters["accepted"] == len(words)
    assert fields["heading_deg"] == pytest.approx(270.0, abs=0.01)  # wrapped to 0..360
    assert fields["wind_from_deg"] == pytest.approx(270.0, abs=0.8)
    st_ = StateValidator().validate(fields, rx_monotonic=10.0, now_monotonic=10.1)
    assert isinstance(st_, AirDataState), st_
    assert st_.alt_m == pytest.approx(45000.0 * 0.3048)
    assert st_.bank_rad == pytest.approx(math.radians(-20.0), abs=1e-3)
    assert st_.lat_rad == pytest.approx(math.radians(40.25), abs=1e-5)


def test_stale_fields_are_left_out():
    asm = a429.Arinc429Assembler(max_age_s=0.5)
    asm.feed_word(a429.encode_bnr(0o205, 1.4, 16, 4.096), 1.0)
    asm.feed_word(a429.encode_bnr(0o203, 45000.0, 17, 131072.0), 1.4)
    assert set(asm.fields(1.45)) == {"mach", "alt_ft"}
    assert set(asm.fields(1.7)) == {"alt_ft"}


def test_bad_payload_counted():
    asm = a429.Arinc429Assembler()
    assert asm.feed_payload(b"\x01\x02\x03", 0.0) == 0
    assert asm.counters["bad_payload"] == 1
    assert a429.words_from_payload(b"\x00\x00\x00\x01\x01\x00\x00\x00", "little") == [2**24, 1]


@settings(max_examples=300, deadline=None)
@given(st.integers(0, 2**32 - 1))
def test_assembler_never_raises(word):
    asm = a429.Arinc429Assembler()
    asm.feed_word(word, 0.0)
    assert sum(v for k, v in asm.counters.items() if k != "words") <= 1


def test_pitch_rate_and_normal_acceleration_labels_by_hand():
    # Label 326 body pitch rate: BNR, 13 significant bits, range 128 deg/s (0.015625
    # deg/s per count); label 333 body normal acceleration: BNR, 12 significant bits,
    # range 4 g (1/1024 g per count). Both values from memory of attachment 2 (ICD
    # section 11). Words built by hand: two's complement over sign + the bits, the MSB of
    # the data in bit 28, so 13 bits sit in bits 16-28 and 12 bits in bits 17-28.
    q = _word_by_hand("326", 0, ((-96) & ((1 << 14) - 1)) << 5, 3)  # -1.5 deg/s
    n = _word_by_hand("333", 0, ((-256) & ((1 << 13) - 1)) << 6, 3)  # -0.25 g
    asm = a429.Arinc429Assembler()
    assert asm.feed_word(q, 1.0) == "pitch_rate_dps"
    assert asm.feed_word(n, 1.0) == "load_factor"
    fields = asm.fields(1.1)
    assert fields["pitch_rate_dps"] == -1.5
    assert fields["load_factor"] == -0.25
    assert a429.encode_bnr(0o326, -1.5, 13, 128.0) == q
    assert a429.encode_bnr(0o333, -0.25, 12, 4.0) == n


def test_pitch_rate_and_load_factor_words_reach_the_state():
    # End to end: the flight's words plus labels 326 and 333 assembled and validated; the
    # state carries the SI pitch rate and the load factor.
    words = _flight_words(40.25, -99.75, 45000.0, 1.4, 270.0, 740.0, 0.0, 0.0)
    words += [a429.encode_bnr(0o326, 2.0, 13, 128.0), a429.encode_bnr(0o333, 1.5, 12, 4.0)]
    asm = a429.Arinc429Assembler()
    asm.feed_payload(a429.payload_from_words(words), 10.0)
    st_ = StateValidator().validate(asm.fields(10.1), rx_monotonic=10.0, now_monotonic=10.1)
    assert isinstance(st_, AirDataState), st_
    assert st_.pitch_rate_rad_s == pytest.approx(math.radians(2.0))
    assert st_.load_factor == pytest.approx(1.5, abs=1e-3)


# ------------------------------------------------------- the flight-guidance targets

#: Labels 101 (selected heading), 102 (selected altitude), 106 (selected Mach): label
#: numbers, significant bits and ranges are values from memory of ARINC 429 attachment 2
#: (ICD section 11); the resolution is range / 2**bits (ARINC 429 Part 1, 2.1; value from
#: memory).
TARGET_LABELS = {"101": ("selected_heading_deg", 12, 180.0),
                 "102": ("selected_alt_ft", 16, 65536.0),
                 "106": ("selected_mach", 12, 4.096)}


def test_target_labels_in_the_default_map():
    for octal, (name, bits, full) in TARGET_LABELS.items():
        spec = a429.DEFAULT_LABELS[int(octal, 8)]
        assert (spec.field, spec.encoding, spec.sig_bits, spec.range) == (name, "bnr", bits,
                                                                          full)
    # headings follow the existing heading label 314: a signed angle read on 0..360
    assert a429.DEFAULT_LABELS[0o101].wrap_360 == a429.DEFAULT_LABELS[0o314].wrap_360 is True


def test_target_words_by_hand():
    # Words built bit by bit (ARINC 429 Part 1, 2.1; value from memory): the data's MSB
    # in bit 28, so 16 bits sit in bits 13-28 (data19 << 2) and 12 bits in bits 17-28
    # (data19 << 6); two's complement over sign bit 29 and the bits.
    alt = _word_by_hand("102", 0, 52000 << 2, 3)  # 52,000 ft at 1 ft a count
    low = _word_by_hand("102", 0, ((-1000) & ((1 << 17) - 1)) << 2, 3)  # -1,000 ft
    hdg = _word_by_hand("101", 0, 3072 << 6, 3)  # 135 deg = 3072 x 180/4096
    west = _word_by_hand("101", 0, ((-2048) & ((1 << 13) - 1)) << 6, 3)  # -90 deg = 270
    mach = _word_by_hand("106", 0, 1600 << 6, 3)  # Mach 1.6 = 1600 x 4.096/4096
    # Label 102 = 01 000 010 sent MSB first: the low byte reads 0100 0010 = 0x42;
    # 101 = 01 000 001 -> 1000 0010 = 0x82; 106 = 01 000 110 -> 0110 0010 = 0x62.
    assert (alt & 0xFF, hdg & 0xFF, mach & 0xFF) == (0x42, 0x82, 0x62)
    asm = a429.Arinc429Assembler()
    for w in (alt, hdg, mach):
        assert asm.feed_word(w, 1.0) is not None
    got = asm.fields(1.1)
    assert got["selected_alt_ft"] == 52000.0
    assert got["selected_heading_deg"] == 135.0
    assert got["selected_mach"] == pytest.approx(1.6, abs=1e-12)
    assert asm.feed_word(low, 1.2) == "selected_alt_ft"
    assert asm.feed_word(west, 1.2) == "selected_heading_deg"
    got = asm.fields(1.3)
    assert got["selected_alt_ft"] == -1000.0 and got["selected_heading_deg"] == 270.0
    # the encoder builds the same words
    assert a429.encode_bnr(0o102, 52000.0, 16, 65536.0) == alt
    assert a429.encode_bnr(0o102, -1000.0, 16, 65536.0) == low
    assert a429.encode_bnr(0o101, 135.0, 12, 180.0) == hdg
    assert a429.encode_bnr(0o101, -90.0, 12, 180.0) == west
    assert a429.encode_bnr(0o106, 1.6, 12, 4.096) == mach


@settings(max_examples=200, deadline=None)
@given(st.floats(-1999.0, 65535.0), st.floats(0.0, 359.99), st.floats(0.1, 4.09))
def test_target_labels_round_trip_within_half_resolution(alt, hdg, mach):
    # Resolution range / 2**bits (ARINC 429 Part 1, 2.1; value from memory): 1 ft,
    # 180/4096 deg, 0.001; a heading comes back on 0..360 (as label 314 does) and is
    # compared on the circle.
    asm = a429.Arinc429Assembler()
    d = a429.DEFAULT_LABELS
    signed = hdg if hdg < 180.0 - 180.0 / 2**13 else hdg - 360.0  # past the top code: -180
    words = [a429.encode_bnr(0o102, alt, 16, 65536.0),
             a429.encode_bnr(0o101, signed, 12, 180.0),
             a429.encode_bnr(0o106, mach, 12, 4.096)]
    assert asm.feed_payload(a429.payload_from_words(words), 5.0) == 3
    got = asm.fields(5.0)
    assert abs(got["selected_alt_ft"] - alt) <= d[0o102].range / 2**16 / 2 + 1e-9
    err = (got["selected_heading_deg"] - hdg + 180.0) % 360.0 - 180.0
    assert abs(err) <= 180.0 / 2**12 / 2 + 1e-9
    assert 0.0 <= got["selected_heading_deg"] < 360.0
    assert abs(got["selected_mach"] - mach) <= 4.096 / 2**12 / 2 + 1e-12


def test_target_labels_in_a_label_map_file():
    # The label map file names the new fields like any other (ICD section 11).
    lm = parse_label_map('[labels.102]\nfield = "selected_alt_ft"\nsig_bits = 17\n'
                         'range = 131072.0\n')
    assert lm.labels[0o102].sig_bits == 17
    assert lm.labels[0o101] == a429.DEFAULT_LABELS[0o101]
