"""Pitch manoeuvres ahead: how fast the flight-path angle changes, and for how long.

The flight-path angle changes at ``gamma_dot``: from the normal load factor ``n`` when
sent, by the point-mass equation of motion normal to the
path in the vertical plane, ``V gamma_dot = g (n cos(phi) - cos(gamma))`` (lift
``n W`` tilted by the bank ``phi``; *Flight Dynamics*, Princeton University Press,
2004, ch. 2, value from memory), else from the body pitch rate ``q`` by the Euler-angle
kinematics ``q = theta_dot cos(phi) + psi_dot cos(theta) sin(phi)`` (same source) with
the pitch attitude's rate taken as the flight-path angle's (angle of attack held:
``gamma_dot = (q - psi_dot cos(gamma) sin(phi)) / cos(phi)``). The load factor is
preferred: it is the path's curvature itself, while the pitch rate leads it by the
change of the angle of attack. Rates below :data:`PITCH_DEADBAND_RAD_S` are taken as
zero (sensor noise: a 0.01 g bias is 0.01 deg/s at Mach 1.6). A push-over does not go
on for ever: the rate is held for :data:`PITCH_HOLD_S` and never takes the flight-path
angle past :data:`PITCH_FPA_LIMIT_RAD`, then the angle reached is held (engineering
choices, no source: a pitch manoeuvre of a large aircraft lasts seconds, and the
default table's fpa axis ends at 10 deg). The fold of a push-over comes from the
first emissions of the manoeuvre; the hold only decides where it ends.

A climb or descent toward the altitude the crew has selected levels off there
(:func:`level_off`): the angle is held until the capture, then taken to zero at a
constant rate ``q``; with the true airspeed ``V`` held, the height gained during the
capture is ``V (1 - cos gamma0) / q`` (the integral of ``V sin(gamma0 - q t)`` over the
capture's ``gamma0 / q`` seconds; closed form), so the capture starts that far short of
the selected altitude. The rate is the aircraft's (its altitude-capture law; the
advisor's configuration ``capture_pitch_rate_deg_s``): by default
:data:`CAPTURE_RATE_RAD_S`, 1 deg/s, the level-off the scenarios' pilots fly
(``docs/scenarios.md``; at Mach 1.6 and 60,000 ft a normal load of about 0.16 g, a
push-over steep enough to fold the carpet, so the level-off's focus is predicted; an
autopilot capturing at 0.1 g would be 0.12 deg/s there; common practice, no source).
A pitch manoeuvre under way that takes the angle toward zero with a selected altitude
ahead is a capture already flown by hand: it ends at zero, not after
:data:`PITCH_HOLD_S`.

These helpers feed :func:`advisory.pipeline.trajectory.predict_trajectory`, whose kernel
steps the angle :func:`fpa_profile` gives with its exact mean over each step
(:func:`fpa_step_means`; the average of a step's end values would miss where the
profile bends inside a step: about 1 m of a level-off's height at 1-s steps).
"""

from __future__ import annotations

import math

import numpy as np

from advisory.units import G0

__all__ = ["PITCH_HOLD_S", "PITCH_FPA_LIMIT_RAD", "PITCH_DEADBAND_RAD_S", "CAPTURE_RATE_RAD_S",
           "flight_path_rate", "pitch_end_s", "fpa_profile", "fpa_step_means", "level_off"]

#: How long a pitch rate is held ahead, s (module notes; engineering choice, no source).
PITCH_HOLD_S = 5.0
#: The held pitch rate stops when |flight-path angle| reaches this, rad (module notes).
PITCH_FPA_LIMIT_RAD = math.radians(10.0)
#: Flight-path-angle rates below this are taken as zero, rad/s (module notes).
PITCH_DEADBAND_RAD_S = math.radians(0.1)
#: Default pitch rate of a predicted level-off at the selected altitude, rad/s (module
#: notes).
CAPTURE_RATE_RAD_S = math.radians(1.0)


def flight_path_rate(fpa_rad: float, bank_rad: float, tas_mps: float,
                     pitch_rate_rad_s: float | None, load_factor: float | None,
                     g: float = G0) -> float:
    """Rate of change of the flight-path angle, rad/s (module notes).

    Parameters
    ----------
    fpa_rad, bank_rad : float
        Flight-path angle and bank, rad.
    tas_mps : float
        True airspeed, m/s (> 0).
    pitch_rate_rad_s : float or None
        Body pitch rate ``q``, rad/s, nose up positive (used without a load factor).
    load_factor : float or None
        Normal load factor ``n`` (lift over weight); preferred when given.
    g : float
        Gravity, m/s^2.

    Returns
    -------
    float
        ``gamma_dot``, rad/s; 0 without either input or below
        :data:`PITCH_DEADBAND_RAD_S`.
    """
    cb = math.cos(bank_rad)
    if load_factor is not None:
        rate = g * (load_factor * cb - math.cos(fpa_rad)) / tas_mps
    elif pitch_rate_rad_s is not None:
        psi_dot = g * math.tan(bank_rad) / tas_mps
        rate = (pitch_rate_rad_s - psi_dot * math.cos(fpa_rad) * math.sin(bank_rad)) / cb
    else:
        return 0.0
    return rate if abs(rate) >= PITCH_DEADBAND_RAD_S else 0.0


def pitch_end_s(fpa_rad: float, rate_rad_s: float) -> float:
    """How long the rate is held ahead, s: :data:`PITCH_HOLD_S`, cut where the angle
    reaches :data:`PITCH_FPA_LIMIT_RAD` (0 when it is there already or the rate is 0)."""
    if rate_rad_s == 0.0:
        return 0.0
    room = PITCH_FPA_LIMIT_RAD - (fpa_rad if rate_rad_s > 0.0 else -fpa_rad)
    return min(PITCH_HOLD_S, max(room, 0.0) / abs(rate_rad_s))


def fpa_profile(t: np.ndarray, fpa0: float, rate_rad_s: float, end_s: float,
                start_s: float = 0.0) -> np.ndarray:
    """Flight-path angle at times ``t``, rad:
    ``fpa0 + rate (min(max(t, start_s), end_s) - start_s)``."""
    return fpa0 + rate_rad_s * (np.clip(t, start_s, end_s) - start_s)


def fpa_step_means(t: np.ndarray, fpa0: float, rate_rad_s: float, end_s: float,
                   start_s: float = 0.0) -> np.ndarray:
    """The mean of :func:`fpa_profile` over each step ``[t[i], t[i+1]]``, rad (exact: the
    profile's integral ``F`` is 0, then ``(t - start)^2 / 2``, then linear)."""
    ramp = end_s - start_s
    u = np.clip(t, start_s, end_s) - start_s
    f = 0.5 * u * u + ramp * np.maximum(t - end_s, 0.0)
    return fpa0 + rate_rad_s * np.diff(f) / np.diff(t)


def level_off(fpa_rad: float, alt_m: float, target_alt_m: float, tas_mps: float,
              rate_rad_s: float = CAPTURE_RATE_RAD_S) -> tuple[float, float, float] | None:
    """The capture of the selected altitude ahead (module notes), or None.

    Parameters
    ----------
    fpa_rad : float
        Present flight-path angle, rad, positive climbing.
    alt_m, target_alt_m : float
        Present and selected altitude, m (the same reference).
    tas_mps : float
        True airspeed, m/s (> 0), taken as held through the capture.
    rate_rad_s : float
        The capture's pitch rate, rad/s (> 0).

    Returns
    -------
    (rate, start, end) or None
        The angle's rate during the capture (rad/s, toward zero) and when it starts and
        ends (s from now), for :func:`fpa_profile`; None when the path is level or
        leads away from the selected altitude. When the capture should have started
        already it starts now, at the rate that still ends at the selected altitude.
    """
    if fpa_rad == 0.0:
        return None
    up = 1.0 if fpa_rad > 0.0 else -1.0
    left = (target_alt_m - alt_m) * up
    if left <= 0.0:
        return None
    gam = abs(fpa_rad)
    rise = tas_mps * (1.0 - math.cos(gam))  # height of the capture times its rate, m rad/s
    q = rate_rad_s
    start = (left - rise / q) / (tas_mps * math.sin(gam))
    if start < 0.0:
        start, q = 0.0, rise / left
    return -up * q, start, start + gam / q
