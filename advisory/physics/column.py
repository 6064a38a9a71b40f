"""One table column's physics through the compiled kernels: the builder's entry point.

:func:`trace_column` validates a column's flight condition, gathers the atmosphere's
integration levels and the aircraft's F-function parts, and runs
:func:`advisory.physics.fastpath.column_kernel` over them. It returns ``None`` for a
column the readable path (:mod:`advisory.physics.carpet`) would refuse, so the builder
falls back to that path, which raises the error naming the field. The scheme and its
references are those of :mod:`advisory.physics.fastpath`.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from advisory.physics import carpet as _carpet
from advisory.physics.aircraft import Aircraft
from advisory.physics.fastpath import N_RAY_RESULTS, PHI_SCAN, STATUS_OK, column_kernel
from advisory.physics.ffunction import f_function_parts
from advisory.physics.rays import FlightCondition, FlightConditionError, RayTracer
from advisory.physics.signature import (
    PRESSURE_RANGE_PA,
    REFLECTION_FACTOR_RANGE,
    SOUND_SPEED_RANGE_MPS,
)


class ColumnRays(NamedTuple):
    """Result of :func:`trace_column` (SI).

    Attributes
    ----------
    cutoff_mach : float
        Cutoff Mach of the column.
    phi_left, phi_right : ndarray, shape (n_mach_excess,)
        Lateral cutoff azimuths, rad (left negative).
    phi_ref : ndarray, shape (n_mach_excess,)
        Reference azimuth (eta = 0), rad.
    mach : ndarray, shape (n_mach_excess,)
        Mach number traced for each Mach excess.
    rays : ndarray, shape (n_mach_excess, n_eta, N_RAY_RESULTS)
        Per-ray results, indexed by the ``R_*`` constants.
    """

    cutoff_mach: float
    phi_left: np.ndarray
    phi_right: np.ndarray
    phi_ref: np.ndarray
    mach: np.ndarray
    rays: np.ndarray


def trace_column(tracer: RayTracer, aircraft: Aircraft, altitude_m: float, heading_rad: float,
                 fpa_rad: float, ground_elevation_m: float, mach_excess: np.ndarray,
                 eta: np.ndarray, reflection_factor: float) -> ColumnRays | None:
    """Physics of one table column through the compiled kernels.

    Parameters
    ----------
    tracer : RayTracer
        Ray tracer of the atmosphere (its integration levels are reused).
    aircraft : Aircraft
        The aircraft (its F-function parts are computed once and cached).
    altitude_m, heading_rad, fpa_rad, ground_elevation_m : float
        The column's flight condition (m, rad, rad, m).
    mach_excess : ndarray
        Mach numbers above cutoff to tabulate (> 0).
    eta : ndarray
        Normalised azimuth nodes, -1 .. 1.
    reflection_factor : float
        Ground reflection factor.

    Returns
    -------
    ColumnRays or None
        ``None`` when the column is one the readable path refuses (flight condition
        out of range, no cutoff Mach up to Mach 5, a Mach above 5, aircraft state out of
        the signature's range): the caller then runs the readable path, which raises
        the error that names the field.
    """
    atm = tracer.atmosphere
    try:
        FlightCondition(1.5, altitude_m, heading_rad, fpa_rad, ground_elevation_m).validate(atm)
    except FlightConditionError:
        return None
    s0 = atm.at(altitude_m)
    c0, w0x, w0y, p0 = s0.sound_speed_mps, s0.wind_east_mps, s0.wind_north_mps, s0.pressure_pa
    lo_c, hi_c = SOUND_SPEED_RANGE_MPS
    lo_p, hi_p = PRESSURE_RANGE_PA
    lo_r, hi_r = REFLECTION_FACTOR_RANGE
    if not (lo_c <= c0 <= hi_c and lo_p <= p0 <= hi_p and lo_r <= reflection_factor <= hi_r):
        return None
    lz, lc, lwx, lwy = tracer.levels(altitude_m, ground_elevation_m)
    lz, lc, lwx, lwy = (np.ascontiguousarray(a) for a in (lz, lc, lwx, lwy))
    z, _, _, _, rho_nodes, _ = atm.arrays()
    rho = np.exp(np.interp(lz, z, np.log(rho_nodes)))
    parts = f_function_parts(aircraft)
    mex = np.ascontiguousarray(mach_excess, dtype=np.float64)
    eta = np.ascontiguousarray(eta, dtype=np.float64)
    nm = mex.size
    phi_l = np.zeros(nm)
    phi_r = np.zeros(nm)
    phi_ref = np.zeros(nm)
    mach = np.zeros(nm)
    rays = np.zeros((nm, eta.size, N_RAY_RESULTS))
    m_cut, status = column_kernel(
        float(heading_rad), float(fpa_rad), c0, w0x, w0y, p0, lz, lc, lwx, lwy, rho, mex, eta,
        PHI_SCAN, _carpet.MACH_TOL, _carpet.MACH_SEARCH_MAX, _carpet.PHI_LIMIT_RAD,
        _carpet.PHI_TOL_RAD, parts.y_m, parts.f_volume, parts.area_volume, parts.f_lift_unit,
        parts.area_lift_unit, aircraft.lift_n(1.0, fpa_rad), float(reflection_factor),
        phi_l, phi_r, phi_ref, mach, rays,
    )
    if status != STATUS_OK:
        return None
    return ColumnRays(float(m_cut), phi_l, phi_r, phi_ref, mach, rays)
