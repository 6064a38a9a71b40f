"""Footprint kernels: parity with their numpy twins, and focus where the physics says."""

from __future__ import annotations

import math

import numpy as np
import pytest

from advisory import units
from advisory.geo.frame import LocalFrame
from advisory.physics.atmosphere import standard_atmosphere
from advisory.pipeline.footprint import (
    ATTENUATION_FLOOR,
    FootprintPredictor,
    focus_kernel,
    lookup_rows_kernel,
    place_kernel,
    steady_translation_kernel,
)
from advisory.pipeline.trajectory import predict_trajectory
from tests.twins.footprint import (
    focus_kernel_twin,
    lookup_rows_kernel_twin,
    place_kernel_twin,
    steady_translation_twin,
)

C45 = float(standard_atmosphere().at(units.ft_to_m(45000.0)).sound_speed_mps)


def trajectory(bank_deg=0.0, mach=1.6, mach_rate=0.0):
    return predict_trajectory(
        math.radians(30.0), math.radians(-140.0), units.ft_to_m(45000.0), mach,
        math.radians(90.0), mach * C45, speed_of_sound=C45, bank_rad=math.radians(bank_deg),
        mach_rate_per_s=mach_rate, wind_east_mps=0.0, wind_north_mps=0.0,
        frame=LocalFrame(math.radians(30.0), math.radians(-140.0)))


@pytest.mark.parametrize("fpa_deg, bank, wind_e, wind_n", [(0.0, 0.0, 0.0, 0.0),
                                                         (-5.0, 0.0, 0.0, 0.0),
                                                         (8.0, 20.0, 30.0, -15.0),
                                                         (-10.0, -25.0, -20.0, 40.0)])
def test_steady_translation_matches_its_twin(small_table, fpa_deg, bank, wind_e, wind_n):
    # Parity: the kernel (slowness form, the ray module's) and its twin (group-velocity
    # form) give the same translation of the steady ray pattern; level flight keeps the
    # ground velocity itself.
    traj = predict_trajectory(
        math.radians(30.0), math.radians(-140.0), units.ft_to_m(45000.0), 1.6,
        math.radians(70.0), 1.6 * C45, speed_of_sound=C45, bank_rad=math.radians(bank),
        fpa_rad=math.radians(fpa_deg), wind_east_mps=wind_e, wind_north_mps=wind_n,
        lookahead_s=60.0, frame=LocalFrame(math.radians(30.0), math.radians(-140.0)))
    fp = FootprintPredictor(small_table)
    rows, codes, _ = (x.copy() for x in fp.lookup(traj))
    nk, nj = rows.shape[:2]
    vg_e = traj.ground_speed_mps * np.sin(traj.track_grid_rad)
    vg_n = traj.ground_speed_mps * np.cos(traj.track_grid_rad)
    te, tn = np.empty((nk, nj)), np.empty((nk, nj))
    steady_translation_kernel(vg_e, vg_n, traj.tas_mps, traj.mach, traj.heading_grid_rad,
                              traj.fpa_rad, rows, codes, te, tn)
    twin_e, twin_n = steady_translation_twin(vg_e, vg_n, traj.tas_mps, traj.mach,
                                             traj.heading_grid_rad, traj.fpa_rad, rows, codes)
    np.testing.assert_allclose(te, twin_e, rtol=1e-9, atol=1e-9)
    np.testing.assert_allclose(tn, twin_n, rtol=1e-9, atol=1e-9)
    if fpa_deg == 0.0:
        assert np.array_equal(te, np.repeat(vg_e[:, None], nj, axis=1))


@pytest.mark.parametrize("bank, mach, rate", [(0.0, 1.6, 0.0), (30.0, 1.6, 0.0),
                                              (-20.0, 1.2, 0.002), (10.0, 1.3, -0.003)])
def test_place_and_focus_match_their_twins(small_table, bank, mach, rate) -> None:
    # Parity: numba kernels and numpy twins implement the same placement and focus.
    traj = trajectory(bank, mach, rate)
    fp = FootprintPredictor(small_table)
    rows, codes, _ = (x.copy() for x in fp.lookup(traj))
    nk, nj = rows.shape[:2]
    bufs = [np.empty((nk, nj)) for _ in range(5)]
    place_kernel(traj.t_s, traj.east_m, traj.north_m, traj.heading_grid_rad, rows, codes, *bufs)
    twins = place_kernel_twin(traj.t_s, traj.east_m, traj.north_m, traj.heading_grid_rad, rows,
                              codes)
    for a, b in zip(bufs, twins, strict=True):
        np.testing.assert_allclose(a, b, rtol=1e-12, atol=1e-9, equal_nan=True)
    e, n, _, de, dn = bufs
    vg_e = traj.ground_speed_mps * np.sin(traj.track_grid_rad)
    vg_n = traj.ground_speed_mps * np.cos(traj.track_grid_rad)
    te, tn = np.empty((nk, nj)), np.empty((nk, nj))
    steady_translation_kernel(vg_e, vg_n, traj.tas_mps, traj.mach, traj.heading_grid_rad,
                              traj.fpa_rad, rows, codes, te, tn)
    amp = np.ones((nk, nj))
    focus_kernel(traj.t_s, e, n, de, dn, te, tn, codes, traj.mach, 5.0, amp)
    twin = focus_kernel_twin(traj.t_s, e, n, de, dn, te, tn, codes, traj.mach, 5.0)
    np.testing.assert_allclose(amp, twin, rtol=1e-12)
    assert np.all(np.isfinite(amp)) and np.all((amp >= ATTENUATION_FLOOR) & (amp <= 5.0))
    first = nk // 3  # a trial's first judged emission: its forward factor only
    focus_kernel(traj.t_s, e, n, de, dn, te, tn, codes, traj.mach, 5.0, amp, first)
    twin = focus_kernel_twin(traj.t_s, e, n, de, dn, te, tn, codes, traj.mach, 5.0, first)
    np.testing.assert_allclose(amp, twin, rtol=1e-12)
    join = nk // 2  # the history/ahead join: no difference across it
    focus_kernel(traj.t_s, e, n, de, dn, te, tn, codes, traj.mach, 5.0, amp, -1, join)
    twin = focus_kernel_twin(traj.t_s, e, n, de, dn, te, tn, codes, traj.mach, 5.0, -1, join)
    np.testing.assert_allclose(amp, twin, rtol=1e-12)


@pytest.mark.parametrize("bank, mach, rate", [(0.0, 1.6, 0.0), (30.0, 1.6, 0.0),
                                              (0.0, 1.2, 0.002), (0.0, 1.05, 0.0)])
def test_lookup_rows_match_their_twin(small_table, bank, mach, rate) -> None:
    # Parity: the row lookup (which reuses the lookup of a point equal to the one before:
    # steady flight) equals the twin looking every point up on its own; the steady cases
    # repeat points, the accelerating one does not, Mach 1.05 lies below cutoff (no boom:
    # rows left as they were, so both start from the same filled buffer).
    tb = small_table
    traj = trajectory(bank, mach, rate)
    nk, nj, nq = traj.t_s.size, tb.eta.size, tb.cells.shape[5]
    hdg = np.zeros(nk)
    fast = (np.full((nk, nj, nq), 7.0), np.zeros(nk, dtype=np.int64), np.zeros(nk))
    slow = (np.full((nk, nj, nq), 7.0), np.zeros(nk, dtype=np.int64), np.zeros(nk))
    axes = (tb.ax_alt, tb.ax_mex, tb.ax_fpa, tb.ax_hdg, tb.cutoff, tb.cells)
    lookup_rows_kernel(traj.alt_m, traj.mach, traj.fpa_rad, hdg, *axes, *fast)
    lookup_rows_kernel_twin(traj.alt_m, traj.mach, traj.fpa_rad, hdg, *axes, *slow)
    np.testing.assert_array_equal(fast[1], slow[1])
    np.testing.assert_allclose(fast[2], slow[2], rtol=1e-12)
    np.testing.assert_allclose(fast[0], slow[0], rtol=1e-12, atol=1e-9)


def test_focus_where_the_physics_puts_it(small_table) -> None:
    # Ray-tube area (Pierce, Acoustics 1989, ch. 8): steady straight flight has no focus;
    # a turn compresses the tubes on the inside of the turn (right bank: the right side
    # of the carpet) and stretches them outside.
    fp = FootprintPredictor(small_table)
    straight = fp.predict(trajectory(0.0))
    # (the local frame's map scale leaves a few 1e-5 far from its origin)
    assert np.allclose(straight.focus_factor[straight.on_ground], 1.0, atol=1e-3)
    turn = fp.predict(trajectory(30.0))
    nj = turn.focus_factor.shape[1]
    inside = turn.focus_factor[turn.on_ground][:, nj // 2 + 1:]
    outside = turn.focus_factor[turn.on_ground][:, : nj // 2]
    assert inside.max() > 1.25 > outside.max()
