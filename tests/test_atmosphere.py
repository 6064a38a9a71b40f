"""Atmosphere checks against the standard, the `ambiance` package and printed tables."""

from __future__ import annotations

import numpy as np
import pytest
from ambiance import Atmosphere as Ambiance

from advisory import units
from advisory.physics.atmosphere import (
    AtmosphereError,
    ProfileLevel,
    atmosphere_from_levels,
    geometric_altitude,
    standard_atmosphere,
    ussa1976,
)
from advisory.physics.profile_file import load_profile

ALTITUDES_M = np.linspace(0.0, 30000.0, 37)  # 37 altitudes, every 833 m


@pytest.mark.parametrize(
    "ours, theirs",
    [
        ("temperature_k", "temperature"),
        ("pressure_pa", "pressure"),
        ("density_kgm3", "density"),
        ("sound_speed_mps", "speed_of_sound"),
    ],
)
def test_matches_ambiance_icao_1993(ours: str, theirs: str) -> None:
    # Source: `ambiance` package, ICAO Standard Atmosphere 1993 (equal to USSA 1976 below
    # 32 km); geometric altitude in both. Tolerance 0.01 %.
    mine = ussa1976(ALTITUDES_M)[ours]
    ref = getattr(Ambiance(ALTITUDES_M), theirs)
    np.testing.assert_allclose(mine, ref, rtol=1e-4)


def test_grid_atmosphere_matches_ambiance(std_atm) -> None:
    # Source: `ambiance` (ICAO 1993); the 20 m grid with linear interpolation stays
    # within 0.01 % between nodes.
    z = np.linspace(13.0, 29987.0, 41)
    ref = Ambiance(z)
    for zi, t, p, a in zip(z, ref.temperature, ref.pressure, ref.speed_of_sound, strict=True):
        s = std_atm.at(float(zi))
        assert s.temperature_k == pytest.approx(t, rel=1e-4)
        assert s.pressure_pa == pytest.approx(p, rel=1e-4)
        assert s.sound_speed_mps == pytest.approx(a, rel=1e-4)


def test_printed_ussa1976_values() -> None:
    # Source: U.S. Standard Atmosphere 1976 (NOAA-S/T 76-1562), table I: sea level
    # 288.150 K, 101325 Pa, 340.294 m/s; 11 km *geopotential* 216.650 K, 22632 Pa.
    sl = ussa1976(0.0)
    assert sl["temperature_k"][0] == pytest.approx(288.15, abs=1e-9)
    assert sl["pressure_pa"][0] == pytest.approx(101325.0, abs=1e-6)
    assert sl["sound_speed_mps"][0] == pytest.approx(340.29, abs=0.01)
    trop = ussa1976(geometric_altitude(11000.0))
    assert trop["temperature_k"][0] == pytest.approx(216.65, abs=1e-6)
    assert trop["pressure_pa"][0] == pytest.approx(22632.0, abs=1.0)


def test_geometric_vs_geopotential() -> None:
    # Source: USSA 1976 eq. 18, H = r0 z / (r0 + z), r0 = 6356.766 km: 11 km
    # geopotential is 11019.1 m geometric.
    assert float(geometric_altitude(11000.0)) == pytest.approx(11019.05, abs=0.1)
    # The tropopause temperature is reached only at the geometric altitude of 11 km
    # geopotential, not at 11 km geometric.
    assert ussa1976(11000.0)["temperature_k"][0] > 216.65 + 0.1


def test_sea_level_sound_speed_in_mph() -> None:
    # Common practice, no source: "the speed of sound at sea level is about 761 mph".
    a = ussa1976(0.0)["sound_speed_mps"][0]
    assert a / units.MPH == pytest.approx(761.0, abs=1.0)


def test_temperature_offset_is_a_hydrostatic_day() -> None:
    # ISA + dT day (issue 14, item 8): the standard sea-level pressure, the temperature
    # shifted by dT, the pressure above from the hydrostatic equation (USSA 1976 eqs. 17
    # and 33: d ln p / dz = -g(z) / (R T)), integrated independently with scipy quad over
    # the reference library's temperatures; sound speed scales as sqrt(T) (eq. 50).
    from ambiance import Atmosphere as Reference
    from scipy.integrate import quad

    hot = standard_atmosphere(temp_offset_k=15.0)
    std = standard_atmosphere()
    s_hot, s_std = hot.at(10000.0), std.at(10000.0)
    assert s_hot.temperature_k == pytest.approx(s_std.temperature_k + 15.0)
    r, g0, r0 = 8314.32 / 28.9644, 9.80665, 6356766.0
    drop = quad(lambda z: g0 * (r0 / (r0 + z)) ** 2
                / (r * (float(Reference(z).temperature[0]) + 15.0)), 0.0, 10000.0)[0]
    assert s_hot.pressure_pa == pytest.approx(101325.0 * np.exp(-drop), rel=1e-4)
    assert s_hot.pressure_pa > 1.04 * s_std.pressure_pa  # warmer air: thicker layers
    assert hot.at(0.0).pressure_pa == pytest.approx(101325.0)
    assert s_hot.density_kgm3 == pytest.approx(s_hot.pressure_pa / (r * s_hot.temperature_k))
    assert s_hot.sound_speed_mps == pytest.approx(
        s_std.sound_speed_mps * np.sqrt(s_hot.temperature_k / s_std.temperature_k)
    )


def test_profile_from_standard_levels_reproduces_standard_pressure() -> None:
    # Hydrostatic integration of the USSA 1976 temperatures must give back its pressures
    # (USSA 1976 eqs. 33a/33b); 0.05 %.
    zs = np.arange(0.0, 30001.0, 500.0)
    levels = [ProfileLevel(z, float(ussa1976(z)["temperature_k"][0]), 0.0, 0.0) for z in zs]
    atm = atmosphere_from_levels(levels)
    for z in (1000.0, 11000.0, 19000.0, 29000.0):
        assert atm.at(z).pressure_pa == pytest.approx(float(ussa1976(z)["pressure_pa"][0]),
                                                      rel=5e-4)


def test_profile_csv_and_toml(tmp_path) -> None:
    csv_file = tmp_path / "day.csv"
    csv_file.write_text(
        "# invented test day\nalt_ft,temp_c,wind_from_deg,wind_kt\n"
        "0,20,270,10\n30000,-40,270,60\n60000,-60,270,20\n"
    )
    atm = load_profile(csv_file)
    s = atm.at(units.ft_to_m(30000.0))
    # 30,000 ft falls between 20 m grid nodes next to a profile kink: 0.05 K.
    assert s.temperature_k == pytest.approx(233.15, abs=0.05)
    # Wind from 270 (west) blows toward east: positive east component.
    assert s.wind_east_mps == pytest.approx(60 * units.KT, rel=2e-3)
    assert abs(s.wind_north_mps) < 1e-6
    toml_file = tmp_path / "day.toml"
    toml_file.write_text(
        "[[level]]\nalt_m = 0\ntemp_k = 290\nwind_east_mps = 0\nwind_north_mps = 5\n"
        "[[level]]\nalt_m = 15000\ntemp_k = 215\nwind_east_mps = 0\nwind_north_mps = 25\n"
    )
    atm2 = load_profile(toml_file)
    assert atm2.at(7500.0).wind_north_mps == pytest.approx(15.0)
    assert atm2.has_wind


@pytest.mark.parametrize(
    "body, needle",
    [
        ("alt_ft,temp_c\n0,15\n20000,-20\n10000,-5\n", "levels must ascend"),
        ("alt_ft,temp_c\n0,15\n20000,-200\n", "temperature"),
        ("alt_ft,temp_c\n0,15\n200000,-20\n", "altitude"),
        ("alt_ft,temp_c\n0,15\n20000,abc\n", "temp_c"),
        ("alt_ft\n0\n20000\n", "temperature column"),
        ("alt_ft,temp_c,wind_east_kt\n0,15,0\n20000,-20,900\n", "wind speed"),
        ("alt_ft,temp_c\n0,15\n", "at least 2 levels"),
    ],
)
def test_bad_profiles_name_the_problem(tmp_path, body: str, needle: str) -> None:
    f = tmp_path / "bad.csv"
    f.write_text(body)
    with pytest.raises(AtmosphereError, match=needle):
        load_profile(f)


def test_unknown_format_and_missing_file(tmp_path) -> None:
    with pytest.raises(AtmosphereError, match="unknown format"):
        load_profile(tmp_path / "x.txt")
    with pytest.raises(AtmosphereError, match="cannot read"):
        load_profile(tmp_path / "missing.csv")
