"""Trajectory ahead: where the aircraft will be over the next minutes, from one state.

The prediction holds the present manoeuvre: a coordinated turn at the current bank,
a constant Mach rate and the flight-path angle (changing at the present pitch rate for a
bounded time when the air data carry a pitch rate or a load factor, then held), in a
wind that is constant over the look-ahead. When the air data carry the targets the crew
has selected, the manoeuvre ends at them: the turn rolls out on the selected heading,
the Mach change stops at the selected Mach and the climb or descent levels off at the
selected altitude (each only when it lies ahead of the manoeuvre under way). It is propagated in a
:class:`~advisory.geo.frame.LocalFrame` plane (about the start point unless another
frame is given), where straight flight is a geodesic on WGS 84, then turned into
latitude and longitude with the direct problem.

Physics
-------
* Coordinated turn: turn rate ``psi_dot = g tan(phi) / V`` with ``V`` the true
  airspeed and ``phi`` the bank angle (positive right wing down, turning right). It
  follows from the point-mass equations of motion with lift balancing weight along the
  flight path (*Flight Dynamics*, Princeton University Press, 2004, ch. 2, point-mass
  dynamics; the same relation is in every flight-mechanics text). In still air the
  ground radius is ``V cos(gamma) / psi_dot``, ``V**2 / (g tan phi)`` in level flight.
  ``g`` is standard gravity, 9.80665 m/s^2 (U.S. Standard Atmosphere 1976).
* Climb: vertical speed ``V sin(gamma)``, ``gamma`` the (air-relative) flight-path
  angle; horizontal airspeed ``V cos(gamma)``.
* Pitch (push-over, pull-up): the flight-path angle changes at the rate
  :func:`advisory.pipeline.pitch.flight_path_rate` gives (from the load factor or the
  pitch rate, sources there) for a bounded time, then holds (:mod:`advisory.pipeline.pitch`).
* Level-off at the selected altitude: :func:`advisory.pipeline.pitch.level_off` (the
  capture's closed form there, with the airspeed at the start); where the speed of sound
  changes with height the capture's start is moved once so that the integrated altitude
  levels at the selected one (to well under a metre).
* Mach: ``M(t) = M0 + Mdot t`` (held at or above :data:`MIN_MACH`, and at the selected
  Mach once reached), ``V = M a(h)``.
* Wind: ground velocity = air velocity + wind. Without a wind, it is inferred from the
  ground track and ground speed when a track is given (``wind = ground velocity - air
  velocity``), otherwise along the heading from ground speed minus horizontal true
  airspeed.

Integration: each step of ``step_s`` moves along the exact circular arc of the step's
mean speed and heading change (the chord ``V dt sinc(dpsi/2)`` at the mid heading),
plus wind times ``dt``, corrected for the frame's map scale; altitude and heading are
trapezoidal integrals. A straight flight reproduces the geodesic to centimetres; a level
360-degree turn closes to about 1e-5 of its length. Turn rates are applied to the grid
heading, so the slight curvature of geodesics in the plane away from the frame origin
is neglected: some 2 m over a full turn of 37 km radius about the start point, and
about 20 m over 300 s of turning flight 300 km from the origin of a given frame.

The stepping is a numba kernel (:func:`advisory.pipeline.propagate.propagate_kernel`,
re-exported here; its numpy twin is in
``tests/twins/trajectory.py``). Latitude, longitude and the true heading and track are
worked out from the plane positions only when first read (one pass of the direct
problem, about 60 us for 151 points), so trial trajectories that stay in the plane cost
about 40 us each (151 points, speed of sound given as a value). Trajectories derived
from a predicted one (the recent past, resolution turns) are in
:mod:`advisory.pipeline.history`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import cached_property

import numpy as np

from advisory.geo.frame import FramePoints, LocalFrame
from advisory.pipeline.climb import SpeedOfSound, altitudes, capture_moved, sound_speed
from advisory.pipeline.pitch import (
    CAPTURE_RATE_RAD_S,
    flight_path_rate,
    fpa_profile,
    level_off,
    pitch_end_s,
)
from advisory.pipeline.propagate import (
    PROPAGATE_PARAMS,
    PROPAGATE_ROWS,
    ground_to_plane,
    propagate_kernel,
)
from advisory.units import G0

__all__ = [
    "subset_trajectory",
    "heading_at_deg",
    "DEFAULT_LOOKAHEAD_S",
    "DEFAULT_STEP_S",
    "MIN_MACH",
    "MAX_BANK_RAD",
    "Trajectory",
    "predict_trajectory",
    "propagate_kernel",
    "ground_to_plane",
    "PROPAGATE_ROWS",
    "PROPAGATE_PARAMS",
]

DEFAULT_LOOKAHEAD_S = 300.0  #: default prediction horizon, s
DEFAULT_STEP_S = 2.0  #: default time step, s
MIN_MACH = 0.1  #: floor for the extrapolated Mach (keeps the turn rate finite)
MAX_BANK_RAD = math.radians(85.0)  #: largest accepted |bank|, rad
MAX_FPA_RAD = math.radians(60.0)  #: largest accepted |flight-path angle|, rad
MAX_STEPS = 100_000  #: largest accepted number of steps



@dataclass(frozen=True, eq=False)
class Trajectory:
    """A predicted trajectory: arrays over the time points ``t_s`` (all the same length).

    Attributes
    ----------
    t_s : ndarray
        Time from the state, s (0 first, the look-ahead last).
    alt_m : ndarray
        Altitude, m (same reference as the state's).
    mach : ndarray
        Mach number.
    tas_mps : ndarray
        True airspeed, m/s.
    heading_grid_rad, track_grid_rad : ndarray
        Heading (air-relative) and ground track as grid bearings in ``frame``
        (clockwise from its north axis), rad, [0, 2 pi); what the footprint needs to
        lay the carpet out in the plane. See ``heading_rad`` and ``track_rad`` for true
        directions.
    ground_speed_mps : ndarray
        Ground speed, m/s.
    bank_rad : ndarray
        Bank angle, rad, positive right wing down (0 after a roll-out).
    fpa_rad : ndarray
        Flight-path angle, rad, positive climbing.
    turn_rate_rad_s : ndarray
        Heading rate, rad/s, positive turning right.
    east_m, north_m : ndarray
        Position in ``frame``, m.
    frame : LocalFrame
        The plane the positions are in (about the start point unless one was given).
    wind_east_mps, wind_north_mps : float
        Wind used (velocity of the air toward east and north at the start point), m/s.
    wind_inferred : bool
        True when the wind was inferred from ground speed (and track) rather than given.
    pitch : tuple of float
        The flight-path angle's change ahead: rate (rad/s), start and end (s), as
        :func:`advisory.pipeline.pitch.fpa_profile` takes them; (0, 0, 0) when held.
    mach_hold : float
        The Mach the predicted Mach change stops at (the selected Mach), NaN when none.

    The geodetic outputs ``lat``, ``lon`` (rad), ``heading_rad`` and ``track_rad``
    (true, rad clockwise from true north, [0, 2 pi)) are properties computed on first
    use.
    """

    t_s: np.ndarray
    alt_m: np.ndarray
    mach: np.ndarray
    tas_mps: np.ndarray
    heading_grid_rad: np.ndarray
    track_grid_rad: np.ndarray
    ground_speed_mps: np.ndarray
    bank_rad: np.ndarray
    fpa_rad: np.ndarray
    turn_rate_rad_s: np.ndarray
    east_m: np.ndarray
    north_m: np.ndarray
    frame: LocalFrame
    wind_east_mps: float
    wind_north_mps: float
    wind_inferred: bool
    pitch: tuple[float, float, float] = (0.0, 0.0, 0.0)
    mach_hold: float = math.nan

    def __len__(self) -> int:
        return int(self.t_s.size)

    @cached_property
    def _points(self) -> FramePoints:
        return self.frame.locate(self.east_m, self.north_m)

    @property
    def lat(self) -> np.ndarray:
        """Geodetic latitude, rad."""
        return self._points.lat_rad

    @property
    def lon(self) -> np.ndarray:
        """Geodetic longitude, rad, in [-pi, pi)."""
        return self._points.lon_rad

    @cached_property
    def heading_rad(self) -> np.ndarray:
        """True heading (air-relative), rad clockwise from true north, [0, 2 pi)."""
        return self._points.grid_to_azimuth(self.heading_grid_rad)

    @cached_property
    def track_rad(self) -> np.ndarray:
        """Ground track, rad clockwise from true north, [0, 2 pi)."""
        return self._points.grid_to_azimuth(self.track_grid_rad)


def _check(name: str, value, lo: float | None = None, hi: float | None = None,
           open_lo: bool = False, open_hi: bool = False) -> float:
    """A finite float within bounds, or ValueError naming the field and the value."""
    tp = type(value)
    if tp is float or tp is int:
        v = float(value)
    elif isinstance(value, (int, float, np.floating, np.integer)) and tp is not bool:
        v = float(value)
    else:
        v = math.nan
    if not math.isfinite(v):
        raise ValueError(f"{name} must be a finite number, got {value!r}")
    if lo is not None and (v < lo or (open_lo and v == lo)):
        raise ValueError(f"{name} must be {'>' if open_lo else '>='} {lo:g}, got {value!r}")
    if hi is not None and (v > hi or (open_hi and v == hi)):
        raise ValueError(f"{name} must be {'<' if open_hi else '<='} {hi:g}, got {value!r}")
    return v


def _grid_bearing(pt: FramePoints, azimuth: float) -> float:
    """Grid bearing of a true azimuth at the single point ``pt`` (scalar path of
    :meth:`advisory.geo.frame.FramePoints.azimuth_to_grid`)."""
    th = azimuth - float(pt.radial_true_rad[0])
    q = float(pt.anisotropy[0])
    return float(pt.radial_grid_rad[0]) + math.atan2(q * math.sin(th), math.cos(th))


def predict_trajectory(
    lat_rad: float,
    lon_rad: float,
    alt_m: float,
    mach: float,
    heading_rad: float,
    ground_speed_mps: float,
    *,
    speed_of_sound: SpeedOfSound,
    track_rad: float | None = None,
    bank_rad: float = 0.0,
    fpa_rad: float = 0.0,
    mach_rate_per_s: float = 0.0,
    wind_east_mps: float | None = None,
    wind_north_mps: float | None = None,
    lookahead_s: float = DEFAULT_LOOKAHEAD_S,
    step_s: float = DEFAULT_STEP_S,
    roll_out_heading_rad: float | None = None,
    frame: LocalFrame | None = None,
    pitch_rate_rad_s: float | None = None,
    load_factor: float | None = None,
    target_alt_m: float | None = None,
    target_heading_rad: float | None = None,
    target_mach: float | None = None,
    capture_rate_rad_s: float = CAPTURE_RATE_RAD_S,
) -> Trajectory:
    """Predict the trajectory ahead from one air-data state.

    Parameters
    ----------
    lat_rad, lon_rad : float
        Present position, rad.
    alt_m : float
        Present altitude, m.
    mach : float
        Present Mach number (> 0).
    heading_rad : float
        True heading, rad clockwise from true north.
    ground_speed_mps : float
        Ground speed, m/s (>= 0); used to infer the wind when none is given.
    speed_of_sound : float or callable
        Speed of sound, m/s: a value, or a function taking a float64 array of altitudes
        (m) and returning the speed of sound there (m/s).
    track_rad : float, optional
        Ground track, rad clockwise from true north; used with the ground speed to infer
        the wind when none is given.
    bank_rad : float
        Bank angle, rad, positive right wing down; |bank| <= 85 deg.
    fpa_rad : float
        Flight-path angle, rad, positive climbing; |fpa| <= 60 deg.
    mach_rate_per_s : float
        Rate of change of Mach number, 1/s, held over the look-ahead.
    wind_east_mps, wind_north_mps : float, optional
        Wind at altitude (velocity of the air toward east and north), m/s; give both or
        neither. When given, ground speed and track are not used.
    lookahead_s : float
        Prediction horizon, s (> 0).
    step_s : float
        Time step, s (> 0); the last step is shortened to end at the look-ahead.
    roll_out_heading_rad : float, optional
        True heading (at the start point's meridian) at which the turn ends: the bank
        goes to 0 once the heading has turned, in the bank's direction, to this value.
        For resolution trials ("turn right to 120 deg").
    frame : LocalFrame, optional
        Plane to propagate and report positions in (e.g. the zones' frame); default a
        frame about the start point. Accuracy is best within a few hundred km of its
        origin.
    pitch_rate_rad_s : float, optional
        Body pitch rate, rad/s, nose up positive (|q| <= 30 deg/s).
    load_factor : float, optional
        Normal load factor, g units (-3 .. 9). With either, the flight-path angle
        changes for a bounded time (module notes, "Pitch").
    target_alt_m : float, optional
        Selected altitude, m (the reference of ``alt_m``): a climb or descent toward it
        levels off there (module notes, "Level-off").
    target_heading_rad : float, optional
        Selected true heading, rad: a turn toward it rolls out there when it lies at most
        half a turn ahead in the bank's direction (``roll_out_heading_rad`` wins).
    target_mach : float, optional
        Selected Mach: a Mach change toward it stops there.
    capture_rate_rad_s : float
        Pitch rate of the level-off at ``target_alt_m``, rad/s (> 0).

    Returns
    -------
    Trajectory

    Raises
    ------
    ValueError
        Naming the field and the value, for a non-finite or out-of-range input.
    """
    lat0 = _check("lat_rad", lat_rad, -0.5 * math.pi, 0.5 * math.pi)
    lon0 = _check("lon_rad", lon_rad)
    h0 = _check("alt_m", alt_m, -1000.0, 100_000.0)
    m0 = _check("mach", mach, 0.0, 10.0, open_lo=True)
    hdg0 = _check("heading_rad", heading_rad)
    gs0 = _check("ground_speed_mps", ground_speed_mps, 0.0, 3000.0)
    bank = _check("bank_rad", bank_rad, -MAX_BANK_RAD, MAX_BANK_RAD)
    fpa = _check("fpa_rad", fpa_rad, -MAX_FPA_RAD, MAX_FPA_RAD)
    mdot = _check("mach_rate_per_s", mach_rate_per_s, -1.0, 1.0)
    horizon = _check("lookahead_s", lookahead_s, 0.0, open_lo=True)
    dt_nom = _check("step_s", step_s, 0.0, open_lo=True)
    trk0 = None if track_rad is None else _check("track_rad", track_rad)
    q = None if pitch_rate_rad_s is None else _check(
        "pitch_rate_rad_s", pitch_rate_rad_s, -math.radians(30.0), math.radians(30.0))
    n_load = None if load_factor is None else _check("load_factor", load_factor, -3.0, 9.0)
    h_sel = None if target_alt_m is None else _check("target_alt_m", target_alt_m,
                                                      -1000.0, 100_000.0)
    m_sel = None if target_mach is None else _check("target_mach", target_mach, 0.0, 10.0,
                                                     open_lo=True)
    hdg_sel = None if target_heading_rad is None else _check("target_heading_rad",
                                                             target_heading_rad)
    cap_rate = _check("capture_rate_rad_s", capture_rate_rad_s, 0.0, 1.0, open_lo=True)
    if (wind_east_mps is None) != (wind_north_mps is None):
        raise ValueError("wind_east_mps and wind_north_mps must be given together, got "
                         f"{wind_east_mps!r} and {wind_north_mps!r}")
    if wind_east_mps is not None:
        we0 = _check("wind_east_mps", wind_east_mps, -300.0, 300.0)
        wn0 = _check("wind_north_mps", wind_north_mps, -300.0, 300.0)
    n_steps = math.ceil(horizon / dt_nom - 1e-9)
    if n_steps > MAX_STEPS:
        raise ValueError(f"lookahead_s / step_s gives {n_steps} steps, more than {MAX_STEPS}")
    if not callable(speed_of_sound):
        _check("speed_of_sound", speed_of_sound, 0.0, open_lo=True)

    # --- time, Mach, speed of sound; altitude by Picard passes when a depends on it ---
    t = np.arange(n_steps + 1, dtype=np.float64) * dt_nom
    t[-1] = horizon
    m = np.maximum(m0 + mdot * t, MIN_MACH)
    mach_hold = math.nan
    if m_sel is not None and (m_sel - m0) * mdot > 0.0:  # the change stops at the target
        m = np.minimum(m, m_sel) if mdot > 0.0 else np.maximum(m, m_sel)
        mach_hold = m_sel
    sin_g = math.sin(fpa)
    cos_g = math.cos(fpa)
    a0 = (float(sound_speed(speed_of_sound, np.array([h0]))[0]) if callable(speed_of_sound)
          else float(speed_of_sound))
    g_rate = flight_path_rate(fpa, bank, m0 * a0, q, n_load)
    g_end = pitch_end_s(fpa, g_rate)
    g_start = 0.0
    capture = None if h_sel is None else level_off(fpa, h0, h_sel, m0 * a0, cap_rate)
    if capture is not None and g_rate * fpa < 0.0:  # a capture flown by hand: ends level
        g_end, capture = abs(fpa / g_rate), None
    elif capture is not None and g_end == 0.0:
        g_rate, g_start, g_end = capture
    else:  # a pitch manoeuvre away from level goes on as before
        capture = None
    pitching = g_end > g_start
    if callable(speed_of_sound):
        alt, a = altitudes(t, m, h0, a0, fpa, (g_rate, g_start, g_end) if pitching else None,
                            speed_of_sound)
        if capture is not None and h_sel is not None and g_end < t[-1]:  # level at h_sel
            v_start = float(np.interp(g_start, t, m * a))
            g_start, g_end = capture_moved(t, alt, h_sel, g_start, g_end, v_start, fpa)
            alt, a = altitudes(t, m, h0, a0, fpa, (g_rate, g_start, g_end), speed_of_sound)
    else:
        a = np.full_like(t, float(speed_of_sound))
    fpa_t = (fpa_profile(t, fpa, g_rate, g_end, g_start) if pitching
             else np.full_like(t, fpa))
    vh0 = m[0] * a[0] * cos_g

    # --- frame, start heading, roll-out ---
    if frame is None:  # at the origin grid bearings are true azimuths
        frame = LocalFrame(lat0, lon0)
        e0 = n0 = 0.0
        start = None
        psi_g0 = hdg0
    else:
        start = frame.locate_geodetic(lat0, lon0)
        e0 = float(start.east_m[0])
        n0 = float(start.north_m[0])
        psi_g0 = _grid_bearing(start, hdg0)
    turn_limit = math.nan
    roll_out = roll_out_heading_rad
    if roll_out is None and hdg_sel is not None and bank != 0.0:
        ahead_rad = ((hdg_sel - hdg0) if bank > 0.0 else (hdg0 - hdg_sel)) % (2.0 * math.pi)
        roll_out = hdg_sel if ahead_rad <= math.pi else None
    if roll_out is not None and bank != 0.0:
        target = _check("roll_out_heading_rad", roll_out)
        if bank > 0.0:
            turn_limit = (target - hdg0) % (2.0 * math.pi)
        else:
            turn_limit = -((hdg0 - target) % (2.0 * math.pi))

    # --- wind (true components at the start; grid components for the plane) ---
    inferred = wind_east_mps is None
    if not inferred:
        we, wn = we0, wn0
    elif trk0 is not None:
        we = gs0 * math.sin(trk0) - vh0 * math.sin(hdg0)
        wn = gs0 * math.cos(trk0) - vh0 * math.cos(hdg0)
    else:
        we = (gs0 - vh0) * math.sin(hdg0)
        wn = (gs0 - vh0) * math.cos(hdg0)
    w_speed = math.hypot(we, wn)
    wg_e = wg_n = 0.0
    if w_speed > 0.0 and start is not None:
        w_dir_g = _grid_bearing(start, math.atan2(we, wn))
        wg_e = w_speed * math.sin(w_dir_g)
        wg_n = w_speed * math.cos(w_dir_g)
    elif w_speed > 0.0:
        wg_e, wg_n = we, wn

    params = np.array([h0, sin_g, cos_g, bank, turn_limit, psi_g0, wg_e, wg_n, float(e0),
                       float(n0), frame.radius_m, G0]
                      + ([g_rate, g_end, g_start] if pitching else []))
    out = propagate_kernel(t, m, a, params)
    return Trajectory(
        t_s=t,
        alt_m=out[2],
        mach=m,
        tas_mps=out[3],
        heading_grid_rad=out[4],
        track_grid_rad=out[7],
        ground_speed_mps=out[8],
        bank_rad=out[6],
        fpa_rad=fpa_t,
        turn_rate_rad_s=out[5],
        east_m=out[0],
        north_m=out[1],
        frame=frame,
        wind_east_mps=float(we),
        wind_north_mps=float(wn),
        wind_inferred=inferred,
        pitch=(g_rate, g_start, g_end) if pitching else (0.0, 0.0, 0.0),
        mach_hold=mach_hold,
    )


def subset_trajectory(traj: Trajectory, idx: np.ndarray) -> Trajectory:
    """The points ``idx`` of a trajectory (same frame and wind)."""
    return Trajectory(**{k: np.ascontiguousarray(getattr(traj, k)[idx]) for k in _TRAJ_KEYS},
                      frame=traj.frame, wind_east_mps=traj.wind_east_mps,
                      wind_north_mps=traj.wind_north_mps, wind_inferred=traj.wind_inferred,
                      pitch=traj.pitch, mach_hold=traj.mach_hold)


_TRAJ_KEYS = ("t_s", "alt_m", "mach", "tas_mps", "heading_grid_rad", "track_grid_rad",
              "ground_speed_mps", "bank_rad", "fpa_rad", "turn_rate_rad_s", "east_m", "north_m")


def heading_at_deg(traj: Trajectory, t_s: float) -> float:
    """True heading (deg) of ``traj`` at ``t_s`` s after its start (the resolutions' turn
    onset: after the reaction time, the present manoeuvre held): the grid heading there,
    unwrapped and interpolated, plus the grid-to-true difference at the start."""
    t = traj.t_s
    k = int(np.searchsorted(t, t_s))
    k = min(max(k, 1), t.size - 1) if t.size > 1 else 0
    offset = float(traj.heading_rad[0] - traj.heading_grid_rad[0])
    h = np.unwrap(traj.heading_grid_rad[: k + 1]) if t.size > 1 else traj.heading_grid_rad
    grid = float(np.interp(t_s, t[: h.size], h))
    return math.degrees(grid + offset) % 360.0
