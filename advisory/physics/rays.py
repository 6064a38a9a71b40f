"""Geometric-acoustics rays from a supersonic aircraft through a stratified, windy atmosphere.

:class:`RayTracer` traces one ray at a time for one :class:`Atmosphere` and returns a
:class:`RayPath` with every per-level quantity; the integration itself (Snell's law in
a moving medium, one layer at a time) is the scheme of :mod:`advisory.physics.ray_kernels`,
whose notes give the equations.

Ray-tube amplitude uses conservation of wave-action flux through horizontal planes
(Blokhintsev invariant, Pierce [1]_ sec. 8-6): ``p^2 q A_h / (rho Omega^2)`` is
constant along a ray tube, where ``A_h`` is the tube's cross-section in a horizontal
plane per unit emission time and unit azimuth. Near the aircraft it is matched to
Whitham's near-field result ``p = p0 gamma M^2 F(y) / sqrt(2 beta r)`` [3]_
(:func:`advisory.physics.ray_kernels.near_field_constant`).

References
----------
.. [1] A. D. Pierce, *Acoustics: An Introduction to Its Physical Principles and
   Applications*, Acoustical Society of America, 1989, ch. 8 (rays in moving media,
   eqs. 8-1.7, 8-1.10; Blokhintsev invariant, sec. 8-6; circular-arc rays in a
   linear sound-speed profile, sec. 8-4).
.. [2] W. D. Hayes, "Sonic boom", Annual Review of Fluid Mechanics 3, 1971, pp. 269-290.
.. [3] G. B. Whitham, "The flow pattern of a supersonic projectile", Comm. Pure Appl.
   Math. 5, 1952, pp. 301-348.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from advisory.physics.atmosphere import GAMMA, Atmosphere
from advisory.physics.ray_kernels import (
    L_OMEGA,
    L_Q,
    L_T,
    L_X,
    L_Y,
    N_LEVEL_COLUMNS,
    emission_slowness,
    near_field_constant,
    ray_levels_kernel,
    reaches_ground_kernel,
    trace_ground_kernel,
    trace_levels_kernel,
)

#: Highest Mach number the ray tracer (and so the table builder) accepts.
MACH_LIMIT = 5.0


class FlightConditionError(ValueError):
    """A flight condition that cannot be traced; the message names the field and value."""


@dataclass(frozen=True)
class FlightCondition:
    """Instantaneous flight condition for ray tracing (SI).

    Attributes
    ----------
    mach : float
        Mach number relative to the air at the aircraft.
    altitude_m : float
        Geometric altitude above mean sea level, m.
    heading_rad : float
        Direction of the air-relative velocity (true heading), rad from north.
    fpa_rad : float
        Flight-path angle, rad, positive climbing.
    ground_elevation_m : float
        Ground elevation above mean sea level, m.
    """

    mach: float
    altitude_m: float
    heading_rad: float = 0.0
    fpa_rad: float = 0.0
    ground_elevation_m: float = 0.0

    def validate(self, atm: Atmosphere) -> None:
        """Raise :class:`FlightConditionError` naming the first bad field."""
        for name in ("mach", "altitude_m", "heading_rad", "fpa_rad", "ground_elevation_m"):
            v = getattr(self, name)
            if not math.isfinite(v):
                raise FlightConditionError(f"{name}: {v} is not a finite number")
        if self.mach <= 0.0:
            raise FlightConditionError(f"mach: {self.mach} must be > 0")
        if self.mach > MACH_LIMIT:
            raise FlightConditionError(f"mach: {self.mach} is above the supported {MACH_LIMIT}")
        if abs(self.fpa_rad) > math.radians(30.0):
            raise FlightConditionError(
                f"fpa: {math.degrees(self.fpa_rad):.1f} deg is outside [-30, 30] deg"
            )
        lo, hi = float(atm.z_m[0]), float(atm.z_m[-1])
        if not (lo <= self.ground_elevation_m <= hi):
            raise FlightConditionError(
                f"ground_elevation: {self.ground_elevation_m:.0f} m is outside "
                f"[{lo:.0f}, {hi:.0f}] m"
            )
        if not (self.ground_elevation_m < self.altitude_m <= hi):
            raise FlightConditionError(
                f"altitude: {self.altitude_m:.0f} m must be above the ground "
                f"({self.ground_elevation_m:.0f} m) and at most {hi:.0f} m"
            )


@dataclass(frozen=True)
class RayPath:
    """One ray from the aircraft toward the ground, level by level.

    Index 0 is the aircraft; the last index is the ground (when ``reaches_ground``) or
    the last level before the ray turned.

    Attributes
    ----------
    phi_rad : float
        Ray azimuth around the Mach cone (0 down, positive right), rad.
    reaches_ground : bool
        True when the ray reaches the ground.
    sx, sy : float
        Conserved horizontal slowness, s/m.
    z_m, x_m, y_m, t_s : ndarray
        Altitude, east and north offset from the emission point (m), travel time (s).
    sound_speed_mps, density_kgm3, pressure_pa : ndarray
        Ambient state along the ray.
    q : ndarray
        Vertical slowness magnitude, s/m.
    omega : ndarray
        Doppler factor ``1 - W . s`` (1 without wind).
    tube_area : ndarray
        Horizontal ray-tube area per unit emission time and azimuth, m^2/(s rad);
        zero at the aircraft, tends to zero at a caustic.
    amplitude_factor : ndarray
        ``G`` such that the linear-acoustics overpressure along the ray is
        ``G * F(y)`` with ``F`` Whitham's F-function in m^(1/2); Pa/m^(1/2).
        Infinite at the aircraft and at a caustic.
    along_m, cross_m : float
        Ground offset along the ground track (positive ahead) and across it (positive
        right) from the point below the emission point, m (NaN when not reaching).
    jacobian : ndarray, shape (2, 2)
        d(x, y)/d(sx, sy) at the last level, m^2/s.
    dxy_dphi : ndarray, shape (2,)
        d(x, y)/dphi at the last level, m/rad.
    ground_velocity : ndarray, shape (3,)
        Aircraft velocity over the ground (east, north, up), m/s.
    """

    phi_rad: float
    reaches_ground: bool
    sx: float
    sy: float
    z_m: np.ndarray
    x_m: np.ndarray
    y_m: np.ndarray
    t_s: np.ndarray
    sound_speed_mps: np.ndarray
    density_kgm3: np.ndarray
    pressure_pa: np.ndarray
    q: np.ndarray
    omega: np.ndarray
    tube_area: np.ndarray
    amplitude_factor: np.ndarray
    along_m: float
    cross_m: float
    jacobian: np.ndarray
    dxy_dphi: np.ndarray
    ground_velocity: np.ndarray


class RayTracer:
    """Traces rays for one atmosphere; holds the atmosphere arrays the kernels need.

    Parameters
    ----------
    atmosphere : Atmosphere
        The stratified atmosphere.
    """

    def __init__(self, atmosphere: Atmosphere) -> None:
        self.atmosphere = atmosphere
        (self._z, self._c, self._wx, self._wy, self._rho, self._p) = atmosphere.arrays()
        n = self._z.size + 2
        self._lz = np.empty(n)
        self._lc = np.empty(n)
        self._lwx = np.empty(n)
        self._lwy = np.empty(n)
        self._m = 0
        self._levels_key: tuple[float, float] | None = None

    # ---- helpers -------------------------------------------------------------------
    def levels(self, z0: float, zg: float) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """Integration levels for a ray from ``z0`` to ``zg`` (cached for repeat calls).

        Returns
        -------
        lz, lc, lwx, lwy : ndarray
            Level altitudes (descending, m), sound speed and wind east/north (m/s).
        """
        if self._levels_key != (z0, zg):
            self._m = ray_levels_kernel(
                self._z, self._c, self._wx, self._wy, z0, zg,
                self._lz, self._lc, self._lwx, self._lwy,
            )
            self._levels_key = (z0, zg)
        m = self._m
        return self._lz[:m], self._lc[:m], self._lwx[:m], self._lwy[:m]

    def aircraft_air(self, fc: FlightCondition) -> tuple[float, float, float]:
        """Sound speed and wind east/north at the aircraft (m/s)."""
        s = self.atmosphere.at(fc.altitude_m)
        return s.sound_speed_mps, s.wind_east_mps, s.wind_north_mps

    def ground_velocity(self, fc: FlightCondition) -> np.ndarray:
        """Aircraft velocity over the ground (east, north, up), m/s."""
        c0, w0x, w0y = self.aircraft_air(fc)
        u = fc.mach * c0
        cg = math.cos(fc.fpa_rad)
        return np.array([
            u * cg * math.sin(fc.heading_rad) + w0x,
            u * cg * math.cos(fc.heading_rad) + w0y,
            u * math.sin(fc.fpa_rad),
        ])

    def slowness(self, fc: FlightCondition, phi: float) -> tuple[float, float, float, float, float]:
        """``(sx, sy, nz, dsx/dphi, dsy/dphi)`` for ray azimuth ``phi`` (rad)."""
        c0, w0x, w0y = self.aircraft_air(fc)
        return emission_slowness(fc.mach, fc.heading_rad, fc.fpa_rad, phi, c0, w0x, w0y)

    def min_q2(self, fc: FlightCondition, phi: float) -> float:
        """Smallest q^2 along the ray (s^2/m^2); the ray reaches the ground when > 0.

        Up-going rays (wave normal pointing up at the aircraft) give -1.
        """
        if fc.mach <= 1.0:
            return -1.0
        sx, sy, nz, _, _ = self.slowness(fc, phi)
        if nz >= 0.0:
            return -1.0
        lz, lc, lwx, lwy = self.levels(fc.altitude_m, fc.ground_elevation_m)
        return float(reaches_ground_kernel(lc, lwx, lwy, lz.size, sx, sy))

    def ground_point(self, fc: FlightCondition, phi: float) -> tuple[bool, float, float, float]:
        """Fast ground point of one ray: ``(reached, east_m, north_m, travel_time_s)``."""
        if fc.mach <= 1.0:
            return False, 0.0, 0.0, 0.0
        sx, sy, nz, _, _ = self.slowness(fc, phi)
        if nz >= 0.0:
            return False, 0.0, 0.0, 0.0
        lz, lc, lwx, lwy = self.levels(fc.altitude_m, fc.ground_elevation_m)
        r, x, y, t = trace_ground_kernel(lz, lc, lwx, lwy, lz.size, sx, sy)
        return bool(r), float(x), float(y), float(t)

    # ---- full path -----------------------------------------------------------------
    def trace(self, fc: FlightCondition, phi: float) -> RayPath:
        """Trace one ray with all per-level quantities (see :class:`RayPath`)."""
        fc.validate(self.atmosphere)
        c0, w0x, w0y = self.aircraft_air(fc)
        vg = self.ground_velocity(fc)
        lz, lc, lwx, lwy = self.levels(fc.altitude_m, fc.ground_elevation_m)
        if fc.mach <= 1.0:
            return self._empty_path(phi, vg)
        sx, sy, nz, dsx, dsy = emission_slowness(
            fc.mach, fc.heading_rad, fc.fpa_rad, phi, c0, w0x, w0y
        )
        if nz >= 0.0:
            return self._empty_path(phi, vg, sx, sy)
        out = np.zeros((lz.size, N_LEVEL_COLUMNS))
        count = max(int(trace_levels_kernel(lz, lc, lwx, lwy, lz.size, sx, sy, out)), 1)
        reached = count == lz.size
        out = out[:count]
        z = lz[:count].copy()
        rho = np.exp(np.interp(z, self._z, np.log(self._rho)))
        p = np.exp(np.interp(z, self._z, np.log(self._p)))
        q = out[:, L_Q]
        omega = out[:, L_OMEGA]
        jac = out[:, 4:8].reshape(-1, 2, 2)
        dxy = jac @ np.array([dsx, dsy])
        # Translation of the ray pattern per unit emission time (steady flight):
        # horizontal ground speed plus the top-of-ray slope times the climb rate.
        q0 = q[0]
        om0 = omega[0]
        c20 = lc[0] ** 2
        slope = np.array([(c20 * sx + w0x * om0) / (c20 * q0), (c20 * sy + w0y * om0) / (c20 * q0)])
        trans = vg[:2] + slope * vg[2]
        area = np.abs(trans[0] * dxy[:, 1] - trans[1] * dxy[:, 0])
        amp = self._amplitude(fc, c0, rho, q, omega, area, sx, sy, dsx, dsy, trans)
        along = cross = math.nan
        if reached:
            along, cross = _along_cross(vg, out[-1, L_X], out[-1, L_Y])
        return RayPath(
            phi_rad=float(phi), reaches_ground=bool(reached), sx=float(sx), sy=float(sy),
            z_m=z, x_m=out[:, L_X].copy(), y_m=out[:, L_Y].copy(), t_s=out[:, L_T].copy(),
            sound_speed_mps=lc[:count].copy(), density_kgm3=rho, pressure_pa=p,
            q=q.copy(), omega=omega.copy(), tube_area=area, amplitude_factor=amp,
            along_m=along, cross_m=cross, jacobian=jac[-1].copy(), dxy_dphi=dxy[-1].copy(),
            ground_velocity=vg,
        )

    def _amplitude(self, fc: FlightCondition, c0: float, rho: np.ndarray, q: np.ndarray,
                   omega: np.ndarray, area: np.ndarray, sx: float, sy: float, dsx: float,
                   dsy: float, trans: np.ndarray) -> np.ndarray:
        """Amplitude factor ``G`` along the ray (Pa / m^(1/2)); see the module notes.

        ``B = q A_h / (rho Omega^2)`` is the wave-action flux per unit p^2;
        ``G = p0 gamma M^2 / sqrt(2 beta) * sqrt(K0 / B)`` with ``K0`` from
        :func:`~advisory.physics.ray_kernels.near_field_constant` (Whitham's near field).
        """
        mach = fc.mach
        beta = math.sqrt(mach * mach - 1.0)
        p0 = float(np.exp(np.interp(fc.altitude_m, self._z, np.log(self._p))))
        lz, lc, lwx, lwy = self.levels(fc.altitude_m, fc.ground_elevation_m)
        k0 = near_field_constant(c0, mach, beta, lc[0], lwx[0], lwy[0], rho[0], fc.altitude_m,
                                 sx, sy, dsx, dsy, trans[0], trans[1])
        b = q * area / (rho * omega**2)
        with np.errstate(divide="ignore"):
            g = p0 * GAMMA * mach**2 / math.sqrt(2.0 * beta) * np.sqrt(k0 / b)
        return g

    def _empty_path(self, phi: float, vg: np.ndarray, sx: float = math.nan,
                    sy: float = math.nan) -> RayPath:
        e = np.zeros(0)
        return RayPath(
            phi_rad=float(phi), reaches_ground=False, sx=sx, sy=sy, z_m=e, x_m=e, y_m=e, t_s=e,
            sound_speed_mps=e, density_kgm3=e, pressure_pa=e, q=e, omega=e, tube_area=e,
            amplitude_factor=e, along_m=math.nan, cross_m=math.nan,
            jacobian=np.full((2, 2), math.nan), dxy_dphi=np.full(2, math.nan),
            ground_velocity=vg,
        )


def _along_cross(vg: np.ndarray, x: float, y: float) -> tuple[float, float]:
    """Split an east/north offset into along-track (ahead +) and cross-track (right +)."""
    speed = math.hypot(vg[0], vg[1])
    tx, ty = vg[0] / speed, vg[1] / speed
    return x * tx + y * ty, x * ty - y * tx
