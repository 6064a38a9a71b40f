"""Aircraft description: loading, validation, presets and the equivalent-area model."""

from __future__ import annotations

import math

import numpy as np
import pytest

from advisory.physics.aircraft import (
    CLASS_PRESETS,
    Aircraft,
    AircraftError,
    aircraft_from_dict,
    default_aircraft,
    load_aircraft,
)
from advisory.physics.atmosphere import GAMMA
from advisory.units import G0


def _write(tmp_path, text: str):
    path = tmp_path / "aircraft.toml"
    path.write_text(text, encoding="utf-8")
    return path


def test_demo_aircraft_loads_from_package_data():
    ac = default_aircraft()
    assert isinstance(ac, Aircraft)
    assert ac.name == "Tarnwick SX-9 demonstrator"
    assert ac.aircraft_class == "small_supersonic_jet"
    assert ac.length_m > 0 and ac.mass_kg > 0
    assert ac.source.endswith("demo_aircraft.toml")


def test_minimal_file_takes_class_defaults(tmp_path):
    path = _write(tmp_path, 'class = "slender_supersonic_transport"\nlength_m = 60\n'
                            "mass_kg = 150000\n")
    ac = load_aircraft(path)
    preset = CLASS_PRESETS["slender_supersonic_transport"]
    # Documented default: max area = pi/4 (L / fineness)^2 (module notes; invented).
    assert ac.max_area_m2 == pytest.approx(math.pi / 4 * (60 / preset.fineness) ** 2)
    assert ac.lift_start_station == preset.lift_start_station
    assert ac.reference_mach == preset.reference_mach
    assert ac.table_station_m is None


def test_default_class_is_small_jet():
    ac = aircraft_from_dict({"length_m": 20.0, "mass_kg": 9000.0})
    assert ac.aircraft_class == "small_supersonic_jet"


@pytest.mark.parametrize(
    "doc, field, value",
    [
        ({"mass_kg": 1000.0}, "length_m", "missing"),
        ({"length_m": 30.0}, "mass_kg", "missing"),
        ({"length_m": -3.0, "mass_kg": 1000.0}, "length_m", "-3.0"),
        ({"length_m": 30.0, "mass_kg": 1e9}, "mass_kg", "1000000000.0"),
        ({"length_m": "long", "mass_kg": 1000.0}, "length_m", "'long'"),
        ({"length_m": 30.0, "mass_kg": 1000.0, "class": "airliner"}, "class", "'airliner'"),
        ({"length_m": 30.0, "mass_kg": 1000.0, "wingspan": 9}, "wingspan", "unknown field"),
        ({"length_m": 30.0, "mass_kg": 1000.0, "volume": {"max_area_station": 0.9}},
         "volume.max_area_station", "0.9"),
        ({"length_m": 30.0, "mass_kg": 1000.0, "volume": {"max_area_m2": 100.0}},
         "volume.max_area_m2", "100.0"),
        ({"length_m": 30.0, "mass_kg": 1000.0, "lift": {"start_station": 0.8,
                                                          "end_station": 0.7}},
         "lift.end_station", "0.7"),
        ({"length_m": 30.0, "mass_kg": 1000.0, "reference": {"mach": 0.8}},
         "reference.mach", "0.8"),
        ({"length_m": 30.0, "mass_kg": 1000.0, "carlson_shape_factor": 2.0},
         "carlson_shape_factor", "2.0"),
    ],
)
def test_bad_values_name_the_field_and_value(doc, field, value):
    with pytest.raises(AircraftError) as err:
        aircraft_from_dict(doc)
    msg = str(err.value)
    assert msg.startswith(field) and value in msg
    assert "\n" not in msg


def test_file_errors_name_the_file(tmp_path):
    path = _write(tmp_path, "length_m = 30\n")
    with pytest.raises(AircraftError, match=r"aircraft\.toml: mass_kg: missing"):
        load_aircraft(path)
    bad = _write(tmp_path, "length_m = = 3\n")
    with pytest.raises(AircraftError, match="not valid TOML"):
        load_aircraft(bad)
    with pytest.raises(AircraftError, match="cannot read"):
        load_aircraft(tmp_path / "missing.toml")


@pytest.mark.parametrize(
    "table, field",
    [
        ({"station_m": [0, 5, 10], "area_m2": [0, 1]}, "equivalent_area.area_m2"),
        ({"station_m": [0, 5, 4], "area_m2": [0, 1, 1]}, "equivalent_area.station_m[2]"),
        ({"station_m": [0, 5, 50], "area_m2": [0, 1, 1]}, "equivalent_area.station_m[2]"),
        ({"station_m": [0, 5, 10], "area_m2": [0, -1, 1]}, "equivalent_area.area_m2[1]"),
        ({"station_m": [1, 5, 10], "area_m2": [0, 1, 1]}, "equivalent_area"),
        ({"station_m": [0, 5, 10]}, "equivalent_area.area_m2"),
        ({"station_m": [0, 5, 10], "area_m2": [0, "x", 1]}, "equivalent_area.area_m2"),
    ],
)
def test_bad_tables_name_the_field(table, field):
    with pytest.raises(AircraftError) as err:
        aircraft_from_dict({"length_m": 30.0, "mass_kg": 1000.0, "equivalent_area": table})
    assert str(err.value).startswith(field)


def test_volume_and_table_are_exclusive():
    with pytest.raises(AircraftError, match="not both"):
        aircraft_from_dict({"length_m": 30.0, "mass_kg": 1000.0,
                            "volume": {"max_area_m2": 2.0},
                            "equivalent_area": {"station_m": [0, 5, 30],
                                                "area_m2": [0, 1, 1]}})


def test_parabolic_volume_is_whithams_parabolic_body():
    # Whitham 1952: parabolic body of revolution, radius R = 4 R_max u (1 - u), so
    # S = 16 S_max u^2 (1-u)^2 and S' = 16 S_max / L (2u - 6u^2 + 4u^3).
    ac = aircraft_from_dict({"length_m": 20.0, "mass_kg": 1000.0,
                             "volume": {"max_area_m2": 1.5, "max_area_station": 0.5}})
    x = np.linspace(0.0, 20.0, 101)
    u = x / 20.0
    s, ds = ac.volume_area(x)
    assert np.allclose(s, 16 * 1.5 * u**2 * (1 - u) ** 2, atol=1e-12)
    assert np.allclose(ds, 16 * 1.5 / 20.0 * (2 * u - 6 * u**2 + 4 * u**3), atol=1e-12)


@pytest.mark.parametrize("station", [0.35, 0.5, 0.6, 0.65])
def test_parametric_maximum_sits_where_asked(station):
    ac = aircraft_from_dict({"length_m": 30.0, "mass_kg": 1000.0,
                             "volume": {"max_area_m2": 2.0, "max_area_station": station}})
    x = np.linspace(0.0, 30.0, 30001)
    s, ds = ac.volume_area(x)
    assert x[np.argmax(s)] / 30.0 == pytest.approx(station, abs=1e-4)
    assert s.max() == pytest.approx(2.0, rel=1e-6)
    # The slope is the derivative of the area (central differences).
    assert np.allclose(np.gradient(s, x)[1:-1], ds[1:-1], atol=2e-3)


def test_table_reproduces_a_smooth_body():
    ac = default_aircraft()
    x = np.linspace(0.0, ac.length_m, 49)
    tab = aircraft_from_dict({"length_m": ac.length_m, "mass_kg": ac.mass_kg,
                              "equivalent_area": {"station_m": list(x),
                                                  "area_m2": list(ac.volume_area(x)[0])}})
    xq = np.linspace(0.0, ac.length_m, 777)
    s_ref, _ = ac.volume_area(xq)
    s_tab, ds_tab = tab.volume_area(xq)
    assert np.max(np.abs(s_tab - s_ref)) < 2e-3 * ac.max_area_m2
    assert tab.max_area_m2 == pytest.approx(ac.max_area_m2, rel=1e-3)
    assert ds_tab[0] == 0.0  # pointed nose
    # After the last station the area holds (wake), slope zero.
    s_after, ds_after = tab.volume_area(np.array([ac.length_m + 5.0]))
    assert s_after[0] == pytest.approx(tab.table_area_m2[-1]) and ds_after[0] == 0.0


def test_lift_equivalent_area_formula():
    # Walkden 1958 / Carlson 1978: B = beta cos(phi) n W cos(fpa) / (gamma p M^2).
    ac = aircraft_from_dict({"length_m": 30.0, "mass_kg": 20000.0})
    mach, p = 1.8, 12000.0
    beta = math.sqrt(mach**2 - 1)
    expected = beta * 20000.0 * G0 / (GAMMA * p * mach**2)
    assert ac.lift_area_total(mach, p) == pytest.approx(expected, rel=1e-12)
    assert ac.lift_area_total(mach, p, load_factor=2.0) == pytest.approx(2 * expected)
    assert ac.lift_area_total(mach, p, phi_rad=math.pi / 3) == pytest.approx(0.5 * expected)
    assert ac.lift_area_total(mach, p, fpa_rad=math.radians(10)) == pytest.approx(
        expected * math.cos(math.radians(10)))


def test_lift_distribution_rises_over_the_lifting_stretch():
    ac = aircraft_from_dict({"length_m": 40.0, "mass_kg": 20000.0,
                             "lift": {"start_station": 0.4, "end_station": 0.9}})
    x = np.linspace(0.0, 40.0, 4001)
    b, db = ac.lift_area_unit(x)
    assert np.all(b[x <= 16.0] == 0.0) and np.all(b[x >= 36.0] == 1.0)
    assert np.all(np.diff(b) >= 0.0)
    # Its slope integrates to one (trapezoid rule).
    assert np.sum(0.5 * (db[1:] + db[:-1]) * np.diff(x)) == pytest.approx(1.0, rel=1e-6)
    total = ac.equivalent_area(x, 1.6, 10000.0)
    assert total[-1] == pytest.approx(ac.lift_area_total(1.6, 10000.0))
