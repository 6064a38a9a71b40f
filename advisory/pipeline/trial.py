"""Trial flights for the resolutions: the crew's action flown ahead, and its boom carpet.

A trial re-flies the trajectory ahead from the present state with a crew action that
begins at ``onset`` seconds (the configured reaction time, or later for the act-by
search):

* before the onset, the present manoeuvre: the present bank (a coordinated turn) and
  Mach rate (up to the selected Mach), as
  :func:`advisory.pipeline.trajectory.predict_trajectory` holds them;
* from the onset, the Mach moves toward ``target_mach`` at ``decel`` per second (NaN
  target: the present Mach rate goes on), and the bank rolls at ``roll_rate`` toward
  ``target_bank`` (NaN: wings level, the Mach-only action), holds it until the heading
  has turned to within the roll-out lead of ``turn_limit`` (half the turn rate times the
  roll-out time, so the turn ends near the asked change), then rolls level.

The flight-path angle follows the prediction's until the onset (held, or the pitch
manoeuvre or level-off at the selected altitude that
:func:`advisory.pipeline.trajectory.predict_trajectory` foresaw:
``fpa0 + rate (min(max(t, start), end) - start)``); from the onset the crew levels the
path at ``level_rate`` (the aircraft's capture rate; 0: the predicted angle goes on), as
the scenarios' crew does when it takes over (``docs/scenarios.md``). The emissions are
looked up at their own angle, so a level-off's push-over carries its focus through the
focus factor as a deceleration's does.

The coordinated turn ``psi_dot = g tan(bank) / V`` and the climb ``V sin(gamma)`` are the
point-mass relations of :mod:`advisory.pipeline.trajectory` (any flight-mechanics
text); the roll-out lead and the constant roll rate are common practice, no source. The
speed of sound is held at its present value (the altitude changes little over a trial).
The integration takes sub-steps of at most :data:`SUBSTEP_S` between the emission times
while the bank or the flight-path angle changes or a roll-out is awaited (one step per
interval otherwise; the angle's mean over a sub-step is its end values' mean)
(trapezoidal heading, position along the step's mid heading plus the wind, corrected for
the frame's map scale as
:func:`advisory.pipeline.propagate.propagate_kernel` does).

:func:`trial_clears_kernel` flies a trial, looks the emissions after the onset up in the
table (a lookup is reused while altitude, Mach and heading stay the same), places them on
the ground, applies the ray-tube focus factor of the trial's own trajectory (so a
deceleration through cutoff carries its focus, :mod:`advisory.pipeline.footprint`) and
searches the zones (:func:`advisory.pipeline.conflicts.conflict_kernel`), on the azimuth
nodes it is given (the resolutions give :func:`trial_nodes`), each stretch between two of
them read where its overpressure, linear between them, exceeds the zone's limit
(``loud_part``: where the carpet meets the zone, not at its louder node; the conflict
module's notes say why).
Both kernels have readable numpy twins in ``tests/twins/trial.py`` with parity tests in
``tests/test_checked_resolutions.py``.
"""

from __future__ import annotations

import math

import numpy as np

from advisory.jit import njit
from advisory.pipeline.conflicts import conflict_kernel
from advisory.pipeline.footprint import focus_kernel, place_kernel, steady_translation_kernel
from advisory.pipeline.propagate import ground_to_plane
from advisory.tables import lookup as lk
from advisory.tables.lift import lift_correction_kernel, lift_scale_kernel

__all__ = ["TRIAL_PARAMS", "TRIAL_ROWS", "SUBSTEP_S", "fly_trial_kernel",
           "trial_clears_kernel", "trial_nodes"]

SUBSTEP_S = 0.5  #: longest integration sub-step of a trial, s

#: Order of the entries of the ``params`` argument of :func:`fly_trial_kernel`.
TRIAL_PARAMS = ("h0", "sin_fpa", "cos_fpa", "bank0", "mach0", "mach_rate0", "a", "psi0",
                "wind_e", "wind_n", "e0", "n0", "radius", "g", "onset", "target_mach",
                "decel", "target_bank", "turn_limit", "roll_rate", "fpa0", "fpa_rate",
                "fpa_start", "fpa_end", "level_rate", "mach_hold")
#: Rows of the array returned by :func:`fly_trial_kernel`.
TRIAL_ROWS = ("east_m", "north_m", "alt_m", "mach", "tas_mps", "heading_grid_rad",
              "bank_rad", "track_grid_rad", "ground_speed_mps", "turn_rate_rad_s", "fpa_rad")

P_ONSET, P_TARGET_MACH, P_DECEL, P_TARGET_BANK, P_TURN_LIMIT, P_ROLL_RATE = range(14, 20)
P_FPA0, P_FPA_RATE, P_FPA_START, P_FPA_END, P_LEVEL_RATE, P_MACH_HOLD = range(20, 26)


@njit(cache=True)
def _toward(value, target, step):
    """``value`` moved toward ``target`` by at most ``step`` (>= 0)."""
    if abs(target - value) <= step:
        return target
    return value + step if target > value else value - step


@njit(cache=True)
def _mach_at(tau, p):
    """Mach at time ``tau`` (s) of the trial ``p`` (see the module notes)."""
    m_free = _mach_free(tau, p)
    onset = p[P_ONSET]
    target = p[P_TARGET_MACH]
    if tau <= onset or math.isnan(target):
        return m_free
    m_on = _mach_free(onset, p)
    return max(_toward(m_on, target, p[P_DECEL] * (tau - onset)), 0.1)


@njit(cache=True)
def _mach_free(tau, p):
    """Mach at ``tau`` (s) without the action: the present rate, stopping at the selected
    Mach when the prediction had one (``mach_hold``, NaN: none)."""
    m = max(p[4] + p[5] * tau, 0.1)
    hold = p[P_MACH_HOLD]
    if math.isnan(hold):
        return m
    return min(m, hold) if p[5] > 0.0 else max(m, hold)


@njit(cache=True)
def _fpa_at(tau, p):
    """Flight-path angle (rad) at time ``tau`` (s) of the trial ``p`` (module notes)."""
    rate, start, end = p[P_FPA_RATE], p[P_FPA_START], p[P_FPA_END]
    ramp = rate != 0.0 and end > start
    onset = p[P_ONSET]
    ref = min(tau, onset) if p[P_LEVEL_RATE] > 0.0 else tau
    g = p[P_FPA0] + rate * (min(max(ref, start), end) - start) if ramp else p[P_FPA0]
    if tau <= onset or p[P_LEVEL_RATE] <= 0.0:
        return g
    return _toward(g, 0.0, p[P_LEVEL_RATE] * (tau - onset))


@njit(cache=True)
def fly_trial_kernel(t, p):
    """Fly a trial (module notes) and sample it at the times ``t``.

    Parameters
    ----------
    t : ndarray
        float64 (N,) times from the present state, s, increasing from 0.
    p : ndarray
        float64 (26,) in the order of :data:`TRIAL_PARAMS`: altitude (m); sine and
        cosine of the present flight-path angle; present bank (rad, positive right); present
        Mach and Mach rate (1/s); speed of sound (m/s); grid heading at t = 0 (rad);
        wind grid components east and north (m/s); start position in the frame (m, m);
        the frame's Gaussian radius (m); gravity (m/s^2); onset of the action (s);
        target Mach (NaN: the present schedule); Mach rate of the change (1/s, > 0);
        target bank (rad, NaN: wings level); signed heading change at which the turn
        rolls out (rad, NaN: none); roll rate (rad/s); the present flight-path angle
        (rad), the rate (rad/s), start and end (s) of the predicted pitch manoeuvre (rate
        0: none); the rate the crew levels the path at from the onset (rad/s, 0: held);
        the Mach the present Mach change stops at (NaN: none).

    Returns
    -------
    ndarray
        float64 (11, N), rows named by :data:`TRIAL_ROWS`.
    """
    n = t.shape[0]
    out = np.empty((11, n))
    a, g, radius = p[6], p[13], p[12]
    gam0 = p[P_FPA0]
    onset, target_bank, limit, roll = p[P_ONSET], p[P_TARGET_BANK], p[P_TURN_LIMIT], p[P_ROLL_RATE]
    wings_level = math.isnan(target_bank)
    has_limit = not math.isnan(limit)
    east, north, alt, psi, bank = p[10], p[11], p[0], p[7], p[3]
    turned = 0.0  # heading turned since the onset, rad
    phase = 0  # 0 before the onset, 1 rolling in / holding, 2 rolling level
    tau = 0.0
    # Mach, turn rate and flight-path angle at ``tau``: a sub-step's end values are the
    # next one's start values (the same expressions of the same numbers), so each is
    # computed once
    m0 = _mach_at(tau, p)
    w0 = g * math.tan(bank) / (m0 * a)
    ga = _fpa_at(tau, p)
    for i in range(n):
        g_i = _fpa_at(t[i], p)
        while tau < t[i] - 1e-12:
            if phase == 0 and tau >= onset - 1e-12:
                phase = 2 if wings_level else 1
            rolling = (phase == 1) or (phase == 2 and bank != 0.0)
            pitching = ga != g_i
            # sub-steps only while the bank or the angle changes or a roll-out is awaited;
            # otherwise the step's arc is exact (constant bank) and the Mach is linear
            h = min(SUBSTEP_S, t[i] - tau) if rolling or pitching else t[i] - tau
            if phase == 0 and tau + h > onset + 1e-12:
                h = onset - tau  # land a sub-step on the onset
            m1 = _mach_at(tau + h, p)
            v0 = m0 * a
            v1 = m1 * a
            b1 = bank
            if phase == 1:
                b1 = _toward(bank, target_bank, roll * h)
            elif phase == 2:
                b1 = _toward(bank, 0.0, roll * h)
            w1 = g * math.tan(b1) / v1
            gb = _fpa_at(tau + h, p)
            if ga == gam0 and gb == gam0:  # held: the given sine and cosine
                sin_g, cos_g = p[1], p[2]
            else:
                sin_g, cos_g = math.sin(0.5 * (ga + gb)), math.cos(0.5 * (ga + gb))
            dpsi = 0.5 * (w0 + w1) * h
            if phase > 0:
                turned += dpsi
            mid = psi + 0.5 * dpsi
            x = 0.5 * dpsi
            sinc = 1.0 - x * x / 6.0 if abs(x) < 1e-4 else math.sin(x) / x
            chord = 0.5 * (v0 + v1) * cos_g * h * sinc
            de = chord * math.sin(mid) + p[8] * h
            dn = chord * math.cos(mid) + p[9] * h
            # ground lengths -> plane lengths (the frame's map scales at mid-step)
            de, dn = ground_to_plane(east + 0.5 * de, north + 0.5 * dn, de, dn, radius)
            east += de
            north += dn
            alt += 0.5 * (v0 + v1) * sin_g * h
            psi += dpsi
            bank = b1
            tau += h
            m0 = m1
            w0 = w1
            ga = gb
            if phase == 1 and has_limit:  # roll out with the lead of the roll-out
                w = abs(w1)
                lead = 0.5 * w * abs(bank) / max(roll, 1e-9)
                if abs(limit) - abs(turned) <= lead:
                    phase = 2
        m = _mach_at(t[i], p)
        v = m * a
        out[0, i] = east
        out[1, i] = north
        out[2, i] = alt
        out[3, i] = m
        out[4, i] = v
        out[5, i] = psi % (2.0 * math.pi)
        out[6, i] = bank
        out[10, i] = g_i
        vh = v * (p[2] if g_i == gam0 else math.cos(g_i))
        ge = vh * math.sin(psi) + p[8]
        gn = vh * math.cos(psi) + p[9]
        out[7, i] = math.atan2(ge, gn) % (2.0 * math.pi)
        out[8, i] = math.hypot(ge, gn)
        out[9, i] = g * math.tan(bank) / v
    return out


@njit(cache=True)
def _trial_lift(fl, k_lo, p, has_wind, hdg_offset, ax_alt, ax_mex, ax_fpa, ax_hdg,
                cutoff, lift, strips, rows, codes, band=lk.NEAR_CUTOFF_BAND):
    """The trial's rows at the lift of its bank (coordinated flight at each emission's
    flight-path angle: lift ``cos(gamma) / cos(bank)`` tilted by the bank;
    :func:`advisory.pipeline.footprint.lift_and_bank`)."""
    ray_age, lift_map, params, lz, lnp = lift
    if lift_map.size == 0:
        return
    nk = rows.shape[0]
    ns = strips.size
    lifts = np.empty(nk)
    banks = np.empty(nk)
    banked = False
    for kk in range(nk):
        k = k_lo + kk
        cg = p[2] if fl[10, k] == p[P_FPA0] else math.cos(fl[10, k])
        across = fl[4, k] * fl[9, k] * cg
        up = p[13] * cg
        lifts[kk] = math.sqrt(across * across + up * up) / p[13]
        banks[kk] = math.atan2(across, up)
        if banks[kk] != 0.0:
            banked = True
    if not banked:
        return
    scratch = np.zeros((ray_age.shape[4], 1))
    ages = np.zeros((nk, ns, 1))
    last_alt = math.nan
    last_mach = math.nan
    last_hdg = math.nan
    last_fpa = math.nan
    for kk in range(nk):
        k = k_lo + kk
        if codes[kk] == lk.NO_BOOM or banks[kk] == 0.0:
            continue
        hdg = (fl[5, k] + hdg_offset) % (2.0 * math.pi) if has_wind else 0.0
        if not (fl[2, k] == last_alt and fl[3, k] == last_mach and hdg == last_hdg
                and fl[10, k] == last_fpa):
            lk.lookup_kernel(fl[2, k], fl[3, k], fl[10, k], hdg, ax_alt, ax_mex, ax_fpa,
                             ax_hdg, cutoff, ray_age, scratch, band)
            last_alt, last_mach, last_hdg, last_fpa = fl[2, k], fl[3, k], hdg, fl[10, k]
        for s in range(ns):
            ages[kk, s, 0] = scratch[strips[s], 0]
    scale = np.empty(nk)
    lift_scale_kernel(fl[2, k_lo:].copy(), fl[3, k_lo:].copy(), lz, lnp, params[5], scale)
    lift_correction_kernel(rows, ages, codes, lifts, banks, fl[10, k_lo:].copy(), scale,
                           lift_map, params)


@njit(cache=True)
def trial_clears_kernel(t, k0, p, hdg_offset, has_wind, ax_alt, ax_mex, ax_fpa, ax_hdg,
                        cutoff, cells, lift, strips, x, y, ring_start, part_start, zone_start,
                        zone_bbox, ring_chunk, chunk_edges, chunk_bbox, margins, limits,
                        focus_cap, focus_threshold, band=lk.NEAR_CUTOFF_BAND, stretch=None,
                        inner_left=-1, inner_right=-1):
    """Whether the trial ``p`` keeps the booms of emissions ``k0`` on off every zone.

    Parameters
    ----------
    t : ndarray
        float64 (N,) emission times from the present state, s (0 first).
    k0 : int
        First emission judged (the earlier ones are not changed by the action).
    p : ndarray
        The trial (:func:`fly_trial_kernel`; each emission is looked up at its own
        flight-path angle).
    hdg_offset : float
        True minus grid heading at the aircraft, rad (for a table with wind).
    has_wind : bool
        The table has a heading axis (wind): look rows up by true heading.
    ax_alt, ax_mex, ax_fpa, ax_hdg, cutoff, cells
        The table (:func:`advisory.tables.lookup.lookup_kernel`).
    lift : tuple
        The table's lift map (:meth:`advisory.tables.table.BoomTable.lift_args`): each
        ray's overpressure at the lift of the trial's bank (:mod:`advisory.tables.lift`).
    strips : ndarray
        int64 azimuth nodes the trial's carpet is kept at (ascending, both edges
        included), each strip between two of them read where it is louder than the limit.
    x, y, ring_start, ... limits
        The projected zones (:func:`advisory.pipeline.conflicts.conflict_kernel`).
    focus_cap, focus_threshold : float
        Largest focus amplification; amplification flagged as a focus.
    band : float
        The lookups' band below the cutoff (as the prediction's,
        :attr:`advisory.pipeline.footprint.FootprintPredictor.band`).
    stretch : ndarray or None
        The edge ratio at the advisor's confidence (as the prediction's,
        :attr:`advisory.pipeline.footprint.FootprintPredictor.stretch`), or None.
    inner_left, inner_right : int
        The inner node of each outer strip of the prediction, which the edge ratio widens
        the edges from (:func:`advisory.tables.lookup.stretch_row`); -1: ``strips[1]`` and
        ``strips[-2]``.

    Returns
    -------
    bool
        True when no judged boom reaches a zone.
    """
    fl = fly_trial_kernel(t, p)
    k_lo = k0 - 1 if k0 > 0 else 0  # one emission before, for the focus differences
    nk = t.size - k_lo
    ns = strips.size
    nj_all = cells.shape[4]
    rows = np.zeros((nk, ns, lk.N_QUANTITIES))
    codes = np.zeros(nk, dtype=np.int64)
    scratch = np.zeros((nj_all, lk.N_QUANTITIES))
    last_alt = math.nan
    last_mach = math.nan
    last_hdg = math.nan
    last_fpa = math.nan
    last_code = 0
    for kk in range(nk):
        k = k_lo + kk
        hdg = (fl[5, k] + hdg_offset) % (2.0 * math.pi) if has_wind else 0.0
        if not (fl[2, k] == last_alt and fl[3, k] == last_mach and hdg == last_hdg
                and fl[10, k] == last_fpa):
            last_code, mcut = lk.lookup_kernel(fl[2, k], fl[3, k], fl[10, k], hdg, ax_alt,
                                               ax_mex, ax_fpa, ax_hdg, cutoff, cells, scratch,
                                               band)
            if stretch is not None and last_code != lk.NO_BOOM:
                lk.stretch_row(scratch, fl[3, k] - mcut, stretch,
                               strips[1] if inner_left < 0 else inner_left,
                               strips[ns - 2] if inner_right < 0 else inner_right)
            last_alt, last_mach, last_hdg, last_fpa = fl[2, k], fl[3, k], hdg, fl[10, k]
        codes[kk] = last_code
        for s in range(ns):
            for q in range(lk.N_QUANTITIES):
                rows[kk, s, q] = scratch[strips[s], q]
    tk = t[k_lo:].copy()
    e = np.empty((nk, ns))
    n = np.empty((nk, ns))
    ta = np.empty((nk, ns))
    de = np.empty((nk, ns))
    dn = np.empty((nk, ns))
    place_kernel(tk, fl[0, k_lo:].copy(), fl[1, k_lo:].copy(), fl[5, k_lo:].copy(), rows,
                 codes, e, n, ta, de, dn)
    vg_e = np.empty(nk)
    vg_n = np.empty(nk)
    tas = np.empty(nk)
    fpas = fl[10, k_lo:].copy()
    for kk in range(nk):
        vg_e[kk] = fl[8, k_lo + kk] * math.sin(fl[7, k_lo + kk])
        vg_n[kk] = fl[8, k_lo + kk] * math.cos(fl[7, k_lo + kk])
        tas[kk] = fl[3, k_lo + kk] * p[6]
    _trial_lift(fl, k_lo, p, has_wind, hdg_offset, ax_alt, ax_mex, ax_fpa, ax_hdg,
                cutoff, lift, strips, rows, codes, band)
    te = np.empty((nk, ns))
    tn = np.empty((nk, ns))
    steady_translation_kernel(vg_e, vg_n, tas, fl[3, k_lo:].copy(), fl[5, k_lo:].copy(), fpas,
                              rows, codes, te, tn)
    amp = np.ones((nk, ns))
    skip = k0 - k_lo  # the emission before k0 is only for the focus
    focus_kernel(tk, e, n, de, dn, te, tn, codes, fl[3, k_lo:].copy(), focus_cap, amp, skip)
    m = nk - skip
    on_ground = np.empty(m, dtype=np.bool_)
    eff = np.empty((m, ns))
    for i in range(m):
        on_ground[i] = codes[i + skip] != lk.NO_BOOM
        for j in range(ns):
            eff[i, j] = rows[i + skip, j, lk.Q_DP] * amp[i + skip, j] if on_ground[i] else 0.0
    nodes = np.arange(ns)
    nz = limits.size
    best_t = np.full(nz, np.inf)
    best_dp = np.zeros(nz)
    best_focus = np.zeros(nz, dtype=np.bool_)
    conflict_kernel(e[skip:].copy(), n[skip:].copy(), ta[skip:].copy(), eff,
                    amp[skip:].copy(), on_ground, nodes, x, y, ring_start, part_start,
                    zone_start, zone_bbox, ring_chunk, chunk_edges, chunk_bbox, margins,
                    limits, focus_threshold, True, True, best_t, best_dp, best_focus,
                    np.zeros(nz, dtype=np.int64))
    for z in range(nz):
        if best_t[z] < np.inf:
            return False
    return True


def trial_nodes(strips: np.ndarray) -> np.ndarray:
    """The azimuth nodes a trial reads its carpet at: every node of the two outer strips
    and the strip nodes between (int64, ascending).

    Between two of them a trial takes the overpressure as linear
    (:mod:`advisory.pipeline.conflicts`). Over the default table's rows (31 nodes, 10
    strips of 3 node intervals) that reading under-reads the nodes it skips by at most
    6.7 % of the row's peak in an outer strip (6.2 % at the 99th percentile: the
    overpressure falls steeply and not linearly toward the carpet's edge) and at most 2.9 %
    in any other (0.8 % at the 99th percentile); the trials hold a zone to 90 % of its
    limit. A trial at these 15 nodes took 1.16 times as long as at the 11 strip nodes
    (at all 31 nodes 1.83 times: one trial on the bench's cruise state, 200 repeats, timed
    in process; not a benchmark figure).
    """
    s = np.asarray(strips, dtype=np.int64)
    if s.size < 3:
        return np.ascontiguousarray(s)
    outer = np.concatenate((np.arange(s[0], s[1] + 1), np.arange(s[-2], s[-1] + 1)))
    return np.unique(np.concatenate((s, outer))).astype(np.int64)
