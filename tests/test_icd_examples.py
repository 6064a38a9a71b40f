"""The interface document's examples are generated from the code (issue 13, Why 5).

``docs/interface.md`` holds blocks between ``<!-- generated: NAME -->`` and
``<!-- end generated: NAME -->``: the crew-line examples of section 5, the entry counts
of section 2 and the hex examples of section 14. This module makes each block from the
package (crew lines from :func:`advisory.pipeline.cues.crew_cue`, payloads from the
encoders, CRCs from the framing) and the test fails when the document says anything
else. After a deliberate change, rewrite the blocks with::

    PYTHONPATH=$PWD python tests/test_icd_examples.py --write

Every scenario is invented (fictional towns and zone ids).
"""

from __future__ import annotations

import re
import sys
from dataclasses import fields as dc_fields
from pathlib import Path

import msgpack

from advisory import units
from advisory.io.crc32c import crc32c
from advisory.io.framing import datagram, frame_stream
from advisory.io.messages import decode_frame, encode_adv, encode_air, encode_status
from advisory.pipeline.results import Advisory

ICD = Path(__file__).resolve().parents[1] / "docs" / "interface.md"
KEY = bytes(range(32))  #: the invented signing key of section 14

AIR_EXAMPLE = {"lat_deg": 40.0, "lon_deg": -100.0, "alt_ft": 45000.0, "mach": 1.4,
               "heading_deg": 90.0, "gs_kt": 740.0, "bank_deg": 0.0, "fpa_deg": 0.0,
               "sat_c": -56.5, "wind_from_deg": 270.0, "wind_kt": 25.0}
PSF = units.PSF

#: The section 14 advisory example: flying heading 090, a caution for the invented town
#: Larkmoor; decelerating to Mach 1.12 clears if begun within 42 s, so does a right turn
#: of 20 deg (to heading 110).
ADV_EXAMPLE = Advisory(
    "caution", zone_id="Larkmoor", time_to_contact_s=120.0, overpressure_pa=1.5 * PSF,
    max_mach_off_ground=1.12, turn_right_deg=20.0, reaches_ground=True, act_by_s=42.0,
    resolve_mach=1.12, turn_right_hdg_deg=110.0)

#: Crew-line examples of section 5 (situation, advisory), invented zones.
CUE_EXAMPLES: list[tuple[str, Advisory]] = [
    ("Subsonic, or below cutoff Mach", Advisory("no_boom")),
    ("Boom on the ground, no zone threatened", Advisory("clear", reaches_ground=True)),
    ("Within 0.005 of cutoff Mach (`near_cutoff`): the boom is assumed to reach",
     Advisory("clear", reaches_ground=True, near_cutoff=True)),
    ("Slowing to Mach 1.12 clears, start within 95 s",
     Advisory("advisory", zone_name="Larkmoor", time_to_contact_s=240.0,
              overpressure_pa=1.1 * PSF, act_by_s=95.0, resolve_mach=1.12)),
    ("Only a turn clears: right 30 deg from heading 045, start within 18 s",
     Advisory("warning", zone_name="Fenwick Reach", time_to_contact_s=70.0,
              overpressure_pa=2.1 * PSF, turn_right_deg=30.0, turn_right_hdg_deg=75.0,
              turn_left_deg=50.0, turn_left_hdg_deg=355.0, act_by_s=18.0)),
    ("Neither clears alone: Mach 1.08 and a left turn to 320 together",
     Advisory("warning", zone_name="Upper Fenwick Valley Wildlife Refuge",
              time_to_contact_s=55.0, overpressure_pa=2.4 * PSF, focus=True,
              act_by_s=15.0, resolve_mach=1.08, turn_left_deg=40.0,
              turn_left_hdg_deg=320.0, combined=True)),
    ("Climbing: slowing to Mach 1.14 clears when the climb is levelled off, start within 30 s",
     Advisory("caution", zone_name="Larkmoor", time_to_contact_s=150.0,
              overpressure_pa=1.4 * PSF, act_by_s=30.0, resolve_mach=1.14, level_off=True)),
    ("Nothing found that clears (time to contact instead)",
     Advisory("caution", zone_name="Larkmoor", time_to_contact_s=64.0,
              overpressure_pa=1.6 * PSF)),
    ("A boom already on its way will reach the zone",
     Advisory("unavoidable", zone_name="Larkmoor", time_to_contact_s=42.0,
              overpressure_pa=2.9 * PSF, focus=True)),
    ("Air data lost (the status frame's reason has the detail)",
     Advisory("unavailable", reason="input link lost (serial:///dev/ttyUSB0: [Errno 5] "
                                    "Input/output error); reconnecting")),
    ("The service stopped", Advisory("unavailable", reason="service stopped (SIGTERM)")),
    ("Flight condition outside the live table (the reason names it and the table's range)",
     Advisory("unavailable", reason="outside the table: height 3,500 ft (table "
                                    "4,500-69,500 ft, flight-path angle -10 to 10 deg)")),
]


def _hex(data: bytes) -> str:
    rows = [" ".join(f"{b:02x}" for b in data[i:i + 16]) for i in range(0, len(data), 16)]
    return "```\n" + "\n".join(rows) + "\n```"


def _header_text(p: bytes) -> str:
    n = len(msgpack.unpackb(p))
    return f"`{p[:1].hex()}`" if n <= 15 else f"`{p[:3].hex(' ')}`"


def _sizes() -> str:
    air = encode_air(AIR_EXAMPLE, 7, 1893456000.0)
    pair = encode_air(dict(AIR_EXAMPLE, load_factor=1.0), 7, 1893456000.0)
    goal = encode_air(dict(AIR_EXAMPLE, selected_mach=1.6), 7, 1893456000.0)
    adv = encode_adv(ADV_EXAMPLE.to_fields(), 5, 1893456001.0)
    st = encode_status({"state": "ok", "reason": "", "counters": {}}, 9, 1893456002.0)
    n = [len(msgpack.unpackb(p)) for p in (air, pair, goal, adv, st)]
    return (f"An air-data frame has {n[0]} entries ({_header_text(air)}), {n[1]} with the "
            f"pitch and load pair ({_header_text(pair)}) and {n[2]} with a\n"
            f"flight-guidance target ({_header_text(goal)}; section 4), an advisory frame "
            f"{n[3]} ({_header_text(adv)}), a status frame {n[4]} ({_header_text(st)}).")


def _cue_table() -> str:
    rows = ["| `status` | Situation (invented) | `cue` |", "|---|---|---|"]
    for text, adv in CUE_EXAMPLES:
        rows.append(f"| `{adv.status}` | {text} | `{adv.cue}` |")
    return "\n".join(rows)


def _examples() -> str:
    from advisory.io.auth import sign_payload

    air = encode_air(AIR_EXAMPLE, 7, 1893456000.0)
    crc = crc32c(air)
    stream = frame_stream(air)
    adv_fields = ADV_EXAMPLE.to_fields()
    adv = encode_adv(adv_fields, 5, 1893456001.0)
    adv_v1 = encode_adv(adv_fields, 5, 1893456001.0, version=1)
    st_fields = {"state": "degraded", "reason": "stale air data",
                 "counters": {"bad_crc": 2, "frames_ok": 1200}}
    st = encode_status(st_fields, 9, 1893456002.0)
    signed = sign_payload(st, KEY)
    return "\n".join([
        "An air-data frame, `seq` 7, `utc_s` 1893456000.0 (2030-01-01T00:00:00Z), at 40 N",
        "100 W, 45,000 ft, Mach 1.4, heading 090, 740 kt, wings level, SAT -56.5 degC, wind",
        "from 270 at 25 kt, no track or Mach rate (invented values). Payload, "
        f"{len(air)} bytes:",
        "",
        _hex(air),
        "",
        f"Reading it: `{air[:3].hex(' ')}` map of {len(msgpack.unpackb(air))}; `a1 76` \"v\", "
        "`01` 1; `a4 74 79 70 65` \"type\",",
        "`a3 61 69 72` \"air\"; `a3 73 65 71` \"seq\", `07`; `a5 ...` \"utc_s\", `cb 41 dc 36 "
        "f6 20",
        "00 00 00` float 64 1893456000.0; ... `a9 ... ` \"track_deg\", `c0` nil.",
        "",
        f"Its CRC-32C is 0x{crc:08X}. As a stream frame (section 9), {len(stream)} bytes "
        "including the",
        "final delimiter:",
        "",
        _hex(stream),
        "",
        f"As a UDP datagram (section 10), {len(datagram(air))} bytes: the payload followed by "
        f"`{crc.to_bytes(4, 'big').hex(' ')}`:",
        "",
        _hex(datagram(air)),
        "",
        "An advisory frame (version 2), `seq` 5, `utc_s` 1893456001.0, made by the package "
        "from an",
        "invented advisory: flying heading 090, caution for the zone \"Larkmoor\", contact in "
        "120 s,",
        "1.5 psf, no focus; decelerating to Mach 1.12 clears if begun within 42 s "
        "(`act_by_s`,",
        "`resolve_mach`), so does a right turn of 20 deg to heading 110 (`turn_right_deg`,",
        f"`turn_right_hdg`). Crew line `{adv_fields['cue']}`. Payload, {len(adv)} bytes:",
        "",
        _hex(adv),
        "",
        "The same advisory as version 1 for an older receiver (section 7: `v` 1, the same "
        "keys;",
        "a version-1 receiver ignores the five last ones). Only the `v` byte differs here "
        "(an",
        f"`unavoidable` advisory would also go as `warning`). Payload, {len(adv_v1)} bytes, "
        f"starting `{adv_v1[:6].hex(' ')}`.",
        "",
        "A status frame, `seq` 9, `utc_s` 1893456002.0: degraded, \"stale air data\", "
        "counters",
        f"`bad_crc` 2 and `frames_ok` 1200 (note `cd 04 b0`: uint 16). Payload, {len(st)} "
        "bytes:",
        "",
        _hex(st),
        "",
        "The same status frame signed (section 7.1) with the invented key of 32 bytes",
        f"`00 01 02 ... 1f`: the map header becomes `{signed[:1].hex()}`, then the key "
        "`a4 61 75 74 68`",
        f"(\"auth\"), `c4 20` and the 32-byte tag. Payload, {len(signed)} bytes:",
        "",
        _hex(signed),
    ])


def blocks() -> dict[str, str]:
    """Every generated block of the ICD, by name."""
    return {"frame-sizes": _sizes(), "crew-lines": _cue_table(), "examples-hex": _examples()}


_BLOCK = re.compile(r"(?P<indent>[ ]*)(?P<open><!-- generated: (?P<name>[a-z-]+) -->\n)"
                    r"(?P<body>.*?)(?P<close>\n(?P=indent)<!-- end generated: (?P=name) -->)",
                    re.S)


def render(text: str) -> str:
    """``text`` with every generated block replaced by what the code makes now (indented
    like its markers, so a block can sit inside a list item)."""
    made = blocks()

    def fill(m: re.Match) -> str:
        ind = m.group("indent")
        body = "\n".join(ind + line if line else line
                         for line in made[m.group("name")].split("\n"))
        return ind + m.group("open") + body + m.group("close")

    return _BLOCK.sub(fill, text)


# ---------------------------------------------------------------- tests

def test_why5_icd_example_cues_are_what_the_service_sends() -> None:
    # Issue 13, Why 5: "the interface document's example cue does not match what the
    # service sends". Every advisory payload of section 14, decoded, must carry the crew
    # line the code makes for the advisory it describes.
    text = ICD.read_text(encoding="utf-8")
    sec14 = text[text.index("## 14."):text.index("## 15.")]
    names = {f.name for f in dc_fields(Advisory)}
    checked = 0
    for block in re.findall(r"```\n([0-9a-f \n]+)```", sec14):
        payload = bytes.fromhex("".join(block.split()))
        try:
            frame = decode_frame(payload)
        except ValueError:
            continue
        if frame.type != "adv":
            continue
        d = frame.fields
        kw = {"zone_id": d["zone_id"], "time_to_contact_s": d["time_to_contact_s"],
              "overpressure_pa": None if d["overpressure_psf"] is None
              else d["overpressure_psf"] * PSF,
              "focus": d["focus"], "max_mach_off_ground": d["max_mach_off_ground"],
              "turn_left_deg": d["turn_left_deg"], "turn_right_deg": d["turn_right_deg"],
              "tables_stale": d["tables_stale"], "act_by_s": d.get("act_by_s"),
              "resolve_mach": d.get("resolve_mach"),
              "turn_left_hdg_deg": d.get("turn_left_hdg"),
              "turn_right_hdg_deg": d.get("turn_right_hdg"),
              "combined": d.get("combined", False)}
        adv = Advisory(d["status"], **{k: v for k, v in kw.items() if k in names})
        assert d["cue"] == adv.cue, f"ICD example cue {d['cue']!r}, the code sends {adv.cue!r}"
        checked += 1
    assert checked >= 1


def test_the_icd_blocks_are_what_the_code_makes() -> None:
    text = ICD.read_text(encoding="utf-8")
    found = {m.group("name") for m in _BLOCK.finditer(text)}
    assert found == set(blocks()), f"generated blocks in the ICD: {sorted(found)}"
    assert render(text) == text, ("docs/interface.md differs from the code's examples: "
                                  "run PYTHONPATH=$PWD python tests/test_icd_examples.py --write")


def test_every_example_cue_fits_the_crew_line() -> None:
    for _, adv in CUE_EXAMPLES:
        assert len(adv.cue) <= 40, adv.cue  # issue 13: at most 40 characters


if __name__ == "__main__":
    if sys.argv[1:] != ["--write"]:
        sys.exit("usage: python tests/test_icd_examples.py --write")
    ICD.write_text(render(ICD.read_text(encoding="utf-8")), encoding="utf-8")
    print(f"wrote {ICD}")
