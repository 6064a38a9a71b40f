"""Compiled loop of the truth tracer: every emission of a flown path, every ray azimuth.

This module adds no physics of its own. For each emission it builds the integration
levels from the aircraft down to the ground elevation
(:func:`advisory.physics.rays.ray_levels_kernel`), reads the air at the aircraft the way
:meth:`advisory.physics.atmosphere.Atmosphere.at` does (linear in sound speed and wind,
linear in the logarithm of pressure and density), and traces each azimuth with
:func:`advisory.physics.fastpath.ray_ground_kernel` (geometric acoustics in a stratified
moving atmosphere, ray-tube amplitude matched to Whitham's near field, ageing and the
equal-area shocks of the ground signature; the references are in those modules). The
only additions are bookkeeping:

* the lift of a banked aircraft: the lift-equivalent area of a ray at azimuth ``phi``
  scales with ``cos(phi + bank)`` instead of ``cos(phi)`` (the lift plane turns with the
  bank, bank positive right wing down, azimuth positive to the right; Walkden's lift
  term [1]_ taken in the plane of the lift, common practice, no source). It is passed to
  the ray kernel as an effective lift ``L cos(phi + bank) / cos(phi)``;
* the steady translation of the ray pattern per unit emission time (the ground
  velocity plus the slope of the ray at the aircraft times the climb rate, as in
  :meth:`advisory.physics.rays.RayTracer.trace`), which the caller compares with the
  actual motion of the ground points between neighbouring emissions.

Its readable twin is ``trace_emissions_twin`` in ``tests/twins/truth.py``
(``RayTracer.trace`` + ``ground_signature`` ray by ray).

References
----------
.. [1] F. Walkden, "The shock pattern of a wing-body combination, far from the flight
   path", Aeronautical Quarterly 9, 1958, pp. 164-194.
"""

from __future__ import annotations

import math

import numpy as np

from advisory.jit import njit
from advisory.physics.fastpath import (
    N_RAY_RESULTS,
    R_EDGE,
    R_PHI,
    R_REACHED,
    ray_ground_kernel,
)
from advisory.physics.ray_kernels import emission_slowness, ray_levels_kernel, reaches_ground_kernel

# Extra per-ray columns written after the ``R_*`` columns of the fast path.
T_TRANS_X = N_RAY_RESULTS  #: steady translation of the ground point, east, m/s
T_TRANS_Y = N_RAY_RESULTS + 1  #: steady translation of the ground point, north, m/s
N_TRUTH_COLUMNS = N_RAY_RESULTS + 2

#: Below this |cos(phi)| the effective-lift trick is not used (the ray kernel's lift term
#: is then ``cos(phi) L`` ~ 0 either way; such rays point sideways and rarely reach).
_COS_FLOOR = 1e-9


@njit(cache=True)
def effective_lift(lift_n, bank, phi):
    """Lift (N) to hand the ray kernel so that its ``cos(phi) L`` term is ``cos(phi + bank) L``.

    Parameters
    ----------
    lift_n : float
        Lift ``n m g0 cos(fpa)``, N.
    bank, phi : float
        Bank angle (positive right wing down) and ray azimuth (positive right), rad.
    """
    cp = math.cos(phi)
    if abs(cp) < _COS_FLOOR:
        return lift_n
    return lift_n * math.cos(phi + bank) / cp


@njit(cache=True)
def same_state(alt, mach, heading, fpa, lift_n, bank, i):
    """True when emission ``i`` has exactly the state of emission ``i - 1``."""
    return (alt[i] == alt[i - 1] and mach[i] == mach[i - 1] and heading[i] == heading[i - 1]
            and fpa[i] == fpa[i - 1] and lift_n[i] == lift_n[i - 1] and bank[i] == bank[i - 1])


@njit(cache=True)
def _buffers(n_z, n_f):
    """Scratch arrays of the tracing: levels (sound speed, wind), the ray kernel's work,
    time and ground buffers and its shocks, for ``n_z`` atmosphere nodes and ``n_f``
    F-function points."""
    n_lev = n_z + 2
    return (np.empty(n_lev), np.empty(n_lev), np.empty(n_lev), np.empty(n_lev),
            np.empty((n_lev, 9)), np.empty(n_lev), np.empty(n_lev), np.empty((n_f + 2, 3)))


@njit(cache=True)
def _emission_air(z, c, wx, wy, log_rho, log_p, alt, mach, heading, fpa, zg, lz, lc, lwx,
                  lwy):
    """The air of one emission: its integration levels (into ``lz``, ``lc``, ``lwx``,
    ``lwy``; their count ``m``), the density at them, the sound speed, wind and pressure
    at the aircraft (module notes) and the aircraft's ground velocity (m/s)."""
    m = ray_levels_kernel(z, c, wx, wy, alt, zg, lz, lc, lwx, lwy)
    rho = np.exp(np.interp(lz[:m], z, log_rho))
    c0 = np.interp(alt, z, c)
    w0x = np.interp(alt, z, wx)
    w0y = np.interp(alt, z, wy)
    p0 = math.exp(np.interp(alt, z, log_p))
    u = mach * c0
    vgx = u * math.cos(fpa) * math.sin(heading) + w0x
    vgy = u * math.cos(fpa) * math.cos(heading) + w0y
    vgz = u * math.sin(fpa)
    return m, rho, c0, w0x, w0y, p0, vgx, vgy, vgz


@njit(cache=True)
def _trace_ray(mach, heading, fpa, lift_n, bank, phi, sx, sy, c0, w0x, w0y, p0, vgx, vgy,
               vgz, lz, lc, lwx, lwy, rho, m, fy, fv, av, fl, al, reflection_factor, work,
               t_buf, g_buf, shocks, row):
    """Trace one azimuth ``phi`` (horizontal slowness ``sx``, ``sy``) into ``row`` (the
    ``R_*`` columns and the steady translation, module notes); True when it reached."""
    lift = effective_lift(lift_n, bank, phi)
    if not ray_ground_kernel(mach, heading, fpa, phi, c0, w0x, w0y, p0, lz, lc, lwx, lwy,
                             rho, m, fy, fv, av, fl, al, lift, reflection_factor, work,
                             t_buf, g_buf, shocks, row[:N_RAY_RESULTS]):
        return False
    q0 = work[0, 3]
    om0 = work[0, 8]
    c20 = lc[0] * lc[0]
    row[T_TRANS_X] = vgx + (c20 * sx + w0x * om0) / (c20 * q0) * vgz
    row[T_TRANS_Y] = vgy + (c20 * sy + w0y * om0) / (c20 * q0) * vgz
    return True


@njit(cache=True)
def trace_emissions_kernel(alt, mach, heading, fpa, lift_n, bank, zg, phis, z, c, wx, wy,
                           log_rho, log_p, fy, fv, av, fl, al, reflection_factor, out):
    """Trace every azimuth of every emission to the ground elevation ``zg``.

    Parameters
    ----------
    alt, mach, heading, fpa, lift_n, bank : ndarray, shape (E,)
        Per emission: geometric altitude (m), Mach number, direction of the air-relative
        velocity (rad from north), flight-path angle (rad), lift (N), bank (rad).
    zg : float
        Ground elevation, m (below every ``alt``; emissions at or below it are skipped).
    phis : ndarray, shape (P,)
        Ray azimuths around the Mach cone, rad (0 down, positive right).
    z, c, wx, wy, log_rho, log_p : ndarray
        Atmosphere nodes: altitude (m, uniform ascending), sound speed (m/s), wind
        east/north (m/s), log density and log pressure.
    fy, fv, av, fl, al : ndarray
        F-function parts of the aircraft (``f_function_parts``).
    reflection_factor : float
        Ground reflection factor.
    out : ndarray, shape (E, P, N_TRUTH_COLUMNS)
        Output: the ``R_*`` columns of :mod:`advisory.physics.fastpath` (offsets east /
        north of the point below the aircraft, m; travel time, s; d(offset)/dphi, m/rad;
        overpressure, Pa; duration, s; edge; azimuth; reached) and the steady
        translation ``T_TRANS_X``, ``T_TRANS_Y`` (m/s).
    """
    lz, lc, lwx, lwy, work, t_buf, g_buf, shocks = _buffers(z.size, fy.size)
    for i in range(alt.size):
        for j in range(phis.size):
            for k in range(N_TRUTH_COLUMNS):
                out[i, j, k] = 0.0
            out[i, j, R_PHI] = phis[j]
            out[i, j, R_EDGE] = 1.0
        if not (mach[i] > 1.0 and alt[i] > zg):
            continue
        if i > 0 and same_state(alt, mach, heading, fpa, lift_n, bank, i):
            # Steady flight: the same state gives the same rays relative to the aircraft
            # (the atmosphere is stratified), so they are copied, bit for bit.
            out[i, :, :] = out[i - 1, :, :]
            continue
        m, rho, c0, w0x, w0y, p0, vgx, vgy, vgz = _emission_air(
            z, c, wx, wy, log_rho, log_p, alt[i], mach[i], heading[i], fpa[i], zg, lz, lc,
            lwx, lwy)
        for j in range(phis.size):
            phi = phis[j]
            sx, sy, nz, _, _ = emission_slowness(mach[i], heading[i], fpa[i], phi, c0, w0x, w0y)
            # Cheap reach test first (smallest q^2 over the levels, no integration): a ray
            # that turns above the ground costs a fraction of a full trace.
            if nz >= 0.0 or not reaches_ground_kernel(lc, lwx, lwy, m, sx, sy) > 0.0:
                continue
            _trace_ray(mach[i], heading[i], fpa[i], lift_n[i], bank[i], phi, sx, sy, c0,
                       w0x, w0y, p0, vgx, vgy, vgz, lz, lc, lwx, lwy, rho, m, fy, fv, av,
                       fl, al, reflection_factor, work, t_buf, g_buf, shocks, out[i, j])


@njit(cache=True)
def _reaches(mach, heading, fpa, phi, c0, w0x, w0y, lc, lwx, lwy, m):
    """The cheap reach test of one azimuth (as :func:`trace_emissions_kernel` runs it)."""
    sx, sy, nz, _, _ = emission_slowness(mach, heading, fpa, phi, c0, w0x, w0y)
    return nz < 0.0 and reaches_ground_kernel(lc, lwx, lwy, m, sx, sy) > 0.0


@njit(cache=True)
def trace_edge_band_kernel(alt, mach, heading, fpa, lift_n, bank, zg, phis, grid, z, c, wx,
                           wy, log_rho, log_p, fy, fv, av, fl, al, reflection_factor,
                           fractions, out):
    """Rays between each side's outermost grid ray and the lateral cutoff (the edge band).

    Per emission and side (0: negative azimuths, 1: positive), the outermost azimuth of
    ``grid`` (the output of :func:`trace_emissions_kernel` over ``phis``) that reached
    the ground and the next grid azimuth outward that did not bracket the lateral cutoff;
    the cutoff ``phi_e`` is found by bisection on the reach test (60 halvings), and a
    ray is traced at ``phi_last + fractions[k] * (phi_e - phi_last)`` for each ``k``.
    Near a grazing edge the landing point moves like the square root of the azimuth gap
    (common practice, no source), so fractions ``1 - (1 - k / K)^2`` put the band's
    landing points about evenly between the grid ray and the edge.

    Parameters
    ----------
    alt ... reflection_factor
        As :func:`trace_emissions_kernel` (``grid`` its filled output over ``phis``).
    fractions : ndarray, shape (K,)
        Positions of the band's rays between the grid ray (0) and the cutoff (1).
    out : ndarray, shape (E, 2, K, N_TRUTH_COLUMNS)
        Output, the columns of :func:`trace_emissions_kernel`; ``R_REACHED`` 0 where no
        band was traced (no grid ray reached on that side, the grid ends there, or the
        next grid azimuth passes the reach test).
    """
    lz, lc, lwx, lwy, work, t_buf, g_buf, shocks = _buffers(z.size, fy.size)
    n_phi = phis.size
    for i in range(alt.size):
        for s in range(2):
            for k in range(fractions.size):
                for q in range(N_TRUTH_COLUMNS):
                    out[i, s, k, q] = 0.0
                out[i, s, k, R_EDGE] = 1.0
        if not (mach[i] > 1.0 and alt[i] > zg):
            continue
        if i > 0 and same_state(alt, mach, heading, fpa, lift_n, bank, i):
            out[i, :, :, :] = out[i - 1, :, :, :]
            continue
        m, rho, c0, w0x, w0y, p0, vgx, vgy, vgz = _emission_air(
            z, c, wx, wy, log_rho, log_p, alt[i], mach[i], heading[i], fpa[i], zg, lz, lc,
            lwx, lwy)
        for s in range(2):
            j_last = -1
            if s == 1:
                for j in range(n_phi):
                    if grid[i, j, R_REACHED] > 0.5:
                        j_last = j
                j_next = j_last + 1
            else:
                for j in range(n_phi - 1, -1, -1):
                    if grid[i, j, R_REACHED] > 0.5:
                        j_last = j
                j_next = j_last - 1
            if j_last < 0 or j_next < 0 or j_next >= n_phi:
                continue
            lo = phis[j_last]
            hi = phis[j_next]
            if not _reaches(mach[i], heading[i], fpa[i], lo, c0, w0x, w0y, lc, lwx, lwy, m):
                continue
            if _reaches(mach[i], heading[i], fpa[i], hi, c0, w0x, w0y, lc, lwx, lwy, m):
                continue
            for _ in range(60):
                mid = 0.5 * (lo + hi)
                if _reaches(mach[i], heading[i], fpa[i], mid, c0, w0x, w0y, lc, lwx, lwy, m):
                    lo = mid
                else:
                    hi = mid
            phi_last = phis[j_last]
            for k in range(fractions.size):
                phi = phi_last + fractions[k] * (lo - phi_last)
                row = out[i, s, k]
                row[R_PHI] = phi
                sx, sy, _, _, _ = emission_slowness(mach[i], heading[i], fpa[i], phi, c0,
                                                    w0x, w0y)
                _trace_ray(mach[i], heading[i], fpa[i], lift_n[i], bank[i], phi, sx, sy,
                           c0, w0x, w0y, p0, vgx, vgy, vgz, lz, lc, lwx, lwy, rho, m, fy,
                           fv, av, fl, al, reflection_factor, work, t_buf, g_buf, shocks,
                           row)
