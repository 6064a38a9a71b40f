"""Altitude along the trajectory ahead where the speed of sound changes with height.

The true airspeed is ``M a(h)`` and the climb ``dh/dt = V sin(gamma)``, so the altitudes
and the speeds of sound depend on each other: fixed-point (Picard) passes, each
integrating the climb with the speeds of sound of the altitudes before, until the
altitudes move less than a millimetre (:data:`PICARD_PASSES` at most), stepped as
:func:`advisory.pipeline.propagate.propagate_kernel` steps it (trapezoidal speed, the
flight-path angle's exact mean over each step, :func:`advisory.pipeline.pitch.fpa_step_means`).
A level-off planned with the airspeed at its start misses the selected altitude where the
speed changes with height; :func:`capture_moved` moves the capture so that the integrated
climb levels there. Used by :func:`advisory.pipeline.trajectory.predict_trajectory`.
"""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np

from advisory.pipeline.pitch import fpa_step_means

__all__ = ["PICARD_PASSES", "SpeedOfSound", "altitudes", "capture_moved", "cumtrapz",
           "sound_speed"]

PICARD_PASSES = 8  #: most altitude passes when the speed of sound depends on altitude

#: A speed of sound (m/s), or a function of a float64 array of altitudes (m) giving it.
SpeedOfSound = float | Callable[[np.ndarray], np.ndarray]


def cumtrapz(y: np.ndarray, dt: np.ndarray) -> np.ndarray:
    """Cumulative trapezoidal integral of ``y`` over steps ``dt`` (0 first)."""
    out = np.empty_like(y)
    out[0] = 0.0
    np.cumsum(0.5 * (y[1:] + y[:-1]) * dt, out=out[1:])
    return out


def sound_speed(speed_of_sound: SpeedOfSound, alt: np.ndarray) -> np.ndarray:
    """The speed of sound (m/s) at altitudes ``alt`` (m), checked positive and finite."""
    a = speed_of_sound(alt) if callable(speed_of_sound) else speed_of_sound
    a = np.broadcast_to(np.asarray(a, dtype=np.float64), alt.shape)
    bad = ~(np.isfinite(a) & (a > 0.0))
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        raise ValueError(f"speed_of_sound must be a positive finite speed in m/s, got "
                         f"{a[i]!r} at altitude {alt[i]:.1f} m")
    return np.ascontiguousarray(a)


def altitudes(t: np.ndarray, m: np.ndarray, h0: float, a0: float, fpa: float,
              pitch: tuple[float, float, float] | None, speed_of_sound: Callable
              ) -> tuple[np.ndarray, np.ndarray]:
    """Altitudes (m) and speeds of sound (m/s) over ``t``: fixed-point passes until the
    altitudes settle, the climb stepped as the kernel steps it (the mean angle over each
    step when ``pitch`` = (rate, start, end) is given)."""
    sin_g = math.sin(fpa)
    alt = h0 + (float(m[0]) * a0 * sin_g) * t
    a = sound_speed(speed_of_sound, alt)
    if sin_g == 0.0 and pitch is None:
        return alt, a
    dt = np.diff(t)
    if pitch is not None:
        sin_mid = np.sin(fpa_step_means(t, fpa, pitch[0], pitch[2], pitch[1]))
    for _ in range(PICARD_PASSES):
        if pitch is not None:
            v = m * a
            new_alt = np.concatenate(([h0], h0 + np.cumsum(
                0.5 * (v[1:] + v[:-1]) * sin_mid * dt)))
        else:
            new_alt = h0 + cumtrapz(m * a * sin_g, dt)
        a = sound_speed(speed_of_sound, new_alt)
        settled = np.abs(new_alt - alt).max() < 1e-3
        alt = new_alt
        if settled:
            break
    return alt, a


def capture_moved(t: np.ndarray, alt: np.ndarray, h_sel: float, start: float, end: float,
                  v_start: float, fpa: float) -> tuple[float, float]:
    """The capture's (start, end), s, moved so that the path levels at ``h_sel``: the
    level reached misses it by ``err`` where the airspeed changed with height, and
    starting ``err / (V sin gamma0)`` earlier takes that much height off."""
    err = float(np.interp(end, t, alt)) - h_sel
    shift = err / (v_start * math.sin(fpa))
    shift = min(shift, start)  # never before now
    return start - shift, end - shift
