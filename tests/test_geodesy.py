"""Geodesy on WGS 84 against geographiclib (Karney's geodesics, Geodesic.WGS84).

Tolerances: Vincenty's formulae are good to about 0.1 mm in distance (Survey Review
1975); the project needs 0.1 % over 500 km (design brief). The local frame is checked
for distances and directions within 500 km of its origin against geographiclib, and
its map scales against the Lambert azimuthal equal-area scales (USGS Professional
Paper 1395, sec. 24).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from geographiclib.geodesic import Geodesic

from advisory.geo import frame as fr
from advisory.geo import geodesy as gd
from advisory.geo.frame import LocalFrame
from tests.twins import geodesy as twins

GEOD = Geodesic.WGS84


def angle_diff_deg(a, b):
    return (np.asarray(a) - np.asarray(b) + 180.0) % 360.0 - 180.0


def random_pairs(rng, n, near_antipodal=0):
    lat1 = np.degrees(np.arcsin(rng.uniform(-1, 1, n)))
    lat2 = np.degrees(np.arcsin(rng.uniform(-1, 1, n)))
    lon1 = rng.uniform(-180, 180, n)
    lon2 = rng.uniform(-180, 180, n)
    k = near_antipodal
    lat2[:k] = np.clip(-lat1[:k] + rng.normal(0, 0.3, k), -90, 90)
    lon2[:k] = (lon1[:k] + 180 + rng.normal(0, 0.3, k) + 180) % 360 - 180
    return lat1, lon1, lat2, lon2


def test_constants_are_wgs84():
    # NIMA TR8350.2 (3rd ed.), table 3.1
    assert gd.WGS84_A == 6378137.0
    assert 1.0 / gd.WGS84_F == pytest.approx(298.257223563, rel=1e-15)
    assert gd.WGS84_A == GEOD.a and gd.WGS84_F == pytest.approx(GEOD.f, rel=1e-15)


def test_inverse_vs_geographiclib_global_and_near_antipodal():
    rng = np.random.default_rng(1)
    lat1, lon1, lat2, lon2 = random_pairs(rng, 1500, near_antipodal=300)
    r = gd.inverse_deg(lat1, lon1, lat2, lon2)
    ref = [GEOD.Inverse(*p) for p in zip(lat1, lon1, lat2, lon2, strict=True)]
    s_ref = np.array([g["s12"] for g in ref])
    assert np.abs(r.distance_m - s_ref).max() < 1e-3  # 1 mm anywhere on Earth
    assert np.abs(angle_diff_deg(r.azimuth1_deg, [g["azi1"] for g in ref])).max() < 2e-6
    assert np.abs(angle_diff_deg(r.azimuth2_deg, [g["azi2"] for g in ref])).max() < 2e-6


def test_inverse_within_500_km():
    rng = np.random.default_rng(2)
    n = 1000
    lat1 = rng.uniform(-85, 85, n)
    lon1 = rng.uniform(-180, 180, n)
    d = [GEOD.Direct(a, b, c, s) for a, b, c, s in zip(
        lat1, lon1, rng.uniform(0, 360, n), rng.uniform(1.0, 500e3, n), strict=True)]
    lat2 = np.array([g["lat2"] for g in d])
    lon2 = np.array([g["lon2"] for g in d])
    r = gd.inverse(np.radians(lat1), np.radians(lon1), np.radians(lat2), np.radians(lon2))
    s_ref = np.array([g["s12"] for g in d])
    # far better than the 0.1 % the project asks for: Vincenty's 0.1 mm
    assert np.abs(r.distance_m - s_ref).max() < 2e-4
    far = s_ref > 100.0  # below that, the degree round-off of the test points dominates
    da1 = angle_diff_deg(np.degrees(r.azimuth1_rad), [g["azi1"] for g in d])
    da2 = angle_diff_deg(np.degrees(r.azimuth2_rad), [g["azi2"] for g in d])
    assert np.abs(da1[far]).max() < 1e-7 and np.abs(da2[far]).max() < 1e-7


def test_bisection_fallback_agrees_with_geographiclib():
    # the near-antipodal fallback used on ordinary pairs too, through its plain twin
    bisect = twins.inverse_bisect_point_twin
    rng = np.random.default_rng(3)
    lat1, lon1, lat2, lon2 = random_pairs(rng, 80, near_antipodal=20)
    for p in zip(lat1, lon1, lat2, lon2, strict=True):
        s, a1, a2 = bisect(*np.radians(p))
        g = GEOD.Inverse(*p)
        assert s == pytest.approx(g["s12"], abs=1e-3)
        assert abs(angle_diff_deg(math.degrees(a1), g["azi1"])) < 1e-5
        assert abs(angle_diff_deg(math.degrees(a2), g["azi2"])) < 1e-5


def test_inverse_special_cases():
    r = gd.inverse(0.3, 0.2, 0.3, 0.2)
    assert r == (0.0, 0.0, 0.0)
    # pole to pole: half a meridian (geographiclib)
    r = gd.inverse_deg(90, 0, -90, 0)
    assert r.distance_m == pytest.approx(GEOD.Inverse(90, 0, -90, 0)["s12"], abs=1e-3)
    # equatorial antipodes: two shortest geodesics over either pole, same length
    r = gd.inverse_deg(0, 0, 0, 180)
    assert r.distance_m == pytest.approx(GEOD.Inverse(0, 0, 0, 180)["s12"], abs=1e-3)
    assert r.azimuth1_deg in (0.0, pytest.approx(180.0))
    # scalars in, floats out; arrays broadcast
    assert isinstance(gd.inverse(0.1, 0.1, 0.2, 0.2).distance_m, float)
    assert gd.inverse(0.1, 0.1, np.zeros((2, 3)), 0.2).distance_m.shape == (2, 3)
    b = gd.inverse_deg(10, 20, 11, 21)
    back = GEOD.Inverse(11, 21, 10, 20)["azi1"] % 360
    assert b.back_azimuth_deg == pytest.approx(back, abs=1e-7)
    rad = gd.inverse(*np.radians([10, 20, 11, 21]))
    assert math.degrees(rad.back_azimuth_rad) == pytest.approx(back, abs=1e-7)


def test_direct_vs_geographiclib():
    rng = np.random.default_rng(4)
    n = 1000
    lat1 = np.degrees(np.arcsin(rng.uniform(-1, 1, n)))
    lon1 = rng.uniform(-180, 180, n)
    az = rng.uniform(0, 360, n)
    s = rng.uniform(-2e7, 2e7, n)
    r = gd.direct_deg(lat1, lon1, az, s)
    for i in range(n):
        g = GEOD.Direct(lat1[i], lon1[i], az[i], s[i])
        miss = GEOD.Inverse(r.lat_deg[i], r.lon_deg[i], g["lat2"], g["lon2"])["s12"]
        assert miss < 1e-3, i
        assert abs(angle_diff_deg(r.azimuth_deg[i], g["azi2"])) < 1e-6


def test_scalar_kernels_match_python_twins():
    # numba kernels against the same source run as plain Python (RULES: parity test)
    rng = np.random.default_rng(5)
    lat1, lon1, lat2, lon2 = (np.radians(v) for v in random_pairs(rng, 60, near_antipodal=10))
    for kernel, twin_fn, args in (
        (gd.inverse_kernel, twins.inverse_kernel_twin, (lat1, lon1, lat2, lon2)),
        (gd.direct_kernel, twins.direct_kernel_twin,
         (lat1, lon1, lon2, rng.uniform(-2e7, 2e7, 60))),
    ):
        got = kernel(*args)
        twin = twin_fn(*args)
        for a, b in zip(got, twin, strict=True):
            np.testing.assert_allclose(a, b, rtol=1e-12, atol=1e-9)
    f = LocalFrame(0.6, -1.2)
    e = rng.uniform(-5e5, 5e5, 60)
    n = rng.uniform(-5e5, 5e5, 60)
    for kernel, twin_fn, args in (
        (fr.frame_inverse_kernel, twins.frame_inverse_kernel_twin,
         (f.lat0_rad, f.lon0_rad, f.radius_m, e, n)),
        (fr.frame_forward_kernel, twins.frame_forward_kernel_twin,
         (f.lat0_rad, f.lon0_rad, f.radius_m, lat1 * 0.01 + 0.6, lon1 * 0.01 - 1.2)),
    ):
        got = kernel(*args)
        twin = twin_fn(*args)
        for a, b in zip(got, twin, strict=True):
            np.testing.assert_allclose(a, b, rtol=1e-12, atol=1e-9)


# --------------------------------------------------------------------------------------
# Local frame
# --------------------------------------------------------------------------------------


def frame_samples(rng, lat0, lon0, n, radius=500e3):
    f = LocalFrame.from_deg(lat0, lon0)
    r = radius * np.sqrt(rng.uniform(0, 1, n))
    th = rng.uniform(0, 2 * np.pi, n)
    return f, r * np.sin(th), r * np.cos(th)


@pytest.mark.parametrize("lat0, lon0", [(0.0, 0.0), (37.5, -120.0), (-62.0, 170.0),
                                        (71.0, 179.9), (15.0, -60.0)])
def test_frame_distances_and_bearings_vs_geographiclib(lat0, lon0):
    rng = np.random.default_rng(int(lat0 * 10 + 1000))
    f, e, n = frame_samples(rng, lat0, lon0, 600)
    lat, lon = f.from_enu(e, n)
    lat, lon = np.degrees(lat), np.degrees(lon)
    e1, n1, e2, n2 = e[:300], n[:300], e[300:], n[300:]
    worst_d = worst_b = worst_b_near = 0.0
    for i in range(300):
        g = GEOD.Inverse(lat[i], lon[i], lat[300 + i], lon[300 + i])
        if g["s12"] < 1000.0:
            continue
        plane = math.hypot(e2[i] - e1[i], n2[i] - n1[i])
        worst_d = max(worst_d, abs(plane / g["s12"] - 1.0))
        bearing = math.atan2(e2[i] - e1[i], n2[i] - n1[i])
        azi = math.degrees(f.grid_to_azimuth(e1[i], n1[i], bearing))
        err = abs(angle_diff_deg(azi, g["azi1"]))
        worst_b = max(worst_b, err)
        if g["s12"] < 100e3:
            worst_b_near = max(worst_b_near, err)
    # the brief: distances to 0.1 % within 500 km of the origin (bound s**2/(8 R**2) =
    # 0.077 % at 500 km, PP 1395 sec. 24 scales)
    assert worst_d < 1e-3
    # directions: the plane chord versus the geodesic's azimuth; curvature of geodesics
    # in the plane dominates for long lines (measured 0.13 deg worst at 1000 km)
    assert worst_b < 0.2
    assert worst_b_near < 0.03


@pytest.mark.parametrize("lat0, lon0", [(0.0, 0.0), (48.0, 11.0), (-80.0, -30.0)])
def test_frame_round_trip_and_origin_geodesics(lat0, lon0):
    rng = np.random.default_rng(7)
    f, e, n = frame_samples(rng, lat0, lon0, 400, radius=1000e3)
    lat, lon = f.from_enu(e, n)
    e2, n2 = f.to_enu(lat, lon)
    assert np.hypot(e2 - e, n2 - n).max() < 1e-3  # round trip well under 1 m
    # from the origin: azimuth exact, distance by the radial law r = 2R sin(s/2R)
    for i in range(0, 400, 10):
        g = GEOD.Inverse(lat0, lon0, math.degrees(lat[i]), math.degrees(lon[i]))
        s = 2 * f.radius_m * math.asin(math.hypot(e[i], n[i]) / (2 * f.radius_m))
        assert s == pytest.approx(g["s12"], abs=1e-3)
        assert abs(angle_diff_deg(math.degrees(math.atan2(e[i], n[i])), g["azi1"])) < 1e-8
    assert f.to_enu(math.radians(lat0), math.radians(lon0)) == (0.0, 0.0)


def test_frame_direction_conversion_and_scales_vs_small_steps():
    # Directions and scales at a point, checked on 20 m steps taken with geographiclib
    f = LocalFrame.from_deg(55.0, 12.0)
    rng = np.random.default_rng(8)
    lat_p = rng.uniform(52.0, 58.0, 40)
    lon_p = rng.uniform(5.0, 19.0, 40)
    az = rng.uniform(0, 360, 40)
    ep, np_ = f.to_enu(np.radians(lat_p), np.radians(lon_p))
    grid = f.azimuth_to_grid(ep, np_, np.radians(az))
    for i in range(40):
        g = GEOD.Direct(lat_p[i], lon_p[i], az[i], 20.0)
        eq, nq = f.to_enu(math.radians(g["lat2"]), math.radians(g["lon2"]))
        step_bearing = math.atan2(eq - ep[i], nq - np_[i])
        assert abs(angle_diff_deg(math.degrees(grid[i]), math.degrees(step_bearing))) < 1e-4
        back = f.grid_to_azimuth(ep[i], np_[i], grid[i])
        assert abs(angle_diff_deg(math.degrees(back), az[i])) < 1e-9
        # scale along this direction (Tissot's indicatrix, PP 1395 sec. 4): a ground step
        # of length L at true angle t from the radial has plane length
        # L sqrt((h cos t)**2 + (k sin t)**2)
        h, k = f.scale_factors(ep[i], np_[i])
        t = math.radians(az[i]) - float(f.locate(ep[i], np_[i]).radial_true_rad[0])
        plane_len = math.hypot(eq - ep[i], nq - np_[i])
        expect = 20.0 * math.hypot(h * math.cos(t), k * math.sin(t))
        assert plane_len == pytest.approx(expect, rel=1e-6)
        assert h * k == pytest.approx(1.0, abs=1e-12)  # equal-area scales (PP 1395 sec. 24)


def test_frame_input_checks_and_locate():
    with pytest.raises(ValueError, match="lat0_rad"):
        LocalFrame(2.0, 0.0)
    with pytest.raises(ValueError, match="lon0_rad must be a finite number, got nan"):
        LocalFrame(0.0, float("nan"))
    f = LocalFrame.from_deg(10.0, 20.0)
    pts = f.locate([1e4, -3e4], [2e4, 5e3])
    lat, lon = f.from_enu([1e4, -3e4], [2e4, 5e3])
    assert np.array_equal(pts.lat_rad, lat) and np.array_equal(pts.lon_rad, lon)
    pts2 = f.locate_geodetic(lat, lon)
    np.testing.assert_allclose(pts2.east_m, [1e4, -3e4], atol=1e-6)
    np.testing.assert_allclose(pts2.radial_true_rad, pts.radial_true_rad, atol=1e-12)
    assert f == LocalFrame.from_deg(10.0, 20.0)
