"""Synthesize the bundled demo flights: 20 Hz air-data record files and their scenario files.

Every flight here is an invented scenario over invented geography: fictional towns and
parks placed over open ocean around 30 N 140 W (no real place is implied), flown by the
fictional demo aircraft of ``advisory/data/demo_aircraft.toml``. Each scenario directory
gets:

``flight.rec``
    The record file (``advisory/io/records.py``): one raw-input record per received
    chunk of the byte stream (COBS + CRC-32C frames of ``docs/interface.md``), with the
    receive times a live service would have stamped (20 Hz, a few ms of latency and
    jitter), garbage and dropouts where the scenario has them.
``zones.geojson``
    The no-boom zones (GeoJSON, see ``advisory/pipeline/zones.py``).
``grid.toml``
    A small table grid covering the flight (altitudes, Mach, headings), so the table
    builds in seconds.
``atmosphere.csv``
    The atmosphere profile, for scenarios flown in a non-standard atmosphere.
``scenario.toml``
    Title, description, aircraft, atmosphere, grid, input format.

``expected.json`` (the advisories each flight must produce, with time tolerances) is
written by hand from the scenario design and is not touched by this script.

The aircraft model is the package's point-mass flight simulator
(:mod:`advisory.bench.flight`): Mach changes at a set rate toward a target, bank rolls at
a limited rate toward a target, turns are coordinated (heading rate ``g tan(bank) /
TAS``), the ground velocity is the air velocity plus the wind of the atmosphere at the
aircraft, and positions advance along geodesics (WGS 84). The feed (latency, jitter,
faults) is :mod:`advisory.bench.feed`. This script only defines the five demo scenarios.

Run from the repository root::

    python replay_logs/make_demo_logs.py            # every scenario
    python replay_logs/make_demo_logs.py turn_onto_park

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import argparse
import datetime as dt
import json
import math
import sys
from dataclasses import dataclass, field
from pathlib import Path

HERE = Path(__file__).resolve().parent
if str(HERE.parent) not in sys.path:  # run from a checkout without installing
    sys.path.insert(0, str(HERE.parent))

from advisory import units  # noqa: E402
from advisory.bench.feed import (  # noqa: E402
    Fault,
    FeedEncoder,
    FeedSettings,
    encode_samples,
)
from advisory.bench.feed import write_record as write_record_file  # noqa: E402
from advisory.bench.flight import FlightState, fly_timed  # noqa: E402
from advisory.geo.geodesy import direct_deg  # noqa: E402
from advisory.physics.atmosphere import (  # noqa: E402
    Atmosphere,
    ProfileLevel,
    atmosphere_from_levels,
    standard_atmosphere,
)
from advisory.physics.profile_file import load_profile  # noqa: E402

RATE_HZ = 20.0  #: air-data frame rate of the synthesized feeds, Hz
ROLL_RATE_DEG_S = 5.0  #: roll rate toward a new bank target, deg/s (invented, gentle)
#: Start of every demo flight's clock (UTC), an arbitrary invented date.
START_UTC = dt.datetime(2031, 6, 14, 15, 0, 0, tzinfo=dt.timezone.utc).timestamp()
LATENCY_S = 0.004  #: link latency from the sample time to the receive stamp, s
JITTER_S = 0.003  #: receive-time jitter, uniform in [0, JITTER_S), s
RECORD_NAME = "flight.rec"


# ---------------------------------------------------------------------- scenario model

@dataclass(frozen=True)
class Scenario:
    """One demo flight (edge units: deg, ft, kt, as a crew would state them)."""

    name: str
    title: str
    description: str
    lat_deg: float
    lon_deg: float
    alt_ft: float
    mach: float
    heading_deg: float
    duration_s: float
    #: (time s, target Mach, rate 1/s > 0): from that time Mach moves toward the target
    mach_schedule: tuple[tuple[float, float, float], ...] = ()
    #: (time s, target bank deg): from that time bank rolls toward the target
    bank_schedule: tuple[tuple[float, float], ...] = ()
    zones: tuple[dict, ...] = ()
    #: profile levels (alt_ft, temp_c, wind_from_deg, wind_kt); empty: standard atmosphere
    atmosphere_levels: tuple[tuple[float, float, float, float], ...] = ()
    grid: dict = field(default_factory=dict)
    faults: tuple[Fault, ...] = ()
    mono_start_s: float = 3600.0
    seed: int = 1


def town(zone_id: str, name: str, lat: float, lon: float, radius_km: float,
         limit_psf: float = 0.0, margin_km: float | None = None, sides: int = 9) -> dict:
    """An irregular roughly round GeoJSON polygon feature (an invented town)."""
    ring = []
    for i in range(sides):
        az = 360.0 * i / sides
        r = radius_km * (1.0 + 0.18 * math.sin(3.1 * i + len(zone_id)))
        p = direct_deg(lat, lon, az, r * 1e3)
        ring.append([round(float(p.lon_deg), 6), round(float(p.lat_deg), 6)])
    ring.append(ring[0])
    props = {"id": zone_id, "name": name, "limit_psf": limit_psf}
    if margin_km is not None:
        props["margin_km"] = margin_km
    return {"type": "Feature", "properties": props,
            "geometry": {"type": "Polygon", "coordinates": [ring[::-1]]}}


def park(zone_id: str, name: str, lat: float, lon: float, length_km: float, width_km: float,
         axis_deg: float, limit_psf: float = 0.0, margin_km: float | None = None) -> dict:
    """A rectangular GeoJSON polygon feature along ``axis_deg`` (an invented park)."""
    ring = []
    for along, across in ((-1, -1), (1, -1), (1, 1), (-1, 1)):
        mid = direct_deg(lat, lon, axis_deg, along * length_km * 500.0)
        p = direct_deg(float(mid.lat_deg), float(mid.lon_deg), axis_deg + 90.0,
                       across * width_km * 500.0)
        ring.append([round(float(p.lon_deg), 6), round(float(p.lat_deg), 6)])
    ring.append(ring[0])
    props = {"id": zone_id, "name": name, "limit_psf": limit_psf}
    if margin_km is not None:
        props["margin_km"] = margin_km
    return {"type": "Feature", "properties": props,
            "geometry": {"type": "Polygon", "coordinates": [ring[::-1]]}}


def ahead(lat: float, lon: float, azimuth_deg: float, km: float) -> tuple[float, float]:
    """The point ``km`` from (lat, lon) along ``azimuth_deg`` (WGS 84 geodesic)."""
    p = direct_deg(lat, lon, azimuth_deg, km * 1e3)
    return float(p.lat_deg), float(p.lon_deg)


#: The small grid shared by the calm-air scenarios (level flight, 43,000-47,000 ft).
CALM_GRID = {
    "altitudes_ft": [43000.0, 45000.0, 47000.0],
    "mach_excess": [0.001, 0.003, 0.006, 0.01, 0.02, 0.03, 0.05, 0.08, 0.12, 0.18, 0.25,
                    0.35, 0.5],
    "fpa_deg": [0.0],
    "n_eta": 15,
}


def scenarios() -> list[Scenario]:
    """The bundled demo flights."""
    out = []

    # 1. Coastal approach: straight at the fictional harbour town of Marrowick; the
    #    crew slows below cutoff Mach after the advisory and the conflict clears.
    lat0, lon0 = 30.10, -141.20
    t_lat, t_lon = ahead(lat0, lon0, 90.0, 80.0)
    out.append(Scenario(
        name="coastal_approach",
        title="Coastal approach to Marrowick",
        description=(
            "Eastbound at Mach 1.40 and 45,000 ft toward the invented harbour town of "
            "Marrowick on the fictional Sable Reach coast. The carpet would reach the town; "
            "30 s after the advisory the crew slows to Mach 1.10, below cutoff Mach, and "
            "the boom leaves the ground long before it gets there. (Slowing only after the "
            "caution, at 85 s, is too late: booms emitted near cutoff during the slow-down "
            "travel far ahead and still land in the town; the truth harness shows it.)"),
        lat_deg=lat0, lon_deg=lon0, alt_ft=45000.0, mach=1.40, heading_deg=90.0,
        duration_s=150.0,
        mach_schedule=((30.0, 1.10, 0.012),),
        zones=(town("marrowick", "Marrowick", t_lat, t_lon, 3.0),
               park("sable-reach-dunes", "Sable Reach Dunes Reserve",
                    *ahead(t_lat, t_lon, 0.0, 55.0), 18.0, 5.0, 20.0)),
        grid=CALM_GRID, mono_start_s=18250.0, seed=11,
    ))

    # 2. A right turn that swings the predicted carpet onto the fictional Kelvane Wilds
    #    park; the crew rolls out after the caution and the conflict clears.
    lat0, lon0 = 29.60, -139.40
    p_lat, p_lon = ahead(lat0, lon0, 45.0, 70.0)
    out.append(Scenario(
        name="turn_onto_park",
        title="Turn toward Kelvane Wilds",
        description=(
            "Northbound at Mach 1.50 and 45,000 ft with the invented Kelvane Wilds park off "
            "to the right, clear of the carpet. At 30 s the crew banks right 30 deg; the "
            "predicted turn swings the carpet onto the park and a caution fires. At 36 s "
            "the crew rolls out, about 4 deg right of the old heading, and the carpet "
            "clears the park again."),
        lat_deg=lat0, lon_deg=lon0, alt_ft=45000.0, mach=1.50, heading_deg=0.0,
        duration_s=90.0,
        bank_schedule=((30.0, 30.0), (36.0, 0.0)),
        zones=(park("kelvane-wilds", "Kelvane Wilds Park", p_lat, p_lon, 24.0, 12.0, 0.0),),
        grid=CALM_GRID, mono_start_s=40410.0, seed=22,
    ))

    # 3. Crosswind day: a strong westerly pushes the carpet east onto Orrinford, which
    #    the same flight in calm air would miss.
    lat0, lon0 = 30.40, -140.60
    o_lat, o_lon = ahead(*ahead(lat0, lon0, 0.0, 100.0), 90.0, 40.0)
    out.append(Scenario(
        name="crosswind_day",
        title="Crosswind day near Orrinford",
        description=(
            "Northbound at Mach 1.30 and 45,000 ft on a day with a strong westerly jet "
            "(up to 110 kt at 35,000 ft). The wind shifts the carpet east onto the invented "
            "town of Orrinford, off the right side of the track; in calm air the same "
            "flight would keep the carpet west of it."),
        lat_deg=lat0, lon_deg=lon0, alt_ft=45000.0, mach=1.30, heading_deg=0.0,
        duration_s=100.0,
        zones=(town("orrinford", "Orrinford", o_lat, o_lon, 3.0),),
        atmosphere_levels=(
            (0.0, 18.0, 270.0, 15.0), (10000.0, 0.0, 270.0, 40.0),
            (25000.0, -30.0, 270.0, 80.0), (35000.0, -50.0, 270.0, 110.0),
            (45000.0, -56.0, 270.0, 70.0), (55000.0, -56.0, 270.0, 40.0),
        ),
        grid={**CALM_GRID, "headings_deg": [0.0, 45.0, 90.0, 135.0, 180.0, 225.0, 270.0,
                                            315.0]},
        mono_start_s=7720.0, seed=33,
    ))

    # 4. Below cutoff: Mach 1.12 over Pellasey, no boom reaches the ground.
    lat0, lon0 = 29.90, -142.30
    out.append(Scenario(
        name="below_cutoff",
        title="Below cutoff Mach over Pellasey",
        description=(
            "Eastbound at Mach 1.12 and 45,000 ft straight over the invented town of "
            "Pellasey. Cutoff Mach is about 1.15 in the standard atmosphere, so the boom "
            "turns back before the ground: no boom, no conflict, all the way."),
        lat_deg=lat0, lon_deg=lon0, alt_ft=45000.0, mach=1.12, heading_deg=90.0,
        duration_s=90.0,
        zones=(town("pellasey", "Pellasey", *ahead(lat0, lon0, 90.0, 16.0), 4.0),),
        grid=CALM_GRID, mono_start_s=915.0, seed=44,
    ))

    # 5. A poor feed: garbage, a dropout, corrupted frames, NaN air data, torn frames and
    #    a power cut at the end of the recording.
    lat0, lon0 = 30.70, -139.10
    out.append(Scenario(
        name="dropouts_and_garbage",
        title="Dropouts and garbage on the feed",
        description=(
            "Eastbound at Mach 1.40 and 45,000 ft, clear of the invented town of Yarrowcombe "
            "far to the north. The feed suffers line noise, a 10 s dropout, a burst of "
            "frames with bad CRCs, air data with NaN Mach and torn frames; the recording "
            "ends in a torn record (power cut). The advisory must say unavailable while the "
            "data is out, never clear."),
        lat_deg=lat0, lon_deg=lon0, alt_ft=45000.0, mach=1.40, heading_deg=90.0,
        duration_s=100.0,
        zones=(town("yarrowcombe", "Yarrowcombe", *ahead(lat0, lon0, 20.0, 120.0), 3.0),),
        grid=CALM_GRID,
        faults=(Fault("garbage", 10.0, 14.0), Fault("dropout", 25.0, 35.0),
                Fault("bad_crc", 50.0, 54.0), Fault("nan", 65.0, 69.0),
                Fault("torn", 80.0, 82.0), Fault("torn_tail")),
        mono_start_s=123456.0, seed=55,
    ))
    return out


# ---------------------------------------------------------------------- flight model

def scenario_atmosphere(sc: Scenario) -> Atmosphere:
    """The atmosphere the scenario is flown in."""
    if not sc.atmosphere_levels:
        return standard_atmosphere()
    levels = []
    for alt_ft, temp_c, wind_from, wind_kt in sc.atmosphere_levels:
        e, n = units.wind_from_to_components(wind_from, units.kt_to_mps(wind_kt))
        levels.append(ProfileLevel(units.ft_to_m(alt_ft), units.c_to_k(temp_c), e, n))
    return atmosphere_from_levels(levels, source=f"{sc.name}/atmosphere.csv")


def simulate(sc: Scenario, atm: Atmosphere) -> list[dict]:
    """Air-data samples at :data:`RATE_HZ` (wire field names plus ``t_s``), flown by the
    package's point-mass simulator (:func:`advisory.bench.flight.fly_timed`)."""
    state = FlightState(atm, sc.lat_deg, sc.lon_deg, sc.alt_ft, sc.mach, sc.heading_deg,
                        roll_rate_deg_s=ROLL_RATE_DEG_S)
    return fly_timed(state, sc.duration_s, RATE_HZ, sc.mach_schedule, sc.bank_schedule)


def write_record(sc: Scenario, samples: list[dict], path: Path) -> dict:
    """Write the record file of the scenario's feed (:mod:`advisory.bench.feed`); returns
    counts of what was written."""
    settings = FeedSettings(rate_hz=RATE_HZ, format="stream", latency_s=LATENCY_S,
                            jitter_s=JITTER_S,
                            faults=tuple(f for f in sc.faults if f.kind != "torn_tail"))
    enc = FeedEncoder(settings, sc.seed, sc.mono_start_s, START_UTC)
    chunks = encode_samples(enc, samples)
    tail = b""
    if any(f.kind == "torn_tail" for f in sc.faults):
        tail = enc.torn_tail(samples[-1], len(samples), sc.duration_s)
    write_record_file(path, chunks, f"demo flight {sc.name}: synthesized by "
                      "make_demo_logs.py (invented scenario)", sc.mono_start_s, START_UTC, tail)
    counts = dict(enc.counts)
    if tail:
        counts["torn_tail_bytes"] = len(tail)
    return counts


# ---------------------------------------------------------------------- scenario files

def _iso(utc_s: float) -> str:
    return dt.datetime.fromtimestamp(utc_s, dt.timezone.utc).isoformat()


def _toml_value(v) -> str:
    if isinstance(v, str):
        return json.dumps(v)
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    if isinstance(v, float):
        return repr(v)
    return str(v)


def write_scenario_files(sc: Scenario, out: Path, order: int = 99) -> None:
    """zones.geojson, grid.toml, atmosphere.csv (if any) and scenario.toml."""
    out.mkdir(parents=True, exist_ok=True)
    zones = {"type": "FeatureCollection",
             "name": f"{sc.title} (invented zones over open ocean; demo data)",
             "features": list(sc.zones)}
    (out / "zones.geojson").write_text(json.dumps(zones, indent=1) + "\n", encoding="utf-8")
    grid_lines = ["# Small table grid for this demo flight (builds in seconds).",
                  "# Keys as in advisory/tables/grid.py."]
    grid_lines += [f"{k} = {_toml_value(v)}" for k, v in sc.grid.items()]
    (out / "grid.toml").write_text("\n".join(grid_lines) + "\n", encoding="utf-8")
    lines = [
        "# Invented demo scenario for boom-advisory (fictional places, fictional aircraft).",
        "# Generated by replay_logs/make_demo_logs.py.",
        f"title = {_toml_value(sc.title)}",
        f"order = {order}",
        f"description = {_toml_value(sc.description)}",
        f"record = {_toml_value(RECORD_NAME)}",
        'zones = "zones.geojson"',
        'grid = "grid.toml"',
        'expected = "expected.json"',
        'input_format = "stream"',
        "# aircraft: a TOML file beside this one; absent = the bundled fictional demo "
        "aircraft (advisory/data/demo_aircraft.toml)",
    ]
    if sc.atmosphere_levels:
        rows = ["# Invented atmosphere profile (demo data): altitude, temperature, wind.",
                "alt_ft,temp_c,wind_from_deg,wind_kt"]
        rows += [f"{a:g},{t:g},{d:g},{w:g}" for a, t, d, w in sc.atmosphere_levels]
        (out / "atmosphere.csv").write_text("\n".join(rows) + "\n", encoding="utf-8")
        lines.append('atmosphere = "atmosphere.csv"')
    else:
        lines.append("# atmosphere: absent = U.S. Standard Atmosphere 1976")
    lines += [
        "",
        "[flight]",
        f"duration_s = {sc.duration_s!r}",
        f"start_utc = {_toml_value(_iso(START_UTC))}",
        f"frame_rate_hz = {RATE_HZ!r}",
        f"start = [{sc.lat_deg!r}, {sc.lon_deg!r}]",
        f"alt_ft = {sc.alt_ft!r}",
        f"mach = {sc.mach!r}",
        f"heading_deg = {sc.heading_deg!r}",
    ]
    (out / "scenario.toml").write_text("\n".join(lines) + "\n", encoding="utf-8")


def make(sc: Scenario, root: Path = HERE, order: int = 99) -> dict:
    """Write one scenario's directory; returns what the record holds."""
    out = root / sc.name
    write_scenario_files(sc, out, order)
    atm = load_profile(out / "atmosphere.csv") if sc.atmosphere_levels else scenario_atmosphere(sc)
    samples = simulate(sc, atm)
    return write_record(sc, samples, out / RECORD_NAME)


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("names", nargs="*", help="scenarios to write (default: all)")
    ap.add_argument("--out", type=Path, default=HERE, help="root directory (default: here)")
    args = ap.parse_args(argv)
    todo = [(i + 1, s) for i, s in enumerate(scenarios())
            if not args.names or s.name in args.names]
    unknown = set(args.names) - {s.name for _, s in todo}
    if unknown:
        print(f"make_demo_logs: unknown scenario(s) {sorted(unknown)}", file=sys.stderr)
        return 2
    for order, sc in todo:
        counts = make(sc, args.out, order)
        print(f"{sc.name}: {counts}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
