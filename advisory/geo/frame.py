"""A local east-north plane about an origin on WGS 84, for zones, carpets and paths.

:class:`LocalFrame` is an azimuthal projection about an origin, built on the geodesic
problems of :mod:`advisory.geo.geodesy` (exact geodesic distance and azimuth from the
origin) with Lambert's equal-area radial law on the Gaussian sphere at the origin
(*Map Projections: A Working Manual*, USGS Professional Paper 1395, 1987, sec. 24;
"PP 1395" below), which splits the scale error evenly between the radial and transverse
directions. :class:`FramePoints` carries frame points with their geodetic position and
the local direction geometry for converting grid bearings and true azimuths.

The kernels are numba ``njit(cache=True)`` functions over plain float64 arrays; their
twins are the same source run as plain Python (``tests/twins/geodesy.py``), compared in
``tests/test_geodesy.py``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import NamedTuple

import numpy as np

from advisory.geo.geodesy import (
    WGS84_A,
    WGS84_E2,
    _direct_point,
    _flat,
    _inverse_point,
    _shaped,
)
from advisory.jit import njit

__all__ = [
    "LocalFrame",
    "FramePoints",
    "gaussian_radius",
    "frame_forward_kernel",
    "frame_inverse_kernel",
]

_TWO_PI = 2.0 * math.pi


# --------------------------------------------------------------------------------------
# Kernels (plain 1-D float64 arrays in and out)
# --------------------------------------------------------------------------------------


@njit(cache=True)
def _radial_law_point(s: float, radius: float) -> float:
    """Plane distance from the origin of a point at geodesic distance ``s``, m.

    Lambert's azimuthal equal-area radial law on a sphere of radius ``radius``:
    ``r = 2 R sin(s / (2 R))`` (PP 1395, sec. 24).
    """
    return 2.0 * radius * math.sin(0.5 * s / radius)


@njit(cache=True)
def _radial_law_inv_point(r: float, radius: float) -> float:
    """Geodesic distance from the origin of a plane point at distance ``r`` (NaN past 2R)."""
    x = 0.5 * r / radius
    if x > 1.0:
        return math.nan
    return 2.0 * radius * math.asin(x)


@njit(cache=True)
def frame_forward_kernel(lat0: float, lon0: float, radius: float, lat: np.ndarray,
                         lon: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Frame coordinates (east, north in m) of geodetic points (rad) about an origin,
    and the outward radial azimuth at each point (rad)."""
    n = lat.shape[0]
    east = np.empty(n)
    north = np.empty(n)
    azi = np.empty(n)
    for i in range(n):
        s, a1, a2 = _inverse_point(lat0, lon0, lat[i], lon[i])
        r = _radial_law_point(s, radius)
        east[i] = r * math.sin(a1)
        north[i] = r * math.cos(a1)
        azi[i] = a2
    return east, north, azi


@njit(cache=True)
def frame_inverse_kernel(lat0: float, lon0: float, radius: float, east: np.ndarray,
                         north: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Latitude, longitude (rad) and outward radial azimuth there (rad) of frame points."""
    n = east.shape[0]
    lat = np.empty(n)
    lon = np.empty(n)
    azi = np.empty(n)
    for i in range(n):
        s = _radial_law_inv_point(math.hypot(east[i], north[i]), radius)
        lat[i], lon[i], azi[i] = _direct_point(lat0, lon0, math.atan2(east[i], north[i]), s)
    return lat, lon, azi


# --------------------------------------------------------------------------------------
# Public API
# --------------------------------------------------------------------------------------


def gaussian_radius(lat_rad: float) -> float:
    """Gaussian mean radius of curvature ``sqrt(M N)`` of WGS 84 at a latitude, m.

    ``M = a (1 - e2) / W**3`` and ``N = a / W`` with ``W = sqrt(1 - e2 sin**2 lat)``
    (radii of curvature in the meridian and the prime vertical, PP 1395, sec. 4).
    """
    w2 = 1.0 - WGS84_E2 * math.sin(lat_rad) ** 2
    return WGS84_A * math.sqrt(1.0 - WGS84_E2) / w2


@dataclass(frozen=True)
class LocalFrame:
    """East-north plane frame about an origin on WGS 84, for zones, carpets and paths.

    An azimuthal projection: a point at geodesic distance ``s`` and azimuth ``a`` (at the
    origin) from the origin, both exact on the ellipsoid through the geodesic problems of
    :mod:`advisory.geo.geodesy`, sits at ``r (sin a, cos a)`` with Lambert's equal-area
    radial law ``r = 2 R sin(s / 2R)`` (PP 1395, sec. 24), ``R`` the Gaussian radius at
    the origin. Geodesics through the origin are straight lines. The radial scale is
    ``cos(s/2R)`` and the transverse scale its inverse, so planar distances and
    directions are off by at most ``s**2 / (8 R**2)``: 0.08 % at 500 km from the origin
    (an azimuthal equidistant frame would reach 0.10 %). Round trips are good to well
    under a millimetre.

    Grid bearings in this plane (clockwise from the frame's north axis) differ from true
    azimuths away from the origin by the meridian convergence (degrees at a few hundred
    km); convert with :meth:`azimuth_to_grid` and :meth:`grid_to_azimuth`.

    Parameters
    ----------
    lat0_rad, lon0_rad : float
        Origin, rad.
    """

    lat0_rad: float
    lon0_rad: float
    radius_m: float = field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        for name in ("lat0_rad", "lon0_rad"):
            v = getattr(self, name)
            if not isinstance(v, (int, float, np.floating, np.integer)) or not math.isfinite(v):
                raise ValueError(f"LocalFrame {name} must be a finite number, got {v!r}")
            object.__setattr__(self, name, float(v))
        if abs(self.lat0_rad) > 0.5 * math.pi:
            raise ValueError(f"LocalFrame lat0_rad must be in [-pi/2, pi/2], got {self.lat0_rad}")
        # Gaussian mean radius at the origin, m (sets the radial law and the scales)
        object.__setattr__(self, "radius_m", gaussian_radius(self.lat0_rad))

    @classmethod
    def from_deg(cls, lat0_deg: float, lon0_deg: float) -> LocalFrame:
        """Frame about an origin given in degrees."""
        return cls(math.radians(lat0_deg), math.radians(lon0_deg))

    def to_enu(self, lat, lon) -> tuple[float | np.ndarray, float | np.ndarray]:
        """Frame coordinates of geodetic points.

        Parameters
        ----------
        lat, lon : float or array_like
            Latitude and longitude, rad.

        Returns
        -------
        east_m, north_m : float or ndarray
            Coordinates in the frame, m.
        """
        shape, (la, lo) = _flat(lat, lon)
        e, n, _ = frame_forward_kernel(self.lat0_rad, self.lon0_rad, self.radius_m, la, lo)
        return _shaped(shape, e), _shaped(shape, n)

    def from_enu(self, east, north) -> tuple[float | np.ndarray, float | np.ndarray]:
        """Geodetic points of frame coordinates.

        Parameters
        ----------
        east, north : float or array_like
            Coordinates in the frame, m.

        Returns
        -------
        lat_rad, lon_rad : float or ndarray
            Latitude and longitude (in [-pi, pi)), rad.
        """
        shape, (e, n) = _flat(east, north)
        la, lo, _ = frame_inverse_kernel(self.lat0_rad, self.lon0_rad, self.radius_m, e, n)
        return _shaped(shape, la), _shaped(shape, lo)

    def scale_factors(self, east, north) -> tuple[np.ndarray, np.ndarray]:
        """Map scales at frame points: plane length per ground length, m/m.

        Radial ``h = cos(s/2R) = sqrt(1 - rho**2 / (4 R**2))`` and transverse ``k = 1/h``
        (PP 1395, sec. 24, on the Gaussian sphere), ``rho`` the plane distance from
        the origin.

        Parameters
        ----------
        east, north : float or array_like
            Frame coordinates, m.

        Returns
        -------
        radial, transverse : ndarray
            Scale along and across the direction from the origin.
        """
        rho = np.hypot(east, north)
        h = np.sqrt(np.maximum(1.0 - (0.5 * rho / self.radius_m) ** 2, 0.0))
        with np.errstate(divide="ignore"):
            return h, 1.0 / h

    def locate(self, east, north) -> FramePoints:
        """Geodetic position of frame points, ready for direction conversions.

        One pass of the direct problem serves both the position and any number of
        conversions between grid bearings and true azimuths at these points.

        Parameters
        ----------
        east, north : array_like
            Frame coordinates, m (broadcast together, flattened to 1-D).

        Returns
        -------
        FramePoints
        """
        _, (e, n) = _flat(east, north)
        la, lo, az = frame_inverse_kernel(self.lat0_rad, self.lon0_rad, self.radius_m, e, n)
        return FramePoints(la, lo, e, n, np.arctan2(e, n), az, self._anisotropy(e, n))

    def locate_geodetic(self, lat, lon) -> FramePoints:
        """Like :meth:`locate`, from geodetic points (rad) instead of frame coordinates.

        Parameters
        ----------
        lat, lon : array_like
            Latitude and longitude, rad (broadcast together, flattened to 1-D).

        Returns
        -------
        FramePoints
        """
        _, (la, lo) = _flat(lat, lon)
        e, n, az = frame_forward_kernel(self.lat0_rad, self.lon0_rad, self.radius_m, la, lo)
        return FramePoints(la, lo, e, n, np.arctan2(e, n), az, self._anisotropy(e, n))

    def _anisotropy(self, e: np.ndarray, n: np.ndarray) -> np.ndarray:
        return 1.0 / np.maximum(1.0 - (0.5 * np.hypot(e, n) / self.radius_m) ** 2, 1e-300)

    def azimuth_to_grid(self, east, north, azimuth) -> float | np.ndarray:
        """Grid bearing in the frame of a true azimuth taken at a frame point.

        Parameters
        ----------
        east, north : float or array_like
            Where the direction is taken, frame coordinates, m.
        azimuth : float or array_like
            Direction, rad clockwise from true north at that point.

        Returns
        -------
        float or ndarray
            Direction, rad clockwise from the frame's north axis, [0, 2 pi).
        """
        shape, (e, n, a) = _flat(east, north, azimuth)
        return _shaped(shape, self.locate(e, n).azimuth_to_grid(a))

    def grid_to_azimuth(self, east, north, bearing) -> float | np.ndarray:
        """True azimuth of a grid bearing taken at a frame point (inverse of the above).

        Parameters
        ----------
        east, north : float or array_like
            Where the direction is taken, frame coordinates, m.
        bearing : float or array_like
            Direction, rad clockwise from the frame's north axis.

        Returns
        -------
        float or ndarray
            Direction, rad clockwise from true north at that point, [0, 2 pi).
        """
        shape, (e, n, b) = _flat(east, north, bearing)
        return _shaped(shape, self.locate(e, n).grid_to_azimuth(b))


class FramePoints(NamedTuple):
    """Frame points with their geodetic position and local direction geometry.

    The outward radial direction at a point has grid bearing ``radial_grid_rad`` (its
    azimuth at the origin) and true azimuth ``radial_true_rad`` (the geodesic's forward
    azimuth there); a direction at true angle ``theta`` from it appears in the plane at
    ``atan2(q sin theta, cos theta)`` from it, ``q = k/h`` the ratio of transverse to
    radial scale (Tissot's indicatrix, PP 1395, sec. 4; scales of sec. 24).

    Attributes
    ----------
    lat_rad, lon_rad : ndarray
        Geodetic position, rad.
    east_m, north_m : ndarray
        Frame coordinates, m.
    radial_grid_rad, radial_true_rad : ndarray
        See above, rad.
    anisotropy : ndarray
        ``q = k/h``, dimensionless (1 at the origin, 1.0015 at 500 km).
    """

    lat_rad: np.ndarray
    lon_rad: np.ndarray
    east_m: np.ndarray
    north_m: np.ndarray
    radial_grid_rad: np.ndarray
    radial_true_rad: np.ndarray
    anisotropy: np.ndarray

    def grid_to_azimuth(self, bearing) -> np.ndarray:
        """True azimuths (rad, [0, 2 pi)) of grid bearings (rad) taken at these points."""
        th = np.asarray(bearing, dtype=np.float64) - self.radial_grid_rad
        out = self.radial_true_rad + np.arctan2(np.sin(th) / self.anisotropy, np.cos(th))
        return _wrap_2pi(out)

    def azimuth_to_grid(self, azimuth) -> np.ndarray:
        """Grid bearings (rad, [0, 2 pi)) of true azimuths (rad) taken at these points."""
        th = np.asarray(azimuth, dtype=np.float64) - self.radial_true_rad
        out = self.radial_grid_rad + np.arctan2(self.anisotropy * np.sin(th), np.cos(th))
        return _wrap_2pi(out)


def _wrap_2pi(x: np.ndarray) -> np.ndarray:
    r = np.mod(x, _TWO_PI)
    return np.where(r >= _TWO_PI, 0.0, r)
