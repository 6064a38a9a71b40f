"""Frames, stream framing and datagrams: canonical bytes, decode rules, bad input."""

from __future__ import annotations

import json
import math
import random
import struct
from pathlib import Path

import msgpack
import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from advisory.io import air_fastpath, frame_rules, framing
from advisory.io.crc32c import crc32c
from advisory.io.framing import MAX_ENCODED, StreamDeframer, datagram, frame_stream, parse_datagram
from advisory.io.messages import (
    Frame,
    FrameDecoder,
    FrameError,
    decode_frame,
    encode_adv,
    encode_air,
    encode_status,
    next_seq,
)
from advisory.schema import (
    ADV_FIELDS,
    AIR_FIELDS,
    AIR_LATER_OPTIONAL,
    AIR_OPTIONAL,
    AIR_REQUIRED,
    CRC_LEN,
    DECODE_REASONS,
    HEADER_KEYS,
    LINK_COUNTERS,
    MAX_PAYLOAD,
)
from tests.twins.framing import deframe_twin, unstuff_check_twin

VECTORS = json.loads((Path(__file__).parent / "vectors" / "wire_vectors.json").read_text(
    encoding="utf-8"))
ICD = Path(__file__).parent.parent / "docs" / "interface.md"

#: The air fields of the first release of the ICD (section 4 as first published).
FIRST_RELEASE_AIR = ("lat_deg", "lon_deg", "alt_ft", "mach", "heading_deg", "gs_kt",
                     "bank_deg", "fpa_deg", "track_deg", "mach_rate_per_s", "sat_c",
                     "wind_from_deg", "wind_kt")

AIR = {"lat_deg": 40.0, "lon_deg": -100.0, "alt_ft": 45000.0, "mach": 1.4,
       "heading_deg": 90.0, "gs_kt": 740.0, "bank_deg": 0.0, "fpa_deg": 0.0}


def _general(payload: bytes) -> Frame:
    """Decode through the general (msgpack-python) path, bypassing the fast kernel."""
    return Frame(*frame_rules.check_map(msgpack.unpackb(payload, raw=False,
                                                        strict_map_key=True)))


# ------------------------------------------------------------------ canonical encoding

def test_air_payload_is_what_msgpack_python_packs():
    # Reference: msgpack-python itself, use_bin_type=True, keys in the canonical order
    # (ICD "Canonical key order"): floats as float 64, ints in their smallest format.
    # Without pitch rate and load factor the later pair is left out (ICD section 4).
    fields = dict(AIR, sat_c=-56.5)
    p = encode_air(fields, 7, 1893456000.0)
    ref = {"v": 1, "type": "air", "seq": 7, "utc_s": 1893456000.0}
    ref.update({k: fields.get(k) for k in AIR_FIELDS if k not in AIR_LATER_OPTIONAL})
    assert p == msgpack.packb(ref, use_bin_type=True)
    assert list(msgpack.unpackb(p)) == list(HEADER_KEYS + FIRST_RELEASE_AIR)
    fields = dict(AIR, sat_c=-56.5, load_factor=1.25)
    p = encode_air(fields, 7, 1893456000.0)
    pair = ("pitch_rate_dps", "load_factor")  # ICD section 4, keys 14-15
    ref.update({k: fields.get(k) for k in pair})
    assert p == msgpack.packb(ref, use_bin_type=True)
    assert list(msgpack.unpackb(p)) == list(HEADER_KEYS + FIRST_RELEASE_AIR + pair)


def test_int_values_are_sent_as_float64():
    # ICD: every number field is float 64 even when given as an int.
    p = encode_air(dict(AIR, alt_ft=45000), 1, 1893456000)
    assert b"\xcb" + struct.pack(">d", 45000.0) in p
    assert b"\xcb" + struct.pack(">d", 1893456000.0) in p


def test_icd_example_hex_matches_encoder():
    # The worked example in docs/interface.md must be exactly what the encoder sends.
    text = ICD.read_text(encoding="utf-8")
    p = encode_air(dict(AIR, sat_c=-56.5, wind_from_deg=270.0, wind_kt=25.0), 7,
                   1893456000.0)
    assert _hex_block(p.hex()) in text
    assert _hex_block(frame_stream(p).hex()) in text
    assert _hex_block(datagram(p).hex()) in text


def _hex_block(h: str) -> str:
    """Hex as the ICD prints it: 16 bytes per line, bytes separated by spaces."""
    b = [h[i:i + 2] for i in range(0, len(h), 2)]
    return "\n".join(" ".join(b[i:i + 16]) for i in range(0, len(b), 16))


@pytest.mark.parametrize("kind", ["air", "adv", "status"])
def test_shared_vectors_python_side(kind):
    # tests/vectors/wire_vectors.json is shared with the C binding test.
    enc = {"air": encode_air, "adv": encode_adv, "status": encode_status}[kind]
    for case in VECTORS[kind]:
        p = enc(case["fields"], case["seq"], case["utc_s"])
        assert p.hex() == case["payload"]
        assert frame_stream(p).hex() == case["stream"]
        assert datagram(p).hex() == case["datagram"]
        frame = decode_frame(p)
        assert frame.type == kind and frame.seq == case["seq"]
        assert frame.utc_s == case["utc_s"]
        for k, v in case["fields"].items():
            assert frame.fields[k] == v


def test_shared_invalid_vectors_python_side():
    for case in VECTORS["invalid"]:
        payload = bytes.fromhex(case["payload"])
        if case["reason"] is None:
            decode_frame(payload)
        else:
            with pytest.raises(FrameError) as err:
                decode_frame(payload)
            assert err.value.reason == case["reason"], case["name"]


# ------------------------------------------------------------------------- round trips

def test_air_round_trip_with_optional_fields():
    fields = dict(AIR, track_deg=91.0, mach_rate_per_s=0.001, sat_c=-50.0,
                  wind_from_deg=270.0, wind_kt=30.0, pitch_rate_dps=-1.5, load_factor=-0.25)
    f = decode_frame(encode_air(fields, 42, 1893456000.25))
    targets = dict.fromkeys(("selected_alt_ft", "selected_heading_deg", "selected_mach"))
    assert f == Frame("air", 42, 1893456000.25, dict(fields, **targets), 1)
    fields.update(pitch_rate_dps=None)  # one of the pair: the other is sent as nil
    p = encode_air(fields, 43, 1893456000.25)
    assert b"\xaepitch_rate_dps\xc0" in p
    assert decode_frame(p) == Frame("air", 43, 1893456000.25, dict(fields, **targets),
                                    1) == _general(p)


def test_air_absent_optionals_decode_as_none():
    f = decode_frame(encode_air(AIR, 1, 1893456000.0))
    assert f.fields == dict(AIR, track_deg=None, mach_rate_per_s=None, sat_c=None,
                            wind_from_deg=None, wind_kt=None, pitch_rate_dps=None,
                            load_factor=None, selected_alt_ft=None,
                            selected_heading_deg=None, selected_mach=None)
    assert list(f.fields) == list(AIR_FIELDS)


def test_frames_without_the_later_pair_keep_their_bytes_and_decode():
    # Version rule (ICD section 7): a new optional field keeps v = 1. A frame without
    # the pair is the first release's frame byte for byte (the first five shared vectors
    # predate the pair and are still what the encoder writes,
    # test_shared_vectors_python_side), and it decodes on both paths with the pair None.
    first = [c for c in VECTORS["air"] if not set(c["fields"]) & set(AIR_LATER_OPTIONAL)]
    assert len(first) == 5
    for case in first:
        p = bytes.fromhex(case["payload"])
        assert list(msgpack.unpackb(p))[4:] == list(FIRST_RELEASE_AIR)
        f = decode_frame(p)
        assert f == _general(p) and f.fields["pitch_rate_dps"] is None
        assert f.fields["load_factor"] is None


def test_a_first_release_reader_sees_the_same_entries_and_ignores_the_pair():
    # Version rule (ICD section 7): receivers ignore unknown fields. A first-release
    # reader knows FIRST_RELEASE_AIR only: in a frame with the pair it finds the very
    # same entries (same order, same bytes) plus two keys it does not know. The decoder
    # treats a key it does not know the same way (decoded, counted as unknown), shown
    # here with a key no release defines.
    fields = dict(AIR, sat_c=-56.5, pitch_rate_dps=2.0, load_factor=1.1)
    new = msgpack.unpackb(encode_air(fields, 9, 1893456000.0))
    old = msgpack.unpackb(encode_air(dict(AIR, sat_c=-56.5), 9, 1893456000.0))
    assert {k: v for k, v in new.items() if k not in AIR_LATER_OPTIONAL} == old
    assert list(new)[:len(old)] == list(old)
    m = dict(new, roll_rate_dps=3.0)
    unknown: list[str] = []
    f = Frame(*frame_rules.check_map(m, unknown))
    assert unknown == ["roll_rate_dps"]
    assert f.fields == {k: fields.get(k) for k in AIR_FIELDS}


def test_adv_round_trip_and_defaults():
    f = decode_frame(encode_adv({"status": "advisory", "zone_id": "Brackenfold park",
                                 "time_to_contact_s": 240.0}, 3, 1893456000.0))
    assert f.type == "adv"
    assert list(f.fields) == list(ADV_FIELDS)
    assert f.fields["zone_id"] == "Brackenfold park"
    assert f.fields["focus"] is False and f.fields["tables_stale"] is False
    assert f.fields["cue"] == "" and f.fields["turn_left_deg"] is None


def test_status_round_trip_counters_sorted():
    p = encode_status({"state": "degraded", "reason": "stale air data",
                       "counters": {"zeta": 1, "alpha": 2**40}}, 4, 1893456000.0)
    m = msgpack.unpackb(p)
    assert list(m["counters"]) == ["alpha", "zeta"]  # canonical: sorted by name
    assert decode_frame(p).fields == {"state": "degraded", "reason": "stale air data",
                                      "counters": {"alpha": 2**40, "zeta": 1}}


def test_next_seq_wraps():
    assert next_seq(0) == 1
    assert next_seq(2**32 - 1) == 0


# ---------------------------------------------------------------------- encoder errors

@pytest.mark.parametrize(("call", "match"), [
    (lambda: encode_air({k: v for k, v in AIR.items() if k != "mach"}, 1, 0.0), "mach"),
    (lambda: encode_air(dict(AIR, mach="fast"), 1, 0.0), "mach"),
    (lambda: encode_air(dict(AIR, mach=True), 1, 0.0), "mach"),
    (lambda: encode_air(dict(AIR, alt_m=1.0), 1, 0.0), "alt_m"),
    (lambda: encode_air(AIR, -1, 0.0), "seq"),
    (lambda: encode_air(AIR, 2**32, 0.0), "seq"),
    (lambda: encode_adv({"status": "panic"}, 1, 0.0), "status"),
    (lambda: encode_adv({"status": "clear", "zone_id": "z" * 64}, 1, 0.0), "zone_id"),
    (lambda: encode_adv({"status": "clear", "cue": "a\x00"}, 1, 0.0), "cue"),
    (lambda: encode_adv({"status": "clear", "focus": 1}, 1, 0.0), "focus"),
    (lambda: encode_status({"state": "ok", "counters": {"a": -1}}, 1, 0.0), "'a'"),
    (lambda: encode_status({"state": "ok", "counters": {f"c{i}": 1 for i in range(49)}},
                           1, 0.0), "counters"),
])
def test_encoder_errors_name_the_field(call, match):
    with pytest.raises(ValueError, match=match):
        call()


def test_encoder_accepts_numpy_numbers():
    fields = {k: np.float64(v) for k, v in AIR.items()}
    assert encode_air(fields, np.uint32(5), np.float32(1.5)) == encode_air(AIR, 5, 1.5)


# ------------------------------------------------------------------------ decode rules

def _raw(**over):
    m = {"v": 1, "type": "air", "seq": 1, "utc_s": 1893456000.0, **AIR}
    m.update(over)
    return msgpack.packb(m, use_bin_type=True)


def test_unknown_fields_are_ignored():
    f = decode_frame(_raw(cabin_temp_c=21.0, extra={"nested": [1, 2, b"x"]}))
    assert "cabin_temp_c" not in f.fields and f.fields["mach"] == 1.4


def test_unknown_version_refused_and_counted():
    dec = FrameDecoder()
    assert dec.decode(_raw(v=2)) is None
    assert dec.decode(_raw(v=3)) is None
    assert dec.decode(_raw()) is not None
    assert dec.counters["unsupported_version"] == 2
    assert dec.counters["decoded"] == 1
    assert "'v' = 3" in str(dec.last_error)


def test_reject_messages_name_field_and_value():
    with pytest.raises(FrameError, match=r"'mach'.*'1\.4'") as err:
        decode_frame(_raw(mach="1.4"))
    assert err.value.reason == "bad_type"


def test_order_of_checks_version_before_fields():
    # ICD, "Decoding rules": the first failing check is reported.
    with pytest.raises(FrameError) as err:
        decode_frame(_raw(v=3, mach="x", type="nope"))
    assert err.value.reason == "unsupported_version"


def test_oversize_payload():
    with pytest.raises(FrameError) as err:
        decode_frame(b"\x00" * (MAX_PAYLOAD + 1))
    assert err.value.reason == "oversize"


def test_fast_path_matches_general_path_on_vectors():
    for case in VECTORS["air"]:
        p = bytes.fromhex(case["payload"])
        # canonical payloads take the fast path
        assert air_fastpath.air_canonical_kernel(p)[0] >= 0
        assert decode_frame(p) == _general(p)


_num = st.one_of(st.floats(allow_nan=True, allow_infinity=True), st.integers(-2**60, 2**60))


@settings(max_examples=300, deadline=None)
@given(st.fixed_dictionaries(
    {k: _num for k in AIR_REQUIRED},
    optional={k: st.one_of(st.none(), _num) for k in AIR_OPTIONAL}),
    st.integers(0, 2**32 - 1), st.floats(allow_nan=True))
def test_fast_path_equals_general_path(fields, seq, utc):
    # The numba reader of canonical air frames is a twin of the general decoder.
    p = encode_air(fields, seq, utc)
    fast, slow = decode_frame(p), _general(p)
    assert fast.seq == slow.seq and fast.type == slow.type
    assert list(fast.fields) == list(slow.fields)
    for a, b in zip((fast.utc_s, *fast.fields.values()), (slow.utc_s, *slow.fields.values()),
                    strict=True):
        assert (a is None and b is None) or struct.pack(">d", a) == struct.pack(">d", b)


def test_noncanonical_layout_uses_general_path():
    # Keys in another order, or a uint8 where the encoder would use a fixint: not the
    # canonical layout, same result through the general path.
    m = {"type": "air", "v": 1, "utc_s": 1.0, "seq": 5, **AIR}
    p = msgpack.packb(m, use_bin_type=True)
    assert air_fastpath.air_canonical_kernel(p)[0] == -1
    assert decode_frame(p).fields["gs_kt"] == 740.0


# --------------------------------------------------------------------- stream framing

def _frames(n, start=0):
    return [encode_air(dict(AIR, lon_deg=-100.0 + i * 1e-3), start + i, 1893456000.0 + i)
            for i in range(n)]


def test_deframer_many_frames_in_one_chunk_and_byte_by_byte():
    payloads = _frames(20)
    stream = b"".join(frame_stream(p) for p in payloads)
    assert StreamDeframer().feed(stream) == payloads
    d = StreamDeframer()
    got = [q for i in range(len(stream)) for q in d.feed(stream[i:i + 1])]
    assert got == payloads and d.counters["frames_ok"] == 20


def test_deframer_survives_garbage_burst():
    payloads = _frames(6)
    rng = random.Random(1)
    garbage = bytes(rng.randrange(256) for _ in range(3000))
    stream = b"".join(frame_stream(p) for p in payloads[:3]) + garbage + b"\x00" + b"".join(
        frame_stream(p) for p in payloads[3:])
    d = StreamDeframer()
    assert d.feed(stream) == payloads
    bad = sum(v for k, v in d.counters.items() if k != "frames_ok")
    assert bad >= 1  # the burst is counted (as COBS errors, bad CRC or runts)
    assert d.counters["frames_ok"] == 6


def test_deframer_torn_frame():
    a, b, c = _frames(3)
    torn = frame_stream(a)[:40]  # sender reset mid-frame: no delimiter
    # Without a resynchronising 0x00 the torn bytes swallow the next frame (one loss,
    # counted); the frame after that is intact.
    d = StreamDeframer()
    assert d.feed(torn + frame_stream(b) + frame_stream(c)) == [c]
    assert d.counters["frames_ok"] == 1
    assert d.counters["cobs_error"] + d.counters["bad_crc"] == 1
    # A sender that writes a leading 0x00 after a restart loses only the torn frame.
    d = StreamDeframer()
    assert d.feed(torn + b"\x00" + frame_stream(b) + frame_stream(c)) == [b, c]
    assert d.counters["cobs_error"] + d.counters["bad_crc"] == 1


def test_deframer_bad_crc_counted():
    a, b = _frames(2)
    s = bytearray(frame_stream(a))
    s[10] = s[10] ^ 0x01 if s[10] ^ 0x01 else 0x02  # one flipped bit, never a zero
    d = StreamDeframer()
    assert d.feed(bytes(s) + frame_stream(b)) == [b]
    assert d.counters["bad_crc"] == 1


def test_deframer_oversize_counted_once_and_recovers():
    (a,) = _frames(1)
    d = StreamDeframer()
    junk = b"\x07" * (MAX_ENCODED + 500)
    out = d.feed(junk[:3000]) + d.feed(junk[3000:]) + d.feed(b"\x00" + frame_stream(a))
    assert out == [a]
    assert d.counters["oversize"] == 1


def test_deframer_runt_and_empty_delimiters():
    d = StreamDeframer()
    assert d.feed(b"\x00\x00\x00\x02\x01\x00") == []  # empties ignored, 1-byte frame runt
    assert d.counters["too_short"] == 1
    assert sum(d.counters.values()) == 1


def test_deframer_reset_drops_partial():
    (a,) = _frames(1)
    d = StreamDeframer()
    d.feed(frame_stream(a)[:20])
    d.reset()
    assert d.feed(frame_stream(a)) == [a]


def test_unstuff_kernel_matches_twin():
    # Kernel/twin parity (tests/twins/framing.py): same return code, same bytes, also at
    # an offset into the output and with zero bytes and short capacities in the mix.
    rng = random.Random(7)
    size = MAX_PAYLOAD + CRC_LEN + 64
    cases = [frame_stream(p)[:-1] for p in _frames(5)]
    cases += [bytes(rng.randrange(1, 256) for _ in range(rng.randrange(1, 400)))
              for _ in range(300)]
    cases += [bytes(rng.randrange(0, 4) for _ in range(rng.randrange(0, 40)))
              for _ in range(100)]
    for n, seg in enumerate(cases):
        base = n % 7
        cap = size - 64 if n % 3 else rng.randrange(0, 60)
        dst_k = np.zeros(size, dtype=np.uint8)
        dst_p = np.zeros(size, dtype=np.uint8)
        k = int(framing.unstuff_check_kernel(seg, 0, len(seg), dst_k, base, cap))
        p = unstuff_check_twin(seg, 0, len(seg), dst_p, base, cap)
        assert k == p
        if k >= 0:
            assert dst_k[base:base + k].tobytes() == dst_p[base:base + p].tobytes()


# -------------------------------------------------------------------------- datagrams

def test_datagram_round_trip_and_errors():
    (p,) = _frames(1)
    dg = datagram(p)
    assert dg[:-4] == p and int.from_bytes(dg[-4:], "big") == crc32c(p)
    assert parse_datagram(dg) == p
    for data, reason in [(b"\x01\x02", "too_short"), (dg[:-1] + bytes([dg[-1] ^ 1]), "bad_crc"),
                         (b"\x01" * (framing.MAX_DATAGRAM + 1), "oversize")]:
        with pytest.raises(FrameError) as err:
            parse_datagram(data)
        assert err.value.reason == reason
    r = framing.DatagramReader()
    assert r.feed(dg) == [p] and r.feed(b"xx") == []
    assert r.counters["frames_ok"] == 1 and r.counters["too_short"] == 1


# ---------------------------------------------------------------- decoders never raise

@settings(max_examples=400, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.binary(max_size=700))
def test_decoders_never_raise_on_random_bytes(data):
    # Fuzz (hypothesis): only FrameError from the raising API, nothing from the
    # counting ones.
    try:
        decode_frame(data)
    except FrameError as exc:
        assert exc.reason in DECODE_REASONS
    try:
        parse_datagram(data)
    except FrameError as exc:
        assert exc.reason in LINK_COUNTERS
    dec = FrameDecoder()
    dec.decode(data)
    assert sum(dec.counters.values()) == 1
    d = StreamDeframer()
    d.feed(data)
    d.feed(b"\x00")


@settings(max_examples=300, deadline=None)
@given(st.data())
def test_decoders_never_raise_on_mutated_frames(data):
    p = bytearray(encode_adv({"status": "caution", "zone_id": "zone-7",
                              "time_to_contact_s": 90.0, "cue": "TURN LEFT 20"}, 9, 1.0))
    for _ in range(data.draw(st.integers(1, 6))):
        op = data.draw(st.sampled_from(["flip", "cut", "insert"]))
        i = data.draw(st.integers(0, max(len(p) - 1, 0)))
        if op == "flip" and p:
            p[i] ^= data.draw(st.integers(1, 255))
        elif op == "cut":
            del p[i:i + data.draw(st.integers(1, 8))]
        else:
            p[i:i] = data.draw(st.binary(min_size=1, max_size=8))
    dec = FrameDecoder()
    dec.decode(bytes(p))
    assert sum(dec.counters.values()) == 1


def test_frame_decoder_counts_non_bytes():
    dec = FrameDecoder()
    assert dec.decode(None) is None and dec.decode(12345) is None
    assert dec.counters["malformed"] == 2


@pytest.mark.slow
def test_fuzz_100k_frames_never_raise_and_all_counted():
    # Issue 8 fuzz budget: 100,000 generated and mutated frames through deframer and
    # decoder; every one is either decoded or counted under one reason.
    rng = random.Random(20240601)
    base = [frame_stream(p) for p in _frames(8)]
    base += [frame_stream(encode_adv({"status": "warning", "cue": "x"}, 1, 1.0)),
             frame_stream(encode_status({"state": "ok", "counters": {"a": 1}}, 1, 1.0))]
    dec = FrameDecoder()
    deframer = StreamDeframer()
    n = 100_000
    for i in range(n):
        s = bytearray(rng.choice(base))
        if i % 4:
            for _ in range(rng.randrange(1, 4)):
                j = rng.randrange(len(s) - 1)
                s[j] = rng.randrange(1, 256)
        if i % 10 == 0:
            s = bytearray(rng.randbytes(rng.randrange(1, 300))) + b"\x00"
        for payload in deframer.feed(bytes(s)):
            dec.decode(payload)
    total_link = sum(deframer.counters.values())
    assert total_link >= n * 0.9  # a few mutated frames may merge into one segment
    assert sum(dec.counters.values()) == deframer.counters["frames_ok"]


def test_nan_and_infinity_travel_unchanged():
    # NaN and infinities are valid float 64 on the wire; the state validator judges them.
    f = decode_frame(encode_air(dict(AIR, mach=math.nan, alt_ft=math.inf), 1, 0.0))
    assert math.isnan(f.fields["mach"]) and f.fields["alt_ft"] == math.inf


def test_deframe_kernel_matches_twin_on_dirty_streams():
    # Kernel/twin parity for the chunk deframer, including the discarding state.
    rng = random.Random(11)
    good = [frame_stream(p) for p in _frames(30)]
    for trial in range(60):
        pieces = []
        for _ in range(rng.randrange(1, 12)):
            r = rng.random()
            s = rng.choice(good)
            if r < 0.2:
                s = s[:rng.randrange(1, len(s))]
            elif r < 0.4:
                s = bytes(rng.randrange(256) for _ in range(rng.randrange(1, 80)))
            elif r < 0.45:
                s = b"\x09" * (MAX_ENCODED + rng.randrange(0, 3)) + b"\x00"
            pieces.append(s)
        buf = b"".join(pieces)
        discarding = trial % 5 == 0
        results = []
        for fn in (framing.deframe_kernel, deframe_twin):
            out = np.zeros(len(buf) + 8, dtype=np.uint8)
            offs = np.zeros(len(buf) + 1, dtype=np.int64)
            lens = np.zeros(len(buf) + 1, dtype=np.int64)
            counts = np.zeros(len(LINK_COUNTERS), dtype=np.int64)
            k, pos, disc = fn(buf, discarding, MAX_ENCODED, MAX_PAYLOAD + CRC_LEN, out, offs,
                              lens, counts)
            got = [out[o:o + n].tobytes() for o, n in zip(offs[:k], lens[:k], strict=True)]
            results.append((got, int(pos), bool(disc), counts.tolist()))
        assert results[0] == results[1]
        assert results[0][3][LINK_COUNTERS.index("frames_ok")] == len(results[0][0])


def test_vector_file_is_what_the_generator_writes():
    # The checked-in vectors must be reproducible from tests/vectors/generate_wire_vectors.py.
    import importlib.util

    path = Path(__file__).parent / "vectors" / "generate_wire_vectors.py"
    spec = importlib.util.spec_from_file_location("generate_wire_vectors", path)
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    assert json.loads(json.dumps(mod.build(), ensure_ascii=False)) == VECTORS


# ---------------------------------------------------------------- issue 13: new keys, version 2

#: The advisory frame example of the interface document as it stood for version 1
#: (docs/interface.md section 14 before issue 13; an outside record of the old bytes).
ICD_V1_ADV_EXAMPLE = bytes.fromhex(
    "8ea17601a474797065a3616476a373657105a57574635f73cb41dc36f62040000"
    "0a6737461747573a763617574696f6ea77a6f6e655f6964a67a6f6e652d37b174"
    "696d655f746f5f636f6e746163745f73cb405e000000000000b06f766572707265"
    "73737572655f707366cb3ff8000000000000a5666f637573c2b36d61785f6d6163"
    "685f6f66665f67726f756e64cb3ff1eb851eb851ecad7475726e5f6c6566745f64"
    "6567c0ae7475726e5f72696768745f646567cb4034000000000000ac7461626c65"
    "735f7374616c65c2a3637565a9534c4f5720312e3132")

NEW_KEYS = {"act_by_s": 15.5, "resolve_mach": 1.08, "turn_left_hdg": 320.0,
            "turn_right_hdg": None, "combined": True}


def test_a_version_1_frame_without_the_new_keys_decodes_with_the_new_code() -> None:
    # ICD section 7: the new keys are optional; absent, they decode as nil / false.
    f = decode_frame(ICD_V1_ADV_EXAMPLE)
    assert f.version == 1 and f.fields["status"] == "caution"
    assert f.fields["max_mach_off_ground"] == 1.12 and f.fields["cue"] == "SLOW 1.12"
    assert f.fields["act_by_s"] is None and f.fields["resolve_mach"] is None
    assert f.fields["turn_left_hdg"] is None and f.fields["turn_right_hdg"] is None
    assert f.fields["combined"] is False


def test_new_keys_round_trip_in_canonical_order_after_the_old_ones() -> None:
    p = encode_adv({"status": "unavoidable", "zone_id": "zone-7", "time_to_contact_s": 42.0,
                    "overpressure_psf": 2.9, "cue": "BOOM DUE Larkmoor IN 42S 2.9 PSF",
                    **NEW_KEYS}, 6, 1893456005.0)
    m = msgpack.unpackb(p)
    assert m["v"] == 2  # ICD section 7: a new status value increases v (advisory frames)
    old = ["status", "zone_id", "time_to_contact_s", "overpressure_psf", "focus",
           "max_mach_off_ground", "turn_left_deg", "turn_right_deg", "tables_stale", "cue"]
    assert list(m)[4:] == old + list(NEW_KEYS)  # appended after the version-1 keys
    f = decode_frame(p)
    assert f.version == 2 and f.fields["status"] == "unavoidable"
    assert {k: f.fields[k] for k in NEW_KEYS} == NEW_KEYS


def test_the_unavoidable_status_needs_version_2() -> None:
    m = msgpack.unpackb(encode_adv({"status": "unavoidable", "cue": ""}, 1, 1.0))
    m["v"] = 1
    with pytest.raises(FrameError) as err:
        decode_frame(msgpack.packb(m))
    assert err.value.reason == "bad_value" and "unavoidable" in str(err.value)
    m["v"] = 3
    with pytest.raises(FrameError) as err:
        decode_frame(msgpack.packb(m))
    assert err.value.reason == "unsupported_version"
    air = msgpack.unpackb(encode_air(AIR, 1, 1893456000.0))
    air["v"] = 2  # version 2 is an advisory-frame version only
    with pytest.raises(FrameError) as err:
        decode_frame(msgpack.packb(air))
    assert err.value.reason == "unsupported_version"


def test_a_version_1_frame_for_older_receivers() -> None:
    # ICD section 7: "a service may be configured to send an older version". Version 1
    # has no "unavoidable": it goes as "warning" (its most urgent level), and the new keys
    # go along as optional keys, which a version-1 receiver ignores (section 8).
    p = encode_adv({"status": "unavoidable", "zone_id": "zone-7", "cue": "x", **NEW_KEYS},
                   2, 1.0, version=1)
    m = msgpack.unpackb(p)
    assert m["v"] == 1 and m["status"] == "warning" and m["combined"] is True
    v1_keys = set(HEADER_KEYS) | {"status", "zone_id", "time_to_contact_s",
                                  "overpressure_psf", "focus", "max_mach_off_ground",
                                  "turn_left_deg", "turn_right_deg", "tables_stale", "cue"}
    unknown: list[str] = []
    f = decode_frame(p, unknown)
    assert sorted(unknown) == [] and f.fields["status"] == "warning"
    assert set(m) - v1_keys == set(NEW_KEYS)  # what a version-1 receiver skips
    with pytest.raises(ValueError, match="version"):
        encode_adv({"status": "clear"}, 1, 1.0, version=3)


def test_at_limit_is_sent_only_when_true():
    # ICD section 5, key 18, and section 7 (a compatible optional key): a frame whose
    # resolution is not at the limit is byte for byte the frame without the key, so
    # every frame sent before it stays as it was; a receiver reads its absence as false.
    base = {"status": "caution", "zone_id": "zone-3", "time_to_contact_s": 80.0,
            "overpressure_psf": 1.1, "cue": "R TO 075 ACT 30S", "act_by_s": 30.0,
            "turn_right_deg": 20.0, "turn_right_hdg": 75.0}
    without = encode_adv(base, 9, 1893456000.0)
    assert encode_adv(dict(base, at_limit=False), 9, 1893456000.0) == without
    assert "at_limit" not in msgpack.unpackb(without)
    assert decode_frame(without).fields["at_limit"] is False
    marked = encode_adv(dict(base, at_limit=True), 9, 1893456000.0)
    assert msgpack.unpackb(marked)["at_limit"] is True
    assert decode_frame(marked).fields["at_limit"] is True
