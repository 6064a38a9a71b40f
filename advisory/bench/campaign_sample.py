"""Randomized encounters for a campaign: scenario dicts in the docs/scenarios.md schema.

Encounter ``i`` of a campaign with seed ``S`` draws every value from its own numpy
``Generator`` seeded by ``SeedSequence(S, spawn_key=(i,))``, so an encounter does not
depend on how many others there are, on their order or on the engine that runs them.

Distributions (each encounter; uniform ``U(a, b)`` unless said otherwise)
-------------------------------------------------------------------------
* Start: latitude ``U(-55, 55)`` deg, longitude ``U(-180, 180)`` deg, true heading
  ``U(0, 360)`` deg, Mach ``U(1.05, 2.4)``, pressure altitude ``U(30,000, 65,000)`` ft,
  level, wings level. Flight time ``U(90, 150)`` s (short, so CI can fly dozens).
* Manoeuvre (one of four, equally likely), starting at ``U(10, 50)`` s: ``hold``
  (none); ``turn`` at a bank of ``U(15, 30)`` deg either way, roll rate 5 deg/s, through
  ``U(15, 60)`` deg of heading; ``mach`` toward a target ``U(max(1.02, M - 0.4),
  min(2.4, M + 0.3))`` at ``U(0.005, 0.02)`` per s; ``climb`` (or descent) toward
  ``alt + U(-8,000, 8,000)`` ft (kept in 28,000-67,000 ft) at a flight-path angle of
  ``U(1.5, 4)`` deg, pitch rate 1 deg/s.
* True atmosphere (one of three): the U.S. Standard Atmosphere 1976 (20 %); a
  temperature offset ``U(-15, 15)`` C (30 %); inline levels every 10,000 ft from 0 to
  90,000 ft (50 %): the standard temperature plus an offset ``U(-15, 15)`` C and a wind
  from ``U(0, 360)`` deg veering ``U(-30, 30)`` deg over the column, its speed peaking at
  ``U(0, 120)`` kt at ``U(30,000, 40,000)`` ft, 20 % of the peak at the ground and 30 %
  at the top (a jet-stream shape; common practice, no source).
* What the advisor is given (one of three): the same air as the truth (30 %, key
  absent); the standard atmosphere (35 %, ``isa_offset_c = 0``); a perturbed profile
  (35 %): the truth's levels with a common temperature error ``N(0, 2)`` C plus ``N(0, 1)``
  C per level, the wind speed scaled by ``U(0.7, 1.3)`` and turned by ``N(0, 15)`` deg
  (without a true wind, an invented one of ``U(0, 40)`` kt).
* Zone geometry (one of three): ``ahead`` (40 %), a circle of radius ``U(3, 15)`` km on
  the initial track; ``offset`` (35 %), the same circle displaced left or right by
  ``U(0.2, 1.6)`` times an estimated carpet half-width of two flight altitudes (a rough
  rule of thumb, value from memory: about half of them fall inside the carpet);
  ``crossing`` (25 %), a 150 km long strip ``U(4, 12)`` km wide across the initial track
  at a crossing angle of ``U(20, 90)`` deg either way (a coastline or a corridor).
  Along the track the zone's near edge (its margin included) sits where the boom
  emitted at ``t_e = U(40, T - 30)`` s (``T`` the flight time) would land in uniform
  air: the distance flown at ground speed ``M a(h)`` (standard atmosphere) plus the
  straight ray's forward run ``h / sqrt(M^2 - 1)`` (the wave normal leaves at the Mach
  angle; refraction moves it), so a boom is on its way only after ``t_e`` and the
  advisor has time to warn. Limit: 0 psf (no boom, 50 %) or ``U(0.3, 1.5)``
  psf; margin ``U(0, 3)`` km; ground elevation 0 ft (50 %) or ``U(0, 6,000)`` ft.
* Air-data feed: 20 Hz, ``stream`` or ``datagram`` (50/50), 4 ms latency, 3 ms jitter,
  noise 0.002 Mach, 10 ft, 0.1 deg; a dropout of ``U(2, 10)`` s in 15 % of encounters;
  the flight-guidance targets the crew has selected are sent (``source.targets``).
* Crew (used by the run that follows the cues): reaction ``U(3, 8)`` s, deceleration
  ``U(0.008, 0.02)`` Mach/s, bank ``U(20, 30)`` deg, roll rate 5 deg/s, acts on a
  caution. The sampled ``mode`` is ``ignore``; each run sets its own.
* ``known`` (``campaign --known``, :func:`as_known`): after the same draws, the advisor is
  given the true air, the zone keeps its ground elevation (the zone file gives it to the
  advisor) and the crew's numbers are the advisor's configured ones.
* ``spread`` (``campaign --spread``, :func:`as_spread`, issue 16): as ``known``, but the
  air the advisor is given is the planning air and the truth is that air plus an error
  field drawn from the default spread (:mod:`advisory.physics.spread`, at the start
  altitude taken as the height), from a generator of its own
  (``SeedSequence(S, spawn_key=(i, 16))``): the advisor's confidence is then measured
  against errors of exactly the size it assumes.
* ``near_cutoff`` (``campaign --near-cutoff``, issue 16): as ``spread``, but the
  start Mach is the planning air's cutoff Mach at the start (height, heading, level,
  sea-level ground) plus ``U(-0.04, 0.03)`` (floor 1.02), from a generator of its own
  (``SeedSequence(S, spawn_key=(i, 17))``), and only a turn is kept of the manoeuvres (a
  change of Mach or height would leave the band): the flights where the margin under the
  cutoff decides, which uniform Mach rarely draws.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight. Encounters are invented flights over invented places.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from advisory import units
from advisory.bench.sim_scenario import AirSpec
from advisory.bench.sim_world import atmosphere_of
from advisory.geo.geodesy import direct_deg
from advisory.physics.atmosphere import Atmosphere, standard_atmosphere, ussa1976
from advisory.physics.pressure_altitude import HeightConverter
from advisory.physics.rays import RayTracer
from advisory.physics.spread import NODES_M, default_spread, perturbed
from advisory.pipeline.config import AdvisorConfig
from advisory.schema import EARTH_MEAN_RADIUS_M
from advisory.tables.spread_table import column_cutoff

GEOMETRIES = ("ahead", "offset", "crossing")
GEOMETRY_P = (0.40, 0.35, 0.25)
MANOEUVRES = ("hold", "turn", "mach", "climb")
TRUE_AIR = ("standard", "offset", "levels")
TRUE_AIR_P = (0.20, 0.30, 0.50)
ADVISOR_AIR = ("same", "standard", "perturbed")
ADVISOR_AIR_P = (0.30, 0.35, 0.35)

MACH_RANGE = (1.05, 2.4)
ALT_FT_RANGE = (30000.0, 65000.0)
DURATION_S_RANGE = (90.0, 150.0)
LEVELS_FT = tuple(float(x) for x in range(0, 90001, 10000))
STRIP_LENGTH_KM = 150.0
#: The boom that first reaches the zone is emitted at U(a, T - b) s (T: flight time).
EMIT_S_RANGE = (40.0, 30.0)
#: ``near_cutoff``: the start Mach less the planning air's cutoff Mach, U(a, b).
NEAR_CUTOFF_OFFSET = (-0.04, 0.03)


def encounter_rng(seed: int, index: int) -> np.random.Generator:
    """The generator of encounter ``index`` of the campaign seeded ``seed`` (its own child)."""
    return np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(index,)))


def _r(x: float, nd: int = 4) -> float:
    """Rounded for a readable scenario file (the value used is the rounded one)."""
    return round(float(x), nd)


def _move(lat_deg: float, lon_deg: float, azimuth_deg: float, distance_m: float
          ) -> tuple[float, float]:
    """The point ``distance_m`` along the geodesic leaving at ``azimuth_deg`` (WGS 84)."""
    r = direct_deg(lat_deg, lon_deg, azimuth_deg, distance_m)
    return float(r.lat_deg), float(r.lon_deg)


def _isa_temp_c(alt_ft: float, offset_c: float = 0.0) -> float:
    return float(ussa1976(units.ft_to_m(alt_ft))["temperature_k"][0]) - 273.15 + offset_c


def _sound_speed(alt_ft: float) -> float:
    return float(ussa1976(units.ft_to_m(alt_ft))["sound_speed_mps"][0])


def _true_air(rng: np.random.Generator) -> tuple[str, dict[str, Any]]:
    kind = str(rng.choice(TRUE_AIR, p=TRUE_AIR_P))
    if kind == "standard":
        return kind, {}
    offset = _r(rng.uniform(-15.0, 15.0), 2)
    if kind == "offset":
        return kind, {"isa_offset_c": offset}
    wind_from = rng.uniform(0.0, 360.0)
    veer = rng.uniform(-30.0, 30.0)
    peak = rng.uniform(0.0, 120.0)
    peak_ft = rng.uniform(30000.0, 40000.0)
    top = LEVELS_FT[-1]
    levels = []
    for alt in LEVELS_FT:
        if alt <= peak_ft:
            speed = peak * (0.2 + 0.8 * alt / peak_ft)
        else:
            speed = peak * (1.0 - 0.7 * (alt - peak_ft) / (top - peak_ft))
        direction = (wind_from + veer * alt / top) % 360.0
        levels.append([alt, _r(_isa_temp_c(alt, offset), 2), _r(direction, 1), _r(speed, 1)])
    return kind, {"levels": levels}


def _advisor_air(rng: np.random.Generator, truth: dict[str, Any]) -> tuple[str, dict | None]:
    kind = str(rng.choice(ADVISOR_AIR, p=ADVISOR_AIR_P))
    if kind == "same":
        return kind, None
    if kind == "standard":
        return kind, {"isa_offset_c": 0.0}
    bias = rng.normal(0.0, 2.0)
    scale = rng.uniform(0.7, 1.3)
    turn = rng.normal(0.0, 15.0)
    if "levels" in truth:
        base = truth["levels"]
    else:
        offset = float(truth.get("isa_offset_c", 0.0))
        invented_from, invented_kt = rng.uniform(0.0, 360.0), rng.uniform(0.0, 40.0)
        base = [[a, _isa_temp_c(a, offset), invented_from, invented_kt] for a in LEVELS_FT]
    levels = []
    for alt, temp, wfrom, wkt in base:
        levels.append([alt, _r(temp + bias + rng.normal(0.0, 1.0), 2),
                       _r((wfrom + turn) % 360.0, 1), _r(wkt * scale, 1)])
    return kind, {"levels": levels}


def _manoeuvre(rng: np.random.Generator, mach: float, alt_ft: float) -> list[dict[str, Any]]:
    kind = str(rng.choice(MANOEUVRES))
    at_s = _r(rng.uniform(10.0, 50.0), 1)
    if kind == "hold":
        return []
    if kind == "turn":
        side = 1.0 if rng.random() < 0.5 else -1.0
        return [{"kind": "turn", "at_s": at_s, "bank_deg": _r(side * rng.uniform(15.0, 30.0), 1),
                 "roll_rate_deg_s": 5.0,
                 "heading_change_deg": _r(side * rng.uniform(15.0, 60.0), 1)}]
    if kind == "mach":
        lo, hi = max(1.02, mach - 0.4), min(MACH_RANGE[1], mach + 0.3)
        target = _r(rng.uniform(lo, hi), 3)
        return [{"kind": "mach", "at_s": at_s, "target_mach": target,
                 "mach_rate_per_s": _r(rng.uniform(0.005, 0.02), 4)}]
    target_alt = float(np.clip(alt_ft + rng.uniform(-8000.0, 8000.0), 28000.0, 67000.0))
    fpa = rng.uniform(1.5, 4.0) * (1.0 if target_alt >= alt_ft else -1.0)
    return [{"kind": "climb", "at_s": at_s, "fpa_deg": _r(fpa, 2), "pitch_rate_deg_s": 1.0,
             "target_alt_ft": _r(target_alt, 0)}]


def _zone(rng: np.random.Generator, start: dict[str, float], duration_s: float
          ) -> tuple[str, float, dict[str, Any]]:
    """The zone: geometry, crossing angle (deg, 0 unless ``crossing``), the zone table."""
    geometry = str(rng.choice(GEOMETRIES, p=GEOMETRY_P))
    mach, alt_ft = start["mach"], start["alt_ft"]
    h_m = units.ft_to_m(alt_ft)
    margin_m = 1000.0 * _r(rng.uniform(0.0, 3.0), 2)
    # the near edge (margin included) where the boom emitted at t_emit lands (uniform air)
    t_emit = rng.uniform(EMIT_S_RANGE[0], duration_s - EMIT_S_RANGE[1])
    edge_m = mach * _sound_speed(alt_ft) * t_emit + h_m / math.sqrt(mach * mach - 1.0)
    heading = start["heading_deg"]
    zone: dict[str, Any] = {"id": "zone", "name": "Invented zone"}
    crossing = 0.0
    if geometry == "crossing":
        half_width_m = 500.0 * rng.uniform(4.0, 12.0)
        angle = rng.uniform(20.0, 90.0) * (1.0 if rng.random() < 0.5 else -1.0)
        along_m = edge_m + (half_width_m + margin_m) / math.sin(math.radians(abs(angle)))
        lat_c, lon_c = _move(start["lat_deg"], start["lon_deg"], heading, along_m)
        axis = heading + angle
        half_len_m = 500.0 * STRIP_LENGTH_KM
        ring = []
        for along, across in ((-1, -1), (1, -1), (1, 1), (-1, 1)):
            la, lo = _move(lat_c, lon_c, axis, along * half_len_m)
            la, lo = _move(la, lo, axis + 90.0, across * half_width_m)
            ring.append([_r(la, 6), _r(lo, 6)])
        zone["polygon"] = ring
        crossing = _r(angle, 1)
    else:
        radius_m = 1000.0 * rng.uniform(3.0, 15.0)
        lat_c, lon_c = _move(start["lat_deg"], start["lon_deg"], heading,
                             edge_m + margin_m + radius_m)
        if geometry == "offset":
            side = 1.0 if rng.random() < 0.5 else -1.0
            across_m = side * rng.uniform(0.2, 1.6) * 2.0 * h_m
            lat_c, lon_c = _move(lat_c, lon_c, heading + 90.0, across_m)
        zone["circle"] = [_r(lat_c, 6), _r(lon_c, 6), _r(radius_m / 1000.0, 3)]
    zone["limit_psf"] = 0.0 if rng.random() < 0.5 else _r(rng.uniform(0.3, 1.5), 2)
    zone["margin_km"] = margin_m / 1000.0
    zone["ground_elevation_ft"] = 0.0 if rng.random() < 0.5 else _r(rng.uniform(0.0, 6000.0), 0)
    return geometry, crossing, zone


def _crosses_antimeridian(zone: dict[str, Any]) -> bool:
    """Whether the zone's ring would cross longitude 180 (GeoJSON refuses such rings
    unless cut, RFC 7946 section 3.1.9)."""
    if "polygon" in zone:
        lons = [lo for _la, lo in zone["polygon"]]
        return max(lons) - min(lons) > 180.0
    lat_c, lon_c, r_km = zone["circle"]
    r_deg = math.degrees(r_km * 1000.0 / EARTH_MEAN_RADIUS_M)
    return abs(lon_c) + 1.05 * r_deg / max(math.cos(math.radians(lat_c)), 0.1) >= 180.0


def _off_antimeridian(start: dict[str, float], zone: dict[str, Any]) -> None:
    """Move an encounter whose zone would cross longitude 180 by 20 deg of longitude away
    from it (in place). A shift in longitude changes nothing else: the ellipsoid and the
    campaign's atmospheres do not depend on longitude. Every other encounter is left as
    sampled (the draws are the same either way)."""
    if not _crosses_antimeridian(zone):
        return
    shift = -20.0 if start["lon_deg"] > 0.0 else 20.0

    def moved(lon: float) -> float:
        return _r((lon + shift + 180.0) % 360.0 - 180.0, 6)

    start["lon_deg"] = _r(moved(start["lon_deg"]), 5)
    if "polygon" in zone:
        zone["polygon"] = [[la, moved(lo)] for la, lo in zone["polygon"]]
    else:
        zone["circle"] = [zone["circle"][0], moved(zone["circle"][1]), zone["circle"][2]]


@dataclass(frozen=True)
class Encounter:
    """One sampled encounter.

    Attributes
    ----------
    index : int
        Its number in the campaign.
    doc : dict
        The scenario (docs/scenarios.md schema, inline zone), as the simulator takes it.
    info : dict
        The sampled values, flat, for the per-scenario CSV: ``name``, ``geometry``,
        ``crossing_angle_deg``, ``manoeuvre``, ``true_air``, ``advisor_air``, ``mach``,
        ``alt_ft``, ``duration_s``, ``limit_psf``, ``ground_elevation_ft``.
    """

    index: int
    doc: dict[str, Any]
    info: dict[str, Any]


def _planning_atmosphere(air: dict[str, Any]) -> Atmosphere:
    """The atmosphere of an ``[atmosphere]`` table as sampled (levels, an offset, or
    none: the standard atmosphere)."""
    if "levels" in air:
        return atmosphere_of(AirSpec(levels=tuple(tuple(r) for r in air["levels"])),
                             "planning")
    return standard_atmosphere(float(air.get("isa_offset_c", 0.0)))


def _near_cutoff(seed: int, index: int, start: dict[str, float],
                 schedule: list[dict[str, Any]], air: dict[str, Any]) -> list[dict[str, Any]]:
    """Set the start Mach near the planning air's cutoff (module notes, ``near_cutoff``);
    the schedule kept (a turn, or nothing)."""
    rng = np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(index, 17)))
    atm = _planning_atmosphere(air)
    z = HeightConverter(atm).height(units.ft_to_m(start["alt_ft"]))
    cut = column_cutoff(RayTracer(atm), z, math.radians(start["heading_deg"]), 0.0, 0.0)
    offset = rng.uniform(*NEAR_CUTOFF_OFFSET)
    if math.isfinite(cut):
        start["mach"] = _r(max(1.02, cut + offset), 3)
    return [m for m in schedule if m["kind"] == "turn"]


def sample_encounter(seed: int, index: int, known: bool = False,
                     spread: bool = False, near_cutoff: bool = False) -> Encounter:
    """Encounter ``index`` of the campaign seeded ``seed``.

    Parameters
    ----------
    seed : int
        The campaign seed (>= 0).
    index : int
        The encounter's number in the campaign (>= 0).
    known : bool
        The advisor knows what it is told to assume (:func:`as_known`); the same draws,
        so the flight, zone and true air are those of the encounter without it.
    spread : bool
        As ``known``, the truth's air then perturbed by the spread (:func:`as_spread`).
    near_cutoff : bool
        As ``spread``, the start Mach near the cutoff (module notes).

    Returns
    -------
    Encounter
    """
    if seed < 0 or index < 0:
        raise ValueError(f"seed {seed} / index {index}: must be >= 0")
    rng = encounter_rng(seed, index)
    duration_s = _r(rng.uniform(*DURATION_S_RANGE), 1)
    start = {"lat_deg": _r(rng.uniform(-55.0, 55.0), 5),
             "lon_deg": _r(rng.uniform(-180.0, 180.0), 5),
             "alt_ft": _r(rng.uniform(*ALT_FT_RANGE), 0),
             "mach": _r(rng.uniform(*MACH_RANGE), 3),
             "heading_deg": _r(rng.uniform(0.0, 360.0), 2)}
    schedule = _manoeuvre(rng, start["mach"], start["alt_ft"])
    true_kind, truth = _true_air(rng)
    adv_kind, adv_air = _advisor_air(rng, truth)
    spread = spread or near_cutoff
    if near_cutoff:
        schedule = _near_cutoff(seed, index, start, schedule, truth)
    geometry, crossing, zone = _zone(rng, start, duration_s)
    _off_antimeridian(start, zone)
    faults = []
    if rng.random() < 0.15:
        t0 = rng.uniform(10.0, duration_s - 20.0)
        faults.append({"kind": "dropout", "t0_s": _r(t0, 1),
                       "t1_s": _r(t0 + rng.uniform(2.0, 10.0), 1)})
    advisor: dict[str, Any] = {"rate_hz": 10.0}
    if adv_air is not None:
        advisor["atmosphere"] = adv_air
    doc: dict[str, Any] = {
        "name": f"enc-{seed}-{index:05d}",
        "title": f"Campaign {seed}, encounter {index}",
        "duration_s": duration_s,
        "seed": int(rng.integers(0, 2**31 - 1)),
        "start": start,
        "schedule": schedule,
        "advisor": advisor,
        "zones": [zone],
        "source": {"rate_hz": 20.0,
                   "format": "stream" if rng.random() < 0.5 else "datagram",
                   "latency_s": 0.004, "jitter_s": 0.003,
                   "noise": {"mach": 0.002, "alt_ft": 10.0, "heading_deg": 0.1},
                   "faults": faults, "targets": True},
        "crew": {"mode": "ignore", "reaction_s": _r(rng.uniform(3.0, 8.0), 2),
                 "decel_mach_per_s": _r(rng.uniform(0.008, 0.02), 4),
                 "bank_deg": _r(rng.uniform(20.0, 30.0), 1), "roll_rate_deg_s": 5.0,
                 "act_on": "caution"},
    }
    if truth:  # the standard atmosphere is the absence of an [atmosphere] table
        doc["atmosphere"] = truth
    if known or spread:
        adv_kind = "same"
        as_known(doc)
    if spread:
        adv_kind = "spread"
        as_spread(doc, seed, index)
    info = {"name": doc["name"], "geometry": geometry, "crossing_angle_deg": crossing,
            "manoeuvre": schedule[0]["kind"] if schedule else "hold",
            "true_air": true_kind, "advisor_air": adv_kind, "mach": start["mach"],
            "alt_ft": start["alt_ft"], "duration_s": duration_s,
            "limit_psf": zone["limit_psf"],
            "ground_elevation_ft": zone["ground_elevation_ft"]}
    return Encounter(index, doc, info)


def as_known(doc: dict[str, Any]) -> None:
    """Make an encounter one whose inputs the advisor knows (``campaign --known``): it is
    given the true atmosphere; the zone keeps its ground elevation (in the zone file the
    advisor reads, which judges it on that ground: issue 14; before, known encounters put
    every zone at sea level); the crew reacts, decelerates, banks and rolls as the advisor's
    configuration assumes (:class:`advisory.pipeline.config.AdvisorConfig` defaults);
    and the truth's act-by of every exposure is flown (:mod:`advisory.bench.truth_act_by`).
    What the advice can do when what it assumes is true."""
    cfg = AdvisorConfig()
    doc["advisor"].pop("atmosphere", None)
    doc["crew"].update(reaction_s=cfg.reaction_s, decel_mach_per_s=cfg.decel_mach_per_s,
                       bank_deg=cfg.turn_bank_deg, roll_rate_deg_s=cfg.roll_rate_deg_s)
    doc.setdefault("truth", {})["act_by"] = True  # the truth's act-by of every exposure


def as_spread(doc: dict[str, Any], seed: int, index: int) -> None:
    """Make a known encounter one whose air the advisor knows only to within the default
    spread (module notes): the advisor is given the sampled air as its planning air; the
    truth is that air plus one drawn error field, given as levels at the field's nodes
    and every 10,000 ft (linear between them, as the field)."""
    planning = doc.get("atmosphere", {})
    atm = _planning_atmosphere(planning)
    doc["advisor"]["atmosphere"] = dict(planning) or {"isa_offset_c": 0.0}
    rng = np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(index, 16)))
    z_a = units.ft_to_m(float(doc["start"]["alt_ft"]))
    delta = default_spread().sample(rng, z_a, 1)[0]
    truth = perturbed(atm, delta, "campaign spread draw")
    heights = sorted(set(NODES_M.tolist()) | {units.ft_to_m(a) for a in LEVELS_FT})
    levels = []
    for z in heights:
        s = truth.at(z)
        e, n = s.wind_east_mps, s.wind_north_mps
        speed = math.hypot(e, n)
        wind_from = (math.degrees(math.atan2(e, n)) + 180.0) % 360.0 if speed > 0.0 else 0.0
        levels.append([_r(units.m_to_ft(z), 1), _r(units.k_to_c(s.temperature_k), 3),
                       _r(wind_from, 2), _r(speed / units.KT, 3)])
    doc["atmosphere"] = {"levels": levels}
