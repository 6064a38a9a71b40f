"""Benchmark section about the truth harness: a ten-minute flight's truth on one core.

Issue 12's budget: the truth of a 10-minute flight in at most 20 s on one core, at the
default resolution (emissions every 0.1 s, azimuths every 1 deg, the edge band of 16 rays
each side out to the lateral cutoff, every second atmosphere level). The measured flight is
the hard case: an invented path at 50,000 ft in the standard atmosphere that manoeuvres
the whole time (a slow Mach swing of +-0.1 about Mach 1.6 and a +-10 deg weave), so that
no emission repeats the one before (a steady stretch costs almost nothing, its rays are
copied). A steady flight and a mixed one (4 min hold, 1 min speeding up, 2 min turn,
3 min hold) are printed beside it for information.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import time

import numpy as np

from advisory import units
from advisory.bench.context import Context
from advisory.bench.machine import one_core
from advisory.bench.truth import FlownPath, trace_truth
from advisory.bench.truth_zones import TruthZone
from advisory.physics.aircraft import default_aircraft
from advisory.physics.atmosphere import Atmosphere, standard_atmosphere

FLIGHT_S = 600.0  #: the issue's ten-minute flight
EMISSION_S = 0.1  #: the truth's default emission interval, s


def bench_path(kind: str, atm: Atmosphere, duration_s: float = FLIGHT_S) -> FlownPath:
    """An invented flown path: ``steady``, ``mixed`` or ``manoeuvre`` (see the module)."""
    t = np.arange(0.0, duration_s + 1e-9, EMISSION_S)
    alt = np.full(t.size, units.ft_to_m(50000.0))
    mach = np.full(t.size, 1.6)
    heading = np.zeros(t.size)
    if kind == "mixed":
        mach = 1.6 + 0.2 * np.clip((t - 240.0) / 60.0, 0.0, 1.0)
        heading = np.radians(1.0) * np.clip(t - 300.0, 0.0, 120.0)
    elif kind == "manoeuvre":
        mach = 1.6 + 0.1 * np.sin(2.0 * np.pi * t / 600.0)
        heading = np.radians(10.0) * np.sin(2.0 * np.pi * t / 300.0)
    speed = mach * np.interp(alt, atm.z_m, atm.sound_speed_mps)
    east = np.cumsum(speed * np.sin(heading)) * EMISSION_S
    north = np.cumsum(speed * np.cos(heading)) * EMISSION_S
    return FlownPath(t, east, north, alt, mach, np.mod(heading, 2.0 * np.pi),
                     np.zeros(t.size))


def section_truth(ctx: Context) -> None:
    """The truth of a ten-minute manoeuvring flight, wall time on one pinned core."""
    atm, aircraft = standard_atmosphere(), default_aircraft()
    zone = TruthZone("town", (np.array([[-5e3, 1e5], [5e3, 1e5], [5e3, 1.1e5],
                                        [-5e3, 1.1e5]]),), 0.5, 2000.0)
    duration = 60.0 if ctx.quick else FLIGHT_S
    trace_truth(bench_path("steady", atm, 1.0), atm, aircraft)  # compile / load kernels
    times: dict[str, float] = {}
    with one_core() as pinned:
        for kind in ("steady", "mixed", "manoeuvre"):
            ctx.progress(f"truth: {kind} flight of {duration:.0f} s ...")
            path = bench_path(kind, atm, duration)
            t0 = time.perf_counter()
            trace_truth(path, atm, aircraft, zones=[zone])
            times[kind] = time.perf_counter() - t0
    scale = FLIGHT_S / duration
    ctx.report.measured(
        "truth_10min_s", times["manoeuvre"] * scale,
        f"{duration:.0f} s flight manoeuvring throughout, 50,000 ft, emissions every "
        f"{EMISSION_S} s, azimuths every 1 deg and the edge band, {pinned}"
        + (" (scaled from the --quick flight)" if ctx.quick else "")
        + f"; steady {times['steady'] * scale:.1f} s, mixed {times['mixed'] * scale:.1f} s")
