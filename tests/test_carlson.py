"""Carlson's simplified method, and its cross-check of the F-function method."""

from __future__ import annotations

import math

import numpy as np
import pytest

from advisory import units
from advisory.physics import carlson as cm
from advisory.physics import signature as sig
from advisory.physics.aircraft import aircraft_from_dict, default_aircraft
from advisory.physics.atmosphere import GAMMA, R_AIR, Atmosphere
from advisory.physics.ffunction import f_function_parts
from advisory.physics.rays import FlightCondition, RayTracer
from advisory.physics.shocks import age_integral_kernel


def uniform_atmosphere(c: float = 300.0, p: float = 20000.0) -> Atmosphere:
    z = np.linspace(-1000.0, 32000.0, 1651)
    one = np.ones_like(z)
    return Atmosphere(z, one * c**2 / (GAMMA * R_AIR), one * p, one * GAMMA * p / c**2,
                      one * c, 0 * z, 0 * z, {"kind": "uniform"})


@pytest.fixture(scope="module")
def demo():
    return default_aircraft()


@pytest.fixture(scope="module")
def tracer(std_atm):
    return RayTracer(std_atm)


def test_whitham_constant():
    # 2^(1/4) gamma / sqrt(gamma + 1) = 1.0747 for gamma = 1.4 (Whitham 1952 far field).
    assert cm.WHITHAM_CONSTANT == pytest.approx(1.0747, abs=1e-4)
    # Carlson's 3.42 is 2 (gamma+1)/gamma = 3.43 rounded (value from memory).
    assert cm.DURATION_CONSTANT == pytest.approx(2 * (GAMMA + 1) / GAMMA, rel=0.003)


@pytest.mark.parametrize("mach", [1.3, 2.0, 3.0])
@pytest.mark.parametrize("alt", [5000.0, 15000.0])
def test_factors_are_one_in_a_uniform_atmosphere(mach, alt):
    # Carlson 1978: with K_P = K_t = 1 the equations are Whitham's uniform-atmosphere
    # far field; K_t = 2 (gamma+1) / (3.42 gamma) = 1.0025 from Carlson's rounding.
    k_p, k_t, ok = cm.atmosphere_factors(mach, alt, uniform_atmosphere())
    assert ok
    assert k_p == pytest.approx(1.0, rel=1e-6)
    assert k_t == pytest.approx(2 * (GAMMA + 1) / (3.42 * GAMMA), rel=1e-6)


def test_pressure_factor_in_standard_atmosphere(std_atm):
    # Carlson 1978, pressure-amplification chart: about 1.0-1.3 between 30,000 and
    # 60,000 ft, growing with altitude (value from memory).
    for mach in (1.5, 2.0, 2.5):
        kps = [cm.atmosphere_factors(mach, units.ft_to_m(a), std_atm)[0]
               for a in (30000, 40000, 50000, 60000)]
        assert all(1.0 <= k <= 1.3 for k in kps)
        assert np.all(np.diff(kps) > 0.0)
        kts = [cm.atmosphere_factors(mach, units.ft_to_m(a), std_atm)[1]
               for a in (30000, 60000)]
        assert all(0.7 <= k <= 1.0 for k in kts)  # shorter than uniform (value from memory)


def test_pressure_factor_agrees_with_the_ray_tracer(std_atm, tracer):
    # Two independent implementations of the same definition: the 1-D quadrature here
    # and the full ray tracer plus the signature module's age integral.
    for mach, alt in ((1.3, 9000.0), (2.0, 15000.0), (2.4, 18000.0)):
        ray = tracer.trace(FlightCondition(mach=mach, altitude_m=alt), 0.0)
        integral, _ = age_integral_kernel(ray.t_s, ray.amplitude_factor, ray.density_kgm3,
                                          ray.sound_speed_mps, ray.t_s.size)
        v = std_atm.at(alt)
        age = mach * v.sound_speed_mps * integral
        beta = math.sqrt(mach**2 - 1)
        kp_ray = ray.amplitude_factor[-1] * math.sqrt(2 / age) / (
            cm.WHITHAM_CONSTANT * math.sqrt(v.pressure_pa * ray.pressure_pa[-1])
            * beta**0.25 * alt**-0.75)
        assert cm.atmosphere_factors(mach, alt, std_atm)[0] == pytest.approx(kp_ray, rel=1e-4)


def test_shape_factor_of_the_parabolic_body():
    # Whitham 1952: the parabolic body's lobe area is closed form (see
    # test_signature.parabolic_closed_form); K_S = 1.0747 sqrt(lobe) / L^(3/4).
    length, smax = 30.0, 2.7
    ac = aircraft_from_dict({"length_m": length, "mass_kg": 1000.0,
                             "volume": {"max_area_m2": smax, "max_area_station": 0.5}})
    a = 16 * smax / length**4
    y0 = length * (5 - math.sqrt(5)) / 8
    lobe = a / (2 * math.pi) * (4 * length**2 * (2 / 3) * y0**1.5
                                - 16 * length * (2 / 5) * y0**2.5 + 12.8 * (2 / 7) * y0**3.5)
    ks = cm.shape_factor(ac, 2.0, 10000.0, load_factor=0.0)
    assert ks == pytest.approx(cm.WHITHAM_CONSTANT * math.sqrt(lobe) / length**0.75, rel=1e-4)
    # Equivalently K_S = 0.730 sqrt(S_max / l^2) for that body (same closed form).
    assert ks == pytest.approx(0.730 * math.sqrt(smax / length**2), rel=2e-3)


def test_shape_factor_lift_part_matches_the_numerical_f_function(demo):
    # The closed-form Abel integral here against the signature module's numerical
    # F-function for the same lift distribution (independent code paths).
    mach, p = 1.8, 11000.0
    ks = cm.shape_factor(aircraft_from_dict({
        "length_m": demo.length_m, "mass_kg": demo.mass_kg,
        "volume": {"max_area_m2": 1e-6 * demo.length_m**2},
        "lift": {"start_station": demo.lift_start_station,
                 "end_station": demo.lift_end_station}}), mach, p)
    parts = f_function_parts(demo)
    b = demo.lift_area_total(mach, p)
    lobe = float(np.max(b * parts.area_lift_unit))
    assert ks == pytest.approx(cm.WHITHAM_CONSTANT * math.sqrt(lobe) / demo.length_m**0.75,
                               rel=5e-3)


def test_shape_factor_and_lift_parameter_for_the_demo(demo, std_atm):
    # K_L = beta W / (1.4 p_v M^2 l^2) (Carlson 1978); chart band of K_S about 0.05-0.15
    # for 0.002 < K_L < 0.05 (value from memory).
    for mach in (1.3, 1.8, 2.4):
        for alt_ft in (30000, 45000, 60000):
            f = cm.carlson_factors(demo, mach, units.ft_to_m(alt_ft), std_atm)
            beta = math.sqrt(mach**2 - 1)
            k_l = beta * demo.weight_n / (1.4 * f.p_v_pa * mach**2 * demo.length_m**2)
            assert f.k_l == pytest.approx(k_l, rel=1e-12)
            assert 0.002 < f.k_l < 0.05
            assert 0.04 <= f.k_s <= 0.15


def test_shape_factor_override():
    ac = aircraft_from_dict({"length_m": 30.0, "mass_kg": 20000.0,
                             "carlson_shape_factor": 0.1})
    assert cm.shape_factor(ac, 2.0, 10000.0) == 0.1


def test_f_function_method_and_carlson_agree_on_the_centerline(demo, std_atm, tracer):
    # Issue check: F-function method (RayTracer in the U.S. Standard Atmosphere 1976)
    # and Carlson's simplified method (NASA TP-1122) within 25% on the centerline for
    # the demo aircraft, Mach 1.3-2.4, 30,000-60,000 ft.
    for mach in (1.3, 1.6, 2.0, 2.4):
        for alt_ft in (30000, 40000, 50000, 60000):
            h = units.ft_to_m(alt_ft)
            v = std_atm.at(h)
            ray = tracer.trace(FlightCondition(mach=mach, altitude_m=h), 0.0)
            s = sig.ground_signature(demo, ray, mach, v.sound_speed_mps, v.pressure_pa)
            dp, dt = cm.carlson_overpressure(demo, mach, h, std_atm)
            assert s.overpressure_pa == pytest.approx(dp, rel=0.25)
            assert s.duration_s == pytest.approx(dt, rel=0.25)


def test_carlson_levels_are_plausible(demo, std_atm):
    # A small supersonic jet: 0.5-3 psf at Mach 1.4-2, 40,000-55,000 ft (common
    # practice, no source); duration of the order of 0.1 s.
    for mach in (1.4, 2.0):
        for alt_ft in (40000, 55000):
            dp, dt = cm.carlson_overpressure(demo, mach, units.ft_to_m(alt_ft), std_atm)
            assert 0.5 <= units.pa_to_psf(dp) <= 3.0
            assert 0.05 <= dt <= 0.3


def test_carlson_scalings(demo, std_atm):
    h = units.ft_to_m(50000)
    base, _ = cm.carlson_overpressure(demo, 2.0, h, std_atm)
    r2, _ = cm.carlson_overpressure(demo, 2.0, h, std_atm, reflection_factor=2.0)
    assert r2 == pytest.approx(base * 2.0 / 1.9, rel=1e-12)
    heavy, _ = cm.carlson_overpressure(demo, 2.0, h, std_atm, load_factor=1.5)
    assert heavy > base  # more lift, louder boom (common practice, no source)


def test_below_cutoff_mach_gives_zero(demo, std_atm):
    assert cm.carlson_overpressure(demo, 1.05, 15000.0, std_atm) == (0.0, 0.0)


@pytest.mark.parametrize("kw, field", [
    ({"mach": 0.9 - 1.0}, "mach"),
    ({"altitude_m": 90000.0}, "altitude"),
    ({"ground_elevation_m": 20000.0}, "altitude"),
    ({"fpa_rad": 1.0}, "fpa"),
    ({"reflection_factor": 3.0}, "reflection_factor"),
])
def test_bad_inputs_name_the_field(demo, std_atm, kw, field):
    args = {"mach": 2.0, "altitude_m": 15000.0, **kw}
    with pytest.raises(cm.CarlsonError, match=f"^{field}"):
        cm.carlson_overpressure(demo, atmosphere=std_atm, **args)
