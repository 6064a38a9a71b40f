"""Trajectory prediction: coordinated turns, straight flight, wind, Mach rate and climb.

References used here:
* Coordinated-turn relation psi_dot = g tan(phi) / V and level-turn radius
  V**2 / (g tan phi): *Flight Dynamics* (Princeton University Press, 2004), point-mass
  equations, ch. 2; the standard relation of flight-mechanics texts.
* geographiclib (Karney's geodesics) for distances, azimuths and straight (geodesic)
  flight on WGS 84.
* scipy.integrate.solve_ivp as the reference integrator for the climb with Mach rate.
* g = 9.80665 m/s^2, standard gravity (U.S. Standard Atmosphere 1976).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from geographiclib.geodesic import Geodesic
from scipy.integrate import solve_ivp

from advisory.geo.frame import LocalFrame
from advisory.pipeline.trajectory import ground_to_plane, predict_trajectory, propagate_kernel
from tests.twins.geodesy import python_twin
from tests.twins.trajectory import ground_to_plane_twin, propagate_kernel_twin

GEOD = Geodesic.WGS84
G = 9.80665  # standard gravity, U.S. Standard Atmosphere 1976
A_TROPOPAUSE = 295.0696  # speed of sound above 11 km, m/s (U.S. Standard Atmosphere 1976)


def deg(x):
    return np.degrees(x)


def dist(lat1, lon1, lat2, lon2):
    """geographiclib distance between points given in rad, m."""
    return GEOD.Inverse(deg(lat1), deg(lon1), deg(lat2), deg(lon2))["s12"]


def angle_diff_deg(a, b):
    return (np.asarray(a) - np.asarray(b) + 180.0) % 360.0 - 180.0


@pytest.mark.parametrize("bank_deg, lat_deg, mach", [(30.0, 45.0, 0.9), (-25.0, -10.0, 1.4),
                                                      (45.0, 68.0, 1.1)])
def test_full_turn_closes_at_coordinated_rate_and_radius(bank_deg, lat_deg, mach):
    bank = math.radians(bank_deg)
    v = mach * A_TROPOPAUSE
    rate = G * math.tan(bank) / v  # coordinated turn (Flight Dynamics, ch. 2)
    period = 2 * math.pi / abs(rate)
    radius = v**2 / (G * math.tan(abs(bank)))  # level-turn radius, same source
    lat0, lon0, hdg0 = math.radians(lat_deg), math.radians(20.0), math.radians(10.0)
    tr = predict_trajectory(lat0, lon0, 12000.0, mach, hdg0, v, speed_of_sound=A_TROPOPAUSE,
                            bank_rad=bank, lookahead_s=period, step_s=period / 180)
    assert np.allclose(tr.turn_rate_rad_s, rate, rtol=1e-12)
    # the path closes after one period (geographiclib distance back to the start), to
    # 1e-5 of its length (the documented accuracy of the plane propagation)
    assert dist(lat0, lon0, tr.lat[-1], tr.lon[-1]) < 1e-5 * 2 * math.pi * radius
    # half-way it is a diameter away, abeam on the side of the turn
    half = dist(lat0, lon0, tr.lat[90], tr.lon[90])
    assert half == pytest.approx(2 * radius, rel=1e-5)
    az = GEOD.Inverse(lat_deg, 20.0, deg(tr.lat[90]), deg(tr.lon[90]))["azi1"]
    side = 90.0 if bank > 0 else -90.0
    assert abs(angle_diff_deg(az, 10.0 + side)) < 0.01
    # a quarter turn: heading changed by 90 deg in the turn's direction; still air, so
    # track equals heading and ground speed equals true airspeed
    assert abs(angle_diff_deg(deg(tr.heading_grid_rad[45]), 10.0 + side)) < 1e-9
    assert np.allclose(tr.track_grid_rad, tr.heading_grid_rad)
    assert np.allclose(tr.ground_speed_mps, v)
    # every point lies on the circle: distance to the centre (geographiclib) is the radius
    c = GEOD.Direct(lat_deg, 20.0, 10.0 + side, radius)
    r = [GEOD.Inverse(c["lat2"], c["lon2"], deg(a), deg(b))["s12"]
         for a, b in zip(tr.lat, tr.lon, strict=True)]
    assert np.abs(np.array(r) / radius - 1).max() < 1e-4


@pytest.mark.parametrize("lat_deg, hdg_deg", [(0.0, 90.0), (60.0, 80.0), (-75.0, 300.0),
                                              (35.0, 180.0)])
def test_straight_flight_is_the_geodesic(lat_deg, hdg_deg):
    gs = 1.6 * A_TROPOPAUSE
    tr = predict_trajectory(math.radians(lat_deg), math.radians(-30.0), 15000.0, 1.6,
                            math.radians(hdg_deg), gs, speed_of_sound=A_TROPOPAUSE)
    assert tr.t_s[0] == 0.0 and tr.t_s[-1] == 300.0 and len(tr) == 151
    for i in (1, 75, 150):
        # distance flown equals ground speed x time (geographiclib)
        g = GEOD.Direct(lat_deg, -30.0, hdg_deg, gs * tr.t_s[i])
        assert GEOD.Inverse(g["lat2"], g["lon2"], deg(tr.lat[i]), deg(tr.lon[i]))["s12"] < 0.01
        assert abs(angle_diff_deg(deg(tr.heading_rad[i]), g["azi2"])) < 1e-6
        assert abs(angle_diff_deg(deg(tr.track_rad[i]), g["azi2"])) < 1e-6
    assert np.allclose(tr.ground_speed_mps, gs)
    assert not tr.wind_inferred or abs(tr.wind_east_mps) + abs(tr.wind_north_mps) < 1e-9


def test_given_wind_adds_to_air_velocity():
    v = 1.3 * A_TROPOPAUSE
    we, wn = 25.0, -12.0
    tr = predict_trajectory(math.radians(40.0), 0.0, 14000.0, 1.3, math.radians(30.0), 0.0,
                            speed_of_sound=A_TROPOPAUSE, wind_east_mps=we, wind_north_mps=wn)
    ge = v * math.sin(math.radians(30.0)) + we
    gn = v * math.cos(math.radians(30.0)) + wn
    gs = math.hypot(ge, gn)
    trk = math.degrees(math.atan2(ge, gn))
    assert tr.ground_speed_mps[0] == pytest.approx(gs)
    assert deg(tr.track_rad[0]) == pytest.approx(trk)
    assert deg(tr.heading_rad[0]) == pytest.approx(30.0)
    assert not tr.wind_inferred and (tr.wind_east_mps, tr.wind_north_mps) == (we, wn)
    # straight flight in a steady wind: the ground path is the geodesic along the track
    # (the wind is held constant in the local frame; over 135 km this differs from a
    # geodesic by metres, so the check allows 20 m)
    g = GEOD.Direct(40.0, 0.0, trk, gs * 300.0)
    assert GEOD.Inverse(g["lat2"], g["lon2"], deg(tr.lat[-1]), deg(tr.lon[-1]))["s12"] < 20.0


def test_wind_inferred_from_track_and_ground_speed():
    v = 1.2 * A_TROPOPAUSE
    tr = predict_trajectory(math.radians(30.0), 0.0, 13000.0, 1.2, math.radians(100.0), 380.0,
                            speed_of_sound=A_TROPOPAUSE, track_rad=math.radians(95.0))
    assert tr.wind_inferred
    assert tr.ground_speed_mps[0] == pytest.approx(380.0)
    assert deg(tr.track_rad[0]) == pytest.approx(95.0)
    # wind = ground velocity - air velocity (vector triangle)
    we = 380.0 * math.sin(math.radians(95.0)) - v * math.sin(math.radians(100.0))
    wn = 380.0 * math.cos(math.radians(95.0)) - v * math.cos(math.radians(100.0))
    assert (tr.wind_east_mps, tr.wind_north_mps) == (pytest.approx(we), pytest.approx(wn))


def test_wind_inferred_along_heading():
    v = 1.2 * A_TROPOPAUSE
    tr = predict_trajectory(math.radians(30.0), 0.0, 13000.0, 1.2, math.radians(100.0), 300.0,
                            speed_of_sound=A_TROPOPAUSE, fpa_rad=math.radians(3.0))
    w_along = 300.0 - v * math.cos(math.radians(3.0))  # ground speed minus horizontal TAS
    assert tr.wind_inferred
    assert math.hypot(tr.wind_east_mps, tr.wind_north_mps) == pytest.approx(abs(w_along))
    assert tr.ground_speed_mps[0] == pytest.approx(300.0)
    assert deg(tr.track_rad[0]) == pytest.approx(100.0)


def test_mach_rate_and_climb_constant_sound_speed():
    m0, mdot, fpa = 1.05, 0.002, math.radians(4.0)
    tr = predict_trajectory(0.5, 0.5, 11500.0, m0, 0.0, 320.0, speed_of_sound=A_TROPOPAUSE,
                            mach_rate_per_s=mdot, fpa_rad=fpa)
    t = tr.t_s
    assert np.allclose(tr.mach, m0 + mdot * t)
    # h = h0 + a sin(fpa) (M0 t + Mdot t**2 / 2): exact integral of V sin(fpa)
    expect = 11500.0 + A_TROPOPAUSE * math.sin(fpa) * (m0 * t + mdot * t**2 / 2)
    assert np.abs(tr.alt_m - expect).max() < 1e-6
    assert np.allclose(tr.tas_mps, tr.mach * A_TROPOPAUSE)
    assert np.all(tr.fpa_rad == fpa)
    # horizontal distance = integral of V cos(fpa) plus the (inferred) along-track wind
    w = 320.0 - m0 * A_TROPOPAUSE * math.cos(fpa)
    s_expect = A_TROPOPAUSE * math.cos(fpa) * (m0 * 300 + mdot * 300**2 / 2) + w * 300
    assert dist(0.5, 0.5, tr.lat[-1], tr.lon[-1]) == pytest.approx(s_expect, abs=0.05)


def test_climb_with_altitude_dependent_sound_speed_vs_scipy():
    # a linear sound-speed lapse (invented profile); reference: solve_ivp on
    # dh/dt = (M0 + Mdot t) a(h) sin(fpa)
    def a_of_h(h):
        return 340.3 - 0.0041 * np.asarray(h)

    m0, mdot, fpa, h0 = 0.95, 0.0015, math.radians(6.0), 2000.0
    tr = predict_trajectory(0.3, -1.0, h0, m0, 1.0, 300.0, speed_of_sound=a_of_h,
                            mach_rate_per_s=mdot, fpa_rad=fpa, step_s=2.0)
    sol = solve_ivp(lambda t, h: (m0 + mdot * t) * a_of_h(h) * math.sin(fpa), (0, 300),
                    [h0], t_eval=tr.t_s, rtol=1e-10, atol=1e-8)
    assert np.abs(tr.alt_m - sol.y[0]).max() < 0.05  # m, over a 10 km climb
    assert np.allclose(tr.tas_mps, tr.mach * a_of_h(tr.alt_m), rtol=1e-12)


def test_roll_out_heading():
    v = 1.2 * A_TROPOPAUSE
    bank = math.radians(-30.0)  # left turn
    tr = predict_trajectory(0.0, 0.0, 13000.0, 1.2, math.radians(90.0), v,
                            speed_of_sound=A_TROPOPAUSE, bank_rad=bank,
                            roll_out_heading_rad=math.radians(45.0))
    turn_time = math.radians(45.0) / (G * math.tan(abs(bank)) / v)  # Flight Dynamics ch. 2
    after = tr.t_s >= turn_time + 2.0
    before = tr.t_s < turn_time - 2.0
    assert np.all(tr.bank_rad[after] == 0.0) and np.all(tr.turn_rate_rad_s[after] == 0.0)
    assert np.all(tr.bank_rad[before] == bank)
    assert np.allclose(deg(tr.heading_grid_rad[after]), 45.0)
    # after the roll-out the path is straight: the geodesic from the roll-out point
    i = int(np.argmax(after))
    g = GEOD.Direct(deg(tr.lat[i]), deg(tr.lon[i]), deg(tr.track_rad[i]),
                    v * (300.0 - tr.t_s[i]))
    assert GEOD.Inverse(g["lat2"], g["lon2"], deg(tr.lat[-1]), deg(tr.lon[-1]))["s12"] < 1.0


def test_prediction_in_a_distant_frame_matches():
    # the same flight propagated in a frame 300 km away (as in the zones' frame)
    args = dict(speed_of_sound=A_TROPOPAUSE, bank_rad=math.radians(20.0),
                wind_east_mps=15.0, wind_north_mps=5.0)
    lat0, lon0 = math.radians(50.0), math.radians(8.0)
    own = predict_trajectory(lat0, lon0, 14000.0, 1.3, 2.0, 0.0, **args)
    far = LocalFrame.from_deg(47.5, 9.5)
    other = predict_trajectory(lat0, lon0, 14000.0, 1.3, 2.0, 0.0, frame=far, **args)
    assert other.frame is far
    e, n = far.to_enu(own.lat, own.lon)
    # the documented cost of propagating far from the frame origin: about 20 m here
    # (geodesics curve slightly in the plane; estimate, no source)
    assert np.hypot(e - other.east_m, n - other.north_m).max() < 30.0
    # and the heading drifts by that curvature times the path length (~0.03 deg)
    assert np.abs(angle_diff_deg(deg(own.heading_rad), deg(other.heading_rad))).max() < 0.05
    assert np.abs(angle_diff_deg(deg(own.track_rad), deg(other.track_rad))).max() < 0.05


def test_kernel_matches_numpy_twin():
    # numba kernel against its independent numpy twin, and against its own Python run
    rng = np.random.default_rng(9)
    for _ in range(6):
        n = int(rng.integers(2, 200))
        t = np.cumsum(np.r_[0.0, rng.uniform(0.5, 3.0, n - 1)])
        mach = rng.uniform(0.9, 2.0) + rng.uniform(-0.003, 0.003) * t
        a = 295.0 + rng.uniform(-5, 5) * np.sin(t / 50.0)
        turn = rng.choice([math.nan, rng.uniform(-2.0, 2.0)])
        bank = math.copysign(rng.uniform(0.0, 0.6), turn if not math.isnan(turn) else 1.0)
        params = np.array([rng.uniform(0, 15000), *(lambda g: (math.sin(g), math.cos(g)))(
            rng.uniform(-0.1, 0.1)), bank, turn, rng.uniform(0, 6.3), *rng.uniform(-30, 30, 2),
            *rng.uniform(-3e5, 3e5, 2), 6.37e6, G])
        got = propagate_kernel(t, mach, a, params)
        np.testing.assert_allclose(got, propagate_kernel_twin(t, mach, a, params), rtol=1e-9,
                                   atol=1e-6)
        np.testing.assert_allclose(got, python_twin(propagate_kernel)(t, mach, a, params),
                                   rtol=1e-12, atol=1e-9)


@pytest.mark.parametrize("field, value, text", [
    ("mach", 0.0, "mach must be > 0"),
    ("mach", float("nan"), "mach must be a finite number, got nan"),
    ("bank_rad", math.radians(89.0), "bank_rad must be <="),
    ("fpa_rad", -1.5, "fpa_rad must be >="),
    ("lookahead_s", 0.0, "lookahead_s must be > 0"),
    ("step_s", -1.0, "step_s must be > 0"),
    ("ground_speed_mps", -5.0, "ground_speed_mps must be >= 0"),
    ("lat_rad", 2.0, "lat_rad must be <="),
    ("track_rad", "east", "track_rad must be a finite number, got 'east'"),
    ("speed_of_sound", -3.0, "speed_of_sound must be > 0"),
    ("wind_east_mps", 5.0, "must be given together"),
])
def test_bad_input_named(field, value, text):
    kwargs = dict(lat_rad=0.5, lon_rad=0.1, alt_m=12000.0, mach=1.2, heading_rad=0.0,
                  ground_speed_mps=350.0, speed_of_sound=A_TROPOPAUSE)
    kwargs[field] = value
    with pytest.raises(ValueError, match=text):
        predict_trajectory(**kwargs)


def test_bad_speed_of_sound_callable_named():
    with pytest.raises(ValueError, match=r"speed_of_sound must be a positive.*altitude"):
        predict_trajectory(0.5, 0.1, 12000.0, 1.2, 0.0, 350.0,
                           speed_of_sound=lambda h: np.full_like(h, np.nan))


def test_short_last_step_and_mach_floor():
    tr = predict_trajectory(0.5, 0.1, 12000.0, 0.5, 0.0, 150.0, speed_of_sound=A_TROPOPAUSE,
                            lookahead_s=7.0, step_s=2.0, mach_rate_per_s=-0.1)
    assert tr.t_s.tolist() == [0.0, 2.0, 4.0, 6.0, 7.0]
    assert tr.mach.min() == pytest.approx(0.1)  # MIN_MACH floor, documented


def test_ground_to_plane_matches_its_twin_and_the_projection_scales() -> None:
    # the shared step correction of the trajectory and trial kernels
    rng = np.random.default_rng(5)
    radius = 6371008.8
    for _ in range(200):
        e, n = rng.uniform(-900e3, 900e3, 2)
        de, dn = rng.uniform(-600.0, 600.0, 2)
        got = ground_to_plane(e, n, de, dn, radius)
        np.testing.assert_allclose(got, ground_to_plane_twin(e, n, de, dn, radius),
                                   rtol=1e-12, atol=1e-9)
    assert ground_to_plane(0.0, 0.0, 3.0, 4.0, radius) == (3.0, 4.0)
    # Closed form (Snyder 1987, USGS PP 1395, sec. 24): at plane distance rho = 2R sin(c/2)
    # from the origin, a ground step L along the radius is L cos(c/2) on the plane, across
    # it L / cos(c/2).
    c = 800e3 / radius  # 800 km of arc from the origin, due east
    rho = 2.0 * radius * math.sin(0.5 * c)
    along = ground_to_plane(rho, 0.0, 100.0, 0.0, radius)
    across = ground_to_plane(rho, 0.0, 0.0, 100.0, radius)
    assert along[0] == pytest.approx(100.0 * math.cos(0.5 * c), rel=1e-12)
    assert across[1] == pytest.approx(100.0 / math.cos(0.5 * c), rel=1e-12)
    assert abs(along[1]) < 1e-12 and abs(across[0]) < 1e-12

