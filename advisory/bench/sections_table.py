"""Benchmark sections about the tables: build time, lookup time and its speed-up over
direct tracing, interpolation error against direct tracing.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import contextlib
import math
import os
import time
from collections import Counter

import numpy as np

from advisory.bench.budgets import NotMeasured
from advisory.bench.context import Context, build_table, ensure_table, exc_text, median
from advisory.physics import column
from advisory.physics.carpet import best_reaching_azimuth, lateral_cutoff
from advisory.physics.rays import FlightCondition, RayTracer
from advisory.tables import lookup as lk
from advisory.tables.build import BuildInputs, eta_to_phi, ray_signature
from advisory.tables.edge_ratio import EDGE_ARRAYS
from advisory.tables.spread_table import SPREAD_ARRAYS
from advisory.tables.table import BoomTable
from advisory.tables.verify import inputs_from_table, verify_table


def section_build(ctx: Context) -> None:
    """Table build time of the default grid, all cores (budget < 60 s)."""
    r = ctx.report
    if ctx.quick:
        r.rows["table_build_s"].name = "table build, quick grid"
    if ctx.skip_build:
        why = "--skip-build"
        if ctx.cache_path.exists():
            with contextlib.suppress(Exception):
                h = BoomTable.load(ctx.cache_path).header
                why += f"; cached table's header says {h.get('build_seconds')} s"
        r.not_measured("table_build_s", why)
        _size_ratio(ctx)
        return
    times = [build_table(ctx)]
    while (len(times) < ctx.sizes.build_runs
           and sum(times) + times[-1] <= ctx.sizes.build_time_cap_s):
        times.append(build_table(ctx))
    cores = os.cpu_count() or 1
    runs = (f"median of {len(times)} builds ({', '.join(f'{t:.1f}' for t in times)} s)"
            if len(times) > 1 else "one build")
    r.measured("table_build_s", median(times),
               f"{'quick' if ctx.quick else 'default'} grid {ctx.extras.get('grid_shape')}, "
               f"{cores} worker processes, {runs}; written to {ctx.cache_path}")
    _size_ratio(ctx)


def _size_ratio(ctx: Context) -> None:
    """Issue 16's budget: the table with its sensitivity columns and edge-ratio quantiles
    at most twice the size of the table without them (the arrays' bytes)."""
    r = ctx.report
    if not ctx.cache_path.exists():
        r.not_measured("spread_size_ratio", "no table file")
        return
    arrays = BoomTable.load(ctx.cache_path).arrays
    total = sum(int(a.nbytes) for a in arrays.values())
    spread = sum(int(arrays[k].nbytes) for k in SPREAD_ARRAYS if k in arrays)
    edge = sum(int(arrays[k].nbytes) for k in EDGE_ARRAYS if k in arrays)
    if not spread:
        r.not_measured("spread_size_ratio", "the table has no sensitivity columns")
        return
    r.measured("spread_size_ratio", total / (total - spread - edge),
               f"{spread / 1e6:.3f} MB of sensitivity columns and {edge / 1e6:.3f} MB of "
               f"edge-ratio quantiles in a {total / 1e6:.1f} MB table")


# ------------------------------------------------------------------------ lookup


Condition = tuple[float, float, float, float]  #: altitude m, Mach, fpa rad, heading rad


def random_conditions(table: BoomTable, n: int, seed: int = 2) -> list[Condition]:
    """``n`` random in-grid (altitude m, Mach, fpa rad, heading rad) above cutoff Mach."""
    g = table.grid
    rng = np.random.default_rng(seed)
    out: list[Condition] = []
    while len(out) < n:
        alt = float(rng.uniform(g.altitudes_m[0], g.altitudes_m[-1]))
        fpa = float(rng.uniform(g.fpa_rad[0], g.fpa_rad[-1]))
        hdg = float(rng.uniform(0.0, 2.0 * math.pi))
        mcut = table.cutoff_mach(alt, fpa, hdg)
        top = min(g.mach_max, mcut + g.mach_excess[-1])
        lo = mcut + min(0.02, 0.5 * (top - mcut))
        if not (math.isfinite(mcut) and top > lo):
            continue
        out.append((alt, float(rng.uniform(lo, top)), fpa, hdg))
    return out


def time_lookups(table: BoomTable, conds: list[Condition], passes: int) -> float:
    """Median over ``passes`` of the mean time of one ``footprint_into`` call, s."""
    out = np.zeros((table.eta.size, lk.N_QUANTITIES))
    f = table.footprint_into
    for alt, mach, fpa, hdg in conds[:50]:  # warm-up (JIT load, caches)
        f(out, alt, mach, fpa, hdg)
    per = []
    clock = time.perf_counter
    for _ in range(passes):
        t0 = clock()
        for alt, mach, fpa, hdg in conds:
            f(out, alt, mach, fpa, hdg)
        per.append((clock() - t0) / len(conds))
    return median(per)


def direct_footprint(inputs: BuildInputs, tracer: RayTracer, eta: np.ndarray, alt: float,
                     mach: float, fpa: float, hdg: float) -> int:
    """Trace one footprint directly, as the table builder does for one Mach.

    Best reaching azimuth, both lateral cutoffs (bisection), then the rays at the table's
    normalised azimuths, each traced with :meth:`RayTracer.trace` and its ground
    signature computed. Returns the number of rays that reached the ground.
    """
    fc = FlightCondition(mach, alt, hdg, fpa, inputs.grid.ground_elevation_m)
    phi_ref, margin = best_reaching_azimuth(tracer, fc)
    if margin <= 0.0:
        return 0
    left = lateral_cutoff(tracer, fc, phi_ref, -1)
    right = lateral_cutoff(tracer, fc, phi_ref, +1)
    n = 0
    for phi in eta_to_phi(eta, phi_ref, left, right):
        ray = tracer.trace(fc, float(phi))
        if ray.reaches_ground:
            ray_signature(inputs, tracer, fc, ray)
            n += 1
    return n


def section_lookup(ctx: Context) -> None:
    """One footprint lookup (< 20 us) and its speed-up over direct tracing (>= 50x)."""
    r = ctx.report
    s = ctx.sizes
    table = ensure_table(ctx)
    conds = random_conditions(table, s.lookup_conditions)
    out = np.zeros((table.eta.size, lk.N_QUANTITIES))
    codes = Counter(int(table.footprint_into(out, *c)[0]) for c in conds)
    per_call = time_lookups(table, conds, s.lookup_passes)
    names = {lk.NO_BOOM: "no boom", lk.OK: "ok", lk.CLAMPED: "clamped"}
    r.measured("lookup_us", per_call * 1e6,
               f"{len(conds)} random in-grid conditions above cutoff Mach, {table.eta.size} "
               f"azimuths, median of {s.lookup_passes} passes of BoomTable.footprint_into "
               f"(codes: {', '.join(f'{names.get(k, k)} {v}' for k, v in codes.items())})")

    # side by side on the same conditions: direct tracing, then the table again
    inputs = inputs_from_table(table)
    tracer = RayTracer(inputs.atmosphere)
    eta = table.eta
    direct_footprint(inputs, tracer, eta, *conds[-1])  # warm-up
    same = conds[: s.direct_footprints]
    direct_t, rays = [], []
    for c in same:
        t0 = time.perf_counter()
        rays.append(direct_footprint(inputs, tracer, eta, *c))
        direct_t.append(time.perf_counter() - t0)
    table_t = time_lookups(table, same, s.ratio_passes)
    d = median(direct_t)
    r.measured("lookup_speedup", d / table_t,
               f"direct: median {d * 1e3:.1f} ms per footprint over {len(same)} of the same "
               f"conditions (best reaching azimuth, two lateral-cutoff bisections, "
               f"{eta.size} rays traced + ground signatures; reached ground: {rays}); "
               f"table on those conditions {table_t * 1e6:.2f} us. The direct path leaves "
               "out the cutoff-Mach search, so the ratio is a lower bound")
    _compiled_direct(ctx, table, inputs, tracer, same, table_t)


def _compiled_direct(ctx: Context, table: BoomTable, inputs: BuildInputs, tracer: RayTracer,
                     conds: list[Condition], table_t: float) -> None:
    """For information: the same footprints through the builder's compiled fast path.

    ``advisory.physics.column.trace_column`` with one Mach excess: cutoff-Mach search,
    lateral cutoffs and every ray with its signature, all compiled.
    """
    name = "table vs compiled direct trace"
    try:
        eta = table.eta
        g = inputs.grid

        def one(alt: float, mach: float, fpa: float, hdg: float) -> None:
            excess = max(mach - table.cutoff_mach(alt, fpa, hdg), 1e-3)
            column.trace_column(tracer, inputs.aircraft, alt, hdg, fpa, g.ground_elevation_m,
                                np.array([excess]), eta, inputs.reflection_factor)

        one(*conds[-1])  # warm-up (JIT load)
        times = []
        for c in conds:
            t0 = time.perf_counter()
            one(*c)
            times.append(time.perf_counter() - t0)
        d = median(times)
        ctx.report.add_info("compiled_direct_speedup", name, d / table_t, "x",
                            note=f"column.trace_column with one Mach excess (cutoff-Mach "
                                 f"search included): median {d * 1e3:.2f} ms per footprint "
                                 f"over {len(conds)} conditions vs table {table_t * 1e6:.2f} us")
    except Exception as exc:
        ctx.report.add_info("compiled_direct_speedup", name, None, "x",
                            why=str(exc) if isinstance(exc, NotMeasured) else exc_text(exc))


# ------------------------------------------------------------------------ verify


def section_verify(ctx: Context) -> None:
    """Interpolation error vs direct trace (half-width, centerline dp, cutoff Mach)."""
    r = ctx.report
    table = ensure_table(ctx)
    n = ctx.sizes.verify_samples
    t0 = time.perf_counter()
    rep = verify_table(table, samples=n)
    sec = time.perf_counter() - t0
    grid = "quick" if ctx.quick else "default"
    r.measured("half_width_err", 100 * rep.half_width_rel_max,
               f"max over {n} random off-grid points ({grid} grid); median "
               f"{100 * rep.half_width_rel_median:.3f} % (verify_table, {sec:.1f} s)")
    r.measured("overpressure_err", 100 * rep.overpressure_rel_max,
               f"max; median {100 * rep.overpressure_rel_median:.3f} %")
    r.measured("cutoff_err", rep.cutoff_abs_max, f"max; median {rep.cutoff_abs_median:.5f}")
