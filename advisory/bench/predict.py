"""The ``predict`` job: carpet, cutoff and ground boom for one steady flight condition.

Inputs arrive in aviation units from the command line; everything is converted to SI
here, computed by the physics package (direct tracing) or read from a table, and
converted back for the output.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field

import numpy as np

from advisory import SAFETY_CAUTION, units
from advisory.physics.aircraft import Aircraft, default_aircraft, load_aircraft
from advisory.physics.atmosphere import Atmosphere, load_profile, standard_atmosphere
from advisory.physics.carlson import carlson_overpressure
from advisory.physics.carpet import Carpet, best_reaching_azimuth, compute_carpet
from advisory.physics.rays import FlightCondition, RayTracer
from advisory.physics.signature import ground_signature

#: Rays in the lateral profile, edge to edge.
PROFILE_RAYS = 31


@dataclass(frozen=True)
class PredictInputs:
    """One flight condition in aviation units, as given on the command line."""

    mach: float
    altitude_ft: float
    heading_deg: float = 0.0
    fpa_deg: float = 0.0
    temp_offset_c: float = 0.0
    ground_elevation_ft: float = 0.0
    atmosphere_file: str | None = None
    aircraft_file: str | None = None
    load_factor: float = 1.0
    table_file: str | None = None


@dataclass(frozen=True)
class ProfilePoint:
    """One ray of the lateral profile (SI)."""

    offset_m: float  #: across the ground track, right positive
    overpressure_pa: float
    duration_s: float
    arrival_s: float  #: bow shock arrival after emission
    edge: bool


@dataclass(frozen=True)
class PredictResult:
    """Everything ``predict`` reports (SI inside)."""

    inputs: PredictInputs
    carpet: Carpet
    atmosphere_name: str
    aircraft_name: str
    source: str  #: "direct tracing" or "table <file>"
    centerline_overpressure_pa: float = math.nan
    centerline_duration_s: float = math.nan
    carlson_overpressure_pa: float = math.nan
    carlson_duration_s: float = math.nan
    profile: list[ProfilePoint] = field(default_factory=list)


def make_atmosphere(inputs: PredictInputs) -> Atmosphere:
    """The standard atmosphere with offset, or the user profile with offset."""
    if inputs.atmosphere_file:
        return load_profile(inputs.atmosphere_file, temp_offset_k=inputs.temp_offset_c)
    return standard_atmosphere(temp_offset_k=inputs.temp_offset_c)


def make_aircraft(inputs: PredictInputs) -> Aircraft:
    """The aircraft file, or the bundled demo aircraft."""
    return load_aircraft(inputs.aircraft_file) if inputs.aircraft_file else default_aircraft()


def flight_condition(inputs: PredictInputs) -> FlightCondition:
    """SI flight condition from the command-line inputs."""
    return FlightCondition(
        mach=inputs.mach,
        altitude_m=units.ft_to_m(inputs.altitude_ft),
        heading_rad=math.radians(inputs.heading_deg % 360.0),
        fpa_rad=math.radians(inputs.fpa_deg),
        ground_elevation_m=units.ft_to_m(inputs.ground_elevation_ft),
    )


def predict_direct(inputs: PredictInputs) -> PredictResult:
    """Trace the carpet and the ground boom for one condition."""
    atm = make_atmosphere(inputs)
    aircraft = make_aircraft(inputs)
    tracer = RayTracer(atm)
    fc = flight_condition(inputs)
    carpet = compute_carpet(tracer, fc)
    name = atm.description.get("source", "ussa1976")
    base = PredictResult(inputs, carpet, name, aircraft.name, "direct tracing")
    if not carpet.reaches_ground:
        return base
    s0 = atm.at(fc.altitude_m)
    phi_ref, _ = best_reaching_azimuth(tracer, fc)
    eta = np.linspace(-1.0, 1.0, PROFILE_RAYS)
    phis = np.where(eta >= 0.0, phi_ref + eta * (carpet.lateral_cutoff_right_rad - phi_ref),
                    phi_ref - eta * (carpet.lateral_cutoff_left_rad - phi_ref))
    profile = []
    centre = None
    for phi in phis:
        ray = tracer.trace(fc, float(phi))
        if not ray.reaches_ground:
            continue
        sig = ground_signature(aircraft, ray, fc.mach, s0.sound_speed_mps, s0.pressure_pa,
                               load_factor=inputs.load_factor, fpa_rad=fc.fpa_rad)
        profile.append(ProfilePoint(ray.cross_m, sig.overpressure_pa, sig.duration_s, sig.arrival_s,
                                    sig.edge))
        if phi == phi_ref:
            centre = sig
    if centre is None:  # pragma: no cover - the reference ray always reaches
        centre = ground_signature(aircraft, tracer.trace(fc, phi_ref), fc.mach,
                                  s0.sound_speed_mps, s0.pressure_pa,
                                  load_factor=inputs.load_factor, fpa_rad=fc.fpa_rad)
    carlson_dp, carlson_dur = carlson_overpressure(
        aircraft, fc.mach, fc.altitude_m, atm, ground_elevation_m=fc.ground_elevation_m,
        fpa_rad=fc.fpa_rad, load_factor=inputs.load_factor,
    )
    return PredictResult(
        inputs, carpet, name, aircraft.name, "direct tracing",
        centerline_overpressure_pa=centre.overpressure_pa,
        centerline_duration_s=centre.duration_s,
        carlson_overpressure_pa=carlson_dp, carlson_duration_s=carlson_dur,
        profile=profile,
    )


def predict_from_table(inputs: PredictInputs) -> PredictResult:
    """Answer from a precomputed table (its aircraft and atmosphere)."""
    from advisory.tables import lookup as lk
    from advisory.tables.table import BoomTable
    from advisory.tables.verify import drift_angle, half_widths

    table = BoomTable.load(inputs.table_file)
    atm = table.atmosphere()
    tracer = RayTracer(atm)
    fc = flight_condition(inputs)
    fc.validate(atm)
    fp = table.footprint(fc.altitude_m, fc.mach, fc.fpa_rad, fc.heading_rad)
    drift = drift_angle(tracer, fc)
    nan = math.nan
    src = f"table {inputs.table_file}"
    atm_name = atm.description.get("source", "ussa1976")
    ac_name = str(table.header.get("aircraft", {}).get("name", "?"))
    if not fp.reaches_ground:
        carpet = Carpet(False, fp.cutoff_mach, nan, nan, 0.0, 0.0, nan, nan, nan)
        return PredictResult(inputs, carpet, atm_name, ac_name, src)
    rows = fp.rows
    left, right = half_widths(rows, drift)
    s, c = math.sin(drift), math.cos(drift)
    mid = rows[rows.shape[0] // 2]
    carpet = Carpet(
        True, fp.cutoff_mach, float(rows[0, lk.Q_PHI]), float(rows[-1, lk.Q_PHI]), left, right,
        float(mid[lk.Q_FWD] * c + mid[lk.Q_RIGHT] * s),
        float(-mid[lk.Q_FWD] * s + mid[lk.Q_RIGHT] * c), float(mid[lk.Q_TIME]),
    )
    profile = [
        ProfilePoint(float(-r[lk.Q_FWD] * s + r[lk.Q_RIGHT] * c), float(r[lk.Q_DP]),
                     float(r[lk.Q_DURATION]), float(r[lk.Q_TIME]), bool(r[lk.Q_EDGE] > 0.5))
        for r in rows
    ]
    return PredictResult(inputs, carpet, atm_name, ac_name, src,
                         centerline_overpressure_pa=float(mid[lk.Q_DP]),
                         centerline_duration_s=float(mid[lk.Q_DURATION]), profile=profile)


def predict(inputs: PredictInputs) -> PredictResult:
    """From the table when one is given, otherwise by direct tracing."""
    return predict_from_table(inputs) if inputs.table_file else predict_direct(inputs)


def _num(x: float, nd: int = 4) -> float | None:
    """JSON-safe rounding: NaN and inf become null."""
    return round(float(x), nd) if math.isfinite(x) else None


def result_fields(res: PredictResult) -> dict:
    """The JSON object of a prediction (aviation units at the edge, named with units)."""
    c = res.carpet
    km = 1e-3
    return {
        "caution": SAFETY_CAUTION,
        "source": res.source,
        "aircraft": res.aircraft_name,
        "mach": res.inputs.mach,
        "altitude_ft": res.inputs.altitude_ft,
        "heading_deg": res.inputs.heading_deg,
        "fpa_deg": res.inputs.fpa_deg,
        "load_factor": res.inputs.load_factor,
        "ground_elevation_ft": res.inputs.ground_elevation_ft,
        "atmosphere": res.atmosphere_name,
        "temp_offset_c": res.inputs.temp_offset_c,
        "cutoff_mach": _num(c.cutoff_mach),
        "reaches_ground": c.reaches_ground,
        "lateral_cutoff_deg": [
            _num(math.degrees(c.lateral_cutoff_left_rad), 3),
            _num(math.degrees(c.lateral_cutoff_right_rad), 3),
        ],
        "carpet_half_width_left_km": _num(c.half_width_left_m * km, 3),
        "carpet_half_width_right_km": _num(c.half_width_right_m * km, 3),
        "carpet_width_km": _num(c.width_m * km, 3),
        "centerline_ground_offset_km": _num(c.centerline_along_m * km, 3),
        "centerline_travel_time_s": _num(c.centerline_travel_time_s, 3),
        "centerline_overpressure_psf": _num(units.pa_to_psf(res.centerline_overpressure_pa), 3),
        "signature_duration_ms": _num(1e3 * res.centerline_duration_s, 2),
        "carlson_overpressure_psf": _num(units.pa_to_psf(res.carlson_overpressure_pa), 3),
        "carlson_duration_ms": _num(1e3 * res.carlson_duration_s, 2),
        "lateral_profile": [
            {
                "offset_km": _num(p.offset_m * km, 3),
                "overpressure_psf": _num(units.pa_to_psf(p.overpressure_pa), 3),
                "duration_ms": _num(1e3 * p.duration_s, 2),
                "arrival_s": _num(p.arrival_s, 3),
                "edge": p.edge,
            }
            for p in res.profile
        ],
    }


def to_json(res: PredictResult) -> str:
    """One JSON object (see :func:`result_fields`)."""
    return json.dumps(result_fields(res), indent=2)


def summary_text(res: PredictResult) -> str:
    """A readable multi-line summary for a person."""
    f = result_fields(res)
    lines = [
        f"Flight condition: Mach {f['mach']:.3f} at {f['altitude_ft']:,.0f} ft, "
        f"heading {f['heading_deg']:.0f} deg, flight-path angle {f['fpa_deg']:+.1f} deg, "
        f"load factor {f['load_factor']:.2f}, ground {f['ground_elevation_ft']:,.0f} ft",
        f"Aircraft: {f['aircraft']}; atmosphere: {f['atmosphere']} "
        f"(offset {f['temp_offset_c']:+.1f} degC); from {f['source']}",
        "Cutoff Mach: " + (f"{f['cutoff_mach']:.3f}" if f["cutoff_mach"] else "none up to 5.0"),
    ]
    if f["reaches_ground"]:
        left, right = f["lateral_cutoff_deg"]
        lines += [
            "Boom reaches the ground: YES",
            f"Carpet width: {f['carpet_width_km']:.1f} km "
            f"(left {f['carpet_half_width_left_km']:.1f} km, "
            f"right {f['carpet_half_width_right_km']:.1f} km)",
            f"Lateral cutoff: {abs(left):.1f} deg left, {right:.1f} deg right",
            f"Centerline boom lands {f['centerline_ground_offset_km']:.1f} km ahead of the "
            f"emission point, {f['centerline_travel_time_s']:.1f} s after emission",
        ]
        if f["centerline_overpressure_psf"] is not None:
            lines.append(
                f"Centerline overpressure: {f['centerline_overpressure_psf']:.2f} psf, "
                f"N-wave duration {f['signature_duration_ms']:.0f} ms"
            )
        if f["carlson_overpressure_psf"] is not None:
            lines.append(f"Cross-check (Carlson's simplified method): "
                         f"{f['carlson_overpressure_psf']:.2f} psf")
        if f["lateral_profile"]:
            lines.append("Lateral profile (offset km: psf):")
            pts = f["lateral_profile"][:: max(1, len(f["lateral_profile"]) // 10)]
            lines.append("  " + "  ".join(
                f"{p['offset_km']:+.0f}: {p['overpressure_psf']:.2f}{'*' if p['edge'] else ''}"
                for p in pts))
            lines.append("  (* carpet edge: value at the grazing ray, flagged)")
    else:
        lines.append("Boom reaches the ground: NO (below cutoff Mach or subsonic)")
    lines.append(SAFETY_CAUTION)
    return "\n".join(lines)
