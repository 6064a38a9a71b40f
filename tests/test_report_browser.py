"""The bench report, looked at in a real headless Chromium (Debian package ``chromium``).

Checks: the page renders to a non-blank screenshot (decoded here with a small PNG
reader following the PNG specification, W3C Recommendation / ISO/IEC 15948: chunk layout
section 5, IHDR 11.2.2, filter types section 9), the caution banner is on screen, the DOM
holds the map and the timeline with their parts, and the file asks for nothing from the
network.
"""

from __future__ import annotations

import dataclasses
import re
import shutil
import struct
import subprocess
import zlib
from pathlib import Path

import pytest

from advisory.bench.replay import replay_log
from advisory.bench.report import REPORT_NAME, have_matplotlib, write_report
from advisory.bench.scenario import prepare
from advisory.cli import main
from advisory.io.messages import decode_frame
from advisory.schema import SAFETY_CAUTION
from tests.test_replay import MAKER, short_flight, table_cache  # noqa: F401

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
BROWSER_TIMEOUT_S = 120.0
needs_chromium = pytest.mark.skipif(
    CHROMIUM is None, reason="chromium is not installed (Debian: apt-get install -y chromium)")

#: The coastal flight as issue 12 measured it: the crew slows only after the caution, at
#: 85 s, at 0.012/s toward Mach 1.10 (the bundled flight now slows at 30 s).
COASTAL_AS_MEASURED = ((85.0, 1.10, 0.012),)


def chromium(args: list[str], profile: Path) -> subprocess.CompletedProcess:
    return subprocess.run(
        [CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic",
         "--no-first-run", "--disable-background-networking", "--disable-component-update",
         "--disable-sync", f"--user-data-dir={profile}", *args],
        capture_output=True, timeout=BROWSER_TIMEOUT_S, check=False)


def read_png(data: bytes) -> tuple[int, int, list[list[tuple[int, ...]]]]:
    """(width, height, pixel rows) of an 8-bit RGB or RGBA PNG (pixels as RGB tuples)."""
    assert data[:8] == b"\x89PNG\r\n\x1a\n", "not a PNG"
    pos, idat, width, height, bpp = 8, b"", 0, 0, 3
    while pos < len(data):
        n, kind = struct.unpack(">I4s", data[pos:pos + 8])
        body = data[pos + 8:pos + 8 + n]
        if kind == b"IHDR":
            width, height, depth, colour = struct.unpack(">IIBB", body[:10])
            assert depth == 8 and colour in (2, 6), (depth, colour)
            bpp = 3 if colour == 2 else 4
        elif kind == b"IDAT":
            idat += body
        pos += 12 + n
    raw = zlib.decompress(idat)
    stride = width * bpp
    rows, prev = [], bytearray(stride)
    for y in range(height):
        f = raw[y * (stride + 1)]
        line = bytearray(raw[y * (stride + 1) + 1:(y + 1) * (stride + 1)])
        for i in range(stride):
            a = line[i - bpp] if i >= bpp else 0
            b = prev[i]
            c = prev[i - bpp] if i >= bpp else 0
            if f == 1:
                line[i] = (line[i] + a) & 0xFF
            elif f == 2:
                line[i] = (line[i] + b) & 0xFF
            elif f == 3:
                line[i] = (line[i] + (a + b) // 2) & 0xFF
            elif f == 4:
                p = a + b - c
                pa, pb, pc = abs(p - a), abs(p - b), abs(p - c)
                pred = a if pa <= pb and pa <= pc else (b if pb <= pc else c)
                line[i] = (line[i] + pred) & 0xFF
        rows.append([tuple(line[i:i + 3]) for i in range(0, stride, bpp)])
        prev = line
    return width, height, rows


@pytest.fixture(scope="module")
def report(tmp_path_factory):
    """A report of two short invented flights, one with a turn (carpet swings)."""
    root = tmp_path_factory.mktemp("flights")
    a = short_flight(root, "straight", duration_s=6.0)
    b = short_flight(root, "turning", duration_s=8.0, faults=(),
                     bank_schedule=((1.0, 30.0),))
    results = [replay_log(prepare(p, collect=True)) for p in (a, b)]
    out = tmp_path_factory.mktemp("report")
    return write_report(results, out), results


@needs_chromium
def test_report_renders_in_headless_chromium(report, tmp_path) -> None:
    html_path, _ = report
    shot = tmp_path / "shot.png"
    proc = chromium([f"--screenshot={shot}", "--window-size=1280,900",
                     html_path.resolve().as_uri()], tmp_path / "profile")
    assert shot.is_file(), proc.stderr.decode(errors="replace")[-2000:]
    width, height, rows = read_png(shot.read_bytes())
    assert (width, height) == (1280, 900)
    colours = {px for row in rows[::4] for px in row[::4]}
    assert len(colours) > 50  # text, table, map: far from a blank page
    # the caution banner (background #fff4d6 in the report's style sheet) is on screen
    assert (0xFF, 0xF4, 0xD6) in colours
    # the map's sea colour (#eef4f8) is on screen too
    assert any(px == (0xEE, 0xF4, 0xF8) for row in rows for px in row[::2])


@needs_chromium
def test_report_dom_has_map_and_timeline(report, tmp_path) -> None:
    html_path, results = report
    proc = chromium(["--dump-dom", html_path.resolve().as_uri()], tmp_path / "profile")
    dom = proc.stdout.decode("utf-8", errors="replace")
    assert proc.returncode == 0 and "<body" in dom, proc.stderr.decode(errors="replace")[-2000:]
    for r in results:
        assert f'id="map-{r.name}"' in dom and f'id="timeline-{r.name}"' in dom
        assert f'id="flight-{r.name}"' in dom
    assert dom.count('class="map"') == 2 and dom.count('class="timeline"') == 2
    assert dom.count('class="zone"') == 2  # one invented town per flight
    assert dom.count('class="fire"') >= 2  # where the advisories fired
    assert 'data-series="cutoff Mach"' in dom and 'data-series="Mach"' in dom
    assert 'data-series="altitude"' in dom and 'class="level"' in dom
    carpet = re.findall(r'<g class="carpet"[^>]*>(.*?)</g>', dom, re.S)
    assert carpet and all(c.count("<polygon") > 20 for c in carpet)
    assert SAFETY_CAUTION in dom
    assert 'id="summary"' in dom


def test_report_is_self_contained(report) -> None:
    html_path, results = report
    text = html_path.read_text(encoding="utf-8")
    # nothing fetched: no external src/href/url(); the only "http" is the SVG namespace
    assert not re.search(r'(src|href)\s*=\s*"(https?:)?//', text)
    assert "url(" not in text
    assert set(re.findall(r"https?://[^\s\"'<>]+", text)) <= {"http://www.w3.org/2000/svg"}
    if have_matplotlib():
        assert text.count("data:image/png;base64,") == 2 * len(results)
        for r in results:
            for kind in ("map", "timeline"):
                head = (html_path.parent / f"{r.name}_{kind}.png").read_bytes()[:24]
                assert head[:8] == b"\x89PNG\r\n\x1a\n" and head[12:16] == b"IHDR"
                assert struct.unpack(">II", head[16:24])[0] > 300  # width, px


def test_report_without_matplotlib_is_svg_only(tmp_path) -> None:
    d = short_flight(tmp_path, "svgonly", duration_s=3.0, faults=())
    res = replay_log(prepare(d, collect=True))
    path = write_report([res], tmp_path / "rep", pngs=False)
    assert path.name == REPORT_NAME
    text = path.read_text(encoding="utf-8")
    assert 'class="map"' in text and 'class="timeline"' in text
    assert "data:image/png" not in text and "SVG figures only" in text
    assert not list((tmp_path / "rep").glob("*.png"))


def test_collected_flight_data(report) -> None:
    _, results = report
    turning = next(r for r in results if r.name == "turning")
    f = turning.flight
    steps = sum(decode_frame(p).type == "adv" for _m, _u, p in turning.outputs)
    assert len(f["track"]) == steps  # one track point per advisor step
    assert len(f["rows"]) >= 7  # one carpet row a second
    assert all(len(r["lat"]) == len(r["psf"]) for r in f["rows"])
    assert max(max(r["psf"]) for r in f["rows"]) > 0.3
    # the carpet row turns with the aircraft: its edge-to-edge bearing changes
    def bearing(r):
        return (r["lon"][-1] - r["lon"][0], r["lat"][-1] - r["lat"][0])
    (x0, y0), (x1, y1) = bearing(f["rows"][0]), bearing(f["rows"][-1])
    assert abs(x0 * y1 - y0 * x1) > 1e-3


#: A cold day (invented): 27 C below the standard atmosphere at the ground, standard from
#: the tropopause up. The speed of sound at the ground, 20.05 sqrt(T) m/s = 324 m/s, is
#: below Mach 1.10 times its 295 m/s at 45,000 ft, so at Mach 1.10 the boom reaches the
#: ground that day (cutoff Mach = c_ground / c_altitude in still air; Snell's law), while
#: a table for the standard day (cutoff Mach 1.153) says it does not.
COLD_DAY_CSV = "alt_ft,temp_c\n0,-25.0\n36089,-56.5\n65617,-56.5\n"


@pytest.fixture(scope="module")
def truth_report(tmp_path_factory):
    """A flight the advisor gets wrong, replayed with --truth: the coastal flight extended
    to 300 s at a steady Mach 1.10, flown on a cold day the advisor's table (the standard
    day) does not know. Since issue 13 the advisor no longer misses the bundled
    flight's booms, so the report's missed span needs an advisor with the wrong air (the
    air below is never known exactly)."""
    sc = next(s for s in MAKER.scenarios() if s.name == "coastal_approach")
    root = tmp_path_factory.mktemp("coastal300")
    MAKER.make(dataclasses.replace(sc, duration_s=300.0, mach=1.10, mach_schedule=()), root)
    flight = root / sc.name
    standard_table = prepare(str(flight), quiet=True).table  # built for the standard day
    (flight / "cold_day.csv").write_text(COLD_DAY_CSV, encoding="utf-8")
    toml = flight / "scenario.toml"
    text = toml.read_text(encoding="utf-8")
    assert "\natmosphere" not in text  # the truth's air: the cold day (the table's: standard)
    toml.write_text(text.replace("\nrecord = ", '\natmosphere = "cold_day.csv"\nrecord = ', 1),
                    encoding="utf-8")
    out = tmp_path_factory.mktemp("truth_report")
    assert main(["replay", str(flight), "--truth", "--report", str(out),
                 "--tables", str(standard_table)]) == 0
    return out / REPORT_NAME


@needs_chromium
def test_truth_report_draws_the_missed_span_in_red(truth_report, tmp_path) -> None:
    # Issue 12: the report marks in red the span where a boom lands in a zone while the
    # status said no boom (the cold-day flight: no_boom throughout while the booms of
    # T+104 s on land in the town and its margin from T+238 s, by the truth harness).
    proc = chromium(["--dump-dom", truth_report.resolve().as_uri()], tmp_path / "profile")
    dom = proc.stdout.decode("utf-8", errors="replace")
    assert 'class="truth-timeline"' in dom
    missed = re.findall(r'<rect class="missed" data-zone="marrowick" x="([\d.]+)"[^>]*'
                        r'width="([\d.]+)"[^>]*fill="#e00000"', dom)
    assert len(missed) == 1 and float(missed[0][1]) > 300  # ~188 s of a 900 px axis
    assert dom.count('class="truth-cell"') > 100  # where booms landed
    assert 'class="truth-legend"' in dom and "fixed scale" in dom
    assert 'class="zone-margin"' in dom and 'class="truth-psf"' in dom
    # (the advisor predicted no contact on this flight, so its contact and time-to-contact
    # marks are not drawn: not checked here since issue 13)
    assert SAFETY_CAUTION in dom
    shot = tmp_path / "shot.png"
    chromium([f"--screenshot={shot}", "--window-size=1000,3200",
              truth_report.resolve().as_uri()], tmp_path / "profile2")
    _w, _h, rows = read_png(shot.read_bytes())
    assert any(px == (0xE0, 0x00, 0x00) for row in rows for px in row)  # the red span is drawn


def test_truth_report_csv(truth_report) -> None:
    csv_path = truth_report.parent / "coastal_approach_timeline.csv"
    lines = csv_path.read_text(encoding="utf-8").splitlines()
    assert lines[0] == ("t_s,status,zone_id,time_to_contact_s,overpressure_psf,missed,"
                        "marrowick_booms,marrowick_peak_psf")
    rows = [ln.split(",") for ln in lines[1:]]
    assert len(rows) == 3001  # 10 Hz advisory frames over 300 s (ICD section 1)
    missed = [float(r[0]) for r in rows if r[5] == "1"]
    # the truth harness: the first emission that lands in the town at T+103.6 s, the first
    # boom in the town's margin at T+238 s (steady Mach 1.10, the cold day; T+99.4 s before
    # the records' pressure altitude was flown at its height in the cold day's air, lower
    # than on the standard day the flight was generated on, issue 14 item 8)
    assert missed and abs(missed[0] - 103.6) < 3.0
    booms = [float(r[0]) for r in rows if r[6] not in ("", "0")]
    assert booms and 230.0 < booms[0] < 245.0
    assert 'href="coastal_approach_timeline.csv"' in truth_report.read_text(encoding="utf-8")


def test_truth_report_pngs_carry_the_truth(truth_report) -> None:
    # Issue 12: the PNG figures (matplotlib, optional) show the truth too: the timeline
    # marks the missed span in the report's red (the same colour as the SVG's), the map
    # has the truth's squares of where booms landed (its own colour bar).
    if not have_matplotlib():
        pytest.skip("matplotlib (the optional report extra) is not installed")
    timeline = (truth_report.parent / "coastal_approach_timeline.png").read_bytes()
    _w, _h, rows = read_png(timeline)
    assert any(px == (0xE0, 0x00, 0x00) for row in rows for px in row)
    assert (truth_report.parent / "coastal_approach_map.png").read_bytes()[:8] == \
        b"\x89PNG\r\n\x1a\n"
