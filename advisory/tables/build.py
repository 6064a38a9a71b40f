"""Build a boom table: run the physics over a grid (offline, in parallel).

For every (altitude, flight-path angle, heading) column the builder finds the cutoff
Mach, then for every Mach excess above it the two lateral cutoff azimuths, and traces the
rays at the normalised azimuths ``eta`` (see :mod:`advisory.tables.grid`), storing for
each ray its ground offset, travel time, ground overpressure, signature duration and the
azimuth derivative of the ground point (for focus detection at run time).

Columns are independent, so they are shared out over worker processes (``fork`` where
the platform has it).
"""

from __future__ import annotations

import datetime as _dt
import math
import os
import sys
import time
from dataclasses import dataclass, replace

import numpy as np

from advisory.physics import fastpath as fp
from advisory.physics.aircraft import Aircraft, aircraft_document
from advisory.physics.atmosphere import Atmosphere
from advisory.physics.carpet import best_reaching_azimuth, cutoff_mach, lateral_cutoff
from advisory.physics.column import trace_column
from advisory.physics.rays import FlightCondition, RayPath, RayTracer
from advisory.physics.signature import DEFAULT_REFLECTION_FACTOR, Signature, ground_signature
from advisory.schema import VERSION
from advisory.tables import lookup as lk
from advisory.tables.edge_ratio import build_edge_arrays
from advisory.tables.grid import TableGrid
from advisory.tables.lift import build_lift_map
from advisory.tables.spread_table import build_spread_arrays
from advisory.tables.store import atmosphere_arrays
from advisory.tables.workers import map_columns


@dataclass(frozen=True)
class BuildInputs:
    """Everything a table is built from (stored in full in its header)."""

    aircraft: Aircraft
    atmosphere: Atmosphere
    grid: TableGrid
    reflection_factor: float = DEFAULT_REFLECTION_FACTOR


def ray_boom(inputs: BuildInputs, tracer: RayTracer, fc: FlightCondition, ray: RayPath
             ) -> Signature:
    """Ground signature of one traced ray in steady flight (load factor 1)."""
    s0 = tracer.atmosphere.at(fc.altitude_m)
    return ground_signature(
        inputs.aircraft, ray, fc.mach, s0.sound_speed_mps, s0.pressure_pa,
        load_factor=1.0, reflection_factor=inputs.reflection_factor, fpa_rad=fc.fpa_rad,
    )


def ray_signature(inputs: BuildInputs, tracer: RayTracer, fc: FlightCondition,
                  ray: RayPath) -> tuple[float, float, bool]:
    """Ground overpressure (Pa), duration (s) and edge flag of one traced ray."""
    sig = ray_boom(inputs, tracer, fc, ray)
    edge = sig.caustic or sig.edge
    return float(sig.overpressure_pa), float(sig.duration_s), edge


def eta_to_phi(eta: np.ndarray, phi_ref: float, phi_left: float, phi_right: float) -> np.ndarray:
    """Ray azimuths of the normalised azimuth nodes (rad)."""
    return np.where(eta >= 0.0, phi_ref + eta * (phi_right - phi_ref),
                    phi_ref - eta * (phi_left - phi_ref))


def build_column(inputs: BuildInputs, tracer: RayTracer, ia: int, jf: int, kh: int):
    """Physics for one (altitude, flight-path angle, heading) column.

    Runs the compiled kernels of :mod:`advisory.physics.fastpath` (same scheme as
    :func:`build_column_reference`, equal to rounding); falls back to the reference when
    the fast path declines the column (a condition the reference refuses with an error).

    Returns
    -------
    (cutoff, phi_left, phi_right, cells, ages)
        Cutoff Mach; lateral cutoff azimuths per Mach excess (rad); rows of shape
        (n_mach_excess, n_eta, N_QUANTITIES); each ray's signature age, m^0.5, shape
        (n_mach_excess, n_eta) (:mod:`advisory.tables.lift`).
    """
    g = inputs.grid
    hdg = g.headings_rad[kh]
    col = trace_column(tracer, inputs.aircraft, g.altitudes_m[ia], hdg, g.fpa_rad[jf],
                          g.ground_elevation_m, np.asarray(g.mach_excess, dtype=np.float64),
                          g.eta, inputs.reflection_factor)
    if col is None:
        return build_column_reference(inputs, tracer, ia, jf, kh)
    r = col.rays
    cells = np.zeros(r.shape[:2] + (lk.N_QUANTITIES,))
    sh, ch = math.sin(hdg), math.cos(hdg)
    reached = r[..., fp.R_REACHED] > 0.0
    x, y = r[..., fp.R_X], r[..., fp.R_Y]
    dx, dy = r[..., fp.R_DX_DPHI], r[..., fp.R_DY_DPHI]
    slope_ok = reached & np.isfinite(dx) & np.isfinite(dy)
    cells[..., lk.Q_PHI] = r[..., fp.R_PHI]
    cells[..., lk.Q_FWD] = np.where(reached, x * sh + y * ch, 0.0)
    cells[..., lk.Q_RIGHT] = np.where(reached, x * ch - y * sh, 0.0)
    cells[..., lk.Q_TIME] = np.where(reached, r[..., fp.R_TIME], 0.0)
    cells[..., lk.Q_DFWD_DPHI] = np.where(slope_ok, dx * sh + dy * ch, 0.0)
    cells[..., lk.Q_DRIGHT_DPHI] = np.where(slope_ok, dx * ch - dy * sh, 0.0)
    cells[..., lk.Q_DP] = np.where(reached, r[..., fp.R_DP], 0.0)
    cells[..., lk.Q_DURATION] = np.where(reached, r[..., fp.R_DURATION], 0.0)
    cells[..., lk.Q_EDGE] = r[..., fp.R_EDGE]
    ages = np.where(reached, r[..., fp.R_AGE], 0.0)
    return col.cutoff_mach, col.phi_left, col.phi_right, cells, ages


def build_column_reference(inputs: BuildInputs, tracer: RayTracer, ia: int, jf: int, kh: int):
    """Physics for one column through the readable path (reference for the fast path).

    Returns
    -------
    (cutoff, phi_left, phi_right, cells, ages)
        As :func:`build_column`.
    """
    g = inputs.grid
    alt = g.altitudes_m[ia]
    fpa = g.fpa_rad[jf]
    hdg = g.headings_rad[kh]
    base = FlightCondition(1.5, alt, hdg, fpa, g.ground_elevation_m)
    m_cut = cutoff_mach(tracer, base)
    nm = len(g.mach_excess)
    eta = g.eta
    cells = np.zeros((nm, eta.size, lk.N_QUANTITIES))
    ages = np.zeros((nm, eta.size))
    phi_l = np.zeros(nm)
    phi_r = np.zeros(nm)
    sh, ch = math.sin(hdg), math.cos(hdg)
    for im, dm in enumerate(g.mach_excess):
        fc = replace(base, mach=m_cut + dm)
        phi_ref, margin = best_reaching_azimuth(tracer, fc)
        if margin <= 0.0:  # numerically at cutoff: nudge up until a ray reaches
            fc = replace(fc, mach=fc.mach + 1e-4)
            phi_ref, margin = best_reaching_azimuth(tracer, fc)
        left = lateral_cutoff(tracer, fc, phi_ref, -1)
        right = lateral_cutoff(tracer, fc, phi_ref, +1)
        phi_l[im], phi_r[im] = left, right
        for ie, phi in enumerate(eta_to_phi(eta, phi_ref, left, right)):
            ray = tracer.trace(fc, float(phi))
            row = cells[im, ie]
            row[lk.Q_PHI] = phi
            if not ray.reaches_ground:  # cannot happen inside [left, right]; be safe
                row[lk.Q_EDGE] = 1.0
                continue
            x, y = ray.x_m[-1], ray.y_m[-1]
            dx, dy = ray.dxy_dphi
            row[lk.Q_FWD] = x * sh + y * ch
            row[lk.Q_RIGHT] = x * ch - y * sh
            row[lk.Q_TIME] = ray.t_s[-1]
            if math.isfinite(dx) and math.isfinite(dy):
                row[lk.Q_DFWD_DPHI] = dx * sh + dy * ch
                row[lk.Q_DRIGHT_DPHI] = dx * ch - dy * sh
            sig = ray_boom(inputs, tracer, fc, ray)
            row[lk.Q_DP] = sig.overpressure_pa
            row[lk.Q_DURATION] = sig.duration_s
            row[lk.Q_EDGE] = 1.0 if (sig.caustic or sig.edge) else 0.0
            if sig.overpressure_pa > 0.0:
                ages[im, ie] = sig.age_m05
    return m_cut, phi_l, phi_r, cells, ages


def _column_state(inputs: BuildInputs):
    """A worker's state: the inputs and a ray tracer in their atmosphere."""
    return inputs, RayTracer(inputs.atmosphere)


def _column(state, key: tuple[int, int, int]):
    inputs, tracer = state
    return build_column(inputs, tracer, *key)


class _Progress:
    """A one-line progress bar on a terminal; silent otherwise."""

    def __init__(self, total: int, stream=None) -> None:
        self.total = total
        self.done = 0
        self.stream = stream if stream is not None else sys.stderr
        self.enabled = hasattr(self.stream, "isatty") and self.stream.isatty()
        self.t0 = time.monotonic()

    def step(self) -> None:
        self.done += 1
        if self.enabled:
            frac = self.done / self.total
            bar = "#" * int(30 * frac)
            el = time.monotonic() - self.t0
            self.stream.write(f"\rbuilding table [{bar:<30}] {self.done}/{self.total} "
                              f"{el:5.1f} s")
            if self.done == self.total:
                self.stream.write("\n")
            self.stream.flush()


def build_table_arrays(inputs: BuildInputs, workers: int | None = None,
                       progress_stream=None) -> dict[str, np.ndarray]:
    """Run the physics over the grid; returns the arrays of a table.

    Parameters
    ----------
    inputs : BuildInputs
        Aircraft, atmosphere, grid and reflection factor.
    workers : int, optional
        Worker processes (default: all cores). 1 builds in this process.
    progress_stream : file, optional
        Where the progress bar goes when it is a terminal (default stderr).
    """
    inputs.grid.validate()
    na, nm, nf, nh = inputs.grid.shape
    neta = inputs.grid.n_eta
    cutoff = np.zeros((na, nf, nh))
    phi_left = np.zeros((na, nm, nf, nh))
    phi_right = np.zeros((na, nm, nf, nh))
    cells = np.zeros((na, nm, nf, nh, neta, lk.N_QUANTITIES))
    ages = np.zeros((na, nm, nf, nh, neta))
    keys = [(a, f, h) for a in range(na) for f in range(nf) for h in range(nh)]
    bar = _Progress(len(keys), progress_stream)
    workers = workers or os.cpu_count() or 1

    def store(key, res) -> None:
        a, f, h = key
        (cutoff[a, f, h], phi_left[a, :, f, h], phi_right[a, :, f, h], cells[a, :, f, h],
         ages[a, :, f, h]) = res
        bar.step()

    for key, res in map_columns(_column, inputs, keys, workers, setup=_column_state,
                                chunksize=2):
        store(key, res)
    arrays = dict(inputs.grid.axes())
    arrays.update({"cutoff_mach": cutoff, "phi_left": phi_left, "phi_right": phi_right,
                   "cells": cells})
    arrays.update(atmosphere_arrays(inputs.atmosphere))
    alts = inputs.grid.altitudes_m
    p_lo = float(inputs.atmosphere.at(alts[-1]).pressure_pa)
    p_hi = float(inputs.atmosphere.at(alts[0]).pressure_pa)
    lift_map, params = build_lift_map(inputs.aircraft, ages, p_lo, p_hi)
    arrays.update({"ray_age": ages, "lift_map": lift_map, "lift_map_params": params})
    arrays.update(build_spread_arrays(inputs.atmosphere, inputs.grid, workers))
    arrays.update(build_edge_arrays(inputs.atmosphere, inputs.aircraft, inputs.grid,
                                    inputs.reflection_factor, workers))
    return arrays


def provenance(inputs: BuildInputs, build_seconds: float) -> dict:
    """The header fields that say what a table was built from."""
    return {
        "kind": "boom-advisory table",
        "package_version": VERSION,
        "build_utc": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
        "build_seconds": round(build_seconds, 3),
        "grid": inputs.grid.to_dict(),
        "aircraft": aircraft_document(inputs.aircraft),
        "atmosphere": inputs.atmosphere.description,
        "reflection_factor": inputs.reflection_factor,
        "quantities": ["fwd_m", "right_m", "time_s", "overpressure_pa", "duration_s",
                       "dfwd_dphi_m_per_rad", "dright_dphi_m_per_rad", "phi_rad", "edge_flag"],
    }


