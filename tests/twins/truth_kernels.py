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


def trace_edge_band_twin(alt: np.ndarray, mach: np.ndarray, heading: np.ndarray,
                         fpa: np.ndarray, lift_n: np.ndarray, bank: np.ndarray, zg: float,
                         phis: np.ndarray, grid: np.ndarray, atmosphere: Atmosphere,
                         aircraft: Aircraft, reflection_factor: float,
                         fractions: np.ndarray) -> np.ndarray:
    """The edge band of :func:`advisory.bench.truth_kernels.trace_edge_band_kernel`, read
    plainly: per side, the outermost grid ray that reached and the next one out bracket
    the cutoff; 60 halvings with the readable tracer's reach test; each band ray traced
    as :func:`trace_emissions_twin` traces one azimuth."""
    tracer = RayTracer(atmosphere)
    out = np.zeros((alt.size, 2, fractions.size, N_TRUTH_COLUMNS))
    out[..., fp.R_EDGE] = 1.0
    for i in range(alt.size):
        if not (mach[i] > 1.0 and alt[i] > zg):
            continue
        fc = FlightCondition(float(mach[i]), float(alt[i]), float(heading[i]), float(fpa[i]),
                             float(zg))

        def reaches(phi: float, fc: FlightCondition = fc) -> bool:
            return tracer.trace(fc, phi).reaches_ground

        hit = np.flatnonzero(grid[i, :, fp.R_REACHED] > 0.5)
        if hit.size == 0:
            continue
        for side, (j_last, j_next) in enumerate(((hit[0], hit[0] - 1), (hit[-1], hit[-1] + 1))):
            if not 0 <= j_next < phis.size:
                continue
            lo, hi = float(phis[j_last]), float(phis[j_next])
            if not reaches(lo) or reaches(hi):
                continue
            for _ in range(60):
                mid = 0.5 * (lo + hi)
                lo, hi = (mid, hi) if reaches(mid) else (lo, mid)
            for k, f in enumerate(fractions):
                phi = float(phis[j_last]) + float(f) * (lo - float(phis[j_last]))
                one = trace_emissions_twin(alt[i:i + 1], mach[i:i + 1], heading[i:i + 1],
                                           fpa[i:i + 1], lift_n[i:i + 1], bank[i:i + 1], zg,
                                           np.array([phi]), atmosphere, aircraft,
                                           reflection_factor)
                out[i, side, k] = one[0, 0]
    return out
