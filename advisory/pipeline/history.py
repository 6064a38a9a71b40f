"""Trajectories derived from a predicted one: the recent past and resolution turns.

The booms that may still be on their way down were emitted over the last minutes; the
advisor takes them from the present manoeuvre flown backwards (:func:`past_trajectory`)
and joins that to the trajectory ahead (:func:`join_trajectories`). Resolution trials
fly the trajectory ahead again with a turn that rolls out after a heading change
(:func:`turned_trajectory`). All run the trajectory kernel
(:func:`advisory.pipeline.trajectory.propagate_kernel`; its physics and sources are in
:mod:`advisory.pipeline.trajectory`); :func:`kernel_inputs` builds its inputs from a
trajectory's start state.
"""

from __future__ import annotations

import math

import numpy as np

from advisory import units
from advisory.pipeline.trajectory import Trajectory, propagate_kernel

__all__ = ["kernel_inputs", "past_trajectory", "join_trajectories", "turned_trajectory"]


def kernel_inputs(base: Trajectory, t: np.ndarray, bank_rad: float, turn_limit: float
                   ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Inputs of :func:`propagate_kernel` that re-fly ``base``'s start state over ``t``."""
    i0 = int(np.argmin(np.abs(base.t_s)))
    mdot = 0.0
    if base.t_s.size > 1:
        mdot = float((base.mach[-1] - base.mach[0]) / (base.t_s[-1] - base.t_s[0]))
    mach = np.maximum(base.mach[i0] + mdot * t, 0.1)
    a = np.full_like(t, float(base.tas_mps[i0] / base.mach[i0]))
    fpa = float(base.fpa_rad[i0])
    cos_g = math.cos(fpa)
    psi0 = float(base.heading_grid_rad[i0])
    ge = base.ground_speed_mps[i0] * math.sin(base.track_grid_rad[i0])
    gn = base.ground_speed_mps[i0] * math.cos(base.track_grid_rad[i0])
    vh = base.tas_mps[i0] * cos_g
    params = np.array([base.alt_m[i0], math.sin(fpa), cos_g, bank_rad, turn_limit, psi0,
                       ge - vh * math.sin(psi0), gn - vh * math.cos(psi0), base.east_m[i0],
                       base.north_m[i0], base.frame.radius_m, units.G0])
    return np.ascontiguousarray(t, dtype=np.float64), mach, a, params


def _propagate_like(base: Trajectory, t: np.ndarray, bank_rad: float, turn_limit: float
                    ) -> Trajectory:
    """Run the trajectory kernel over times ``t`` from ``base``'s start state."""
    t, mach, a, params = kernel_inputs(base, t, bank_rad, turn_limit)
    fpa = math.asin(float(params[1]))
    out = propagate_kernel(t, mach, a, params)
    return Trajectory(
        t_s=t, alt_m=out[2], mach=mach, tas_mps=out[3], heading_grid_rad=out[4],
        track_grid_rad=out[7], ground_speed_mps=out[8], bank_rad=out[6],
        fpa_rad=np.full_like(t, fpa), turn_rate_rad_s=out[5], east_m=out[0], north_m=out[1],
        frame=base.frame, wind_east_mps=base.wind_east_mps,
        wind_north_mps=base.wind_north_mps, wind_inferred=base.wind_inferred,
    )


def past_trajectory(ahead: Trajectory, back_s: float, step_s: float) -> Trajectory:
    """The recent past, extrapolated back from the present manoeuvre (time-ascending,
    ending just before t = 0): the emission points whose booms may still be in the air.

    Assumes the aircraft flew the present manoeuvre (bank, Mach rate, climb) for the
    last ``back_s`` seconds.
    """
    n = max(int(math.ceil(back_s / step_s - 1e-9)), 0)
    t = -np.arange(n + 1, dtype=np.float64) * step_s
    if n:
        t[-1] = -back_s
    back = _propagate_like(ahead, t, float(ahead.bank_rad[0]), math.nan)
    sel = slice(n, 0, -1)  # reversed, t = 0 dropped

    def rev(a: np.ndarray) -> np.ndarray:
        return np.ascontiguousarray(a[sel])

    return Trajectory(
        t_s=rev(back.t_s), alt_m=rev(back.alt_m), mach=rev(back.mach),
        tas_mps=rev(back.tas_mps), heading_grid_rad=rev(back.heading_grid_rad),
        track_grid_rad=rev(back.track_grid_rad), ground_speed_mps=rev(back.ground_speed_mps),
        bank_rad=rev(back.bank_rad), fpa_rad=rev(back.fpa_rad),
        turn_rate_rad_s=rev(back.turn_rate_rad_s), east_m=rev(back.east_m),
        north_m=rev(back.north_m), frame=ahead.frame, wind_east_mps=ahead.wind_east_mps,
        wind_north_mps=ahead.wind_north_mps, wind_inferred=ahead.wind_inferred,
    )


_TRAJ_ARRAYS = ("t_s", "alt_m", "mach", "tas_mps", "heading_grid_rad", "track_grid_rad",
                "ground_speed_mps", "bank_rad", "fpa_rad", "turn_rate_rad_s", "east_m",
                "north_m")


def join_trajectories(past: Trajectory, ahead: Trajectory) -> Trajectory:
    """``past`` followed by ``ahead`` (one time-ascending trajectory)."""
    arrays = {k: np.concatenate([getattr(past, k), getattr(ahead, k)]) for k in _TRAJ_ARRAYS}
    return Trajectory(**arrays, frame=ahead.frame, wind_east_mps=ahead.wind_east_mps,
                      wind_north_mps=ahead.wind_north_mps, wind_inferred=ahead.wind_inferred)


def turned_trajectory(base: Trajectory, bank_rad: float, heading_change_rad: float
                      ) -> Trajectory:
    """``base`` (starting at t = 0) flown with a turn at ``bank_rad`` that rolls out after
    ``heading_change_rad``: same Mach and climb schedule and wind, a different lateral
    path (a resolution trial). Uses the trajectory kernel directly.
    """
    return _propagate_like(base, base.t_s, bank_rad, heading_change_rad)
