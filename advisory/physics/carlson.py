"""Carlson's simplified sonic-boom prediction: an independent centerline cross-check.

Carlson [1]_ writes the centerline ground boom of an aircraft in steady flight as::

    dp = K_P K_R sqrt(p_v p_g) (M^2 - 1)^(1/8) h_e^(-3/4) l^(3/4) K_S
    dt = K_t (3.42 / a_v) M / (M^2 - 1)^(3/8) h_e^(1/4) l^(3/4) K_S

with ``p_v``, ``a_v`` pressure and sound speed at the aircraft, ``p_g`` pressure at
the ground, ``h_e`` the height above the ground, ``l`` the aircraft length, ``K_R``
the reflection factor, ``K_S`` the shape factor, ``K_P`` the pressure (atmosphere)
amplification factor and ``K_t`` the duration factor. The shape factor is read
against the lift parameter ``K_L = beta W / (1.4 p_v M^2 l^2)`` (``W`` the weight
carried). The constant 3.42 is Carlson's (value from memory); it equals
``2 (gamma+1)/gamma = 3.43`` to the rounding, which is what the uniform-atmosphere
limit below requires.

Carlson's factors come from charts. Here each chart is represented by a documented
approximation, independent of the ray tracer, the numerical F-function and the shock
fitting of :mod:`advisory.physics.signature`:

* **K_S** (the shape-factor chart of [1]_, ``K_S`` against ``K_L``): by definition
  ``K_S = 2^(1/4) gamma (gamma+1)^(-1/2) sqrt(max_y int_0^y F) / l^(3/4)`` for the
  aircraft's effective area, which is what the chart tabulates for families of
  aircraft. It is evaluated in closed form for an idealised area: Whitham's parabolic
  body with the aircraft's length and largest cross-section, plus the lift-equivalent
  area rising as a smoothstep over the lifting stretch. The Abel integral of these
  polynomial pieces is exact. For orientation, the chart's band is about
  0.05-0.15 for ``0.002 < K_L < 0.05`` (value from memory). An aircraft file may
  override it (``carlson_shape_factor``).
* **K_P and K_t** (the pressure-amplification and duration-factor charts of [1]_,
  against altitude and Mach, for a standard atmosphere): evaluated from their
  definition as the ratio of the far-field N-wave in the stratified atmosphere to the
  uniform-atmosphere formula, along the centerline ray, by a one-dimensional
  quadrature (ray tube of the vertical-plane ray with refraction, acoustic impedance,
  and the ageing integral of Hayes [2]_). Both tend to 1 in a uniform atmosphere.
  For a standard atmosphere the chart's ``K_P`` is about 1.0-1.3 between 30,000 and
  60,000 ft (value from memory).

Wind and flight-path curvature are ignored (Carlson's centerline charts are for no
wind); the flight-path angle enters only the lift ``W cos(fpa)``.

References
----------
.. [1] H. W. Carlson, "Simplified sonic-boom prediction", NASA TP-1122, 1978
   (overpressure and duration equations, lift parameter, shape-factor,
   pressure-amplification and duration-factor charts; figure numbers not checked).
.. [2] W. D. Hayes, "Sonic boom", Annual Review of Fluid Mechanics 3, 1971,
   pp. 269-290.
.. [3] G. B. Whitham, "The flow pattern of a supersonic projectile", Comm. Pure Appl.
   Math. 5, 1952, pp. 301-348 (parabolic body, far-field N-wave).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from advisory.physics.aircraft import Aircraft
from advisory.physics.atmosphere import GAMMA, Atmosphere
from advisory.physics.signature import DEFAULT_REFLECTION_FACTOR

#: Whitham's far-field constant 2^(1/4) gamma (gamma+1)^(-1/2) (1.0747 for air) [3]_.
WHITHAM_CONSTANT = 2.0**0.25 * GAMMA / math.sqrt(GAMMA + 1.0)
#: Carlson's duration constant (value from memory; 2 (gamma+1)/gamma = 3.43).
DURATION_CONSTANT = 3.42

_N_SHAPE = 600


class CarlsonError(ValueError):
    """Bad input to Carlson's method; the message names the field and value."""


@dataclass(frozen=True)
class CarlsonFactors:
    """Carlson's factors for one flight condition (all dimensionless unless stated).

    Attributes
    ----------
    k_s, k_l, k_p, k_t, k_r : float
        Shape factor, lift parameter, pressure amplification factor, duration factor,
        reflection factor.
    effective_altitude_m : float
        Height of the aircraft above the ground, m.
    p_v_pa, p_g_pa, a_v_mps : float
        Pressure at the aircraft and at the ground (Pa), sound speed at the aircraft.
    reaches_ground : bool
        False below the cutoff Mach (the centerline ray turns before the ground).
    """

    k_s: float
    k_l: float
    k_p: float
    k_t: float
    k_r: float
    effective_altitude_m: float
    p_v_pa: float
    p_g_pa: float
    a_v_mps: float
    reaches_ground: bool


def lift_parameter(aircraft: Aircraft, mach: float, p_v_pa: float, load_factor: float = 1.0,
                   fpa_rad: float = 0.0) -> float:
    """Carlson's lift parameter ``K_L = beta W / (1.4 p_v M^2 l^2)`` [1]_.

    ``W`` is the weight carried, ``n m g0 cos(fpa)``. ``K_L`` is the lift-equivalent
    area behind the aircraft divided by ``l^2``.
    """
    beta = math.sqrt(mach * mach - 1.0)
    w = aircraft.lift_n(load_factor, fpa_rad)
    return beta * w / (GAMMA * p_v_pa * mach * mach * aircraft.length_m**2)


def _abel_poly(coeffs: np.ndarray, a: float, b: float, y: np.ndarray) -> np.ndarray:
    """Exact ``int_a^min(b, y) P(xi) / sqrt(y - xi) dxi`` for a cubic ``P`` (coeffs low first).

    With ``v = y - xi``, ``P(y - v) = sum_k q_k v^k`` and each term integrates to
    ``q_k v^(k+1/2) / (k + 1/2)``.
    """
    p = np.zeros(4)
    p[: coeffs.size] = coeffs
    y = np.asarray(y, dtype=float)
    # Coefficients of P(y - v) in powers of v (binomial expansion).
    q = [
        p[0] + p[1] * y + p[2] * y**2 + p[3] * y**3,
        -(p[1] + 2.0 * p[2] * y + 3.0 * p[3] * y**2),
        p[2] + 3.0 * p[3] * y,
        -p[3] + 0.0 * y,
    ]
    v_hi = np.maximum(y - a, 0.0)
    v_lo = np.maximum(y - b, 0.0)
    total = np.zeros_like(y)
    for k in range(4):
        e = k + 0.5
        total += q[k] * (v_hi**e - v_lo**e) / e
    return total


def shape_factor(aircraft: Aircraft, mach: float, p_v_pa: float, load_factor: float = 1.0,
                 fpa_rad: float = 0.0) -> float:
    """Carlson's shape factor ``K_S`` by the closed-form area model (module notes).

    The idealised effective area is Whitham's parabolic body
    ``S = 16 S_max u^2 (1-u)^2`` [3]_ plus ``B = K_L l^2 (3 s^2 - 2 s^3)`` over the
    lifting stretch; ``K_S = 2^(1/4) gamma (gamma+1)^(-1/2) sqrt(max A) / l^(3/4)``
    with ``A(y) = 1/(2 pi) int_0^y Ae'(xi)/sqrt(y - xi) dxi``. Returns the file's
    ``carlson_shape_factor`` when given.
    """
    if aircraft.carlson_shape_factor is not None:
        return float(aircraft.carlson_shape_factor)
    length = aircraft.length_m
    smax = aircraft.max_area_m2
    b_total = lift_parameter(aircraft, mach, p_v_pa, load_factor, fpa_rad) * length**2
    y = np.linspace(0.0, 1.5 * length, _N_SHAPE)
    # S'(x) = 16 S_max / L (2 u - 6 u^2 + 4 u^3), in powers of x.
    k = 16.0 * smax / length
    vol = np.array([0.0, 2.0 * k / length, -6.0 * k / length**2, 4.0 * k / length**3])
    j = _abel_poly(vol, 0.0, length, y)
    # B'(x) = b_total 6 s (1 - s) / D, s = (x - x1) / D, in powers of x.
    x1 = aircraft.lift_start_station * length
    d = (aircraft.lift_end_station - aircraft.lift_start_station) * length
    c = 6.0 * b_total / d**3  # B' = c (x - x1)(x1 + d - x)
    lift = np.array([-c * x1 * (x1 + d), c * (2.0 * x1 + d), -c])
    j = j + _abel_poly(lift, x1, x1 + d, y)
    area = j / (2.0 * math.pi)
    i = int(np.argmax(area))
    a_max = float(area[i])
    if 0 < i < area.size - 1:  # parabolic refinement of the maximum
        den = area[i - 1] - 2.0 * area[i] + area[i + 1]
        if den < 0.0:
            a_max = float(area[i] - 0.125 * (area[i + 1] - area[i - 1]) ** 2 / den)
    return WHITHAM_CONSTANT * math.sqrt(max(a_max, 0.0)) / length**0.75


def _segment(sa: np.ndarray, sb: np.ndarray, wa: np.ndarray, wb: np.ndarray) -> np.ndarray:
    """Exact ``int w(s)/sqrt(s) ds`` on segments with ``w`` linear in ``s``."""
    ra, rb = np.sqrt(sa), np.sqrt(sb)
    return (sb - sa) / (ra + rb) * (2.0 * wa + (2.0 / 3.0) * (wb - wa) * (1.0 + ra / (ra + rb)))


def atmosphere_factors(mach: float, altitude_m: float, atmosphere: Atmosphere,
                       ground_elevation_m: float = 0.0) -> tuple[float, float, bool]:
    """Carlson's ``K_P`` and ``K_t`` from their definition along the centerline ray.

    The centerline ray of level flight keeps the horizontal slowness
    ``s = 1/(M a_v)``; its vertical slowness is ``q = sqrt(1/c^2 - s^2)`` (Snell).
    The ray-tube width across the track grows as ``int dz / q``, so the linear
    amplitude factor is ``G = p_v gamma M^2 / sqrt(2 beta) sqrt(rho / (rho_v q int dz/q))``
    (wave-action conservation, matched to Whitham's near field; Hayes [2]_), the
    ageing is ``a = M a_v int (gamma+1) G / (2 rho c^2) dt`` with ``dt = dz / (c^2 q)``,
    and the far-field N-wave is ``dp = K_R G_g sqrt(2 A / a)``,
    ``dt = 2 sqrt(2 A a) / (M a_v)``. Dividing by Carlson's equations with ``K_P = K_t = 1``
    gives::

        K_P = G_g sqrt(2 / a) / (C sqrt(p_v p_g) beta^(1/4) h_e^(-3/4))
        K_t = 2 sqrt(2 a) beta^(3/4) / (3.42 C M^2 h_e^(1/4)),   C = 2^(1/4) gamma / sqrt(gamma+1)

    Both are 1 (``K_t``: 1.0025, Carlson's rounding of 3.43) in a uniform atmosphere.

    Returns
    -------
    k_p, k_t, reaches_ground : (float, float, bool)
        ``(0, 0, False)`` when the centerline ray turns before the ground.
    """
    z = atmosphere.z_m
    inner = z[(z < altitude_m) & (z > ground_elevation_m)][::-1]
    lz = np.concatenate([[altitude_m], inner, [ground_elevation_m]])
    c = np.interp(lz, z, atmosphere.sound_speed_mps)
    rho = np.exp(np.interp(lz, z, np.log(atmosphere.density_kgm3)))
    p = np.exp(np.interp(lz, z, np.log(atmosphere.pressure_pa)))
    beta = math.sqrt(mach * mach - 1.0)
    s = 1.0 / (mach * c[0])
    qq = 1.0 / c**2 - s * s
    if np.any(qq[1:] <= 0.0):
        return 0.0, 0.0, False
    q = np.sqrt(qq)
    dz = lz[:-1] - lz[1:]
    width = np.concatenate([[0.0], np.cumsum(2.0 * dz / (q[:-1] + q[1:]))])  # int dz / q
    depth = altitude_m - lz  # s = h - z, the integration variable
    g = np.empty_like(lz)
    g[0] = math.inf
    g[1:] = p[0] * GAMMA * mach**2 / math.sqrt(2.0 * beta) * np.sqrt(
        rho[1:] / (rho[0] * q[1:] * width[1:])
    )
    # Ageing integrand per unit depth, (gamma+1) G / (2 rho c^2) * dt/dz with dt/dz = 1/(c^2 q);
    # it behaves as depth^(-1/2) at the aircraft: integrate w / sqrt(depth), w linear.
    w = (GAMMA + 1.0) * g[1:] / (2.0 * rho[1:] * c[1:] ** 2) / (c[1:] ** 2 * q[1:]) * np.sqrt(
        depth[1:]
    )
    integral = 2.0 * w[0] * math.sqrt(depth[1]) + float(np.sum(_segment(depth[1:-1], depth[2:],
                                                                        w[:-1], w[1:])))
    age = mach * c[0] * integral
    h_e = altitude_m - ground_elevation_m
    k_p = g[-1] * math.sqrt(2.0 / age) / (
        WHITHAM_CONSTANT * math.sqrt(p[0] * p[-1]) * beta**0.25 * h_e**-0.75
    )
    k_t = 2.0 * math.sqrt(2.0 * age) * beta**0.75 / (
        DURATION_CONSTANT * WHITHAM_CONSTANT * mach**2 * h_e**0.25
    )
    return float(k_p), float(k_t), True


def _check(name: str, value: float, lo: float, hi: float) -> float:
    v = float(value)
    if not math.isfinite(v) or not (lo <= v <= hi):
        raise CarlsonError(f"{name}: {value!r} is outside [{lo:g}, {hi:g}]")
    return v


def carlson_factors(aircraft: Aircraft, mach: float, altitude_m: float, atmosphere: Atmosphere,
                    ground_elevation_m: float = 0.0, fpa_rad: float = 0.0,
                    reflection_factor: float = DEFAULT_REFLECTION_FACTOR,
                    load_factor: float = 1.0) -> CarlsonFactors:
    """All of Carlson's factors for one flight condition (see :func:`carlson_overpressure`)."""
    _check("mach", mach, 1.0, 5.0)
    lo, hi = float(atmosphere.z_m[0]), float(atmosphere.z_m[-1])
    _check("ground_elevation", ground_elevation_m, lo, hi)
    _check("altitude", altitude_m, lo, hi)
    if altitude_m <= ground_elevation_m:
        raise CarlsonError(
            f"altitude: {altitude_m!r} m must be above the ground ({ground_elevation_m!r} m)"
        )
    _check("fpa", math.degrees(fpa_rad), -30.0, 30.0)
    _check("reflection_factor", reflection_factor, 1.0, 2.0)
    _check("load_factor", load_factor, 0.0, 9.0)
    vehicle = atmosphere.at(altitude_m)
    ground = atmosphere.at(ground_elevation_m)
    if mach <= 1.0:
        k_p = k_t = 0.0
        reaches = False
        k_l = k_s = 0.0
    else:
        k_p, k_t, reaches = atmosphere_factors(mach, altitude_m, atmosphere, ground_elevation_m)
        k_l = lift_parameter(aircraft, mach, vehicle.pressure_pa, load_factor, fpa_rad)
        k_s = shape_factor(aircraft, mach, vehicle.pressure_pa, load_factor, fpa_rad)
    return CarlsonFactors(
        k_s=k_s, k_l=k_l, k_p=k_p, k_t=k_t, k_r=float(reflection_factor),
        effective_altitude_m=float(altitude_m - ground_elevation_m),
        p_v_pa=vehicle.pressure_pa, p_g_pa=ground.pressure_pa,
        a_v_mps=vehicle.sound_speed_mps, reaches_ground=reaches,
    )


def carlson_overpressure(aircraft: Aircraft, mach: float, altitude_m: float,
                         atmosphere: Atmosphere, ground_elevation_m: float = 0.0,
                         fpa_rad: float = 0.0,
                         reflection_factor: float = DEFAULT_REFLECTION_FACTOR,
                         load_factor: float = 1.0) -> tuple[float, float]:
    """Centerline peak overpressure (Pa) and duration (s) by Carlson's method [1]_.

    Parameters
    ----------
    aircraft : Aircraft
    mach : float
        Mach number at the aircraft.
    altitude_m, ground_elevation_m : float
        Geometric altitude of the aircraft and of the ground above mean sea level, m.
    atmosphere : Atmosphere
        Supplies ``p_v``, ``a_v``, ``p_g`` and the profile for ``K_P``, ``K_t``.
    fpa_rad : float
        Flight-path angle, rad (lift ``W cos(fpa)`` only).
    reflection_factor : float
        ``K_R``, 1-2 (default 1.9; common practice, no source).
    load_factor : float
        Lift relative to steady flight.

    Returns
    -------
    (overpressure_pa, duration_s) : (float, float)
        ``(0, 0)`` at or below Mach 1 or below the cutoff Mach.

    Raises
    ------
    CarlsonError
        For an input out of range; the message names the field and value.
    """
    f = carlson_factors(aircraft, mach, altitude_m, atmosphere, ground_elevation_m, fpa_rad,
                        reflection_factor, load_factor)
    if not f.reaches_ground:
        return 0.0, 0.0
    beta = math.sqrt(mach * mach - 1.0)
    h_e = f.effective_altitude_m
    length = aircraft.length_m
    dp = (f.k_p * f.k_r * math.sqrt(f.p_v_pa * f.p_g_pa) * beta**0.25 * h_e**-0.75
          * length**0.75 * f.k_s)
    dt = (f.k_t * DURATION_CONSTANT / f.a_v_mps * mach / beta**0.75 * h_e**0.25
          * length**0.75 * f.k_s)
    return float(dp), float(dt)
