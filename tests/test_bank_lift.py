"""Bank and load factor tilt and scale the lift in the tables (issue 14, item 7).

Before: the tables held the lift of steady, wings-level flight (``W cos(fpa) cos(phi)``
toward a ray at azimuth ``phi``) whatever the aircraft did. In a 30 deg bank at Mach 1.6,
50,000 ft the overpressure was 23 % low on the outside of the turn and 92 % high on
the inside against direct tracing. Now each ray's overpressure follows the lift of the
moment (``n W cos(phi + bank)``, the lift plane turning with the bank) through the
table's lift map.

References (outside the code under test):
* the truth harness's direct tracing of the same steady, coordinated turn (no tables;
  its lift ``n W cos(phi + bank)`` per ray, ``advisory/bench/truth.py``), with
  ``R = V^2 / (g tan(bank))`` and ``n = 1 / cos(bank)`` (coordinated level turn, common
  practice, no source);
* ``predict`` by direct tracing with the tilted lift on every ray
  (``tests/test_tables_cli.py``).

The map's interpolation is checked against the equal-area rule evaluated directly at
each point (the project's shock fit, tested against Whitham's closed forms in
``tests/test_shocks.py``): that checks the map's resolution, not the physics.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from advisory import units
from advisory.bench.truth import TruthSettings, trace_ground_map
from advisory.bench.truth_path import FlownPath
from advisory.physics.aircraft import default_aircraft
from advisory.physics.atmosphere import standard_atmosphere
from advisory.physics.ffunction import f_function_parts
from advisory.physics.shocks import shock_fit_kernel
from advisory.pipeline.footprint import FootprintPredictor
from advisory.pipeline.trajectory import predict_trajectory
from advisory.tables import lookup as lk
from advisory.tables.lift import (
    lift_correction_kernel,
    lift_scale_kernel,
    map_value,
)
from advisory.tables.table import BoomTable
from tests.twins.lift import lift_correction_twin, lift_scale_twin, map_value_twin

G0 = 9.80665  # standard gravity, m/s^2 (value from memory)
ALT = units.ft_to_m(50000.0)


@pytest.fixture(scope="module")
def table_50k(tmp_path_factory):
    """A small still-air table around 50,000 ft (the issue's case)."""
    from advisory.tables.build import BuildInputs, build_table_arrays, provenance
    from advisory.tables.grid import DEFAULT_MACH_EXCESS, TableGrid
    from advisory.tables.store import write_table_file
    from advisory.tables.table import BoomTable

    grid = TableGrid(altitudes_m=tuple(units.ft_to_m(a) for a in range(48000, 52001, 1000)),
                     mach_excess=DEFAULT_MACH_EXCESS, fpa_rad=(0.0,), headings_rad=(0.0,))
    inputs = BuildInputs(default_aircraft(), standard_atmosphere(), grid)
    path = tmp_path_factory.mktemp("tables") / "t50k.boomtable"
    write_table_file(path, provenance(inputs, 0.0), build_table_arrays(inputs, workers=2))
    return BoomTable.load(path)


def _turn_truth(mach: float, bank: float, c: float):
    """Direct tracing of a steady coordinated turn at ``bank`` (rad) and ``mach``."""
    v = mach * c
    radius = v * v / (G0 * math.tan(abs(bank)))
    t = np.arange(0.0, 6.0 + 1e-9, 0.05)
    a = v / radius * t
    side = math.copysign(1.0, bank)
    path = FlownPath(t, side * radius * (1.0 - np.cos(a)), radius * np.sin(a),
                     np.full(t.size, ALT), np.full(t.size, mach), side * a, np.zeros(t.size),
                     turn_rate_rps=np.full(t.size, side * v / radius))
    gm = trace_ground_map(path, standard_atmosphere(), default_aircraft(),
                          settings=TruthSettings(azimuth_step_deg=0.25))
    return gm, t.size // 2


@pytest.mark.parametrize("bank_deg", [30.0, -30.0, 60.0])
def test_banked_turn_overpressure_matches_direct_tracing(table_50k, bank_deg) -> None:
    mach, bank = 1.6, math.radians(bank_deg)
    c = float(standard_atmosphere().at(ALT).sound_speed_mps)
    traj = predict_trajectory(math.radians(40.0), math.radians(-100.0), ALT, mach, 0.0,
                              mach * c, speed_of_sound=c, bank_rad=bank, lookahead_s=120.0,
                              step_s=1.0)
    predictor = FootprintPredictor(table_50k)
    pred = predictor.predict(traj)
    k = 50  # well inside the steady turn
    phi = predictor.lookup(traj)[0][k, :, lk.Q_PHI]
    gm, i = _turn_truth(mach, bank, c)
    ok = gm.reached[i] & np.isfinite(gm.steady_overpressure_pa[i])
    lo, hi = gm.azimuth_rad[ok].min(), gm.azimuth_rad[ok].max()
    inside = (phi > lo) & (phi < hi) & ~pred.edge_flag[k]
    truth = np.interp(phi[inside], gm.azimuth_rad[ok], gm.steady_overpressure_pa[i][ok])
    got = pred.overpressure_pa[k, inside]
    assert inside.sum() >= 10
    # issue 14's "done when": within 2 % of direct tracing across the carpet
    np.testing.assert_allclose(got, truth, rtol=0.02)


def _map_points(table, n: int, seed: int = 3):
    """Random (age, lift area) pairs over the rays' ages and the lift range."""
    rng = np.random.default_rng(seed)
    ages = table.ray_age[table.ray_age > 0.0]
    a = rng.uniform(ages.min(), ages.max(), n)
    s = table.lift_params
    b = s[4] * np.sinh(rng.uniform(s[2], s[3], n))
    return a, b


def test_lift_map_holds_the_equal_area_rule_between_its_nodes(table_50k) -> None:
    parts = f_function_parts(default_aircraft())
    out = np.empty((parts.y_m.size + 2, 3))
    a, b = _map_points(table_50k, 300)
    errs = []
    for ai, bi in zip(a, b, strict=True):
        f = parts.f_volume + bi * parts.f_lift_unit
        area = parts.area_volume + bi * parts.area_lift_unit
        direct = max(shock_fit_kernel(parts.y_m, f, area, ai, out)[1], 0.0)
        got = map_value(table_50k.lift_map, table_50k.lift_params, ai, bi) / math.sqrt(ai)
        errs.append(got / direct - 1.0)
    errs = np.abs(np.array(errs))
    assert np.median(errs) < 0.001 and errs.max() < 0.01, (np.median(errs), errs.max())


def test_lift_kernels_match_their_twins(table_50k) -> None:
    tb = table_50k
    a, b = _map_points(tb, 50)
    for ai, bi in zip(a, b, strict=True):
        assert map_value(tb.lift_map, tb.lift_params, ai, bi) == pytest.approx(
            map_value_twin(tb.lift_map, tb.lift_params, ai, bi), rel=1e-12)
    alt = np.linspace(ALT - 2000.0, ALT + 2000.0, 7)
    mach = np.array([0.9, 1.1, 1.3, 1.6, 2.0, 1.0, 1.4])
    scale = np.zeros(7)
    lift_scale_kernel(alt, mach, tb.lift_z, tb.lift_ln_p, float(tb.lift_params[5]), scale)
    np.testing.assert_allclose(scale, lift_scale_twin(alt, mach, tb.lift_z, tb.lift_ln_p,
                                                      float(tb.lift_params[5])), rtol=1e-12)
    rows = np.stack([tb.footprint(ALT, m).rows for m in (1.4, 1.6, 1.8, 1.3)])
    ages = np.stack([tb.footprint(ALT, m).rows[:, :1] * 0.0 for m in (1.4, 1.6, 1.8, 1.3)])
    for i, m in enumerate((1.4, 1.6, 1.8, 1.3)):
        lk.lookup_kernel(ALT, m, 0.0, 0.0, tb.ax_alt, tb.ax_mex, tb.ax_fpa, tb.ax_hdg,
                         tb.cutoff, tb.ray_age, ages[i])
    codes = np.array([lk.OK, lk.OK, lk.OK, lk.NO_BOOM], dtype=np.int64)
    lift = np.array([1.0, 1.0 / math.cos(0.5), 2.0, 1.5])
    bank = np.array([0.0, 0.5, -1.0, 0.3])
    fpa = np.zeros(4)
    sc = np.zeros(4)
    lift_scale_kernel(np.full(4, ALT), np.array([1.4, 1.6, 1.8, 1.3]), tb.lift_z,
                      tb.lift_ln_p, float(tb.lift_params[5]), sc)
    want = lift_correction_twin(rows, ages, codes, lift, bank, fpa, sc, tb.lift_map,
                                tb.lift_params)
    got = rows.copy()
    assert lift_correction_kernel(got, ages, codes, lift, bank, fpa, sc, tb.lift_map,
                                  tb.lift_params) == 2
    np.testing.assert_allclose(got, want, rtol=1e-12)
    np.testing.assert_array_equal(got[0], rows[0])  # steady: untouched
    assert not np.array_equal(got[1, :, lk.Q_DP], rows[1, :, lk.Q_DP])


def test_steady_flight_is_untouched_and_an_old_table_still_loads(table_50k) -> None:
    c = float(standard_atmosphere().at(ALT).sound_speed_mps)
    traj = predict_trajectory(math.radians(40.0), math.radians(-100.0), ALT, 1.6, 0.5,
                              1.6 * c, speed_of_sound=c, lookahead_s=60.0, step_s=2.0)
    with_map = FootprintPredictor(table_50k).predict(traj).overpressure_pa
    plain = BoomTable(table_50k.header, {k: v for k, v in table_50k.arrays.items()
                                         if k not in ("ray_age", "lift_map",
                                                      "lift_map_params")})
    assert not plain.has_lift_map
    assert any("lift map: none" in line for line in plain.info_lines())
    np.testing.assert_array_equal(FootprintPredictor(plain).predict(traj).overpressure_pa,
                                  with_map)
    broken = dict(table_50k.arrays)
    del broken["lift_map_params"]
    with pytest.raises(Exception, match="lift map arrays incomplete"):
        BoomTable(table_50k.header, broken)
