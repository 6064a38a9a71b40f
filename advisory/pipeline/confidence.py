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

The advisor (:func:`confident_table`) reads the table as if the air were at the
confidence's unfavourable edge: every node's cutoff Mach lowered by ``z sigma`` (``z`` the
one-sided normal quantile, 1.645 at 95 %, ``sigma`` the node's own). Every lookup then
puts a boom on the ground wherever it reaches at that confidence, with the carpet of the
larger Mach excess; the lowest Mach kept off the ground needs no further margin (the fixed
0.02 of before, which had no basis, stays only for a table without sensitivities).
"""

from __future__ import annotations

import copy
import dataclasses
import math
from dataclasses import dataclass
from statistics import NormalDist

import numpy as np

from advisory import units
from advisory.physics.rays import RayTracer
from advisory.physics.spread import N_VARIABLES, SpreadModel, default_spread, perturbed
from advisory.pipeline.config import AdvisorConfig
from advisory.pipeline.results import Conflict
from advisory.tables.spread_table import edge_outputs
from advisory.tables.table import BoomTable

__all__ = ["DEFAULT_CONFIDENCE", "DEFAULT_SAMPLES", "CarpetSpread", "z_two_sided",
           "z_one_sided", "cutoff_interval", "boom_probability", "sample_carpet",
           "spread_from_config", "node_sigmas", "confident_table", "nominal_cutoff",
           "with_probability"]

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


def _lhs_normal(rng: np.random.Generator, count: int, dim: int) -> np.ndarray:
    """Latin-hypercube standard normal draws, shape (count, dim)."""
    u = (np.argsort(rng.random((dim, count)), axis=1) + rng.random((dim, count))) / count
    inv = np.vectorize(_N.inv_cdf)
    return inv(np.clip(u, 1e-12, 1.0 - 1e-12)).T


def draw_fields(model: SpreadModel, altitude_m: float, count: int, seed: int) -> np.ndarray:
    """``count`` Latin-hypercube draws of the error field, shape (count, 3, n)."""
    cov = model.covariance(altitude_m)
    w, v = np.linalg.eigh(cov)
    root = v * np.sqrt(np.clip(w, 0.0, None))
    z = _lhs_normal(np.random.default_rng(seed), count, cov.shape[0])
    return (z @ root.T).reshape(count, N_VARIABLES, model.n_nodes)


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


def node_sigmas(table: BoomTable, model: SpreadModel) -> np.ndarray | None:
    """Standard deviation of the cutoff Mach at every node of the table's cutoff array,
    shape (altitude, fpa, heading); None for a table without sensitivity columns."""
    st = table.spread
    if st is None:
        return None
    out = np.zeros(table.cutoff.shape)
    for a, alt in enumerate(table.ax_alt):
        j = st.jacobians([alt], table.ax_fpa, table.ax_hdg)[0]
        cov = model.covariance(float(alt))
        out[a] = np.sqrt(np.clip(np.einsum("fhk,kl,fhl->fh", j, cov, j), 0.0, None))
    return out


def confident_table(table: BoomTable, model: SpreadModel, confidence: float
                    ) -> tuple[BoomTable, np.ndarray | None]:
    """The table read at the confidence's unfavourable edge (module notes): a shallow copy
    whose cutoff array is lowered by ``z sigma`` node by node, and the sigmas; the table
    itself and None when it has no sensitivity columns or ``confidence`` is 0."""
    sig = node_sigmas(table, model) if confidence > 0.0 else None
    if sig is None:
        return table, None
    view = copy.copy(table)
    view.cutoff = np.ascontiguousarray(table.cutoff - z_one_sided(confidence) * sig)
    return view, sig


def nominal_cutoff(table: BoomTable, traj, cut_low: float, k: int, confidence: float
                   ) -> tuple[float, float, float]:
    """At point ``k`` of a trajectory: the cutoff Mach as tabulated, its standard deviation
    (from the lookups' cutoff ``cut_low``, lowered by ``z sigma`` by
    :func:`confident_table`) and the probability that the boom emitted there reaches the
    ground."""
    hdg = float(traj.heading_rad[k]) if table.has_wind else 0.0
    nominal = table.cutoff_mach(float(traj.alt_m[k]), float(traj.fpa_rad[k]), hdg)
    sigma = max(nominal - cut_low, 0.0) / z_one_sided(confidence)
    return nominal, sigma, boom_probability(float(traj.mach[k]), nominal, sigma)


def with_probability(conflicts: list[Conflict], cutoffs: np.ndarray, traj,
                     table: BoomTable, confidence: float) -> list[Conflict]:
    """Each conflict with the probability that the boom touching it first reaches the
    ground (``cutoffs``: the prediction's lowered cutoff per emission, indexed as
    ``traj``)."""
    out = []
    for c in conflicts:
        k = c.emission_index
        if 0 <= k < cutoffs.size:
            c = dataclasses.replace(c, probability=nominal_cutoff(
                table, traj, float(cutoffs[k]), k, confidence)[2])
        out.append(c)
    return out
