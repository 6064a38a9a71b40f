"""The trajectory's stepping kernel: a coordinated turn with Mach and climb in a frame plane.

:func:`advisory.pipeline.trajectory.predict_trajectory` (its physics notes: coordinated
turn, climb, pitch, Mach, wind, and the integration scheme) and the trajectories derived
from a predicted one (:mod:`advisory.pipeline.history`) run it; the trials of
:mod:`advisory.pipeline.trial` take its ground-to-plane step. Its numpy twin is in
``tests/twins/trajectory.py``.
"""

from __future__ import annotations

import math

import numpy as np

from advisory.jit import njit

__all__ = ["PROPAGATE_PARAMS", "PROPAGATE_ROWS", "ground_to_plane", "propagate_kernel"]

#: Rows of the array returned by :func:`propagate_kernel`.
PROPAGATE_ROWS = ("east_m", "north_m", "alt_m", "tas_mps", "heading_grid_rad",
                  "turn_rate_rad_s", "bank_rad", "track_grid_rad", "ground_speed_mps")
#: Order of the entries of the ``params`` argument of :func:`propagate_kernel`; the last
#: three are optional (12 entries: the flight-path angle is held; 14: it changes from
#: t = 0).
PROPAGATE_PARAMS = ("h0", "sin_fpa", "cos_fpa", "bank", "turn_limit", "psi0", "wind_e",
                    "wind_n", "e0", "n0", "radius", "g", "fpa_rate", "pitch_end_s",
                    "pitch_start_s")



@njit(cache=True)
def ground_to_plane(east: float, north: float, de: float, dn: float, radius: float
                    ) -> tuple[float, float]:
    """A step flown over the ground, as a step in the frame's plane.

    Parameters
    ----------
    east, north : float
        Plane point where the map scales are taken (the step's mid-point), m.
    de, dn : float
        The step as flown over the ground (east, north), m.
    radius : float
        Radius of the frame's sphere, m.

    Returns
    -------
    (float, float)
        The step in the plane, m: its radial part (from the frame's origin) times the
        radial map scale ``sqrt(1 - (rho / 2R)^2)``, its tangential part divided by it.

    Notes
    -----
    The scales of Lambert's azimuthal equal-area projection on a sphere, radial
    ``cos(c/2)`` and tangential ``1/cos(c/2)`` at plane distance ``rho = 2R sin(c/2)``
    (J. P. Snyder, Map Projections - A Working Manual, USGS Professional Paper 1395,
    1987, section 24); the frame is :mod:`advisory.geo.frame`.
    """
    rho = math.hypot(east, north)
    if rho <= 0.0:
        return de, dn
    q = 0.5 * rho / radius
    h = math.sqrt(max(1.0 - q * q, 1e-300))
    ue = east / rho
    un = north / rho
    rad = de * ue + dn * un
    te = de - rad * ue
    tn = dn - rad * un
    return h * rad * ue + te / h, h * rad * un + tn / h


@njit(cache=True)
def propagate_kernel(t: np.ndarray, mach: np.ndarray, a: np.ndarray, params: np.ndarray
                     ) -> np.ndarray:
    """Step a coordinated turn with Mach and climb in a frame plane.

    Parameters
    ----------
    t : ndarray
        float64 (N,) times, s, increasing from 0.
    mach, a : ndarray
        float64 (N,) Mach number and speed of sound (m/s) at those times.
    params : ndarray
        float64 (12,) or (14,) in the order of :data:`PROPAGATE_PARAMS`: altitude at
        t = 0 (m); sine and cosine of the flight-path angle; bank (rad, positive right);
        signed heading change at which the turn ends (rad, NaN for none); grid heading at
        t = 0 (rad); wind grid components east and north (m/s); start position in the
        frame (m, m); the frame's Gaussian radius (m; map scales
        ``h = sqrt(1 - (rho/2R)**2)`` radial, ``1/h`` transverse); gravity (m/s^2);
        optionally the flight-path angle's rate (rad/s), the time it is held to (s) and
        the time it starts (s, default 0): the angle is then
        ``gamma0 + rate (min(max(t, start), end) - start)``
        (:func:`advisory.pipeline.pitch.fpa_profile`),
        stepped with its exact mean over each step (12 entries: held constant).

    Returns
    -------
    ndarray
        float64 (9, N), rows named by :data:`PROPAGATE_ROWS`: position (m), altitude
        (m), true airspeed (m/s), grid heading (rad, [0, 2 pi)), turn rate (rad/s),
        bank (rad), grid track (rad, [0, 2 pi)), ground speed (m/s).
    """
    h0 = params[0]
    sin_g = params[1]
    cos_g = params[2]
    bank = params[3]
    turn_limit = params[4]
    psi0 = params[5]
    wind_e = params[6]
    wind_n = params[7]
    radius = params[10]
    g = params[11]
    n = t.shape[0]
    out = np.empty((9, n))
    east = out[0]
    north = out[1]
    alt = out[2]
    tas = out[3]
    psi = out[4]
    omega = out[5]
    bank_out = out[6]
    tan_b = math.tan(bank)
    has_limit = not math.isnan(turn_limit)
    g_start = params[14] if params.shape[0] > 14 else 0.0
    pitching = params.shape[0] > 13 and params[12] != 0.0 and params[13] > g_start
    g_rate = params[12] if pitching else 0.0
    g_end = params[13] if pitching else 0.0
    gam0 = math.atan2(sin_g, cos_g)
    for i in range(n):
        tas[i] = mach[i] * a[i]
        omega[i] = g * tan_b / tas[i]
        bank_out[i] = bank
    east[0] = params[8]
    north[0] = params[9]
    alt[0] = h0
    psi[0] = psi0
    turned = 0.0
    rolled = has_limit and turn_limit == 0.0
    if rolled:
        omega[0] = 0.0
        bank_out[0] = 0.0
    for i in range(1, n):
        dt = t[i] - t[i - 1]
        sg = sin_g
        cg = cos_g
        if pitching:  # the angle's exact mean over the step (pitch.fpa_step_means)
            u0 = min(max(t[i - 1], g_start), g_end) - g_start
            u1 = min(max(t[i], g_start), g_end) - g_start
            f0 = 0.5 * u0 * u0 + (g_end - g_start) * max(t[i - 1] - g_end, 0.0)
            f1 = 0.5 * u1 * u1 + (g_end - g_start) * max(t[i] - g_end, 0.0)
            gm = gam0 + g_rate * (f1 - f0) / dt
            sg = math.sin(gm)
            cg = math.cos(gm)
        alt[i] = alt[i - 1] + 0.5 * (tas[i] + tas[i - 1]) * sg * dt
        if rolled:
            dpsi = 0.0
        else:
            dpsi = 0.5 * (omega[i] + omega[i - 1]) * dt
            if has_limit and abs(turned + dpsi) >= abs(turn_limit):
                dpsi = turn_limit - turned
                rolled = True
        if rolled:
            omega[i] = 0.0
            bank_out[i] = 0.0
        turned += dpsi
        psi[i] = psi0 + turned
        x = 0.5 * dpsi
        sinc = 1.0 - x * x / 6.0 if abs(x) < 1e-4 else math.sin(x) / x
        chord = 0.5 * (tas[i] + tas[i - 1]) * cg * dt * sinc
        mid = psi[i - 1] + x
        de = chord * math.sin(mid) + wind_e * dt
        dn = chord * math.cos(mid) + wind_n * dt
        # ground lengths -> plane lengths, scales at the uncorrected mid-step point
        de, dn = ground_to_plane(east[i - 1] + 0.5 * de, north[i - 1] + 0.5 * dn, de, dn,
                                 radius)
        east[i] = east[i - 1] + de
        north[i] = north[i - 1] + dn
    two_pi = 2.0 * math.pi
    for i in range(n):
        cg = cos_g
        if pitching:
            cg = math.cos(gam0 + g_rate * (min(max(t[i], g_start), g_end) - g_start))
        vh = tas[i] * cg
        ge = vh * math.sin(psi[i]) + wind_e
        gn = vh * math.cos(psi[i]) + wind_n
        out[7, i] = math.atan2(ge, gn) % two_pi
        out[8, i] = math.hypot(ge, gn)
        psi[i] = psi[i] % two_pi
    return out
