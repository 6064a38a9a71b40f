"""Geodesy on the WGS 84 ellipsoid: the inverse and direct problems.

Angles are radians inside (functions whose names end in ``_deg`` take and return
degrees). Azimuths are clockwise from true north, returned in [0, 2 pi). Distances
are metres along the geodesic on the ellipsoid surface.

Methods
-------
* Inverse and direct problems: Vincenty's formulae ("Direct and inverse solutions of
  geodesics on the ellipsoid with application of nested equations", Survey Review
  23(176), 88-93, 1975), accurate to about 0.1 mm. Where the inverse iteration does not
  converge (near-antipodal points) the solution falls back to bisection on the azimuth
  at the first point, in the canonical configuration of Karney's algorithm, where the
  longitude difference grows monotonically with that azimuth ("Algorithms for
  geodesics", J. Geodesy 87, 43-55, 2013, sec. 4), with Vincenty's series for the
  longitude and distance integrals.

The local plane frame built on these problems is in :mod:`advisory.geo.frame`.

The numeric cores are numba ``njit(cache=True)`` kernels over plain float64 arrays.
Their twins are the same source run as plain Python (``tests/twins/geodesy.py``);
``tests/test_geodesy.py`` compares the two, and both against ``geographiclib``.

References
----------
WGS 84 defining parameters a = 6378137 m, 1/f = 298.257223563: NIMA TR8350.2,
*Department of Defense World Geodetic System 1984*, 3rd ed., 2000, table 3.1.
"""

from __future__ import annotations

import math
from typing import NamedTuple

import numpy as np

from advisory.jit import njit

__all__ = [
    "WGS84_A",
    "WGS84_F",
    "WGS84_B",
    "WGS84_E2",
    "GeodesicInverse",
    "GeodesicDirect",
    "GeodesicInverseDeg",
    "GeodesicDirectDeg",
    "inverse",
    "direct",
    "inverse_deg",
    "direct_deg",
    "inverse_kernel",
    "direct_kernel",
]

WGS84_A = 6378137.0  #: semi-major axis, m (NIMA TR8350.2, table 3.1)
WGS84_F = 1.0 / 298.257223563  #: flattening (NIMA TR8350.2, table 3.1)
WGS84_B = WGS84_A * (1.0 - WGS84_F)  #: semi-minor axis, m (derived)
WGS84_E2 = WGS84_F * (2.0 - WGS84_F)  #: first eccentricity squared (derived)

_TWO_PI = 2.0 * math.pi
_EP2 = (WGS84_A**2 - WGS84_B**2) / WGS84_B**2  # second eccentricity squared
_TOL = 1e-12  # rad on the auxiliary sphere, about 6 micrometres
_MAX_ITER = 200


# --------------------------------------------------------------------------------------
# Scalar cores: numba kernels (tests/twins/geodesy.py runs them as plain Python)
# --------------------------------------------------------------------------------------


@njit(cache=True)
def _wrap_pi_point(x: float) -> float:
    """Wrap an angle to [-pi, pi)."""
    return (x + math.pi) % _TWO_PI - math.pi


@njit(cache=True)
def _wrap_2pi_point(x: float) -> float:
    """Wrap an angle to [0, 2 pi)."""
    r = x % _TWO_PI
    return 0.0 if r >= _TWO_PI else r


@njit(cache=True)
def _vincenty_ab_point(cos2_alpha: float) -> tuple[float, float]:
    """Vincenty's A and B distance-series coefficients (Survey Review 1975)."""
    u2 = cos2_alpha * _EP2
    big_a = 1.0 + u2 / 16384.0 * (4096.0 + u2 * (-768.0 + u2 * (320.0 - 175.0 * u2)))
    big_b = u2 / 1024.0 * (256.0 + u2 * (-128.0 + u2 * (74.0 - 47.0 * u2)))
    return big_a, big_b


@njit(cache=True)
def _delta_sigma_point(big_b: float, sin_s: float, cos_s: float, cos_2sm: float) -> float:
    """Vincenty's delta-sigma (Survey Review 1975)."""
    c2 = cos_2sm * cos_2sm
    return big_b * sin_s * (
        cos_2sm
        + big_b
        / 4.0
        * (
            cos_s * (-1.0 + 2.0 * c2)
            - big_b / 6.0 * cos_2sm * (-3.0 + 4.0 * sin_s * sin_s) * (-3.0 + 4.0 * c2)
        )
    )


@njit(cache=True)
def _lon_series_point(sin_alpha0: float, cos2_alpha: float, sigma: float, sin_s: float,
                      cos_s: float, cos_2sm: float) -> float:
    """Auxiliary-sphere minus ellipsoid longitude difference (Vincenty, Survey Review 1975)."""
    f = WGS84_F
    c = f / 16.0 * cos2_alpha * (4.0 + f * (4.0 - 3.0 * cos2_alpha))
    return (1.0 - c) * f * sin_alpha0 * (
        sigma + c * sin_s * (cos_2sm + c * cos_s * (-1.0 + 2.0 * cos_2sm * cos_2sm))
    )


@njit(cache=True)
def _lambda12_point(alpha1: float, sb1: float, cb1: float, sb2: float, cb2: float
                    ) -> tuple[float, float, float, float, float, float]:
    """Ellipsoid longitude difference reached from reduced latitude beta1 at azimuth alpha1.

    Canonical configuration (Karney 2013, sec. 4): beta1 <= 0, |beta2| <= |beta1|; the
    geodesic is followed to its first crossing of beta2 heading north.

    Returns
    -------
    lon12, sigma12, sin_sigma12, cos_sigma12, cos_2sigma_m, alpha2 : float
        Longitude difference on the ellipsoid (rad), arc on the auxiliary sphere and its
        sine and cosine, cosine of twice the mid-arc, and the azimuth at point 2 (rad).
    """
    sa1 = math.sin(alpha1)
    ca1 = math.cos(alpha1)
    sin_alpha0 = sa1 * cb1
    cos2_alpha = 1.0 - sin_alpha0 * sin_alpha0
    # azimuth at beta2 from Clairaut's relation, heading north there (Karney 2013, sec. 4)
    ca2 = math.sqrt(max(0.0, ca1 * ca1 * cb1 * cb1 + (cb2 * cb2 - cb1 * cb1))) / cb2
    sa2 = sin_alpha0 / cb2
    alpha2 = math.atan2(sa2, ca2)
    sig1 = math.atan2(sb1, ca1 * cb1)
    sig2 = math.atan2(sb2, ca2 * cb2)
    om1 = math.atan2(sin_alpha0 * sb1, ca1 * cb1)
    om2 = math.atan2(sin_alpha0 * sb2, ca2 * cb2)
    # differences forced into [0, pi] (Karney 2013, sec. 4)
    sin_s = max(0.0, math.cos(sig1) * math.sin(sig2) - math.sin(sig1) * math.cos(sig2))
    cos_s = math.cos(sig1) * math.cos(sig2) + math.sin(sig1) * math.sin(sig2)
    sigma12 = math.atan2(sin_s, cos_s)
    so = max(0.0, math.cos(om1) * math.sin(om2) - math.sin(om1) * math.cos(om2))
    co = math.cos(om1) * math.cos(om2) + math.sin(om1) * math.sin(om2)
    omega12 = math.atan2(so, co)
    cos_2sm = math.cos(sig1 + sig2)
    lon12 = omega12 - _lon_series_point(sin_alpha0, cos2_alpha, sigma12, sin_s, cos_s, cos_2sm)
    return lon12, sigma12, sin_s, cos_s, cos_2sm, alpha2


@njit(cache=True)
def _inverse_bisect_point(lat1: float, lon1: float, lat2: float, lon2: float
                          ) -> tuple[float, float, float]:
    """Inverse problem by bisection on the first azimuth (robust, slower fallback).

    Uses Karney's canonical configuration (Karney 2013, sec. 4) in which the ellipsoid
    longitude difference increases monotonically with the azimuth at point 1 over
    [0, pi], so bisection always converges.
    """
    f = WGS84_F
    lon12 = _wrap_pi_point(lon2 - lon1)
    lon_sign = 1.0 if lon12 >= 0.0 else -1.0
    lon12 = abs(lon12)
    swapped = abs(lat1) < abs(lat2)
    if swapped:  # solve from point 2 to point 1: the longitude difference changes sign
        lat1, lat2 = lat2, lat1
        lon_sign = -lon_sign
    lat_sign = 1.0
    if lat1 > 0.0:
        lat_sign = -1.0
        lat1 = -lat1
        lat2 = -lat2
    b1 = math.atan2((1.0 - f) * math.sin(lat1), math.cos(lat1))
    b2 = math.atan2((1.0 - f) * math.sin(lat2), math.cos(lat2))
    sb1, cb1, sb2, cb2 = math.sin(b1), math.cos(b1), math.sin(b2), math.cos(b2)
    lo, hi = 0.0, math.pi
    alpha1 = 0.5 * math.pi
    for _ in range(64):
        alpha1 = 0.5 * (lo + hi)
        lam = _lambda12_point(alpha1, sb1, cb1, sb2, cb2)[0]
        if lam < lon12:
            lo = alpha1
        else:
            hi = alpha1
        if hi - lo < 1e-15:
            break
    alpha1 = 0.5 * (lo + hi)
    _, _, sin_s, cos_s, cos_2sm, alpha2 = _lambda12_point(alpha1, sb1, cb1, sb2, cb2)
    sigma12 = math.atan2(sin_s, cos_s)
    sin_alpha0 = math.sin(alpha1) * cb1
    big_a, big_b = _vincenty_ab_point(1.0 - sin_alpha0 * sin_alpha0)
    s12 = WGS84_B * big_a * (sigma12 - _delta_sigma_point(big_b, sin_s, cos_s, cos_2sm))
    # undo the canonical transformation (as in Karney 2013, sec. 4)
    sa1, ca1 = math.sin(alpha1), math.cos(alpha1)
    sa2, ca2 = math.sin(alpha2), math.cos(alpha2)
    if swapped:
        sa1, sa2 = -sa2, -sa1
        ca1, ca2 = -ca2, -ca1
    sa1 *= lon_sign
    sa2 *= lon_sign
    ca1 *= lat_sign
    ca2 *= lat_sign
    return s12, _wrap_2pi_point(math.atan2(sa1, ca1)), _wrap_2pi_point(math.atan2(sa2, ca2))


@njit(cache=True)
def _inverse_point(lat1: float, lon1: float, lat2: float, lon2: float
                   ) -> tuple[float, float, float]:
    """Geodesic inverse problem for one pair (Vincenty 1975, with bisection fallback).

    Returns
    -------
    s12, azi1, azi2 : float
        Distance (m), azimuth at point 1 and forward azimuth at point 2 (rad, [0, 2 pi)).
    """
    f = WGS84_F
    big_l = _wrap_pi_point(lon2 - lon1)
    u1 = math.atan2((1.0 - f) * math.sin(lat1), math.cos(lat1))
    u2 = math.atan2((1.0 - f) * math.sin(lat2), math.cos(lat2))
    su1, cu1, su2, cu2 = math.sin(u1), math.cos(u1), math.sin(u2), math.cos(u2)
    lam = big_l
    converged = False
    sin_s = 0.0
    cos_s = 1.0
    sigma = 0.0
    cos2_alpha = 1.0
    cos_2sm = 1.0
    sin_lam = 0.0
    cos_lam = 1.0
    for _ in range(_MAX_ITER):
        sin_lam = math.sin(lam)
        cos_lam = math.cos(lam)
        t1 = cu2 * sin_lam
        t2 = cu1 * su2 - su1 * cu2 * cos_lam
        sin_s = math.sqrt(t1 * t1 + t2 * t2)
        cos_s = su1 * su2 + cu1 * cu2 * cos_lam
        if sin_s == 0.0:
            if cos_s > 0.0:  # coincident points
                return 0.0, 0.0, 0.0
            break  # exactly antipodal: fall back
        sigma = math.atan2(sin_s, cos_s)
        sin_alpha0 = cu1 * cu2 * sin_lam / sin_s
        cos2_alpha = 1.0 - sin_alpha0 * sin_alpha0
        cos_2sm = cos_s - 2.0 * su1 * su2 / cos2_alpha if cos2_alpha != 0.0 else 0.0
        lam_prev = lam
        lam = big_l + _lon_series_point(sin_alpha0, cos2_alpha, sigma, sin_s, cos_s, cos_2sm)
        if abs(lam) > math.pi:
            break
        if abs(lam - lam_prev) < _TOL:
            converged = True
            break
    if not converged:
        return _inverse_bisect_point(lat1, lon1, lat2, lon2)
    big_a, big_b = _vincenty_ab_point(cos2_alpha)
    s12 = WGS84_B * big_a * (sigma - _delta_sigma_point(big_b, sin_s, cos_s, cos_2sm))
    azi1 = math.atan2(cu2 * sin_lam, cu1 * su2 - su1 * cu2 * cos_lam)
    azi2 = math.atan2(cu1 * sin_lam, -su1 * cu2 + cu1 * su2 * cos_lam)
    return s12, _wrap_2pi_point(azi1), _wrap_2pi_point(azi2)


@njit(cache=True)
def _direct_point(lat1: float, lon1: float, azi1: float, s12: float
                  ) -> tuple[float, float, float]:
    """Geodesic direct problem for one point (Vincenty, Survey Review 1975).

    Returns
    -------
    lat2, lon2, azi2 : float
        End point (rad; lon2 in [-pi, pi)) and forward azimuth there (rad, [0, 2 pi)).
    """
    f = WGS84_F
    sa1 = math.sin(azi1)
    ca1 = math.cos(azi1)
    u1 = math.atan2((1.0 - f) * math.sin(lat1), math.cos(lat1))
    su1, cu1 = math.sin(u1), math.cos(u1)
    sigma1 = math.atan2(su1, cu1 * ca1)
    sin_alpha0 = cu1 * sa1
    cos2_alpha = 1.0 - sin_alpha0 * sin_alpha0
    big_a, big_b = _vincenty_ab_point(cos2_alpha)
    sigma0 = s12 / (WGS84_B * big_a)
    sigma = sigma0
    sin_s = math.sin(sigma)
    cos_s = math.cos(sigma)
    cos_2sm = math.cos(2.0 * sigma1 + sigma)
    for _ in range(_MAX_ITER):
        sin_s = math.sin(sigma)
        cos_s = math.cos(sigma)
        cos_2sm = math.cos(2.0 * sigma1 + sigma)
        sigma_new = sigma0 + _delta_sigma_point(big_b, sin_s, cos_s, cos_2sm)
        done = abs(sigma_new - sigma) < _TOL
        sigma = sigma_new
        if done:
            break
    sin_s = math.sin(sigma)
    cos_s = math.cos(sigma)
    cos_2sm = math.cos(2.0 * sigma1 + sigma)
    tmp = su1 * sin_s - cu1 * cos_s * ca1
    lat2 = math.atan2(su1 * cos_s + cu1 * sin_s * ca1,
                      (1.0 - f) * math.sqrt(sin_alpha0 * sin_alpha0 + tmp * tmp))
    lam = math.atan2(sin_s * sa1, cu1 * cos_s - su1 * sin_s * ca1)
    big_l = lam - _lon_series_point(sin_alpha0, cos2_alpha, sigma, sin_s, cos_s, cos_2sm)
    lon2 = _wrap_pi_point(lon1 + big_l)
    azi2 = math.atan2(sin_alpha0, -tmp)
    return lat2, lon2, _wrap_2pi_point(azi2)


# --------------------------------------------------------------------------------------
# Array kernels (plain 1-D float64 arrays in and out)
# --------------------------------------------------------------------------------------


@njit(cache=True)
def inverse_kernel(lat1: np.ndarray, lon1: np.ndarray, lat2: np.ndarray, lon2: np.ndarray
                   ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Inverse problem over equal-length 1-D arrays (rad in; m, rad, rad out)."""
    n = lat1.shape[0]
    s12 = np.empty(n)
    azi1 = np.empty(n)
    azi2 = np.empty(n)
    for i in range(n):
        s12[i], azi1[i], azi2[i] = _inverse_point(lat1[i], lon1[i], lat2[i], lon2[i])
    return s12, azi1, azi2


@njit(cache=True)
def direct_kernel(lat1: np.ndarray, lon1: np.ndarray, azi1: np.ndarray, s12: np.ndarray
                  ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Direct problem over equal-length 1-D arrays (rad, rad, rad, m in; rad out)."""
    n = lat1.shape[0]
    lat2 = np.empty(n)
    lon2 = np.empty(n)
    azi2 = np.empty(n)
    for i in range(n):
        lat2[i], lon2[i], azi2[i] = _direct_point(lat1[i], lon1[i], azi1[i], s12[i])
    return lat2, lon2, azi2


# --------------------------------------------------------------------------------------
# Public API
# --------------------------------------------------------------------------------------


class GeodesicInverse(NamedTuple):
    """Solution of the inverse problem (floats for scalar input, arrays otherwise).

    Attributes
    ----------
    distance_m : float or ndarray
        Geodesic distance, m.
    azimuth1_rad : float or ndarray
        Forward azimuth at point 1 (toward point 2), rad clockwise from north, [0, 2 pi).
    azimuth2_rad : float or ndarray
        Forward azimuth at point 2 (direction of travel arriving there), rad, [0, 2 pi).
    """

    distance_m: float | np.ndarray
    azimuth1_rad: float | np.ndarray
    azimuth2_rad: float | np.ndarray

    @property
    def back_azimuth_rad(self) -> float | np.ndarray:
        """Azimuth at point 2 toward point 1 (``azimuth2_rad + pi``), rad, [0, 2 pi)."""
        r = np.mod(np.asarray(self.azimuth2_rad) + math.pi, _TWO_PI)
        r = np.where(r >= _TWO_PI, 0.0, r)
        return float(r) if r.ndim == 0 else r


class GeodesicDirect(NamedTuple):
    """Solution of the direct problem (floats for scalar input, arrays otherwise).

    Attributes
    ----------
    lat_rad, lon_rad : float or ndarray
        End point, rad (longitude in [-pi, pi)).
    azimuth_rad : float or ndarray
        Forward azimuth at the end point, rad clockwise from north, [0, 2 pi).
    """

    lat_rad: float | np.ndarray
    lon_rad: float | np.ndarray
    azimuth_rad: float | np.ndarray


class GeodesicInverseDeg(NamedTuple):
    """:class:`GeodesicInverse` in degrees: distance (m) and azimuths (deg, [0, 360))."""

    distance_m: float | np.ndarray
    azimuth1_deg: float | np.ndarray
    azimuth2_deg: float | np.ndarray

    @property
    def back_azimuth_deg(self) -> float | np.ndarray:
        """Azimuth at point 2 toward point 1, deg, [0, 360)."""
        r = np.mod(np.asarray(self.azimuth2_deg) + 180.0, 360.0)
        r = np.where(r >= 360.0, 0.0, r)
        return float(r) if r.ndim == 0 else r


class GeodesicDirectDeg(NamedTuple):
    """:class:`GeodesicDirect` in degrees: end point and azimuth there (deg)."""

    lat_deg: float | np.ndarray
    lon_deg: float | np.ndarray
    azimuth_deg: float | np.ndarray


def _flat(*args) -> tuple[tuple[int, ...], list[np.ndarray]]:
    arrays = np.broadcast_arrays(*[np.asarray(a, dtype=np.float64) for a in args])
    shape = arrays[0].shape
    return shape, [np.ascontiguousarray(a).reshape(-1) for a in arrays]


def _shaped(shape: tuple[int, ...], arr: np.ndarray) -> float | np.ndarray:
    return float(arr[0]) if shape == () else arr.reshape(shape)


def inverse(lat1, lon1, lat2, lon2) -> GeodesicInverse:
    """Solve the geodesic inverse problem on WGS 84 (Vincenty 1975; see module notes).

    Parameters
    ----------
    lat1, lon1, lat2, lon2 : float or array_like
        Geodetic latitude and longitude of the two points, rad (broadcast together).

    Returns
    -------
    GeodesicInverse
        ``(distance_m, azimuth1_rad, azimuth2_rad)``; for coincident points the
        distance is 0 and both azimuths are 0.
    """
    shape, (a, b, c, d) = _flat(lat1, lon1, lat2, lon2)
    s, z1, z2 = inverse_kernel(a, b, c, d)
    return GeodesicInverse(_shaped(shape, s), _shaped(shape, z1), _shaped(shape, z2))


def direct(lat1, lon1, azimuth1, distance_m) -> GeodesicDirect:
    """Solve the geodesic direct problem on WGS 84 (Vincenty 1975).

    Parameters
    ----------
    lat1, lon1 : float or array_like
        Start point, rad.
    azimuth1 : float or array_like
        Azimuth at the start point, rad clockwise from true north.
    distance_m : float or array_like
        Distance along the geodesic, m (negative goes backwards).

    Returns
    -------
    GeodesicDirect
        ``(lat_rad, lon_rad, azimuth_rad)`` of the end point.
    """
    shape, (a, b, c, d) = _flat(lat1, lon1, azimuth1, distance_m)
    la, lo, az = direct_kernel(a, b, c, d)
    return GeodesicDirect(_shaped(shape, la), _shaped(shape, lo), _shaped(shape, az))


def inverse_deg(lat1_deg, lon1_deg, lat2_deg, lon2_deg) -> GeodesicInverseDeg:
    """:func:`inverse` with degrees in and out (distance still in m)."""
    r = inverse(*(np.radians(x) for x in (lat1_deg, lon1_deg, lat2_deg, lon2_deg)))
    return GeodesicInverseDeg(r.distance_m, _deg(r.azimuth1_rad), _deg(r.azimuth2_rad))


def direct_deg(lat1_deg, lon1_deg, azimuth1_deg, distance_m) -> GeodesicDirectDeg:
    """:func:`direct` with degrees in and out (distance in m)."""
    r = direct(np.radians(lat1_deg), np.radians(lon1_deg), np.radians(azimuth1_deg),
               distance_m)
    return GeodesicDirectDeg(_deg(r.lat_rad), _deg(r.lon_rad), _deg(r.azimuth_rad))


def _deg(x: float | np.ndarray) -> float | np.ndarray:
    return float(np.degrees(x)) if np.ndim(x) == 0 else np.degrees(x)
