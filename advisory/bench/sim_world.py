"""What a scenario's flight happens in: the atmospheres, the zones, the advisor and its table.

:func:`build_world` turns a checked :class:`~advisory.bench.sim_scenario.Scenario` into
plain objects: the TRUE atmosphere (the booms travel through it, the aircraft flies in
it), the advisor's atmosphere (may differ), the zones (one
:class:`~advisory.pipeline.zones.ZoneSet` for the advisor and the same geometry as
:class:`~advisory.bench.truth_zones.TruthZone` for the truth, in a local frame about the
start point), the aircraft (the bundled demo aircraft) and the advisor's boom table.

The table: the scenario's file when it names one; otherwise built for the advisor's
atmosphere over the scenario's grid or, without one, over a small grid around the flight
(:func:`grid_around_flight`: the schedule flown dry, altitudes every 1,000 ft from 1,000
ft below to 1,000 ft above it, Mach excess nodes of the default grid up to the fastest
Mach, the flight-path angles flown, every 15 deg of heading when the air has wind), and
cached (:func:`advisory.tables.cache.cached_table`), as a replay's scenario grid is.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from advisory import units
from advisory.bench.flight import FlightState, Pilot
from advisory.bench.sim_scenario import AirSpec, Scenario, ScenarioError, ZoneSpec
from advisory.bench.truth_zones import TruthZone
from advisory.geo.frame import LocalFrame
from advisory.geo.geodesy import direct_deg
from advisory.physics.aircraft import Aircraft, default_aircraft
from advisory.physics.atmosphere import (
    Atmosphere,
    ProfileLevel,
    atmosphere_from_levels,
    standard_atmosphere,
)
from advisory.physics.profile_file import load_profile
from advisory.pipeline.zones import ZoneSet
from advisory.tables.build import BuildInputs
from advisory.tables.cache import cached_table
from advisory.tables.grid import (
    DEFAULT_MACH_EXCESS,
    WIND_HEADINGS_DEG,
    TableGrid,
    load_grid,
)
from advisory.tables.table import BoomTable

CIRCLE_VERTICES = 72  #: vertices of a circle zone's polygon (5 deg apart)
GRID_N_ETA = 15  #: azimuth nodes of the grid around the flight (as the demo grids)


@dataclass(frozen=True)
class World:
    """Everything the closed loop needs besides the scenario (see the module notes)."""

    true_atmosphere: Atmosphere
    advisor_atmosphere: Atmosphere
    aircraft: Aircraft
    zones: ZoneSet
    zones_geojson: dict[str, Any]
    truth_zones: tuple[TruthZone, ...]
    origin_deg: tuple[float, float]
    table: BoomTable
    #: Processes that build a table for zones on higher ground (None: all cores).
    build_workers: int | None = None


def atmosphere_of(spec: AirSpec, name: str) -> Atmosphere:
    """The atmosphere a spec describes (standard with an offset, a file, or levels)."""
    if spec.profile is not None:
        return load_profile(spec.profile, spec.isa_offset_c)
    if spec.levels:
        levels = []
        for alt_ft, temp_c, wind_from, wind_kt in spec.levels:
            e, n = units.wind_from_to_components(wind_from, units.kt_to_mps(wind_kt))
            levels.append(ProfileLevel(units.ft_to_m(alt_ft), units.c_to_k(temp_c), e, n))
        return atmosphere_from_levels(levels, source=f"{name} levels")
    return standard_atmosphere(spec.isa_offset_c)


def zone_feature(z: ZoneSpec) -> dict[str, Any]:
    """A GeoJSON polygon feature of an inline zone (a circle as a geodesic polygon of
    :data:`CIRCLE_VERTICES` vertices, WGS 84)."""
    if z.circle is not None:
        lat, lon, r_km = z.circle
        ring = []
        for i in range(CIRCLE_VERTICES):
            p = direct_deg(lat, lon, -360.0 * i / CIRCLE_VERTICES, r_km * 1e3)
            ring.append([float(p.lon_deg), float(p.lat_deg)])
    else:
        assert z.polygon is not None
        ring = [[lon, lat] for lat, lon in z.polygon]
    if ring[0] != ring[-1]:
        ring.append(list(ring[0]))
    props = {"id": z.zone_id, "name": z.name, "limit_psf": z.limit_psf,
             "margin_km": z.margin_km, "ground_elevation_ft": z.ground_elevation_ft}
    return {"type": "Feature", "properties": props,
            "geometry": {"type": "Polygon", "coordinates": [ring]}}


def truth_zones_of(zones: ZoneSet, frame: LocalFrame) -> tuple[TruthZone, ...]:
    """The advisor's zones as the truth's (same rings, in ``frame``)."""
    out = []
    for z in zones:
        rings = []
        for part in z.polygons:
            for ring in part:
                e, n = frame.to_enu(ring[:, 1], ring[:, 0])
                rings.append(np.column_stack([e, n]))
        out.append(TruthZone(z.id, tuple(rings), z.limit_pa / units.PSF, z.margin_m,
                             z.ground_elevation_m or 0.0))
    return tuple(out)


def dry_run(sc: Scenario, atmosphere: Atmosphere, dt_s: float = 0.5) -> np.ndarray:
    """(altitude m, Mach, fpa deg) at every ``dt_s`` of the schedule flown without a crew."""
    st = sc.start
    state = FlightState(atmosphere, st.lat_deg, st.lon_deg, st.alt_ft, st.mach,
                        st.heading_deg, st.fpa_deg, st.bank_deg)
    pilot = Pilot(sc.schedule)
    rows = []
    for i in range(int(math.ceil(sc.duration_s / dt_s)) + 1):
        pilot.update(state, dt_s)
        rows.append((state.alt_m, state.mach, state.fpa_deg))
        state.step(dt_s, i * dt_s)
    return np.asarray(rows)


def grid_around_flight(sc: Scenario, true_atm: Atmosphere, with_wind: bool) -> TableGrid:
    """The small table grid around the flight (module notes)."""
    rows = dry_run(sc, true_atm)
    lo_ft = math.floor(units.m_to_ft(float(rows[:, 0].min())) / 1000.0) * 1000.0 - 1000.0
    hi_ft = math.ceil(units.m_to_ft(float(rows[:, 0].max())) / 1000.0) * 1000.0 + 1000.0
    alts = np.arange(max(lo_ft, 5000.0), hi_ft + 1.0, 1000.0)
    top = float(rows[:, 1].max()) - 1.0 + 0.05
    mex = [m for m in DEFAULT_MACH_EXCESS if m <= top]
    mex += [m for m in DEFAULT_MACH_EXCESS if m > top][:1]
    f_lo, f_hi = float(rows[:, 2].min()), float(rows[:, 2].max())
    if f_lo == f_hi == 0.0:
        fpa = [0.0]
    else:
        fpa = list(np.arange(math.floor(f_lo / 2.5) * 2.5, math.ceil(f_hi / 2.5) * 2.5 + 0.1,
                             2.5))
    grid = TableGrid(
        altitudes_m=tuple(units.ft_to_m(float(a)) for a in alts),
        mach_excess=tuple(mex),
        fpa_rad=tuple(math.radians(float(f)) for f in fpa),
        headings_rad=tuple(math.radians(h) for h in WIND_HEADINGS_DEG) if with_wind else (0.0,),
        n_eta=GRID_N_ETA,
    )
    grid.validate()
    return grid


def grid_from_dict(doc: dict[str, Any], with_wind: bool) -> TableGrid:
    """An inline ``[advisor.grid]`` (keys of a grid file) as a grid."""
    base = TableGrid((0.0, 1.0), (0.1, 0.2), (0.0,))

    def floats(key: str) -> tuple[float, ...] | None:
        v = doc.get(key)
        if v is None:
            return None
        if not isinstance(v, list) or not all(
                isinstance(x, (int, float)) and not isinstance(x, bool) for x in v):
            raise ScenarioError(f"advisor.grid.{key} = {v!r}: must be a list of numbers")
        return tuple(float(x) for x in v)

    alts, mex, fpa, hdg = (floats(k) for k in ("altitudes_ft", "mach_excess", "fpa_deg",
                                               "headings_deg"))
    if alts is None or mex is None:
        raise ScenarioError("advisor.grid: altitudes_ft and mach_excess are required")
    wind_hdg = tuple(math.radians(h) for h in WIND_HEADINGS_DEG) if with_wind else (0.0,)
    grid = TableGrid(
        altitudes_m=tuple(units.ft_to_m(a) for a in alts), mach_excess=mex,
        fpa_rad=tuple(math.radians(f) for f in fpa) if fpa else (0.0,),
        headings_rad=tuple(math.radians(h) for h in hdg) if hdg else wind_hdg,
        n_eta=int(doc.get("n_eta", GRID_N_ETA)), mach_max=float(doc.get("mach_max",
                                                                          base.mach_max)))
    try:
        grid.validate()
    except ValueError as exc:
        raise ScenarioError(f"advisor.grid: {exc}") from None
    return grid


def advisor_table(sc: Scenario, aircraft: Aircraft, true_atm: Atmosphere,
                  adv_atm: Atmosphere, quiet: bool = True,
                  build_workers: int | None = None) -> BoomTable:
    """The advisor's table (module notes); ``build_workers`` processes build it when it is
    not cached (default all cores)."""
    if sc.advisor.table is not None:
        return BoomTable.load(sc.advisor.table)
    if sc.advisor.grid_file is not None:
        grid = load_grid(sc.advisor.grid_file, with_wind=adv_atm.has_wind)
    elif sc.advisor.grid is not None:
        grid = grid_from_dict(sc.advisor.grid, adv_atm.has_wind)
    else:
        grid = grid_around_flight(sc, true_atm, adv_atm.has_wind)
    return cached_table(BuildInputs(aircraft, adv_atm, grid), quiet=quiet,
                        workers=build_workers)


def build_world(sc: Scenario, quiet: bool = True, build_workers: int | None = None) -> World:
    """The world of a scenario (module notes); the table is built once and cached (by
    ``build_workers`` processes, default all cores).

    Raises
    ------
    ValueError
        A zone, atmosphere, grid or table that cannot be used (the message names it).
    """
    true_atm = atmosphere_of(sc.atmosphere, "atmosphere")
    adv_atm = true_atm if sc.advisor.atmosphere is None else \
        atmosphere_of(sc.advisor.atmosphere, "advisor.atmosphere")
    if sc.zones_file is not None:
        zones = ZoneSet.from_file(sc.zones_file)
        geo: dict[str, Any] = {"file": sc.zones_file}
    else:
        geo = {"type": "FeatureCollection", "name": f"{sc.name} zones (scenario)",
               "features": [zone_feature(z) for z in sc.zones]}
        zones = ZoneSet.from_geojson(geo, source=f"scenario {sc.name} zones")
    origin = (sc.start.lat_deg, sc.start.lon_deg)
    frame = LocalFrame.from_deg(*origin)
    aircraft = default_aircraft()
    table = advisor_table(sc, aircraft, true_atm, adv_atm, quiet, build_workers)
    return World(true_atm, adv_atm, aircraft, zones, geo, truth_zones_of(zones, frame),
                 origin, table, build_workers)
