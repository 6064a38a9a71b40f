"""The lift of the moment in a table's overpressure: bank tilts it, load factor scales it.

A table is built for steady flight: the ray leaving at azimuth ``phi`` (around the flight
path, positive to the right) carries the lift-equivalent area

    B0 = s l0,   s = beta W / (gamma p M^2),   l0 = cos(gamma_fp) cos(phi)

(Walkden's lift-equivalent area, ``B = beta L cos(phi) / (2 q)``, ``q = gamma/2 p M^2``;
Carlson, NASA TP-1122, 1978; ``W`` the weight, ``p`` the ambient pressure at the aircraft,
``gamma_fp`` the flight-path angle). Banked by ``mu`` (positive right wing down) with lift
``L = lambda W``, the lift plane turns with the aircraft and the ray sees
``l = lambda cos(phi + mu)``: more lift below the outside of a turn, less below the
inside. The ground overpressure of a ray is ``r G P(a, B)`` with ``r`` the reflection
factor, ``G`` the ray's amplitude factor at the ground, ``a`` its age and ``P`` the peak of
the aged F-curve ``F_volume + B F_lift`` after Whitham's equal-area rule
(:mod:`advisory.physics.shocks`). Only ``P`` depends on the lift, and only through
``(a, B)``: the ray path, ``G`` and ``a`` do not (ray paths depend on the air and the
Mach cone alone). So

    dp(l) = dp(l0) P(a, s l) / P(a, s l0),

exact within ray theory and Whitham's far-field ageing, and equal to the table's value in
steady flight (``l = l0``). The table stores each ray's age (``ray_age``, interpolated like
the rows) and the map ``P(a, B) sqrt(a)`` of the aircraft on a grid (``lift_map``;
``sqrt(a)`` makes the far-field N-wave's ``a^-1/2`` decay a constant, so the map is smooth
in ``a``). The map's axes: ``ln a`` evenly spaced, ``asinh(B / B_s)`` evenly spaced (about
constant relative resolution in ``B``, ``B_s`` a quarter of the smallest steady lift area
of the table's altitudes), lift ``l`` in :data:`LIFT_RANGE` at every altitude and Mach of
the table. Bilinear interpolation; against the equal-area rule evaluated directly at 300
random points of the map: median 0.002 %, at most 0.3 % (near the kink of ``P``, where the
lift's shock overtakes the volume's bow shock; ``tests/test_bank_lift.py``). Outside the
map the nearest edge is used. The duration is not corrected (the tail shock moves a little
with the lift).
"""

from __future__ import annotations

import math

import numpy as np

from advisory.jit import njit
from advisory.physics.aircraft import Aircraft
from advisory.physics.atmosphere import GAMMA
from advisory.physics.ffunction import f_function_parts
from advisory.physics.shocks import shock_fit_kernel
from advisory.tables import lookup as lk

#: Lift toward a ray over the weight, ``lambda cos(phi + mu)``, covered by the map: a 60-deg
#: bank at 2 g reaches -1 (the outer rays of the turn's inside) to 2 (issue 14's range:
#: bank to 60 deg, load factor to 2 g); with a margin. Beyond it the map's edge is used.
LIFT_RANGE = (-1.5, 3.0)
N_MAP_AGES = 40  #: age nodes of the map (``ln a`` evenly spaced)
N_MAP_AREAS = 1024  #: lift-area nodes of the map (``asinh(B / B_s)`` evenly spaced)
#: Factor on the smallest and largest tabulated ages for the map's age range.
AGE_MARGIN = 2.0
#: ``lift_map_params``: ln a (first, last), asinh(B / B_s) (first, last), B_s (m^2), W (N).
N_MAP_PARAMS = 6
#: Lift differences below this (in units of the weight) are steady flight: no correction.
STEADY_LIFT_TOL = 1e-12


def build_lift_map(aircraft: Aircraft, ages: np.ndarray, p_min_pa: float, p_max_pa: float
                   ) -> tuple[np.ndarray, np.ndarray]:
    """The map ``P(a, B) sqrt(a)`` of ``aircraft`` and its parameters.

    Parameters
    ----------
    aircraft : Aircraft
        Its F-function parts (volume and unit lift) and weight.
    ages : ndarray
        The tabulated rays' ages, m^0.5 (the map covers the positive ones, with
        :data:`AGE_MARGIN`).
    p_min_pa, p_max_pa : float
        Ambient pressure at the table's highest and lowest altitude, Pa.

    Returns
    -------
    (lift_map, params)
        ``lift_map`` (N_MAP_AGES, N_MAP_AREAS); ``params`` (N_MAP_PARAMS,).
    """
    parts = f_function_parts(aircraft)
    pos = np.asarray(ages, dtype=float)
    pos = pos[np.isfinite(pos) & (pos > 0.0)]
    a_lo = float(pos.min()) / AGE_MARGIN if pos.size else 1.0
    a_hi = float(pos.max()) * AGE_MARGIN if pos.size else 10.0
    w = aircraft.weight_n
    # beta / M^2 is at most 1/2 (at M = sqrt 2); the smallest steady area: cos 60 deg, M 1.05
    s_max = 0.5 * w / (GAMMA * p_min_pa)
    b_s = 0.25 * 0.5 * math.sqrt(1.05**2 - 1.0) / 1.05**2 * w / (GAMMA * p_max_pa)
    u_lo = math.asinh(LIFT_RANGE[0] * s_max / b_s)
    u_hi = math.asinh(LIFT_RANGE[1] * s_max / b_s)
    ln_a = np.linspace(math.log(a_lo), math.log(a_hi), N_MAP_AGES)
    areas = b_s * np.sinh(np.linspace(u_lo, u_hi, N_MAP_AREAS))
    out = np.empty((parts.y_m.size + 2, 3))
    lift_map = np.empty((N_MAP_AGES, N_MAP_AREAS))
    for j, b in enumerate(areas):
        f = parts.f_volume + b * parts.f_lift_unit
        area = parts.area_volume + b * parts.area_lift_unit
        for i, la in enumerate(ln_a):
            a = math.exp(la)
            _, f_max, _ = shock_fit_kernel(parts.y_m, f, area, a, out)
            lift_map[i, j] = max(float(f_max), 0.0) * math.sqrt(a)
    params = np.array([ln_a[0], ln_a[-1], u_lo, u_hi, b_s, w], dtype=np.float64)
    return lift_map, params


@njit(cache=True)
def map_value(lift_map, params, age, area):
    """``P(a, B) sqrt(a)`` by bilinear interpolation in (ln a, asinh(B / B_s))."""
    na = lift_map.shape[0]
    nb = lift_map.shape[1]
    x = (math.log(max(age, 1e-300)) - params[0]) / (params[1] - params[0]) * (na - 1)
    y = (math.asinh(area / params[4]) - params[2]) / (params[3] - params[2]) * (nb - 1)
    x = min(max(x, 0.0), na - 1.0)
    y = min(max(y, 0.0), nb - 1.0)
    i = min(int(x), na - 2)
    j = min(int(y), nb - 2)
    wx = x - i
    wy = y - j
    return ((1.0 - wx) * ((1.0 - wy) * lift_map[i, j] + wy * lift_map[i, j + 1])
            + wx * ((1.0 - wy) * lift_map[i + 1, j] + wy * lift_map[i + 1, j + 1]))


@njit(cache=True)
def lift_correction_kernel(rows, ages, codes, lift, bank, fpa, scale, lift_map, params):
    """Scale each ray's overpressure (``rows[..., Q_DP]``, in place) to the lift of the
    moment (module notes).

    Parameters
    ----------
    rows : ndarray, shape (K, n_eta, N_QUANTITIES)
        Looked-up table rows per emission.
    ages : ndarray, shape (K, n_eta, 1)
        The rays' ages (``ray_age`` looked up like the rows), m^0.5.
    codes : ndarray, int64 (K,)
        Lookup codes (no correction where there is no boom).
    lift, bank, fpa : ndarray, shape (K,)
        Lift over weight, bank (rad, positive right wing down) and flight-path angle (rad).
    scale : ndarray, shape (K,)
        ``s = beta W / (gamma p M^2)``, m^2 per unit lift over weight.
    lift_map, params : ndarray
        The table's map (:func:`build_lift_map`).

    Returns
    -------
    int
        Emissions corrected.
    """
    corrected = 0
    nj = rows.shape[1]
    fac = np.ones(nj)  # the factors of the emission before (reused when its inputs repeat)
    have = False
    for k in range(rows.shape[0]):
        if codes[k] == lk.NO_BOOM:
            have = False
            continue
        same = have and lift[k] == lift[k - 1] and bank[k] == bank[k - 1] \
            and fpa[k] == fpa[k - 1] and scale[k] == scale[k - 1]
        if same:
            for j in range(nj):
                if ages[k, j, 0] != ages[k - 1, j, 0] or \
                        rows[k, j, lk.Q_PHI] != rows[k - 1, j, lk.Q_PHI]:
                    same = False
                    break
        if not same:
            cg = math.cos(fpa[k])
            for j in range(nj):
                fac[j] = 1.0
                phi = rows[k, j, lk.Q_PHI]
                l0 = cg * math.cos(phi)
                ell = lift[k] * math.cos(phi + bank[k])
                if abs(ell - l0) <= STEADY_LIFT_TOL:
                    continue
                a = ages[k, j, 0]
                p0 = map_value(lift_map, params, a, scale[k] * l0)
                if p0 > 0.0:
                    fac[j] = map_value(lift_map, params, a, scale[k] * ell) / p0
            have = True
        touched = False
        for j in range(nj):
            if fac[j] != 1.0:
                rows[k, j, lk.Q_DP] *= fac[j]
                touched = True
        if touched:
            corrected += 1
    return corrected


@njit(cache=True)
def lift_scale_kernel(alt, mach, z, ln_p, weight_n, out):
    """``out[k] = beta W / (gamma p(alt[k]) M^2)`` (m^2), ``p`` interpolated in ``ln p``
    over the levels ``z`` (ascending, m); 0 where the Mach is not supersonic."""
    for k in range(alt.size):
        m = mach[k]
        if not m > 1.0:
            out[k] = 0.0
            continue
        i, w, _ = lk._locate(z, alt[k])  # the edge level beyond the levels
        lp = ln_p[i] * (1.0 - w) + ln_p[i + 1] * w
        out[k] = math.sqrt(m * m - 1.0) * weight_n / (GAMMA * math.exp(lp) * m * m)
