"""Resolutions: the highest Mach whose boom stays off the ground, and the smallest left
and right turns that clear every zone, each tried before it is offered.

Mach: the cutoff Mach at the present state (from the table lookup of the present
emission) less a configured margin, rounded down to 0.01. Turns: a coordinated turn at
the configured bank that rolls out after the heading change, flown from the present
state with the same Mach and climb schedule and wind; the carpet of that trajectory
ahead is laid and searched for conflicts like the advisor's own. Heading changes are
tried on a coarse list (10, 20, 30, 45, 60, 90, 135, 180 deg up to the limit) and then
refined in ``turn_step_deg`` steps between the last failing and the first clearing one.
Booms already emitted cannot be moved: when they alone reach a zone no turn clears.

When the table has no wind the trials share the altitude and Mach schedule, hence the
table rows, and each trial is one compiled call (:func:`trial_clears_kernel`); its
readable twin is the composition :func:`advisory.pipeline.history.turned_trajectory`,
:meth:`advisory.pipeline.footprint.FootprintPredictor.predict` and
:func:`advisory.pipeline.conflicts.find_conflicts`, checked in a parity test. The
search order and lists are project choices (common practice, no source).
"""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np

from advisory.jit import njit
from advisory.pipeline.config import AdvisorConfig
from advisory.pipeline.conflicts import conflict_kernel, find_conflicts
from advisory.pipeline.footprint import (
    CarpetPrediction,
    FootprintPredictor,
    focus_kernel,
    place_kernel,
)
from advisory.pipeline.history import kernel_inputs, turned_trajectory
from advisory.pipeline.trajectory import Trajectory, propagate_kernel
from advisory.pipeline.zones import ProjectedZones, ZoneSet
from advisory.tables import lookup as lk

__all__ = ["max_mach_off_ground", "turn_resolutions", "trial_clears_kernel"]

#: Heading changes tried first, deg (then refined between the last fail and first clear).
COARSE_TURNS_DEG = (10.0, 20.0, 30.0, 45.0, 60.0, 90.0, 135.0, 180.0)


def max_mach_off_ground(cutoff_mach: float, margin_mach: float) -> float:
    """Highest Mach (rounded down to 0.01) whose boom stays off the ground: the cutoff
    Mach less the configured margin."""
    return math.floor(100.0 * (cutoff_mach - margin_mach)) / 100.0


def turn_resolutions(cfg: AdvisorConfig, predictor: FootprintPredictor, reuse_rows: bool,
                     strips: np.ndarray, pz: ProjectedZones, zones: ZoneSet,
                     base: CarpetPrediction, ahead: Trajectory, n_past: int
                     ) -> tuple[float | None, float | None]:
    """Smallest left and right heading changes (deg) that clear every zone.

    Parameters
    ----------
    cfg : AdvisorConfig
        Bank of the turn, largest heading change, refinement step, focus threshold.
    predictor : FootprintPredictor
        Lays the carpet from the live table.
    reuse_rows : bool
        The table has no wind, so the trials may reuse the rows of ``ahead``'s lookup
        and run as one compiled call each.
    strips : ndarray
        int64 azimuth nodes of the carpet strips.
    pz, zones : ProjectedZones, ZoneSet
        The zones, projected in the trajectory's frame.
    base : CarpetPrediction
        The present prediction: the extrapolated past (``n_past`` emissions) then
        ``ahead``.
    ahead : Trajectory
        The trajectory ahead from the present state (t = 0 first).
    n_past : int
        Emissions of the past in ``base``.

    Returns
    -------
    (left, right) : float or None
        Heading changes, deg; None when none up to ``max_turn_deg`` clears, or when the
        booms already emitted alone reach a zone.
    """
    if n_past and find_conflicts(_head(base, n_past + 1), pz, zones, strips,
                                 cfg.focus_threshold, first_only=True):
        return None, None
    bank = math.radians(cfg.turn_bank_deg)
    if reuse_rows:  # the trials share the altitude and Mach schedule, hence the table rows
        rows, codes, _ = (x.copy() for x in predictor.lookup(ahead))
        t, mach, sound, params = kernel_inputs(ahead, ahead.t_s, 0.0, math.nan)
        dp = np.ascontiguousarray(rows[:, :, lk.Q_DP])

        def clears(delta_deg: float, side: int) -> bool:  # one compiled call per trial
            params[3] = side * bank
            params[4] = math.radians(delta_deg) * side
            return bool(trial_clears_kernel(
                t, mach, sound, params, rows, codes, dp, strips, pz.x, pz.y,
                pz.ring_start, pz.part_start, pz.zone_start, pz.zone_bbox, pz.ring_chunk,
                pz.chunk_edges, pz.chunk_bbox, pz.margin_m, pz.limit_pa,
                predictor.focus_cap, cfg.focus_threshold))
    else:
        def clears(delta_deg: float, side: int) -> bool:
            traj = turned_trajectory(ahead, side * bank, math.radians(delta_deg) * side)
            pred = predictor.predict(traj)
            return not find_conflicts(pred, pz, zones, strips, cfg.focus_threshold,
                                      first_only=True)

    coarse = [a for a in COARSE_TURNS_DEG if a <= cfg.max_turn_deg]
    if not coarse or coarse[-1] < cfg.max_turn_deg:
        coarse.append(cfg.max_turn_deg)
    left = _smallest_clearing(clears, -1, coarse, cfg.turn_step_deg)
    right = _smallest_clearing(clears, 1, coarse, cfg.turn_step_deg)
    return left, right


def _smallest_clearing(clears: Callable[[float, int], bool], side: int, coarse: list[float],
                       step: float) -> float | None:
    """The first clearing heading change of the coarse list on one side, refined in
    ``step`` between the last failing one and it (deg); None when none clears."""
    lo, found = 0.0, None
    for a in coarse:
        if clears(a, side):
            found = a
            break
        lo = a
    if found is not None:
        a = lo + step
        while a < found - 1e-9:  # refine between the last fail and first clear
            if clears(a, side):
                found = a
                break
            a += step
    return found


def _head(pred: CarpetPrediction, stop: int) -> CarpetPrediction:
    """The first ``stop`` emissions of a prediction."""
    return CarpetPrediction(
        t_emit_s=pred.t_emit_s[:stop], codes=pred.codes[:stop],
        cutoff_mach=pred.cutoff_mach[:stop], east_m=pred.east_m[:stop],
        north_m=pred.north_m[:stop], arrival_s=pred.arrival_s[:stop],
        overpressure_pa=pred.overpressure_pa[:stop], duration_s=pred.duration_s[:stop],
        focus_factor=pred.focus_factor[:stop], edge_flag=pred.edge_flag[:stop],
    )


@njit(cache=True)
def trial_clears_kernel(t, mach, a, params, rows, codes, dp, strip_nodes, x, y, ring_start,
                        part_start, zone_start, zone_bbox, ring_chunk, chunk_edges, chunk_bbox,
                        margins, limits, focus_cap, focus_threshold):
    """One resolution trial in compiled code: trajectory, carpet, focus, zone contact.

    Same steps as :func:`turned_trajectory`, :meth:`FootprintPredictor.predict` and
    :func:`find_conflicts` (their composition is the readable twin, checked in a parity
    test). Returns True when no zone is reached.
    """
    out = propagate_kernel(t, mach, a, params)
    nk = t.size
    nj = rows.shape[1]
    e = np.empty((nk, nj))
    n = np.empty((nk, nj))
    ta = np.empty((nk, nj))
    de = np.empty((nk, nj))
    dn = np.empty((nk, nj))
    place_kernel(t, out[0], out[1], out[4], rows, codes, e, n, ta, de, dn)
    vg_e = np.empty(nk)
    vg_n = np.empty(nk)
    for k in range(nk):
        vg_e[k] = out[8, k] * math.sin(out[7, k])
        vg_n[k] = out[8, k] * math.cos(out[7, k])
    amp = np.ones((nk, nj))
    focus_kernel(t, e, n, de, dn, vg_e, vg_n, codes, focus_cap, amp)
    on_ground = np.empty(nk, dtype=np.bool_)
    eff = np.empty((nk, nj))
    for k in range(nk):
        on_ground[k] = codes[k] != lk.NO_BOOM
        for j in range(nj):
            eff[k, j] = dp[k, j] * amp[k, j] if on_ground[k] else 0.0
    nz = limits.size
    best_t = np.full(nz, np.inf)
    best_dp = np.zeros(nz)
    best_focus = np.zeros(nz, dtype=np.bool_)
    conflict_kernel(e, n, ta, eff, amp, on_ground, strip_nodes, x, y, ring_start, part_start,
                    zone_start, zone_bbox, ring_chunk, chunk_edges, chunk_bbox, margins, limits,
                    focus_threshold, True, best_t, best_dp, best_focus)
    for z in range(nz):
        if best_t[z] < np.inf:
            return False
    return True
