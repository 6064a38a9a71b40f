"""Point-mass flight simulator for the bench: the schedule of a scenario, the crew's commands.

The aircraft is a point mass flying coordinated manoeuvres (common practice, no source):

* Mach moves toward a target at a set rate (|dM/dt|), bank rolls toward a target at a
  roll rate, the flight-path angle pitches toward a target at a pitch rate;
* the heading of the air-relative velocity turns at ``g tan(bank) / TAS`` (the
  coordinated turn: lift tilted by the bank supplies the centripetal force, its vertical
  part the weight; any textbook of flight mechanics);
* the ground velocity is the air velocity (TAS along the heading, ``TAS cos(fpa)``
  horizontally) plus the wind of the atmosphere at the aircraft, the climb rate
  ``TAS sin(fpa)``;
* positions advance along WGS 84 geodesics (:func:`advisory.geo.geodesy.direct_deg`).

Each step samples the state first and then advances it (explicit Euler), exactly as the
demo flights were first synthesized, so ``replay_logs/make_demo_logs.py`` produces its
committed records bit for bit through this module. For the same reason the state keeps
its angles in degrees (edge units): converting to radians and back would change the last
bits of every sample.

Altitude: the simulator flies geometric height and reports pressure altitude as ``alt_ft``
(the standard altitude of the pressure at the aircraft in its atmosphere,
:mod:`advisory.physics.pressure_altitude`), as an air-data computer does; a start altitude
and a climb's target altitude are pressure altitudes, flown at their geometric height.

:class:`Pilot` flies the schedule segments of ``docs/scenarios.md`` (hold, turn, mach,
climb, pitch) and, once the crew acts, the crew's resolution instead.
:class:`FlightTrack` keeps the true state of every step and turns it into the truth's
:class:`~advisory.bench.truth_path.FlownPath` (turn rate, pitch rate, load factor, bank).

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass, replace

import numpy as np

from advisory import units
from advisory.bench.truth_path import DEFAULT_EMISSION_INTERVAL_S, FlownPath
from advisory.geo.geodesy import direct_deg
from advisory.physics.atmosphere import Atmosphere, AtmosphereSample
from advisory.physics.pressure_altitude import HeightConverter

#: Largest |flight-path angle| the simulator flies, deg (the truth tracer's limit).
FPA_LIMIT_DEG = 30.0
#: Bank limit, deg (a steep but flyable coordinated turn; common practice, no source).
BANK_LIMIT_DEG = 80.0


@dataclass(frozen=True)
class Segment:
    """One manoeuvre of a schedule (edge units; see ``docs/scenarios.md``).

    ``kind`` is ``hold``, ``turn``, ``mach``, ``climb`` or ``pitch``; the other fields
    are those the kind uses (None: not given). ``at_s`` fixes the start time (s of
    flight); otherwise a segment starts when the one before it ends.
    """

    kind: str
    at_s: float | None = None
    duration_s: float | None = None
    target_mach: float | None = None
    mach_rate_per_s: float | None = None
    bank_deg: float | None = None
    roll_rate_deg_s: float = 5.0
    heading_change_deg: float | None = None
    fpa_deg: float | None = None
    pitch_rate_deg_s: float = 1.0
    target_alt_ft: float | None = None


def toward(value: float, target: float, step: float) -> float:
    """``value`` moved toward ``target`` by at most ``step`` (>= 0)."""
    if abs(target - value) <= step:
        return target
    return value + math.copysign(step, target - value)


class FlightState:
    """The true state of the aircraft and the targets it flies toward (mutable).

    Attributes (edge units, see the module notes): ``t_s``, ``lat_deg``, ``lon_deg``,
    ``alt_m`` (geometric, m), ``mach``, ``heading_deg`` (air-relative), ``bank_deg``,
    ``fpa_deg``; ``pitch_load`` (samples carry the body pitch rate and the load
    factor, :meth:`_pitch_and_load`); targets ``mach_target``, ``mach_rate`` (1/s), ``bank_target``,
    ``roll_rate`` (deg/s), ``fpa_target``, ``pitch_rate`` (deg/s); the flight-guidance
    targets the crew has selected, ``selected_alt_ft`` (pressure altitude), ``selected_heading_deg``
    and ``selected_mach`` (None: none selected; the start values at first, then what the
    :class:`Pilot` selects), sent in the samples when ``targets`` is set.
    """

    def __init__(self, atmosphere: Atmosphere, lat_deg: float, lon_deg: float, alt_ft: float,
                 mach: float, heading_deg: float, fpa_deg: float = 0.0, bank_deg: float = 0.0,
                 roll_rate_deg_s: float = 5.0, pitch_load: bool = False,
                 targets: bool = False) -> None:
        self.atmosphere = atmosphere
        self.heights = HeightConverter(atmosphere)
        self.t_s = 0.0
        self.lat_deg, self.lon_deg = float(lat_deg), float(lon_deg)
        self.alt_m = self.height_ft(alt_ft)
        self.mach, self.heading_deg = float(mach), float(heading_deg)
        self.bank_deg, self.fpa_deg = float(bank_deg), float(fpa_deg)
        self.mach_target, self.mach_rate = self.mach, 0.0
        self.bank_target, self.roll_rate = self.bank_deg, float(roll_rate_deg_s)
        self.fpa_target, self.pitch_rate = self.fpa_deg, 1.0
        self.step_index = 0
        #: Whether samples carry ``pitch_rate_dps`` and ``load_factor`` (off: the demo
        #: flights' records stay as they were synthesized).
        self.pitch_load = bool(pitch_load)
        #: Whether samples carry the selected targets (off: as the demo flights were made).
        self.targets = bool(targets)
        self.selected_alt_ft: float | None = float(alt_ft)
        self.selected_heading_deg: float | None = float(heading_deg) % 360.0
        self.selected_mach: float | None = float(mach)
        self._air_at: tuple[float, AtmosphereSample] | None = None

    def height_ft(self, pressure_altitude_ft: float) -> float:
        """Geometric height (m) of a pressure altitude (ft) in the atmosphere flown."""
        return self.heights.height(units.ft_to_m(pressure_altitude_ft))

    def air(self) -> AtmosphereSample:
        """The atmosphere at the aircraft (the last one kept while the altitude holds)."""
        kept = self._air_at
        if kept is None or kept[0] != self.alt_m:
            kept = self._air_at = (self.alt_m, self.atmosphere.at(self.alt_m))
        return kept[1]

    def tas_mps(self) -> float:
        """True airspeed, m/s."""
        return self.mach * self.air().sound_speed_mps

    def turn_rate_deg_s(self) -> float:
        """Heading rate of the coordinated turn ``g tan(bank) / TAS``, deg/s."""
        return math.degrees(units.G0 * math.tan(math.radians(self.bank_deg)) / self.tas_mps())

    def step(self, dt_s: float, t_s: float | None = None) -> dict[str, float]:
        """Sample the state (wire field names plus ``t_s``), then advance it by ``dt_s``.

        ``t_s`` sets the sample time (default: the state's own clock); the clock then
        moves on by ``dt_s``.
        """
        t = self.t_s if t_s is None else t_s
        s = self.air()
        tas = self.mach * s.sound_speed_mps
        tas_h = tas * math.cos(math.radians(self.fpa_deg))
        ve = tas_h * math.sin(math.radians(self.heading_deg)) + s.wind_east_mps
        vn = tas_h * math.cos(math.radians(self.heading_deg)) + s.wind_north_mps
        gs = math.hypot(ve, vn)
        track = math.degrees(math.atan2(ve, vn)) % 360.0
        moving = self.mach != self.mach_target
        wind_speed = math.hypot(s.wind_east_mps, s.wind_north_mps)
        wind_from = math.degrees(math.atan2(-s.wind_east_mps, -s.wind_north_mps)) % 360.0
        sample = {
            "t_s": t,
            "lat_deg": self.lat_deg, "lon_deg": self.lon_deg,
            "alt_ft": units.m_to_ft(self.heights.pressure_altitude(self.alt_m)),
            "mach": self.mach,
            "heading_deg": self.heading_deg % 360.0, "gs_kt": units.mps_to_kt(gs),
            "bank_deg": self.bank_deg, "fpa_deg": self.fpa_deg, "track_deg": track,
            "mach_rate_per_s": (math.copysign(self.mach_rate, self.mach_target - self.mach)
                                if moving else 0.0),
            "sat_c": units.k_to_c(s.temperature_k),
            "wind_from_deg": wind_from if wind_speed > 0.0 else 0.0,
            "wind_kt": units.mps_to_kt(wind_speed),
        }
        if self.pitch_load:
            sample.update(self._pitch_and_load(tas, dt_s))
        if self.targets:  # the ones selected (a cleared one is not sent)
            for key, value in (("selected_alt_ft", self.selected_alt_ft),
                               ("selected_heading_deg", self.selected_heading_deg),
                               ("selected_mach", self.selected_mach)):
                if value is not None:
                    sample[key] = value
        self.heading_deg = (self.heading_deg + math.degrees(
            units.G0 * math.tan(math.radians(self.bank_deg)) / tas) * dt_s) % 360.0
        p = direct_deg(self.lat_deg, self.lon_deg, track, gs * dt_s)
        self.lat_deg, self.lon_deg = float(p.lat_deg), float(p.lon_deg)
        self.alt_m += tas * math.sin(math.radians(self.fpa_deg)) * dt_s
        self.mach = toward(self.mach, self.mach_target, self.mach_rate * dt_s)
        self.bank_deg = toward(self.bank_deg, self.bank_target, self.roll_rate * dt_s)
        self.fpa_deg = toward(self.fpa_deg, self.fpa_target, self.pitch_rate * dt_s)
        self.t_s = t + dt_s
        self.step_index += 1
        return sample

    def _pitch_and_load(self, tas: float, dt_s: float) -> dict[str, float]:
        """Body pitch rate (deg/s) and normal load factor of the step about to be flown.

        The flight-path angle's rate is that of the coming step; the pitch attitude is
        taken to move with the flight-path angle (angle of attack held), so the body
        pitch rate is ``q = gamma_dot cos(phi) + psi_dot cos(gamma) sin(phi)`` (Euler-angle
        kinematics), and the load factor is the lift over the weight of the point mass,
        lift along the body normal (coordinated flight), whose part in the vertical plane
        of the path supplies ``V gamma_dot + g cos(gamma)``:
        ``n = (V gamma_dot + g cos(gamma)) / (g cos(phi))`` (point-mass equations of
        motion; any flight-mechanics text, common practice, no source). It is negative in
        a push-over steeper than ``g cos(gamma) / V`` (-1.2 deg/s at Mach 1.6, 50,000 ft).
        """
        gam = math.radians(self.fpa_deg)
        phi = math.radians(self.bank_deg)
        nxt = toward(self.fpa_deg, self.fpa_target, self.pitch_rate * dt_s)
        gam_dot = math.radians(nxt - self.fpa_deg) / dt_s if dt_s > 0.0 else 0.0
        psi_dot = units.G0 * math.tan(phi) / tas
        q = gam_dot * math.cos(phi) + psi_dot * math.cos(gam) * math.sin(phi)
        n = (tas * gam_dot + units.G0 * math.cos(gam)) / (units.G0 * math.cos(phi))
        return {"pitch_rate_dps": math.degrees(q), "load_factor": n}


def fly_timed(state: FlightState, duration_s: float, rate_hz: float,
              mach_commands: Iterable[tuple[float, float, float]] = (),
              bank_commands: Iterable[tuple[float, float]] = ()) -> list[dict[str, float]]:
    """Samples at ``rate_hz`` over ``duration_s`` (both ends), with timed commands.

    ``mach_commands``: (time s, target Mach, rate 1/s); ``bank_commands``: (time s,
    target bank deg); a command applies at the sample nearest its time (within half a
    step). This is how the demo flights are flown (``replay_logs/make_demo_logs.py``).
    """
    dt_s = 1.0 / rate_hz
    n = int(round(duration_s * rate_hz)) + 1
    mach_commands, bank_commands = list(mach_commands), list(bank_commands)
    samples = []
    for i in range(n):
        t = i * dt_s
        for t0, target, rate in mach_commands:
            if abs(t - t0) < 0.5 * dt_s:
                state.mach_target, state.mach_rate = target, rate
        for t0, bank in bank_commands:
            if abs(t - t0) < 0.5 * dt_s:
                state.bank_target = bank
        samples.append(state.step(dt_s, t))
    return samples


class Pilot:
    """Flies the schedule's segments one after another; the crew can take over.

    Call :meth:`update` before every step. A segment starts when the one before it has
    ended and its ``at_s`` (if any) has come (within half a step); between segments and
    after the last the aircraft holds. A turn with a heading change rolls out early by
    the heading turned during the roll-out (half the turn rate times the roll time; a
    climb to an altitude likewise levels off early), so it ends near the asked heading
    (common practice, no source).

    A timed Mach segment that ends before its target holds the Mach reached.

    :meth:`take_over` replaces the rest of the schedule with the crew's segment: once the
    crew acts on a cue it rolls the wings and the flight path level (ending any scheduled
    turn or climb), flies the resolution and then holds.

    Each segment selects its end on the flight-guidance panel as it starts (the state's
    ``selected_*``): a climb its target altitude, a turn its final heading, a Mach change
    its target Mach; a climb, turn or pitch without an end clears that selection. A crew
    taking over selects the present heading (wings level) and clears the selected
    altitude while climbing or descending (the path is levelled by hand), then the
    resolution's segment selects its own end.
    """

    def __init__(self, schedule: Iterable[Segment]) -> None:
        self.queue = list(schedule)
        self.active: Segment | None = None
        self.t_start = 0.0
        self.turned_deg = 0.0
        self.phase = 0  # 0: manoeuvring, 1: rolling out / levelling off
        self.crew_segment: Segment | None = None

    def take_over(self, segment: Segment, state: FlightState) -> None:
        """Drop the rest of the schedule and fly ``segment`` from now."""
        self.queue = []
        self.crew_segment = segment
        state.bank_target, state.fpa_target = 0.0, 0.0
        state.selected_heading_deg = state.heading_deg % 360.0
        if state.fpa_deg != 0.0:
            state.selected_alt_ft = None
        self._begin(replace(segment, at_s=None), state)

    def update(self, state: FlightState, dt_s: float) -> None:
        """Set the state's targets for the next step (see the class notes)."""
        if self.active is not None and self._done(state, dt_s):
            if self.active.kind == "mach":
                state.mach_target = state.mach  # a timed change ends where it got to
            self.active = None
        if self.active is None and self.queue:
            nxt = self.queue[0]
            if nxt.at_s is None or state.t_s >= nxt.at_s - 0.5 * dt_s:
                self._begin(self.queue.pop(0), state)

    def _begin(self, seg: Segment, state: FlightState) -> None:
        self.active, self.t_start, self.turned_deg, self.phase = seg, state.t_s, 0.0, 0
        if seg.kind == "mach":
            state.mach_target = float(seg.target_mach or state.mach)
            state.mach_rate = float(seg.mach_rate_per_s or 0.0)
            state.selected_mach = state.mach_target
        elif seg.kind == "turn":
            state.bank_target = float(seg.bank_deg or 0.0)
            state.roll_rate = float(seg.roll_rate_deg_s)
            change = seg.heading_change_deg
            state.selected_heading_deg = (None if change is None
                                          else (state.heading_deg + float(change)) % 360.0)
        elif seg.kind == "climb":
            state.fpa_target = float(seg.fpa_deg or 0.0)
            state.pitch_rate = float(seg.pitch_rate_deg_s)
            state.selected_alt_ft = (None if seg.target_alt_ft is None
                                     else float(seg.target_alt_ft))
        elif seg.kind == "pitch":
            state.selected_alt_ft = None
            rate = float(seg.pitch_rate_deg_s)
            end = state.fpa_deg + rate * float(seg.duration_s or 0.0)
            state.fpa_target = max(-FPA_LIMIT_DEG, min(FPA_LIMIT_DEG, end))
            state.pitch_rate = abs(rate)

    def _done(self, state: FlightState, dt_s: float) -> bool:
        """Whether the active segment has ended (and steer its second phase)."""
        seg = self.active
        assert seg is not None
        elapsed = state.t_s - self.t_start
        timed_out = seg.duration_s is not None and elapsed >= seg.duration_s - 0.5 * dt_s
        if seg.kind in ("hold", "pitch"):
            return timed_out
        if seg.kind == "mach":
            return timed_out if seg.duration_s is not None else state.mach == state.mach_target
        if seg.kind == "turn":
            return self._turn_done(seg, state, dt_s, timed_out)
        return self._climb_done(seg, state, timed_out)

    def _turn_done(self, seg: Segment, state: FlightState, dt_s: float,
                   timed_out: bool) -> bool:
        self.turned_deg += state.turn_rate_deg_s() * dt_s
        if self.phase == 0:
            if seg.heading_change_deg is not None:
                rate = abs(state.turn_rate_deg_s())
                lead = 0.5 * rate * abs(state.bank_deg) / max(state.roll_rate, 1e-9)
                left = abs(seg.heading_change_deg) - abs(self.turned_deg)
                roll_out = left <= lead
            else:
                roll_out = timed_out
            if roll_out:
                self.phase, state.bank_target = 1, 0.0
            return False
        return state.bank_deg == 0.0

    def _climb_done(self, seg: Segment, state: FlightState, timed_out: bool) -> bool:
        if self.phase == 0:
            if seg.target_alt_ft is not None:
                tas = state.tas_mps()
                vz = tas * math.sin(math.radians(state.fpa_deg))
                t_level = abs(state.fpa_deg) / max(state.pitch_rate, 1e-9)
                left = state.height_ft(seg.target_alt_ft) - state.alt_m
                level = left * math.copysign(1.0, vz or 1.0) <= 0.5 * abs(vz) * t_level
            else:
                level = timed_out
            if level:
                self.phase, state.fpa_target = 1, 0.0
            return False
        return state.fpa_deg == 0.0


class FlightTrack:
    """The true state at every simulator step, for the truth (not the noisy feed)."""

    FIELDS = ("t", "lat", "lon", "alt_m", "mach", "heading", "fpa", "bank", "turn_rate",
              "tas")

    def __init__(self) -> None:
        self.rows: list[tuple[float, ...]] = []

    def add(self, state: FlightState) -> None:
        """Keep the state before the step (call before :meth:`FlightState.step`)."""
        self.rows.append((state.t_s, state.lat_deg, state.lon_deg, state.alt_m, state.mach,
                          state.heading_deg, state.fpa_deg, state.bank_deg,
                          state.turn_rate_deg_s(), state.tas_mps()))

    def flown_path(self, origin_deg: tuple[float, float],
                   interval_s: float = DEFAULT_EMISSION_INTERVAL_S) -> FlownPath:
        """The path flown, resampled to emissions every ``interval_s``, in the local frame
        about ``origin_deg`` (lat, lon).

        Turn rate ``g tan(bank) / TAS``, pitch rate from the flight-path angle's steps,
        and the load factor of the coordinated manoeuvre: the lift supplies
        ``V psi' cos(fpa)`` across the path and ``V fpa' + g cos(fpa)`` in the vertical
        plane, so ``n = hypot(both) / (g cos(fpa))`` (point-mass kinematics, as
        :func:`advisory.bench.truth_path.lift_and_bank`; common practice, no source).
        """
        a = np.asarray(self.rows, dtype=np.float64)
        col = {k: a[:, i] for i, k in enumerate(self.FIELDS)}
        fpa = np.radians(col["fpa"])
        turn = np.radians(col["turn_rate"])
        pitch = np.gradient(fpa, col["t"]) if a.shape[0] > 1 else np.zeros(a.shape[0])
        cg = np.cos(fpa)
        across = col["tas"] * turn * cg
        up = col["tas"] * pitch + units.G0 * cg
        load = np.hypot(across, up) / (units.G0 * cg)
        path = FlownPath.from_latlon(
            col["t"], col["lat"], col["lon"], origin_deg=origin_deg,
            altitude_m=col["alt_m"], mach=col["mach"], heading_rad=np.radians(col["heading"]),
            fpa_rad=fpa, turn_rate_rps=turn, pitch_rate_rps=pitch, load_factor=load,
            bank_rad=np.radians(col["bank"]))
        return path.resampled(interval_s)
