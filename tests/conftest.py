"""Shared fixtures for the test suite."""

from __future__ import annotations

import subprocess
from pathlib import Path

import numpy as np
import pytest

from advisory.physics.atmosphere import GAMMA, R_AIR, Atmosphere, standard_atmosphere

#: The two longest tests (seconds, measured: the 10-minute soak with faults, mostly
#: waiting on real time; the 40-encounter campaign on a LocalCluster, about 6 minutes).
#: With ``-n 2 --dist worksteal`` (the README's command) pytest-xdist hands each worker
#: one contiguous half of the collection, so the soak goes first and the campaign first in
#: the second half: both start at once and the rest of the suite fills in around them.
LONGEST_FIRST = ("tests/test_soak_faults.py::test_soak_with_faults_keeps_publishing",
                 "tests/test_campaign.py::test_campaign_of_40_on_a_local_dask_cluster")


def pytest_collection_modifyitems(config, items) -> None:
    """Put the two longest tests at the head of each half (see :data:`LONGEST_FIRST`);
    the order of every other test is kept. A run without xdist is only reordered."""
    by_id = {it.nodeid: it for it in items}
    first, second = (by_id.get(n) for n in LONGEST_FIRST)
    rest = [it for it in items if it is not first and it is not second]
    if first is not None:
        rest.insert(0, first)
    if second is not None:
        rest.insert((len(rest) + 1) // 2, second)
    items[:] = rest


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


def small_grid(with_wind: bool = False):
    """A small table grid around 45,000 ft, level flight (keeps the advisor tests fast)."""
    import math

    from advisory import units
    from advisory.tables.grid import DEFAULT_MACH_EXCESS, TableGrid

    return TableGrid(
        altitudes_m=tuple(units.ft_to_m(a) for a in range(42000, 48001, 500)),
        mach_excess=DEFAULT_MACH_EXCESS,
        fpa_rad=(0.0,),
        headings_rad=tuple(math.radians(h) for h in range(0, 360, 45)) if with_wind else (0.0,),
    )


def build_small_table(path, atmosphere=None, with_wind: bool = False):
    """Build and save a small table; returns the loaded table."""
    from advisory.physics.aircraft import default_aircraft
    from advisory.tables.build import BuildInputs, build_table_arrays, provenance
    from advisory.tables.store import write_table_file
    from advisory.tables.table import BoomTable

    inputs = BuildInputs(default_aircraft(), atmosphere or standard_atmosphere(),
                         small_grid(with_wind))
    write_table_file(path, provenance(inputs, 0.0), build_table_arrays(inputs, workers=2))
    return BoomTable.load(path)


@pytest.fixture(scope="session")
def small_table_path(tmp_path_factory):
    """Path of a small standard-atmosphere table (built once per test session)."""
    path = tmp_path_factory.mktemp("tables") / "small.boomtable"
    build_small_table(path)
    return path


@pytest.fixture(scope="session")
def small_table(small_table_path):
    from advisory.tables.table import BoomTable

    return BoomTable.load(small_table_path)


@pytest.fixture(scope="session")
def c_build(tmp_path_factory):
    """bindings/c built once for the session (``make``, warnings are errors); the build
    directory. Tests that need it skip without make or a C compiler (their own marks)."""
    out = tmp_path_factory.mktemp("cbuild")
    c_dir = Path(__file__).resolve().parent.parent / "bindings" / "c"
    proc = subprocess.run(["make", "-C", str(c_dir), f"BUILD={out}", "CFLAGS=-O2 -Werror"],
                          capture_output=True, text=True, timeout=300)
    assert proc.returncode == 0, proc.stdout + proc.stderr
    assert "warning" not in proc.stderr.lower(), proc.stderr
    assert (out / "libboomwire.a").exists()
    return out

