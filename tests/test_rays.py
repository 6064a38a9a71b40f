"""Ray tracer checks: closed-form circular arcs, an independent ODE solve, parity."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from advisory.physics.atmosphere import Z_MAX_M, Z_MIN_M
from advisory.physics.ray_kernels import (
    emission_slowness,
    near_field_constant,
    ray_levels_kernel,
    reaches_ground_kernel,
    trace_ground_kernel,
    trace_levels_kernel,
)
from advisory.physics.rays import FlightCondition, FlightConditionError, RayTracer
from tests.conftest import make_atmosphere
from tests.twins.ray_kernels import (
    near_field_constant_twin,
    ray_levels_twin,
    reaches_ground_twin,
    trace_ground_twin,
    trace_levels_twin,
)

GRID = np.arange(Z_MIN_M, Z_MAX_M + 1.0, 20.0)


def linear_profile_atmosphere(c_ground: float, gradient: float):
    return make_atmosphere(GRID, c_ground + gradient * GRID)


@pytest.mark.parametrize("gradient", [-0.004, -0.0025, 0.002])
@pytest.mark.parametrize("mach", [1.4, 2.0])
def test_circular_arc_rays_in_linear_profile(gradient: float, mach: float) -> None:
    # Source: A. D. Pierce, Acoustics (ASA 1989), sec. 8-4: in a linear sound-speed
    # profile c = c0 + g z with no wind, rays are circular arcs; with u = s c (cosine of
    # the ray's angle to the horizontal) the horizontal range between two heights is
    # |sqrt(1-u1^2) - sqrt(1-u2^2)| / (s |g|) and the travel time is
    # |ln((1+sqrt(1-u1^2))/u1) - ln((1+sqrt(1-u2^2))/u2)| / |g|.  Tolerance 0.1 %.
    atm = linear_profile_atmosphere(340.0, gradient)
    tracer = RayTracer(atm)
    z0, zg = 15000.0, 200.0
    fc = FlightCondition(mach=mach, altitude_m=z0, ground_elevation_m=zg)
    c0 = 340.0 + gradient * z0
    cg = 340.0 + gradient * zg
    s = 1.0 / (mach * c0)
    if s * max(c0, cg) >= 1.0:
        pytest.skip("ray turns before the ground for this case")
    ray = tracer.trace(fc, 0.0)
    assert ray.reaches_ground
    u1, u2 = s * c0, s * cg
    x_ref = abs(math.sqrt(1 - u1**2) - math.sqrt(1 - u2**2)) / (s * abs(gradient))
    t_ref = abs(
        math.log((1 + math.sqrt(1 - u1**2)) / u1) - math.log((1 + math.sqrt(1 - u2**2)) / u2)
    ) / abs(gradient)
    assert ray.along_m == pytest.approx(x_ref, rel=1e-3)
    assert ray.t_s[-1] == pytest.approx(t_ref, rel=1e-3)
    assert abs(ray.cross_m) < 1e-6 * x_ref


def smooth_windy_atmosphere():
    """Invented smooth profile with shear in both wind components (test only)."""
    z = GRID
    c = 340.0 - 0.0042 * np.clip(z, None, 11000.0) + 4.0 * np.sin(z / 3000.0)
    we = 25.0 * np.tanh(z / 6000.0) + 5.0
    wn = -12.0 * np.sin(z / 8000.0)
    return make_atmosphere(z, c, we, wn)


def ode_reference(atm, fc: FlightCondition, phi: float) -> tuple[float, float, float]:
    """Independent ray integration with scipy: Hamiltonian ray equations in time.

    Source: Pierce, Acoustics, eqs. 8-1.7 and 8-1.10 (rays in a moving medium):
    dx/dt = c k/|k| + W, dk/dt = -|k| grad c - (grad W) . k, with the dispersion
    relation omega = c |k| + W . k. Written here with the wave vector per unit
    frequency (the slowness), integrated by RK45 until the ray meets the ground.
    """
    z_grid = atm.z_m

    def prof(z):
        c = np.interp(z, z_grid, atm.sound_speed_mps)
        we = np.interp(z, z_grid, atm.wind_east_mps)
        wn = np.interp(z, z_grid, atm.wind_north_mps)
        return c, we, wn

    def dprof(z, h=1.0):
        a = np.array(prof(z + h))
        b = np.array(prof(z - h))
        return (a - b) / (2 * h)

    s0 = atm.at(fc.altitude_m)
    sx, sy, _nz, _, _ = emission_slowness(
        fc.mach, fc.heading_rad, fc.fpa_rad, phi, s0.sound_speed_mps, s0.wind_east_mps,
        s0.wind_north_mps,
    )
    omega0 = 1.0 - s0.wind_east_mps * sx - s0.wind_north_mps * sy
    sz0 = -math.sqrt(omega0**2 / s0.sound_speed_mps**2 - sx**2 - sy**2)

    def rhs(_t, y):
        x, yy, z, kx, ky, kz = y
        c, we, wn = prof(z)
        dc, dwe, dwn = dprof(z)
        k = math.sqrt(kx * kx + ky * ky + kz * kz)
        return [c * kx / k + we, c * ky / k + wn, c * kz / k, 0.0, 0.0,
                -k * dc - kx * dwe - ky * dwn]

    def hit_ground(_t, y):
        return y[2] - fc.ground_elevation_m

    hit_ground.terminal = True
    sol = solve_ivp(rhs, (0.0, 2000.0), [0, 0, fc.altitude_m, sx, sy, sz0], events=hit_ground,
                    rtol=1e-10, atol=1e-8, max_step=5.0)
    assert sol.status == 1, "reference ray did not reach the ground"
    y_end = sol.y_events[0][0]
    return float(y_end[0]), float(y_end[1]), float(sol.t_events[0][0])


@pytest.mark.parametrize(
    "mach, alt, heading_deg, fpa_deg, phi_deg",
    [
        (1.6, 14000.0, 30.0, 0.0, 0.0),
        (2.0, 17000.0, 200.0, 2.0, 25.0),
        (1.8, 12000.0, 95.0, -3.0, -30.0),
        (2.4, 18000.0, 300.0, 0.0, 40.0),
    ],
)
def test_matches_independent_ode_with_wind(mach, alt, heading_deg, fpa_deg, phi_deg) -> None:
    # Source: independent scipy.integrate.solve_ivp integration of the Hamiltonian ray
    # equations (Pierce 1989, sec. 8-1). Tolerance 0.1 % in ground distance and time.
    atm = smooth_windy_atmosphere()
    tracer = RayTracer(atm)
    fc = FlightCondition(mach, alt, math.radians(heading_deg), math.radians(fpa_deg), 300.0)
    ray = tracer.trace(fc, math.radians(phi_deg))
    assert ray.reaches_ground
    x_ref, y_ref, t_ref = ode_reference(atm, fc, math.radians(phi_deg))
    dist_ref = math.hypot(x_ref, y_ref)
    assert math.hypot(ray.x_m[-1] - x_ref, ray.y_m[-1] - y_ref) < 1e-3 * dist_ref
    assert ray.t_s[-1] == pytest.approx(t_ref, rel=1e-3)


def test_numba_and_numpy_twins_agree(std_atm) -> None:
    # Parity: the numba kernels and their numpy twins implement the same scheme.
    atm = smooth_windy_atmosphere()
    z = np.ascontiguousarray(atm.z_m)
    args = (z, atm.sound_speed_mps, atm.wind_east_mps, atm.wind_north_mps, 15123.4, 250.0)
    n = z.size + 2
    bufs = [np.empty(n) for _ in range(4)]
    twin_bufs = [np.empty(n) for _ in range(4)]
    m = ray_levels_kernel(*args, *bufs)
    assert m == ray_levels_twin(*args, *twin_bufs)
    for got, want in zip(bufs, twin_bufs, strict=True):
        np.testing.assert_allclose(got[:m], want[:m], rtol=1e-13, atol=1e-12)
    lz, lc, lwx, lwy = (b[:m] for b in bufs)
    for phi in (-0.6, 0.0, 0.3, 0.7):
        c0, w0x, w0y = lc[0], lwx[0], lwy[0]
        sx, sy, _, dsx, dsy = emission_slowness(1.9, 0.4, 0.02, phi, c0, w0x, w0y)
        out = np.zeros((m, 9))
        out2 = np.zeros((m, 9))
        cnt = trace_levels_kernel(lz, lc, lwx, lwy, m, sx, sy, out)
        assert cnt == trace_levels_twin(lz, lc, lwx, lwy, m, sx, sy, out2)
        np.testing.assert_allclose(out[:cnt], out2[:cnt], rtol=1e-10, atol=1e-9)
        assert reaches_ground_kernel(lc, lwx, lwy, m, sx, sy) == pytest.approx(
            reaches_ground_twin(lc, lwx, lwy, m, sx, sy), rel=1e-12, abs=1e-20)
        assert trace_ground_kernel(lz, lc, lwx, lwy, m, sx, sy) == pytest.approx(
            trace_ground_twin(lz, lc, lwx, lwy, m, sx, sy), rel=1e-10)
        near = (340.0, 1.9, math.sqrt(1.9**2 - 1.0), c0, w0x, w0y, 0.2, 15123.4, sx, sy,
                dsx, dsy, 600.0, 150.0)
        assert near_field_constant(*near) == pytest.approx(near_field_constant_twin(*near),
                                                           rel=1e-12)


def test_uniform_atmosphere_amplitude_is_whitham_near_field() -> None:
    # Source: Whitham (1952), linear theory: in a uniform atmosphere the overpressure
    # per unit F is p0 gamma M^2 / sqrt(2 beta r), r the distance from the flight axis.
    z = GRID
    atm = make_atmosphere(z, np.full_like(z, 300.0), p=20000.0, rho=0.3)
    fc = FlightCondition(1.7, 15000.0, 0.3, 0.0, 0.0)
    beta = math.sqrt(1.7**2 - 1)
    for phi in (0.0, 0.5):
        ray = RayTracer(atm).trace(fc, phi)
        # distance from the flight axis of the straight ray at each level
        r = 300.0 * ray.t_s[1:] * beta / 1.7
        expect = 20000.0 * 1.4 * 1.7**2 / np.sqrt(2 * beta * r)
        np.testing.assert_allclose(ray.amplitude_factor[1:], expect, rtol=1e-9)


def test_flight_condition_errors_name_the_field(std_atm) -> None:
    tracer = RayTracer(std_atm)
    with pytest.raises(FlightConditionError, match="mach"):
        tracer.trace(FlightCondition(-1.0, 10000.0), 0.0)
    with pytest.raises(FlightConditionError, match="altitude"):
        tracer.trace(FlightCondition(2.0, 100.0, ground_elevation_m=500.0), 0.0)
    with pytest.raises(FlightConditionError, match="mach"):
        tracer.trace(FlightCondition(float("nan"), 10000.0), 0.0)


def test_subsonic_and_upgoing_rays_do_not_reach(std_atm) -> None:
    tracer = RayTracer(std_atm)
    assert not tracer.trace(FlightCondition(0.9, 10000.0), 0.0).reaches_ground
    # phi = 100 deg on a level Mach 1.5 cone points upward
    assert not tracer.trace(FlightCondition(1.5, 10000.0), math.radians(100)).reaches_ground
