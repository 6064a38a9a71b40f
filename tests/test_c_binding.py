"""The C binding (bindings/c) against the Python side, byte for byte, both directions.

The library is built with the system compiler through its Makefile, warnings as errors
(``-std=c99 -Wall -Wextra -O2 -Werror``). Its test-vector tool ``boom_vectors`` is fed
the shared vectors of ``tests/vectors/wire_vectors.json`` plus seeded random and
mutated frames; every answer must equal what the Python package gives.
"""

from __future__ import annotations

import json
import math
import random
import shutil
import struct
import subprocess
from pathlib import Path

import msgpack
import pytest

from advisory.io.framing import StreamDeframer, datagram, frame_stream, parse_datagram
from advisory.io.messages import FrameError, decode_frame, encode_adv, encode_air, encode_status
from advisory.io.transports import FramedLink, open_transport
from advisory.schema import ADV_STATUSES, AIR_FIELDS, AIR_OPTIONAL

ROOT = Path(__file__).resolve().parent.parent
C_DIR = ROOT / "bindings" / "c"
VECTORS = json.loads((ROOT / "tests" / "vectors" / "wire_vectors.json").read_text(
    encoding="utf-8"))

pytestmark = pytest.mark.skipif(shutil.which("make") is None or shutil.which("cc") is None,
                                reason="needs make and a C compiler (cc)")


@pytest.fixture(scope="module")
def build(c_build) -> Path:
    """The session's build of bindings/c (tests/conftest.py)."""
    return c_build


def run_tool(build: Path, lines: list[str]) -> list[str]:
    proc = subprocess.run([str(build / "boom_vectors")], input="\n".join(lines) + "\n",
                          capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0, proc.stderr
    out = proc.stdout.splitlines()
    assert len(out) == len(lines)
    return out


def _bits(x: float) -> str:
    return struct.pack(">d", x).hex()


def _fmt_num(key: str, x) -> str:
    return f"{key}=-" if x is None else f"{key}={_bits(x)}"


def _fmt_text(key: str, s) -> str:
    return f"{key}=-" if s is None else f"{key}=s{s.encode('utf-8').hex()}"


def python_line(payload: bytes) -> str:
    """What boom_vectors prints for ``dec``, computed by the Python decoder."""
    try:
        f = decode_frame(payload)
    except FrameError as exc:
        return f"err {exc.reason}"
    parts = [f"ok {f.type} seq={f.seq}", _fmt_num("utc_s", f.utc_s)]
    d = f.fields
    if f.type == "air":
        parts += [_fmt_num(k, d[k]) for k in AIR_FIELDS]
    elif f.type == "adv":
        parts += [f"status={d['status']}", _fmt_text("zone_id", d["zone_id"]),
                  _fmt_num("time_to_contact_s", d["time_to_contact_s"]),
                  _fmt_num("overpressure_psf", d["overpressure_psf"]),
                  f"focus={'T' if d['focus'] else 'F'}",
                  _fmt_num("max_mach_off_ground", d["max_mach_off_ground"]),
                  _fmt_num("turn_left_deg", d["turn_left_deg"]),
                  _fmt_num("turn_right_deg", d["turn_right_deg"]),
                  f"tables_stale={'T' if d['tables_stale'] else 'F'}",
                  _fmt_text("cue", d["cue"]),
                  _fmt_num("act_by_s", d["act_by_s"]),
                  _fmt_num("resolve_mach", d["resolve_mach"]),
                  _fmt_num("turn_left_hdg", d["turn_left_hdg"]),
                  _fmt_num("turn_right_hdg", d["turn_right_hdg"]),
                  f"combined={'T' if d['combined'] else 'F'}",
                  *(["near_cutoff=T"] if d["near_cutoff"] else []),
                  *([_fmt_num("boom_probability", d["boom_probability"])]
                    if d["boom_probability"] is not None else []),
                  *(["at_limit=T"] if d["at_limit"] else []),
                  *(["level_off=T"] if d["level_off"] else []), f"v={f.version}"]
    else:
        counters = ",".join(f"{k.encode().hex()}:{v}" for k, v in d["counters"].items())
        parts += [f"state={d['state']}", _fmt_text("reason", d["reason"]),
                  f"counters={counters}"]
    return " ".join(parts)


def _same_decode(c_line: str, py_line: str) -> bool:
    """Equal, treating any two NaN bit patterns as equal (a NaN is a NaN)."""
    if c_line == py_line:
        return True
    a, b = c_line.split(" "), py_line.split(" ")
    if len(a) != len(b):
        return False
    for x, y in zip(a, b, strict=True):
        if x == y:
            continue
        kx, _, vx = x.partition("=")
        ky, _, vy = y.partition("=")
        try:
            nan = math.isnan(struct.unpack(">d", bytes.fromhex(vx))[0]) and math.isnan(
                struct.unpack(">d", bytes.fromhex(vy))[0])
        except (ValueError, struct.error):
            return False
        if kx != ky or not nan:
            return False
    return True


def _air_cmd(seq: int, utc: float, fields: dict) -> str:
    vals = [_bits(utc)] + [("-" if fields.get(k) is None else _bits(float(fields[k])))
                           for k in AIR_FIELDS]
    return f"air {seq} " + " ".join(vals)


# ------------------------------------------------------------------- shared vectors

def test_crc_and_cobs_reference_values(build):
    # RFC 3720 B.4 check value; Cheshire and Baker (1999) example (value from memory).
    out = run_tool(build, ["crc " + b"123456789".hex(), "cobs 4500002c4c79000040064f37",
                           "uncobs 024501042c4c79010540064f37", "uncobs 0311"])
    assert out == ["e3069283", "024501042c4c79010540064f37", "ok 4500002c4c79000040064f37",
                   "err cobs_error"]


def test_c_encodes_air_vectors_byte_for_byte(build):
    # Direction C -> Python: the C encoder's payload, stream frame and datagram equal
    # the shared vectors (which the Python encoder also produces, see test_wire_frames).
    cases = VECTORS["air"]
    out = run_tool(build, [_air_cmd(c["seq"], c["utc_s"], c["fields"]) for c in cases])
    for case, line in zip(cases, out, strict=True):
        payload, stream, dgram = line.split()
        assert (payload, stream, dgram) == (case["payload"], case["stream"], case["datagram"])
        f = decode_frame(bytes.fromhex(payload))
        assert f.seq == case["seq"] and f.utc_s == case["utc_s"]


@pytest.mark.parametrize("kind", ["air", "adv", "status"])
def test_c_decodes_python_vectors(build, kind):
    # Direction Python -> C: the C decoder reads exactly the values Python wrote.
    payloads = [bytes.fromhex(c["payload"]) for c in VECTORS[kind]]
    out = run_tool(build, ["dec " + p.hex() for p in payloads])
    for p, line in zip(payloads, out, strict=True):
        assert line == python_line(p)
        assert line.startswith(f"ok {kind} ")


def test_c_and_python_agree_on_invalid_vectors(build):
    cases = VECTORS["invalid"]
    out = run_tool(build, ["dec " + c["payload"] for c in cases])
    for case, line in zip(cases, out, strict=True):
        expected = "ok" if case["reason"] is None else f"err {case['reason']}"
        assert line.split(" ")[0] + ("" if case["reason"] is None else " " + line.split()[1]) \
            == expected, case["name"]
        assert line == python_line(bytes.fromhex(case["payload"])), case["name"]


def test_c_datagram_and_deframer_on_vectors(build):
    lines, expected = [], []
    for case in VECTORS["air"] + VECTORS["adv"] + VECTORS["status"]:
        lines.append("dgram " + case["datagram"])
        expected.append("ok " + case["payload"])
    stream = b"".join(bytes.fromhex(c["stream"]) for c in VECTORS["adv"])
    lines.append("deframe " + stream.hex())
    expected.append(f"n={len(VECTORS['adv'])} "
                    + " ".join(c["payload"] for c in VECTORS["adv"])
                    + f" | {len(VECTORS['adv'])} 0 0 0 0")
    assert run_tool(build, lines) == expected


# ------------------------------------------------------------- random cross-checks

def _rand_float(rng: random.Random) -> float:
    r = rng.random()
    if r < 0.05:
        return rng.choice([math.nan, math.inf, -math.inf, -0.0, 5e-324, 1.7976931348623157e308])
    if r < 0.1:
        return float(rng.randrange(-10**6, 10**6))
    return rng.uniform(-1e5, 1e5)


def _rand_text(rng: random.Random, max_bytes: int) -> str:
    alphabet = "abcXYZ 0123456789-_\u00e9\u00b7\u2192\U0001f6e9"
    s = "".join(rng.choice(alphabet) for _ in range(rng.randrange(0, 40)))
    while len(s.encode("utf-8")) > max_bytes:
        s = s[:-1]
    return s


def _random_payloads(rng: random.Random) -> list[bytes]:
    out = []
    # issue 16's key from a generator of its own: the other draws stay as they were
    prob = random.Random(16)
    for _ in range(200):
        fields = {k: _rand_float(rng) for k in AIR_FIELDS}
        for k in AIR_OPTIONAL:
            if rng.random() < 0.4:
                fields[k] = None
        out.append(encode_air(fields, rng.randrange(2**32), _rand_float(rng)))
    for _ in range(200):
        out.append(encode_adv({
            "status": rng.choice(ADV_STATUSES),
            "zone_id": None if rng.random() < 0.3 else _rand_text(rng, 63),
            "time_to_contact_s": None if rng.random() < 0.3 else _rand_float(rng),
            "overpressure_psf": None if rng.random() < 0.3 else _rand_float(rng),
            "focus": rng.random() < 0.5,
            "max_mach_off_ground": None if rng.random() < 0.5 else _rand_float(rng),
            "turn_left_deg": None if rng.random() < 0.5 else _rand_float(rng),
            "turn_right_deg": None if rng.random() < 0.5 else _rand_float(rng),
            "tables_stale": rng.random() < 0.2,
            "cue": _rand_text(rng, 127),
            # issue 13: the optional keys, in version-2 and version-1 frames
            "act_by_s": None if rng.random() < 0.4 else _rand_float(rng),
            "resolve_mach": None if rng.random() < 0.4 else _rand_float(rng),
            "turn_left_hdg": None if rng.random() < 0.4 else _rand_float(rng),
            "turn_right_hdg": None if rng.random() < 0.4 else _rand_float(rng),
            "combined": rng.random() < 0.3,
            "near_cutoff": rng.random() < 0.3,
            "boom_probability": None if prob.random() < 0.5 else prob.random(),
            "at_limit": prob.random() < 0.3,
            "level_off": prob.random() < 0.3},
            rng.randrange(2**32), _rand_float(rng),
            version=rng.choice((1, 2))))
    for _ in range(60):
        counters = {_rand_text(rng, 47) or "n": rng.randrange(2**64)
                    for _ in range(rng.randrange(0, 20))}
        out.append(encode_status({"state": rng.choice(["ok", "degraded", "unavailable"]),
                                  "reason": _rand_text(rng, 127), "counters": counters},
                                 rng.randrange(2**32), _rand_float(rng)))
    return out


def _mutate(rng: random.Random, p: bytes) -> bytes:
    b = bytearray(p)
    for _ in range(rng.randrange(1, 5)):
        op = rng.randrange(4)
        i = rng.randrange(len(b)) if b else 0
        if op == 0 and b:
            b[i] ^= 1 << rng.randrange(8)
        elif op == 1 and b:
            b[i] = rng.randrange(256)
        elif op == 2:
            del b[i:i + rng.randrange(1, 6)]
        else:
            b[i:i] = bytes(rng.randrange(256) for _ in range(rng.randrange(1, 6)))
    return bytes(b)


def _rand_value(rng: random.Random, depth: int = 0):
    r = rng.randrange(14)
    if r == 0:
        return None
    if r == 1:
        return rng.random() < 0.5
    if r == 2:
        return rng.randrange(-2**63, 2**64)
    if r == 3:
        return rng.randrange(-40, 300)
    if r == 4:
        return _rand_float(rng)
    if r == 5:
        return _rand_text(rng, 200)
    if r == 6:
        return rng.choice(list(ADV_STATUSES) + ["ok", "degraded", "air", "adv", "status"])
    if r == 7:
        return rng.randbytes(rng.randrange(0, 10))
    if r == 8 and depth < 20:
        return [_rand_value(rng, depth + 1) for _ in range(rng.randrange(0, 3))]
    if r == 9 and depth < 20:
        return {_rand_text(rng, 10): _rand_value(rng, depth + 1)
                for _ in range(rng.randrange(0, 3))}
    if r == 10:
        return msgpack.ExtType(rng.randrange(0, 128), rng.randbytes(rng.randrange(0, 6)))
    if r == 11:
        return -rng.randrange(1, 2**63)
    if r == 12:
        return {_rand_text(rng, 50): rng.randrange(-5, 2**64) for _ in range(rng.randrange(3))}
    return rng.choice([1, 2, 0, 2**32 - 1, 2**32])


def _structural_mutation(rng: random.Random, payload: bytes) -> bytes:
    """Re-pack a frame with keys dropped, values retyped, unknown or duplicate keys."""
    m = msgpack.unpackb(payload)
    items = list(m.items())
    for _ in range(rng.randrange(1, 3)):
        op = rng.randrange(6)
        if op == 0 and items:
            items.pop(rng.randrange(len(items)))
        elif op in (1, 2) and items:
            i = rng.randrange(len(items))
            items[i] = (items[i][0], _rand_value(rng))
        elif op == 3:
            items.insert(rng.randrange(len(items) + 1), (_rand_text(rng, 12), _rand_value(rng)))
        elif op == 4 and items:
            k, _ = rng.choice(items)
            items.append((k, _rand_value(rng)))  # duplicate key, last one counts
        elif items:
            rng.shuffle(items)
    pk = msgpack.Packer(use_bin_type=True)
    out = bytearray(pk.pack_map_header(len(items)))
    for k, v in items:
        out += pk.pack(k) + pk.pack(v)
    return bytes(out)


def test_random_and_mutated_frames_decode_identically(build):
    # Seeded random frames (NaN, infinities, -0.0, subnormals, non-ASCII text, big
    # counters), then 3000 byte-level and 3000 structural mutations of them (keys
    # dropped, values retyped, unknown and duplicate keys): C and Python give the same
    # answer for every one (the same values, or the same refusal reason).
    rng = random.Random(6)
    good = _random_payloads(rng)
    bad = [_mutate(rng, rng.choice(good)) for _ in range(3000)]
    bad += [_structural_mutation(rng, rng.choice(good)) for _ in range(3000)]
    out = run_tool(build, ["dec " + p.hex() for p in good + bad])
    mismatches = [(p.hex(), c, python_line(p)) for p, c in zip(good + bad, out, strict=True)
                  if not _same_decode(c, python_line(p))]
    assert not mismatches, mismatches[:3]
    assert all(line.startswith("ok ") for line in out[:len(good)])
    assert sum(line.startswith("err ") for line in out[len(good):]) > 1000


def test_random_air_encoding_byte_for_byte(build):
    rng = random.Random(61)
    cases = []
    for _ in range(300):
        fields = {k: _rand_float(rng) for k in AIR_FIELDS}
        for k in AIR_OPTIONAL:
            if rng.random() < 0.5:
                fields[k] = None
        cases.append((rng.randrange(2**32), _rand_float(rng), fields))
    out = run_tool(build, [_air_cmd(s, u, f) for s, u, f in cases])
    for (seq, utc, fields), line in zip(cases, out, strict=True):
        p = encode_air(fields, seq, utc)
        assert line == f"{p.hex()} {frame_stream(p).hex()} {datagram(p).hex()}"


def test_deframer_counters_agree_on_a_dirty_stream(build):
    rng = random.Random(5)
    good = _random_payloads(rng)[:80]
    pieces = []
    for p in good:
        s = frame_stream(p)
        r = rng.random()
        if r < 0.1:
            s = s[:rng.randrange(1, len(s) - 1)]  # torn
        elif r < 0.2:
            s = bytearray(s)
            s[rng.randrange(len(s) - 1)] = rng.randrange(1, 256)  # corrupted
            s = bytes(s)
        elif r < 0.25:
            s = bytes(rng.randrange(256) for _ in range(rng.randrange(1, 50))) + s  # garbage
        elif r < 0.27:
            s = b"\x05" * 5000 + b"\x00" + s  # oversize run
        pieces.append(s)
    stream = b"".join(pieces)
    d = StreamDeframer()
    py_payloads = d.feed(stream)
    c = d.counters
    expected = (f"n={len(py_payloads)} " + " ".join(p.hex() for p in py_payloads)
                + f" | {c['frames_ok']} {c['bad_crc']} {c['cobs_error']} {c['too_short']}"
                f" {c['oversize']}")
    assert run_tool(build, ["deframe " + stream.hex()]) == [expected]
    assert c["oversize"] >= 1 and c["frames_ok"] >= 50


def test_random_datagrams_agree(build):
    rng = random.Random(8)
    data = [bytes(rng.randrange(256) for _ in range(rng.randrange(0, 40))) for _ in range(200)]
    data += [datagram(p) for p in _random_payloads(rng)[:50]]
    out = run_tool(build, ["dgram " + d.hex() for d in data])
    for d, line in zip(data, out, strict=True):
        try:
            expected = "ok " + parse_datagram(d).hex()
        except FrameError as exc:
            expected = "err " + exc.reason
        assert line == expected


# ----------------------------------------------------------------- example sender

def test_example_sender_output_reads_back_in_python(build, tmp_path):
    path = tmp_path / "sender.bin"
    proc = subprocess.run([str(build / "example_sender"), "25", str(path)],
                          capture_output=True, text=True, timeout=60)
    assert proc.returncode == 0, proc.stderr
    assert "not certified flight software" in proc.stderr
    src = open_transport(f"file://{path}", "input")
    link = FramedLink(src)
    got = []
    while not src.at_eof:
        got += link.receive(0.0)
    src.close()
    frames = [decode_frame(p) for p in got]
    assert [f.seq for f in frames] == list(range(25))
    assert all(f.type == "air" and f.fields["mach"] == 1.4 for f in frames)
    assert frames[0].fields["wind_kt"] == 25.0 and frames[0].fields["track_deg"] is None


# ------------------------------------------------------------------- issue 13: old receivers

#: The last commit whose C binding read only format version 1 (before issue 13).
V1_BINDING_COMMIT = "53621f175eaf6a26149f0686114a13e9b372fcce"


@pytest.fixture(scope="module")
def v1_build(tmp_path_factory) -> Path:
    """The version-1 C binding, as integrators have it installed, built from git history."""
    if shutil.which("git") is None:
        pytest.skip("needs git to fetch the version-1 binding")
    src = tmp_path_factory.mktemp("cv1src")
    for name in ("Makefile", "boom_wire.h", "boom_wire.c", "boom_auth.c", "boom_vectors.c",
                 "example_sender.c", "example_udp_sender.c", "example_udp_receiver.c"):
        proc = subprocess.run(["git", "-C", str(ROOT), "show",
                               f"{V1_BINDING_COMMIT}:bindings/c/{name}"],
                              capture_output=True, timeout=60)
        if proc.returncode != 0:
            pytest.skip(f"version-1 binding not in this checkout's history ({name})")
        (src / name).write_bytes(proc.stdout)
    out = tmp_path_factory.mktemp("cv1build")
    proc = subprocess.run(["make", "-C", str(src), f"BUILD={out}", "CFLAGS=-O2"],
                          capture_output=True, text=True, timeout=300)
    assert proc.returncode == 0, proc.stdout + proc.stderr
    return out


def test_an_old_c_receiver_reads_version_1_frames_with_the_new_keys(v1_build):
    # ICD section 7: the new keys are compatible additions (ignored by old receivers); the
    # new status is not, so version-2 frames are refused by a version-1 receiver, never
    # misread, and a service can send version 1 to it ("unavoidable" as "warning").
    new = {"status": "unavoidable", "zone_id": "zone-7", "time_to_contact_s": 42.0,
           "overpressure_psf": 2.9, "cue": "BOOM DUE zone-7 IN 42S 2.9 PSF",
           "act_by_s": 15.5, "resolve_mach": 1.08, "turn_left_hdg": 320.0,
           "combined": True, "near_cutoff": True, "boom_probability": 0.37, "at_limit": True,
           "level_off": True}
    v1 = encode_adv(new, 3, 1893456000.0, version=1)
    v2 = encode_adv(new, 4, 1893456000.0)
    warning_v1 = encode_adv(dict(new, status="warning"), 5, 1893456000.0, version=1)
    out = run_tool(v1_build, [f"dec {p.hex()}" for p in (v1, v2, warning_v1)])
    assert out[0].startswith("ok adv seq=3") and " status=warning " in out[0], out[0]
    assert "zone_id=s" + b"zone-7".hex() in out[0] and "act_by_s" not in out[0]
    assert "boom_probability" not in out[0]  # issue 16's key: ignored, as any unknown key
    assert "at_limit" not in out[0] and "level_off" not in out[0]
    assert out[1] == "err unsupported_version", out[1]
    assert out[2].startswith("ok adv seq=5") and " status=warning " in out[2], out[2]
