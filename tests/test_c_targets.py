"""The C binding and the flight-guidance targets: three canonical layouts, both directions.

``boom_encode_air`` must write the later groups of optional air-data fields exactly as
``docs/interface.md`` section 4 says (every group up to the last one given, none after
it), byte for byte what the Python encoder writes; ``boom_decode_frame`` must read every
layout, canonical or not, with the values the Python decoder gives. The expected bytes
come from msgpack-python (``msgpack.packb`` of a dict with the keys written out in the
ICD's order: the reference implementation of the MessagePack specification), never from
either encoder under test.
"""

from __future__ import annotations

import random
import shutil
from pathlib import Path

import msgpack
import pytest

from advisory.io.framing import datagram, frame_stream
from advisory.io.messages import encode_air
from tests.test_c_binding import _air_cmd, _rand_float, _same_decode, python_line, run_tool

# the ICD's keys 1-18 written out (section 4) and a base frame: one copy, there
from tests.test_wire_targets import AIR, ALL, FIRST, PAIR, TARGETS

pytestmark = pytest.mark.skipif(shutil.which("make") is None or shutil.which("cc") is None,
                                reason="needs make and a C compiler (cc)")

SEQ, UTC = 300, 1893456000.25

#: (name, optional fields given, keys the ICD says are written)
CASES = [
    ("none", {"sat_c": -56.5}, FIRST),
    ("pitch only", {"pitch_rate_dps": 1.75}, FIRST + PAIR),
    ("load only", {"load_factor": 1.2}, FIRST + PAIR),
    ("targets", {"selected_alt_ft": 52000.0, "selected_heading_deg": 135.0,
                 "selected_mach": 1.6}, ALL),
    ("one target", {"selected_heading_deg": 270.25}, ALL),
    ("pair and targets", {"pitch_rate_dps": -0.5, "load_factor": 0.9,
                          "selected_alt_ft": 41000.0, "selected_mach": 1.05}, ALL),
]


@pytest.fixture(scope="module")
def build(c_build) -> Path:
    """The session's build of bindings/c (tests/conftest.py)."""
    return c_build


def _ref(fields: dict, keys: tuple[str, ...]) -> bytes:
    m = {"v": 1, "type": "air", "seq": SEQ, "utc_s": UTC}
    m.update({k: fields.get(k) for k in keys})
    return msgpack.packb(m, use_bin_type=True)


def test_c_encodes_each_layout_as_msgpack_python_packs(build) -> None:
    # Direction C -> reference: the C encoder's payload, stream frame and datagram for
    # each later-group case equal msgpack-python's bytes (ICD section 4 key order) and
    # the Python encoder's; map 16 headers de 00 11 / 13 / 16 (MessagePack spec).
    lines = [_air_cmd(SEQ, UTC, dict(AIR, **extra)) for _, extra, _ in CASES]
    out = run_tool(build, lines)
    for (name, extra, keys), line in zip(CASES, out, strict=True):
        ref = _ref(dict(AIR, **extra), keys)
        assert line == f"{ref.hex()} {frame_stream(ref).hex()} {datagram(ref).hex()}", name
        assert encode_air(dict(AIR, **extra), SEQ, UTC) == ref, name
        assert ref[:3].hex() == {13: "de0011", 15: "de0013", 18: "de0016"}[len(keys)]


def test_c_decodes_every_layout_as_python_does(build) -> None:
    # Direction reference -> C: frames packed by msgpack-python in the three canonical
    # layouts and in other valid ones (ICD section 8: any order, any subset of optional
    # keys, integers for floats) decode in C to the values the Python decoder gives.
    goal = {"selected_alt_ft": 52000.0, "selected_heading_deg": 135.0, "selected_mach": 1.6}
    payloads = [_ref(dict(AIR, **extra), keys) for _, extra, keys in CASES]
    payloads += [
        _ref(dict(AIR, **goal), FIRST + TARGETS),  # targets without the pair: 20 entries
        _ref(dict(AIR, selected_mach=1.2), FIRST + ("selected_mach",)),  # one target alone
        _ref(dict(AIR, **goal), TARGETS + PAIR + FIRST),  # reordered
        _ref(dict(AIR, **dict(goal, selected_alt_ft=50000)), ALL),  # uint 16 target
        _ref(dict(AIR, selected_mach="1.6"), ALL),  # a string: bad_type
        _ref(dict(AIR, selected_heading_deg=True), ALL),  # a boolean: bad_type
    ]
    out = run_tool(build, ["dec " + p.hex() for p in payloads])
    for p, line in zip(payloads, out, strict=True):
        assert line == python_line(p)
    assert all(line.startswith("ok air ") for line in out[:-2])
    assert out[-2:] == ["err bad_type", "err bad_type"]
    assert " selected_alt_ft=40e9640000000000 " in out[3]  # 52000.0, IEEE 754 by hand


def test_random_frames_of_every_layout_agree_both_ways(build) -> None:
    # Seeded random frames spread evenly over the three layouts (values including NaN,
    # infinities, -0.0): the C encoder writes what the Python encoder writes, and the C
    # decoder reads the Python frames alike (twin parity between the two
    # implementations of the ICD; each layout's bytes are anchored above).
    rng = random.Random(18)
    cases = []
    for i in range(240):
        groups = i % 3
        fields = {k: _rand_float(rng) for k in FIRST}
        for k in FIRST[8:]:
            if rng.random() < 0.5:
                fields[k] = None
        later = (PAIR, PAIR + TARGETS)[groups - 1] if groups else ()
        for k in later:
            if rng.random() < 0.5:
                fields[k] = _rand_float(rng)
        if groups and not any(k in fields for k in (PAIR, TARGETS)[groups - 1]):
            fields[(PAIR, TARGETS)[groups - 1][0]] = _rand_float(rng)
        cases.append((rng.randrange(2**32), _rand_float(rng), fields, 13 + (0, 2, 5)[groups]))
    out = run_tool(build, [_air_cmd(s, u, f) for s, u, f, _ in cases])
    payloads = []
    for (seq, utc, fields, n), line in zip(cases, out, strict=True):
        p = encode_air(fields, seq, utc)
        assert line == f"{p.hex()} {frame_stream(p).hex()} {datagram(p).hex()}"
        assert len(msgpack.unpackb(p)) == 4 + n
        payloads.append(p)
    dec = run_tool(build, ["dec " + p.hex() for p in payloads])
    for p, line in zip(payloads, dec, strict=True):
        assert _same_decode(line, python_line(p))
