"""Fast path for the table builder: one (altitude, flight-path angle, heading) column in numba.

The table builder needs, for every column, the cutoff Mach, and for every Mach excess
above it the two lateral cutoff azimuths and the ground end of each tabulated ray with
its signature. The readable path does this through :mod:`advisory.physics.carpet`,
:meth:`advisory.physics.rays.RayTracer.trace` and
:func:`advisory.physics.signature.ground_signature`, one Python call per ray or per
bisection step. This module runs the *same scheme* as compiled kernels over plain
arrays; it adds no physics of its own:

* :func:`min_q2_kernel` is :meth:`RayTracer.min_q2` (emission slowness, then the
  smallest ``q^2`` over the levels);
* :func:`best_reaching_azimuth_kernel`, :func:`cutoff_mach_kernel` and
  :func:`lateral_cutoff_kernel` are :func:`advisory.physics.carpet.best_reaching_azimuth`,
  :func:`~advisory.physics.carpet.cutoff_mach` and
  :func:`~advisory.physics.carpet.lateral_cutoff` (same bisections, same tolerances,
  same azimuth scan);
* :func:`ray_ground_kernel` is ``RayTracer.trace`` (the level integration
  :func:`advisory.physics.ray_kernels.trace_levels_kernel`, ray-tube area from the
  translation of the ray pattern, amplitude factor ``G`` from
  :func:`~advisory.physics.ray_kernels.near_field_constant`: the very kernels
  ``RayTracer`` runs) followed by ``ground_signature`` (lift-equivalent area, ageing,
  equal-area shocks via :func:`advisory.physics.shocks.signature_kernel`, edge and
  caustic flags);
* :func:`column_kernel` strings them together as ``build_column`` does.

Operations are written in the order the readable path evaluates them, so the two agree
to rounding (the parity test in ``tests/test_fastpath.py`` holds them to 1e-9 relative
for geometry and 1e-6 for overpressure and duration). The readable path stays the
reference: the builder falls back to it whenever
:func:`advisory.physics.column.trace_column` declines a column (a condition the readable
path would refuse with an error, such as no cutoff Mach up to Mach 5).

References
----------
.. [1] A. D. Pierce, *Acoustics: An Introduction to Its Physical Principles and
   Applications*, Acoustical Society of America, 1989, ch. 8 (rays in moving media,
   Blokhintsev invariant).
.. [2] G. B. Whitham, "The flow pattern of a supersonic projectile", Comm. Pure Appl.
   Math. 5, 1952, pp. 301-348 (near-field amplitude, F-function).
.. [3] G. B. Whitham, "On the propagation of weak shock waves", J. Fluid Mech. 1, 1956,
   pp. 290-318 (ageing, equal-area rule).
"""

from __future__ import annotations

import math

import numpy as np

from advisory.jit import njit
from advisory.physics import carpet as _carpet
from advisory.physics.atmosphere import GAMMA
from advisory.physics.ray_kernels import (
    L_JXX,
    L_JXY,
    L_JYX,
    L_JYY,
    L_OMEGA,
    L_Q,
    L_T,
    L_X,
    L_Y,
    N_LEVEL_COLUMNS,
    emission_slowness,
    near_field_constant,
    reaches_ground_kernel,
    trace_levels_kernel,
)
from advisory.physics.rays import MACH_LIMIT
from advisory.physics.shocks import signature_kernel
from advisory.physics.signature import EDGE_GRAZING_SINE

# Per-ray result columns written by :func:`ray_ground_kernel` / :func:`column_kernel`.
R_X = 0  #: ground offset east of the emission point, m
R_Y = 1  #: ground offset north of the emission point, m
R_TIME = 2  #: travel time from emission to the ground, s
R_DX_DPHI = 3  #: d(east offset)/d(azimuth), m/rad
R_DY_DPHI = 4  #: d(north offset)/d(azimuth), m/rad
R_DP = 5  #: ground overpressure, reflection included, Pa
R_DURATION = 6  #: time between bow and tail shocks, s
R_EDGE = 7  #: 1 when the signature is flagged (caustic or grazing) or the ray misses
R_PHI = 8  #: ray azimuth, rad
R_REACHED = 9  #: 1 when the ray reaches the ground
R_AGE = 10  #: the signature's age at the ground (ageing integral), m^0.5
N_RAY_RESULTS = 11

#: Column status codes returned by :func:`column_kernel`.
STATUS_OK = 0
STATUS_NO_CUTOFF = 1  #: no Mach up to the search limit reaches the ground
STATUS_MACH_RANGE = 2  #: a tabulated Mach lies above the supported 5.0

#: Nudge applied when a Mach just above cutoff has no reaching ray (as ``build_column``).
CUTOFF_NUDGE = 1e-4

#: :data:`advisory.physics.carpet.PHI_SCAN_RAD` as the array the kernels take, rad.
PHI_SCAN = np.array(_carpet.PHI_SCAN_RAD, dtype=np.float64)


# --------------------------------------------------------------------------------------
# Carpet geometry (bisections)
# --------------------------------------------------------------------------------------


@njit(cache=True)
def min_q2_kernel(mach, heading, fpa, phi, c0, w0x, w0y, lc, lwx, lwy, m):
    """Smallest ``q^2`` (s^2/m^2) along one ray; -1 for subsonic or up-going rays.

    Same as :meth:`advisory.physics.rays.RayTracer.min_q2`; ``lc, lwx, lwy`` are the
    first ``m`` integration levels (sound speed, wind east/north, m/s) and ``c0, w0x,
    w0y`` the sound speed and wind at the aircraft (m/s).
    """
    if mach <= 1.0:
        return -1.0
    sx, sy, nz, _, _ = emission_slowness(mach, heading, fpa, phi, c0, w0x, w0y)
    if nz >= 0.0:
        return -1.0
    return reaches_ground_kernel(lc, lwx, lwy, m, sx, sy)


@njit(cache=True)
def best_reaching_azimuth_kernel(mach, heading, fpa, c0, w0x, w0y, lc, lwx, lwy, m,
                                 phi_scan):
    """Azimuth (rad) whose ray clears the ground by the widest margin, and the margin.

    Same as :func:`advisory.physics.carpet.best_reaching_azimuth`: the centre ray when
    it reaches, else the best of ``phi_scan`` (first of equals).
    """
    m0 = min_q2_kernel(mach, heading, fpa, 0.0, c0, w0x, w0y, lc, lwx, lwy, m)
    if m0 > 0.0:
        return 0.0, m0
    best_phi = 0.0
    best = m0
    for k in range(phi_scan.size):
        v = min_q2_kernel(mach, heading, fpa, phi_scan[k], c0, w0x, w0y, lc, lwx, lwy, m)
        if v > best:
            best_phi = phi_scan[k]
            best = v
    return best_phi, best


@njit(cache=True)
def _reaches(mach, heading, fpa, c0, w0x, w0y, lc, lwx, lwy, m, phi_scan):
    _, margin = best_reaching_azimuth_kernel(mach, heading, fpa, c0, w0x, w0y, lc, lwx, lwy,
                                             m, phi_scan)
    return margin > 0.0


@njit(cache=True)
def cutoff_mach_kernel(heading, fpa, c0, w0x, w0y, lc, lwx, lwy, m, phi_scan, mach_tol,
                       mach_max):
    """Lowest Mach whose boom reaches the ground (``inf`` when none up to ``mach_max``).

    Same bisection as :func:`advisory.physics.carpet.cutoff_mach` (tolerance
    ``mach_tol``).
    """
    lo = 1.0
    hi = mach_max
    if not _reaches(hi, heading, fpa, c0, w0x, w0y, lc, lwx, lwy, m, phi_scan):
        return math.inf
    if _reaches(lo + 1e-9, heading, fpa, c0, w0x, w0y, lc, lwx, lwy, m, phi_scan):
        return lo
    while hi - lo > mach_tol:
        mid = 0.5 * (lo + hi)
        if _reaches(mid, heading, fpa, c0, w0x, w0y, lc, lwx, lwy, m, phi_scan):
            hi = mid
        else:
            lo = mid
    return hi


@njit(cache=True)
def lateral_cutoff_kernel(mach, heading, fpa, c0, w0x, w0y, lc, lwx, lwy, m, phi_in, side,
                          phi_limit, phi_tol):
    """Largest azimuth (rad) on ``side`` (+1 right, -1 left) of ``phi_in`` that reaches.

    Same bisection as :func:`advisory.physics.carpet.lateral_cutoff`.
    """
    lo = phi_in
    hi = side * phi_limit
    if min_q2_kernel(mach, heading, fpa, hi, c0, w0x, w0y, lc, lwx, lwy, m) > 0.0:
        return hi
    while abs(hi - lo) > phi_tol:
        mid = 0.5 * (lo + hi)
        if min_q2_kernel(mach, heading, fpa, mid, c0, w0x, w0y, lc, lwx, lwy, m) > 0.0:
            lo = mid
        else:
            hi = mid
    return lo


# --------------------------------------------------------------------------------------
# One ray: trace, amplitude, signature
# --------------------------------------------------------------------------------------


@njit(cache=True)
def _py_max(a, b):
    """Python's ``max(a, b)`` for floats (keeps ``a`` unless ``b > a``; NaN-faithful)."""
    if b > a:
        return b
    return a


@njit(cache=True)
def _finite(v):
    return v == v and abs(v) < math.inf


@njit(cache=True)
def ray_ground_kernel(mach, heading, fpa, phi, c0, w0x, w0y, p0, lz, lc, lwx, lwy, rho, m,
                      fy, fv, av, fl, al, lift_n, reflection_factor, work, t_buf, g_buf,
                      shocks, res):
    """Trace one ray to the ground and compute its boom (``RayTracer.trace`` +
    ``ground_signature`` in one kernel).

    Parameters
    ----------
    mach, heading, fpa, phi : float
        Mach number, heading (rad from north), flight-path angle (rad), ray azimuth (rad).
    c0, w0x, w0y, p0 : float
        Sound speed (m/s), wind east/north (m/s) and pressure (Pa) at the aircraft.
    lz, lc, lwx, lwy, rho : ndarray
        Integration levels from the aircraft down to the ground: altitude (m), sound
        speed (m/s), wind east/north (m/s), density (kg/m^3); first ``m`` used.
    fy, fv, av, fl, al : ndarray
        F-function parts of the aircraft (:class:`~advisory.physics.ffunction.FFunctionParts`).
    lift_n : float
        Lift ``n m g0 cos(fpa)``, N.
    reflection_factor : float
        Ground reflection factor.
    work : ndarray, shape (>= m, N_LEVEL_COLUMNS)
        Scratch for the per-level trace.
    t_buf, g_buf : ndarray, shape (>= m,)
        Scratch for travel time and amplitude factor per level.
    shocks : ndarray, shape (fy.size + 2, 3)
        Scratch for the shock fit.
    res : ndarray, shape (N_RAY_RESULTS,)
        Output, indexed by the ``R_*`` constants; zero (and ``R_EDGE`` = 1) when the ray
        does not reach the ground.

    Returns
    -------
    bool
        True when the ray reaches the ground.
    """
    for k in range(res.size):
        res[k] = 0.0
    res[R_PHI] = phi
    res[R_EDGE] = 1.0
    if mach <= 1.0:
        return False
    sx, sy, nz, dsx, dsy = emission_slowness(mach, heading, fpa, phi, c0, w0x, w0y)
    if nz >= 0.0:
        return False
    count = trace_levels_kernel(lz, lc, lwx, lwy, m, sx, sy, work)
    if count < m:
        return False
    # Translation of the ray pattern per unit emission time (steady flight).
    u = mach * c0
    cg = math.cos(fpa)
    vgx = u * cg * math.sin(heading) + w0x
    vgy = u * cg * math.cos(heading) + w0y
    vgz = u * math.sin(fpa)
    q0 = work[0, L_Q]
    om0 = work[0, L_OMEGA]
    c20 = lc[0] * lc[0]
    trans_x = vgx + (c20 * sx + w0x * om0) / (c20 * q0) * vgz
    trans_y = vgy + (c20 * sy + w0y * om0) / (c20 * q0) * vgz
    beta = math.sqrt(mach * mach - 1.0)
    k0 = near_field_constant(c0, mach, beta, lc[0], lwx[0], lwy[0], rho[0], lz[0], sx, sy,
                             dsx, dsy, trans_x, trans_y)
    coef = p0 * GAMMA * (mach * mach) / math.sqrt(2.0 * beta)
    dx = 0.0
    dy = 0.0
    for k in range(m):
        dx = work[k, L_JXX] * dsx + work[k, L_JXY] * dsy
        dy = work[k, L_JYX] * dsx + work[k, L_JYY] * dsy
        area = abs(trans_x * dy - trans_y * dx)
        om = work[k, L_OMEGA]
        b = work[k, L_Q] * area / (rho[k] * (om * om))
        if b > 0.0:
            g_buf[k] = coef * math.sqrt(k0 / b)
        elif k0 > 0.0:
            g_buf[k] = math.inf
        else:
            g_buf[k] = math.nan
        t_buf[k] = work[k, L_T]
    res[R_REACHED] = 1.0
    res[R_X] = work[m - 1, L_X]
    res[R_Y] = work[m - 1, L_Y]
    res[R_TIME] = work[m - 1, L_T]
    res[R_DX_DPHI] = dx
    res[R_DY_DPHI] = dy
    # Ground signature (ground_signature with load factor 1).
    beta_l = math.sqrt(max(mach * mach - 1.0, 0.0))
    lift_area = beta_l * math.cos(phi) * lift_n / (GAMMA * p0 * mach * mach)
    age_scale = mach * c0 / om0
    rows, f_max, f_min, age, last = signature_kernel(fy, fv, av, fl, al, lift_area, t_buf[:m],
                                                     g_buf[:m], rho[:m], lc[:m], m, age_scale,
                                                     shocks)
    if last < 1:
        return True  # no boom: zeros, edge flagged
    caustic = last < m - 1
    g_ground = g_buf[last]
    gq = work[m - 1, L_Q] * lc[m - 1] / work[m - 1, L_OMEGA]
    edge = caustic or not (gq >= EDGE_GRAZING_SINE)
    kk = reflection_factor * g_ground
    to_time = om0 / (mach * c0)
    bow_y = shocks[0, 0]
    tail_y = shocks[rows - 1, 0]
    v_peak = kk * _py_max(f_max, 0.0)
    v_bow = kk * _py_max(shocks[0, 2] - shocks[0, 1], 0.0)
    v_tail = kk * _py_max(shocks[rows - 1, 2] - shocks[rows - 1, 1], 0.0)
    v_dur = _py_max(tail_y - bow_y, 0.0) * to_time
    v_arr = t_buf[last] + bow_y * to_time
    if not (_finite(v_peak) and _finite(v_bow) and _finite(v_tail) and _finite(v_dur)
            and _finite(v_arr)):
        return True  # non-finite signature: zeros, edge flagged
    res[R_DP] = v_peak
    res[R_DURATION] = v_dur
    res[R_EDGE] = 1.0 if edge else 0.0
    res[R_AGE] = age if _finite(age) else 0.0
    return True


# --------------------------------------------------------------------------------------
# One table column
# --------------------------------------------------------------------------------------


@njit(cache=True)
def column_kernel(heading, fpa, c0, w0x, w0y, p0, lz, lc, lwx, lwy, rho, mach_excess, eta,
                  phi_scan, mach_tol, mach_search_max, phi_limit, phi_tol, fy, fv, av, fl, al,
                  lift_n, reflection_factor, phi_left, phi_right, phi_ref, mach_used, rays):
    """Cutoff Mach, lateral cutoffs and every tabulated ray of one column.

    Parameters
    ----------
    heading, fpa : float
        Heading (rad from north) and flight-path angle (rad) of the column.
    c0, w0x, w0y, p0 : float
        Sound speed, wind east/north (m/s) and pressure (Pa) at the aircraft.
    lz, lc, lwx, lwy, rho : ndarray
        Integration levels aircraft to ground (see :func:`ray_ground_kernel`).
    mach_excess : ndarray
        Mach numbers above cutoff to tabulate.
    eta : ndarray
        Normalised azimuths, -1 (left cutoff) .. 0 (reference ray) .. +1 (right cutoff).
    phi_scan : ndarray
        Azimuths scanned for the best reaching ray, rad.
    mach_tol, mach_search_max, phi_limit, phi_tol : float
        Bisection settings of :mod:`advisory.physics.carpet`.
    fy, fv, av, fl, al : ndarray
        F-function parts of the aircraft.
    lift_n, reflection_factor : float
        Lift (N) and ground reflection factor.
    phi_left, phi_right, phi_ref, mach_used : ndarray, shape (n_mach_excess,)
        Output: lateral cutoff azimuths and reference azimuth (rad), and the Mach traced
        (cutoff plus excess, nudged up when no ray reached there).
    rays : ndarray, shape (n_mach_excess, n_eta, N_RAY_RESULTS)
        Output per ray, indexed by the ``R_*`` constants.

    Returns
    -------
    (cutoff_mach, status) : (float, int)
        ``status`` is :data:`STATUS_OK` or the reason the column was not traced.
    """
    m = lz.size
    m_cut = cutoff_mach_kernel(heading, fpa, c0, w0x, w0y, lc, lwx, lwy, m, phi_scan,
                               mach_tol, mach_search_max)
    if not m_cut < math.inf:
        return m_cut, STATUS_NO_CUTOFF
    work = np.empty((m, N_LEVEL_COLUMNS))
    t_buf = np.empty(m)
    g_buf = np.empty(m)
    shocks = np.empty((fy.size + 2, 3))
    for im in range(mach_excess.size):
        mach = m_cut + mach_excess[im]
        ref, margin = best_reaching_azimuth_kernel(mach, heading, fpa, c0, w0x, w0y, lc, lwx,
                                                   lwy, m, phi_scan)
        if margin <= 0.0:
            mach = mach + CUTOFF_NUDGE
            ref, margin = best_reaching_azimuth_kernel(mach, heading, fpa, c0, w0x, w0y, lc,
                                                       lwx, lwy, m, phi_scan)
        if mach > MACH_LIMIT:
            return m_cut, STATUS_MACH_RANGE
        left = lateral_cutoff_kernel(mach, heading, fpa, c0, w0x, w0y, lc, lwx, lwy, m, ref,
                                     -1, phi_limit, phi_tol)
        right = lateral_cutoff_kernel(mach, heading, fpa, c0, w0x, w0y, lc, lwx, lwy, m, ref,
                                      1, phi_limit, phi_tol)
        phi_left[im] = left
        phi_right[im] = right
        phi_ref[im] = ref
        mach_used[im] = mach
        for ie in range(eta.size):
            e = eta[ie]
            if e >= 0.0:
                phi = ref + e * (right - ref)
            else:
                phi = ref - e * (left - ref)
            ray_ground_kernel(mach, heading, fpa, phi, c0, w0x, w0y, p0, lz, lc, lwx, lwy,
                              rho, m, fy, fv, av, fl, al, lift_n, reflection_factor, work,
                              t_buf, g_buf, shocks, rays[im, ie])
    return m_cut, STATUS_OK
