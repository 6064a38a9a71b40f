"""Air frames with the flight-guidance targets: the three canonical layouts and the rest.

The targets (``selected_alt_ft``, ``selected_heading_deg``, ``selected_mach``) are the
second group of optional air-data fields appended after the first release, after the
pitch rate and load factor pair (``docs/interface.md`` sections 4 and 7). Encoders write
every later group up to the last one they have a value of and none after it, so there
are three canonical layouts (maps of 17, 19 and 22 entries); decoders read those and any
other valid layout.

Expected bytes are built here without the encoder under test: by msgpack-python
(``msgpack.packb`` of a dict whose keys are written out in the ICD's order, the reference
implementation of the MessagePack specification) or by hand from the specification's
formats (map 16 = ``de`` + 2-byte count, fixstr = ``a0 | length``, float 64 = ``cb`` + 8
bytes big-endian, nil = ``c0``).
"""

from __future__ import annotations

import json
import math
import struct
from pathlib import Path

import msgpack
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from advisory.io import air_fastpath, frame_rules
from advisory.io.messages import Frame, FrameDecoder, FrameError, decode_frame, encode_air

#: The ICD's air-data keys in canonical order (section 4 table, keys 1-18), written out.
FIRST = ("lat_deg", "lon_deg", "alt_ft", "mach", "heading_deg", "gs_kt", "bank_deg",
         "fpa_deg", "track_deg", "mach_rate_per_s", "sat_c", "wind_from_deg", "wind_kt")
PAIR = ("pitch_rate_dps", "load_factor")
TARGETS = ("selected_alt_ft", "selected_heading_deg", "selected_mach")
ALL = FIRST + PAIR + TARGETS

AIR = {"lat_deg": 40.0, "lon_deg": -100.0, "alt_ft": 45000.0, "mach": 1.4,
       "heading_deg": 90.0, "gs_kt": 740.0, "bank_deg": 0.0, "fpa_deg": 0.0}
#: An invented climb and turn: level off at 52,000 ft, roll out on 135, end at Mach 1.6.
GOAL = {"selected_alt_ft": 52000.0, "selected_heading_deg": 135.0, "selected_mach": 1.6}
SEQ, UTC = 11, 1893456000.5
VECTORS = json.loads((Path(__file__).parent / "vectors" / "wire_vectors.json").read_text(
    encoding="utf-8"))


def _ref(fields: dict, keys: tuple[str, ...]) -> bytes:
    """msgpack-python's bytes for the header then ``keys`` in this order (nil if absent)."""
    m = {"v": 1, "type": "air", "seq": SEQ, "utc_s": UTC}
    m.update({k: fields.get(k) for k in keys})
    return msgpack.packb(m, use_bin_type=True)


def _general(payload: bytes) -> Frame:
    """The general (msgpack-python) decoder, bypassing the canonical-layout kernel."""
    return Frame(*frame_rules.check_map(msgpack.unpackb(payload, raw=False,
                                                        strict_map_key=True)))


def _f64(name: str, x: float | None) -> bytes:
    """One map entry by hand: fixstr key, then float 64 or nil (MessagePack spec)."""
    key = bytes([0xA0 | len(name)]) + name.encode("ascii")
    return key + (b"\xc0" if x is None else b"\xcb" + struct.pack(">d", x))


def _same(a: Frame, b: Frame) -> bool:
    """Frames equal, comparing numbers by their float 64 bits (NaN included)."""
    if (a.type, a.seq, a.version, list(a.fields)) != (b.type, b.seq, b.version,
                                                       list(b.fields)):
        return False
    for x, y in zip((a.utc_s, *a.fields.values()), (b.utc_s, *b.fields.values()),
                    strict=True):
        if (x is None) != (y is None):
            return False
        if x is not None and struct.pack(">d", x) != struct.pack(">d", y):
            return False
    return True


# ------------------------------------------------------------------ encoding: the group rule

@pytest.mark.parametrize(("extra", "keys", "head"), [
    ({}, FIRST, "de0011"),
    ({"load_factor": 1.25}, FIRST + PAIR, "de0013"),
    ({"pitch_rate_dps": -2.0, "load_factor": 0.75}, FIRST + PAIR, "de0013"),
    (GOAL, ALL, "de0016"),
    ({"selected_mach": 1.6}, ALL, "de0016"),
    (dict(GOAL, pitch_rate_dps=1.5), ALL, "de0016"),
], ids=["first-release", "pair-one", "pair-both", "targets", "one-target",
        "targets-and-pitch"])
def test_encoder_writes_groups_up_to_the_last_one_given(extra, keys, head) -> None:
    # ICD section 4 (encoding rule) and MessagePack spec (map 16: de + uint16 count):
    # 4 header keys + 13, 15 or 18 fields = 17 (0x11), 19 (0x13) or 22 (0x16) entries.
    fields = dict(AIR, sat_c=-56.5, **extra)
    p = encode_air(fields, SEQ, UTC)
    assert p == _ref(fields, keys)  # reference: msgpack-python, keys in the ICD's order
    assert p[:3].hex() == head


def test_targets_without_the_pair_send_the_pair_as_nil_by_hand() -> None:
    # ICD section 4: a frame with any target carries every later key, the pair as nil
    # when not sent. The tail of the payload assembled by hand from the MessagePack
    # spec: fixstr keys (a0 | length), float 64 (cb + 8 bytes big-endian) or nil (c0).
    p = encode_air(dict(AIR, **GOAL), SEQ, UTC)
    tail = (b"\xae" + b"pitch_rate_dps" + b"\xc0" + b"\xab" + b"load_factor" + b"\xc0"
            + b"\xaf" + b"selected_alt_ft" + b"\xcb" + bytes.fromhex("40e9640000000000")
            + b"\xb4" + b"selected_heading_deg" + b"\xcb" + bytes.fromhex("4060e00000000000")
            + b"\xad" + b"selected_mach" + b"\xcb" + bytes.fromhex("3ff999999999999a"))
    assert p.endswith(tail)
    # IEEE 754 binary64 worked by hand: 52000 = 1.5869140625 x 2^15, exponent 1038 =
    # 0x40e, fraction 0x964 -> 40 e9 64 00 ...; 135 = 1.0546875 x 2^7 -> 40 60 e0 00 ...;
    # 1.6 = 1.6 x 2^0, fraction 0.6 = 0x0.999... rounded up to ...9a (value from memory).
    assert struct.pack(">d", 1.6).hex() == "3ff999999999999a"


def test_first_release_and_pair_frames_keep_their_bytes() -> None:
    # Version rule (ICD section 7): without a target, the bytes are those of the earlier
    # releases, built here entry by entry from the MessagePack spec.
    head = (b"\xa1v\x01" + b"\xa4type\xa3air" + b"\xa3seq\x0b" + b"\xa5utc_s\xcb"
            + struct.pack(">d", UTC))
    body = b"".join(_f64(k, AIR.get(k)) for k in FIRST)
    assert encode_air(AIR, SEQ, UTC) == b"\xde\x00\x11" + head + body
    pair = _f64("pitch_rate_dps", None) + _f64("load_factor", 1.5)
    assert encode_air(dict(AIR, load_factor=1.5), SEQ, UTC) == (
        b"\xde\x00\x13" + head + body + pair)


def test_encoder_names_a_bad_target() -> None:
    # Bad input gets one line naming the field and the value (common practice, no source).
    with pytest.raises(ValueError, match=r"'selected_mach'.*'fast'"):
        encode_air(dict(AIR, selected_mach="fast"), 1, 0.0)
    with pytest.raises(ValueError, match=r"'selected_heading_deg'.*True"):
        encode_air(dict(AIR, selected_heading_deg=True), 1, 0.0)


# ------------------------------------------------------------------ decoding: three layouts

@pytest.mark.parametrize(("extra", "keys"), [
    ({}, FIRST), ({"pitch_rate_dps": 2.0}, FIRST + PAIR), (GOAL, ALL),
    ({"selected_heading_deg": 359.5, "load_factor": -0.5}, ALL),
], ids=["17", "19", "22", "22-partial"])
def test_each_canonical_layout_takes_the_kernel_and_matches_the_general_path(extra,
                                                                              keys) -> None:
    # Twin parity: the numba kernel and the general msgpack-python path read the same
    # frame alike (no outside source); the values are those packed by msgpack-python.
    fields = dict(AIR, **extra)
    p = _ref(fields, keys)
    assert air_fastpath.air_canonical_kernel(p)[0] >= 0
    f = decode_frame(p)
    assert _same(f, _general(p))
    assert f.fields == {k: fields.get(k) for k in ALL}
    assert list(f.fields) == list(ALL)


def test_kernel_parity_with_nan_infinity_and_all_nil_targets() -> None:
    # Twin parity on special float 64 values (IEEE 754 NaN, infinities, -0.0) in the new
    # positions, and a 22-entry frame whose targets are all nil (a valid layout).
    for goal in ({"selected_alt_ft": math.nan, "selected_heading_deg": -0.0,
                  "selected_mach": math.inf},
                 {"selected_alt_ft": None, "selected_heading_deg": None,
                  "selected_mach": None}):
        p = _ref(dict(AIR, **goal), ALL)
        assert p[:3] == b"\xde\x00\x16"
        assert air_fastpath.air_canonical_kernel(p)[0] >= 0
        assert _same(decode_frame(p), _general(p))


def test_the_kernel_returns_every_field() -> None:
    # The kernel's tuple: mask, seq, utc_s, then one value per field of the ICD table.
    p = _ref(dict(AIR, **GOAL), ALL)
    r = air_fastpath.air_canonical_kernel(p)
    assert len(r) == 3 + len(ALL)
    assert r[1] == SEQ and r[2] == UTC
    assert r[3 + ALL.index("selected_mach")] == 1.6
    assert r[0] >> ALL.index("selected_alt_ft") & 1 == 1
    assert r[0] >> ALL.index("pitch_rate_dps") & 1 == 0  # nil: bit clear


@pytest.mark.parametrize("name", ["targets-without-pair", "one-target-only", "reordered",
                                  "int-target", "float32-target", "pair-then-one-target"])
def test_noncanonical_layouts_fall_back_to_the_general_path(name) -> None:
    # ICD section 8: any key order and any subset of optional keys decode; an integer or
    # float 32 is accepted for a float field; absent optional keys read as nil. None of
    # these is an encoder's layout, so the kernel declines and the general path decodes.
    if name == "targets-without-pair":  # keys 1-13, 16-18: a map of 20
        p = _ref(dict(AIR, **GOAL), FIRST + TARGETS)
        want = dict(GOAL)
    elif name == "one-target-only":  # keys 1-13 and 18: a map of 18
        p = _ref(dict(AIR, selected_mach=1.2), FIRST + ("selected_mach",))
        want = {"selected_mach": 1.2}
    elif name == "reordered":  # the 22 keys, targets first
        p = _ref(dict(AIR, **GOAL), TARGETS + FIRST + PAIR)
        want = dict(GOAL)
    elif name == "int-target":  # selected_alt_ft as uint 16 (cd c3 50)
        p = _ref(dict(AIR, **dict(GOAL, selected_alt_ft=50000)), ALL)
        assert b"\xafselected_alt_ft\xcd\xc3\x50" in p
        want = dict(GOAL, selected_alt_ft=50000.0)
    elif name == "float32-target":  # selected_mach as float 32 (ca + 4 bytes)
        p = _ref(dict(AIR, **GOAL), ALL)
        p = p.replace(b"\xadselected_mach\xcb" + struct.pack(">d", 1.6),
                      b"\xadselected_mach\xca" + struct.pack(">f", 1.5))
        want = dict(GOAL, selected_mach=1.5)
    else:  # keys 1-15 and 16: a map of 20
        p = _ref(dict(AIR, pitch_rate_dps=1.0, selected_alt_ft=30000.0),
                 FIRST + PAIR + ("selected_alt_ft",))
        want = {"pitch_rate_dps": 1.0, "selected_alt_ft": 30000.0}
    assert air_fastpath.air_canonical_kernel(p)[0] == -1
    dec = FrameDecoder()
    f = dec.decode(p)
    assert f is not None and f.fields == {k: dict(AIR, **want).get(k) for k in ALL}
    assert dec.unknown_keys == 0  # every key is known: none counted as unknown
    assert _same(f, _general(p))


def test_a_map_of_22_with_the_wrong_keys_is_refused_or_read_as_the_rules_say() -> None:
    # A map 16 header claiming 22 entries over 18 entries is truncated MessagePack
    # (ICD section 8 rule 2, "malformed"); the kernel declines before reading past the end.
    p = _ref(dict(AIR, **GOAL), ALL)
    short = b"\xde\x00\x16" + _ref(AIR, FIRST + ("selected_mach",))[3:]
    assert air_fastpath.air_canonical_kernel(short)[0] == -1
    with pytest.raises(FrameError) as err:
        decode_frame(short)
    assert err.value.reason == "malformed"
    # one unknown key in place of a target: decoded, the key reported as unknown
    odd = p.replace(b"\xadselected_mach", b"\xadselected_mich")
    assert air_fastpath.air_canonical_kernel(odd)[0] == -1
    unknown: list[str] = []
    f = Frame(*frame_rules.check_map(msgpack.unpackb(odd), unknown))
    assert unknown == ["selected_mich"] and f.fields["selected_mach"] is None


@pytest.mark.parametrize(("value", "reason"), [("1.6", "bad_type"), (True, "bad_type"),
                                               ([1.6], "bad_type"), (None, None), (2, None)])
@pytest.mark.parametrize("key", TARGETS)
def test_decoder_type_checks_cover_the_targets(key, value, reason) -> None:
    # ICD section 8 rule 8: an optional number is a number or nil; anything else is
    # bad_type, and the message names the field and the value.
    p = _ref(dict(AIR, **{key: value}), ALL)
    if reason is None:
        f = decode_frame(p)
        assert f.fields[key] == (None if value is None else float(value))
        return
    with pytest.raises(FrameError) as err:
        decode_frame(p)
    assert err.value.reason == reason
    assert repr(key) in str(err.value) and repr(value)[:20] in str(err.value)


def test_a_reader_of_the_pair_release_sees_the_same_entries_plus_unknown_keys() -> None:
    # Version rule (ICD section 7): a receiver of the previous release knows keys 1-15
    # only; in a frame with targets it finds those entries in the same order with the
    # same values, then three keys it ignores.
    fields = dict(AIR, sat_c=-56.5, pitch_rate_dps=0.5, load_factor=1.1)
    new = msgpack.unpackb(encode_air(dict(fields, **GOAL), 9, UTC))
    old = msgpack.unpackb(encode_air(fields, 9, UTC))
    assert list(new)[:len(old)] == list(old)
    assert {k: new[k] for k in old} == old
    assert list(new)[len(old):] == list(TARGETS)


_num = st.one_of(st.none(), st.floats(allow_nan=False), st.integers(-2**40, 2**40))


@settings(max_examples=200, deadline=None)
@given(st.dictionaries(st.sampled_from(FIRST[8:] + PAIR + TARGETS), _num),
       st.permutations(range(22)))
def test_any_subset_and_order_of_optional_keys_decodes(opt, order) -> None:
    # ICD section 8: keys in any order, optional keys present or not; an absent optional
    # key reads as nil, an integer as its float. Packed by msgpack-python in a shuffled
    # order (the header keys shuffled too).
    items = [("v", 1), ("type", "air"), ("seq", SEQ), ("utc_s", UTC), *AIR.items(),
             *opt.items()]
    items = [items[i] for i in order if i < len(items)]
    p = msgpack.packb(dict(items), use_bin_type=True)
    f = decode_frame(p)
    want = {k: None if dict(AIR, **opt).get(k) is None else float(dict(AIR, **opt)[k])
            for k in ALL}
    assert f.fields == want
    assert _same(f, _general(p))


def test_shared_vectors_with_later_groups_are_msgpack_python_bytes() -> None:
    # The shared vectors (also read by the C binding's tests) hold one frame of each
    # later layout; each payload must be what msgpack-python packs for the keys in the
    # ICD's order, cut after the last group given (ICD section 4).
    seen = set()
    for case in VECTORS["air"]:
        fields = case["fields"]
        if any(k in TARGETS for k in fields):
            keys = ALL
        elif any(k in PAIR for k in fields):
            keys = FIRST + PAIR
        else:
            keys = FIRST
        m = {"v": 1, "type": "air", "seq": case["seq"], "utc_s": case["utc_s"]}
        m.update({k: fields.get(k) for k in keys})
        assert case["payload"] == msgpack.packb(m, use_bin_type=True).hex()
        seen.add(len(m))
    assert seen == {17, 19, 22}


def test_the_icd_lists_the_targets_in_order_with_their_ranges() -> None:
    # docs/interface.md section 4: the field table numbers the keys 1-18 in canonical
    # order, and the receiver's ranges for the targets are the ones the ICD states.
    text = (Path(__file__).resolve().parents[1] / "docs" / "interface.md").read_text(
        encoding="utf-8")
    sec4 = text[text.index("## 4. Air-data frame"):text.index("## 5. Advisory frame")]
    rows = [line.split("|") for line in sec4.splitlines()
            if line.startswith("| ") and line.split("|")[1].strip().isdigit()]
    assert [r[2].strip().strip("`") for r in rows] == list(ALL)
    ranges = {r[2].strip().strip("`"): r[6].strip() for r in rows}
    assert ranges["selected_alt_ft"] == "-2000 .. 100000"
    assert ranges["selected_heading_deg"] == "0 .. 360 (360 excluded)"
    assert ranges["selected_mach"] == "0.1 .. 5.0"
    assert "| 1-18 | 22 | `de 00 16` |" in sec4
