"""A flown path for the truth tracer: samples, checks, resampling, lift and bank.

Lift and bank come from the path, or from point-mass kinematics when the path gives
only the turn and pitch rates: the normal acceleration is ``V psi' cos(gamma)`` across
the path and ``V gamma' + g cos(gamma)`` in the vertical plane; the lift supplies both,
its tilt is the bank (coordinated flight; common practice, no source).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np

from advisory import units
from advisory.geo.frame import LocalFrame
from advisory.physics.atmosphere import Atmosphere

#: Default emission interval, s (issue 12).
DEFAULT_EMISSION_INTERVAL_S = 0.1
#: Largest Mach and |flight-path angle| the ray tracer accepts (``FlightCondition``).
MACH_MAX = 5.0
FPA_MAX_RAD = math.radians(30.0)


class TruthInputError(ValueError):
    """Bad input to the truth tracer; the message names the field, index and value."""


@dataclass(frozen=True)
class FlownPath:
    """A flown path sampled at the emission interval (SI, local east-north frame).

    Positions are over the ground (air velocity plus wind); the heading and flight-path
    angle are those of the air-relative velocity (the Mach cone's axis). The Mach rate
    needs no field: successive emissions carry it into the ray tube.

    Attributes
    ----------
    time_s : ndarray, shape (E,)
        Emission times, s, strictly increasing.
    east_m, north_m : ndarray
        Position of the aircraft in the local frame, m.
    altitude_m : ndarray
        Geometric altitude above mean sea level, m.
    mach : ndarray
        Mach number relative to the air.
    heading_rad : ndarray
        Direction of the air-relative velocity, rad clockwise from true north.
    fpa_rad : ndarray
        Flight-path angle of the air-relative velocity, rad, positive climbing.
    turn_rate_rps, pitch_rate_rps : ndarray or None
        Rates of heading and flight-path angle, rad/s; None: differences of the samples.
    load_factor : ndarray or None
        Lift over ``W cos(fpa)``; None: from the rates (module notes).
    bank_rad : ndarray or None
        Bank, positive right wing down; None: from the rates (module notes).
    frame : LocalFrame or None
        The frame of ``east_m, north_m`` when the path came from latitude and longitude
        (events then carry latitude and longitude too).
    """

    time_s: np.ndarray
    east_m: np.ndarray
    north_m: np.ndarray
    altitude_m: np.ndarray
    mach: np.ndarray
    heading_rad: np.ndarray
    fpa_rad: np.ndarray
    turn_rate_rps: np.ndarray | None = None
    pitch_rate_rps: np.ndarray | None = None
    load_factor: np.ndarray | None = None
    bank_rad: np.ndarray | None = None
    frame: LocalFrame | None = field(default=None, compare=False)

    _REQUIRED = ("time_s", "east_m", "north_m", "altitude_m", "mach", "heading_rad", "fpa_rad")
    _OPTIONAL = ("turn_rate_rps", "pitch_rate_rps", "load_factor", "bank_rad")

    def __post_init__(self) -> None:
        n = None
        for name in self._REQUIRED + self._OPTIONAL:
            v = getattr(self, name)
            if v is None:
                continue
            a = np.ascontiguousarray(v, dtype=np.float64).reshape(-1)
            n = a.size if n is None else n
            if a.size != n:
                raise TruthInputError(f"{name}: {a.size} samples, time_s has {n}")
            bad = np.nonzero(~np.isfinite(a))[0]
            if bad.size:
                raise TruthInputError(f"{name}[{bad[0]}]: {a[bad[0]]} is not a finite number")
            object.__setattr__(self, name, a)
        if not n:
            raise TruthInputError("time_s: the path has no samples")
        steps = np.diff(self.time_s)
        if np.any(steps <= 0.0):
            i = int(np.nonzero(steps <= 0.0)[0][0]) + 1
            raise TruthInputError(f"time_s[{i}]: {self.time_s[i]} is not after the sample before")
        check_range("mach", self.mach, 0.0, MACH_MAX)
        check_range("fpa_rad", self.fpa_rad, -FPA_MAX_RAD, FPA_MAX_RAD)
        if self.load_factor is not None:
            check_range("load_factor", self.load_factor, 0.0, 9.0)

    @property
    def size(self) -> int:
        """Number of emissions."""
        return int(self.time_s.size)

    @classmethod
    def from_latlon(cls, time_s: np.ndarray, lat_deg: np.ndarray, lon_deg: np.ndarray,
                    origin_deg: tuple[float, float] | None = None, **kwargs: np.ndarray
                    ) -> FlownPath:
        """A path given in WGS 84 latitude and longitude (deg), put in a local frame.

        ``origin_deg`` (lat, lon) is the frame's origin (default: the first sample);
        ``kwargs`` are the other fields of :class:`FlownPath`.
        """
        lat = np.asarray(lat_deg, dtype=np.float64)
        lon = np.asarray(lon_deg, dtype=np.float64)
        o = origin_deg if origin_deg is not None else (float(lat.flat[0]), float(lon.flat[0]))
        frame = LocalFrame.from_deg(o[0], o[1])
        east, north = frame.to_enu(np.radians(lat), np.radians(lon))
        return cls(time_s=time_s, east_m=np.asarray(east), north_m=np.asarray(north),
                   frame=frame, **kwargs)

    def resampled(self, interval_s: float = DEFAULT_EMISSION_INTERVAL_S) -> FlownPath:
        """The path linearly interpolated to emissions every ``interval_s`` (heading unwrapped)."""
        if not (math.isfinite(interval_s) and interval_s > 0.0):
            raise TruthInputError(f"interval_s: {interval_s} must be a positive number")
        t = np.arange(self.time_s[0], self.time_s[-1] + 0.5 * interval_s, interval_s)
        t = t[t <= self.time_s[-1] + 1e-9 * interval_s]

        def at(a: np.ndarray) -> np.ndarray:
            return np.interp(t, self.time_s, a)

        def opt(a: np.ndarray | None) -> np.ndarray | None:
            return None if a is None else at(a)

        heading = np.mod(at(np.unwrap(self.heading_rad)), 2.0 * math.pi)
        return replace(self, time_s=t, east_m=at(self.east_m), north_m=at(self.north_m),
                       altitude_m=at(self.altitude_m), mach=at(self.mach), heading_rad=heading,
                       fpa_rad=at(self.fpa_rad), turn_rate_rps=opt(self.turn_rate_rps),
                       pitch_rate_rps=opt(self.pitch_rate_rps),
                       load_factor=opt(self.load_factor), bank_rad=opt(self.bank_rad))


def mach_from_true_airspeed(atmosphere: Atmosphere, altitude_m: np.ndarray,
                            tas_mps: np.ndarray) -> np.ndarray:
    """Mach number of a true airspeed (m/s) at geometric altitude (m) in ``atmosphere``."""
    c = np.interp(altitude_m, atmosphere.z_m, atmosphere.sound_speed_mps)
    return np.asarray(tas_mps, dtype=np.float64) / c


def check_range(name: str, a: np.ndarray, lo: float, hi: float) -> None:
    """Raise :class:`TruthInputError` naming ``name``, the first bad index and its value."""
    bad = np.nonzero((a < lo) | (a > hi))[0]
    if bad.size:
        i = int(bad[0])
        raise TruthInputError(f"{name}[{i}]: {a[i]:g} is outside [{lo:g}, {hi:g}]")


def _rate(path: FlownPath, values: np.ndarray, given: np.ndarray | None,
          unwrap: bool = False) -> np.ndarray:
    if given is not None:
        return given
    if path.size < 2:
        return np.zeros(path.size)
    return np.gradient(np.unwrap(values) if unwrap else values, path.time_s)


def lift_and_bank(path: FlownPath, atmosphere: Atmosphere) -> tuple[np.ndarray, np.ndarray]:
    """Load factor (lift over ``W cos(fpa)``) and bank (rad) per emission.

    From the path's own values when given, otherwise from point-mass kinematics of a
    coordinated flight (module notes; common practice, no source).
    """
    v = path.mach * np.interp(path.altitude_m, atmosphere.z_m, atmosphere.sound_speed_mps)
    cg = np.cos(path.fpa_rad)
    across = v * _rate(path, path.heading_rad, path.turn_rate_rps, unwrap=True) * cg
    up = v * _rate(path, path.fpa_rad, path.pitch_rate_rps) + units.G0 * cg
    n = path.load_factor if path.load_factor is not None else np.hypot(across, up) / (units.G0 * cg)
    bank = path.bank_rad if path.bank_rad is not None else np.arctan2(across, up)
    return n, bank
