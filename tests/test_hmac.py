"""Authenticated frames: HMAC-SHA256 tags in Python and in the C binding (issue 15, item 8).

The tag's place and the rules are ``docs/interface.md`` section 7.1: the last map entry
``"auth"``, a 32-byte bin holding HMAC-SHA256 (RFC 2104) over every payload byte before
the tag; receivers with a key refuse frames without a valid tag (``auth_missing``,
``auth_bad``) and frames whose ``seq`` is not newer than the last one (``auth_replay``).
Reference values: RFC 4231 section 4 (HMAC-SHA-256 test cases), Python's ``hmac`` and
``hashlib`` modules (the standard library's implementation), FIPS 180-2 appendix B.1
("abc"). The end-to-end test runs a real ``run`` on 127.0.0.1 with a real key file.
"""

from __future__ import annotations

import hashlib
import hmac
import random
import shutil
import socket
import time
from pathlib import Path

import msgpack
import pytest

import advisory.io.auth as auth
import advisory.io.framing as framing
from advisory.io.framing import datagram
from advisory.io.messages import decode_frame, encode_adv, encode_air, encode_status
from advisory.io.records import KIND_INPUT, read_records
from tests.test_allow_from import zones_file  # noqa: F401 - a fixture
from tests.test_c_binding import run_tool
from tests.test_run_e2e import (
    READY_TIMEOUT_S,
    Listener,
    air_payload,
    end_run,
    free_udp_port,
    running_status,
    start_run,
    stop,
)

ROOT = Path(__file__).resolve().parent.parent
C_DIR = ROOT / "bindings" / "c"
KEY = bytes(range(32, 72))  # invented, 40 bytes

#: RFC 4231 section 4, test cases 1, 2, 3, 4, 6, 7: (key, data, HMAC-SHA-256).
RFC4231 = [
    (b"\x0b" * 20, b"Hi There",
     "b0344c61d8db38535ca8afceaf0bf12b881dc200c9833da726e9376c2e32cff7"),
    (b"Jefe", b"what do ya want for nothing?",
     "5bdcc146bf60754e6a042426089575c75a003f089d2739839dec58b964ec3843"),
    (b"\xaa" * 20, b"\xdd" * 50,
     "773ea91e36800e46854db8ebd09181a72959098b3ef8c122d9635514ced565fe"),
    (bytes(range(1, 26)), b"\xcd" * 50,
     "82558a389a443c0ea4cc819899f2083a85f0faa3e578f8077a2e3ff46729665b"),
    (b"\xaa" * 131, b"Test Using Larger Than Block-Size Key - Hash Key First",
     "60e431591ee0b67f0d8a26aacbf5b77f8e0bc6213728c5140546040f0ee37f54"),
    (b"\xaa" * 131, b"This is a test using a larger than block-size key and a larger than "
                    b"block-size data. The key needs to be hashed before being used by the "
                    b"HMAC algorithm.",
     "9b09ffa71b942fcb27635fbcd5b0e944bfdc63644f0713938a7f51535c3a35e2"),
]

needs_cc = pytest.mark.skipif(shutil.which("make") is None or shutil.which("cc") is None,
                              reason="needs make and a C compiler (cc)")


def frames(rng: random.Random, n: int) -> list[bytes]:
    """Random encoded frames of the three types (invented values)."""
    out = []
    for i in range(n):
        k = i % 3
        if k == 0:
            out.append(air_payload(rng.randrange(2**32), rng.uniform(0, 100)))
        elif k == 1:
            out.append(encode_adv({"status": "caution", "zone_id": "z" * rng.randrange(64),
                                   "time_to_contact_s": rng.uniform(0, 300),
                                   "cue": "x" * rng.randrange(128)},
                                  rng.randrange(2**32), 1.9e9))
        else:
            counters = {f"c{j}": rng.randrange(2**40) for j in range(rng.randrange(48))}
            out.append(encode_status({"state": "ok", "counters": counters},
                                     rng.randrange(2**32), 1.9e9))
    return out


# ------------------------------------------------------------------------------ Python

@pytest.mark.parametrize("key,data,want", RFC4231)
def test_tag_is_hmac_sha256_rfc4231(key, data, want) -> None:
    assert auth.auth_tag(key, data).hex() == want  # RFC 4231 section 4


def test_signed_frames_decode_as_before_and_check() -> None:
    rng = random.Random(15)
    for payload in frames(rng, 30):
        signed = auth.sign_payload(payload, KEY)
        # ICD 7.1: the tag is HMAC-SHA256 over every byte before it (Python's hmac)
        assert signed[-32:] == hmac.new(KEY, signed[:-32], hashlib.sha256).digest()
        assert auth.check_auth(signed, KEY) == ""
        assert auth.check_auth(payload, KEY) == "auth_missing"
        assert auth.check_auth(signed, KEY[:-1] + b"!") == "auth_bad"
        bad = bytearray(signed)
        bad[rng.randrange(len(bad) - 39)] ^= 0x01
        assert auth.check_auth(bytes(bad), KEY) in ("auth_bad", "auth_missing")
        # ICD section 7: a new optional field; receivers that do not check ignore it
        assert decode_frame(signed) == decode_frame(payload)
        assert msgpack.unpackb(signed)["auth"] == signed[-32:]


def test_fixmap_of_15_grows_to_map16() -> None:
    # MessagePack specification: fixmap holds at most 15 entries; 16 needs map 16 (0xde).
    m = {"v": 1, "type": "adv", "seq": 1, "utc_s": 1.9e9}
    m.update({f"k{i}": i for i in range(11)})
    payload = msgpack.packb(m)
    assert payload[0] == 0x8F
    signed = auth.sign_payload(payload, KEY)
    assert signed[:3] == b"\xde\x00\x10" and len(msgpack.unpackb(signed)) == 16
    assert auth.check_auth(signed, KEY) == ""


def test_replayed_and_older_frames_are_refused() -> None:
    ver = framing.AuthVerifier(KEY, resync_s=2.0)
    sign = auth.sign_payload

    def air(seq: int) -> bytes:
        return sign(encode_air({"lat_deg": 1.0, "lon_deg": 2.0, "alt_ft": 3.0, "mach": 1.2,
                                "heading_deg": 0.0, "gs_kt": 600.0, "bank_deg": 0.0,
                                "fpa_deg": 0.0}, seq, 1.9e9), KEY)

    assert ver.admit(air(10), 0.0)
    assert not ver.admit(air(10), 0.1)  # the same frame again
    assert not ver.admit(air(9), 0.2)  # older
    assert ver.admit(air(12), 0.3)  # a gap is fine (lost frames)
    assert ver.admit(sign(encode_status({"state": "ok"}, 0, 1.9e9), KEY), 0.3)  # own count
    assert not ver.admit(air(11), 0.4)
    assert ver.counters == {"auth_missing": 0, "auth_bad": 0, "auth_replay": 3}
    assert ver.admit(air(3), 2.5)  # silent for 2 s: a restarted sender re-anchors
    ver2 = framing.AuthVerifier(KEY)
    assert ver2.admit(air(2**32 - 1), 0.0) and ver2.admit(air(0), 0.1)  # seq wraps
    assert not ver2.admit(encode_status({"state": "ok"}, 5, 1.9e9), 0.2)
    assert ver2.counters["auth_missing"] == 1


def test_key_file_rules(tmp_path) -> None:
    good = tmp_path / "key.hex"
    good.write_text(KEY.hex() + "\n")
    assert framing.load_auth_key(good) == KEY
    short = tmp_path / "short.hex"
    short.write_text("00" * 31)  # RFC 2104 section 3: keys shorter than L=32 discouraged
    for path in (short, tmp_path / "none.hex"):
        with pytest.raises(ValueError, match="--auth-key"):
            framing.load_auth_key(path)
    junk = tmp_path / "junk.hex"
    junk.write_text("not hex at all")
    with pytest.raises(ValueError, match="hex"):
        framing.load_auth_key(junk)


# ------------------------------------------------------------------------------ C side

@pytest.fixture(scope="module")
def cbuild(c_build) -> Path:
    """The session's build of bindings/c (tests/conftest.py)."""
    return c_build


@needs_cc
def test_c_rfc4231_and_sha256(cbuild) -> None:
    # RFC 4231 section 4 (all seven cases, inside the C tool); FIPS 180-2 B.1: "abc"
    assert run_tool(cbuild, ["rfc4231", "sha256 616263"]) == [
        "ok 7", "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"]


@needs_cc
def test_c_tags_equal_python_hmac_for_random_messages(cbuild) -> None:
    rng = random.Random(4231)
    cases = []
    for _ in range(200):
        key = rng.randbytes(rng.choice([1, 20, 32, 63, 64, 65, 131, 200]))
        msg = rng.randbytes(rng.randrange(0, 600))
        cases.append((key, msg))
    got = run_tool(cbuild, [f"hmac {k.hex()} {m.hex()}" for k, m in cases])
    for (key, msg), line in zip(cases, got, strict=True):
        assert line == hmac.new(key, msg, hashlib.sha256).hexdigest()  # Python's hmac
    digests = run_tool(cbuild, [f"sha256 {m.hex()}" for _, m in cases if m])
    assert digests == [hashlib.sha256(m).hexdigest() for _, m in cases if m]


@needs_cc
def test_c_signs_and_checks_like_python(cbuild) -> None:
    rng = random.Random(7)
    payloads = frames(rng, 60)
    signed_c = run_tool(cbuild, [f"sign {KEY.hex()} {p.hex()}" for p in payloads])
    signed_py = [auth.sign_payload(p, KEY) for p in payloads]
    assert signed_c == [f"ok {s.hex()}" for s in signed_py]
    tampered = [s[:-1] + bytes([s[-1] ^ 1]) for s in signed_py]
    checks = run_tool(cbuild, [f"auth {KEY.hex()} {s.hex()}" for s in signed_py + tampered]
                    + [f"auth {KEY.hex()} {payloads[0].hex()}"])
    assert checks == ["ok"] * len(signed_py) + ["auth_bad"] * len(tampered) + ["auth_missing"]
    # the C decoder reads a signed frame as the unsigned one (an unknown field ignored)
    dec = run_tool(cbuild, [f"dec {s.hex()}" for s in signed_py[:9]]
                 + [f"dec {p.hex()}" for p in payloads[:9]])
    assert dec[:9] == dec[9:] and all(x.startswith("ok ") for x in dec)


# ------------------------------------------------------------------------- end to end

def test_run_with_auth_key_admits_only_signed_new_frames(tmp_path, small_table_path,
                                                         zones_file) -> None:  # noqa: F811
    key_file = tmp_path / "link.key"
    key_file.write_text(KEY.hex() + "\n")
    listener = Listener()
    port = free_udp_port()
    record = tmp_path / "auth.boomrec"
    proc = start_run(tmp_path, "--input", f"udp://127.0.0.1:{port}", "--output",
                     listener.url, "--zones", str(zones_file), "--tables",
                     str(small_table_path), "--record", str(record), "--auth-key",
                     str(key_file))
    tx = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
    sent_signed = replayed = unsigned = 0
    try:
        listener.wait_for(running_status, READY_TIMEOUT_S, "first status",
                          after=0.0)
        t0 = time.monotonic()
        for i in range(30):  # 3 s at 10 Hz, one socket (one source)
            time.sleep(max(0.0, t0 + i * 0.1 - time.monotonic()))
            signed = datagram(auth.sign_payload(air_payload(i, i * 0.1), KEY))
            tx.sendto(signed, ("127.0.0.1", port))
            sent_signed += 1
            if i % 5 == 4:
                tx.sendto(signed, ("127.0.0.1", port))  # the same datagram again
                replayed += 1
                tx.sendto(datagram(air_payload(i + 1000, i * 0.1)), ("127.0.0.1", port))
                unsigned += 1
        # let the service take the last datagrams before it stops: wait for a status
        # that counts them all (a fixed 0.5 s missed six of them on a loaded machine)
        listener.wait_for(lambda f: running_status(f) and f.fields["counters"]["valid"]
                          >= sent_signed, 15.0, "a status counting every signed frame",
                          after=t0)
        code = stop(proc)
    finally:
        end_run(proc, listener, tx)
    assert code == 0, (tmp_path / "run.err").read_text()
    records, _ = read_records(record)
    inputs = [decode_frame(r.data) for r in records if r.kind == KIND_INPUT]
    assert [f.seq for f in inputs] == list(range(sent_signed))  # ICD 7.1
    final = [f for f in listener.since(0.0, "status")][-1].fields["counters"]
    assert final["valid"] == sent_signed
    assert final["auth_replay"] == replayed and final["auth_missing"] == unsigned


def test_run_with_a_short_key_is_one_line_and_exit_2(tmp_path, small_table_path,
                                                     zones_file) -> None:  # noqa: F811
    key_file = tmp_path / "short.key"
    key_file.write_text("ab" * 8)
    proc = start_run(tmp_path, "--input", "udp://127.0.0.1:9", "--output",
                     "udp://127.0.0.1:9", "--zones", str(zones_file), "--tables",
                     str(small_table_path), "--auth-key", str(key_file))
    assert proc.wait(120) == 2
    err = [x for x in (tmp_path / "run.err").read_text().splitlines() if "CAUTION" not in x]
    assert len(err) == 1 and "--auth-key" in err[0] and "short.key" in err[0], err


# ------------------------------------------------- status identity keys (messages.py)

@needs_cc
def test_status_identity_keys_are_optional_and_ignored_by_old_receivers(cbuild) -> None:
    # ICD sections 6 and 7: optional keys after `counters`, in the order sw, table_sha,
    # zones_sha, config_sha, table_range; receivers that do not use them decode the frame as before.
    ident = {"sw": "0.1.0", "table_sha": "0123456789abcdef", "zones_sha": "fedcba9876543210",
             "config_sha": "00112233445566aa", "table_range": "5000-65000ft -10..10deg +2.00M"}
    plain = encode_status({"state": "ok", "counters": {"steps": 3}}, 4, 1.9e9)
    full = encode_status({"state": "ok", "counters": {"steps": 3}, **ident}, 4, 1.9e9)
    assert list(msgpack.unpackb(full))[-6:] == ["counters", *ident]
    assert full.startswith(b"\x8c") and full[1:].startswith(plain[1:])  # 7 + 5 entries
    # the Python decoder returns them among the status fields (ICD section 6), and the
    # rest of the frame decodes as before
    got, base = decode_frame(full), decode_frame(plain)
    assert {k: v for k, v in got.fields.items() if k not in ident} == base.fields
    assert {k: got.fields[k] for k in ident} == ident
    assert got._replace(fields=base.fields) == base
    assert run_tool(cbuild, [f"dec {full.hex()}"]) == run_tool(cbuild, [f"dec {plain.hex()}"])
    for key, bad in (("sw", ""), ("sw", "x" * 32), ("table_sha", "0123456789ABCDEF"),
                     ("zones_sha", "0123"), ("config_sha", 5), ("table_range", "x" * 32),
                     ("table_range", "5000 ft\n")):
        with pytest.raises(ValueError, match=key):
            encode_status({"state": "ok", key: bad}, 0, 1.9e9)


def test_verifier_never_raises_on_any_bytes() -> None:
    # Project rule: the live loop never dies on bad input; it counts. Seeded random and
    # mutated inputs (common practice, no source).
    rng = random.Random(99)
    ver = framing.AuthVerifier(KEY)
    good = [auth.sign_payload(p, KEY) for p in frames(rng, 12)]
    n = 0
    for k in range(3000):
        if k % 3 == 0:
            data = rng.randbytes(rng.randrange(0, 300))
        else:
            data = bytearray(rng.choice(good))
            for _ in range(rng.randrange(1, 4)):
                data[rng.randrange(len(data))] = rng.randrange(256)
            data = bytes(data)
        n += ver.admit(data, k * 0.01)
        ver.admit_datagram(datagram(data) if data else b"", k * 0.01)
    assert sum(ver.counters.values()) > 0 and n < 3000
    assert framing._type_and_seq(b"") is None and framing._type_and_seq(b"\xde") is None


def test_icd_signed_example() -> None:
    # docs/interface.md section 14: the signed status frame's tag is HMAC-SHA256 (Python's
    # hmac module) under the invented key 00..1f, and the frame checks.
    text = (ROOT / "docs" / "interface.md").read_text(encoding="utf-8")
    block = text.split("The same status frame signed", 1)[1].split("```")[1]
    signed = bytes.fromhex(" ".join(block.split()))
    key = bytes(range(32))
    assert len(signed) == 144 and signed[0] == 0x88
    assert signed[-32:] == hmac.new(key, signed[:-32], hashlib.sha256).digest()
    assert auth.check_auth(signed, key) == ""
    assert decode_frame(signed).fields["reason"] == "stale air data"
