"""Ground signature: the boom at the ground end of one ray.

Pipeline for one ray
--------------------
1. **F-function** of the aircraft's equivalent area (volume plus lift), exactly for a
   piecewise-linear area slope: :mod:`advisory.physics.ffunction` (Whitham [1]_).

2. **Linear amplitude** along the ray is ``p = G F(y)`` with ``G`` from the ray tube
   (:class:`advisory.physics.rays.RayPath`), matched to Whitham's near field
   ``p = p0 gamma M^2 F / sqrt(2 beta r)``.

3. **Ageing** (nonlinear steepening along the ray, age ``a``) and 4. **shocks** by
   Whitham's equal-area rule [2]_: :mod:`advisory.physics.shocks`.

5. **Ground result**: peak overpressure ``R G_ground max F`` (for an N-wave the value
   just behind the bow shock), bow and tail shock jumps ``R G_ground dF``, duration
   ``(Y_tail - Y_bow) Omega0 / (M c0)`` (the ``y``-to-time conversion of
   :mod:`advisory.physics.shocks`), with ``R`` the ground reflection factor (1.9 by
   default; common practice, no source).

Far field check (uniform atmosphere, Whitham [1]_ [2]_): the bow shock tends to
``dp / p0 = 2^(1/4) gamma (gamma+1)^(-1/2) beta^(1/4) r^(-3/4) sqrt(max A)``.

References
----------
.. [1] G. B. Whitham, "The flow pattern of a supersonic projectile", Comm. Pure Appl.
   Math. 5, 1952, pp. 301-348.
.. [2] G. B. Whitham, "On the propagation of weak shock waves", J. Fluid Mech. 1,
   1956, pp. 290-318.
.. [3] A. D. Pierce, *Acoustics: An Introduction to Its Physical Principles and
   Applications*, Acoustical Society of America, 1989, ch. 8.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from advisory.physics.aircraft import Aircraft
from advisory.physics.ffunction import f_function_parts
from advisory.physics.rays import MACH_LIMIT, RayPath
from advisory.physics.shocks import signature_kernel

#: Default ground reflection factor (common practice, no source).
DEFAULT_REFLECTION_FACTOR = 1.9
#: Accepted reflection factors: 1 (no reflection) to 2 (rigid flat ground).
REFLECTION_FACTOR_RANGE = (1.0, 2.0)
#: Accepted sound speed (m/s) and pressure (Pa) at the aircraft, and load factor.
SOUND_SPEED_RANGE_MPS = (150.0, 450.0)
PRESSURE_RANGE_PA = (1.0, 2.0e5)
LOAD_FACTOR_RANGE = (0.0, 9.0)
#: Cap of the focus-boom amplification factor. Focus booms ("superbooms") of 2-5
#: times the steady carpet level are commonly quoted; the cap takes the upper end so
#: that an advisory does not understate a focus (value from memory).
FOCUS_AMPLIFICATION_CAP = 5.0
#: A ray whose wave normal meets the ground at a grazing angle with sine below this
#: is flagged ``edge`` (near the lateral cutoff; common practice, no source).
EDGE_GRAZING_SINE = 0.1


# --------------------------------------------------------------------------------------
# Ground signature
# --------------------------------------------------------------------------------------


class SignatureError(ValueError):
    """Bad input to the signature functions; the message names the field and value."""


@dataclass(frozen=True)
class Signature:
    """Boom at the ground end of one ray (SI; finite, never NaN).

    Attributes
    ----------
    overpressure_pa : float
        Peak overpressure including ground reflection, Pa (>= 0).
    bow_shock_pa, tail_shock_pa : float
        Pressure jumps across the bow and tail shocks, Pa (>= 0).
    duration_s : float
        Time between bow and tail shocks, s.
    arrival_s : float
        Bow-shock arrival after the nose passed the emission point, s.
    reaches_ground : bool
        False when the ray turns before the ground (all values zero).
    caustic : bool
        The ray tube collapsed at the ground (G not finite); values use the last
        level with a finite G.
    edge : bool
        Near the lateral cutoff: the ray grazes the ground (sine of the grazing angle
        below :data:`EDGE_GRAZING_SINE`) or does not reach it.
    interior_shocks : int
        Shocks between bow and tail.
    age_m05 : float
        Age ``a`` of the F-curve at the ground, m^0.5.
    """

    overpressure_pa: float
    bow_shock_pa: float
    tail_shock_pa: float
    duration_s: float
    arrival_s: float
    reaches_ground: bool
    caustic: bool
    edge: bool
    interior_shocks: int = 0
    age_m05: float = 0.0


def _no_boom(arrival: float = 0.0) -> Signature:
    return Signature(0.0, 0.0, 0.0, 0.0, arrival, False, False, True, 0, 0.0)


def _check(name: str, value: float, lo: float, hi: float) -> float:
    v = float(value)
    if not math.isfinite(v) or not (lo <= v <= hi):
        raise SignatureError(f"{name}: {value!r} is outside [{lo:g}, {hi:g}]")
    return v


def ground_signature(aircraft: Aircraft, ray: RayPath, mach: float, c0: float, p0: float,
                     load_factor: float = 1.0,
                     reflection_factor: float = DEFAULT_REFLECTION_FACTOR,
                     fpa_rad: float = 0.0, bank_rad: float = 0.0) -> Signature:
    """Ground boom of ``aircraft`` at the end of ``ray`` (see the module notes).

    Parameters
    ----------
    aircraft : Aircraft
        Size, weight and area distribution.
    ray : RayPath
        From :meth:`advisory.physics.rays.RayTracer.trace`; its azimuth sets the lift
        factor ``cos(phi)``.
    mach : float
        Mach number at the aircraft (> 1).
    c0, p0 : float
        Sound speed (m/s) and pressure (Pa) at the aircraft.
    load_factor : float
        Lift relative to steady flight (1 in steady flight; 2 in a 60-degree turn).
    reflection_factor : float
        Ground reflection factor, 1-2 (default 1.9; common practice, no source).
    fpa_rad : float
        Flight-path angle, rad (lift ``n W cos(fpa)``).
    bank_rad : float
        Bank, rad, positive right wing down: the lift plane turns with it, so the ray at
        azimuth ``phi`` sees the lift ``cos(phi + bank)`` (Walkden's lift-equivalent
        area along the ray's azimuth; :mod:`advisory.tables.lift`).

    Returns
    -------
    Signature
        Zero and ``edge`` when the ray does not reach the ground; flagged finite values
        at a caustic; never NaN.

    Raises
    ------
    SignatureError
        For a Mach number, sound speed, pressure, load factor or reflection factor out
        of range.
    """
    _check("mach", mach, 1.0, MACH_LIMIT)
    _check("c0", c0, *SOUND_SPEED_RANGE_MPS)
    _check("p0", p0, *PRESSURE_RANGE_PA)
    _check("load_factor", load_factor, *LOAD_FACTOR_RANGE)
    _check("reflection_factor", reflection_factor, *REFLECTION_FACTOR_RANGE)
    if mach <= 1.0 or not ray.reaches_ground or ray.t_s.size < 2:
        return _no_boom()
    parts = f_function_parts(aircraft)
    lift_area = aircraft.lift_area_total(mach, p0, load_factor, fpa_rad, ray.phi_rad + bank_rad)
    omega0 = float(ray.omega[0]) if ray.omega.size else 1.0
    age_scale = mach * c0 / omega0
    g = ray.amplitude_factor
    m = g.size
    out = np.empty((parts.y_m.size + 2, 3))
    rows, f_max, f_min, age, last = signature_kernel(
        parts.y_m, parts.f_volume, parts.area_volume, parts.f_lift_unit,
        parts.area_lift_unit, lift_area, ray.t_s, g, ray.density_kgm3,
        ray.sound_speed_mps, m, age_scale, out,
    )
    shocks = out[:rows]
    if last < 1:
        return _no_boom()
    caustic = last < m - 1
    g_ground = float(g[last])
    gq = float(ray.q[-1] * ray.sound_speed_mps[-1] / ray.omega[-1]) if ray.q.size else 0.0
    edge = caustic or not (gq >= EDGE_GRAZING_SINE)
    k = reflection_factor * g_ground
    to_time = omega0 / (mach * c0)
    bow_y, tail_y = float(shocks[0, 0]), float(shocks[-1, 0])
    values = (
        k * max(float(f_max), 0.0),
        k * max(float(shocks[0, 2] - shocks[0, 1]), 0.0),
        k * max(float(shocks[-1, 2] - shocks[-1, 1]), 0.0),
        max(tail_y - bow_y, 0.0) * to_time,
        float(ray.t_s[last]) + bow_y * to_time,
    )
    if not all(math.isfinite(v) for v in values):
        return Signature(0.0, 0.0, 0.0, 0.0, float(ray.t_s[last]), True, caustic, True, 0,
                         float(age) if math.isfinite(age) else 0.0)
    return Signature(*values, reaches_ground=True, caustic=caustic, edge=edge,
                     interior_shocks=int(shocks.shape[0] - 2), age_m05=float(age))


def focus_amplification(area_steady: float, area_actual: float,
                        cap: float = FOCUS_AMPLIFICATION_CAP) -> float:
    """Bounded focus-boom amplification ``sqrt(area_steady / area_actual)``.

    Linear acoustics scales the amplitude as the inverse square root of the ray-tube
    area (Pierce [3]_ ch. 8), which diverges where the tube collapses (a focus). The
    factor is capped at ``cap`` (default :data:`FOCUS_AMPLIFICATION_CAP` = 5.0, the upper
    end of the 2-5x focus-boom levels commonly quoted; value from memory).

    Parameters
    ----------
    area_steady : float
        Ray-tube area of the steady (unfocused) reference, any unit.
    area_actual : float
        Ray-tube area where the boom is wanted, same unit.
    cap : float
        Upper bound, >= 1.

    Returns
    -------
    float
        In ``[0, cap]``; ``cap`` for a collapsed (<= 0), infinite-ratio or NaN actual
        area, 1.0 when the steady area is unusable; never NaN.
    """
    cap = float(cap) if math.isfinite(cap) and cap >= 1.0 else FOCUS_AMPLIFICATION_CAP
    a_s = float(area_steady)
    a_a = abs(float(area_actual))
    if not math.isfinite(a_s) or a_s <= 0.0:
        return 1.0
    if not math.isfinite(a_a):
        return 0.0 if a_a == math.inf else cap
    if a_a <= 0.0:
        return cap
    ratio = a_s / a_a
    if not math.isfinite(ratio):
        return cap
    return min(math.sqrt(ratio), cap)
