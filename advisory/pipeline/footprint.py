"""Boom footprint along a predicted trajectory: carpet on the ground, arrivals, focus.

For every emission point of a :class:`~advisory.pipeline.trajectory.Trajectory` the table gives
the ground rays across the carpet (one per normalised azimuth); they are placed in the
trajectory's local frame by the emission point's position and grid heading. The result
holds, per emission point ``k`` and azimuth node ``j``: ground position (m), arrival
time (s after the state), overpressure (Pa), duration (s) and a focus amplification.

Focus
-----
The map from (emission time, azimuth) to the ground folds where the ray tubes of
successive emissions cross (acceleration through cutoff, turns, push-overs). With
``X(t, phi)`` the ground point, the tube area per unit emission time and azimuth is the
Jacobian ``J = dX/dt x dX/dphi``. For steady flight ``dX/dt`` is the translation of the
ray pattern (:func:`steady_translation_kernel`): the ground velocity plus, climbing or
diving, the ray's horizontal run per metre of height at the aircraft times the climb
rate, the tube the table's amplitude was traced with; along the actual trajectory it is
the finite difference of successive footprints. (With the ground velocity alone a
steady 5-deg dive was amplified 1.027 times and a 5-deg climb 0.968 times against the
truth's direct tracing: ``tests/test_dives.py``.) Linear
acoustics scales the amplitude as ``sqrt(J_steady / J_actual)`` (Pierce, *Acoustics*,
1989, ch. 8, ray-tube area); a sign change of ``J`` between successive emissions is a
fold (a caustic on the ground), and so are one-sided differences of opposite signs (the
fold between the emission's two neighbours) and a vanishing tube. The folded sheet (an
inverted map, ``J`` of the other sign: its booms arrive with the other sheet's) has the
ray-theory factor of its own tube area, as the truth's direct tracing has it. (Before,
every inverted tube got the cap: accelerating through cutoff, 13-23 km of the carpet at
5x where ray theory has more than 2x over 0.2-0.3 km; a 45 deg bank turn's inner carpet
beyond the fold at 5x for 0.7-2.3: ``tests/test_focus_strip.py``.) The factor
``sqrt(|J_steady / J_actual|)`` applies both ways away from a fold: above 1 where the
tubes converge (the inside of a turn, a pull-up),
below 1 where they spread (a deceleration, the outside of a turn), as the truth's direct
tracing has it (:func:`advisory.bench.truth.amplification_of`). Of the backward and
forward differences the larger factor counts: where the manoeuvre changes between two
emissions (a deceleration ends) a central difference blends the spreading before with
the steady flight after, and under-states the boom. A trial's first judged emission
(the crew's reaction time) takes its forward factor only: the booms before it are not
judged, and a deceleration begun then spreads the tubes from its first boom on. The
factor is bounded by :data:`advisory.physics.signature.FOCUS_AMPLIFICATION_CAP` above,
which a fold gets (the finite value caustic theory gives in place of ray theory's
infinite one, taken at its commonly quoted upper end), and by :data:`ATTENUATION_FLOOR`
below.

At the carpet's two lateral cutoffs (the edge nodes, ``eta`` = -1 and +1) the ray
grazes the ground: its landing point's derivative in azimuth diverges (1e13-1e14 m per
rad in the edge rows of seed 1's encounter 130, below). The edge node follows the
cutoff azimuth, which moves with the Mach, and there a change of Mach of 0.03 between
emissions moved the landing point by tens to hundreds of kilometres: the finite
differences measure the grazing ray's sensitivity, not the manoeuvre's tube. A
slow-down with a turn (campaign --known, seed 1, encounter 130) read a fold, so the cap,
at the edge node alone and no trial cleared, where the truth keeps the zone at 83 % of
its limit. While the Mach changes by more than :data:`EDGE_MACH_STEP` across an
emission's differences, the edge nodes take the factor of the node inside them (as the
truth's edge band takes its outermost grid ray's, :mod:`advisory.bench.truth`). At a
steady Mach the edge keeps its own: the level-off at the end of a climb folds the tubes
at the edge (seed 1, encounter 245, 1.49 psf in truth on a zone limited to 1.46), and
the inner node alone did not see it (``tests/test_flown_history.py``).

Before, every spreading tube kept the factor 1 and every inverted map the cap: slowing
from Mach 1.89 (campaign --known, seed 1, encounter 15) was never offered although the
truth has it keep a zone under its limit; a deceleration at 0.01 per s from Mach 1.9
was predicted at 1.28 times the truth's overpressure (median; 2.0 at the 95th
percentile), now 1.00 (``tests/test_tube_spreading.py``).

Lift
----
A banked or manoeuvring aircraft's lift is not the table's (steady, wings level): each
ray's overpressure is rescaled to the lift of the moment, from the trajectory's turn and
pitch rates (:func:`lift_and_bank`), through the table's lift map
(:mod:`advisory.tables.lift`). In a 30 deg bank at Mach 1.6, 50,000 ft that moved the
overpressure by -15 % to +41 % across the carpet, to within 0.8 % of direct tracing
(``tests/test_bank_lift.py``).

The lookup, placement and focus kernels have numpy twins (``lookup_rows_kernel_twin``,
``place_kernel_twin``, ``focus_kernel_twin`` in ``tests/twins/footprint.py``) compared in
``tests/test_footprint.py``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from advisory.jit import njit
from advisory.physics.ray_kernels import emission_slowness, vertical_slowness_sq
from advisory.physics.signature import FOCUS_AMPLIFICATION_CAP
from advisory.pipeline.trajectory import Trajectory
from advisory.tables import lookup as lk
from advisory.tables.lift import STEADY_LIFT_TOL, lift_correction_kernel, lift_scale_kernel
from advisory.tables.table import BoomTable
from advisory.units import G0

#: Smallest amplification where the ray tubes spread (project choice, no source): the
#: finite difference over emissions ``step_s`` apart is not trusted to attenuate further.
ATTENUATION_FLOOR = 0.5
#: Change of Mach across an emission's ray-tube differences above which the carpet's edge
#: nodes take their inner neighbours' focus factor (project choice, no source: above the
#: air data's noise between two states, 0.002, well below a 1-s deceleration at the
#: crew's 0.01 per s over the trials' 3-s spacing).
EDGE_MACH_STEP = 0.005


def lift_and_bank(traj: Trajectory) -> tuple[np.ndarray, np.ndarray]:
    """Lift over weight and the lift's tilt from the vertical (rad, positive to the right)
    per point of ``traj``, from point-mass kinematics (the flight path's normal
    acceleration: ``V psi_dot cos(gamma)`` across, ``V gamma_dot + g cos(gamma)`` up;
    coordinated flight, the lift along their sum; *Flight Dynamics*, Princeton University
    Press, 2004, ch. 2). In a level coordinated turn at bank ``mu`` this is
    ``(1 / cos(mu), mu)``; wings level and steady, ``(cos(gamma), 0)`` exactly."""
    v = traj.tas_mps
    cg = np.cos(traj.fpa_rad)
    across = v * traj.turn_rate_rad_s * cg
    if traj.t_s.size > 1:
        gamma_dot = np.gradient(traj.fpa_rad, traj.t_s)
    else:
        gamma_dot = np.zeros_like(traj.fpa_rad)
    up = v * gamma_dot + G0 * cg
    return np.hypot(across, up) / G0, np.arctan2(across, up)


@njit(cache=True)
def _same(a, b):
    """``a`` and ``b`` are the same number (equal, and zeros of the same sign)."""
    return a == b and math.copysign(1.0, a) == math.copysign(1.0, b)


@njit(cache=True)
def lookup_rows_kernel(alt, mach, fpa, heading_true, ax_alt, ax_mex, ax_fpa, ax_hdg, cutoff,
                       cells, rows, codes, cutoffs, band=lk.NEAR_CUTOFF_BAND, stretch=None,
                       inner_left=0, inner_right=0):
    """Table rows for every emission point (``rows``: (K, n_eta, N_QUANTITIES)).

    A point whose altitude, Mach, flight-path angle and heading are those of the point
    before it (steady flight: every point ahead) takes that point's lookup: the same
    code, cutoff and rows (rows left as they are where there is no boom, as the lookup
    leaves them), which is what the lookup would give. ``band``: the lookup's (below the
    cutoff by less than it a boom counts). ``stretch``, ``inner_left``, ``inner_right``:
    the edge ratio at the advisor's confidence and the inner rays of the outer strips
    (:func:`advisory.tables.lookup.stretch_row`), or None (the table's edge).
    """
    for k in range(alt.size):
        if k > 0 and (_same(alt[k], alt[k - 1]) and _same(mach[k], mach[k - 1])
                      and _same(fpa[k], fpa[k - 1])
                      and _same(heading_true[k], heading_true[k - 1])):
            codes[k] = codes[k - 1]
            cutoffs[k] = cutoffs[k - 1]
            if codes[k] != lk.NO_BOOM:
                rows[k, :, :] = rows[k - 1, :, :]
            continue
        code, mcut = lk.lookup_kernel(alt[k], mach[k], fpa[k], heading_true[k], ax_alt, ax_mex,
                                      ax_fpa, ax_hdg, cutoff, cells, rows[k], band)
        codes[k] = code
        cutoffs[k] = mcut
        if stretch is not None and code != lk.NO_BOOM:
            lk.stretch_row(rows[k], mach[k] - mcut, stretch, inner_left, inner_right)


@njit(cache=True)
def place_kernel(t, east, north, heading_grid, rows, codes, out_e, out_n, out_t, out_de,
                 out_dn):
    """Place table rows on the ground in the frame plane.

    ``out_de``/``out_dn`` receive d(east, north)/d(phi), m/rad. Rows of emission points
    without a boom are set to NaN.
    """
    nk = t.size
    nj = rows.shape[1]
    for k in range(nk):
        s = math.sin(heading_grid[k])
        c = math.cos(heading_grid[k])
        for j in range(nj):
            if codes[k] == lk.NO_BOOM:
                out_e[k, j] = np.nan
                out_n[k, j] = np.nan
                out_t[k, j] = np.nan
                out_de[k, j] = np.nan
                out_dn[k, j] = np.nan
                continue
            f = rows[k, j, lk.Q_FWD]
            r = rows[k, j, lk.Q_RIGHT]
            out_e[k, j] = east[k] + f * s + r * c
            out_n[k, j] = north[k] + f * c - r * s
            out_t[k, j] = t[k] + rows[k, j, lk.Q_TIME]
            df = rows[k, j, lk.Q_DFWD_DPHI]
            dr = rows[k, j, lk.Q_DRIGHT_DPHI]
            out_de[k, j] = df * s + dr * c
            out_dn[k, j] = df * c - dr * s


@njit(cache=True)
def steady_translation_kernel(vg_e, vg_n, tas, mach, heading_grid, fpa, rows, codes, out_e,
                              out_n):
    """Translation of the steady ray pattern per unit emission time, m/s, per (k, j).

    The ground velocity (``vg_e``, ``vg_n``, frame axes, m/s) plus the slope of ray
    ``j`` at the aircraft (horizontal run per metre of height) times the climb rate
    ``tas sin(fpa)``: a steady climb emits each boom from higher up along the same rays.
    The slope is ``(c0^2 s + w0 omega0) / (c0^2 q0)`` (horizontal over vertical group
    velocity) with the ray's horizontal slowness ``s`` leaving the Mach cone at the
    table's azimuth (``rows[k, j, Q_PHI]``; :func:`advisory.physics.ray_kernels.
    emission_slowness`), ``c0 = tas / mach``, the wind ``w0`` the ground velocity less
    the air velocity, ``omega0 = 1 - w0 . s`` and ``q0`` the vertical slowness: the
    steady tube of :meth:`advisory.physics.rays.RayTracer.trace`, which the table's
    amplitude holds (Pierce, *Acoustics*, 1989, ch. 8, ray tubes in a moving medium).
    Level flight, and emissions without a boom: the ground velocity."""
    nk, nj = out_e.shape
    for k in range(nk):
        vz = tas[k] * math.sin(fpa[k])
        for j in range(nj):
            out_e[k, j] = vg_e[k]
            out_n[k, j] = vg_n[k]
        if vz == 0.0 or codes[k] == lk.NO_BOOM or not mach[k] > 1.0:
            continue
        c0 = tas[k] / mach[k]
        vh = tas[k] * math.cos(fpa[k])
        w_e = vg_e[k] - vh * math.sin(heading_grid[k])
        w_n = vg_n[k] - vh * math.cos(heading_grid[k])
        for j in range(nj):
            sx, sy, nz, _, _ = emission_slowness(mach[k], heading_grid[k], fpa[k],
                                                 rows[k, j, lk.Q_PHI], c0, w_e, w_n)
            om, qq, _, _ = vertical_slowness_sq(c0, w_e, w_n, sx, sy)
            if nz >= 0.0 or qq <= 0.0:
                continue  # an up-going or grazing ray: no tube to compare
            den = c0 * c0 * math.sqrt(qq)
            out_e[k, j] = vg_e[k] + (c0 * c0 * sx + w_e * om) / den * vz
            out_n[k, j] = vg_n[k] + (c0 * c0 * sy + w_n * om) / den * vz


@njit(cache=True)
def _tube_ratio(t, ground_e, ground_n, ka, kb, j, de, dn, j_std):
    """``J_steady / J_actual`` of azimuth ``j`` from the ground points of emissions ``ka``
    and ``kb`` (``inf`` when the actual area vanishes)."""
    dt = t[kb] - t[ka]
    te = (ground_e[kb, j] - ground_e[ka, j]) / dt
    tn = (ground_n[kb, j] - ground_n[ka, j]) / dt
    j_act = te * dn - tn * de
    return j_std / j_act if j_act != 0.0 else math.inf


@njit(cache=True)
def focus_kernel(t, ground_e, ground_n, dphi_e, dphi_n, trans_e, trans_n, codes, mach, cap,
                 out, first=-1, join=-1):
    """Focus amplification per (k, j); see the module notes. Never NaN.

    ``trans_e``, ``trans_n``: the steady translation per (k, j), m/s
    (:func:`steady_translation_kernel`).

    ``mach``: the Mach per emission. Columns 0 and ``nj - 1`` are the carpet's lateral
    cutoffs (the table's ``eta`` -1 and +1; both callers read the carpet edge to edge);
    where the Mach changes by more than :data:`EDGE_MACH_STEP` across an emission's
    differences they take the factor of the column inside them (module notes).

    ``first``: the first emission judged (a trial's, at the crew's reaction time; -1:
    none). Its backward difference spans booms emitted before it, which are not judged:
    only its forward factor counts (a deceleration begun at the reaction time spreads
    the tubes of the booms emitted from then on; the truth's finely spaced emissions
    have it so).

    ``join``: the first emission of the trajectory ahead after the flown history (-1:
    none). No difference is taken across it (as at a carpet's ends): the newest flown
    entry can be a fraction of the emission spacing before the present state, and the air
    data's noise between two measured states (a few feet, 0.002 Mach, 0.1 deg) over so
    short a gap reads as a manoeuvre that folds the edge rays. Each side keeps its own
    one-sided difference (the flown one, the predicted one)."""
    nk, nj = ground_e.shape
    for k in range(nk):
        for j in range(nj):
            out[k, j] = 1.0
    if nk < 2:
        return
    prev_sign = np.zeros(nj)
    for k in range(nk):
        if codes[k] == lk.NO_BOOM or k == join:
            for j in range(nj):
                prev_sign[j] = 0.0
            if codes[k] == lk.NO_BOOM:
                continue
        k0 = k - 1 if k > 0 and codes[k - 1] != lk.NO_BOOM and k != join else k
        k1 = k + 1 if k < nk - 1 and codes[k + 1] != lk.NO_BOOM and k + 1 != join else k
        if k1 == k0:
            continue
        for j in range(nj):
            de = dphi_e[k, j]
            dn = dphi_n[k, j]
            if not (math.isfinite(de) and math.isfinite(dn)):
                continue
            j_std = trans_e[k, j] * dn - trans_n[k, j] * de
            if j_std == 0.0:
                continue
            ratio = _tube_ratio(t, ground_e, ground_n, k0, k1, j, de, dn, j_std)
            sign = 1.0 if ratio > 0.0 else -1.0
            # a fold: the ray map turns over between emissions (or the tube vanishes)
            fold = (prev_sign[j] != 0.0 and sign != prev_sign[j]) or not math.isfinite(ratio)
            amp = 0.0
            side_sign = 0.0
            for ka, kb in ((k0, k), (k, k1)):
                if fold:
                    break
                if k == first and kb == k and k1 > k:
                    continue  # the first judged emission: forward only
                r = ratio if kb == ka else _tube_ratio(t, ground_e, ground_n, ka, kb,
                                                       j, de, dn, j_std)
                s_r = 1.0 if r > 0.0 else -1.0
                if not math.isfinite(r) or (side_sign != 0.0 and s_r != side_sign):
                    fold = True  # the two one-sided tubes disagree: the fold lies here
                    break
                side_sign = s_r
                # the larger of the two one-sided factors: where the manoeuvre changes
                # between emissions (a deceleration ends) the central difference blends
                # the two and under-states the steady boom after it. An inverted tube
                # (the folded sheet, its boom arriving with the other sheet's) has the
                # ray-theory factor of its area too.
                amp = max(amp, math.sqrt(abs(r)))
            amp = cap if fold else min(max(amp, ATTENUATION_FLOOR), cap)
            prev_sign[j] = sign
            out[k, j] = amp
        if nj >= 3 and abs(mach[k1] - mach[k0]) > EDGE_MACH_STEP:
            # the lateral cutoffs while the Mach changes: the inner neighbours' factors,
            # and no sign to compare the next emission's with (module notes)
            out[k, 0] = out[k, 1]
            out[k, nj - 1] = out[k, nj - 2]
            prev_sign[0] = 0.0
            prev_sign[nj - 1] = 0.0


@dataclass
class CarpetPrediction:
    """Predicted carpet over the look-ahead (arrays over emission ``k`` and azimuth ``j``).

    Attributes
    ----------
    t_emit_s : ndarray (K,)
        Emission times after the state, s.
    codes : ndarray (K,)
        Table lookup code per emission (0 = no boom on the ground).
    cutoff_mach : ndarray (K,)
        Cutoff Mach at each emission point.
    east_m, north_m : ndarray (K, J)
        Ground points in the trajectory's frame, m (NaN where no boom).
    arrival_s : ndarray (K, J)
        Boom arrival after the state, s.
    overpressure_pa, duration_s : ndarray (K, J)
        Steady-flight ground overpressure and N-wave duration.
    focus_factor : ndarray (K, J)
        Focus amplification (1 where none).
    """

    t_emit_s: np.ndarray
    codes: np.ndarray
    cutoff_mach: np.ndarray
    east_m: np.ndarray
    north_m: np.ndarray
    arrival_s: np.ndarray
    overpressure_pa: np.ndarray
    duration_s: np.ndarray
    focus_factor: np.ndarray
    edge_flag: np.ndarray

    @property
    def on_ground(self) -> np.ndarray:
        """(K,) True where the boom of emission ``k`` reaches the ground."""
        return self.codes != lk.NO_BOOM

    @property
    def effective_overpressure_pa(self) -> np.ndarray:
        """Overpressure with focus amplification applied, Pa (0 where no boom)."""
        return np.where(self.on_ground[:, None], self.overpressure_pa * self.focus_factor, 0.0)

    def edges(self) -> tuple[np.ndarray, np.ndarray]:
        """Left and right carpet edges as (K, 2) polylines (east, north), m."""
        left = np.stack([self.east_m[:, 0], self.north_m[:, 0]], axis=1)
        right = np.stack([self.east_m[:, -1], self.north_m[:, -1]], axis=1)
        return left, right


class FootprintPredictor:
    """Computes :class:`CarpetPrediction` from a trajectory and a table (hot path).

    Buffers are reused between calls of the same length.
    """

    def __init__(self, table: BoomTable, focus_cap: float = FOCUS_AMPLIFICATION_CAP) -> None:
        self.table = table
        self.focus_cap = float(focus_cap)
        #: Below the cutoff by less than this a boom counts (the lookups' band): the
        #: near-cutoff band, or z sigma of the cutoff where the advisor reads it at a
        #: confidence (set each step, :mod:`advisory.pipeline.confidence`).
        self.band = lk.NEAR_CUTOFF_BAND
        #: The edge ratio at the advisor's confidence, (3, n) (Mach excess, left, right:
        #: :func:`advisory.tables.lookup.stretch_row`), or None: the table's own edge
        #: (set each step, :mod:`advisory.pipeline.edge_spread`).
        self.stretch: np.ndarray | None = None
        #: The inner rays of the outer strips (the advisor's strip nodes next to the edges).
        self.edge_inner = (0, 0)
        self._n = -1

    def _buffers(self, nk: int) -> None:
        if nk == self._n:
            return
        nj = self.table.eta.size
        self._rows = np.zeros((nk, nj, lk.N_QUANTITIES))
        self._codes = np.zeros(nk, dtype=np.int64)
        self._cut = np.zeros(nk)
        self._ages = np.zeros((nk, nj, 1))
        self._age_codes = np.zeros(nk, dtype=np.int64)
        self._age_cut = np.zeros(nk)
        self._scale = np.zeros(nk)
        self._n = nk

    def _apply_lift(self, traj: Trajectory, heading_true: np.ndarray) -> None:
        """Each ray's overpressure at the lift of the moment (:mod:`advisory.tables.lift`);
        nothing to do in steady, wings-level flight or with a table without a lift map."""
        tb = self.table
        if tb.lift_map is None or tb.ray_age is None or tb.lift_params is None:
            return
        fpa = traj.fpa_rad
        if not traj.turn_rate_rad_s.any() and (fpa.size < 2 or (fpa[1:] == fpa[:-1]).all()):
            return  # wings level, steady flight path: the table's own lift
        lift, bank = lift_and_bank(traj)
        if not (np.any(bank != 0.0) or np.any(np.abs(lift - np.cos(traj.fpa_rad))
                                               > STEADY_LIFT_TOL)):
            return
        lookup_rows_kernel(traj.alt_m, traj.mach, traj.fpa_rad, heading_true, tb.ax_alt,
                           tb.ax_mex, tb.ax_fpa, tb.ax_hdg, tb.cutoff, tb.ray_age,
                           self._ages, self._age_codes, self._age_cut, self.band)
        lift_scale_kernel(traj.alt_m, traj.mach, tb.lift_z, tb.lift_ln_p,
                          float(tb.lift_params[5]), self._scale)
        lift_correction_kernel(self._rows, self._ages, self._codes, lift, bank, traj.fpa_rad,
                               self._scale, tb.lift_map, tb.lift_params)

    def lookup(self, traj: Trajectory) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Table rows, codes and cutoff Mach for every emission point (owned buffers)."""
        nk = traj.t_s.size
        self._buffers(nk)
        heading_true = traj.heading_rad if self.table.has_wind else np.zeros(nk)
        lookup_rows_kernel(traj.alt_m, traj.mach, traj.fpa_rad, heading_true,
                           self.table.ax_alt, self.table.ax_mex, self.table.ax_fpa,
                           self.table.ax_hdg, self.table.cutoff, self.table.cells,
                           self._rows, self._codes, self._cut, self.band, self.stretch,
                           *self.edge_inner)
        self._apply_lift(traj, heading_true)
        return self._rows, self._codes, self._cut

    def predict(self, traj: Trajectory, rows=None, codes=None, cutoffs=None,
                join: int = -1) -> CarpetPrediction:
        """Carpet for ``traj``; pass ``rows``/``codes``/``cutoffs`` to reuse a lookup;
        ``join``: the index of the present state after the flown history (no ray-tube
        difference across it, :func:`focus_kernel`)."""
        if rows is None:
            rows, codes, cutoffs = self.lookup(traj)
            rows, codes, cutoffs = rows.copy(), codes.copy(), cutoffs.copy()
        nk, nj = rows.shape[0], rows.shape[1]
        e = np.empty((nk, nj))
        n = np.empty((nk, nj))
        ta = np.empty((nk, nj))
        de = np.empty((nk, nj))
        dn = np.empty((nk, nj))
        place_kernel(traj.t_s, traj.east_m, traj.north_m, traj.heading_grid_rad, rows, codes,
                     e, n, ta, de, dn)
        amp = np.ones((nk, nj))
        vg_e = traj.ground_speed_mps * np.sin(traj.track_grid_rad)
        vg_n = traj.ground_speed_mps * np.cos(traj.track_grid_rad)
        te = np.empty((nk, nj))
        tn = np.empty((nk, nj))
        steady_translation_kernel(vg_e, vg_n, traj.tas_mps, traj.mach, traj.heading_grid_rad,
                                  traj.fpa_rad, rows, codes, te, tn)
        focus_kernel(traj.t_s, e, n, de, dn, te, tn, codes, traj.mach, self.focus_cap, amp,
                     -1, join)
        return CarpetPrediction(
            t_emit_s=traj.t_s, codes=codes, cutoff_mach=cutoffs, east_m=e, north_m=n,
            arrival_s=ta, overpressure_pa=rows[:, :, lk.Q_DP].copy(),
            duration_s=rows[:, :, lk.Q_DURATION].copy(), focus_factor=amp,
            edge_flag=rows[:, :, lk.Q_EDGE] > 0.5,
        )


def swath_polygon(pred: CarpetPrediction, t0: float, t1: float) -> np.ndarray | None:
    """The carpet swept by emissions in ``[t0, t1]`` as a closed (N, 2) ring, or None."""
    sel = (pred.t_emit_s >= t0) & (pred.t_emit_s <= t1) & pred.on_ground
    if np.count_nonzero(sel) < 2:
        return None
    left, right = pred.edges()
    ring = np.concatenate([left[sel], right[sel][::-1], left[sel][:1]])
    return ring if np.all(np.isfinite(ring)) else None


def strip_indices(n_eta: int, strips: int) -> np.ndarray:
    """Azimuth nodes bounding ``strips`` strips across the carpet (edges included)."""
    return np.unique(np.round(np.linspace(0, n_eta - 1, strips + 1)).astype(np.int64))


