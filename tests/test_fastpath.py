"""Fast path of the table builder: parity with the readable path, plus one outside anchor.

The readable path (``build_column_reference``: carpet bisections, ``RayTracer.trace``,
``ground_signature``) is the twin of the numba kernels in
:mod:`advisory.physics.fastpath`; the parity checks hold the kernels to it (twin
parity, no outside source). The cutoff Mach check compares against the closed form
``M_cutoff = c_ground / c_aircraft`` with U.S. Standard Atmosphere 1976 sound speeds.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from advisory import units
from advisory.physics import carpet
from advisory.physics import fastpath as fp
from advisory.physics.aircraft import default_aircraft
from advisory.physics.atmosphere import ProfileLevel, atmosphere_from_levels, standard_atmosphere
from advisory.physics.column import trace_column
from advisory.physics.ffunction import f_function_parts
from advisory.physics.rays import FlightCondition, FlightConditionError, RayTracer
from advisory.physics.signature import ground_signature
from advisory.tables import lookup as lk
from advisory.tables.build import BuildInputs, build_column, build_column_reference
from advisory.tables.grid import DEFAULT_MACH_EXCESS, TableGrid

GEOMETRY = (lk.Q_FWD, lk.Q_RIGHT, lk.Q_TIME, lk.Q_DFWD_DPHI, lk.Q_DRIGHT_DPHI, lk.Q_PHI)
SIGNATURE = (lk.Q_DP, lk.Q_DURATION)

# Invented windy profile (a jet stream near the tropopause, turning with height).
WIND_LEVELS = [
    ProfileLevel(0.0, 288.0, 5.0, -3.0),
    ProfileLevel(9000.0, 229.0, 35.0, 18.0),
    ProfileLevel(12000.0, 217.0, 48.0, 10.0),
    ProfileLevel(20000.0, 217.0, 12.0, -6.0),
    ProfileLevel(30000.0, 226.0, -5.0, 0.0),
]


def _grid(alts_ft, fpa_deg, headings_deg=(0.0,)) -> TableGrid:
    return TableGrid(
        altitudes_m=tuple(units.ft_to_m(a) for a in alts_ft),
        mach_excess=DEFAULT_MACH_EXCESS,
        fpa_rad=tuple(math.radians(f) for f in fpa_deg),
        headings_rad=tuple(math.radians(h) for h in headings_deg),
    )


@pytest.fixture(scope="module")
def aircraft():
    return default_aircraft()


@pytest.fixture(scope="module")
def std_case(aircraft):
    atm = standard_atmosphere()
    return BuildInputs(aircraft, atm, _grid((30000.0, 61500.0), (0.0, 7.5))), RayTracer(atm)


@pytest.fixture(scope="module")
def wind_case(aircraft):
    atm = atmosphere_from_levels(WIND_LEVELS, source="test jet stream")
    grid = _grid((47500.0,), (-5.0,), (0.0, 30.0, 240.0))
    return BuildInputs(aircraft, atm, grid), RayTracer(atm)


def _assert_column_parity(inputs: BuildInputs, tracer: RayTracer, key) -> None:
    g = inputs.grid
    ia, jf, kh = key
    # The fast path must really run (not fall back to the reference).
    assert trace_column(tracer, inputs.aircraft, g.altitudes_m[ia], g.headings_rad[kh],
                           g.fpa_rad[jf], g.ground_elevation_m, np.asarray(g.mach_excess),
                           g.eta, inputs.reflection_factor) is not None
    cut, left, right, cells, ages = build_column(inputs, tracer, *key)
    cut_r, left_r, right_r, cells_r, ages_r = build_column_reference(inputs, tracer, *key)
    # Twin parity: the readable path is the reference (no outside source).
    assert cut == pytest.approx(cut_r, rel=1e-12, abs=0.0)
    np.testing.assert_allclose(left, left_r, rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(right, right_r, rtol=1e-9, atol=1e-12)
    for q in GEOMETRY:
        scale = float(np.max(np.abs(cells_r[..., q])))
        np.testing.assert_allclose(cells[..., q], cells_r[..., q], rtol=1e-9,
                                   atol=1e-9 * scale, err_msg=f"quantity {q}")
    for q in SIGNATURE:
        scale = float(np.max(np.abs(cells_r[..., q])))
        np.testing.assert_allclose(cells[..., q], cells_r[..., q], rtol=1e-6,
                                   atol=1e-6 * scale, err_msg=f"quantity {q}")
    np.testing.assert_array_equal(cells[..., lk.Q_EDGE], cells_r[..., lk.Q_EDGE])
    boom = cells_r[..., lk.Q_DP] > 0.0  # each ray's age (the lift map's input) where it booms
    np.testing.assert_allclose(ages[boom], ages_r[boom], rtol=1e-6)
    assert np.all(ages_r[boom] > 0.0)
    # The column is not trivial: booms on the ground, and edge rays flagged.
    assert np.all(cells_r[:, g.n_eta // 2, lk.Q_DP] > 0.0)
    assert np.any(cells_r[..., lk.Q_EDGE] == 1.0)


@pytest.mark.parametrize("key", [(0, 0, 0), (1, 1, 0)])
def test_column_matches_reference_standard_atmosphere(std_case, key) -> None:
    inputs, tracer = std_case
    _assert_column_parity(inputs, tracer, key)


@pytest.mark.parametrize("kh", [1, 2])
def test_column_matches_reference_windy_heading_descent(wind_case, kh) -> None:
    inputs, tracer = wind_case
    _assert_column_parity(inputs, tracer, (0, 0, kh))


def test_cutoff_mach_closed_form(std_case) -> None:
    # Windless level flight: M_cutoff = max c(z) / c0 (Pierce 1989 sec. 8-4; Hayes 1971),
    # with U.S. Standard Atmosphere 1976 sound speeds 340.294 m/s at sea level and
    # 295.069 m/s in the 11-20 km isothermal layer (USSA 1976 table values); the
    # aircraft at 61,500 ft (18.7 km) in level flight.
    inputs, tracer = std_case
    cut, *_ = build_column(inputs, tracer, 1, 0, 0)
    assert cut == pytest.approx(340.294 / 295.069, abs=2e-5)


def test_bisection_kernels_match_carpet(wind_case) -> None:
    inputs, tracer = wind_case
    alt, hdg, fpa = inputs.grid.altitudes_m[0], math.radians(240.0), math.radians(-5.0)
    fc = FlightCondition(1.5, alt, hdg, fpa)
    c0, w0x, w0y = tracer.aircraft_air(fc)
    lz, lc, lwx, lwy = tracer.levels(alt, 0.0)
    args = (c0, w0x, w0y, lc.copy(), lwx.copy(), lwy.copy(), lz.size)
    # Twin parity with advisory.physics.carpet (no outside source).
    cut = fp.cutoff_mach_kernel(hdg, fpa, *args, fp.PHI_SCAN, carpet.MACH_TOL,
                                carpet.MACH_SEARCH_MAX)
    assert cut == carpet.cutoff_mach(tracer, fc)
    fc = FlightCondition(cut + 0.05, alt, hdg, fpa)
    phi_in, margin = fp.best_reaching_azimuth_kernel(fc.mach, hdg, fpa, *args, fp.PHI_SCAN)
    assert (phi_in, margin) == carpet.best_reaching_azimuth(tracer, fc)
    for side in (-1, 1):
        got = fp.lateral_cutoff_kernel(fc.mach, hdg, fpa, *args, phi_in, side,
                                       carpet.PHI_LIMIT_RAD, carpet.PHI_TOL_RAD)
        assert got == carpet.lateral_cutoff(tracer, fc, phi_in, side)
    for phi in (-1.2, 0.0, 0.4, 2.5):
        assert fp.min_q2_kernel(fc.mach, hdg, fpa, phi, *args) == tracer.min_q2(fc, phi)


def test_single_rays_match_trace_and_signature(wind_case) -> None:
    inputs, tracer = wind_case
    ac = inputs.aircraft
    alt, hdg, fpa = inputs.grid.altitudes_m[0], math.radians(30.0), math.radians(-5.0)
    fc = FlightCondition(1.6, alt, hdg, fpa)
    s0 = tracer.atmosphere.at(alt)
    lz, lc, lwx, lwy = (a.copy() for a in tracer.levels(alt, 0.0))
    z, _, _, _, rho_nodes, _ = tracer.atmosphere.arrays()
    rho = np.exp(np.interp(lz, z, np.log(rho_nodes)))
    parts = f_function_parts(ac)
    m = lz.size
    res = np.empty(fp.N_RAY_RESULTS)
    for phi in (0.0, 0.5, -0.8, 1.5):  # the last one turns before the ground
        reached = fp.ray_ground_kernel(
            fc.mach, hdg, fpa, phi, s0.sound_speed_mps, s0.wind_east_mps, s0.wind_north_mps,
            s0.pressure_pa, lz, lc, lwx, lwy, rho, m, parts.y_m, parts.f_volume,
            parts.area_volume, parts.f_lift_unit, parts.area_lift_unit, ac.lift_n(1.0, fpa),
            1.9, np.empty((m, 9)), np.empty(m), np.empty(m), np.empty((parts.y_m.size + 2, 3)),
            res,
        )
        ray = tracer.trace(fc, phi)
        # Twin parity with RayTracer.trace + ground_signature (no outside source).
        assert reached == ray.reaches_ground == (phi != 1.5)
        if not reached:
            assert res[fp.R_EDGE] == 1.0 and res[fp.R_DP] == 0.0
            continue
        sig = ground_signature(ac, ray, fc.mach, s0.sound_speed_mps, s0.pressure_pa,
                               reflection_factor=1.9, fpa_rad=fpa)
        assert res[fp.R_X] == pytest.approx(ray.x_m[-1], rel=1e-12)
        assert res[fp.R_Y] == pytest.approx(ray.y_m[-1], rel=1e-12)
        assert res[fp.R_TIME] == pytest.approx(ray.t_s[-1], rel=1e-12)
        np.testing.assert_allclose(res[[fp.R_DX_DPHI, fp.R_DY_DPHI]], ray.dxy_dphi, rtol=1e-9)
        assert res[fp.R_DP] == pytest.approx(sig.overpressure_pa, rel=1e-9)
        assert res[fp.R_DURATION] == pytest.approx(sig.duration_s, rel=1e-9)
        assert res[fp.R_EDGE] == float(sig.edge or sig.caustic)


def test_declined_column_falls_back_to_reference_error(aircraft) -> None:
    # A Mach excess that takes the condition past Mach 5: the fast path declines and
    # the reference raises the error naming the field (common practice, no source).
    atm = standard_atmosphere()
    grid = TableGrid(altitudes_m=(units.ft_to_m(50000.0),), mach_excess=(0.1, 4.5),
                     fpa_rad=(0.0,))
    inputs, tracer = BuildInputs(aircraft, atm, grid), RayTracer(atm)
    assert trace_column(tracer, aircraft, grid.altitudes_m[0], 0.0, 0.0, 0.0,
                           np.asarray(grid.mach_excess), grid.eta, 1.9) is None
    with pytest.raises(FlightConditionError, match="mach"):
        build_column(inputs, tracer, 0, 0, 0)
