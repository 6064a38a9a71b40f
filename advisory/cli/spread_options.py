"""The spread options of ``check`` and ``predict`` and the interval fields they print
(issue 16; :mod:`advisory.pipeline.confidence`)."""

from __future__ import annotations

import argparse
import math
from typing import Any

import numpy as np

from advisory import units
from advisory.cli.options import UsageError, finite
from advisory.physics.spread import SpreadError, SpreadModel, default_spread, load_ensemble
from advisory.pipeline.confidence import (
    DEFAULT_CONFIDENCE,
    DEFAULT_SAMPLES,
    boom_probability,
    cutoff_interval,
    sample_carpet,
)
from advisory.tables.spread_table import cutoff_sensitivity, to_east_north

__all__ = ["add_spread_options", "spread_model", "cutoff_sigma_direct", "spread_fields",
           "spread_lines"]


def add_spread_options(p: argparse.ArgumentParser) -> None:
    """Register the confidence and spread options."""
    g = p.add_argument_group("confidence on the carpet (the air below is never known "
                             "exactly)")
    g.add_argument("--confidence", type=float, default=None,
                   help="confidence of the intervals (and, for check, of the advisor), "
                        "0.5-0.999 (0.95; check: the config's when not given)")
    g.add_argument("--surface-temp-sigma-c", type=float, default=None,
                   help="spread: surface temperature error, degC (default 2.0)")
    g.add_argument("--wind-sigma-kt", type=float, default=None,
                   help="spread: wind error per component at every height, kt (default: "
                        "4-8 kt by height)")
    g.add_argument("--ensemble", metavar="FILE",
                   help="spread from an ensemble of member profiles (CSV: a member column "
                        "and the profile columns) instead of the default spread")
    g.add_argument("--spread-samples", type=int, default=DEFAULT_SAMPLES,
                   help=f"sampled atmospheres for the half-width, time and overpressure "
                        f"intervals ({DEFAULT_SAMPLES}, about 2.5 ms each; 0: none)")


def spread_model(args: argparse.Namespace, ground_m: float) -> SpreadModel:
    """The spread the options ask for; :class:`UsageError` names a bad option."""
    if args.confidence is not None:
        conf = finite("--confidence", args.confidence)
        if not 0.5 <= conf <= 0.999:
            raise UsageError(f"--confidence: {args.confidence} must be from 0.5 to 0.999")
    if not (isinstance(args.spread_samples, int) and (args.spread_samples == 0
                                                      or 20 <= args.spread_samples <= 100_000)):
        raise UsageError(f"--spread-samples: {args.spread_samples} must be 0 or from 20 to "
                         "100000")
    if args.ensemble:
        for flag, v in (("--surface-temp-sigma-c", args.surface_temp_sigma_c),
                        ("--wind-sigma-kt", args.wind_sigma_kt)):
            if v is not None:
                raise UsageError(f"{flag}: cannot be combined with --ensemble (the members "
                                 "give the spread)")
        try:
            return load_ensemble(args.ensemble)
        except SpreadError as exc:
            raise UsageError(str(exc)) from None
    sfc = None if args.surface_temp_sigma_c is None else finite(
        "--surface-temp-sigma-c", args.surface_temp_sigma_c)
    wind = None if args.wind_sigma_kt is None else finite("--wind-sigma-kt", args.wind_sigma_kt)
    if sfc is not None and not 0.0 <= sfc <= 20.0:
        raise UsageError(f"--surface-temp-sigma-c: {args.surface_temp_sigma_c} must be from 0 "
                         "to 20")
    if wind is not None and not 0.0 <= wind <= 100.0:
        raise UsageError(f"--wind-sigma-kt: {args.wind_sigma_kt} must be from 0 to 100")
    return default_spread(sfc, None if wind is None else wind * units.KT, ground_m)


def cutoff_sigma_direct(atm, model: SpreadModel, altitude_m: float, heading_rad: float,
                        fpa_rad: float, ground_m: float) -> float:
    """Standard deviation of the cutoff Mach at one condition from derivatives computed
    for it (what a table's sensitivity columns hold, without the table)."""
    je = to_east_north(cutoff_sensitivity(atm, altitude_m, heading_rad, fpa_rad, ground_m),
                       math.sin(heading_rad), math.cos(heading_rad))
    if not np.all(np.isfinite(je)):
        return math.nan
    return math.sqrt(max(float(je @ model.covariance(altitude_m) @ je), 0.0))


def _r(x: float, nd: int) -> float | None:
    return round(float(x), nd) if math.isfinite(x) else None


def spread_fields(args: argparse.Namespace, model: SpreadModel, atm, aircraft,
                  reflection: float, altitude_m: float, mach: float, heading_rad: float,
                  fpa_rad: float, ground_m: float, cutoff: float, sigma: float
                  ) -> dict[str, Any]:
    """The interval fields of ``check --json`` / ``predict --json`` (aviation units)."""
    conf = DEFAULT_CONFIDENCE if args.confidence is None else float(args.confidence)
    lo, hi = cutoff_interval(cutoff, sigma, conf) if math.isfinite(sigma) else (math.nan,
                                                                                 math.nan)
    out: dict[str, Any] = {
        "confidence": conf,
        "spread": model.source,
        "cutoff_mach_sigma": _r(sigma, 5),
        "cutoff_mach_interval": [_r(lo, 4), _r(hi, 4)],
        "boom_probability": _r(boom_probability(mach, cutoff, sigma), 4)
        if math.isfinite(sigma) and math.isfinite(cutoff) else None,
        "boom_probability_of": "the boom reaching the ground at this condition",
    }
    if args.spread_samples > 0 and mach > 1.0:
        sp = sample_carpet(atm, aircraft, altitude_m, mach, heading_rad, fpa_rad, ground_m,
                           reflection, model, conf, args.spread_samples)
        km = 1e-3
        out.update({
            "spread_samples": sp.samples,
            "carpet_half_width_interval_km": {
                "left": [_r(sp.half_width_left_m[0] * km, 3),
                         _r(sp.half_width_left_m[1] * km, 3)],
                "right": [_r(sp.half_width_right_m[0] * km, 3),
                          _r(sp.half_width_right_m[1] * km, 3)]},
            "centerline_travel_time_interval_s": [_r(v, 2) for v in sp.travel_time_s],
            "centerline_overpressure_interval_psf": [_r(units.pa_to_psf(v), 3)
                                                     for v in sp.overpressure_pa],
            "sampled_reach_fraction": _r(sp.reach_fraction, 4),
        })
    return out


def spread_lines(f: dict[str, Any]) -> list[str]:
    """Readable lines of :func:`spread_fields`."""
    pct = f"{100.0 * f['confidence']:.0f} %"
    lines = [f"Confidence {pct} ({f['spread']}):"]
    lo, hi = f["cutoff_mach_interval"]
    if lo is not None:
        lines.append(f"  cutoff Mach {lo:.3f} to {hi:.3f}; boom reaches the ground with "
                     f"probability {f['boom_probability']:.2f}")
    hw = f.get("carpet_half_width_interval_km")
    if hw:
        lines.append(f"  half-width left {hw['left'][0]:.1f} to {hw['left'][1]:.1f} km, "
                     f"right {hw['right'][0]:.1f} to {hw['right'][1]:.1f} km "
                     f"({f['spread_samples']} sampled atmospheres)")
    return lines
