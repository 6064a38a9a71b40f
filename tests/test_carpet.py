"""Cutoff Mach, lateral cutoff and carpet width checks."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from advisory import units
from advisory.physics.atmosphere import Z_MAX_M, Z_MIN_M, standard_atmosphere
from advisory.physics.carpet import compute_carpet, cutoff_mach
from advisory.physics.rays import FlightCondition, RayTracer
from tests.conftest import make_atmosphere

GRID = np.arange(Z_MIN_M, Z_MAX_M + 1.0, 20.0)


def max_c_ratio(atm, z0: float, zg: float) -> float:
    sel = (atm.z_m >= zg) & (atm.z_m <= z0)
    return float(atm.sound_speed_mps[sel].max() / atm.at(z0).sound_speed_mps)


@pytest.mark.parametrize("offset_k", [-20.0, 0.0, 15.0])
@pytest.mark.parametrize("alt_ft", [25000.0, 40000.0, 55000.0])
def test_cutoff_windless_is_sound_speed_ratio(offset_k: float, alt_ft: float) -> None:
    # Follows from Snell's law (cos(theta)/c constant along a ray in a windless
    # stratified atmosphere, Pierce 1989 sec. 8-4): the straight-down ray of level
    # flight has cos(theta0) = 1/M and turns where c(z) = M c0, so cutoff Mach =
    # max c between aircraft and ground / c at the aircraft.
    atm = standard_atmosphere(offset_k)
    z0 = units.ft_to_m(alt_ft)
    m = cutoff_mach(RayTracer(atm), FlightCondition(1.5, z0))
    assert m == pytest.approx(max_c_ratio(atm, z0, 0.0), abs=1e-5)


def test_cutoff_with_inversion_uses_largest_sound_speed() -> None:
    # Same Snell's-law result with a warm layer aloft above a cold ground (invented profile).
    z = GRID
    c = np.where(z < 2000.0, 330.0 + 0.01 * z, 350.0 - 0.0045 * (z - 2000.0))
    atm = make_atmosphere(z, np.clip(c, 290.0, None))
    z0 = 13000.0
    m = cutoff_mach(RayTracer(atm), FlightCondition(1.5, z0))
    assert m == pytest.approx(max_c_ratio(atm, z0, 0.0), abs=1e-5)
    assert m > 350.0 / atm.at(z0).sound_speed_mps - 1e-4


def test_cutoff_wind_along_track_moves_the_right_way() -> None:
    # Snell's law in a moving medium (Pierce 1989 sec. 8-1): the phi = 0 ray reaches the
    # ground while the ground speed along track exceeds c(z) + W(z) (the effective sound
    # speed) everywhere below, so cutoff = max(c + W - W0) / c0. A tailwind at altitude
    # lowers cutoff Mach, a headwind at altitude raises it, a uniform wind leaves it.
    z = GRID
    std = standard_atmosphere()
    c = np.interp(z, std.z_m, std.sound_speed_mps)
    z0 = units.ft_to_m(45000.0)
    calm = cutoff_mach(RayTracer(make_atmosphere(z, c)), FlightCondition(1.5, z0))
    jet = 30.0 * np.clip((z - 3000.0) / 9000.0, 0.0, 1.0)  # wind toward north aloft
    tail = make_atmosphere(z, c, wind_north=jet)
    head = make_atmosphere(z, c, wind_north=-jet)
    uniform = make_atmosphere(z, c, wind_north=np.full_like(z, 20.0))
    m_tail = cutoff_mach(RayTracer(tail), FlightCondition(1.5, z0, heading_rad=0.0))
    m_head = cutoff_mach(RayTracer(head), FlightCondition(1.5, z0, heading_rad=0.0))
    m_uni = cutoff_mach(RayTracer(uniform), FlightCondition(1.5, z0, heading_rad=0.0))
    assert m_tail < calm < m_head
    assert m_uni == pytest.approx(calm, abs=1e-4)
    c0 = std.at(z0).sound_speed_mps
    w0 = float(np.interp(z0, z, jet))
    sel = (z >= 0.0) & (z <= z0)  # between the ground (0 m) and the aircraft
    assert m_tail == pytest.approx(float(np.max(c[sel] + jet[sel] - w0)) / c0, abs=2e-4)
    assert m_head == pytest.approx(float(np.max(c[sel] - jet[sel] + w0)) / c0, abs=2e-4)


@pytest.mark.parametrize("mach", [1.6, 2.0, 2.4])
@pytest.mark.parametrize("alt_ft", [40000.0, 50000.0, 60000.0])
def test_carpet_width_rule_of_thumb(std_atm, mach: float, alt_ft: float) -> None:
    # Common practice, no source: "about one mile of carpet width per 1000 ft of
    # altitude", within 30 %.
    carpet = compute_carpet(RayTracer(std_atm), FlightCondition(mach, units.ft_to_m(alt_ft)))
    miles = carpet.width_m / units.STATUTE_MILE
    assert miles == pytest.approx(alt_ft / 1000.0, rel=0.30)


def test_crosswind_makes_the_carpet_asymmetric() -> None:
    # A wind toward the right wing (east, for a northbound aircraft) that grows with
    # height carries the boom to the right: the right half-width grows, the left shrinks.
    z = GRID
    std = standard_atmosphere()
    c = np.interp(z, std.z_m, std.sound_speed_mps)
    atm = make_atmosphere(z, c, wind_east=25.0 * np.clip(z / 10000.0, 0.0, 1.0))
    carpet = compute_carpet(RayTracer(atm), FlightCondition(1.8, 15000.0, heading_rad=0.0))
    calm = compute_carpet(RayTracer(std), FlightCondition(1.8, 15000.0, heading_rad=0.0))
    assert carpet.half_width_right_m > calm.half_width_right_m
    assert carpet.half_width_left_m < calm.half_width_left_m


def test_below_cutoff_no_carpet(std_atm) -> None:
    carpet = compute_carpet(RayTracer(std_atm), FlightCondition(1.1, units.ft_to_m(45000.0)))
    assert not carpet.reaches_ground
    assert carpet.width_m == 0.0
    assert carpet.cutoff_mach == pytest.approx(1.1533, abs=1e-3)
    sub = compute_carpet(RayTracer(std_atm), FlightCondition(0.85, 9000.0))
    assert not sub.reaches_ground and sub.width_m == 0.0


_TRACER = RayTracer(standard_atmosphere())


@settings(max_examples=25, deadline=None)
@given(
    mach=st.floats(1.2, 3.0),
    alt=st.floats(8000.0, 19000.0),
    heading=st.floats(0.0, 2 * math.pi),
)
def test_property_symmetric_without_wind(mach: float, alt: float, heading: float) -> None:
    # Property (symmetry of a windless stratified atmosphere): level flight gives a
    # carpet symmetric about the ground track.
    carpet = compute_carpet(_TRACER, FlightCondition(mach, alt, heading))
    if carpet.reaches_ground:
        assert carpet.half_width_left_m == pytest.approx(carpet.half_width_right_m, rel=1e-5)
        assert abs(carpet.centerline_cross_m) < 1e-6 * carpet.centerline_along_m


@settings(max_examples=20, deadline=None)
@given(m1=st.floats(1.2, 2.9), dm=st.floats(0.02, 0.5), alt=st.floats(9000.0, 19000.0))
def test_property_width_grows_with_mach(m1: float, dm: float, alt: float) -> None:
    a = compute_carpet(_TRACER, FlightCondition(m1, alt))
    b = compute_carpet(_TRACER, FlightCondition(m1 + dm, alt))
    assert b.width_m >= a.width_m - 1e-6


@settings(max_examples=25, deadline=None)
@given(frac=st.floats(0.3, 0.999), alt=st.floats(9000.0, 19000.0), phi=st.floats(-1.5, 1.5),
       heading=st.floats(0.0, 6.28))
def test_property_no_ray_reaches_below_cutoff(frac, alt, phi, heading) -> None:
    # Property: below cutoff Mach no ray of any azimuth reaches the ground.
    fc = FlightCondition(1.5, alt, heading)
    m_cut = cutoff_mach(_TRACER, fc)
    mach = max(1.0 + 1e-6, 1.0 + (m_cut - 1.0) * frac)
    reached, *_ = _TRACER.ground_point(FlightCondition(mach, alt, heading), phi)
    assert not reached
