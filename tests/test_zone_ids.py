"""Zone ids: no control characters, unique within the wire's 63-byte limit.

Sources: the advisory frame carries ``zone_id`` as a string of at most 63 UTF-8 bytes with
no NUL (docs/interface.md, advisory frame fields; advisory.schema.ZONE_ID_MAX_BYTES), so a
zone id with a control character cannot be sent, and two ids that agree in their first 63
bytes could not be told apart on the wire. Control characters are Unicode category Cc
(The Unicode Standard, chapter 4, General Category). Exit code 2 and one line for a bad
file: project rule (DEVELOPERS.md).
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from advisory.pipeline.zone_file import ZoneFileError
from advisory.pipeline.zones import ZoneSet

LAT0, LON0 = 40.0, -100.0


def feature(zone_id: str, dlon: float = 0.5) -> dict:
    ring = [[LON0 + dlon, LAT0 - 0.1], [LON0 + dlon + 0.2, LAT0 - 0.1],
            [LON0 + dlon + 0.2, LAT0 + 0.1], [LON0 + dlon, LAT0 + 0.1],
            [LON0 + dlon, LAT0 - 0.1]]
    return {"type": "Feature", "geometry": {"type": "Polygon", "coordinates": [ring]},
            "properties": {"id": zone_id, "limit_psf": 0.0}}


def collection(*features: dict) -> dict:
    return {"type": "FeatureCollection", "features": list(features)}


@pytest.mark.parametrize("bad", ["town\x00", "\x00", "to\x01wn", "town\n", "town\t1",
                                 "town\x1f", "town\x7f", "town\x85"])
def test_control_characters_refused(bad) -> None:
    with pytest.raises(ZoneFileError) as info:
        ZoneSet.from_geojson(collection(feature(bad)))
    msg = str(info.value)
    assert "\n" not in msg and "\x00" not in msg
    assert "control character" in msg and "feature 0" in msg


def test_ids_equal_in_first_63_bytes_refused() -> None:
    base = "z" * 63
    with pytest.raises(ZoneFileError) as info:
        ZoneSet.from_geojson(collection(feature(base + "-north"), feature(base + "-south", 1.0)))
    assert "63" in str(info.value) and "feature 1" in str(info.value)
    assert "feature 0" in str(info.value)


def test_ids_colliding_after_utf8_cut_refused() -> None:
    # 62 ASCII bytes then a 2-byte character: cut at 63 bytes the character goes
    # (a partial UTF-8 sequence is dropped), so both ids read "a" * 62 on the wire.
    with pytest.raises(ZoneFileError, match="63"):
        ZoneSet.from_geojson(collection(feature("a" * 62 + "\u00e9"),
                                        feature("a" * 62 + "\u00e8", 1.0)))
    with pytest.raises(ZoneFileError, match="63"):
        ZoneSet.from_geojson(collection(feature("a" * 62), feature("a" * 62 + "\u00e8", 1.0)))


def test_long_but_distinct_ids_and_unicode_accepted() -> None:
    # Control: ids that differ within 63 bytes, and printable non-ASCII, are fine.
    zs = ZoneSet.from_geojson(collection(feature("x" * 62 + "1" + "tail"),
                                         feature("x" * 62 + "2" + "tail", 1.0),
                                         feature("Bärenfeld park", 1.5)))
    assert len(zs) == 3


def test_check_command_refuses_nul_zone_id(tmp_path) -> None:
    # On the wire a NUL id made every conflict "unavailable: internal error"; now the
    # file is refused up front: exit 2 and one line naming the zone.
    zones = tmp_path / "zones.geojson"
    zones.write_text(json.dumps(collection(feature("town\x00"))))
    state = tmp_path / "state.json"
    state.write_text(json.dumps({"lat_deg": LAT0, "lon_deg": LON0, "alt_ft": 45000.0,
                                 "mach": 1.6, "heading_deg": 90.0, "gs_kt": 900.0,
                                 "bank_deg": 0.0, "fpa_deg": 0.0}))
    table = tmp_path / "absent-table-never-read.boomtable"
    proc = subprocess.run([sys.executable, "-m", "advisory.cli", "check", "--state", str(state),
                           "--zones", str(zones), "--table", str(table)],
                          capture_output=True, text=True, timeout=120, env=dict(os.environ))
    lines = [ln for ln in proc.stderr.splitlines() if ln.strip()]
    assert proc.returncode == 2 and len(lines) == 1, proc.stderr
    assert "town" in lines[0] and "control character" in lines[0]


def test_bundled_zone_files_still_load() -> None:
    # Control: the project's own zone files pass the new checks.
    root = Path(__file__).resolve().parent.parent
    files = sorted(root.glob("replay_logs/*/zones.geojson")) + [
        root / "tests" / "data" / "zones_fictional_valley.geojson"]
    for f in files:
        assert len(ZoneSet.from_file(f)) >= 1, f
