"""Pressure altitude and geometric height: the hypsometric equation through the profile.

Air data report *pressure altitude*: the altitude of the standard atmosphere at which the
standard pressure equals the static pressure measured (what an altimeter set to 1013.25 hPa
reads), expressed, as the standard's tables are, in geopotential metres or feet ([1]_,
table 1; ICAO Doc 7488). The ray tracing and the tables work in *geometric* height above
mean sea level in the atmosphere of the day. The two are tied by the pressure: the
aircraft is where the day's pressure equals the standard pressure at its pressure altitude,
and the day's pressure comes from the hydrostatic (hypsometric) equation
``dp/dz = -g(z) p / (R T(z))`` integrated through the profile
(:class:`advisory.physics.atmosphere.Atmosphere` holds it on its grid).

On a standard day the geometric height is the geometric altitude of the geopotential
pressure altitude ([1]_ eq. 18: about +36 m at 50,000 ft). On an ISA +15 K day at a
pressure altitude of 50,000 ft the aircraft flies about 2,990 ft higher (the layers below
are ~7 % warmer, so thicker): its boom arrives about 4 s later than at 50,000 ft, over a
wider carpet, with a lower overpressure (tests/test_pressure_altitude.py).

References
----------
.. [1] U.S. Standard Atmosphere, 1976. NOAA / NASA / USAF, NOAA-S/T 76-1562. Table 4
   (layers), eqs. 33a/33b (pressure in a layer) solved for the altitude.
"""

from __future__ import annotations

import math

import numpy as np

from advisory.physics.atmosphere import (
    _LAYER_H,
    _LAYER_LAPSE,
    _LAYER_P,
    _LAYER_T,
    G0,
    R_AIR,
    Atmosphere,
)

__all__ = ["HeightConverter", "standard_pressure", "standard_pressure_altitude"]

_H = [float(x) for x in _LAYER_H]
_T = [float(x) for x in _LAYER_T]
_P = [float(x) for x in _LAYER_P]
_L = [float(x) for x in _LAYER_LAPSE]


def _layer_of_altitude(h_m: float) -> int:
    i = 0
    while i < len(_L) - 1 and h_m >= _H[i + 1]:
        i += 1
    return i


def standard_pressure(h_m: float) -> float:
    """Standard pressure at geopotential altitude ``h_m`` (m), Pa ([1]_ eqs. 33a/33b);
    below the first layer's base the first layer continues."""
    i = _layer_of_altitude(h_m)
    hb, tb, pb, lapse = _H[i], _T[i], _P[i], _L[i]
    if lapse == 0.0:
        return pb * math.exp(-G0 * (h_m - hb) / (R_AIR * tb))
    return pb * (tb / (tb + lapse * (h_m - hb))) ** (G0 / (R_AIR * lapse))


def standard_pressure_altitude(p_pa: float) -> float:
    """Geopotential altitude (m) of the standard atmosphere where the pressure is
    ``p_pa`` (Pa): [1]_ eqs. 33a/33b solved for the altitude, layer by layer."""
    i = 0
    while i < len(_L) - 1 and p_pa <= _P[i + 1]:
        i += 1
    hb, tb, pb, lapse = _H[i], _T[i], _P[i], _L[i]
    if lapse == 0.0:
        return hb - R_AIR * tb / G0 * math.log(p_pa / pb)
    return hb + tb / lapse * ((p_pa / pb) ** (-R_AIR * lapse / G0) - 1.0)


class HeightConverter:
    """Pressure altitude <-> geometric height in one atmosphere (module notes).

    The day's pressure is the atmosphere's, interpolated log-linearly between its grid
    nodes exactly as :meth:`Atmosphere.at` does.

    Parameters
    ----------
    atmosphere : Atmosphere
        The profile in force (the live table's).
    """

    def __init__(self, atmosphere: Atmosphere) -> None:
        self._z = np.ascontiguousarray(atmosphere.z_m, dtype=np.float64)
        self._ln_p = np.log(np.asarray(atmosphere.pressure_pa, dtype=np.float64))
        # the pressure falls with height: -ln p ascends, the axis np.interp needs
        self._neg_ln_p = np.ascontiguousarray(-self._ln_p)

    def height(self, pressure_altitude_m: float) -> float:
        """Geometric height above mean sea level (m) of pressure altitude (m); clamped
        to the atmosphere's grid."""
        p = standard_pressure(pressure_altitude_m)
        return float(np.interp(-math.log(p), self._neg_ln_p, self._z))

    def heights(self, pressure_altitude_m: np.ndarray) -> np.ndarray:
        """:meth:`height` of every element."""
        return np.array([self.height(float(h)) for h in np.ravel(pressure_altitude_m)])

    def pressure_altitude(self, height_m: float) -> float:
        """Pressure altitude (geopotential m) of geometric height ``height_m`` (m)."""
        ln_p = float(np.interp(height_m, self._z, self._ln_p))
        return standard_pressure_altitude(math.exp(ln_p))

