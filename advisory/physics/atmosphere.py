"""Atmosphere: U.S. Standard Atmosphere 1976, temperature offsets and user profiles.

The propagation code works on an :class:`Atmosphere`: temperature, pressure, density,
speed of sound and the two horizontal wind components sampled on a uniform grid of
*geometric* altitude (metres above mean sea level), interpolated linearly between nodes.

References
----------
.. [1] U.S. Standard Atmosphere, 1976. NOAA / NASA / USAF, NOAA-S/T 76-1562, Washington
   DC, 1976. Table 4 (layer bases and lapse rates), eqs. 18 (geopotential altitude),
   23 and 33a/33b (temperature and pressure), 42 (density), 50 (speed of sound).
   Below 32 km it is identical to the ICAO Standard Atmosphere (Doc 7488, 1993).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from advisory import units

#: The Earth radius r0 of the U.S. Standard Atmosphere 1976 for converting geometric to
#: geopotential altitude, m [1]_ (a convention of the standard, not a geodetic radius:
#: for distances see :data:`advisory.schema.EARTH_MEAN_RADIUS_M`).
USSA_EARTH_RADIUS_M = 6356766.0
#: Specific gas constant of dry air, R*/M0 = 8314.32 / 28.9644, J/(kg K) [1]_.
R_AIR = 8314.32 / 28.9644
#: Ratio of specific heats of air [1]_.
GAMMA = 1.4
#: Standard gravity, m/s^2 [1]_.
G0 = units.G0

# Layer bases (geopotential m), base temperatures (K), lapse rates (K/m); [1]_ table 4.
_LAYER_H = np.array([0.0, 11000.0, 20000.0, 32000.0, 47000.0, 51000.0, 71000.0, 84852.0])
_LAYER_LAPSE = np.array([-6.5e-3, 0.0, 1.0e-3, 2.8e-3, 0.0, -2.8e-3, -2.0e-3])
_SEA_LEVEL_T = 288.15
_SEA_LEVEL_P = 101325.0


def _layer_bases() -> tuple[np.ndarray, np.ndarray]:
    """Base temperature and pressure of each layer from the hydrostatic equation."""
    t_base = [_SEA_LEVEL_T]
    p_base = [_SEA_LEVEL_P]
    for i, lapse in enumerate(_LAYER_LAPSE[:-1]):
        dh = _LAYER_H[i + 1] - _LAYER_H[i]
        t0, p0 = t_base[-1], p_base[-1]
        t1 = t0 + lapse * dh
        if lapse == 0.0:
            p1 = p0 * math.exp(-G0 * dh / (R_AIR * t0))
        else:
            p1 = p0 * (t0 / t1) ** (G0 / (R_AIR * lapse))
        t_base.append(t1)
        p_base.append(p1)
    return np.array(t_base), np.array(p_base)


_LAYER_T, _LAYER_P = _layer_bases()

#: Lowest and highest geometric altitude the module accepts, m.
Z_MIN_M = -1000.0
Z_MAX_M = 32000.0


def geopotential_altitude(z_m: np.ndarray | float) -> np.ndarray | float:
    """Geopotential altitude H = r0 z / (r0 + z) from geometric altitude z, m [1]_ eq. 18."""
    return USSA_EARTH_RADIUS_M * np.asarray(z_m) / (USSA_EARTH_RADIUS_M + np.asarray(z_m))


def geometric_altitude(h_m: np.ndarray | float) -> np.ndarray | float:
    """Geometric altitude z = r0 H / (r0 - H) from geopotential altitude H, m [1]_ eq. 18."""
    return USSA_EARTH_RADIUS_M * np.asarray(h_m) / (USSA_EARTH_RADIUS_M - np.asarray(h_m))


def ussa1976(z_m: np.ndarray | float, temp_offset_k: float = 0.0) -> dict[str, np.ndarray]:
    """U.S. Standard Atmosphere 1976 properties at geometric altitude ``z_m``.

    Parameters
    ----------
    z_m : array_like
        Geometric altitude above mean sea level, m, in [-1000, 84852 geopotential m].
    temp_offset_k : float
        Temperature offset added to the standard temperature, K ("ISA + dT" day).
        Pressure is kept at its standard value for the geopotential altitude (the
        pressure-altitude convention), so density follows from the ideal-gas law.

    Returns
    -------
    dict
        ``temperature_k``, ``pressure_pa``, ``density_kgm3``, ``sound_speed_mps``.

    Notes
    -----
    Geopotential altitude from [1]_ eq. 18; temperature from eq. 23; pressure from
    eqs. 33a (lapse rate non-zero) and 33b (isothermal); density eq. 42; speed of
    sound eq. 50 with gamma = 1.4.
    """
    h = np.atleast_1d(geopotential_altitude(np.asarray(z_m, dtype=float)))
    idx = np.clip(np.searchsorted(_LAYER_H, h, side="right") - 1, 0, len(_LAYER_LAPSE) - 1)
    hb = _LAYER_H[idx]
    tb = _LAYER_T[idx]
    pb = _LAYER_P[idx]
    lapse = _LAYER_LAPSE[idx]
    t_std = tb + lapse * (h - hb)
    with np.errstate(divide="ignore", invalid="ignore"):
        p_grad = pb * (tb / t_std) ** (G0 / (R_AIR * np.where(lapse == 0.0, 1.0, lapse)))
    p_iso = pb * np.exp(-G0 * (h - hb) / (R_AIR * tb))
    p = np.where(lapse == 0.0, p_iso, p_grad)
    t = t_std + temp_offset_k
    rho = p / (R_AIR * t)
    a = np.sqrt(GAMMA * R_AIR * t)
    return {"temperature_k": t, "pressure_pa": p, "density_kgm3": rho, "sound_speed_mps": a}


class AtmosphereError(ValueError):
    """An atmosphere profile that cannot be used; the message names the field and value."""


@dataclass(frozen=True)
class AtmosphereSample:
    """Atmosphere properties at one altitude (SI)."""

    altitude_m: float
    temperature_k: float
    pressure_pa: float
    density_kgm3: float
    sound_speed_mps: float
    wind_east_mps: float
    wind_north_mps: float


@dataclass(frozen=True, eq=False)
class Atmosphere:
    """A horizontally stratified atmosphere on a uniform geometric-altitude grid.

    Attributes
    ----------
    z_m : ndarray
        Geometric altitude of the grid nodes above mean sea level, m, ascending, uniform.
    temperature_k, pressure_pa, density_kgm3, sound_speed_mps : ndarray
        Thermodynamic state at the nodes (K, Pa, kg/m^3, m/s).
    wind_east_mps, wind_north_mps : ndarray
        Velocity of the air toward east and toward north at the nodes, m/s.
    description : dict
        Provenance: how the profile was made (kind, offset, file, levels), stored in
        table headers so a table says exactly what atmosphere it was built from.
    """

    z_m: np.ndarray
    temperature_k: np.ndarray
    pressure_pa: np.ndarray
    density_kgm3: np.ndarray
    sound_speed_mps: np.ndarray
    wind_east_mps: np.ndarray
    wind_north_mps: np.ndarray
    description: dict = field(default_factory=dict)

    @property
    def dz_m(self) -> float:
        """Grid spacing, m."""
        return float(self.z_m[1] - self.z_m[0])

    @property
    def has_wind(self) -> bool:
        """True when any node has a non-zero wind."""
        return bool(np.any(self.wind_east_mps != 0.0) or np.any(self.wind_north_mps != 0.0))

    def at(self, z_m: float) -> AtmosphereSample:
        """Properties at geometric altitude ``z_m`` (m), linearly interpolated.

        Raises
        ------
        AtmosphereError
            If ``z_m`` lies outside the grid.
        """
        if not (self.z_m[0] <= z_m <= self.z_m[-1]) or not math.isfinite(z_m):
            raise AtmosphereError(
                f"altitude {z_m:.1f} m is outside the atmosphere grid "
                f"[{self.z_m[0]:.0f}, {self.z_m[-1]:.0f}] m"
            )

        def lin(arr: np.ndarray) -> float:
            return float(np.interp(z_m, self.z_m, arr))

        return AtmosphereSample(
            altitude_m=float(z_m),
            temperature_k=lin(self.temperature_k),
            pressure_pa=float(np.exp(np.interp(z_m, self.z_m, np.log(self.pressure_pa)))),
            density_kgm3=float(np.exp(np.interp(z_m, self.z_m, np.log(self.density_kgm3)))),
            sound_speed_mps=lin(self.sound_speed_mps),
            wind_east_mps=lin(self.wind_east_mps),
            wind_north_mps=lin(self.wind_north_mps),
        )

    def arrays(self) -> tuple[np.ndarray, ...]:
        """The node arrays the numeric kernels take, in a fixed order.

        Returns
        -------
        tuple
            ``(z_m, sound_speed_mps, wind_east_mps, wind_north_mps, density_kgm3,
            pressure_pa)``, each float64 C-contiguous.
        """
        return tuple(
            np.ascontiguousarray(a, dtype=np.float64)
            for a in (
                self.z_m,
                self.sound_speed_mps,
                self.wind_east_mps,
                self.wind_north_mps,
                self.density_kgm3,
                self.pressure_pa,
            )
        )


#: Default node spacing of the propagation grid, m.
DEFAULT_DZ_M = 20.0


def _grid(dz_m: float) -> np.ndarray:
    n = int(round((Z_MAX_M - Z_MIN_M) / dz_m)) + 1
    return np.linspace(Z_MIN_M, Z_MAX_M, n)


def standard_atmosphere(temp_offset_k: float = 0.0, dz_m: float = DEFAULT_DZ_M) -> Atmosphere:
    """U.S. Standard Atmosphere 1976 with an optional temperature offset and no wind.

    Parameters
    ----------
    temp_offset_k : float
        Temperature offset, K, within [-60, 60]: an "ISA + dT" day with the standard
        pressure at sea level and the pressure above it from the hydrostatic equation
        ([1]_ eq. 17 gravity, :func:`_hydrostatic_pressure`) with the offset temperature,
        so pressure altitude and geometric height differ as they do on such a day
        (:mod:`advisory.physics.pressure_altitude`). (:func:`ussa1976` alone keeps the
        standard pressure at each altitude.)
    dz_m : float
        Grid spacing, m.
    """
    if not math.isfinite(temp_offset_k) or abs(temp_offset_k) > 60.0:
        raise AtmosphereError(f"temp_offset: {temp_offset_k} K is outside [-60, 60] K")
    z = _grid(dz_m)
    s = ussa1976(z, temp_offset_k)
    if temp_offset_k != 0.0:
        # ISA + dT day: the standard pressure at sea level, the pressure above it from the
        # hydrostatic equation with the warmer (colder) air, so a pressure altitude lies
        # higher (lower) than on a standard day (advisory.physics.pressure_altitude)
        s["pressure_pa"] = _hydrostatic_pressure(z, s["temperature_k"], 0.0, _SEA_LEVEL_P)
        s["density_kgm3"] = s["pressure_pa"] / (R_AIR * s["temperature_k"])
    zeros = np.zeros_like(z)
    return Atmosphere(
        z_m=z,
        temperature_k=s["temperature_k"],
        pressure_pa=s["pressure_pa"],
        density_kgm3=s["density_kgm3"],
        sound_speed_mps=s["sound_speed_mps"],
        wind_east_mps=zeros,
        wind_north_mps=zeros.copy(),
        description={"kind": "ussa1976", "temp_offset_k": float(temp_offset_k)},
    )


@dataclass(frozen=True)
class ProfileLevel:
    """One level of a user profile (SI)."""

    altitude_m: float
    temperature_k: float
    wind_east_mps: float
    wind_north_mps: float


# Physical plausibility limits for user profiles.
_T_RANGE_K = (150.0, 350.0)
_WIND_MAX_MPS = 150.0


def check_levels(levels: list[ProfileLevel], temp_offset_k: float = 0.0) -> None:
    """Refuse levels a profile cannot be built from: fewer than two, not finite, outside
    the altitude grid, temperatures (with ``temp_offset_k``) outside 150-350 K, winds over
    150 m/s, or not strictly ascending.

    Raises
    ------
    AtmosphereError
        Naming the level and the field.
    """
    if len(levels) < 2:
        raise AtmosphereError(f"profile: needs at least 2 levels, got {len(levels)}")
    for i, lev in enumerate(levels):
        for name in ("altitude_m", "temperature_k", "wind_east_mps", "wind_north_mps"):
            val = getattr(lev, name)
            if not math.isfinite(val):
                raise AtmosphereError(f"profile level {i}: {name} is {val}")
        if not (Z_MIN_M <= lev.altitude_m <= Z_MAX_M):
            raise AtmosphereError(
                f"profile level {i}: altitude {lev.altitude_m:.1f} m is outside "
                f"[{Z_MIN_M:.0f}, {Z_MAX_M:.0f}] m"
            )
        t = lev.temperature_k + temp_offset_k
        if not (_T_RANGE_K[0] <= t <= _T_RANGE_K[1]):
            raise AtmosphereError(
                f"profile level {i}: temperature {t:.2f} K is outside "
                f"[{_T_RANGE_K[0]:.0f}, {_T_RANGE_K[1]:.0f}] K"
            )
        speed = math.hypot(lev.wind_east_mps, lev.wind_north_mps)
        if speed > _WIND_MAX_MPS:
            raise AtmosphereError(
                f"profile level {i}: wind speed {speed:.1f} m/s exceeds {_WIND_MAX_MPS:.0f} m/s"
            )
        if i > 0 and lev.altitude_m <= levels[i - 1].altitude_m:
            raise AtmosphereError(
                f"profile level {i}: altitude {lev.altitude_m:.1f} m is not above the "
                f"previous level ({levels[i - 1].altitude_m:.1f} m); levels must ascend"
            )


def atmosphere_from_levels(
    levels: list[ProfileLevel],
    temp_offset_k: float = 0.0,
    dz_m: float = DEFAULT_DZ_M,
    source: str = "levels",
) -> Atmosphere:
    """Build an :class:`Atmosphere` from measured or forecast levels.

    Between the levels temperature and wind are interpolated linearly in geometric
    altitude. Outside the levels the profile continues as the standard atmosphere
    shifted to meet the nearest level's temperature, with that level's wind held
    constant. Pressure is integrated hydrostatically from the standard pressure at the
    lowest level (for the layer containing it, [1]_ eq. 33), so density follows from
    the ideal-gas law.

    Parameters
    ----------
    levels : list of ProfileLevel
        At least two levels, strictly ascending in altitude.
    temp_offset_k : float
        Extra temperature offset applied to the whole profile, K.
    dz_m : float
        Grid spacing, m.
    source : str
        Provenance text stored in ``description``.

    Raises
    ------
    AtmosphereError
        For fewer than two levels, non-ascending or out-of-range values; the message
        names the level and field.
    """
    check_levels(levels, temp_offset_k)
    z = _grid(dz_m)
    zl = np.array([lv.altitude_m for lv in levels])
    tl = np.array([lv.temperature_k for lv in levels]) + temp_offset_k
    el = np.array([lv.wind_east_mps for lv in levels])
    nl = np.array([lv.wind_north_mps for lv in levels])
    t_std = ussa1976(z)["temperature_k"]
    t_std_lo = float(ussa1976(zl[0])["temperature_k"][0])
    t_std_hi = float(ussa1976(zl[-1])["temperature_k"][0])
    t = np.interp(z, zl, tl)
    t = np.where(z < zl[0], t_std + (tl[0] - t_std_lo), t)
    t = np.where(z > zl[-1], t_std + (tl[-1] - t_std_hi), t)
    east = np.interp(z, zl, el)
    north = np.interp(z, zl, nl)
    p = _hydrostatic_pressure(z, t, zl[0], float(ussa1976(zl[0])["pressure_pa"][0]))
    rho = p / (R_AIR * t)
    a = np.sqrt(GAMMA * R_AIR * t)
    return Atmosphere(
        z_m=z,
        temperature_k=t,
        pressure_pa=p,
        density_kgm3=rho,
        sound_speed_mps=a,
        wind_east_mps=east,
        wind_north_mps=north,
        description={
            "kind": "profile",
            "source": source,
            "temp_offset_k": float(temp_offset_k),
            "levels": [
                [lv.altitude_m, lv.temperature_k, lv.wind_east_mps, lv.wind_north_mps]
                for lv in levels
            ],
        },
    )


def _hydrostatic_pressure(z: np.ndarray, t: np.ndarray, z_ref: float, p_ref: float) -> np.ndarray:
    """Integrate dp/dz = -g(z) p / (R T) on the grid, anchored at (z_ref, p_ref).

    Gravity varies with altitude as g0 (r0 / (r0 + z))^2 ([1]_ eq. 17), which is what
    makes geopotential altitude the natural variable of the standard.
    """
    g = G0 * (USSA_EARTH_RADIUS_M / (USSA_EARTH_RADIUS_M + z)) ** 2
    integrand = g / (R_AIR * t)
    dlnp = np.concatenate([[0.0], 0.5 * (integrand[1:] + integrand[:-1]) * np.diff(z)])
    lnp = -np.cumsum(dlnp)
    lnp_ref = np.interp(z_ref, z, lnp)
    return p_ref * np.exp(lnp - lnp_ref)


def atmosphere_from_description(desc: dict) -> Atmosphere:
    """Rebuild an :class:`Atmosphere` from its ``description`` (e.g. a table header).

    Raises
    ------
    AtmosphereError
        For a description of unknown kind (a merged atmosphere:
        :func:`advisory.physics.atmosphere_merge.rebuild_atmosphere`).
    """
    kind = desc.get("kind")
    if kind == "ussa1976":
        return standard_atmosphere(float(desc.get("temp_offset_k", 0.0)))
    if kind == "profile":
        levels = [ProfileLevel(*map(float, lv)) for lv in desc["levels"]]
        return atmosphere_from_levels(levels, float(desc.get("temp_offset_k", 0.0)),
                                      source=str(desc.get("source", "levels")))
    raise AtmosphereError(f"atmosphere description: unknown kind {kind!r}")
