"""Freshness of air data: is a frame new data? (sequence numbers, motion, speed).

Helpers of :class:`advisory.pipeline.state.StateValidator`, which owns the rules' order
and counting: :class:`SeqTracker` (repeats, steps back, sender restarts of the header
``seq``), :func:`motion_shortfall` (a position that does not move with the ground speed)
and :func:`speed_text` (the message for a ground speed that Mach and wind cannot
explain). The limits are engineering choices (common practice, no source), listed in the
ICD ``docs/interface.md`` section 4, "Freshness and plausibility".
"""

from __future__ import annotations

import math

from advisory.schema import EARTH_MEAN_RADIUS_M, SEQ_MAX
from advisory.units import DEG, KT

__all__ = ["SeqTracker", "motion_shortfall", "speed_text"]


class SeqTracker:
    """The ``seq`` of the last accepted frame, and the sender-restart rule.

    ICD section 3: ``seq`` is +1 per frame and wraps from 2**32-1 to 0, so a step of
    1 .. 2**31-1 (modulo 2**32) is forward (a gap means lost frames); 0 is a repeat (the
    same data again); anything else is a step back (an old or reordered frame) unless
    ``restart_after`` frames in a row each number on from the one before (1 ..
    ``restart_step`` ahead): then the sender restarted and the last of them is new data.

    Attributes
    ----------
    last : int or None
        ``seq`` of the last accepted frame.
    restarts : int
        Sender restarts taken.
    """

    def __init__(self, restart_after: int, restart_step: int) -> None:
        self.restart_after = restart_after
        self.restart_step = restart_step
        self.last: int | None = None
        self.restarts = 0
        self._cand: int | None = None
        self._run = 0

    def problem(self, seq: int) -> tuple[str, str] | None:
        """Why the frame numbered ``seq`` is not new data, as (reason code, detail), or
        None when it is (forward, or the frame that completes a restart)."""
        last = self.last
        if last is None:
            return None
        d = (seq - last) & SEQ_MAX
        if d == 0:
            return "seq_repeat", f"seq {seq} repeats the last accepted frame's: the same data again"
        if d <= SEQ_MAX >> 1:
            return None
        cand = self._cand
        if cand is not None and 1 <= (seq - cand) & SEQ_MAX <= self.restart_step:
            self._run += 1
        else:
            self._run = 1
        self._cand = seq
        if self._run < self.restart_after:
            return "seq_back", (f"seq {seq} is {SEQ_MAX + 1 - d} behind the last accepted "
                                f"frame's {last}: an old or reordered frame")
        self.restarts += 1
        self._cand = None
        self._run = 0
        return None

    def accept(self, seq: int) -> None:
        """The frame numbered ``seq`` was accepted."""
        self.last = seq
        self._cand = None


def motion_shortfall(anchor: tuple[float, float, float, float], lat: float, lon: float,
                     gs_kt: float, rx: float, fraction: float,
                     noise_m: float) -> tuple[float, float] | None:
    """(distance moved, m; time, s) when the position did not move with the ground speed.

    Since ``anchor`` = (lat, lon, ground speed kt, rx) the position must cover
    ``fraction`` of (smaller ground speed x time) less ``noise_m``; slow or stopped
    aircraft (need below zero) are never refused. Distance on the mean-radius sphere
    (equirectangular: adequate for the short hops checked here).
    """
    dt = rx - anchor[3]
    need = fraction * min(gs_kt, anchor[2]) * KT * dt - noise_m
    if need <= 0.0:
        return None
    dn = (lat - anchor[0]) * DEG * EARTH_MEAN_RADIUS_M
    dlon = (lon - anchor[1] + 180.0) % 360.0 - 180.0
    de = dlon * DEG * EARTH_MEAN_RADIUS_M * math.cos(lat * DEG)
    dist = math.hypot(dn, de)
    return None if dist >= need else (dist, dt)


def speed_text(mach: float, gs_kt: float, tas_mps: float, wind: bool,
               max_wind_mps: float) -> str:
    """The message for a ground speed that Mach (true airspeed ``tas_mps``) and the wind
    (sent, or any up to ``max_wind_mps``) cannot explain.

    The check (inline in ``StateValidator._validate``, the hot path): true airspeed is
    Mach times the speed of sound ``sqrt(gamma R T)``, gamma R = 1.4 x 287.05287 J/(kg K),
    T the static air temperature when given, else the U.S. Standard Atmosphere 1976
    temperature at the pressure altitude (lapse 6.5 K/km to 11 km, 216.65 K to 20 km,
    then +1 K/km to 32 km; NOAA-S/T 76-1562, table 4). The ground speed must be the
    length of true airspeed along the heading plus the wind within ``tas_fraction``
    (``tas_fraction_sat`` with sat_c) of true airspeed plus ``speed_slack_mps``; without
    wind, within that plus ``max_wind_mps`` (``ValidatorLimits``).
    """
    explained = (f"Mach {mach:g} (true airspeed {tas_mps / KT:.0f} kt) "
                 + ("with the wind sent" if wind else
                    f"and any wind up to {max_wind_mps / KT:.0f} kt"))
    return f"air-data field 'gs_kt' = {gs_kt!r} cannot come from {explained} (is it in m/s?)"
