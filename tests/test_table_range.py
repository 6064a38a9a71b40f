"""Never read a table silently beyond its range (issue 14, item 5).

Before: the default table began at 20,000 ft and the lookup read the edge for any
altitude below; at 8,000 ft, Mach 1.05, ``check`` said "Mach 1.05 or less keeps the boom
off the ground" with a cutoff Mach of 1.077, where the cutoff is 1.029 (still air, U.S.
Standard Atmosphere 1976: ``M_cut = c_ground / c_h``, Pierce, *Acoustics*, 1989,
sec. 8-4, sound speeds from the reference library ``ambiance``) and a boom reaches the
ground. Now the default table covers 5,000-65,000 ft, and a present state outside the
live table (altitude, flight-path angle, Mach excess) gives ``unavailable`` with the
reason, never ``clear`` or ``no_boom``.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from ambiance import Atmosphere as ReferenceAtmosphere

from advisory import units
from advisory.cli import main
from advisory.pipeline.advisor import Advisor
from advisory.pipeline.cues import crew_cue
from advisory.pipeline.table_range import OUTSIDE_TABLE
from tests.test_advisor import point_along, square, state, zoneset
from tests.test_pressure_altitude import standard_day_height_m


def _state_file(tmp_path, alt_ft: float, mach: float) -> str:
    c = float(ReferenceAtmosphere(units.ft_to_m(alt_ft)).speed_of_sound[0])
    p = tmp_path / "state.json"
    p.write_text(json.dumps({"lat_deg": 30.0, "lon_deg": -140.0, "alt_ft": alt_ft,
                             "mach": mach, "heading_deg": 90.0,
                             "gs_kt": mach * c / units.KT, "bank_deg": 0.0,
                             "fpa_deg": 0.0}))
    return str(p)


def _zones_file(tmp_path) -> str:
    p = tmp_path / "zones.geojson"
    ring = [[-139.7, 29.95], [-139.6, 29.95], [-139.6, 30.05], [-139.7, 30.05],
            [-139.7, 29.95]]
    p.write_text(json.dumps({"type": "FeatureCollection", "features": [{
        "type": "Feature", "geometry": {"type": "Polygon", "coordinates": [ring]},
        "properties": {"id": "town", "name": "Invented town", "limit_psf": 0.0}}]}))
    return str(p)


@pytest.mark.slow
def test_check_at_8000_ft_says_the_boom_reaches(tmp_path, capsys):
    # the default table (built once and cached); the closed form's cutoff Mach
    c_g = float(ReferenceAtmosphere(0.0).speed_of_sound[0])
    c_h = float(ReferenceAtmosphere(units.ft_to_m(8000.0)).speed_of_sound[0])
    argv = ["check", "--state", _state_file(tmp_path, 8000.0, 1.05), "--zones",
            _zones_file(tmp_path), "--json"]
    assert main(argv) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["status"] not in ("clear", "no_boom"), out
    assert out["cutoff_mach"] == pytest.approx(c_g / c_h, abs=0.002)
    assert out["reaches_ground"] is True


def _height_ft(pressure_altitude_ft: float) -> float:
    """Geometric height (ft) of a pressure altitude (ft) on a standard day (ambiance)."""
    return units.m_to_ft(standard_day_height_m(units.ft_to_m(pressure_altitude_ft)))


@pytest.mark.parametrize("alt_ft, fpa_deg, mach, named", [
    (30000.0, 0.0, 1.6, f"height {_height_ft(30000.0):,.0f} ft"),
    (55000.0, 0.0, 1.6, f"height {_height_ft(55000.0):,.0f} ft"),
    (45000.0, 3.0, 1.6, "flight-path angle 3.0 deg"), (45000.0, 0.0, 3.5, "Mach 3.50")])
def test_a_state_outside_the_table_is_unavailable_with_the_reason(small_table, alt_ft,
                                                                   fpa_deg, mach, named):
    # the small table: 42,000-48,000 ft, level flight only, Mach excess up to 2.0 (its
    # top is the cutoff, about 1.15 there, plus 2.0)
    lat, lon = point_along(30e3)
    adv = Advisor(small_table, zoneset(square("town", lat, lon)))
    a = adv.step(state(mach=mach, alt_ft=alt_ft, fpa_deg=fpa_deg), now_monotonic=0.0)
    assert a.status == "unavailable", a
    assert a.reason.startswith(OUTSIDE_TABLE) and named in a.reason, a.reason
    assert crew_cue(a) == "BOOM PREDICTION OFF - OUTSIDE TABLE"


def test_within_the_tolerances_the_table_is_read(small_table):
    # 80 ft above the top (geometric height; the pressure altitude of 48,080 ft geometric
    # on a standard day is its geopotential altitude, ambiance) and 0.4 deg of climb on a
    # level table: read at the edge
    lat, lon = point_along(30e3)
    adv = Advisor(small_table, zoneset(square("town", lat, lon)))
    hp = float(np.ravel(ReferenceAtmosphere.geom2geop_height(units.ft_to_m(48080.0)))[0])
    a = adv.step(state(alt_ft=units.m_to_ft(hp), fpa_deg=0.4), now_monotonic=0.0)
    assert a.status != "unavailable", a.reason
    assert math.isfinite(a.cutoff_mach)


def test_check_outside_the_table_names_it(small_table_path, tmp_path, capsys):
    argv = ["check", "--state", _state_file(tmp_path, 30000.0, 1.6), "--zones",
            _zones_file(tmp_path), "--table", str(small_table_path)]
    main([*argv, "--json"])
    out = json.loads(capsys.readouterr().out)
    assert out["status"] == "unavailable"
    main(argv)
    text = capsys.readouterr().out
    assert OUTSIDE_TABLE in text and f"height {_height_ft(30000.0):,.0f} ft" in text
