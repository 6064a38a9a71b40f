"""Pressure altitude is not geometric height (issue 14, item 8).

Air data report pressure altitude: the standard atmosphere's (geopotential) altitude of
the pressure measured. Before, the advisor took it as the geometric height the tables are
built in; on an ISA +15 K day at a pressure altitude of 50,000 ft the aircraft flies about
2,990 ft higher, so the boom arrives about 4 s later than predicted (and the carpet is
wider, the overpressure lower). Now the advisor converts through its atmosphere's pressure
(:mod:`advisory.physics.pressure_altitude`) and the bench simulator reports pressure
altitude.

Independent reference: the hypsometric equation ``d ln p / dz = -g(z) / (R T(z))``
(U.S. Standard Atmosphere 1976, eqs. 17 and 33) integrated with scipy ``quad`` over the
temperatures of the reference library ``ambiance`` plus the day's offset, from the
standard sea-level pressure, and solved for the height with ``brentq``; the standard
pressure of a pressure altitude from ``ambiance`` at the geometric altitude of that
geopotential altitude (``geop2geom_height``).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from ambiance import Atmosphere as Reference
from scipy.integrate import quad
from scipy.optimize import brentq

from advisory import units
from advisory.bench.flight import FlightState
from advisory.physics.atmosphere import standard_atmosphere
from advisory.physics.pressure_altitude import (
    HeightConverter,
    standard_pressure,
    standard_pressure_altitude,
)
from advisory.pipeline.advisor import Advisor
from advisory.pipeline.airdata import AirDataState
from advisory.pipeline.config import AdvisorConfig
from advisory.tables import lookup as lk
from advisory.tables.grid import DEFAULT_MACH_EXCESS, TableGrid
from tests.test_flown_history import LAT0, LON0, _build, far_zone

# U.S. Standard Atmosphere 1976 constants (table 2 / eq. 17): R* / M0, g0, r0.
R_AIR = 8314.32 / 28.9644
G0 = 9.80665
R0 = 6356766.0
P0 = 101325.0


def _temperature(z_m: float, offset_k: float) -> float:
    return float(Reference(z_m).temperature[0]) + offset_k


def standard_day_height_m(pressure_altitude_m: float) -> float:
    """Geometric height (m) of a pressure altitude (m) on a standard day: the geometric
    altitude of that geopotential altitude (USSA 1976 eq. 18, via ``ambiance``)."""
    return float(np.ravel(Reference.geop2geom_height(pressure_altitude_m))[0])


def _reference_pressure(pressure_altitude_m: float) -> float:
    return float(Reference(standard_day_height_m(pressure_altitude_m)).pressure[0])


def reference_height(pressure_altitude_m: float, offset_k: float) -> float:
    """Geometric height (m) of a pressure altitude on an ISA + offset day (module notes)."""
    p = _reference_pressure(pressure_altitude_m)
    drop = math.log(P0 / p)

    def ln_drop(z: float) -> float:
        g = lambda x: G0 * (R0 / (R0 + x)) ** 2 / (R_AIR * _temperature(x, offset_k))  # noqa: E731
        return quad(g, 0.0, z, limit=200)[0]

    return brentq(lambda z: ln_drop(z) - drop, 0.0, 30000.0, xtol=1e-3)


def reference_travel_time(height_m: float, mach: float, offset_k: float) -> float:
    """Travel time (s) of the straight-down ray of level flight in still air: Snell's law
    ``cos(theta) / c`` constant (Pierce, *Acoustics*, 1989, sec. 8-4) with
    ``cos(theta0) = 1 / M``, so ``dt = dz / (c sqrt(1 - (c / (M c_a))^2))``."""
    def c(z: float) -> float:
        return math.sqrt(1.4 * R_AIR * _temperature(z, offset_k))

    top = mach * c(height_m)
    return quad(lambda z: 1.0 / (c(z) * math.sqrt(1.0 - (c(z) / top) ** 2)), 0.0, height_m,
                limit=200)[0]


@pytest.mark.parametrize("alt_ft", [5000.0, 30000.0, 50000.0, 65000.0])
def test_standard_pressure_matches_the_reference_library(alt_ft: float) -> None:
    h = units.ft_to_m(alt_ft)
    p = _reference_pressure(h)
    # 1e-5: the library's gas constant (287.05287) and the standard's R* / M0 (287.0531)
    # differ in the fifth digit
    assert standard_pressure(h) == pytest.approx(p, rel=1e-5)
    assert standard_pressure_altitude(p) == pytest.approx(h, abs=0.5)


@pytest.mark.parametrize("offset_k", [-15.0, 0.0, 15.0])
@pytest.mark.parametrize("alt_ft", [5000.0, 30000.0, 50000.0, 65000.0])
def test_height_of_a_pressure_altitude_follows_the_hypsometric_equation(offset_k, alt_ft):
    conv = HeightConverter(standard_atmosphere(offset_k))
    hp = units.ft_to_m(alt_ft)
    z = conv.height(hp)
    assert z == pytest.approx(reference_height(hp, offset_k), abs=3.0)
    assert conv.pressure_altitude(z) == pytest.approx(hp, abs=0.01)


def test_an_isa_plus_15_day_lifts_fl500_by_about_2900_ft() -> None:
    # The figure: about +-2,900 ft on an ISA +-15 K day (independent reference).
    hp = units.ft_to_m(50000.0)
    for offset, lo, hi in ((15.0, 2700.0, 3200.0), (-15.0, -2900.0, -2500.0)):
        dz_ft = units.m_to_ft(reference_height(hp, offset)) - 50000.0
        assert lo < dz_ft < hi


@pytest.fixture(scope="module")
def hot_table(tmp_path_factory):
    """An ISA +15 K table, level flight, 49,000-55,000 ft (holds FL500 both as a
    geometric and as a pressure altitude)."""
    grid = TableGrid(altitudes_m=tuple(units.ft_to_m(a) for a in range(49000, 55001, 1000)),
                     mach_excess=DEFAULT_MACH_EXCESS, fpa_rad=(0.0,), headings_rad=(0.0,))
    return _build(tmp_path_factory.mktemp("hot") / "hot.boomtable", standard_atmosphere(15.0),
                  grid)


def test_the_advisor_flies_the_geometric_height_of_the_pressure_altitude(hot_table):
    # Level, Mach 1.6, pressure altitude 50,000 ft on an ISA +15 K day: the height the
    # advisor keeps in its flown history and the centerline ray's travel time of its
    # footprint against the independent reference (before: 50,000 ft and ~3.9 s early).
    fields = {"lat_deg": LAT0, "lon_deg": LON0, "alt_ft": 50000.0, "mach": 1.6,
              "heading_deg": 90.0, "gs_kt": 920.0, "bank_deg": 0.0, "fpa_deg": 0.0}
    adv = Advisor(hot_table, far_zone(), AdvisorConfig())
    state = AirDataState.from_fields(fields, utc_s=1.7e9, rx_monotonic=0.0)
    assert adv.step(state, now_monotonic=0.0).status != "unavailable"
    z_ref = reference_height(units.ft_to_m(50000.0), 15.0)
    h = adv.history
    assert len(h) == 1
    assert h.st[0, 0] == pytest.approx(z_ref, abs=3.0)
    mid = h.rows.shape[1] // 2
    t_ref = reference_travel_time(z_ref, 1.6, 15.0)
    assert h.rows[0, mid, lk.Q_TIME] == pytest.approx(t_ref, abs=0.3)


def test_the_simulator_reports_pressure_altitude() -> None:
    # The bench aircraft flies geometric height and its air data carry pressure altitude,
    # as an air-data computer's would (ISA +15 K, 50,000 ft pressure altitude).
    st = FlightState(standard_atmosphere(15.0), LAT0, LON0, 50000.0, 1.6, 90.0)
    assert st.alt_m == pytest.approx(reference_height(units.ft_to_m(50000.0), 15.0), abs=3.0)
    sample = st.step(0.1)
    assert sample["alt_ft"] == pytest.approx(50000.0, abs=0.01)
    assert np.isfinite(sample["sat_c"])
