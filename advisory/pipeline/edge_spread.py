"""The carpet's edge at a confidence, and how likely the boom is to reach a zone near it
(issue 16, items 2 and 3).

The table carries, per altitude, heading and Mach excess, the quantiles of the ratio of a
half-width traced through an atmosphere drawn from the default spread to the table's own
(:mod:`advisory.tables.edge_ratio`). Each step the advisor reads them at its present
altitude and heading (:func:`present_edge`, :class:`PresentSpread`):

* the **probability that the boom reaches a conflict's zone** (:func:`with_edge_probability`,
  whenever the cutoff is read at a confidence): at the emission whose boom touches the
  zone first (or a neighbour: the contact may lie between two), the point of its
  cross-section nearest the zone lies ``y`` across the track, which asks for a ratio of at
  least ``need = y / w`` (``w`` the table's own half-width on that side); the probability
  is ``P_ground * P(R >= need)``, ``P_ground = Phi((M - cutoff) / sigma)`` that the boom
  reaches the ground at all (:func:`advisory.pipeline.confidence.boom_probability`) and
  ``P(R >= need)`` read off the ratio's levels (linear between them; the ratio's
  quantiles are conditional on reaching the ground; 1 inside the lowest stored quantile,
  0.01 beyond the highest). A zone well inside the carpet gets ``P_ground``; one near the
  table's edge about half of it;
* with ``edge_confidence`` (config ``[confidence]``, 0.5-0.99; default 0, the table's own
  edge, which is about the median of the drawn edges) **the carpet's edge laid at that
  confidence**: on each side the edge ray is carried out across the track by the
  ratio's quantile (never below 1) at the level that leaves ``1 - edge_confidence`` of
  the atmospheres reaching beyond it, those in which the boom stays off the ground
  counted (:func:`present_edge`; near cutoff the conditional level is lower: at
  ``P_ground`` 0.66 and 95 %, 0.924), in the prediction, the booms in the
  air and every resolution trial alike (:func:`advisory.tables.lookup.stretch_row`: the
  outer strip keeps the table's, so no zone the table's carpet touches is lost). A zone
  beyond that edge is reached in fewer than ``1 - edge_confidence`` of the drawn
  atmospheres. The edge ray's offset along the track follows the line from the strip's
  inner ray through the table's edge ray: in still, layered air a ray's horizontal path
  keeps its azimuth (Snell's law), so an edge ray that lands farther out lands farther
  ahead too; the line puts it somewhat farther still (the crosswind demo's right edge at
  95 %: 123 km ahead of the emission point, where a ray keeping its azimuth would land
  109 km ahead) while holding the table's outer strip.

Why the widened edge is not the default: at 95 % it lies 1.45-3 times the table's edge
from the track, so a Mach reduction's near-cutoff booms and the booms already in the air
reach zones the table's carpet misses. On the bundled demo flights it turned a caution
that slowing down clears into "nothing clears" and put an "unavoidable" boom (stated
probability 0.05) on the park of a flight whose turn only grazes it; in the near-cutoff
campaign (100 encounters) it removed the one missed alert for two more nuisance alerts
and left fewer resolutions that held (8 of 13 against 14 of 16). README, "When the
advisor knows the air only to within its spread". Why resolutions hold less (stop 30,
encounters 29 and 43 of that campaign flown again): the crew is offered nothing to fly
in time. The status says "unavoidable" or "warning" with no resolution until after the
truth's act-by moment (encounter 29: act-by 21 s, first resolution 111 s; encounter 43:
44 s and 64 s); with the table's edge both were resolved by slowing down. The cause is
the edge itself: a Mach trial emits just above cutoff, where one atmosphere in twenty
carries the edge far out and far ahead (traced at 35,000 ft, 0.005 above cutoff: drawn
edges with a ratio of 2.6 or more land a median 62 km ahead, 11 km across; the table's
edge 41.5 km and 3.8 km; :func:`advisory.tables.lookup.stretch_row` puts the 95 % edge
71-82 km ahead and 11.1 km across), so a slow-down rarely clears the widened carpet.

With the config's spread overrides (``surface_temp_sigma_c``, ``wind_sigma_kt``) the
table's ratio, sampled from the default spread, is scaled about 1 by the ratio of the
cutoff Mach's standard deviations under the two spreads (``1 + (q - 1) s``): an
approximation (engineering choice, not checked against tracing under the overrides);
``check`` and ``predict`` sample the overridden spread directly.

Left out: the widened edge ray keeps the table's travel time and overpressure (the
stretched edge ray travels farther and arrives later).
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np

from advisory.geo.contact import boxes_overlap
from advisory.geo.polygons import segment_zone_distance
from advisory.jit import njit
from advisory.physics.spread import DEFAULT_SURFACE_TEMP_SIGMA_K, default_spread
from advisory.pipeline.confidence import (
    boom_probability,
    present_sigma,
    spread_from_config,
    with_probability,
)
from advisory.pipeline.config import AdvisorConfig
from advisory.pipeline.results import Conflict
from advisory.pipeline.zones import ProjectedZones
from advisory.tables import lookup as lk
from advisory.tables.table import BoomTable

__all__ = ["EdgeSpread", "PresentSpread", "present_edge", "reach_given_ground",
           "section_nearest_kernel", "with_edge_probability", "conflict_probabilities"]

#: Bounds of the probability read off the stored levels (0.01-0.99).
_P_FLOOR = 0.01


@dataclasses.dataclass(frozen=True)
class EdgeSpread:
    """The edge ratio at the present condition.

    Attributes
    ----------
    mex : ndarray, shape (n,)
        Mach excess nodes.
    quantiles : ndarray, shape (n, 2, n_levels)
        The ratio's quantiles (left, right) at ``levels``.
    levels : ndarray
        Non-exceedance levels of the quantiles.
    stretch : ndarray, shape (3, n), or None
        Mach excess, left and right ratio at the edge's confidence (at least 1): the
        lookups' :func:`advisory.tables.lookup.stretch_row` argument; None: the table's
        own edge (``edge_confidence`` 0).
    """

    mex: np.ndarray
    quantiles: np.ndarray
    levels: np.ndarray
    stretch: np.ndarray | None

    def at(self, mex: float) -> np.ndarray:
        """Quantiles at Mach excess ``mex`` (linear, clamped), shape (2, n_levels)."""
        if self.mex.size == 1 or mex <= self.mex[0]:
            return self.quantiles[0]
        if mex >= self.mex[-1]:
            return self.quantiles[-1]
        i = int(np.searchsorted(self.mex, mex, side="right") - 1)
        w = (mex - self.mex[i]) / (self.mex[i + 1] - self.mex[i])
        return self.quantiles[i] * (1.0 - w) + self.quantiles[i + 1] * w

    def ratio_at(self, mex: float, side: int) -> float:
        """The widening used at ``mex`` on ``side`` (0 left, 1 right); 1 without."""
        if self.stretch is None:
            return 1.0
        return float(np.interp(mex, self.stretch[0], self.stretch[1 + side]))


def present_edge(table: BoomTable, confidence: float, altitude_m: float,
                 heading_rad: float, scale: float = 1.0, sigma: float | None = None
                 ) -> EdgeSpread | None:
    """The edge ratio at a condition, widened to the one-sided ``confidence`` (0: not
    widened); None for a table without it. ``scale``: the overrides' scaling about 1
    (module notes).

    ``sigma`` (the cutoff Mach's standard deviation): the edge is laid where the boom
    reaches beyond it in ``1 - confidence`` of the atmospheres, counting those in which
    it does not reach the ground at all: at Mach excess ``m`` the ratio's conditional
    level ``1 - (1 - confidence) / P_ground(m)``, ``P_ground(m) = Phi(m / sigma)`` (the
    probability :func:`with_edge_probability` states is ``P_ground`` times the
    conditional share, so a zone on the widened edge is stated at about
    ``1 - confidence``). Without ``sigma``, the conditional level ``confidence`` itself.
    """
    er = table.edge_ratio
    if er is None:
        return None
    hdg = heading_rad if table.has_wind else 0.0
    q = 1.0 + (er.quantiles(altitude_m, hdg) - 1.0) * max(scale, 0.0)
    q = np.maximum.accumulate(np.clip(q, 0.0, None), axis=-1)
    at_conf = np.empty((2, er.ax_mex.size))
    for m in range(er.ax_mex.size):
        p_ground = 1.0 if sigma is None else boom_probability(float(er.ax_mex[m]), 0.0,
                                                               sigma)
        level = 1.0 - (1.0 - confidence) / max(p_ground, 1e-9)
        level = min(max(level, float(er.levels[0])), float(er.levels[-1]))
        for side in range(2):
            at_conf[side, m] = max(1.0, float(np.interp(level, er.levels, q[m, side])))
    stretch = np.ascontiguousarray(np.vstack([er.ax_mex, at_conf])) if confidence > 0.0 \
        else None
    return EdgeSpread(er.ax_mex.copy(), q, er.levels.copy(), stretch)


def reach_given_ground(edge: EdgeSpread, mex: float, side: int, need: float) -> float:
    """``P(R >= need)``: the share of drawn atmospheres whose half-width on ``side`` is at
    least ``need`` times the table's (given the boom reaches the ground), within
    [0.01, 1]; 1 at or inside the lowest stored quantile."""
    q = edge.at(mex)[side]
    if need <= q[0]:
        return 1.0
    if need >= q[-1]:
        return _P_FLOOR
    # non-decreasing quantiles: the last level whose quantile is below need, then linear
    i = int(np.searchsorted(q, need, side="left") - 1)
    lo, hi = q[i], q[i + 1]
    w = 0.0 if hi <= lo else (need - lo) / (hi - lo)
    f = edge.levels[i] * (1.0 - w) + edge.levels[i + 1] * w
    return float(min(1.0, max(_P_FLOOR, 1.0 - f)))


@njit(cache=True)
def section_nearest_kernel(east: np.ndarray, north: np.ndarray, right: np.ndarray,
                           strips: np.ndarray, x: np.ndarray, y: np.ndarray,
                           ring_start: np.ndarray, part_start: np.ndarray,
                           zone_start: np.ndarray, zone_bbox: np.ndarray, zone: int
                           ) -> tuple[float, float, int]:
    """(distance m, offset across the heading m, side: 0 left, 1 right) of the point of
    one emission's cross-section nearest zone ``zone``.

    The cross-section is walked out from the centre ray (``n_eta // 2``) along the strip
    nodes ``strips`` (ascending ray indices) on each side, segment by segment, until a
    ray without a boom (NaN) or a segment touching the zone; the offset is interpolated
    along the nearest segment from ``right`` (the rows' offsets across the heading, m).
    The distance is infinite where the row has no boom. A segment whose bounding box lies
    farther from the zone's (``zone_bbox[zone]``: x min, y min, x max, y max) than the
    nearest distance found so far is skipped (it cannot be nearer). Twin:
    ``tests/twins/edge_spread.py`` (no screening).
    """
    c = east.size // 2
    best_d = math.inf
    best_lat = 0.0
    best_side = 0
    m = strips.size
    for side in range(2):
        a = c
        for t in range(m):
            b = strips[m - 1 - t] if side == 0 else strips[t]
            if (side == 0 and b >= c) or (side == 1 and b <= c):
                continue
            if not (math.isfinite(east[a]) and math.isfinite(east[b])):
                break
            if not boxes_overlap(min(east[a], east[b]), min(north[a], north[b]),
                                 max(east[a], east[b]), max(north[a], north[b]),
                                 zone_bbox, zone, best_d):
                a = b
                continue
            d, u = segment_zone_distance(east[a], north[a], east[b], north[b], x, y,
                                         ring_start, part_start, zone_start, zone)
            if d < best_d:
                best_d = d
                best_lat = right[a] * (1.0 - u) + right[b] * u
                best_side = side
            if d <= 0.0:
                break
            a = b
    return best_d, best_lat, best_side


def with_edge_probability(conflicts: list[Conflict], east: np.ndarray, north: np.ndarray,
                          rows: np.ndarray, cutoffs: np.ndarray, mach: np.ndarray,
                          sigma: float, edge: EdgeSpread, pz: ProjectedZones,
                          strips: np.ndarray) -> list[Conflict]:
    """Each conflict with the probability that the boom reaches its zone (module notes):
    ``east``, ``north`` (K, n_eta) the placed rays, ``rows`` the looked-up (widened) rows,
    ``cutoffs`` and ``mach`` per emission, all indexed as the prediction's emissions;
    ``strips`` the carpet's strip nodes."""
    out = []
    last = rows.shape[1] - 1
    nodes = np.ascontiguousarray(strips, dtype=np.int64)
    zone_arrays = (pz.x, pz.y, pz.ring_start, pz.part_start, pz.zone_start, pz.zone_bbox)
    for c in conflicts:
        k = c.emission_index
        if not 0 <= k < cutoffs.size:
            out.append(c)
            continue
        # the touching emission and its neighbours (the contact may lie between two)
        best: tuple[float, float, int, int] | None = None
        for kk in (k - 1, k, k + 1):
            if 0 <= kk < cutoffs.size:
                d, lat, sd = section_nearest_kernel(
                    east[kk], north[kk], np.ascontiguousarray(rows[kk, :, lk.Q_RIGHT]),
                    nodes, *zone_arrays, c.zone_index)
                if best is None or d < best[0]:
                    best = (d, lat, sd, kk)
        assert best is not None  # k itself is in range
        _, lateral, side, kk = best
        mex = float(mach[kk]) - float(cutoffs[kk])
        reach = abs(float(rows[kk, 0 if side == 0 else last, lk.Q_RIGHT]))
        nominal = reach / edge.ratio_at(mex, side)  # the table's own half-width
        need = abs(lateral) / nominal if nominal > 0.0 else 0.0
        p_ground = boom_probability(float(mach[k]), float(cutoffs[k]), sigma)
        out.append(dataclasses.replace(
            c, probability=p_ground * reach_given_ground(edge, mex, side, need)))
    return out


class PresentSpread:
    """The cutoff Mach's standard deviation and the edge ratio at the advisor's present
    condition, kept while the height (10 m), flight-path angle (0.1 deg) and heading
    (1 deg) stay (0.1-0.24 ms a computation, issue 16's step budget).

    Parameters
    ----------
    table : BoomTable
        The live table (its sensitivity columns and edge ratio).
    config : AdvisorConfig
        The confidence and the spread's overrides.
    """

    def __init__(self, table: BoomTable, config: AdvisorConfig) -> None:
        ground = table.grid.ground_elevation_m
        self.table = table
        self.confidence = float(config.confidence)
        self.edge_confidence = float(config.edge_confidence)
        on = table.spread is not None and self.confidence > 0.0
        #: The spread of the air below (None: the cutoff is not read at a confidence).
        self.model = spread_from_config(config, ground) if on else None
        overridden = (config.surface_temp_sigma_c != DEFAULT_SURFACE_TEMP_SIGMA_K
                      or config.wind_sigma_kt >= 0.0)
        #: The default spread the table's edge ratio was sampled from, when the config
        #: overrides it (the ratio is then scaled, module notes).
        self.default = default_spread(ground_elevation_m=ground) if on and overridden \
            else None
        self._key: tuple[int, ...] | None = None
        self.sigma: float | None = None
        self.edge: EdgeSpread | None = None

    def at(self, altitude_m: float, fpa_rad: float, heading_rad: float
           ) -> tuple[float | None, EdgeSpread | None]:
        """(sigma, edge ratio) at a condition; (None, None) when not read at a
        confidence."""
        if self.model is None:
            return None, None
        key = (round(altitude_m / 10.0), round(math.degrees(fpa_rad) * 10.0),
               round(math.degrees(heading_rad)))
        if key != self._key:
            self._key = key
            tb = self.table
            self.sigma = present_sigma(tb, self.model, altitude_m, fpa_rad, heading_rad)
            scale = 1.0
            if self.default is not None and self.sigma is not None:
                base = present_sigma(tb, self.default, altitude_m, fpa_rad, heading_rad)
                scale = self.sigma / base if base else 1.0
            self.edge = present_edge(tb, self.edge_confidence, altitude_m, heading_rad,
                                     scale, self.sigma)
        return self.sigma, self.edge


def conflict_probabilities(part: list[Conflict], east: np.ndarray, north: np.ndarray,
                           rows: np.ndarray, cutoffs: np.ndarray, mach: np.ndarray,
                           sigma: float | None, edge: EdgeSpread | None, pz: ProjectedZones,
                           strips: np.ndarray) -> list[Conflict]:
    """Each conflict's probability (issue 16): of the boom reaching its zone with the
    edge ratio (:func:`with_edge_probability`, the same arguments), of reaching the ground
    without it (:func:`advisory.pipeline.confidence.with_probability`), none without a
    spread (``sigma`` None)."""
    if sigma is None or not part:
        return part
    if edge is None:
        return with_probability(part, cutoffs, mach, sigma)
    return with_edge_probability(part, east, north, rows, cutoffs, mach, sigma, edge, pz,
                                 strips)
