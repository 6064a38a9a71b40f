"""Carpet, cutoff Mach and ground boom for one steady flight condition.

The computation behind ``boom-advisory predict`` (the command line and its text/JSON
output live in :mod:`advisory.cli.predict`). Inputs arrive in aviation units (the names
say which); everything is converted to SI here and either traced directly by the physics
package (rays: geometric acoustics, :mod:`advisory.physics.rays`; signature: Whitham's
F-function, :mod:`advisory.physics.signature`; cross-check: Carlson's simplified method,
:mod:`advisory.physics.carlson`) or read from a precomputed table
(:mod:`advisory.tables`). The results stay in SI.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from advisory import units
from advisory.physics.aircraft import Aircraft, default_aircraft, load_aircraft
from advisory.physics.atmosphere import Atmosphere, standard_atmosphere
from advisory.physics.carlson import carlson_overpressure
from advisory.physics.carpet import Carpet, best_reaching_azimuth, compute_carpet
from advisory.physics.profile_file import load_profile
from advisory.physics.rays import FlightCondition, RayTracer
from advisory.physics.signature import ground_signature
from advisory.tables import lookup as lk
from advisory.tables.table import BoomTable
from advisory.tables.verify import drift_angle, half_widths

#: Rays in the lateral profile, edge to edge.
PROFILE_RAYS = 31


@dataclass(frozen=True)
class PredictInputs:
    """One steady flight condition in aviation units, as given on the command line.

    Attributes
    ----------
    mach : float
        Flight Mach number.
    altitude_ft : float
        Geometric altitude above mean sea level, ft.
    heading_deg : float
        True heading, clockwise from true north, deg.
    fpa_deg : float
        Flight-path angle, deg, positive climbing.
    temp_offset_c : float
        Temperature offset added to the atmosphere, degC (equal to K).
    ground_elevation_ft : float
        Ground elevation above mean sea level, ft.
    atmosphere_file : str or None
        Atmosphere profile (CSV or TOML); None: U.S. Standard Atmosphere 1976.
    aircraft_file : str or None
        Aircraft description (TOML); None: the bundled demo aircraft.
    load_factor : float
        Lift over weight (1 in steady level flight).
    table_file : str or None
        Precomputed boom table to answer from instead of direct tracing.
    """

    mach: float
    altitude_ft: float
    heading_deg: float = 0.0
    fpa_deg: float = 0.0
    temp_offset_c: float = 0.0
    ground_elevation_ft: float = 0.0
    atmosphere_file: str | None = None
    aircraft_file: str | None = None
    load_factor: float = 1.0
    bank_deg: float = 0.0
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
    """Trace the carpet and the ground boom for one condition (no table).

    Rays by geometric acoustics in a stratified moving atmosphere
    (:mod:`advisory.physics.rays`), the ground N-wave from Whitham's F-function with
    steepening along each ray (:mod:`advisory.physics.signature`), and Carlson's
    simplified method as the cross-check (:mod:`advisory.physics.carlson`); each module
    names its published source.

    Parameters
    ----------
    inputs : PredictInputs
        The condition in aviation units.

    Returns
    -------
    PredictResult
        Carpet, centerline overpressure (Pa) and duration (s), the Carlson cross-check,
        and a lateral profile of ``PROFILE_RAYS`` rays; SI throughout.

    Raises
    ------
    ValueError
        A file cannot be read or the condition is outside the atmosphere.
    """
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
                               load_factor=inputs.load_factor, fpa_rad=fc.fpa_rad,
                               bank_rad=math.radians(inputs.bank_deg))
        profile.append(ProfilePoint(ray.cross_m, sig.overpressure_pa, sig.duration_s, sig.arrival_s,
                                    sig.edge))
        if phi == phi_ref:
            centre = sig
    if centre is None:  # pragma: no cover - the reference ray always reaches
        centre = ground_signature(aircraft, tracer.trace(fc, phi_ref), fc.mach,
                                  s0.sound_speed_mps, s0.pressure_pa,
                                  load_factor=inputs.load_factor, fpa_rad=fc.fpa_rad,
                                  bank_rad=math.radians(inputs.bank_deg))
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
    """Answer from a precomputed table (its aircraft and atmosphere).

    Raises
    ------
    ValueError
        ``inputs.table_file`` is not set, the table cannot be read, or the condition
        lies outside it (the message names the value).
    """
    if inputs.table_file is None:
        raise ValueError("table_file: None; predict_from_table needs a table file")
    table = BoomTable.load(inputs.table_file)
    atm = table.atmosphere()
    tracer = RayTracer(atm)
    fc = flight_condition(inputs)
    fc.validate(atm)
    fp = table.footprint(fc.altitude_m, fc.mach, fc.fpa_rad, fc.heading_rad)
    steady = inputs.load_factor == 1.0 and inputs.bank_deg == 0.0
    if not steady and not table.has_lift_map:
        raise ValueError(f"--load-factor/--bank-deg: table {inputs.table_file} has no lift "
                         "map (built by an earlier version): rebuild it, or omit --table "
                         "to trace directly")
    if fp.reaches_ground and not steady:
        table.apply_lift(fp.rows, fc.altitude_m, fc.mach, fc.fpa_rad, fc.heading_rad,
                         inputs.load_factor * math.cos(fc.fpa_rad),
                         math.radians(inputs.bank_deg))
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
