"""Every bad input file: one line on stderr and exit code 2, never a traceback.

A small fuzz over the loaders: for each file kind (table header, advisor config TOML,
atmosphere profile, zones GeoJSON, aircraft file) every key gets values of the wrong
type (and a few wrong shapes); each kind runs in its own subprocess (a crash there cannot
hide), which drives ``advisory.cli.main`` once per case and reports the exit code and
what reached stderr. Expected: exit code 2 and exactly one line that names the file
(project rule, DEVELOPERS.md "Bad input"; exit code 2 is the argparse convention).
Nothing is timed.
"""

from __future__ import annotations

import hashlib
import json
import logging
import math
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from advisory.pipeline.config import ConfigError, load_config
from advisory.pipeline.zones import ZoneSet
from advisory.tables.store import _PREFIX, FORMAT_VERSION, MAGIC, read_table_file
from tests.test_table_contents import tiny_table

LAT0, LON0 = 40.0, -100.0
ROOT = Path(__file__).resolve().parent.parent

#: Runs the cases of one kind through the command line, in-process, one after the other.
DRIVER = r"""
import contextlib, io, json, sys
from pathlib import Path
from advisory.cli import main
cases = json.loads(Path(sys.argv[1]).read_text())
results = []
for case in cases:
    for name, text in case["files"].items():
        Path(name).write_text(text, encoding="utf-8")
    err = io.StringIO()
    try:
        with contextlib.redirect_stderr(err), contextlib.redirect_stdout(io.StringIO()):
            rc = main(case["argv"])
    except SystemExit as exc:
        rc = exc.code
    except BaseException as exc:
        rc = "escaped " + type(exc).__name__ + ": " + str(exc)[:300]
    results.append({"name": case["name"], "rc": rc, "stderr": err.getvalue()})
print(json.dumps(results))
"""

# TOML spellings of wrong values: text, array, inline table, boolean, not-a-number,
# infinity.
TOML_BAD = {"text": '"x"', "array": "[1, 2]", "table": "{ a = 1 }", "bool": "true",
            "nan": "nan", "inf": "inf"}


def run_cases(tmp_path: Path, cases: list[dict]) -> list[dict]:
    spec = tmp_path / "cases.json"
    spec.write_text(json.dumps(cases))
    proc = subprocess.run([sys.executable, "-c", DRIVER, str(spec)], capture_output=True,
                          text=True, timeout=300, cwd=tmp_path, env=dict(os.environ))
    assert proc.returncode == 0, proc.stderr[-3000:]
    return json.loads(proc.stdout.splitlines()[-1])


def assert_all_refused(results: list[dict], must_name: str) -> None:
    bad = []
    for r in results:
        lines = [ln for ln in r["stderr"].splitlines() if ln.strip()]
        if r["rc"] != 2 or len(lines) != 1 or must_name not in lines[0]:
            bad.append((r["name"], r["rc"], r["stderr"][-400:]))
    assert not bad, f"{len(bad)} of {len(results)} cases not refused cleanly: {bad[:8]}"


def state_file() -> str:
    return json.dumps({"lat_deg": LAT0, "lon_deg": LON0, "alt_ft": 45000.0, "mach": 1.6,
                       "heading_deg": 90.0, "gs_kt": 900.0, "bank_deg": 0.0, "fpa_deg": 0.0})


def zone_feature(**props) -> dict:
    ring = [[LON0 + 0.5, LAT0 - 0.1], [LON0 + 0.7, LAT0 - 0.1], [LON0 + 0.7, LAT0 + 0.1],
            [LON0 + 0.5, LAT0 + 0.1], [LON0 + 0.5, LAT0 - 0.1]]
    p = {"id": "town", "name": "Town", "limit_psf": 0.0, "margin_km": 2.0,
         "ground_elevation_ft": 1000.0}
    p.update(props)
    return {"type": "Feature", "geometry": {"type": "Polygon", "coordinates": [ring]},
            "properties": p}


def good_zones() -> str:
    return json.dumps({"type": "FeatureCollection", "features": [zone_feature()]})


# ---------------------------------------------------------------------- advisor config
CONFIG_KEYS = {"prediction": ("look_ahead_s", "step_s", "in_air_s", "strips", "reproject_km"),
               "levels": ("caution_lead_s", "warning_lead_s"),
               "hysteresis": ("band_s", "release_s", "warning_hold_s"),
               "resolution": ("cutoff_margin_mach", "turn_bank_deg", "max_turn_deg",
                              "turn_step_deg", "refresh_s"),
               "focus": ("threshold",), "input": ("stale_after_s",)}


def test_config_strips_fraction_refused(tmp_path) -> None:
    # The measured failure: strips = 2.5 passed the range check and crashed later.
    f = tmp_path / "c.toml"
    f.write_text("[prediction]\nstrips = 2.5\n")
    with pytest.raises(ConfigError, match="strips"):
        load_config(f)


def test_config_fuzz(tmp_path) -> None:
    cases = []
    common = {"s.json": state_file(), "z.geojson": good_zones()}
    for section, keys in CONFIG_KEYS.items():
        for key in keys:
            for label, value in TOML_BAD.items():
                cases.append({"name": f"{section}.{key}={label}",
                              "files": {**common, "c.toml": f"[{section}]\n{key} = {value}\n"},
                              "argv": ["check", "--state", "s.json", "--zones", "z.geojson",
                                       "--config", "c.toml", "--table", "absent.boomtable"]})
        cases.append({"name": f"{section} not a table",
                      "files": {**common, "c.toml": f"{section} = 3\n"},
                      "argv": ["check", "--state", "s.json", "--zones", "z.geojson",
                               "--config", "c.toml", "--table", "absent.boomtable"]})
    for name, text in (("fraction", "[prediction]\nstrips = 2.5\n"),
                       ("not toml", "[prediction\n"), ("binary", "\udcff")):
        cases.append({"name": name, "files": {**common, "c.toml": text},
                      "argv": ["check", "--state", "s.json", "--zones", "z.geojson",
                               "--config", "c.toml", "--table", "absent.boomtable"]})
    cases[-1]["files"]["c.toml"] = "strips = \u00ff"
    assert_all_refused(run_cases(tmp_path, cases), "c.toml")


# ---------------------------------------------------------------------- atmosphere profile
PROFILE_GOOD = ("[[level]]\nalt_ft = 0\ntemp_c = 15\nwind_from_deg = 270\nwind_kt = 10\n"
                "[[level]]\nalt_ft = 40000\ntemp_c = -56\nwind_from_deg = 270\nwind_kt = 60\n")


def test_profile_fuzz(tmp_path) -> None:
    argv = ["predict", "--atmosphere", "p.toml", "--mach", "1.6", "--altitude-ft", "45000"]
    cases = []
    for key in ("alt_ft", "temp_c", "wind_from_deg", "wind_kt"):
        for label, value in TOML_BAD.items():
            text = PROFILE_GOOD.replace(f"\n{key} = ", f"\n{key} = {value}\n#", 1) \
                if not PROFILE_GOOD.startswith(key) else \
                PROFILE_GOOD.replace(f"{key} = ", f"{key} = {value}\n#", 1)
            cases.append({"name": f"{key}={label}", "files": {"p.toml": text}, "argv": argv})
    for name, text in (("level list of numbers", "level = [1, 2]\n"),
                       ("level text", 'level = "x"\n'), ("level number", "level = 3\n"),
                       ("level one table", "[level]\nalt_ft = 0\ntemp_c = 15\n"),
                       ("no levels", "title = 1\n"), ("empty", ""),
                       ("one level", "[[level]]\nalt_ft = 0\ntemp_c = 15\n"),
                       ("nested level", "[[level]]\nalt_ft = 0\ntemp_c = 15\n[level.x]\na=1\n"),
                       ("descending", PROFILE_GOOD.replace("alt_ft = 40000", "alt_ft = -900"))):
        cases.append({"name": name, "files": {"p.toml": text}, "argv": argv})
    assert_all_refused(run_cases(tmp_path, cases), "p.toml")


# ---------------------------------------------------------------------- zones GeoJSON
def nested(depth: int) -> str:
    return "[" * depth + "]" * depth


def test_zones_fuzz(tmp_path) -> None:
    argv = ["check", "--state", "s.json", "--zones", "z.geojson", "--table", "absent.bt"]
    valid = {("name", None), ("name", "x"), ("id", "x"), ("margin_km", None),
             ("ground_elevation_ft", None)}
    cases = []
    for key in ("id", "name", "limit_psf", "margin_km", "ground_elevation_ft"):
        for value in ([], {}, "x", True, None, math.inf, -1.0, 10**400):
            if any(key == k and value == v and type(value) is type(v) for k, v in valid) or (
                    key == "ground_elevation_ft" and value == -1.0):
                continue
            doc = {"type": "FeatureCollection", "features": [zone_feature(**{key: value})]}
            cases.append({"name": f"{key}={value!r}",
                          "files": {"s.json": state_file(), "z.geojson": json.dumps(doc)},
                          "argv": argv})
    f = zone_feature()
    shapes = {
        "top list": "[]", "features dict": '{"type": "FeatureCollection", "features": {}}',
        "empty features": '{"type": "FeatureCollection", "features": []}',
        "deep top": nested(100000),
        "deep coordinates": json.dumps({"type": "FeatureCollection", "features": [
            dict(f, geometry={"type": "Polygon", "coordinates": 0})]}).replace(
                '"coordinates": 0', '"coordinates": ' + nested(50000)),
        "deep properties": json.dumps({"type": "FeatureCollection", "features": [
            dict(f, properties=0)]}).replace('"properties": 0', '"properties": ' +
                                             nested(50000)),
        "position text": json.dumps({"type": "FeatureCollection", "features": [
            dict(f, geometry={"type": "Polygon", "coordinates": [["x"] * 5]})]}),
        "geometry text": json.dumps({"type": "FeatureCollection", "features": [
            dict(f, geometry="x")]}),
        "huge integer longitude": json.dumps({"type": "FeatureCollection", "features": [
            dict(f, geometry={"type": "Polygon", "coordinates": [
                [[0, 0], [10**400, 0], [1, 1], [0, 1], [0, 0]]]})]}),
        "bool latitude in a long ring": json.dumps({"type": "FeatureCollection", "features": [
            dict(f, geometry={"type": "Polygon", "coordinates": [
                [[0, 0]] + [[1e-3 * k, 1.0 + (k % 2) * 0.1] for k in range(1, 500)]
                + [[0.5, True], [0, 0]]]})]}),
        "not utf-8": "\udcff",
    }
    for name, text in shapes.items():
        cases.append({"name": name, "files": {"s.json": state_file(), "z.geojson": text},
                      "argv": argv})
    cases[-1]["files"]["z.geojson"] = '{"type": "\u00ff'
    assert_all_refused(run_cases(tmp_path, cases), "z.geojson")


def test_long_ring_with_altitudes_loads_and_bad_position_is_named(tmp_path) -> None:
    # Positions may carry an altitude (RFC 7946 section 3.1.1); a bad position deep in a
    # long ring is still named by its index.
    ring = [[-100.0 + 1e-3 * k, 40.0 + 0.01 * (k % 2), 100.0] for k in range(400)]
    ring += [[-100.0 + 0.4, 41.0], [-100.0, 41.0], ring[0]]
    f = tmp_path / "z.geojson"
    doc = {"type": "FeatureCollection", "features": [
        dict(zone_feature(), geometry={"type": "Polygon", "coordinates": [ring]})]}
    f.write_text(json.dumps(doc))
    assert ZoneSet.from_file(f)[0].vertex_count == 402
    for v in ring[:-1]:
        v[:] = v[:2]  # plain [lon, lat] positions: the whole-array path
    ring[123][1] = "40"
    f.write_text(json.dumps(doc))
    with pytest.raises(ValueError, match="position 123: latitude"):
        ZoneSet.from_file(f)


def test_zone_file_with_no_zones_refused(tmp_path) -> None:
    # An empty zone file would always advise "clear" (issue 15, low items).
    f = tmp_path / "empty.geojson"
    f.write_text('{"type": "FeatureCollection", "features": []}')
    with pytest.raises(ValueError, match="empty"):
        ZoneSet.from_file(f)


def test_implausible_limit_warned_once(tmp_path, caplog) -> None:
    # 48 psf is a pascal value typed as psf (1 psf = 47.88 Pa, NIST SP 811 appendix B);
    # typical sonic booms on the ground are about 0.5-3 psf (value from memory), so a
    # limit far above that disables the zone in practice: one warning line, not an error.
    doc = {"type": "FeatureCollection", "features": [
        zone_feature(id="a", limit_psf=48.0), zone_feature(id="b", limit_psf=96.0),
        zone_feature(id="c", limit_psf=1.5)]}
    f = tmp_path / "z.geojson"
    f.write_text(json.dumps(doc))
    with caplog.at_level(logging.WARNING):
        zs = ZoneSet.from_file(f)
    assert len(zs) == 3
    warned = [r for r in caplog.records if r.levelno >= logging.WARNING]
    assert len(warned) == 1, [r.getMessage() for r in warned]
    msg = warned[0].getMessage()
    assert "limit_psf" in msg and "48" in msg and "'a'" in msg and "'b'" in msg
    assert "\n" not in msg
    caplog.clear()
    doc["features"] = doc["features"][2:]
    f.write_text(json.dumps(doc))
    with caplog.at_level(logging.WARNING):
        ZoneSet.from_file(f)
    assert not [r for r in caplog.records if r.levelno >= logging.WARNING]


# ---------------------------------------------------------------------- aircraft file
AIRCRAFT_KEYS = ("name", "class", "length_m", "mass_kg", "volume.max_area_m2",
                 "volume.max_area_station", "lift.start_station", "lift.end_station",
                 "reference.mach", "reference.altitude_m", "carlson_shape_factor")


def aircraft_text(override: str, value: str) -> str:
    doc = {"": {"name": '"demo"', "class": '"small_supersonic_jet"', "length_m": "36.0",
                "mass_kg": "38000.0", "carlson_shape_factor": "1.0"},
           "volume": {"max_area_m2": "6.0", "max_area_station": "0.55"},
           "lift": {"start_station": "0.4", "end_station": "0.95"},
           "reference": {"mach": "1.6", "altitude_m": "15240.0"}}
    section, _, key = override.rpartition(".")
    doc[section][key] = value
    out = [f"{k} = {v}" for k, v in doc[""].items()]
    for s in ("volume", "lift", "reference"):
        out.append(f"[{s}]")
        out += [f"{k} = {v}" for k, v in doc[s].items()]
    return "\n".join(out) + "\n"


def test_aircraft_fuzz(tmp_path) -> None:
    argv = ["predict", "--aircraft", "a.toml", "--mach", "1.6", "--altitude-ft", "45000"]
    cases = []
    for key in AIRCRAFT_KEYS:
        for label, value in TOML_BAD.items():
            if key == "name" and label == "text":
                continue  # a text name is right
            cases.append({"name": f"{key}={label}", "files": {"a.toml": aircraft_text(key,
                                                                                    value)},
                          "argv": argv})
    for name, text in (("volume number", "volume = 3\n"), ("lift list", "lift = [1]\n"),
                       ("not toml", "length_m = \n"), ("empty", "")):
        cases.append({"name": name, "files": {"a.toml": text}, "argv": argv})
    assert_all_refused(run_cases(tmp_path, cases), "a.toml")


# ---------------------------------------------------------------------- grid file
def test_grid_fuzz(tmp_path) -> None:
    # Every case is refused before anything is built (a valid grid would build a table).
    argv = ["tables", "build", "--grid", "g.toml", "-o", "never.boomtable", "--workers", "1"]
    cases = []
    for key in ("altitudes_ft", "mach_excess", "fpa_deg", "headings_deg", "n_eta", "mach_max",
                "ground_elevation_ft"):
        values = dict(TOML_BAD)
        if key in ("altitudes_ft", "mach_excess", "fpa_deg", "headings_deg"):
            values.update({"array": "[1, true]", "nan in array": "[1.0, nan]",
                           "descending": "[3.0, 2.0]"})
        else:
            values.pop("table")  # a grid key that is a table: tested once below
            values["fraction" if key == "n_eta" else "huge"] = "2.5" if key == "n_eta" \
                else "1e300"
        for label, value in values.items():
            cases.append({"name": f"{key}={label}", "files": {"g.toml": f"{key} = {value}\n"},
                          "argv": argv})
    cases.append({"name": "unknown key", "files": {"g.toml": "altitude = [1, 2]\n"},
                  "argv": argv})
    cases.append({"name": "table", "files": {"g.toml": "[n_eta]\na = 1\n"}, "argv": argv})
    assert_all_refused(run_cases(tmp_path, cases), "g.toml")
    assert not (tmp_path / "never.boomtable").exists()


# ---------------------------------------------------------------------- table header
def write_raw(path: Path, header: dict, payload: bytes) -> None:
    """A table file with any header at all (digests valid), bypassing the writer's rules."""
    hbytes = json.dumps(header).encode("utf-8")
    path.write_bytes(_PREFIX.pack(MAGIC, FORMAT_VERSION, len(hbytes)) + hbytes
                     + hashlib.sha256(hbytes).digest() + payload)


def test_table_header_fuzz(tmp_path) -> None:
    good = tiny_table(tmp_path / "good.boomtable")
    header, arrays = read_table_file(good)
    raw = good.read_bytes()
    payload = raw[_PREFIX.size + _PREFIX.unpack_from(raw)[2] + 32:]
    assert len(payload) == header["payload_nbytes"]
    variants: dict[str, dict] = {}
    wrong = {"missing": ..., "null": None, "list": [1], "text": "x", "number": 7,
             "object": {}}
    for key in ("kind", "grid", "aircraft", "atmosphere", "reflection_factor", "arrays",
                "payload_nbytes", "payload_sha256"):
        for label, value in wrong.items():
            h = json.loads(json.dumps(header))
            if value is ...:
                del h[key]
            else:
                h[key] = value
            if h == header:
                continue
            variants[f"{key} {label}"] = h
    for key in ("altitudes_m", "mach_excess", "fpa_rad", "headings_rad", "n_eta", "mach_max",
                "ground_elevation_m"):
        for label, value in wrong.items():
            h = json.loads(json.dumps(header))
            if value is ...:
                del h["grid"][key]
            else:
                h["grid"][key] = value
            if h != header and not (key == "ground_elevation_m" and label == "number"):
                variants[f"grid.{key} {label}"] = h  # (7 m is a fine ground elevation)
    for label, value in wrong.items():
        if value is ...:
            continue
        for field in ("dtype", "shape", "offset", "nbytes", "name"):
            h = json.loads(json.dumps(header))
            h["arrays"][0][field] = value
            variants[f"arrays[0].{field} {label}"] = h
    h = json.loads(json.dumps(header))
    h["arrays"][0]["dtype"] = "|O"
    variants["object dtype"] = h
    h = json.loads(json.dumps(header))
    h["arrays"][-1]["offset"] = header["payload_nbytes"] - 8
    variants["array beyond payload"] = h
    cases = []
    for i, (name, h) in enumerate(sorted(variants.items())):
        path = tmp_path / f"t{i}.boomtable"
        write_raw(path, h, payload)
        cases.append({"name": name, "files": {}, "argv": ["tables", "info", str(path)]})
    assert len(cases) > 40
    results = run_cases(tmp_path, cases)
    assert_all_refused(results, "boomtable")
    assert np.asarray(arrays["cells"]).size  # the source table itself was fine


def test_systemd_unit_stops_on_exit_2() -> None:
    # A bad file exits 2 and must stop the sample unit rather than restart-loop it
    # (systemd.service(5): RestartPreventExitStatus=).
    unit = (ROOT / "docs" / "boom-advisory.service").read_text()
    lines = [ln.strip() for ln in unit.splitlines()]
    prevent = [ln for ln in lines if ln.startswith("RestartPreventExitStatus=")]
    assert prevent and "2" in prevent[0].split("=", 1)[1].split()
    assert any(ln.startswith("#") and "exit" in ln.lower() and "2" in ln for ln in lines)


# ---------------------------------------------------------------------- state file (check)
def test_state_file_fuzz(tmp_path) -> None:
    argv = ["check", "--state", "s.json", "--zones", "z.geojson", "--table", "absent.bt"]
    base = json.loads(state_file())
    cases = []
    for key in list(base) + ["track_deg", "mach_rate_per_s", "sat_c", "wind_from_deg",
                             "wind_kt"]:
        for value in ([], {}, "x", True, None, math.nan, math.inf, 10**400):
            if value is None and key not in base:
                continue  # an absent optional field given as null is fine
            doc = dict(base, **{key: value})
            cases.append({"name": f"{key}={value!r}",
                          "files": {"s.json": json.dumps(doc), "z.geojson": good_zones()},
                          "argv": argv})
    for name, text in (("list", "[]"), ("deep", nested(100000)), ("not json", "{"),
                       ("empty object", "{}")):
        cases.append({"name": name, "files": {"s.json": text, "z.geojson": good_zones()},
                      "argv": argv})
    results = run_cases(tmp_path, cases)
    assert_all_refused(results, "s.json")
