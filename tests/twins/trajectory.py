"""numpy twin of the trajectory kernel (``advisory/pipeline/trajectory.py``)."""

from __future__ import annotations

import math

import numpy as np


def _cumtrapz(y: np.ndarray, dt: np.ndarray) -> np.ndarray:
    out = np.empty_like(y)
    out[0] = 0.0
    np.cumsum(0.5 * (y[1:] + y[:-1]) * dt, out=out[1:])
    return out


def propagate_kernel_twin(t: np.ndarray, mach: np.ndarray, a: np.ndarray, params: np.ndarray
                 ) -> np.ndarray:
    """numpy twin of :func:`advisory.pipeline.propagate.propagate_kernel` (same arguments
    and result)."""
    h0, sin_g, cos_g, bank, turn_limit, psi0, wind_e, wind_n, e0, n0, radius, g = params[:12]
    dt = np.diff(t)
    tas = mach * a
    # flight-path angle: held, or changing at a rate from a time until a time (entries
    # 12, 13 and 14, the start 0 when absent)
    rate, end = (params[12], params[13]) if params.size > 13 else (0.0, 0.0)
    start = params[14] if params.size > 14 else 0.0
    gamma = math.atan2(sin_g, cos_g) + rate * (np.clip(t, start, end) - start)
    if rate != 0.0 and end > start:
        # the angle's mean over each step: its integral over the step, by the midpoint
        # rule on a fine sub-grid that contains the bends (exact for a linear piece)
        mean = np.empty(t.size - 1)
        for i in range(t.size - 1):
            knots = np.unique(np.clip([t[i], t[i + 1], start, end], t[i], t[i + 1]))
            mids = 0.5 * (knots[1:] + knots[:-1])
            g_mid = math.atan2(sin_g, cos_g) + rate * (np.clip(mids, start, end) - start)
            mean[i] = float(np.sum(g_mid * np.diff(knots)) / (t[i + 1] - t[i]))
        alt = np.concatenate(([h0], h0 + np.cumsum(
            0.5 * (tas[1:] + tas[:-1]) * np.sin(mean) * dt)))
        cos_step, cos_point = np.cos(mean), np.cos(gamma)
    else:
        alt = h0 + _cumtrapz(tas * sin_g, dt)
        cos_step = cos_point = cos_g
    omega = g * math.tan(bank) / tas
    turned = _cumtrapz(omega, dt)
    bank_out = np.full_like(t, bank)
    if not math.isnan(turn_limit):
        done = np.abs(turned) >= abs(turn_limit)
        if done.any():
            first = int(np.argmax(done))
            turned = np.where(done, turn_limit, turned)
            omega = omega.copy()
            omega[first:] = 0.0
            bank_out[first:] = 0.0
    psi = psi0 + turned
    dpsi = np.diff(psi)
    chord = 0.5 * (tas[1:] + tas[:-1]) * cos_step * dt * np.sinc(dpsi / (2.0 * math.pi))
    mid = psi[:-1] + 0.5 * dpsi
    de = chord * np.sin(mid) + wind_e * dt
    dn = chord * np.cos(mid) + wind_n * dt
    # the scale correction depends on where each step starts, so it runs step by step
    east = np.empty_like(t)
    north = np.empty_like(t)
    east[0] = e0
    north[0] = n0
    for i in range(1, t.size):
        me = east[i - 1] + 0.5 * de[i - 1]
        mn = north[i - 1] + 0.5 * dn[i - 1]
        rho = math.hypot(me, mn)
        step = np.array([de[i - 1], dn[i - 1]])
        if rho > 0.0:
            u = np.array([me, mn]) / rho
            h = math.sqrt(max(1.0 - (0.5 * rho / radius) ** 2, 1e-300))
            radial = step @ u
            step = h * radial * u + (step - radial * u) / h
        east[i] = east[i - 1] + step[0]
        north[i] = north[i - 1] + step[1]
    vh = tas * cos_point
    ge = vh * np.sin(psi) + wind_e
    gn = vh * np.cos(psi) + wind_n
    return np.stack([east, north, alt, tas, np.mod(psi, 2.0 * math.pi), omega, bank_out,
                     np.mod(np.arctan2(ge, gn), 2.0 * math.pi), np.hypot(ge, gn)])


def ground_to_plane_twin(east: float, north: float, de: float, dn: float, radius: float
                         ) -> tuple[float, float]:
    """Twin of ``ground_to_plane``: the ground step split along and across the radius
    through the mid-point, scaled by Lambert's equal-area radial and tangential scales."""
    rho = math.hypot(east, north)
    step = np.array([de, dn])
    if rho <= 0.0:
        return de, dn
    u = np.array([east, north]) / rho
    h = math.sqrt(max(1.0 - (0.5 * rho / radius) ** 2, 1e-300))
    radial = step @ u
    out = h * radial * u + (step - radial * u) / h
    return float(out[0]), float(out[1])

