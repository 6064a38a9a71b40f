"""Shared fixtures for the test suite."""

from __future__ import annotations

import numpy as np
import pytest

from advisory.physics.atmosphere import GAMMA, R_AIR, Atmosphere, standard_atmosphere


@pytest.fixture(scope="session")
def std_atm() -> Atmosphere:
    """U.S. Standard Atmosphere 1976, no offset, no wind."""
    return standard_atmosphere()


def make_atmosphere(z, c, wind_east=None, wind_north=None, p=None, rho=None) -> Atmosphere:
    """An atmosphere with a prescribed sound-speed (and wind) profile, for reference checks.

    Temperature follows from ``c = sqrt(gamma R T)``; pressure and density default to the
    standard atmosphere's (their values do not enter the ray paths).
    """
    z = np.asarray(z, dtype=float)
    c = np.asarray(c, dtype=float)
    std = standard_atmosphere()
    zeros = np.zeros_like(z)
    return Atmosphere(
        z_m=z,
        temperature_k=c**2 / (GAMMA * R_AIR),
        pressure_pa=np.interp(z, std.z_m, std.pressure_pa) if p is None else np.asarray(p) + zeros,
        density_kgm3=np.interp(z, std.z_m, std.density_kgm3) if rho is None
        else np.asarray(rho) + zeros,
        sound_speed_mps=c,
        wind_east_mps=zeros if wind_east is None else np.asarray(wind_east, dtype=float),
        wind_north_mps=zeros.copy() if wind_north is None else np.asarray(wind_north, dtype=float),
        description={"kind": "test"},
    )
