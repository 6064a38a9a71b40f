"""Check a table against direct tracing at random off-grid points.

Budgets (from the tables issue): carpet half-width under 0.5 %, centerline overpressure
under 1 %, cutoff Mach under 0.002.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from advisory.physics.aircraft import aircraft_from_dict
from advisory.physics.carpet import compute_carpet
from advisory.physics.rays import FlightCondition, RayTracer
from advisory.tables import lookup as lk
from advisory.tables.build import BuildInputs, ray_signature
from advisory.tables.table import BoomTable

BUDGET_HALF_WIDTH_REL = 0.005
BUDGET_OVERPRESSURE_REL = 0.01
BUDGET_CUTOFF_MACH = 0.002


def drift_angle(tracer: RayTracer, fc: FlightCondition) -> float:
    """Ground track minus true heading, rad (wind drift)."""
    vg = tracer.ground_velocity(fc)
    track = math.atan2(vg[0], vg[1])
    return (track - fc.heading_rad + math.pi) % (2 * math.pi) - math.pi


def half_widths(rows: np.ndarray, drift_rad: float) -> tuple[float, float]:
    """Left and right carpet half-widths (m) across the ground track from a footprint."""
    s, c = math.sin(drift_rad), math.cos(drift_rad)

    def cross(row: np.ndarray) -> float:
        return -row[lk.Q_FWD] * s + row[lk.Q_RIGHT] * c

    return max(-cross(rows[0]), 0.0), max(cross(rows[-1]), 0.0)


@dataclass
class VerifyReport:
    """Errors of a table against direct tracing (relative errors as fractions)."""

    samples: int
    half_width_rel_median: float
    half_width_rel_max: float
    overpressure_rel_median: float
    overpressure_rel_max: float
    cutoff_abs_median: float
    cutoff_abs_max: float

    @property
    def within_budget(self) -> bool:
        """True when every maximum is inside its budget."""
        return (self.half_width_rel_max < BUDGET_HALF_WIDTH_REL
                and self.overpressure_rel_max < BUDGET_OVERPRESSURE_REL
                and self.cutoff_abs_max < BUDGET_CUTOFF_MACH)

    def lines(self) -> list[str]:
        """Readable lines, each figure beside its budget."""
        def row(name, med, mx, budget, pct=True):
            f = (lambda v: f"{100 * v:.3f} %") if pct else (lambda v: f"{v:.5f}")
            ok = "pass" if mx < budget else "short"
            return f"{name:<28} median {f(med):>10}  max {f(mx):>10}  budget {f(budget):>10}  {ok}"

        return [
            f"{self.samples} random off-grid points, table vs direct tracing:",
            row("carpet half-width", self.half_width_rel_median, self.half_width_rel_max,
                BUDGET_HALF_WIDTH_REL),
            row("centerline overpressure", self.overpressure_rel_median,
                self.overpressure_rel_max, BUDGET_OVERPRESSURE_REL),
            row("cutoff Mach (absolute)", self.cutoff_abs_median, self.cutoff_abs_max,
                BUDGET_CUTOFF_MACH, pct=False),
        ]


def inputs_from_table(table: BoomTable) -> BuildInputs:
    """The build inputs recorded in a table's header."""
    h = table.header
    return BuildInputs(
        aircraft=aircraft_from_dict(h["aircraft"]),
        atmosphere=table.atmosphere(),
        grid=table.grid,
        reflection_factor=float(h["reflection_factor"]),
    )


def verify_table(table: BoomTable, samples: int = 40, seed: int = 1,
                 min_excess: float = 0.05) -> VerifyReport:
    """Re-trace ``samples`` random off-grid conditions and compare with the table.

    Mach is drawn at least ``min_excess`` above the true cutoff Mach (just above cutoff
    the carpet changes too fast for any fixed tolerance and the advisor treats it
    separately), and up to the grid's ``mach_max``.
    """
    inputs = inputs_from_table(table)
    tracer = RayTracer(inputs.atmosphere)
    g = table.grid
    rng = np.random.default_rng(seed)
    hw: list[float] = []
    dp: list[float] = []
    mc: list[float] = []
    while len(mc) < samples:
        alt = rng.uniform(g.altitudes_m[0], g.altitudes_m[-1])
        fpa = rng.uniform(g.fpa_rad[0], g.fpa_rad[-1])
        hdg = rng.uniform(0.0, 2 * math.pi) if table.has_wind else rng.uniform(0, 2 * math.pi)
        base = FlightCondition(1.5, alt, hdg, fpa, g.ground_elevation_m)
        direct_cut = compute_carpet(tracer, base).cutoff_mach
        mc.append(abs(table.cutoff_mach(alt, fpa, hdg) - direct_cut))
        if direct_cut + min_excess >= g.mach_max:
            continue
        mach = rng.uniform(direct_cut + min_excess, g.mach_max)
        fc = FlightCondition(mach, alt, hdg, fpa, g.ground_elevation_m)
        carpet = compute_carpet(tracer, fc)
        fp = table.footprint(alt, mach, fpa, hdg)
        if not (carpet.reaches_ground and fp.reaches_ground):
            hw.append(1.0)
            continue
        left, right = half_widths(fp.rows, drift_angle(tracer, fc))
        hw.append(abs(left - carpet.half_width_left_m) / carpet.half_width_left_m)
        hw.append(abs(right - carpet.half_width_right_m) / carpet.half_width_right_m)
        ray = tracer.trace(fc, 0.0)
        direct_dp, _, _ = ray_signature(inputs, tracer, fc, ray)
        centre = fp.rows[fp.rows.shape[0] // 2]
        dp.append(abs(centre[lk.Q_DP] - direct_dp) / direct_dp)
    hw_a, dp_a, mc_a = np.array(hw), np.array(dp or [0.0]), np.array(mc)
    return VerifyReport(
        samples=samples,
        half_width_rel_median=float(np.median(hw_a)), half_width_rel_max=float(hw_a.max()),
        overpressure_rel_median=float(np.median(dp_a)), overpressure_rel_max=float(dp_a.max()),
        cutoff_abs_median=float(np.median(mc_a)), cutoff_abs_max=float(mc_a.max()),
    )
