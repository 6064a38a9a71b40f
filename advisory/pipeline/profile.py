"""An atmosphere profile assembled from the air-data stream, for table rebuilds.

The aircraft measures static air temperature and wind at its own level; as it climbs
and descends those samples fill altitude bins. When they disagree with the atmosphere
the live table was built from, the advisor hands the profile to the table manager
(anything with ``submit_atmosphere``), which rebuilds the table off the hot path.

Off by default (``run --learn-atmosphere`` turns it on): whoever can send air data could
otherwise choose the atmosphere the tables are built for. When on, a profile is proposed
only when it is plausible (:func:`implausible`): every level within
:data:`MAX_ISA_DEVIATION_K` of the standard atmosphere, winds under
:data:`MAX_WIND_MPS`, and no temperature gradient between levels steeper than the
autoconvective lapse rate :data:`MAX_GRADIENT_K_PER_M`.
"""

from __future__ import annotations

import math

from advisory.physics.atmosphere import (
    Atmosphere,
    AtmosphereError,
    ProfileLevel,
    standard_atmosphere,
)
from advisory.physics.atmosphere_merge import merge_levels

__all__ = ["MAX_GRADIENT_K_PER_M", "MAX_ISA_DEVIATION_K", "MAX_WIND_MPS", "StreamProfile",
           "implausible"]

#: Largest departure of a learned level's temperature from the standard atmosphere, K.
#: Engineering choice: a little beyond the 1 % hot- and cold-day extremes aloft of the
#: military climatic-extremes handbook (MIL-HDBK-310), about +-30 K (value from memory).
MAX_ISA_DEVIATION_K = 35.0
#: Fastest learned wind, m/s. Engineering choice: above the strongest jet-stream winds
#: observed, about 110 m/s (value from memory).
MAX_WIND_MPS = 120.0
#: Steepest temperature gradient between learned levels, K/m, either sign: the
#: autoconvective lapse rate g0 / R = 9.80665 / 287.053 (U.S. Standard Atmosphere 1976
#: constants), beyond which a layer overturns; applied to inversions as well
#: (engineering choice).
MAX_GRADIENT_K_PER_M = 9.80665 / 287.053


def implausible(levels: list[ProfileLevel]) -> str:
    """Why a learned profile is not plausible, or ``""`` when it is (limits above)."""
    std = standard_atmosphere()
    for lv in levels:
        dev = lv.temperature_k - std.at(lv.altitude_m).temperature_k
        if not math.isfinite(dev) or abs(dev) > MAX_ISA_DEVIATION_K:
            return (f"temperature {lv.temperature_k:.1f} K at {lv.altitude_m:.0f} m is "
                    f"{dev:+.1f} K from the standard atmosphere")
        wind = math.hypot(lv.wind_east_mps, lv.wind_north_mps)
        if not math.isfinite(wind) or wind > MAX_WIND_MPS:
            return f"wind {wind:.1f} m/s at {lv.altitude_m:.0f} m"
    for a, b in zip(levels, levels[1:]):
        grad = (b.temperature_k - a.temperature_k) / (b.altitude_m - a.altitude_m)
        if abs(grad) > MAX_GRADIENT_K_PER_M:
            return (f"temperature gradient {grad * 1000:.1f} K/km between "
                    f"{a.altitude_m:.0f} m and {b.altitude_m:.0f} m")
    return ""


class StreamProfile:
    """An atmosphere profile assembled from the air-data stream (SAT and wind at altitude).

    Valid states that carry static air temperature (and wind) are averaged into altitude
    bins. When enough bins are filled and they differ from the atmosphere the live table
    was built from by more than the thresholds, :meth:`proposal` returns a new
    :class:`Atmosphere`: the bins as levels where they were measured, the planning
    atmosphere ``base`` below and above them, merged smoothly
    (:func:`advisory.physics.atmosphere_merge.merge_levels`): the air below the aircraft is
    never taken from what was measured at its level.

    Parameters
    ----------
    bin_m : float
        Bin height, m (default 1000 ft).
    min_bins : int
        Filled bins needed before a profile is proposed.
    min_samples : int
        Samples a bin needs to count as filled.
    temp_threshold_k, wind_threshold_mps : float
        Differences from the table's atmosphere that justify a rebuild (common
        practice, no source).
    min_interval_s : float
        Least time between two proposals, s (monotonic).
    enabled : bool
        Learn at all (default False: samples are ignored and nothing is proposed).
    base : Atmosphere, optional
        The planning atmosphere outside the measured levels: the loaded forecast or
        planning profile (``run --profile``); default the U.S. Standard Atmosphere 1976.

    Attributes
    ----------
    refused : int
        Profiles not proposed because they were implausible; ``last_refusal`` says why.
    """

    def __init__(self, bin_m: float = 304.8, min_bins: int = 5, min_samples: int = 20,
                 temp_threshold_k: float = 3.0, wind_threshold_mps: float = 7.5,
                 min_interval_s: float = 300.0, enabled: bool = False,
                 base: Atmosphere | None = None) -> None:
        self.enabled = bool(enabled)
        self.base = base if base is not None else standard_atmosphere()
        self.refused = 0
        self.last_refusal = ""
        self.bin_m = bin_m
        self.min_bins = min_bins
        self.min_samples = min_samples
        self.temp_threshold_k = temp_threshold_k
        self.wind_threshold_mps = wind_threshold_mps
        self.min_interval_s = min_interval_s
        self._sums: dict[int, list[float]] = {}
        self._last_proposal: float | None = None

    def add(self, alt_m: float, sat_k: float | None, wind_east_mps: float | None,
            wind_north_mps: float | None) -> None:
        """Add one validated sample (ignored without a temperature, or when disabled)."""
        if sat_k is None or not self.enabled:
            return
        b = int(alt_m // self.bin_m)
        s = self._sums.setdefault(b, [0.0, 0.0, 0.0, 0.0, 0.0])
        s[0] += 1.0
        s[1] += sat_k
        s[2] += wind_east_mps or 0.0
        s[3] += wind_north_mps or 0.0
        s[4] += 1.0 if wind_east_mps is not None else 0.0

    def levels(self) -> list[ProfileLevel]:
        """Filled bins as profile levels (ascending)."""
        out = []
        for b in sorted(self._sums):
            n, t, e, nn, nw = self._sums[b]
            if n >= self.min_samples:
                w = max(nw, 1.0)
                out.append(ProfileLevel((b + 0.5) * self.bin_m, t / n, e / w, nn / w))
        return out

    def proposal(self, current: Atmosphere, now_monotonic: float) -> Atmosphere | None:
        """A new atmosphere when the stream disagrees with ``current`` enough and is
        plausible, else None (always None when disabled)."""
        if not self.enabled:
            return None
        if (self._last_proposal is not None
                and now_monotonic - self._last_proposal < self.min_interval_s):
            return None
        lv = self.levels()
        if len(lv) < self.min_bins:
            return None
        here = [current.at(x.altitude_m) for x in lv]
        worst_t = max(abs(x.temperature_k - c.temperature_k) for x, c in zip(lv, here))
        worst_w = max(math.hypot(x.wind_east_mps - c.wind_east_mps,
                                 x.wind_north_mps - c.wind_north_mps) for x, c in zip(lv, here))
        if worst_t < self.temp_threshold_k and worst_w < self.wind_threshold_mps:
            return None
        self._last_proposal = now_monotonic
        why = implausible(lv)
        if why:
            self.refused += 1
            self.last_refusal = why
            return None
        try:
            return merge_levels(self.base, lv, source="air-data stream")
        except AtmosphereError:
            return None
