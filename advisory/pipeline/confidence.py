"""Confidence on the carpet: intervals for the cutoff Mach, the half-widths, the arrival
time and the overpressure, and the probability that the boom reaches the ground.

The error of the air below the aircraft is the spread model of
:mod:`advisory.physics.spread`. Two propagations, chosen by how the quantity responds
(measurements in :mod:`advisory.tables.spread_table`'s notes):

* the cutoff Mach responds nearly linearly: its standard deviation is ``sqrt(J^T C J)``
  with ``J`` the table's sensitivity columns (or, without a table, the same derivatives
  computed for the one condition by :func:`advisory.tables.spread_table.cutoff_sensitivity`)
  and ``C`` the spread's covariance at the aircraft's altitude; the interval is
  ``cutoff +- z sigma``, ``z`` the normal quantile of the confidence (two-sided), and the
  probability that the boom reaches the ground ``Phi((M - cutoff) / sigma)``;
* the half-widths, the centre ray's travel time and its overpressure do not (an inversion
  under a cold surface stretches the edge ray by tens of kilometres): they are sampled.
  :func:`sample_carpet` draws ``samples`` error fields (Latin hypercube in the
  covariance's principal axes: each axis's normal quantiles stratified, common practice
  for variance reduction, McKay, Beckman and Conover, Technometrics 21, 1979), traces
  each with the builder's compiled column (three rays per draw:
  :func:`advisory.tables.spread_table.edge_outputs`) and reads the interval between the
  ``(1 -+ confidence) / 2`` sample quantiles. A draw in which the boom does not reach the
  ground has half-widths 0.

Checked against Monte Carlo with direct tracing (the readable ray tracer, 1,000 profiles
drawn independently) in ``tests/test_spread_coverage.py``.

The advisor reads the cutoff Mach at its configured confidence: each step it takes the
present ``sigma`` (:func:`present_sigma`), and every lookup of the step (the prediction's
and the resolution trials') counts a boom below the cutoff by less than ``z sigma``
(:func:`lookup_band`; ``z`` the one-sided normal quantile, 1.645 at 95 %) with the carpet of
the smallest tabulated Mach excess, as the near-cutoff band does; the Mach kept off the
ground is the cutoff less ``z sigma`` (the fixed 0.02 of before, which had no basis, stays
only for a table without sensitivities or confidence 0). Above the cutoff the carpet is
the table's: reading the whole table at a lowered cutoff (tried first) biased every
carpet's overpressure by 0.7-2 % and its arrival times against the truth.

The table's carpet edge is about the median of the drawn edges (1.03-1.15 times it), not
a bound: the 95 % quantile of the half-width lies 1.45-2.6 times the table's edge from the
track (35,000-55,000 ft, Mach 0.005-0.3 above the cutoff; README, "When the advisor knows
the air only to within its spread"). Reading the carpet's lateral reach at the cutoff's
upper confidence bound was tried and is exceeded by 16-52 % of drawn atmospheres, not
5 %: the tail comes from the air near the ground, not from the cutoff's shift. So the
table carries the edge ratio's quantiles (:mod:`advisory.tables.edge_ratio`), from which
:mod:`advisory.pipeline.edge_spread` gives each conflict the probability of reaching its
zone and, with ``edge_confidence``, lays the edge at a confidence. The edge's band is
sampled here (:func:`sample_carpet`) for ``check``, ``predict`` and the report.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from statistics import NormalDist

import numpy as np

from advisory import units
from advisory.physics.rays import RayTracer
from advisory.physics.spread import SpreadModel, default_spread, perturbed
from advisory.pipeline.config import AdvisorConfig
from advisory.pipeline.results import Conflict
from advisory.tables.lookup import NEAR_CUTOFF_BAND
from advisory.tables.spread_table import edge_outputs
from advisory.tables.table import BoomTable

__all__ = ["DEFAULT_CONFIDENCE", "DEFAULT_SAMPLES", "CarpetSpread", "z_two_sided",
           "z_one_sided", "cutoff_interval", "boom_probability", "sample_carpet",
           "spread_from_config", "present_sigma", "lookup_band", "with_probability"]

#: Default confidence of the intervals and of the advisor's margins (issue 16).
DEFAULT_CONFIDENCE = 0.95
#: Default number of sampled error fields for the half-width intervals: the interval's
#: own sampling error (its coverage) is then about +-0.7 % (binomial,
#: sqrt(0.05 0.95 / 1000)); the half-width's upper tail is long (inversions), and 400 draws
#: left the two sides of a symmetric carpet's upper bound 10 km apart.
DEFAULT_SAMPLES = 1000
_N = NormalDist()


def _check_confidence(confidence: float) -> float:
    if not (isinstance(confidence, (int, float)) and 0.5 <= confidence < 1.0):
        raise ValueError(f"confidence: {confidence!r} must be from 0.5 to below 1")
    return float(confidence)


def z_two_sided(confidence: float) -> float:
    """Normal quantile for a two-sided interval holding ``confidence`` (1.96 at 0.95)."""
    return _N.inv_cdf(0.5 + 0.5 * _check_confidence(confidence))


def z_one_sided(confidence: float) -> float:
    """Normal quantile for a one-sided bound holding ``confidence`` (1.645 at 0.95)."""
    return _N.inv_cdf(_check_confidence(confidence))


def cutoff_interval(cutoff: float, sigma: float, confidence: float) -> tuple[float, float]:
    """``cutoff -+ z sigma`` (two-sided)."""
    z = z_two_sided(confidence)
    return cutoff - z * sigma, cutoff + z * sigma


def boom_probability(mach: float, cutoff: float, sigma: float) -> float:
    """Probability that the boom reaches the ground, ``Phi((M - cutoff) / sigma)``."""
    if sigma <= 0.0:
        return 1.0 if mach > cutoff else 0.0
    return _N.cdf((mach - cutoff) / sigma)


@dataclass(frozen=True)
class CarpetSpread:
    """Sampled spread of the carpet at one condition (SI).

    Attributes
    ----------
    half_width_left_m, half_width_right_m : (float, float)
        Interval of each half-width, m (0 where the boom does not reach the ground).
    travel_time_s, overpressure_pa : (float, float)
        Interval of the centre ray's travel time and overpressure among the draws that
        reach the ground (NaN when none does).
    reach_fraction : float
        Share of the draws in which the boom reaches the ground.
    samples : int
        Draws traced.
    """

    half_width_left_m: tuple[float, float]
    half_width_right_m: tuple[float, float]
    travel_time_s: tuple[float, float]
    overpressure_pa: tuple[float, float]
    reach_fraction: float
    samples: int


def draw_fields(model: SpreadModel, altitude_m: float, count: int, seed: int) -> np.ndarray:
    """``count`` Latin-hypercube draws of the error field, shape (count, 3, n)
    (:meth:`advisory.physics.spread.SpreadModel.sample_lhs`)."""
    return model.sample_lhs(altitude_m, count, seed)


def sample_carpet(atm, aircraft, altitude_m: float, mach: float, heading_rad: float,
                  fpa_rad: float, ground_m: float, reflection: float, model: SpreadModel,
                  confidence: float = DEFAULT_CONFIDENCE, samples: int = DEFAULT_SAMPLES,
                  seed: int = 16) -> CarpetSpread:
    """Sampled intervals of the carpet at one condition (module notes); about 6 ms a
    draw on one core."""
    lo_q = 0.5 - 0.5 * _check_confidence(confidence)
    if not (isinstance(samples, int) and 20 <= samples <= 100_000):
        raise ValueError(f"samples: {samples!r} must be a whole number from 20 to 100000")
    fields = draw_fields(model, altitude_m, samples, seed)
    vals = np.full((samples, 4), math.nan)
    machs = np.array([float(mach)])
    for i in range(samples):
        res = edge_outputs(RayTracer(perturbed(atm, fields[i])), aircraft, altitude_m,
                           heading_rad, fpa_rad, ground_m, machs, reflection)
        if res is not None:
            vals[i] = res[1][0]
    reach = ~np.isnan(vals[:, 0])
    hw = np.where(reach[:, None], vals[:, :2], 0.0)

    def interval(x: np.ndarray) -> tuple[float, float]:
        if x.size == 0:
            return math.nan, math.nan
        lo, hi = np.quantile(x, [lo_q, 1.0 - lo_q])
        return float(lo), float(hi)

    return CarpetSpread(interval(hw[:, 0]), interval(hw[:, 1]), interval(vals[reach, 2]),
                        interval(vals[reach, 3]), float(reach.mean()), samples)


def spread_from_config(cfg: AdvisorConfig, ground_m: float = 0.0) -> SpreadModel:
    """The default spread with the config's ``[confidence]`` overrides."""
    return default_spread(cfg.surface_temp_sigma_c,
                          None if cfg.wind_sigma_kt < 0.0 else cfg.wind_sigma_kt * units.KT,
                          ground_m)


def present_sigma(table: BoomTable, model: SpreadModel, altitude_m: float, fpa_rad: float,
                  heading_rad: float) -> float | None:
    """Standard deviation of the cutoff Mach at a condition from the table's sensitivity
    columns and the spread; None for a table without them."""
    st = table.spread
    if st is None:
        return None
    return st.cutoff_sigma(model.covariance(altitude_m), altitude_m, fpa_rad, heading_rad)


def lookup_band(sigma: float | None, confidence: float) -> float:
    """The lookups' band below the cutoff: ``z sigma`` (one-sided), at least the
    near-cutoff band; the near-cutoff band alone without ``sigma``."""
    if sigma is None or confidence <= 0.0:
        return NEAR_CUTOFF_BAND
    return max(NEAR_CUTOFF_BAND, z_one_sided(confidence) * sigma)


def with_probability(conflicts: list[Conflict], cutoffs: np.ndarray, mach: np.ndarray,
                     sigma: float) -> list[Conflict]:
    """Each conflict with the probability that the boom touching it first reaches the
    ground, ``Phi((M - cutoff) / sigma)`` at that emission (``cutoffs`` and ``mach``
    indexed as the prediction's emissions)."""
    out = []
    for c in conflicts:
        k = c.emission_index
        if 0 <= k < cutoffs.size:
            c = dataclasses.replace(c, probability=boom_probability(
                float(mach[k]), float(cutoffs[k]), sigma))
        out.append(c)
    return out
