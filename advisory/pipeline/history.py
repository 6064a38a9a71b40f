"""The flown history, and trajectories derived from a predicted one.

Booms emitted over the last minutes may still be on their way down. The advisor keeps
the states it actually stepped on in a :class:`FlownHistory` (a bounded ring buffer, one
entry per emission spacing, closer while the flight-path angle changes, each with the
table rows of its state in the table in force then) and places every boom still in the
air from those states, each with its own emission time, Mach, heading, altitude,
flight-path angle and position (:func:`join_past`): a turn entered 10 s ago or an
acceleration just begun changes only the booms emitted since. The window is the longest
travel time of the states held, not a fixed span. A fresh advisor has no history for the
older part of the window: there, and only there, it flies the present manoeuvre
backwards (:func:`past_trajectory`), kept apart from the flown part by a no-boom
separator. The past is joined to the trajectory ahead (:func:`join_past`).

Resolution trials fly the trajectory ahead again with a turn that rolls out after a
heading change (:func:`turned_trajectory`). Backward flight and trials run the
trajectory kernel (:func:`advisory.pipeline.propagate.propagate_kernel`; its physics
and sources are in :mod:`advisory.pipeline.trajectory`); :func:`kernel_inputs` builds its
inputs from a trajectory's start state. The flown history needs no kernel of its own:
placing and focus are the footprint kernels (:mod:`advisory.pipeline.footprint`) on the
flown points, whose ray-tube differences then come from the states actually flown.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import NamedTuple

import numpy as np

from advisory import units
from advisory.geo.frame import LocalFrame
from advisory.pipeline.propagate import propagate_kernel
from advisory.pipeline.trajectory import Trajectory
from advisory.schema import EARTH_MEAN_RADIUS_M
from advisory.tables.lookup import N_QUANTITIES, NO_BOOM, Q_TIME

__all__ = ["kernel_inputs", "past_trajectory", "turned_trajectory", "FlownHistory",
           "FlownPast", "join_past", "PITCH_SPACING_S", "PITCH_ENTRY_RAD"]

#: Closest spacing of flown entries while the flight-path angle changes, s (the
#: :class:`FlownHistory` notes; an engineering choice, measured there).
PITCH_SPACING_S = 1.0
#: A change of the flight-path angle since the newest entry that takes an entry early,
#: rad (0.5 deg; the :class:`FlownHistory` notes).
PITCH_ENTRY_RAD = math.radians(0.5)


def kernel_inputs(base: Trajectory, t: np.ndarray, bank_rad: float, turn_limit: float
                   ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Inputs of :func:`propagate_kernel` that re-fly ``base``'s start state over ``t``."""
    i0 = int(np.argmin(np.abs(base.t_s)))
    mdot = 0.0
    if base.t_s.size > 1:
        mdot = float((base.mach[-1] - base.mach[0]) / (base.t_s[-1] - base.t_s[0]))
    mach = np.maximum(base.mach[i0] + mdot * t, 0.1)
    a = np.full_like(t, float(base.tas_mps[i0] / base.mach[i0]))
    fpa = float(base.fpa_rad[i0])
    cos_g = math.cos(fpa)
    psi0 = float(base.heading_grid_rad[i0])
    ge = base.ground_speed_mps[i0] * math.sin(base.track_grid_rad[i0])
    gn = base.ground_speed_mps[i0] * math.cos(base.track_grid_rad[i0])
    vh = base.tas_mps[i0] * cos_g
    params = np.array([base.alt_m[i0], math.sin(fpa), cos_g, bank_rad, turn_limit, psi0,
                       ge - vh * math.sin(psi0), gn - vh * math.cos(psi0), base.east_m[i0],
                       base.north_m[i0], base.frame.radius_m, units.G0])
    return np.ascontiguousarray(t, dtype=np.float64), mach, a, params


def _propagate_like(base: Trajectory, t: np.ndarray, bank_rad: float, turn_limit: float
                    ) -> Trajectory:
    """Run the trajectory kernel over times ``t`` from ``base``'s start state."""
    t, mach, a, params = kernel_inputs(base, t, bank_rad, turn_limit)
    fpa = math.asin(float(params[1]))
    out = propagate_kernel(t, mach, a, params)
    return Trajectory(
        t_s=t, alt_m=out[2], mach=mach, tas_mps=out[3], heading_grid_rad=out[4],
        track_grid_rad=out[7], ground_speed_mps=out[8], bank_rad=out[6],
        fpa_rad=np.full_like(t, fpa), turn_rate_rad_s=out[5], east_m=out[0], north_m=out[1],
        frame=base.frame, wind_east_mps=base.wind_east_mps,
        wind_north_mps=base.wind_north_mps, wind_inferred=base.wind_inferred,
    )


def past_trajectory(ahead: Trajectory, back_s: float, step_s: float) -> Trajectory:
    """The recent past, extrapolated back from the present manoeuvre (time-ascending,
    ending just before t = 0): the emission points whose booms may still be in the air.

    Assumes the aircraft flew the present manoeuvre (bank, Mach rate, climb) for the
    last ``back_s`` seconds.
    """
    n = max(int(math.ceil(back_s / step_s - 1e-9)), 0)
    t = -np.arange(n + 1, dtype=np.float64) * step_s
    if n:
        t[-1] = -back_s
    back = _propagate_like(ahead, t, float(ahead.bank_rad[0]), math.nan)
    sel = slice(n, 0, -1)  # reversed, t = 0 dropped

    def rev(a: np.ndarray) -> np.ndarray:
        return np.ascontiguousarray(a[sel])

    return Trajectory(
        t_s=rev(back.t_s), alt_m=rev(back.alt_m), mach=rev(back.mach),
        tas_mps=rev(back.tas_mps), heading_grid_rad=rev(back.heading_grid_rad),
        track_grid_rad=rev(back.track_grid_rad), ground_speed_mps=rev(back.ground_speed_mps),
        bank_rad=rev(back.bank_rad), fpa_rad=rev(back.fpa_rad),
        turn_rate_rad_s=rev(back.turn_rate_rad_s), east_m=rev(back.east_m),
        north_m=rev(back.north_m), frame=ahead.frame, wind_east_mps=ahead.wind_east_mps,
        wind_north_mps=ahead.wind_north_mps, wind_inferred=ahead.wind_inferred,
    )


_TRAJ_ARRAYS = ("t_s", "alt_m", "mach", "tas_mps", "heading_grid_rad", "track_grid_rad",
                "ground_speed_mps", "bank_rad", "fpa_rad", "turn_rate_rad_s", "east_m",
                "north_m")


def turned_trajectory(base: Trajectory, bank_rad: float, heading_change_rad: float
                      ) -> Trajectory:
    """``base`` (starting at t = 0) flown with a turn at ``bank_rad`` that rolls out after
    ``heading_change_rad``: same Mach and climb schedule and wind, a different lateral
    path (a resolution trial). Uses the trajectory kernel directly.
    """
    return _propagate_like(base, base.t_s, bank_rad, heading_change_rad)


class FlownHistory:
    """Ring buffer of the states actually flown, one entry per emission spacing (closer
    while the flight-path angle changes).

    Each entry keeps what placing its booms needs, as the aircraft flew it: time (s, on
    the state's own clock), latitude and longitude (rad), altitude (m), Mach, true
    airspeed (m/s), true heading and track (rad), ground speed (m/s), flight-path angle,
    bank (rad) and turn rate (rad/s), plus the table rows of that state looked up in the
    table in force at the time (``rows``, ``code``, ``cutoff``, and ``table`` the
    advisor's generation number of that table: an index, not a copy of the table). The
    rows are the lookup the step made anyway for its present state, so the past costs no
    table lookups and a later table swap does not re-place booms already emitted.

    Pitch manoeuvres
    ----------------
    A push-over or a pull-up of a few seconds focuses (or spreads) the booms of those
    seconds only, and the ray-tube differences between entries 3 s apart blur it: at a
    level-off from a 3.1 deg climb at 1 deg/s (Mach 2.28, 46,000 ft; campaign --known,
    seed 1, encounter 3) the booms the truth's direct tracing puts on the zone at
    1.49 psf were placed at 1.27 psf (under the zone's 1.39 psf limit: the alert was
    missed), at 1.48 psf with entries 1 s apart and 1.49-1.55 psf 0.5 s apart. So an
    entry is also taken once :data:`PITCH_SPACING_S` has passed when the flight-path
    angle has changed by :data:`PITCH_ENTRY_RAD` or more since the newest entry
    (:meth:`due`); a steady climb, a turn or an acceleration keeps the spacing.

    Bound
    -----
    ``capacity = ceil(window_s / fine) + 2`` entries, ``fine`` the smaller of the
    spacing and :data:`PITCH_SPACING_S` (room for a window that pitches throughout),
    allocated once (grown only when a swapped-in table has longer travel times, never
    past the absolute cap). The advisor sets ``window_s`` to the longest travel time of
    its table plus two spacings, at most ``AdvisorConfig.in_air_s`` (the absolute cap,
    default 900 s, at most 3,600 s). Memory: ``capacity * (BYTES_PER_ENTRY_FIXED +
    n_eta * BYTES_PER_RAY)`` bytes, i.e. 158 + 72 ``n_eta`` per entry; with the default
    31-node tables and the default cap, 902 entries, 2.2 MB; at the 3,600 s hard cap,
    3,602 entries, 8.6 MB.

    Gaps and jumps
    --------------
    A new entry more than ``gap_s`` (two spacings) after the one before, or further from
    it than ``2 * ground speed * dt + 1 km`` (a jump), starts a new run: the two runs are
    never joined into a straight path. Both keep their own emission times; the booms of
    the gap itself are unknown and not invented. :attr:`gaps` counts the breaks. A state
    earlier than the newest entry (a clock step back, another flight) empties the buffer
    (:attr:`resets`).
    """

    #: bytes per entry besides the rays: 18 float64 (time, position, state, travel,
    #: cutoff, frame position and directions), the code (int64), the table (int32) and
    #: two flags.
    BYTES_PER_ENTRY_FIXED = 18 * 8 + 8 + 4 + 2
    #: bytes per entry and azimuth node: one table row.
    BYTES_PER_RAY = N_QUANTITIES * 8
    N_STATE = 9  #: alt, mach, tas, heading, track, ground speed, fpa, bank, turn rate

    def __init__(self, n_eta: int, spacing_s: float, window_s: float) -> None:
        self.n_eta = int(n_eta)
        self.spacing_s = float(spacing_s)
        self.gap_s = 2.0 * self.spacing_s
        self.window_s = float(window_s)
        #: the closest spacing (pitching), s
        self.fine_s = min(self.spacing_s, PITCH_SPACING_S)
        self.capacity = int(math.ceil(self.window_s / self.fine_s - 1e-9)) + 2
        self._alloc(self.capacity)
        self._n = 0  # entries held
        self._head = 0  # index of the next write
        self.appended = 0  #: entries ever appended
        self.gaps = 0  #: breaks (gaps or jumps) between successive entries
        self.resets = 0  #: times the buffer was emptied (clock going back)

    def _alloc(self, cap: int) -> None:
        self.t = np.zeros(cap)
        self.lat = np.zeros(cap)
        self.lon = np.zeros(cap)
        self.st = np.zeros((cap, self.N_STATE))
        self.travel = np.zeros(cap)
        self.cutoff = np.zeros(cap)
        self.proj = np.zeros((cap, 4))  # east, north, heading grid, track grid
        self.rows = np.zeros((cap, self.n_eta, N_QUANTITIES))
        self.code = np.zeros(cap, dtype=np.int64)
        self.table = np.zeros(cap, dtype=np.int32)
        self.brk = np.zeros(cap, dtype=np.bool_)
        self.proj_ok = np.zeros(cap, dtype=np.bool_)
        self._frame: LocalFrame | None = None

    def __len__(self) -> int:
        return self._n

    @property
    def nbytes(self) -> int:
        """Memory held by the buffer's arrays, bytes."""
        return int(sum(a.nbytes for a in (self.t, self.lat, self.lon, self.st, self.travel,
                                          self.cutoff, self.proj, self.rows, self.code,
                                          self.table, self.brk, self.proj_ok)))

    def order(self) -> np.ndarray:
        """Buffer indices of the entries held, oldest first."""
        return (self._head - self._n + np.arange(self._n)) % self.capacity

    @property
    def newest_t(self) -> float:
        """Time of the newest entry, s (NaN when empty)."""
        return float(self.t[(self._head - 1) % self.capacity]) if self._n else math.nan

    @property
    def oldest_t(self) -> float:
        """Time of the oldest entry, s (NaN when empty)."""
        return float(self.t[(self._head - self._n) % self.capacity]) if self._n else math.nan

    def clear(self) -> None:
        """Forget every entry (counted in :attr:`resets` when any was held)."""
        if self._n:
            self.resets += 1
        self._n = 0

    def grow(self, window_s: float) -> None:
        """Make room for a longer window (keeps the entries, in order)."""
        cap = int(math.ceil(window_s / self.fine_s - 1e-9)) + 2
        if cap <= self.capacity:
            return
        idx = self.order()
        old = {k: getattr(self, k)[idx] for k in _ENTRY_ARRAYS}
        frame = self._frame
        self.capacity, self.window_s = cap, float(window_s)
        self._alloc(cap)
        for k, v in old.items():
            getattr(self, k)[:v.shape[0]] = v
        self._frame = frame
        self._head = self._n

    def due(self, t_s: float, fpa_rad: float) -> bool:
        """Whether a state at ``t_s`` with flight-path angle ``fpa_rad`` (rad) is to be
        appended: a spacing has passed since the newest entry, or :data:`PITCH_SPACING_S`
        with the angle changed by :data:`PITCH_ENTRY_RAD` (class notes), or the state is
        earlier than the newest entry (it empties the buffer), or the buffer is empty."""
        if not self._n:
            return True
        dt = t_s - self.newest_t
        if dt < 0.0 or dt >= self.spacing_s - 1e-6:
            return True
        return dt >= self.fine_s - 1e-6 and abs(
            fpa_rad - float(self.st[(self._head - 1) % self.capacity, 6])) >= PITCH_ENTRY_RAD

    def offer(self, t_s: float, lat_rad: float, lon_rad: float, state: Sequence[float],
              table: int, rows: np.ndarray, code: int, cutoff: float) -> bool:
        """Append the state at ``t_s`` when it is :meth:`due`.

        ``state`` holds :attr:`N_STATE` values (alt m, Mach, TAS m/s, true heading and
        track rad, ground speed m/s, fpa, bank rad, turn rate rad/s); ``rows`` (n_eta,
        N_QUANTITIES), ``code`` and ``cutoff`` its lookup in table generation ``table``.
        Returns True when appended.
        """
        brk = False
        if self._n:
            dt = t_s - self.newest_t
            if dt < 0.0:
                self.clear()
            elif not self.due(t_s, float(state[6])):
                return False
            else:
                i = (self._head - 1) % self.capacity
                gs = max(float(self.st[i, 5]), float(state[5]))
                far = _haversine(self.lat[i], self.lon[i], lat_rad, lon_rad) \
                    > 2.0 * gs * dt + 1000.0
                brk = dt > self.gap_s or far
                self.gaps += int(brk)
        i = self._head
        self.t[i], self.lat[i], self.lon[i] = t_s, lat_rad, lon_rad
        self.st[i] = state
        self.rows[i] = rows
        self.code[i], self.cutoff[i], self.table[i] = code, cutoff, table
        ok = code != NO_BOOM and rows.shape[0] > 0
        self.travel[i] = float(np.nanmax(rows[:, Q_TIME])) if ok else -math.inf
        self.brk[i], self.proj_ok[i] = brk, False
        self._head = (i + 1) % self.capacity
        self._n = min(self._n + 1, self.capacity)
        self.appended += 1
        return True

    def _project(self, idx: np.ndarray, frame: LocalFrame) -> None:
        """Frame positions and grid directions of entries ``idx`` (cached per frame)."""
        if frame is not self._frame:
            self.proj_ok[:] = False
            self._frame = frame
        todo = idx[~self.proj_ok[idx]]
        if todo.size == 0:
            return
        pts = frame.locate_geodetic(self.lat[todo], self.lon[todo])
        self.proj[todo, 0] = pts.east_m
        self.proj[todo, 1] = pts.north_m
        self.proj[todo, 2] = pts.azimuth_to_grid(self.st[todo, 3])
        self.proj[todo, 3] = pts.azimuth_to_grid(self.st[todo, 4])
        self.proj_ok[todo] = True

    def window(self, t_now: float, frame: LocalFrame
               ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray] | None:
        """The entries whose booms may still be in the air at ``t_now``, oldest first.

        From the oldest entry before ``t_now`` with a boom not yet landed (emission time
        plus its longest travel time at or after ``t_now``), with one entry before it
        for the ray-tube differences, to the newest entry before ``t_now``.

        Returns
        -------
        (t, values, rows, codes, cutoffs) or None
            ``t`` emission times relative to ``t_now`` (s, negative); ``values`` (K, 14):
            the state (:attr:`N_STATE` columns), then frame east, north (m), heading and
            track grid bearings (rad), then 1.0 where a break precedes the entry; ``rows``
            (K, n_eta, N_QUANTITIES), ``codes``, ``cutoffs``. None when no entry is.
        """
        if not self._n:
            return None
        idx = self.order()
        idx = idx[self.t[idx] < t_now - 1e-6]
        live = np.flatnonzero(self.t[idx] + self.travel[idx] >= t_now)
        if live.size == 0:
            return None
        first = int(live[0])
        if first > 0 and not self.brk[idx[first]]:
            first -= 1
        idx = idx[first:]
        self._project(idx, frame)
        sel: np.ndarray | slice = idx
        if idx[-1] - idx[0] == idx.size - 1:  # not wrapped: views, no gathering
            sel = slice(int(idx[0]), int(idx[-1]) + 1)
        values = np.empty((idx.size, self.N_STATE + 5))
        values[:, :self.N_STATE] = self.st[sel]
        values[:, self.N_STATE:self.N_STATE + 4] = self.proj[sel]
        values[:, -1] = self.brk[sel]
        values[0, -1] = 0.0
        return self.t[sel] - t_now, values, self.rows[sel], self.code[sel], self.cutoff[sel]


_ENTRY_ARRAYS = ("t", "lat", "lon", "st", "travel", "cutoff", "proj", "rows", "code", "table",
                 "brk", "proj_ok")


def _haversine(lat0: float, lon0: float, lat: float, lon: float) -> float:
    """Great-circle distance on the mean Earth radius, m (a jump test, 0.5 % is plenty)."""
    h = (math.sin(0.5 * (lat - lat0)) ** 2
         + math.cos(lat0) * math.cos(lat) * math.sin(0.5 * (lon - lon0)) ** 2)
    return 2.0 * EARTH_MEAN_RADIUS_M * math.asin(min(1.0, math.sqrt(h)))


class FlownPast(NamedTuple):
    """Emission points with their table lookups: the part of the window older than the
    history (flown back), or the whole carpet's points (the past, then the
    trajectory ahead, from :func:`join_past`)."""

    traj: Trajectory
    rows: np.ndarray  #: (K, n_eta, N_QUANTITIES)
    codes: np.ndarray  #: (K,) int64
    cutoffs: np.ndarray  #: (K,)


#: Columns of :meth:`FlownHistory.window`'s ``values`` holding the trajectory arrays
#: after ``t_s``, in the order of :data:`_TRAJ_ARRAYS`.
_WINDOW_COLUMNS = [0, 1, 2, 11, 12, 5, 7, 6, 8, 9, 10]


def join_past(window: tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]
              | None, fallback: FlownPast | None, ahead: FlownPast,
              tail_break: bool = False) -> tuple[FlownPast, int]:
    """The emission points of the whole carpet: ``fallback`` (the part of the window
    older than the history, flown back from the present state; None: the history covers
    the window), the flown entries of :meth:`FlownHistory.window`, then ``ahead`` (the
    trajectory ahead with its lookups), as one trajectory in ``ahead``'s frame; and the
    index of the present emission point (the first of ``ahead``).

    A separator emission with no boom (code ``NO_BOOM``, rows 0: neither the carpet
    strips nor the ray-tube differences join across it) stands between two runs (a gap
    or jump in the history, and between the fallback and the history): a copy of the
    entry after it, halfway in time between its neighbours. The last flown entry joins
    the trajectory ahead directly unless ``tail_break`` (the newest entry is more than a
    gap before the present state): then a copy of it, halfway to now, follows it too.
    Every array is filled once (one gather per source), the values copied unchanged.
    """
    n_f = 0 if fallback is None else fallback.traj.t_s.size
    # the window's entries in carpet order: (first, stop) runs and separator copies
    # (entry, time), each with its position after the fallback
    runs: list[tuple[int, int, int]] = []
    seps: list[tuple[int, int, float]] = []
    n_w = 0
    t_prev = float(fallback.traj.t_s[-1]) if fallback is not None and n_f else math.nan
    if window is not None:
        t = window[0]
        cuts = [0, *np.flatnonzero(window[1][:, 13] > 0.5).tolist(), t.size]
        for a, b in zip(cuts[:-1], cuts[1:]):
            if n_f or n_w:
                seps.append((n_w, a, 0.5 * (t_prev + float(t[a]))))
                n_w += 1
            runs.append((n_w, a, b))
            n_w += b - a
            t_prev = float(t[b - 1])
        if tail_break:
            seps.append((n_w, t.size - 1, 0.5 * t_prev))
            n_w += 1
    if n_f + n_w == 0:
        return ahead, 0
    n = n_f + n_w + ahead.traj.t_s.size
    arrays = np.empty((len(_TRAJ_ARRAYS), n))
    rows = np.empty((n, *ahead.rows.shape[1:]))
    codes = np.empty(n, dtype=np.int64)
    cutoffs = np.empty(n)
    for i, k in enumerate(_TRAJ_ARRAYS):
        if fallback is not None and n_f:
            arrays[i, :n_f] = getattr(fallback.traj, k)
        arrays[i, n_f + n_w:] = getattr(ahead.traj, k)
    if fallback is not None and n_f:
        rows[:n_f], codes[:n_f], cutoffs[:n_f] = fallback.rows, fallback.codes, fallback.cutoffs
    if window is not None:
        t, v, w_rows, w_codes, w_cut = window
        vt = v[:, _WINDOW_COLUMNS].T
        for pos, a, b in runs:
            d = slice(n_f + pos, n_f + pos + b - a)
            arrays[0, d] = t[a:b]
            arrays[1:, d] = vt[:, a:b]
            rows[d], codes[d], cutoffs[d] = w_rows[a:b], w_codes[a:b], w_cut[a:b]
        for pos, a, t_sep in seps:
            arrays[0, n_f + pos] = t_sep
            arrays[1:, n_f + pos] = vt[:, a]
            rows[n_f + pos] = 0.0
            codes[n_f + pos] = NO_BOOM
            cutoffs[n_f + pos] = w_cut[a]
    rest = slice(n_f + n_w, n)
    rows[rest], codes[rest], cutoffs[rest] = ahead.rows, ahead.codes, ahead.cutoffs
    tr = ahead.traj
    traj = Trajectory(**dict(zip(_TRAJ_ARRAYS, arrays)), frame=tr.frame,
                      wind_east_mps=tr.wind_east_mps, wind_north_mps=tr.wind_north_mps,
                      wind_inferred=tr.wind_inferred, pitch=tr.pitch, mach_hold=tr.mach_hold)
    return FlownPast(traj, rows, codes, cutoffs), n_f + n_w
