"""The carpet edge's confidence band, for the report's map (issue 16, item 5).

The advisor's carpet edge is a line; the air below the aircraft is not known exactly, so
the true edge lies somewhere in a band about it. :class:`EdgeBand` samples that band
while a replay runs: at the advisor's present condition (height, Mach, heading,
flight-path angle) it draws error fields from the spread the advisor assumes
(:func:`advisory.pipeline.confidence.spread_from_config`, the default spread of
:mod:`advisory.physics.spread` or the configured overrides) added to the table's
atmosphere and traces the edge rays of each
(:func:`advisory.pipeline.confidence.sample_carpet`, the same sampling as ``check``'s
``carpet_half_width_interval_km``), and keeps the interval of each half-width at the
advisor's configured confidence. :func:`band_row` lays an interval beside one carpet
row: on each side two points, at the interval's low and high half-width across the
ground track from the emission point, at the along-track position of the row's edge
point.

Sampling is slow next to a step (about 2.5 ms a draw, 1,000 draws a condition), so a
flight samples at most ``max_conditions`` conditions and reuses one while the present
condition stays within :data:`SAME_CONDITION` of it; beyond that the band stops (a gap
on the map) rather than show an interval of another condition. The band is that of
steady flight at the condition: a turn's or an acceleration's own effect on the edge is
in the carpet row, not in the band. With confidence 0 (the fixed margin) there is no
band.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from advisory import units
from advisory.physics.aircraft import aircraft_from_dict
from advisory.pipeline.confidence import DEFAULT_SAMPLES, sample_carpet, spread_from_config
from advisory.pipeline.footprint import CarpetPrediction
from advisory.pipeline.ground_advisor import GroundAdvisor
from advisory.pipeline.trajectory import Trajectory

#: Conditions sampled at most per flight (each about 2.5 s of one core at 1,000 draws).
MAX_CONDITIONS = 4
#: How far the present condition may be from a sampled one for its band to be reused:
#: height m, Mach, heading deg, flight-path angle deg (engineering choice: the cutoff
#: Mach moves about 0.004 per 300 m and the edge a few per cent per 0.02 Mach).
SAME_CONDITION = (300.0, 0.02, 5.0, 0.5)


@dataclass(frozen=True)
class EdgeInterval:
    """The sampled half-width intervals at one condition.

    Attributes
    ----------
    condition : tuple of float
        (height m, Mach, true heading rad, flight-path angle rad) sampled at.
    left_m, right_m : tuple of float
        (low, high) half-width left and right of the ground track, m (0 where the boom
        may not reach the ground).
    """

    condition: tuple[float, float, float, float]
    left_m: tuple[float, float]
    right_m: tuple[float, float]


class EdgeBand:
    """Samples the edge band of one replayed flight (module notes).

    Parameters
    ----------
    advisor : GroundAdvisor
        The replay's advisor (its table, configuration and present condition).
    samples : int
        Error fields drawn per condition (default that of ``check``).
    max_conditions : int
        Conditions sampled at most in the flight.
    """

    def __init__(self, advisor: GroundAdvisor, samples: int = DEFAULT_SAMPLES,
                 max_conditions: int = MAX_CONDITIONS) -> None:
        self.advisor = advisor
        self.confidence = float(advisor.config.confidence)
        self.samples = int(samples)
        self.max_conditions = int(max_conditions)
        self.sampled: list[EdgeInterval] = []
        #: One line per condition whose sampling failed (its rows get no band).
        self.errors: list[str] = []

    @property
    def enabled(self) -> bool:
        """True when the advisor reads at a confidence and sampling is asked for."""
        return self.confidence > 0.0 and self.samples > 0 and self.max_conditions > 0

    def interval(self) -> EdgeInterval | None:
        """The interval at the advisor's present condition: a sampled one within
        :data:`SAME_CONDITION`, else a new sample while the budget lasts, else None."""
        now = self.advisor.present_condition
        if not self.enabled or now is None or not all(map(math.isfinite, now)):
            return None
        for s in self.sampled:
            if _same(s.condition, now):
                return s
        if len(self.sampled) >= self.max_conditions:
            return None
        alt, mach, hdg, fpa = now
        table = self.advisor.table
        ground = float(table.grid.ground_elevation_m)
        model = spread_from_config(self.advisor.config, ground)
        try:
            sp = sample_carpet(table.atmosphere(),
                               aircraft_from_dict(table.header["aircraft"], "table"), alt, mach,
                               hdg, fpa, ground, float(table.header["reflection_factor"]),
                               model, self.confidence, self.samples)
            left, right = sp.half_width_left_m, sp.half_width_right_m
        except (ValueError, ArithmeticError) as exc:  # a report never stops a replay
            self.errors.append(f"edge band at {alt:.0f} m, Mach {mach:.3f}: {exc}")
            left = right = (math.nan, math.nan)  # kept: not tried again at this condition
        s = EdgeInterval(now, left, right)
        self.sampled.append(s)
        return s


def _same(a: tuple[float, float, float, float], b: tuple[float, float, float, float]
          ) -> bool:
    d_hdg = abs((math.degrees(a[2] - b[2]) + 180.0) % 360.0 - 180.0)
    return (abs(a[0] - b[0]) <= SAME_CONDITION[0] and abs(a[1] - b[1]) <= SAME_CONDITION[1]
            and d_hdg <= SAME_CONDITION[2]
            and abs(math.degrees(a[3] - b[3])) <= SAME_CONDITION[3])


def band_row(t_s: float, iv: EdgeInterval, pred: CarpetPrediction, traj: Trajectory,
             k0: int) -> dict[str, Any] | None:
    """The band beside carpet row ``k0`` (emission ``pred.t_emit_s[k0]``): JSON-ready.

    Returns
    -------
    dict or None
        ``t_s``; ``left`` and ``right``: [[lat, lon] inner, [lat, lon] outer] (deg), at
        the interval's low and high half-width across the ground track from the emission
        point, at the along-track distance of the row's edge point; ``half_width_km``
        (``left``/``right`` [low, high]); ``condition`` (ft, Mach, deg, deg). None when
        the row has fewer than two ground points or an interval is not finite.
    """
    e, n = pred.east_m[k0], pred.north_m[k0]
    ok = np.isfinite(e) & np.isfinite(n)
    lims = (*iv.left_m, *iv.right_m)
    if ok.sum() < 2 or not all(map(math.isfinite, lims)):
        return None
    i = int(np.argmin(np.abs(traj.t_s - pred.t_emit_s[k0])))
    e0, n0, tr = float(traj.east_m[i]), float(traj.north_m[i]), float(traj.track_grid_rad[i])
    ax, ay = math.sin(tr), math.cos(tr)  # along the ground track
    rx, ry = ay, -ax  # to its right
    de, dn = e[ok] - e0, n[ok] - n0
    cross = de * rx + dn * ry
    along = de * ax + dn * ay
    sides = {}
    for side, j, sign, (lo, hi) in (("left", int(np.argmin(cross)), -1.0, iv.left_m),
                                    ("right", int(np.argmax(cross)), 1.0, iv.right_m)):
        a = float(along[j])
        pts = []
        for w in (lo, hi):
            la, lo_ = traj.frame.from_enu(e0 + a * ax + sign * w * rx,
                                          n0 + a * ay + sign * w * ry)
            pts.append([round(math.degrees(float(la)), 5), round(math.degrees(float(lo_)), 5)])
        sides[side] = pts
    alt, mach, hdg, fpa = iv.condition
    return {"t_s": t_s, **sides,
            "half_width_km": {"left": [round(v / 1000.0, 3) for v in iv.left_m],
                              "right": [round(v / 1000.0, 3) for v in iv.right_m]},
            "condition": [round(units.m_to_ft(alt), 1), round(mach, 4), round(math.degrees(hdg), 2),
                          round(math.degrees(fpa), 3)]}
