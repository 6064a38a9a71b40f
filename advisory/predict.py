"""The ``predict`` job: carpet and cutoff for one steady flight condition.

Inputs arrive in aviation units from the command line; everything is converted to SI
here, computed by the physics package, and converted back for the output.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass

from advisory import SAFETY_CAUTION, units
from advisory.physics.atmosphere import Atmosphere, load_profile, standard_atmosphere
from advisory.physics.carpet import Carpet, compute_carpet
from advisory.physics.rays import FlightCondition, RayTracer


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


@dataclass(frozen=True)
class PredictResult:
    """Everything ``predict`` reports (SI inside)."""

    inputs: PredictInputs
    carpet: Carpet
    atmosphere: Atmosphere


def make_atmosphere(inputs: PredictInputs) -> Atmosphere:
    """The standard atmosphere with offset, or the user profile with offset."""
    if inputs.atmosphere_file:
        return load_profile(inputs.atmosphere_file, temp_offset_k=inputs.temp_offset_c)
    return standard_atmosphere(temp_offset_k=inputs.temp_offset_c)


def flight_condition(inputs: PredictInputs) -> FlightCondition:
    """SI flight condition from the command-line inputs."""
    return FlightCondition(
        mach=inputs.mach,
        altitude_m=units.ft_to_m(inputs.altitude_ft),
        heading_rad=math.radians(inputs.heading_deg % 360.0),
        fpa_rad=math.radians(inputs.fpa_deg),
        ground_elevation_m=units.ft_to_m(inputs.ground_elevation_ft),
    )


def predict(inputs: PredictInputs) -> PredictResult:
    """Trace the carpet for one condition (direct tracing)."""
    atm = make_atmosphere(inputs)
    tracer = RayTracer(atm)
    carpet = compute_carpet(tracer, flight_condition(inputs))
    return PredictResult(inputs=inputs, carpet=carpet, atmosphere=atm)


def _num(x: float, nd: int = 4) -> float | None:
    """JSON-safe rounding: NaN and inf become null."""
    return round(x, nd) if math.isfinite(x) else None


def result_fields(res: PredictResult) -> dict:
    """The JSON object of a prediction (aviation units at the edge, named with units)."""
    c = res.carpet
    km = 1e-3
    return {
        "caution": SAFETY_CAUTION,
        "mach": res.inputs.mach,
        "altitude_ft": res.inputs.altitude_ft,
        "heading_deg": res.inputs.heading_deg,
        "fpa_deg": res.inputs.fpa_deg,
        "ground_elevation_ft": res.inputs.ground_elevation_ft,
        "atmosphere": res.atmosphere.description.get("source", "ussa1976"),
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
        f"ground {f['ground_elevation_ft']:,.0f} ft",
        f"Atmosphere: {f['atmosphere']} (offset {f['temp_offset_c']:+.1f} degC)",
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
    else:
        lines.append("Boom reaches the ground: NO (below cutoff Mach or subsonic)")
    lines.append(SAFETY_CAUTION)
    return "\n".join(lines)
