"""Unit conversions between the SI used inside and the aviation units at the edges.

Everything inside the package is SI (m, s, kg, Pa, K, rad). Aviation units (ft, kt,
psf, deg, degC, NM) appear only at the edges: command line, wire fields named with
their unit (``alt_ft``, ``gs_kt``) and reports. All conversions live here.

References
----------
Exact definitions: international foot (1959) = 0.3048 m; nautical mile = 1852 m;
pound-force = 4.4482216152605 N (NIST SP 811, appendix B).
"""

from __future__ import annotations

import math

FT = 0.3048  #: metres per international foot (exact)
NM = 1852.0  #: metres per nautical mile (exact)
KT = NM / 3600.0  #: metres per second per knot
LBF = 4.4482216152605  #: newtons per pound-force (exact)
PSF = LBF / FT**2  #: pascals per pound-force per square foot (47.880 Pa)
STATUTE_MILE = 1609.344  #: metres per statute mile (exact)
MPH = STATUTE_MILE / 3600.0  #: metres per second per mile per hour
KELVIN_OFFSET = 273.15  #: K at 0 degC
G0 = 9.80665  #: standard gravity, m/s^2 (U.S. Standard Atmosphere 1976, table 2)
DEG = math.pi / 180.0  #: radians per degree


def ft_to_m(ft: float) -> float:
    """Convert feet to metres."""
    return ft * FT


def m_to_ft(m: float) -> float:
    """Convert metres to feet."""
    return m / FT


def kt_to_mps(kt: float) -> float:
    """Convert knots to metres per second."""
    return kt * KT


def mps_to_kt(mps: float) -> float:
    """Convert metres per second to knots."""
    return mps / KT


def pa_to_psf(pa: float) -> float:
    """Convert pascals to pounds-force per square foot."""
    return pa / PSF


def psf_to_pa(psf: float) -> float:
    """Convert pounds-force per square foot to pascals."""
    return psf * PSF


def c_to_k(c: float) -> float:
    """Convert degrees Celsius to kelvin."""
    return c + KELVIN_OFFSET


def k_to_c(k: float) -> float:
    """Convert kelvin to degrees Celsius."""
    return k - KELVIN_OFFSET


def heading_deg_to_rad(deg: float) -> float:
    """Convert a heading (clockwise from true north, degrees) to radians, same sense."""
    return (deg % 360.0) * DEG


def wind_from_to_components(wind_from_deg: float, speed_mps: float) -> tuple[float, float]:
    """Turn a meteorological wind (direction it blows FROM, speed) into components.

    Parameters
    ----------
    wind_from_deg : float
        Direction the wind blows from, degrees clockwise from true north.
    speed_mps : float
        Wind speed, m/s.

    Returns
    -------
    (east, north) : tuple of float
        Velocity of the air toward east and toward north, m/s.
    """
    to = (wind_from_deg + 180.0) * DEG
    return speed_mps * math.sin(to), speed_mps * math.cos(to)
