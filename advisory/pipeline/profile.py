"""An atmosphere profile assembled from the air-data stream, for table rebuilds.

The aircraft measures static air temperature and wind at its own level; as it climbs
and descends those samples fill altitude bins. When they disagree with the atmosphere
the live table was built from, the advisor hands the profile to the table manager
(anything with ``submit_atmosphere``), which rebuilds the table off the hot path.
"""

from __future__ import annotations

import math

from advisory.physics.atmosphere import (
    Atmosphere,
    AtmosphereError,
    ProfileLevel,
    atmosphere_from_levels,
)

__all__ = ["StreamProfile"]


class StreamProfile:
    """An atmosphere profile assembled from the air-data stream (SAT and wind at altitude).

    Valid states that carry static air temperature (and wind) are averaged into altitude
    bins. When enough bins are filled and they differ from the atmosphere the live table
    was built from by more than the thresholds, :meth:`proposal` returns a new
    :class:`Atmosphere` (the bins as levels; the standard atmosphere continues outside
    them, see :func:`advisory.physics.atmosphere.atmosphere_from_levels`).

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
    """

    def __init__(self, bin_m: float = 304.8, min_bins: int = 5, min_samples: int = 20,
                 temp_threshold_k: float = 3.0, wind_threshold_mps: float = 7.5,
                 min_interval_s: float = 300.0) -> None:
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
        """Add one validated sample (ignored without a temperature)."""
        if sat_k is None:
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
        """A new atmosphere when the stream disagrees with ``current`` enough, else None."""
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
        try:
            return atmosphere_from_levels(lv, source="air-data stream")
        except AtmosphereError:
            return None
