"""The flight-guidance targets: where the predicted manoeuvre ends (issue 13).

The air data may carry what the crew has selected (``selected_alt_ft``,
``selected_heading_deg``, ``selected_mach``); the trajectory ahead then levels off, rolls
out or stops accelerating there instead of holding the manoeuvre for the whole look-ahead.

References used here:
* Coordinated-turn rate ``psi_dot = g tan(phi) / V``: *Flight Dynamics* (Princeton
  University Press, 2004), point-mass equations, ch. 2.
* Climb ``dh/dt = V sin(gamma)``; a capture at a constant pitch rate ``q`` from
  ``gamma0`` to level gains ``V (1 - cos gamma0) / q`` (closed form of the integral);
  checked here with ``scipy.integrate.quad`` and ``solve_ivp``.
* Speed of sound of the ICAO Standard Atmosphere 1993 (equal to the U.S. Standard
  Atmosphere 1976 below 32 km) from the reference library ``ambiance``.
* The international foot, 0.3048 m exactly (the 1959 agreement).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from ambiance import Atmosphere as Ambiance
from scipy.integrate import quad, solve_ivp

from advisory.pipeline.state import StateValidator
from advisory.pipeline.trajectory import predict_trajectory, propagate_kernel
from tests.twins.trajectory import propagate_kernel_twin

G = 9.80665  # standard gravity, U.S. Standard Atmosphere 1976
A_TROPOPAUSE = 295.0696  # speed of sound from 11 to 20 km, m/s (USSA 1976)
LAT, LON = math.radians(30.0), math.radians(-40.0)


def _isa_sound(alt_m: np.ndarray) -> np.ndarray:
    """Speed of sound, m/s, of the ICAO standard atmosphere (``ambiance``)."""
    return np.asarray(Ambiance(np.clip(np.asarray(alt_m, dtype=float), -5000.0, 80000.0))
                      .speed_of_sound, dtype=float).reshape(np.shape(alt_m))


@pytest.mark.parametrize("fpa_deg, climb_m", [(3.0, 900.0), (-2.5, -1200.0), (1.5, 60.0)])
def test_a_climb_levels_off_at_the_selected_altitude(fpa_deg, climb_m) -> None:
    mach, h0 = 1.6, 14000.0
    v = mach * A_TROPOPAUSE
    gam = math.radians(fpa_deg)
    rate = math.radians(1.0)
    tr = predict_trajectory(LAT, LON, h0, mach, 0.3, v * math.cos(gam),
                            speed_of_sound=A_TROPOPAUSE, fpa_rad=gam, lookahead_s=300.0,
                            step_s=1.0, target_alt_m=h0 + climb_m, capture_rate_rad_s=rate)
    # level at the selected altitude (the stepping's mean angle per step costs a few
    # decimetres where the capture starts inside a step)
    assert tr.alt_m[-1] == pytest.approx(h0 + climb_m, abs=0.5)
    assert tr.fpa_rad[-1] == 0.0
    # before the capture the climb is V sin(gamma0) (closed form)
    assert (tr.alt_m[1] - tr.alt_m[0]) / tr.t_s[1] == pytest.approx(
        v * math.sin(gam), rel=1e-9) or abs(climb_m) < 100.0
    # the capture: the angle falls at the configured rate, never past level
    dfpa = np.diff(tr.fpa_rad) / np.diff(tr.t_s)
    assert np.all(np.abs(dfpa) <= rate * (1 + 1e-9))
    assert np.all(tr.fpa_rad * math.copysign(1.0, gam) >= -1e-15)
    # the whole path against scipy: integrate V sin(gamma(t)) of the predicted angle
    # (linear between the points) with quad, the height gained by the capture with the
    # closed form
    gam_t = lambda s: float(np.interp(s, tr.t_s, tr.fpa_rad))  # noqa: E731
    gained, _ = quad(lambda s: v * math.sin(gam_t(s)), 0.0, 300.0, limit=400,
                     points=tr.t_s[(np.diff(tr.fpa_rad, prepend=tr.fpa_rad[0]) != 0)][:4])
    assert gained == pytest.approx(climb_m, abs=1.0)
    ramp = tr.t_s[(tr.fpa_rad != gam) & (tr.fpa_rad != 0.0)]
    if ramp.size:  # the capture's height, closed form, against quad over the ramp
        g0 = abs(gam)
        closed = v * (1.0 - math.cos(g0)) / rate
        num, _ = quad(lambda s: v * math.sin(g0 - rate * s), 0.0, g0 / rate)
        assert num == pytest.approx(closed, rel=1e-9)


def test_a_climb_in_the_standard_atmosphere_levels_off_within_a_metre() -> None:
    # the speed of sound falls with height below 11 km: the capture's start is moved so
    # that the integrated climb (solve_ivp of dh/dt = M a(h) sin(gamma), ambiance's a)
    # levels at the selected altitude
    mach, h0, target = 1.3, 7000.0, 9400.0
    gam = math.radians(3.5)
    a0 = float(_isa_sound(np.array([h0]))[0])
    tr = predict_trajectory(LAT, LON, h0, mach, 1.0, mach * a0 * math.cos(gam),
                            speed_of_sound=_isa_sound, fpa_rad=gam, lookahead_s=300.0,
                            step_s=1.0, target_alt_m=target)
    assert tr.alt_m[-1] == pytest.approx(target, abs=1.0)

    def rhs(s, h):
        return [mach * float(_isa_sound(np.array([h[0]]))[0])
                * math.sin(float(np.interp(s, tr.t_s, tr.fpa_rad)))]
    sol = solve_ivp(rhs, (0.0, 300.0), [h0], t_eval=tr.t_s, rtol=1e-10, atol=1e-6,
                    max_step=0.5)
    assert np.max(np.abs(sol.y[0] - tr.alt_m)) < 1.0


def test_a_selected_altitude_behind_the_climb_is_not_used() -> None:
    gam = math.radians(2.0)
    kw = dict(speed_of_sound=A_TROPOPAUSE, fpa_rad=gam, lookahead_s=120.0, step_s=2.0)
    free = predict_trajectory(LAT, LON, 14000.0, 1.5, 0.0, 440.0, **kw)
    behind = predict_trajectory(LAT, LON, 14000.0, 1.5, 0.0, 440.0, target_alt_m=13000.0, **kw)
    np.testing.assert_array_equal(free.alt_m, behind.alt_m)


@pytest.mark.parametrize("bank_deg, hdg0_deg, selected_deg, rolls_out", [
    (25.0, 10.0, 70.0, True), (-20.0, 10.0, 300.0, True),
    (25.0, 10.0, 250.0, False),  # more than half a turn ahead: not this turn's end
    (-20.0, 10.0, 60.0, False)])
def test_a_turn_rolls_out_on_the_selected_heading(bank_deg, hdg0_deg, selected_deg,
                                                   rolls_out) -> None:
    mach = 1.4
    v = mach * A_TROPOPAUSE
    bank = math.radians(bank_deg)
    tr = predict_trajectory(LAT, LON, 14000.0, mach, math.radians(hdg0_deg), v,
                            speed_of_sound=A_TROPOPAUSE, bank_rad=bank, lookahead_s=300.0,
                            step_s=1.0, target_heading_rad=math.radians(selected_deg))
    rate = G * math.tan(bank) / v  # coordinated turn (Flight Dynamics, ch. 2)
    if rolls_out:
        turn = ((selected_deg - hdg0_deg) if bank > 0 else (hdg0_deg - selected_deg)) % 360.0
        t_out = math.radians(turn) / abs(rate)
        # the plane's grid heading (true at the start point, whose meridian the
        # selected heading is read at; the true heading of the straight flight after
        # the roll-out turns with the meridians' convergence)
        assert math.degrees(tr.heading_grid_rad[-1]) == pytest.approx(selected_deg, abs=1e-6)
        assert np.all(tr.bank_rad[tr.t_s > t_out + 1.0] == 0.0)
        assert np.all(tr.bank_rad[tr.t_s < t_out - 1.0] == bank)
    else:  # the turn goes on at the coordinated rate for the whole look-ahead
        expect = (hdg0_deg + math.degrees(rate) * 300.0) % 360.0
        got = math.degrees(tr.heading_grid_rad[-1]) % 360.0
        assert (got - expect + 180.0) % 360.0 - 180.0 == pytest.approx(0.0, abs=1e-3)


@pytest.mark.parametrize("rate, selected", [(0.01, 1.75), (-0.02, 1.3), (0.01, 1.4)])
def test_a_mach_change_stops_at_the_selected_mach(rate, selected) -> None:
    m0 = 1.6
    tr = predict_trajectory(LAT, LON, 14000.0, m0, 0.0, m0 * A_TROPOPAUSE,
                            speed_of_sound=A_TROPOPAUSE, mach_rate_per_s=rate,
                            lookahead_s=300.0, step_s=2.0, target_mach=selected)
    toward = (selected - m0) * rate > 0
    # M(t) = M0 + Mdot t up to the selected Mach, then held (closed form); a selected
    # Mach the change leads away from is not this change's end
    expect = m0 + rate * tr.t_s
    if toward:
        expect = np.minimum(expect, selected) if rate > 0 else np.maximum(expect, selected)
    np.testing.assert_allclose(tr.mach, expect, rtol=0, atol=1e-12)


def test_the_kernel_with_a_late_pitch_start_matches_its_twin() -> None:
    t = np.arange(0.0, 121.0, 2.0)
    mach = np.full_like(t, 1.6)
    a = np.full_like(t, A_TROPOPAUSE)
    gam = math.radians(3.0)
    for start in (0.0, 17.3, 40.0):
        params = np.array([14000.0, math.sin(gam), math.cos(gam), 0.2, math.nan, 0.4, 5.0,
                           -3.0, 100.0, -50.0, 6.37e6, G, -math.radians(1.0), start + 3.0,
                           start])
        np.testing.assert_allclose(propagate_kernel(t, mach, a, params),
                                   propagate_kernel_twin(t, mach, a, params), rtol=1e-9,
                                   atol=1e-6)


def _fields(**over):
    f = {"lat_deg": 30.0, "lon_deg": -40.0, "alt_ft": 50000.0, "mach": 1.6,
         "heading_deg": 90.0, "gs_kt": 917.0, "bank_deg": 0.0, "fpa_deg": 0.0}
    f.update(over)
    return f


def test_the_validator_carries_the_targets_in_si_and_names_a_bad_one() -> None:
    v = StateValidator()
    st = v.validate(_fields(selected_alt_ft=55000.0, selected_heading_deg=120.0,
                            selected_mach=1.4), rx_monotonic=1.0, now_monotonic=1.0)
    assert st.selected_alt_m == pytest.approx(55000.0 * 0.3048, rel=1e-15)  # international ft
    assert st.selected_heading_rad == pytest.approx(math.radians(120.0), rel=1e-15)
    assert st.selected_mach == 1.4
    plain = StateValidator().validate(_fields(), rx_monotonic=1.0, now_monotonic=1.0)
    assert plain.selected_alt_m is None and plain.selected_mach is None
    for name, bad in (("selected_alt_ft", 150000.0), ("selected_heading_deg", -5.0),
                      ("selected_mach", 9.0), ("selected_mach", "fast")):
        rej = StateValidator().validate(_fields(**{name: bad}), rx_monotonic=1.0,
                                        now_monotonic=1.0)
        assert rej in (f"range:{name}", f"type:{name}")  # the code names the field
        assert name in rej.detail and repr(bad) in rej.detail
