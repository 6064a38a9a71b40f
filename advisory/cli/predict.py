"""``boom-advisory predict``: carpet, cutoff Mach and ground overpressure for one steady
flight condition, as readable text or one JSON object (aviation units, named with their
unit). The computation is :mod:`advisory.bench.steady_carpet`.
"""

from __future__ import annotations

import argparse
import json
import math
from typing import Any

from advisory import units
from advisory.bench.steady_carpet import (
    PredictInputs,
    PredictResult,
    flight_condition,
    make_aircraft,
    make_atmosphere,
    predict,
)
from advisory.cli.options import (
    UsageError,
    add_aircraft_option,
    add_json_option,
    add_table_option,
    finite,
)
from advisory.cli.spread_options import (
    add_spread_options,
    cutoff_sigma_direct,
    spread_fields,
    spread_lines,
    spread_model,
)
from advisory.physics.aircraft import aircraft_from_dict
from advisory.physics.signature import DEFAULT_REFLECTION_FACTOR
from advisory.schema import SAFETY_CAUTION
from advisory.tables.table import BoomTable


def add_parser(sub: argparse._SubParsersAction) -> None:
    """Register ``boom-advisory predict``."""
    p = sub.add_parser(
        "predict",
        help="carpet, cutoff Mach and ground overpressure for one flight condition",
        description="Predict the boom carpet for one steady flight condition. "
                    + SAFETY_CAUTION,
    )
    p.add_argument("--mach", type=float, required=True, help="Mach number")
    p.add_argument("--altitude-ft", type=float, required=True,
                   help="geometric altitude above mean sea level, ft")
    p.add_argument("--heading-deg", type=float, default=0.0, help="true heading, deg (0)")
    p.add_argument("--fpa-deg", type=float, default=0.0, help="flight-path angle, deg (0)")
    p.add_argument("--temp-offset-c", type=float, default=0.0,
                   help="temperature offset from the standard atmosphere, degC (0)")
    p.add_argument("--atmosphere", metavar="FILE",
                   help="atmosphere profile (CSV or TOML) instead of the standard atmosphere")
    p.add_argument("--ground-elevation-ft", type=float, default=0.0,
                   help="ground elevation above mean sea level, ft (0)")
    add_aircraft_option(p)
    p.add_argument("--load-factor", type=float, default=None,
                   help="lift over weight (default 1, or 1 / cos(bank) with --bank-deg: a "
                        "level coordinated turn)")
    p.add_argument("--bank-deg", type=float, default=0.0,
                   help="bank, deg, positive right wing down (0): tilts the lift, more "
                        "boom below the outside of the turn (the turn's ray-tube focus "
                        "is not in this one-condition answer; the advisor has it)")
    add_table_option(p, "answer from a precomputed table instead of direct tracing")
    add_json_option(p)
    add_spread_options(p)
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    """``predict``: print the prediction; exit 0 (bad input raises :class:`UsageError`)."""

    inputs = inputs_from_args(args)
    model = spread_model(args, units.ft_to_m(inputs.ground_elevation_ft))
    result = predict(inputs)
    extra = confidence_fields(args, model, inputs, result)
    if args.json:
        fields = result_fields(result)
        fields.update(extra)
        print(json.dumps(fields, indent=2))
    else:
        text = summary_text(result).split("\n")
        print("\n".join(text[:-1] + spread_lines(extra) + text[-1:]))
    return 0


def confidence_fields(args: argparse.Namespace, model, inputs: PredictInputs,
                      res: PredictResult) -> dict[str, Any]:
    """The intervals at the predicted condition (:mod:`advisory.cli.spread_options`): the
    cutoff's sigma from the table's sensitivity columns when it has them, else from
    derivatives computed for the condition; the rest sampled."""
    fc = flight_condition(inputs)
    if inputs.table_file:
        table = BoomTable.load(inputs.table_file)
        atm = table.atmosphere()
        aircraft = aircraft_from_dict(table.header["aircraft"], "table header")
        reflection = float(table.header["reflection_factor"])
        st = table.spread
        sigma = (st.cutoff_sigma(model.covariance(fc.altitude_m), fc.altitude_m, fc.fpa_rad,
                                 fc.heading_rad) if st is not None else
                 cutoff_sigma_direct(atm, model, fc.altitude_m, fc.heading_rad, fc.fpa_rad,
                                     fc.ground_elevation_m))
    else:
        atm, aircraft = make_atmosphere(inputs), make_aircraft(inputs)
        reflection = DEFAULT_REFLECTION_FACTOR
        sigma = cutoff_sigma_direct(atm, model, fc.altitude_m, fc.heading_rad, fc.fpa_rad,
                                    fc.ground_elevation_m)
    return spread_fields(args, model, atm, aircraft, reflection, fc.altitude_m, fc.mach,
                         fc.heading_rad, fc.fpa_rad, fc.ground_elevation_m,
                         res.carpet.cutoff_mach, sigma)


def inputs_from_args(args: argparse.Namespace) -> PredictInputs:
    """The checked flight condition; :class:`UsageError` names the first bad argument."""

    inputs = PredictInputs(
        mach=finite("--mach", args.mach),
        altitude_ft=finite("--altitude-ft", args.altitude_ft),
        heading_deg=finite("--heading-deg", args.heading_deg),
        fpa_deg=finite("--fpa-deg", args.fpa_deg),
        temp_offset_c=finite("--temp-offset-c", args.temp_offset_c),
        ground_elevation_ft=finite("--ground-elevation-ft", args.ground_elevation_ft),
        atmosphere_file=args.atmosphere,
        aircraft_file=args.aircraft,
        load_factor=_load_factor(args),
        bank_deg=finite("--bank-deg", args.bank_deg),
        table_file=args.table,
    )
    if args.table:
        for flag, given in (("--aircraft", args.aircraft), ("--atmosphere", args.atmosphere),
                            ("--temp-offset-c", args.temp_offset_c != 0.0)):
            if given:
                raise UsageError(f"{flag}: cannot be combined with --table (the table fixes "
                                 "aircraft and atmosphere); omit --table to trace directly")
    if not (0.0 < inputs.load_factor <= 9.0):
        raise UsageError(f"--load-factor: {args.load_factor} must be in (0, 9]")
    if inputs.mach <= 0.0:
        raise UsageError(f"--mach: {args.mach} must be greater than 0")
    if inputs.altitude_ft <= inputs.ground_elevation_ft:
        raise UsageError(
            f"--altitude-ft: {args.altitude_ft} must be above the ground elevation "
            f"({args.ground_elevation_ft} ft)"
        )
    return inputs


def _load_factor(args: argparse.Namespace) -> float:
    """``--load-factor``, or a level coordinated turn's ``1 / cos(bank)`` when not given."""
    bank = finite("--bank-deg", args.bank_deg)
    if not abs(bank) <= 80.0:
        raise UsageError(f"--bank-deg: {args.bank_deg} must be within [-80, 80]")
    if args.load_factor is not None:
        return finite("--load-factor", args.load_factor)
    return 1.0 / math.cos(math.radians(bank))


def _num(x: float, nd: int = 4) -> float | None:
    """JSON-safe rounding: NaN and inf become null."""
    return round(float(x), nd) if math.isfinite(x) else None


def result_fields(res: PredictResult) -> dict[str, Any]:
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
        "bank_deg": res.inputs.bank_deg,
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
        f"load factor {f['load_factor']:.2f}, bank {f['bank_deg']:+.0f} deg, "
        f"ground {f['ground_elevation_ft']:,.0f} ft",
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
