"""Edge-ratio columns: how far from the track the carpet's edge may lie when the air below
is not as assumed (issue 16, item 2).

The table's carpet is the one of its own atmosphere. Traced through atmospheres drawn from
the spread of the air below (:mod:`advisory.physics.spread`), each half-width scatters
about it, with a long upper tail (an inversion under a cold surface stretches the edge ray
by tens of kilometres). Measured (stop 28, 200 draws a row, the readable ray tracer): the
median of the drawn half-widths lies 1.03-1.15 times the table's, the 95 % quantile
1.45-2.6 times (35,000-55,000 ft, Mach 0.005-0.3 above the cutoff), and a day 15 K warmer
gives the same within 0.05. Reading the carpet at the cutoff's upper confidence bound (a
single scalar, the cutoff's shift) was tried and is exceeded by 16-52 % of the drawn
atmospheres, not 5 %: the tail comes from the air near the ground. So the table carries
the ratio itself, sampled:

* on a sub-grid (:func:`ratio_grid`: altitudes about every :data:`ALT_STEP_M`, the Mach
  excesses :data:`MACH_EXCESS`, headings about every 90 deg when the air has wind; level
  flight), :data:`DRAWS` error fields drawn from the default spread (Latin hypercube,
  :meth:`advisory.physics.spread.SpreadModel.sample_lhs`) are traced with the builder's
  compiled column (:func:`advisory.tables.spread_table.edge_outputs`, three rays a draw)
  at the table's own cutoff Mach plus each excess;
* each draw's half-width (left and right, across the ground track) over the unperturbed
  one is a ratio; among the draws in which the boom reaches the ground, the ratio's
  quantiles at :data:`LEVELS` are stored (in still air the two sides, mirror images, are
  pooled), shape (altitudes, headings, excesses, 2 sides, levels): 1,200 numbers for the
  default still-air grid.

Live (:mod:`advisory.pipeline.edge_spread`) the advisor reads the probability that the
boom reaches a zone off the ratio's levels, and with ``edge_confidence`` carries the
carpet's edges out to the ratio's quantile at that level. Checked against direct tracing
of independently drawn atmospheres in ``tests/test_edge_ratio.py``.

Cost: about 3 ms a draw on one core, 2.4 s a sub-grid column at 800 draws; the default
still-air grid has 9 columns (about 11 s on two cores), a grid with wind 4 headings a
height.
"""

from __future__ import annotations

import math
import os

import numpy as np

from advisory import units
from advisory.physics.rays import RayTracer
from advisory.physics.spread import default_spread, perturbed
from advisory.tables.grid import TableGrid
from advisory.tables.spread_table import axis_weights, column_cutoff, edge_outputs, sub_grid
from advisory.tables.workers import map_columns

__all__ = ["EDGE_ARRAYS", "LEVELS", "MACH_EXCESS", "DRAWS", "ratio_grid", "ratio_column",
           "build_edge_arrays", "EdgeRatioTable"]

#: Arrays a table holds for the edge ratio (optional: older tables have none).
EDGE_ARRAYS = ("edge_ratio", "edge_ratio_axis_altitude_m", "edge_ratio_axis_heading_rad",
               "edge_ratio_axis_mach_excess", "edge_ratio_levels")
#: Probability levels of the stored quantiles (non-exceedance).
LEVELS = (0.01, 0.05, 0.1, 0.25, 0.5, 0.75, 0.9, 0.95, 0.975, 0.99)
#: Mach excesses over the table's cutoff at which the ratio is sampled.
MACH_EXCESS = (0.005, 0.02, 0.05, 0.1, 0.2, 0.4)
#: Error fields drawn a column: the 95 % quantile's coverage is then within about
#: +-0.5 % in still air (both sides pooled, 1,600 ratios; binomial, sqrt(0.05 0.95 / 1600))
#: and +-0.8 % with wind. At 400 draws a column the 95 % quantile moved by +-0.1 between
#: seeds (45,000 ft, Mach 0.02 above the cutoff: 1.82-1.95).
DRAWS = 800
#: Altitude spacing target of the sub-grid, m (8,000 ft; the ratio changes by about 0.3
#: between 35,000 and 55,000 ft at the 95 % level).
ALT_STEP_M = units.ft_to_m(8000.0)
#: Fewest draws reaching the ground for a quantile to be read; fewer: the ratio is 1 (the
#: table's own edge) at that node.
MIN_REACHING = 20
_SEED = 16


def ratio_grid(grid: TableGrid) -> tuple[list[int], list[int]]:
    """Indices into the table's altitude and heading axes of the ratio's sub-grid: the
    altitudes about :data:`ALT_STEP_M` apart, the first and last kept; a grid spanning
    less than that gets its middle altitude only (the ratio moves by under 0.05 in
    8,000 ft)."""
    alts = grid.altitudes_m
    _, _, kh = sub_grid(grid)
    if alts[-1] - alts[0] < ALT_STEP_M:
        mid = 0.5 * (alts[0] + alts[-1])
        return [min(range(len(alts)), key=lambda i: abs(alts[i] - mid))], kh
    keep = [0]
    for i in range(1, len(alts)):
        if alts[i] - alts[keep[-1]] >= ALT_STEP_M - 1e-6 or i == len(alts) - 1:
            keep.append(i)
    return keep, kh


def ratio_column(atm, aircraft, altitude_m: float, heading_rad: float, ground_m: float,
                 reflection: float, draws: int = DRAWS, seed: int = _SEED,
                 symmetric: bool = False) -> np.ndarray:
    """Quantiles of the half-width ratio at one condition (level flight), shape
    (len(MACH_EXCESS), 2, len(LEVELS)): left then right. A node where the column is
    refused or too few draws reach the ground holds 1 (the table's own edge).
    ``symmetric``: still air, where the two sides are mirror images (the spread's wind
    error has the same variance toward east and north): the two sides' ratios are pooled,
    twice the draws for each quantile."""
    out = np.ones((len(MACH_EXCESS), 2, len(LEVELS)))
    m_cut = column_cutoff(RayTracer(atm), altitude_m, heading_rad, 0.0, ground_m)
    if not math.isfinite(m_cut):
        return out
    machs = m_cut + np.array(MACH_EXCESS)
    nom = edge_outputs(RayTracer(atm), aircraft, altitude_m, heading_rad, 0.0, ground_m,
                       machs, reflection)
    if nom is None:
        return out
    base = nom[1][:, :2]
    model = default_spread(ground_elevation_m=ground_m)
    fields = model.sample_lhs(altitude_m, draws, seed)
    hw = np.full((draws, machs.size, 2), math.nan)
    for i in range(draws):
        res = edge_outputs(RayTracer(perturbed(atm, fields[i])), aircraft, altitude_m,
                           heading_rad, 0.0, ground_m, machs, reflection)
        if res is not None:
            hw[i] = res[1][:, :2]
    with np.errstate(invalid="ignore", divide="ignore"):
        ratio = hw / base[None, :, :]
    for m in range(machs.size):
        if not np.all(np.isfinite(base[m]) & (base[m] > 0.0)):
            continue
        for side in range(2):
            vals = ratio[:, m, :].ravel() if symmetric else ratio[:, m, side]
            vals = vals[np.isfinite(vals)]
            if vals.size >= MIN_REACHING:
                out[m, side] = np.quantile(vals, LEVELS)
    return out


def _column(args, key):
    atm, aircraft, grid, reflection = args
    a, h = key
    return ratio_column(atm, aircraft, grid.altitudes_m[a], grid.headings_rad[h],
                        grid.ground_elevation_m, reflection,
                        symmetric=len(grid.headings_rad) == 1)


def build_edge_arrays(atm, aircraft, grid: TableGrid, reflection: float,
                      workers: int | None = None) -> dict[str, np.ndarray]:
    """The table arrays of :data:`EDGE_ARRAYS` for a table over ``grid`` in ``atm``."""
    ia, kh = ratio_grid(grid)
    ratio = np.ones((len(ia), len(kh), len(MACH_EXCESS), 2, len(LEVELS)))
    keys = [(a, h) for a in ia for h in kh]
    where_a = {a: i for i, a in enumerate(ia)}
    where_h = {h: i for i, h in enumerate(kh)}
    args = (atm, aircraft, grid, reflection)
    results = map_columns(_column, args, keys, workers or os.cpu_count() or 1)
    for (a, h), col in results:
        ratio[where_a[a], where_h[h]] = col
    return {
        "edge_ratio": ratio,
        "edge_ratio_axis_altitude_m": np.array([grid.altitudes_m[i] for i in ia]),
        "edge_ratio_axis_heading_rad": np.array([grid.headings_rad[i] for i in kh]),
        "edge_ratio_axis_mach_excess": np.array(MACH_EXCESS),
        "edge_ratio_levels": np.array(LEVELS),
    }


class EdgeRatioTable:
    """The edge ratio's quantiles of one table (see the module notes)."""

    def __init__(self, arrays: dict[str, np.ndarray]) -> None:
        self.ratio = np.ascontiguousarray(arrays["edge_ratio"], dtype=np.float64)
        self.ax_alt = np.ascontiguousarray(arrays["edge_ratio_axis_altitude_m"],
                                           dtype=np.float64)
        self.ax_hdg = np.ascontiguousarray(arrays["edge_ratio_axis_heading_rad"],
                                           dtype=np.float64)
        self.ax_mex = np.ascontiguousarray(arrays["edge_ratio_axis_mach_excess"],
                                           dtype=np.float64)
        self.levels = np.ascontiguousarray(arrays["edge_ratio_levels"], dtype=np.float64)

    def quantiles(self, altitude_m: float, heading_rad: float) -> np.ndarray:
        """The ratio's quantiles at a condition, shape (n_mex, 2, n_levels): linear in
        altitude (clamped at the ends) and in heading (periodic)."""
        wa = axis_weights(self.ax_alt, np.array([altitude_m]), False)[0]
        wh = axis_weights(self.ax_hdg, np.array([heading_rad]), True)[0]
        return np.einsum("a,h,ahmsl->msl", wa, wh, self.ratio)
