"""Sensitivity columns: how the cutoff Mach moves when the air below is not as assumed.

Issue 16 asks for the spread of the cutoff Mach, the carpet half-widths, the arrival time
and the overpressure. Two ways were weighed: derivatives of those quantities with respect
to the error field's node values (:mod:`advisory.physics.spread`), combined live with the
spread's covariance, or sampling (an ensemble of perturbed atmospheres traced through).

Measured (Mach 1.6, 15,000 m, standard atmosphere, default spread, 200 profiles traced
directly): the cutoff Mach responds nearly linearly (the linear 95 % interval covered
97.5 % of the samples; standard deviation 0.0110 predicted, 0.0098 sampled), but the
half-width does not: its distribution is skewed, a cold surface under a warmer layer (an
inversion) stretching the edge ray by up to 55 km on a 34-km half-width; the linear
interval covered 80-88 %. So:

* the cutoff Mach, which the live step needs every cycle (the Mach resolution's margin,
  whether the boom reaches the ground at all), goes by derivatives stored in the table,
  here: for every column of a coarse sub-grid (:func:`sub_grid`: altitudes about every
  2,000 ft, flight-path angles about every 5 deg, headings about every 90 deg when the air
  has wind) the derivative of the cutoff Mach with respect to each node value
  (temperature, wind along the heading, wind across it), by central differences of the
  builder's own compiled bisection (:func:`advisory.physics.fastpath.cutoff_mach_kernel`)
  with the node raised and lowered by :data:`TEMP_STEP_K` or :data:`WIND_STEP_MPS`. A node
  whose hat lies wholly above the aircraft or below the ground has zero derivatives and is
  not traced. Size: 48 numbers per sub-grid column (under 0.1 MB for the default grid);
* the half-widths, travel time and overpressure go by sampling
  (:mod:`advisory.pipeline.confidence`, the three rays per Mach of :func:`edge_outputs`).

Live, :meth:`SpreadTable.jacobian` interpolates the derivatives (linear in altitude,
flight-path angle and heading) and turns the wind derivatives from along/across the
heading to east/north; the variance of the cutoff Mach is ``J^T C J`` with the spread's
covariance ``C`` at the aircraft's altitude.
"""

from __future__ import annotations

import math
import os

import numpy as np

from advisory.physics import carpet as _carpet
from advisory.physics import fastpath as fp
from advisory.physics.column import trace_column
from advisory.physics.rays import FlightCondition, RayTracer
from advisory.physics.spread import N_VARIABLES, NODES_M, perturbed
from advisory.tables import lookup as lk
from advisory.tables.grid import TableGrid
from advisory.tables.workers import map_columns

__all__ = ["SPREAD_ARRAYS", "SpreadTable", "sub_grid", "column_cutoff", "edge_outputs",
           "cutoff_sensitivity", "build_spread_arrays", "to_east_north"]

#: Node steps of the central differences: small against the spread (1-4 K, 2-4 m/s), large
#: against the bisection's tolerance (cutoff Mach 1e-6).
TEMP_STEP_K = 0.5
WIND_STEP_MPS = 0.5
#: Arrays a table holds for the sensitivities (optional: older tables have none).
SPREAD_ARRAYS = ("cutoff_sens", "cutoff_sens_axis_altitude_m", "cutoff_sens_axis_fpa_rad",
                 "cutoff_sens_axis_heading_rad", "cutoff_sens_nodes_m")
#: Sub-grid spacing targets.
_ALT_STEP_M = 2000.0 * 0.3048
_FPA_STEP_RAD = math.radians(5.0)
_HDG_STEP_RAD = math.radians(90.0)


def _every(values: tuple[float, ...], step: float) -> list[int]:
    """Indices of ``values`` (ascending) about ``step`` apart, the first and last kept."""
    keep = [0]
    for i in range(1, len(values)):
        if values[i] - values[keep[-1]] >= step - 1e-9 or i == len(values) - 1:
            keep.append(i)
    return keep


def sub_grid(grid: TableGrid) -> tuple[list[int], list[int], list[int]]:
    """Indices into the table's axes of the sensitivity sub-grid (altitude, flight-path
    angle, heading)."""
    ia = _every(grid.altitudes_m, _ALT_STEP_M)
    jf = _every(grid.fpa_rad, _FPA_STEP_RAD)
    nh = len(grid.headings_rad)
    stride = max(1, round(nh * _HDG_STEP_RAD / (2.0 * math.pi)))
    kh = list(range(0, nh, stride)) if nh % stride == 0 else list(range(nh))
    return ia, jf, kh


def column_cutoff(tracer: RayTracer, altitude_m: float, heading_rad: float, fpa_rad: float,
                  ground_m: float) -> float:
    """Cutoff Mach of one column by the builder's compiled bisection
    (:func:`advisory.physics.fastpath.cutoff_mach_kernel`); NaN when there is none."""
    atm = tracer.atmosphere
    s0 = atm.at(altitude_m)
    lz, lc, lwx, lwy = (np.ascontiguousarray(a) for a in tracer.levels(altitude_m, ground_m))
    m = fp.cutoff_mach_kernel(float(heading_rad), float(fpa_rad), s0.sound_speed_mps,
                              s0.wind_east_mps, s0.wind_north_mps, lc, lwx, lwy, lz.size,
                              fp.PHI_SCAN, _carpet.MACH_TOL, _carpet.MACH_SEARCH_MAX)
    return float(m) if math.isfinite(m) else math.nan


def edge_outputs(tracer: RayTracer, aircraft, altitude_m: float, heading_rad: float,
                 fpa_rad: float, ground_m: float, machs: np.ndarray, reflection: float
                 ) -> tuple[float, np.ndarray] | None:
    """Cutoff Mach and, per Mach in ``machs``, (left half-width m, right half-width m,
    centre travel time s, centre overpressure Pa) by the builder's compiled column (three
    rays: both lateral cutoffs and the reference ray); NaN where the boom does not reach
    the ground at that Mach. ``None`` when the column is refused. Half-widths are measured
    across the ground track and are at least 0, as
    :func:`advisory.physics.carpet.compute_carpet` defines them."""
    m_cut = column_cutoff(tracer, altitude_m, heading_rad, fpa_rad, ground_m)
    if not math.isfinite(m_cut):
        return None
    out = np.full((machs.size, 4), math.nan)
    ok = machs - m_cut > 1e-5
    if not np.any(ok):
        return m_cut, out
    col = trace_column(tracer, aircraft, altitude_m, heading_rad, fpa_rad, ground_m,
                          machs[ok] - m_cut, np.array([-1.0, 0.0, 1.0]), reflection)
    if col is None:
        return None
    r = col.rays
    # across the ground track of each Mach, as advisory.physics.carpet.compute_carpet
    for k, m in enumerate(machs[ok]):
        vg = tracer.ground_velocity(FlightCondition(float(m), altitude_m, heading_rad, fpa_rad,
                                                    ground_m))
        tx, ty = vg[:2] / math.hypot(vg[0], vg[1])
        right = r[k, :, fp.R_X] * ty - r[k, :, fp.R_Y] * tx
        r[k, 0, fp.R_X], r[k, 2, fp.R_X] = max(-right[0], 0.0), max(right[2], 0.0)
    vals = np.stack([r[:, 0, fp.R_X], r[:, 2, fp.R_X], r[:, 1, fp.R_TIME], r[:, 1, fp.R_DP]],
                    axis=1)
    vals[r[:, :, fp.R_REACHED].min(axis=1) <= 0.0] = math.nan
    out[ok] = vals
    return m_cut, out


def _mode_delta(var: int, node: int, step: float, heading_rad: float) -> np.ndarray:
    """Node field with one value raised by ``step``; var 0 temperature, 1 wind along the
    heading, 2 wind across it (to the right)."""
    d = np.zeros((N_VARIABLES, NODES_M.size))
    if var == 0:
        d[0, node] = step
    else:
        along, cross = (step, 0.0) if var == 1 else (0.0, step)
        d[1, node] = along * math.sin(heading_rad) + cross * math.cos(heading_rad)
        d[2, node] = along * math.cos(heading_rad) - cross * math.sin(heading_rad)
    return d


def _active(node: int, altitude_m: float, ground_m: float) -> bool:
    """True when node ``node``'s hat reaches the air between the ground and the aircraft."""
    lo = NODES_M[node - 1] if node > 0 else -math.inf
    hi = NODES_M[node + 1] if node + 1 < NODES_M.size else math.inf
    return lo < altitude_m and hi > ground_m


def cutoff_sensitivity(atm, altitude_m: float, heading_rad: float, fpa_rad: float,
                       ground_m: float) -> np.ndarray:
    """Derivatives of one column's cutoff Mach with respect to the node values, shape
    (3 n,): temperature (per K), wind along ``heading_rad`` and across it to the right
    (per m/s). Central differences; NaN where the cutoff could not be found."""
    n = NODES_M.size
    sens = np.full(N_VARIABLES * n, math.nan)
    for var in range(N_VARIABLES):
        step = TEMP_STEP_K if var == 0 else WIND_STEP_MPS
        for k in range(n):
            if not _active(k, altitude_m, ground_m):
                sens[var * n + k] = 0.0
                continue
            hi, lo = (column_cutoff(RayTracer(perturbed(atm, _mode_delta(var, k, sg * step,
                                                                         heading_rad))),
                                    altitude_m, heading_rad, fpa_rad, ground_m)
                      for sg in (1.0, -1.0))
            sens[var * n + k] = (hi - lo) / (2.0 * step)
    return sens


def _column(args, key):
    atm, grid = args
    a, f, h = key
    return cutoff_sensitivity(atm, grid.altitudes_m[a], grid.headings_rad[h],
                              grid.fpa_rad[f], grid.ground_elevation_m)


def build_spread_arrays(atm, grid: TableGrid, workers: int | None = None
                        ) -> dict[str, np.ndarray]:
    """The table arrays of :data:`SPREAD_ARRAYS` for a table over ``grid`` in ``atm``."""
    ia, jf, kh = sub_grid(grid)
    n_modes = N_VARIABLES * NODES_M.size
    sens = np.zeros((len(ia), len(jf), len(kh), n_modes))
    keys = [(a, f, h) for a in ia for f in jf for h in kh]
    where = {("a", a): i for i, a in enumerate(ia)}
    where.update({("f", f): i for i, f in enumerate(jf)})
    where.update({("h", h): i for i, h in enumerate(kh)})
    workers = workers or os.cpu_count() or 1

    def store(key, col) -> None:
        a, f, h = key
        sens[where["a", a], where["f", f], where["h", h]] = col

    for key, col in map_columns(_column, (atm, grid), keys, workers, chunksize=2):
        store(key, col)
    _fill_altitude(sens)
    return {
        "cutoff_sens": sens,
        "cutoff_sens_axis_altitude_m": np.array([grid.altitudes_m[i] for i in ia]),
        "cutoff_sens_axis_fpa_rad": np.array([grid.fpa_rad[i] for i in jf]),
        "cutoff_sens_axis_heading_rad": np.array([grid.headings_rad[i] for i in kh]),
        "cutoff_sens_nodes_m": NODES_M.copy(),
    }


def _fill_altitude(sens: np.ndarray) -> None:
    """A column without a cutoff (NaN) takes the nearest altitude's derivatives, else 0."""
    bad = np.isnan(sens).any(axis=-1)
    na = sens.shape[0]
    for a, f, h in zip(*np.nonzero(bad)):
        for b in sorted(range(na), key=lambda b: abs(b - a)):
            if not bad[b, f, h]:
                sens[a, f, h] = sens[b, f, h]
                break
    np.nan_to_num(sens, copy=False, nan=0.0)


class SpreadTable:
    """The cutoff-Mach sensitivities of one table (see the module notes)."""

    def __init__(self, arrays: dict[str, np.ndarray]) -> None:
        self.sens = np.ascontiguousarray(arrays["cutoff_sens"], dtype=np.float64)
        self.ax_alt = np.ascontiguousarray(arrays["cutoff_sens_axis_altitude_m"],
                                           dtype=np.float64)
        self.ax_fpa = np.ascontiguousarray(arrays["cutoff_sens_axis_fpa_rad"],
                                           dtype=np.float64)
        self.ax_hdg = np.ascontiguousarray(arrays["cutoff_sens_axis_heading_rad"],
                                           dtype=np.float64)

    def jacobians(self, altitudes_m, fpas_rad, headings_rad) -> np.ndarray:
        """Derivatives of the cutoff Mach on a grid of conditions, shape (n_alt, n_fpa,
        n_hdg, 3 n), with respect to the node values of temperature (per K), wind east and
        wind north (per m/s): linear interpolation in each axis, the wind derivatives
        turned from along/across each heading to east/north."""
        wa = axis_weights(self.ax_alt, np.atleast_1d(altitudes_m), False)
        wf = axis_weights(self.ax_fpa, np.atleast_1d(fpas_rad), False)
        hdg = np.atleast_1d(np.asarray(headings_rad, dtype=np.float64))
        wh = axis_weights(self.ax_hdg, hdg, True)
        j = np.einsum("ai,fj,hk,ijkm->afhm", wa, wf, wh, self.sens)
        return to_east_north(j, np.sin(hdg)[None, None, :, None],
                             np.cos(hdg)[None, None, :, None])

    def jacobian(self, altitude_m: float, fpa_rad: float, heading_rad: float) -> np.ndarray:
        """:meth:`jacobians` at one condition, shape (3 n,)."""
        return self.jacobians([altitude_m], [fpa_rad], [heading_rad])[0, 0, 0]

    def cutoff_sigma(self, cov: np.ndarray, altitude_m: float, fpa_rad: float,
                     heading_rad: float) -> float:
        """Standard deviation of the cutoff Mach under the node covariance ``cov``."""
        j = self.jacobian(altitude_m, fpa_rad, heading_rad)
        return math.sqrt(max(float(j @ cov @ j), 0.0))


def to_east_north(j: np.ndarray, sin_h, cos_h) -> np.ndarray:
    """Derivatives with respect to the node values of temperature, wind along and across a
    heading (last axis) turned to temperature, wind east and wind north (``sin_h``,
    ``cos_h``: of the heading, broadcast against ``j``'s leading axes)."""
    n = NODES_M.size
    out = np.array(j, dtype=np.float64)
    along, cross = out[..., n:2 * n].copy(), out[..., 2 * n:].copy()
    out[..., n:2 * n] = along * sin_h + cross * cos_h
    out[..., 2 * n:] = along * cos_h - cross * sin_h
    return out


def axis_weights(axis: np.ndarray, xs: np.ndarray, periodic: bool) -> np.ndarray:
    """Linear interpolation weights, shape (len(xs), len(axis)) (clamped at the ends; the
    heading axis periodic). Also the edge ratio's (:mod:`advisory.tables.edge_ratio`)."""
    w = np.zeros((xs.size, axis.size))
    for r, x in enumerate(xs):
        if periodic:
            i, j, u = lk._locate_periodic(axis, float(x))
            w[r, i] += 1.0 - u
            w[r, j] += u
        else:
            i, u, _ = lk._locate(axis, float(x))
            w[r, i] += 1.0 - u
            if axis.size > 1:
                w[r, i + 1] += u
    return w
