"""Write ``tests/vectors/wire_vectors.json``: the shared test vectors of the wire format.

Run from the repository root after a deliberate change of the wire format::

    python tests/vectors/generate_wire_vectors.py

The file is checked in; ``tests/test_wire_frames.py`` checks the Python side and
``tests/test_c_binding.py`` the C side against it, so a change that alters the bytes
on the wire shows up as a diff of this file. All scenarios are invented.
"""

from __future__ import annotations

import json
import struct
from pathlib import Path

import msgpack

from advisory.io.framing import datagram, frame_stream
from advisory.io.messages import encode_adv, encode_air, encode_status

OUT = Path(__file__).with_name("wire_vectors.json")

AIR = [
    {"seq": 0, "utc_s": 1893456000.0, "fields": {
        "lat_deg": 40.0, "lon_deg": -100.0, "alt_ft": 45000.0, "mach": 1.4,
        "heading_deg": 90.0, "gs_kt": 740.0, "bank_deg": 0.0, "fpa_deg": 0.0}},
    {"seq": 127, "utc_s": 1893456000.05, "fields": {
        "lat_deg": -33.5, "lon_deg": 151.25, "alt_ft": 52000.0, "mach": 1.62,
        "heading_deg": 359.9, "gs_kt": 905.5, "bank_deg": -25.0, "fpa_deg": 1.5,
        "track_deg": 2.25, "mach_rate_per_s": -0.004, "sat_c": -56.5,
        "wind_from_deg": 250.0, "wind_kt": 42.0}},
    {"seq": 128, "utc_s": 1893456000.1, "fields": {
        "lat_deg": 0.0, "lon_deg": 180.0, "alt_ft": -500.0, "mach": 0.0,
        "heading_deg": 0.0, "gs_kt": 0.0, "bank_deg": 90.0, "fpa_deg": -90.0,
        "sat_c": 15.0}},
    {"seq": 65536, "utc_s": 1893456123.456, "fields": {
        "lat_deg": 89.999, "lon_deg": -179.999, "alt_ft": 99999.0, "mach": 3.99,
        "heading_deg": 180.0, "gs_kt": 2400.0, "bank_deg": 45.0, "fpa_deg": 10.0,
        "track_deg": 181.0, "wind_from_deg": 0.0, "wind_kt": 0.0}},
    {"seq": 4294967295, "utc_s": 1893456999.999, "fields": {
        "lat_deg": 12.345678901234, "lon_deg": 98.7654321, "alt_ft": 60000.5, "mach": 1.05,
        "heading_deg": 45.0, "gs_kt": 620.0, "bank_deg": 5.5, "fpa_deg": -0.25,
        "mach_rate_per_s": 0.01}},
    # the later groups (ICD section 4): the pitch and load pair alone (a map of 19), the
    # flight-guidance targets without the pair (22, the pair as nil), both (22)
    {"seq": 200, "utc_s": 1893456200.0, "fields": {
        "lat_deg": 35.5, "lon_deg": -117.25, "alt_ft": 48000.0, "mach": 1.3,
        "heading_deg": 300.0, "gs_kt": 760.0, "bank_deg": 0.0, "fpa_deg": 2.0,
        "pitch_rate_dps": 3.25}},
    {"seq": 201, "utc_s": 1893456200.05, "fields": {
        "lat_deg": 35.5, "lon_deg": -117.25, "alt_ft": 48000.0, "mach": 1.3,
        "heading_deg": 300.0, "gs_kt": 760.0, "bank_deg": 20.0, "fpa_deg": 2.0,
        "track_deg": 301.5, "sat_c": -57.0, "selected_alt_ft": 52000.0,
        "selected_heading_deg": 135.0, "selected_mach": 1.6}},
    {"seq": 202, "utc_s": 1893456200.1, "fields": {
        "lat_deg": -12.0, "lon_deg": 45.0, "alt_ft": 1500.0, "mach": 0.8,
        "heading_deg": 10.0, "gs_kt": 480.0, "bank_deg": -30.0, "fpa_deg": -3.0,
        "pitch_rate_dps": -1.5, "load_factor": 0.8, "selected_alt_ft": -1000.0,
        "selected_heading_deg": 0.0}},
]

ADV = [
    {"seq": 1, "utc_s": 1893456000.0, "fields": {"status": "clear", "cue": ""}},
    {"seq": 2, "utc_s": 1893456001.0, "fields": {
        "status": "caution", "zone_id": "zone-7", "time_to_contact_s": 120.0,
        "overpressure_psf": 1.5, "focus": False, "max_mach_off_ground": 1.12,
        "turn_right_deg": 20.0, "cue": "SLOW 1.12"}},
    {"seq": 300, "utc_s": 1893456002.5, "fields": {
        "status": "warning", "zone_id": "Larkmoor town", "time_to_contact_s": 35.5,
        "overpressure_psf": 2.75, "focus": True, "max_mach_off_ground": None,
        "turn_left_deg": 35.0, "turn_right_deg": 15.0, "tables_stale": True,
        "cue": "TURN RIGHT 15 \u00b7 focus boom \u2192 Larkmoor"}},
    {"seq": 70000, "utc_s": 1893456003.0, "fields": {
        "status": "unavailable", "cue": "air data stale", "tables_stale": False}},
    {"seq": 5, "utc_s": 1893456004.0, "fields": {
        "status": "no_boom", "zone_id": "z" * 63, "cue": "c" * 127}},
    # issue 13: the optional keys and the status "unavoidable" (format version 2)
    {"seq": 6, "utc_s": 1893456005.0, "fields": {
        "status": "warning", "zone_id": "zone-7", "time_to_contact_s": 48.0,
        "overpressure_psf": 1.9, "focus": False, "max_mach_off_ground": 1.1,
        "turn_left_deg": 40.0, "turn_right_deg": None,
        "cue": "WARNING Larkmoor M1.08+L TO 320 ACT 15S", "act_by_s": 15.5,
        "resolve_mach": 1.08, "turn_left_hdg": 320.0,
        "turn_right_hdg": None, "combined": True}},
    {"seq": 7, "utc_s": 1893456006.0, "fields": {
        "status": "unavoidable", "zone_id": "zone-7", "time_to_contact_s": 42.0,
        "overpressure_psf": 2.9, "cue": "BOOM DUE Larkmoor IN 42S 2.9 PSF",
        "turn_right_hdg": 75.0}},
]

STATUS = [
    {"seq": 9, "utc_s": 1893456000.0, "fields": {
        "state": "ok", "reason": "", "counters": {"frames_ok": 1200, "bad_crc": 0}}},
    {"seq": 10, "utc_s": 1893456001.0, "fields": {
        "state": "degraded", "reason": "2 frames with bad CRC in the last second",
        "counters": {"bad_crc": 2, "decoded": 70000, "frames_ok": 4294967296,
                     "range:mach": 1}}},
    {"seq": 11, "utc_s": 1893456002.0, "fields": {
        "state": "unavailable", "reason": "serial link lost; reopening",
        "counters": {}}},
    {"seq": 12, "utc_s": 1893456003.0, "fields": {
        "state": "ok", "reason": "r" * 127,
        "counters": {f"c{i:02d}" + "x" * 40: 2**64 - 1 - i for i in range(48)}}},
]


def _pack(obj) -> str:
    return msgpack.packb(obj, use_bin_type=True).hex()


def _air_map(**over):
    m = {"v": 1, "type": "air", "seq": 1, "utc_s": 1893456000.0, "lat_deg": 1.0,
         "lon_deg": 2.0, "alt_ft": 3.0, "mach": 1.2, "heading_deg": 4.0, "gs_kt": 5.0,
         "bank_deg": 6.0, "fpa_deg": 7.0}
    m.update(over)
    return {k: v for k, v in m.items() if v is not _DROP}


_DROP = object()


def _nest(lists: int):
    """``lists`` nested lists around an empty map: depth lists + 1 below its holder."""
    x: object = {}
    for _ in range(lists):
        x = [x]
    return x

# (name, payload hex, expected reason or None for "decodes")
INVALID = [
    ("empty", "", "malformed"),
    ("truncated map", "81a176", "malformed"),
    ("trailing byte", _pack({"v": 1}) + "00", "malformed"),
    ("reserved byte c1", "c1", "malformed"),
    ("bad utf-8 in key", "81a2c328" + "01", "malformed"),
    ("surrogate in string", "81a176a3eda080", "malformed"),
    ("int map key", "810101", "malformed"),
    ("bad timestamp length", _pack({"x": 1})[:-2] + "c705ff0000000000", "malformed"),
    ("nesting 17 deep", "81a178" + "91" * 15 + "80", "malformed"),
    ("nesting 16 deep ok", _pack(_air_map(x=_nest(14))), None),
    ("nesting 17 deep in an unknown field", _pack(_air_map(x=_nest(15))), "malformed"),
    ("nesting 17 deep behind a bad version", _pack(_air_map(v=9, x=_nest(15))), "malformed"),
    ("array at top", "9101", "not_a_map"),
    ("integer at top", "01", "not_a_map"),
    ("missing v", _pack(_air_map(v=_DROP)), "missing_field"),
    ("v is a string", _pack(_air_map(v="1")), "bad_type"),
    ("v is true", _pack(_air_map(v=True)), "bad_type"),
    ("version 2", _pack(_air_map(v=2)), "unsupported_version"),
    ("version -1", _pack(_air_map(v=-1)), "unsupported_version"),
    ("missing type", _pack(_air_map(type=_DROP)), "missing_field"),
    ("type is bin", _pack(_air_map(type=b"air")), "bad_type"),
    ("unknown type", _pack(_air_map(type="wind")), "unknown_type"),
    ("missing seq", _pack(_air_map(seq=_DROP)), "missing_field"),
    ("seq float", _pack(_air_map(seq=1.0)), "bad_type"),
    ("seq negative", _pack(_air_map(seq=-1)), "bad_value"),
    ("seq too big", _pack(_air_map(seq=2**32)), "bad_value"),
    ("utc_s nil", _pack(_air_map(utc_s=None)), "bad_type"),
    ("utc_s int ok", _pack(_air_map(utc_s=1893456000)), None),
    ("mach missing", _pack(_air_map(mach=_DROP)), "missing_field"),
    ("mach nil", _pack(_air_map(mach=None)), "bad_type"),
    ("mach string", _pack(_air_map(mach="1.2")), "bad_type"),
    ("mach bool", _pack(_air_map(mach=True)), "bad_type"),
    ("mach int ok", _pack(_air_map(mach=2)), None),
    ("sat_c string", _pack(_air_map(sat_c="cold")), "bad_type"),
    ("unknown fields ignored", _pack(_air_map(extra=[1, {"a": b"x"}], zz=None)), None),
    ("bin key ignored", "81c4017601", "missing_field"),
    ("duplicate key last wins", "8d" + _pack(_air_map())[2:] + "a46d616368cb3ff8000000000000",
     None),
    ("duplicate key, bad first", "8d" + _pack(_air_map(mach="x"))[2:]
     + "a46d616368cb3ff8000000000000", None),
    ("duplicate counter, last wins", _pack({"v": 1, "type": "status", "seq": 1,
                                            "utc_s": 0.0, "state": "ok", "reason": "",
                                            "counters": {"a": 1}})[:-8] + "82a161ffa16105",
     None),
    ("status not in set", _pack({"v": 1, "type": "adv", "seq": 1, "utc_s": 0.0,
                                 "status": "panic", "focus": False, "tables_stale": False,
                                 "cue": ""}), "bad_value"),
    ("focus missing", _pack({"v": 1, "type": "adv", "seq": 1, "utc_s": 0.0,
                             "status": "clear", "tables_stale": False, "cue": ""}),
     "missing_field"),
    ("focus int", _pack({"v": 1, "type": "adv", "seq": 1, "utc_s": 0.0, "status": "clear",
                         "focus": 0, "tables_stale": False, "cue": ""}), "bad_type"),
    ("zone_id too long", _pack({"v": 1, "type": "adv", "seq": 1, "utc_s": 0.0,
                                "status": "clear", "zone_id": "z" * 64, "focus": False,
                                "tables_stale": False, "cue": ""}), "bad_value"),
    ("cue with NUL", _pack({"v": 1, "type": "adv", "seq": 1, "utc_s": 0.0,
                            "status": "clear", "focus": False, "tables_stale": False,
                            "cue": "a\x00b"}), "bad_value"),
    ("adv minimal ok", _pack({"v": 1, "type": "adv", "seq": 1, "utc_s": 0.0,
                              "status": "clear", "focus": False, "tables_stale": False,
                              "cue": ""}), None),
    ("adv version 1 ok", _pack({"v": 1, "type": "adv", "seq": 1, "utc_s": 0.0,
                                "status": "warning", "focus": False,
                                "tables_stale": False, "cue": ""}), None),
    ("adv version 1 with the issue-13 keys ok", _pack({
        "v": 1, "type": "adv", "seq": 1, "utc_s": 0.0, "status": "warning", "focus": False,
        "tables_stale": False, "cue": "", "act_by_s": 3.5, "combined": True}), None),
    ("unavoidable in version 1", _pack({"v": 1, "type": "adv", "seq": 1, "utc_s": 0.0,
                                        "status": "unavoidable", "focus": False,
                                        "tables_stale": False, "cue": ""}), "bad_value"),
    ("adv version 2 without the issue-13 keys ok", _pack({
        "v": 2, "type": "adv", "seq": 1, "utc_s": 0.0, "status": "unavoidable",
        "focus": False, "tables_stale": False, "cue": ""}), None),
    ("adv version 3", _pack({"v": 3, "type": "adv", "seq": 1, "utc_s": 0.0,
                             "status": "clear", "focus": False, "tables_stale": False,
                             "cue": ""}), "unsupported_version"),
    ("status version 2", _pack({"v": 2, "type": "status", "seq": 1, "utc_s": 0.0,
                                "state": "ok", "reason": "", "counters": {}}),
     "unsupported_version"),
    ("combined int", _pack({"v": 2, "type": "adv", "seq": 1, "utc_s": 0.0,
                            "status": "clear", "focus": False, "tables_stale": False,
                            "cue": "", "combined": 1}), "bad_type"),
    ("act_by_s string", _pack({"v": 2, "type": "adv", "seq": 1, "utc_s": 0.0,
                               "status": "clear", "focus": False, "tables_stale": False,
                               "cue": "", "act_by_s": "soon"}), "bad_type"),
    ("turn_left_hdg int ok", _pack({"v": 2, "type": "adv", "seq": 1, "utc_s": 0.0,
                                    "status": "caution", "focus": False,
                                    "tables_stale": False, "cue": "",
                                    "turn_left_hdg": 245}), None),
    ("counters not a map", _pack({"v": 1, "type": "status", "seq": 1, "utc_s": 0.0,
                                  "state": "ok", "reason": "", "counters": [1]}), "bad_type"),
    ("counter negative", _pack({"v": 1, "type": "status", "seq": 1, "utc_s": 0.0,
                                "state": "ok", "reason": "", "counters": {"a": -1}}),
     "bad_value"),
    ("counter float", _pack({"v": 1, "type": "status", "seq": 1, "utc_s": 0.0,
                             "state": "ok", "reason": "", "counters": {"a": 1.0}}), "bad_type"),
    ("counter bin name", _pack({"v": 1, "type": "status", "seq": 1, "utc_s": 0.0,
                                "state": "ok", "reason": "", "counters": {b"a": 1}}),
     "bad_type"),
    ("49 counters", _pack({"v": 1, "type": "status", "seq": 1, "utc_s": 0.0,
                           "state": "ok", "reason": "",
                           "counters": {f"c{i}": i for i in range(49)}}), "bad_value"),
    ("state unknown", _pack({"v": 1, "type": "status", "seq": 1, "utc_s": 0.0,
                             "state": "fine", "reason": "", "counters": {}}), "bad_value"),
]


def _vector(kind: str, case: dict, encode) -> dict:
    payload = encode(case["fields"], case["seq"], case["utc_s"])
    return {"seq": case["seq"], "utc_s": case["utc_s"],
            "utc_bits": struct.pack(">d", case["utc_s"]).hex(), "fields": case["fields"],
            "payload": payload.hex(), "stream": frame_stream(payload).hex(),
            "datagram": datagram(payload).hex()}


def build() -> dict:
    """The vectors as a JSON-ready dict."""
    return {
        "about": "Shared wire-format test vectors (invented scenarios). Generated by "
                 "tests/vectors/generate_wire_vectors.py; checked by test_wire_frames.py "
                 "(Python) and test_c_binding.py (C).",
        "air": [_vector("air", c, encode_air) for c in AIR],
        "adv": [_vector("adv", c, encode_adv) for c in ADV],
        "status": [_vector("status", c, encode_status) for c in STATUS],
        "invalid": [{"name": n, "payload": p, "reason": r} for n, p, r in INVALID],
    }


if __name__ == "__main__":
    OUT.write_text(json.dumps(build(), indent=1, ensure_ascii=False) + "\n", encoding="utf-8")
    print(f"wrote {OUT}")
