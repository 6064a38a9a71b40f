"""Readable twin of :func:`advisory.bench.truth_kernels.trace_emissions_kernel`.

Ray by ray through the readable physics: :meth:`advisory.physics.rays.RayTracer.trace`
(numpy levels) and :func:`advisory.physics.signature.ground_signature` (numpy/Python
twins). It takes the atmosphere and aircraft objects instead of their arrays (the
readable path needs them) and otherwise the kernel's arguments; it fills the same
``(E, P, N_TRUTH_COLUMNS)`` array.
"""

from __future__ import annotations

import math

import numpy as np

from advisory.bench.truth_kernels import N_TRUTH_COLUMNS, T_TRANS_X, T_TRANS_Y
from advisory.physics import fastpath as fp
from advisory.physics.aircraft import Aircraft
from advisory.physics.atmosphere import Atmosphere
from advisory.physics.rays import FlightCondition, RayTracer
from advisory.physics.signature import ground_signature


def trace_emissions_twin(alt: np.ndarray, mach: np.ndarray, heading: np.ndarray,
                         fpa: np.ndarray, lift_n: np.ndarray, bank: np.ndarray, zg: float,
                         phis: np.ndarray, atmosphere: Atmosphere, aircraft: Aircraft,
                         reflection_factor: float) -> np.ndarray:
    """Every azimuth of every emission, traced and signed one ray at a time."""
    tracer = RayTracer(atmosphere)
    out = np.zeros((alt.size, phis.size, N_TRUTH_COLUMNS))
    out[:, :, fp.R_PHI] = phis[None, :]
    out[:, :, fp.R_EDGE] = 1.0
    for i in range(alt.size):
        if not (mach[i] > 1.0 and alt[i] > zg):
            continue
        fc = FlightCondition(float(mach[i]), float(alt[i]), float(heading[i]), float(fpa[i]),
                             float(zg))
        air = atmosphere.at(fc.altitude_m)
        for j, phi in enumerate(phis):
            ray = tracer.trace(fc, float(phi))
            if not ray.reaches_ground:
                continue
            # Lift in the plane of the bank: cos(phi + bank) instead of cos(phi).
            lift = lift_n[i] * math.cos(phi + bank[i]) / math.cos(phi)
            load = lift / (aircraft.weight_n * math.cos(fc.fpa_rad))
            sig = ground_signature(aircraft, ray, fc.mach, air.sound_speed_mps,
                                   air.pressure_pa, load_factor=load,
                                   reflection_factor=reflection_factor, fpa_rad=fc.fpa_rad)
            row = out[i, j]
            row[fp.R_X], row[fp.R_Y], row[fp.R_TIME] = ray.x_m[-1], ray.y_m[-1], ray.t_s[-1]
            row[fp.R_DX_DPHI], row[fp.R_DY_DPHI] = ray.dxy_dphi
            row[fp.R_DP], row[fp.R_DURATION] = sig.overpressure_pa, sig.duration_s
            row[fp.R_EDGE] = 1.0 if sig.edge else 0.0
            row[fp.R_REACHED] = 1.0
            # Steady translation: ground velocity plus the ray's slope at the top times
            # the climb rate.
            vg = ray.ground_velocity
            c2 = ray.sound_speed_mps[0] ** 2
            om, q = ray.omega[0], ray.q[0]
            row[T_TRANS_X] = vg[0] + (c2 * ray.sx + air.wind_east_mps * om) / (c2 * q) * vg[2]
            row[T_TRANS_Y] = vg[1] + (c2 * ray.sy + air.wind_north_mps * om) / (c2 * q) * vg[2]
    return out
