"""Geometric-acoustics rays from a supersonic aircraft through a stratified, windy atmosphere.

Model
-----
The atmosphere varies with altitude only and is steady, so the horizontal slowness
``s_h = (s_x, s_y)`` of every ray is conserved (Snell's law for a moving medium). A ray
leaves the aircraft along a wave normal ``n`` on the Mach cone of the air-relative
velocity (``n . e_a = 1/M``) and has ``s = n / (c0 + W0 . n)``. At altitude ``z`` the
vertical slowness follows from the dispersion relation ``(1 - W . s)^2 = c^2 |s|^2``::

    Omega(z) = 1 - W_x s_x - W_y s_y
    q(z)^2   = Omega^2 / c^2 - s_x^2 - s_y^2        (q = -s_z for a down-going ray)

and going down by ``dz' = -dz`` the ray advances::

    dx/dz' = (c^2 s_x + W_x Omega) / (c^2 q),   dy/dz' = (c^2 s_y + W_y Omega) / (c^2 q),
    dt/dz' = Omega / (c^2 q).

A ray turns (and does not reach the ground) where ``q^2`` reaches zero above the
ground. Each grid layer is integrated with ``q^2`` taken linear in altitude across the
layer, so ``int dz / q = 2 h / (q_top + q_bottom)`` exactly; this keeps the integral
finite and accurate for grazing rays (``q -> 0`` at the ground at lateral cutoff).
The Jacobian ``d(x, y)/d(s_x, s_y)`` is the exact derivative of that discrete scheme.

Ray-tube amplitude uses conservation of wave-action flux through horizontal planes
(Blokhintsev invariant): ``p^2 q A_h / (rho Omega^2)`` is constant along a ray tube,
where ``A_h`` is the tube's cross-section in a horizontal plane per unit emission time
and unit azimuth. Near the aircraft it is matched to Whitham's near-field result
``p = p0 gamma M^2 F(y) / sqrt(2 beta r)``.

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

from advisory.jit import njit
from advisory.physics.atmosphere import GAMMA, Atmosphere

# --------------------------------------------------------------------------------------
# Emission geometry
# --------------------------------------------------------------------------------------


@njit(cache=True)
def emission_slowness(mach, heading, fpa, phi, c0, w0x, w0y):
    """Horizontal slowness and its azimuth derivative for one ray leaving the aircraft.

    Parameters
    ----------
    mach : float
        Mach number relative to the air at the aircraft (> 1).
    heading : float
        Direction of the air-relative velocity, rad clockwise from north.
    fpa : float
        Flight-path angle of the air-relative velocity, rad, positive climbing.
    phi : float
        Ray azimuth around the Mach cone, rad: 0 straight down in the vertical plane of
        the flight path, positive toward the right wing.
    c0 : float
        Sound speed at the aircraft, m/s.
    w0x, w0y : float
        Wind toward east and north at the aircraft, m/s.

    Returns
    -------
    sx, sy, nz, dsx_dphi, dsy_dphi : float
        Horizontal slowness (s/m), the vertical component of the unit wave normal
        (negative for a down-going ray), and d(sx, sy)/dphi (s/m/rad).
    """
    sh, ch = math.sin(heading), math.cos(heading)
    sg, cg = math.sin(fpa), math.cos(fpa)
    inv_m = 1.0 / mach
    cone = math.sqrt(max(1.0 - inv_m * inv_m, 0.0))
    # Unit vectors: along air velocity, "down" perpendicular to it, and right wing.
    ax, ay, az = cg * sh, cg * ch, sg
    dx, dy, dz = sg * sh, sg * ch, -cg
    rx, ry = ch, -sh
    cp, sp = math.cos(phi), math.sin(phi)
    nx = inv_m * ax + cone * (cp * dx + sp * rx)
    ny = inv_m * ay + cone * (cp * dy + sp * ry)
    nz = inv_m * az + cone * (cp * dz)
    dnx = cone * (-sp * dx + cp * rx)
    dny = cone * (-sp * dy + cp * ry)
    denom = c0 + w0x * nx + w0y * ny
    ddenom = w0x * dnx + w0y * dny
    sx = nx / denom
    sy = ny / denom
    dsx = dnx / denom - nx * ddenom / (denom * denom)
    dsy = dny / denom - ny * ddenom / (denom * denom)
    return sx, sy, nz, dsx, dsy


# --------------------------------------------------------------------------------------
# Kernels (numba) and their numpy twins
# --------------------------------------------------------------------------------------


@njit(cache=True)
def _interp_uniform(z, z_grid, values):
    """Linear interpolation on a uniform ascending grid (clamped at the ends)."""
    dz = z_grid[1] - z_grid[0]
    f = (z - z_grid[0]) / dz
    i = int(math.floor(f))
    if i < 0:
        return values[0]
    if i >= z_grid.size - 1:
        return values[z_grid.size - 1]
    w = f - i
    return values[i] * (1.0 - w) + values[i + 1] * w


@njit(cache=True)
def ray_levels_kernel(z_grid, c, wx, wy, z0, zg, out_z, out_c, out_wx, out_wy):
    """Fill the altitudes of the integration levels: ``z0``, grid nodes between, ``zg``.

    Returns the number of levels written (at most ``z_grid.size + 2``).
    """
    dz = z_grid[1] - z_grid[0]
    m = 0
    out_z[m] = z0
    m += 1
    i = int(math.ceil((z0 - z_grid[0]) / dz - 1e-9)) - 1
    while i >= 0 and z_grid[i] > zg:
        if z_grid[i] < z0:
            out_z[m] = z_grid[i]
            m += 1
        i -= 1
    out_z[m] = zg
    m += 1
    for k in range(m):
        out_c[k] = _interp_uniform(out_z[k], z_grid, c)
        out_wx[k] = _interp_uniform(out_z[k], z_grid, wx)
        out_wy[k] = _interp_uniform(out_z[k], z_grid, wy)
    return m


@njit(cache=True)
def trace_levels_kernel(lz, lc, lwx, lwy, m, sx, sy, out):
    """Integrate one ray over precomputed levels, writing per-level results.

    Parameters
    ----------
    lz, lc, lwx, lwy : ndarray
        Level altitudes (descending, m), sound speed (m/s) and wind east/north (m/s);
        only the first ``m`` entries are used.
    m : int
        Number of levels.
    sx, sy : float
        Horizontal slowness, s/m.
    out : ndarray, shape (>= m, 9)
        Per level: x, y (m, east/north from the emission point), t (s), q (s/m),
        dx/dsx, dx/dsy, dy/dsx, dy/dsy (m^2/s), Omega.

    Returns
    -------
    int
        Number of levels the ray reached (``m`` when it reaches the ground; fewer
        when it turns, in which case the last row written is the last level with
        ``q^2 > 0``).
    """
    x = 0.0
    y = 0.0
    t = 0.0
    jxx = 0.0
    jxy = 0.0
    jyx = 0.0
    jyy = 0.0
    c2 = lc[0] * lc[0]
    om = 1.0 - lwx[0] * sx - lwy[0] * sy
    qq_a = om * om / c2 - sx * sx - sy * sy
    if qq_a <= 0.0:
        return 0
    qa = math.sqrt(qq_a)
    dqq_a_sx = -2.0 * om * lwx[0] / c2 - 2.0 * sx
    dqq_a_sy = -2.0 * om * lwy[0] / c2 - 2.0 * sy
    out[0, 0] = 0.0
    out[0, 1] = 0.0
    out[0, 2] = 0.0
    out[0, 3] = qa
    out[0, 4] = 0.0
    out[0, 5] = 0.0
    out[0, 6] = 0.0
    out[0, 7] = 0.0
    out[0, 8] = om
    for k in range(m - 1):
        cb = lc[k + 1]
        c2b = cb * cb
        omb = 1.0 - lwx[k + 1] * sx - lwy[k + 1] * sy
        qq_b = omb * omb / c2b - sx * sx - sy * sy
        if qq_b <= 0.0:
            return k + 1
        qb = math.sqrt(qq_b)
        dqq_b_sx = -2.0 * omb * lwx[k + 1] / c2b - 2.0 * sx
        dqq_b_sy = -2.0 * omb * lwy[k + 1] / c2b - 2.0 * sy
        h = lz[k] - lz[k + 1]
        cm = 0.5 * (lc[k] + cb)
        c2m = cm * cm
        wxm = 0.5 * (lwx[k] + lwx[k + 1])
        wym = 0.5 * (lwy[k] + lwy[k + 1])
        omm = 1.0 - wxm * sx - wym * sy
        gx = sx + wxm * omm / c2m
        gy = sy + wym * omm / c2m
        gt = omm / c2m
        s = qa + qb
        integral = 2.0 * h / s
        # d(integral)/ds = -2h/s^2 * (dq_a/ds + dq_b/ds), dq/ds = d(q^2)/ds / (2 q)
        f = -2.0 * h / (s * s)
        di_sx = f * (0.5 * dqq_a_sx / qa + 0.5 * dqq_b_sx / qb)
        di_sy = f * (0.5 * dqq_a_sy / qa + 0.5 * dqq_b_sy / qb)
        dgx_sx = 1.0 - wxm * wxm / c2m
        dgx_sy = -wxm * wym / c2m
        dgy_sx = dgx_sy
        dgy_sy = 1.0 - wym * wym / c2m
        x += gx * integral
        y += gy * integral
        t += gt * integral
        jxx += dgx_sx * integral + gx * di_sx
        jxy += dgx_sy * integral + gx * di_sy
        jyx += dgy_sx * integral + gy * di_sx
        jyy += dgy_sy * integral + gy * di_sy
        out[k + 1, 0] = x
        out[k + 1, 1] = y
        out[k + 1, 2] = t
        out[k + 1, 3] = qb
        out[k + 1, 4] = jxx
        out[k + 1, 5] = jxy
        out[k + 1, 6] = jyx
        out[k + 1, 7] = jyy
        out[k + 1, 8] = omb
        qa = qb
        dqq_a_sx = dqq_b_sx
        dqq_a_sy = dqq_b_sy
    return m


@njit(cache=True)
def reaches_ground_kernel(lc, lwx, lwy, m, sx, sy):
    """Smallest ``q^2`` (s^2/m^2) over the levels: positive when the ray reaches the ground."""
    worst = 1e300
    ss = sx * sx + sy * sy
    for k in range(m):
        om = 1.0 - lwx[k] * sx - lwy[k] * sy
        qq = om * om / (lc[k] * lc[k]) - ss
        if qq < worst:
            worst = qq
    return worst


@njit(cache=True)
def trace_ground_kernel(lz, lc, lwx, lwy, m, sx, sy):
    """Ground point of one ray without per-level output.

    Returns
    -------
    reached, x, y, t : (bool, float, float, float)
        Whether the ray reaches the ground, and its ground offset east/north (m) from
        the emission point and travel time (s); zeros when it does not reach.
    """
    c2 = lc[0] * lc[0]
    ss = sx * sx + sy * sy
    om = 1.0 - lwx[0] * sx - lwy[0] * sy
    qq = om * om / c2 - ss
    if qq <= 0.0:
        return False, 0.0, 0.0, 0.0
    qa = math.sqrt(qq)
    x = 0.0
    y = 0.0
    t = 0.0
    for k in range(m - 1):
        cb = lc[k + 1]
        omb = 1.0 - lwx[k + 1] * sx - lwy[k + 1] * sy
        qq_b = omb * omb / (cb * cb) - ss
        if qq_b <= 0.0:
            return False, 0.0, 0.0, 0.0
        qb = math.sqrt(qq_b)
        cm = 0.5 * (lc[k] + cb)
        c2m = cm * cm
        wxm = 0.5 * (lwx[k] + lwx[k + 1])
        wym = 0.5 * (lwy[k] + lwy[k + 1])
        omm = 1.0 - wxm * sx - wym * sy
        integral = 2.0 * (lz[k] - lz[k + 1]) / (qa + qb)
        x += (sx + wxm * omm / c2m) * integral
        y += (sy + wym * omm / c2m) * integral
        t += omm / c2m * integral
        qa = qb
    return True, x, y, t


def levels_numpy(atm: Atmosphere, z0: float, zg: float) -> tuple[np.ndarray, ...]:
    """Numpy twin of :func:`ray_levels_kernel`: level altitudes, c, wind east, wind north."""
    nodes = atm.z_m[(atm.z_m < z0) & (atm.z_m > zg)][::-1]
    lz = np.concatenate([[z0], nodes, [zg]])
    return (
        lz,
        np.interp(lz, atm.z_m, atm.sound_speed_mps),
        np.interp(lz, atm.z_m, atm.wind_east_mps),
        np.interp(lz, atm.z_m, atm.wind_north_mps),
    )


def trace_levels_numpy(
    lz: np.ndarray, lc: np.ndarray, lwx: np.ndarray, lwy: np.ndarray, sx: float, sy: float
) -> tuple[int, np.ndarray]:
    """Readable numpy twin of :func:`trace_levels_kernel` (same scheme, vectorised).

    Returns
    -------
    (count, out) : (int, ndarray of shape (len(lz), 9))
        Same meaning as the kernel; rows past ``count`` are zero.
    """
    m = lz.size
    out = np.zeros((m, 9))
    omega = 1.0 - lwx * sx - lwy * sy
    qq = omega**2 / lc**2 - sx**2 - sy**2
    bad = np.nonzero(qq <= 0.0)[0]
    count = m if bad.size == 0 else int(bad[0])
    if count == 0:
        return 0, out
    q = np.sqrt(qq[:count])
    dqq_sx = -2.0 * omega[:count] * lwx[:count] / lc[:count] ** 2 - 2.0 * sx
    dqq_sy = -2.0 * omega[:count] * lwy[:count] / lc[:count] ** 2 - 2.0 * sy
    h = lz[: count - 1] - lz[1:count]
    cm = 0.5 * (lc[: count - 1] + lc[1:count])
    wxm = 0.5 * (lwx[: count - 1] + lwx[1:count])
    wym = 0.5 * (lwy[: count - 1] + lwy[1:count])
    omm = 1.0 - wxm * sx - wym * sy
    gx = sx + wxm * omm / cm**2
    gy = sy + wym * omm / cm**2
    gt = omm / cm**2
    ssum = q[:-1] + q[1:]
    integral = 2.0 * h / ssum
    f = -2.0 * h / ssum**2
    di_sx = f * (0.5 * dqq_sx[:-1] / q[:-1] + 0.5 * dqq_sx[1:] / q[1:])
    di_sy = f * (0.5 * dqq_sy[:-1] / q[:-1] + 0.5 * dqq_sy[1:] / q[1:])
    cols = [
        gx * integral,
        gy * integral,
        gt * integral,
        None,
        (1.0 - wxm**2 / cm**2) * integral + gx * di_sx,
        (-wxm * wym / cm**2) * integral + gx * di_sy,
        (-wxm * wym / cm**2) * integral + gy * di_sx,
        (1.0 - wym**2 / cm**2) * integral + gy * di_sy,
    ]
    for j, col in enumerate(cols):
        if col is not None:
            out[1:count, j] = np.cumsum(col)
    out[:count, 3] = q
    out[:count, 8] = omega[:count]
    return count, out


# --------------------------------------------------------------------------------------
# Public API
# --------------------------------------------------------------------------------------


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
        if self.mach > 5.0:
            raise FlightConditionError(f"mach: {self.mach} is above the supported 5.0")
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
    use_numba : bool
        Use the numba kernels (default) or the numpy twins (for parity tests).
    """

    def __init__(self, atmosphere: Atmosphere, use_numba: bool = True) -> None:
        self.atmosphere = atmosphere
        self.use_numba = use_numba
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
        """Integration levels for a ray from ``z0`` to ``zg`` (cached for repeat calls)."""
        if self._levels_key != (z0, zg):
            if self.use_numba:
                self._m = ray_levels_kernel(
                    self._z, self._c, self._wx, self._wy, z0, zg,
                    self._lz, self._lc, self._lwx, self._lwy,
                )
            else:
                lz, lc, lwx, lwy = levels_numpy(self.atmosphere, z0, zg)
                self._m = lz.size
                self._lz[: self._m], self._lc[: self._m] = lz, lc
                self._lwx[: self._m], self._lwy[: self._m] = lwx, lwy
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
        if self.use_numba:
            r, x, y, t = trace_ground_kernel(lz, lc, lwx, lwy, lz.size, sx, sy)
            return bool(r), float(x), float(y), float(t)
        count, out = trace_levels_numpy(lz, lc, lwx, lwy, sx, sy)
        if count < lz.size:
            return False, 0.0, 0.0, 0.0
        return True, float(out[-1, 0]), float(out[-1, 1]), float(out[-1, 2])

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
        if self.use_numba:
            out = np.zeros((lz.size, 9))
            count = trace_levels_kernel(lz, lc, lwx, lwy, lz.size, sx, sy, out)
        else:
            count, out = trace_levels_numpy(lz, lc, lwx, lwy, sx, sy)
        count = max(int(count), 1)
        reached = count == lz.size
        out = out[:count]
        z = lz[:count].copy()
        rho = np.exp(np.interp(z, self._z, np.log(self._rho)))
        p = np.exp(np.interp(z, self._z, np.log(self._p)))
        q = out[:, 3]
        omega = out[:, 8]
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
        amp = self._amplitude(fc, c0, rho, q, omega, area, lz, lc, lwx, lwy, sx, sy, dsx, dsy,
                              trans, out[:, 2])
        along = cross = math.nan
        if reached:
            along, cross = _along_cross(vg, out[-1, 0], out[-1, 1])
        return RayPath(
            phi_rad=float(phi), reaches_ground=bool(reached), sx=float(sx), sy=float(sy),
            z_m=z, x_m=out[:, 0].copy(), y_m=out[:, 1].copy(), t_s=out[:, 2].copy(),
            sound_speed_mps=lc[:count].copy(), density_kgm3=rho, pressure_pa=p,
            q=q.copy(), omega=omega.copy(), tube_area=area, amplitude_factor=amp,
            along_m=along, cross_m=cross, jacobian=jac[-1].copy(), dxy_dphi=dxy[-1].copy(),
            ground_velocity=vg,
        )

    def _amplitude(self, fc, c0, rho, q, omega, area, lz, lc, lwx, lwy, sx, sy, dsx, dsy,
                   trans, t):
        """Amplitude factor G along the ray (Pa / m^(1/2)); see module notes.

        ``B = q A_h / (rho Omega^2)`` is the wave-action flux per unit p^2. Near the
        aircraft the atmosphere is locally uniform and ``B / r`` tends to a constant
        ``K0`` (r = perpendicular distance from the flight axis in the air frame, which
        grows as ``c0 t beta / M``); matching Whitham's near field
        ``p = p0 gamma M^2 F / sqrt(2 beta r)`` gives ``G = p0 gamma M^2 /
        sqrt(2 beta) * sqrt(K0 / B)``.
        """
        mach = fc.mach
        beta = math.sqrt(mach * mach - 1.0)
        p0 = float(np.exp(np.interp(fc.altitude_m, self._z, np.log(self._p))))
        rho0 = rho[0]
        # K0 from a short uniform segment with the aircraft-level state (exact: in a
        # uniform medium every quantity is linear in the drop h).
        h = 1.0
        ulz = np.array([fc.altitude_m, fc.altitude_m - h])
        ulc = np.array([lc[0], lc[0]])
        ulwx = np.array([lwx[0], lwx[0]])
        ulwy = np.array([lwy[0], lwy[0]])
        _, uo = trace_levels_numpy(ulz, ulc, ulwx, ulwy, sx, sy)
        ujac = uo[1, 4:8].reshape(2, 2)
        udxy = ujac @ np.array([dsx, dsy])
        uarea = abs(trans[0] * udxy[1] - trans[1] * udxy[0])
        b_near = uo[1, 3] * uarea / (rho0 * uo[1, 8] ** 2)
        r_near = c0 * uo[1, 2] * beta / mach
        k0 = b_near / r_near
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
