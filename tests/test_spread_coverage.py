"""Confidence on the carpet edge against Monte Carlo with direct tracing (issue 16).

The tool's 95 % intervals (the cutoff Mach from sensitivity columns, the half-widths from
its sampled draws, :mod:`advisory.pipeline.confidence`) must cover 93-97 % of the
outcomes of atmospheres drawn from the same spread and traced directly.

Truth: 1,000 error fields drawn independently (plain normal draws through the
covariance's eigen-decomposition, another seed than the tool's Latin hypercube), each
added to the atmosphere and traced by the readable ray tracer
(:func:`advisory.physics.carpet.compute_carpet`: cutoff Mach by bisection over Snell's
law, lateral cutoffs to 1e-12 rad). The spread: the default of
:mod:`advisory.physics.spread` (engineering choices, magnitudes values from memory of
short-range forecast verification), and once with the two command overrides. With 1,000
outcomes the coverage of a true 95 % interval is itself uncertain by +-0.7 % (binomial).

Before this issue the tool had no interval: the edge was a line and the Mach margin a
fixed 0.02 with no basis.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from advisory import units
from advisory.physics.aircraft import default_aircraft
from advisory.physics.atmosphere import standard_atmosphere
from advisory.physics.carpet import compute_carpet
from advisory.physics.rays import FlightCondition, RayTracer
from advisory.physics.signature import DEFAULT_REFLECTION_FACTOR
from advisory.physics.spread import default_spread, perturbed
from advisory.pipeline.confidence import cutoff_interval, sample_carpet
from advisory.tables.spread_table import column_cutoff, cutoff_sensitivity, to_east_north
from tests.test_wind_tables import jet_day

pytestmark = pytest.mark.slow

N_TRUTH = 1000
BAND = (0.93, 0.97)  # issue 16, "done when"


CASES = {
    # name: (atmosphere, altitude m, Mach, heading deg, spread overrides)
    "standard, 15,000 m, Mach 1.6": (standard_atmosphere, 15000.0, 1.6, 0.0, {}),
    "standard, 11,000 m, Mach 1.35": (standard_atmosphere, 11000.0, 1.35, 0.0, {}),
    # the invented jet-stream day of tests/test_wind_tables.py: standard temperatures,
    # wind toward 070 deg, 10 kt at the ground to 90 kt at 35,000 ft
    "windy, 14,000 m, Mach 1.5, heading 300, overrides": (
        jet_day, 14000.0, 1.5, 300.0,
        {"surface_temp_sigma_k": 3.0, "wind_sigma_mps": units.kt_to_mps(6.0)}),
}


def truth(atm, model, alt, mach, hdg):
    """Cutoff Mach and half-widths of independently drawn atmospheres, traced directly."""
    fields = model.sample(np.random.default_rng(2026), alt, N_TRUTH)
    out = np.zeros((N_TRUTH, 3))
    for i, d in enumerate(fields):
        c = compute_carpet(RayTracer(perturbed(atm, d)), FlightCondition(mach, alt, hdg))
        out[i] = (c.cutoff_mach, c.half_width_left_m if c.reaches_ground else 0.0,
                  c.half_width_right_m if c.reaches_ground else 0.0)
    return out


@pytest.mark.parametrize("name", list(CASES))
def test_intervals_cover_93_to_97_percent_of_directly_traced_samples(name):
    make_atm, alt, mach, hdg_deg, over = CASES[name]
    atm = make_atm()
    hdg = math.radians(hdg_deg)
    model = default_spread(**over)
    # the tool: the cutoff's derivatives (what a table stores, here for this condition)
    je = to_east_north(cutoff_sensitivity(atm, alt, hdg, 0.0, 0.0), math.sin(hdg),
                       math.cos(hdg))
    cov = model.covariance(alt)
    sigma = math.sqrt(je @ cov @ je)
    cut0 = column_cutoff(RayTracer(atm), alt, hdg, 0.0, 0.0)
    c_lo, c_hi = cutoff_interval(cut0, sigma, 0.95)
    sp = sample_carpet(atm, default_aircraft(), alt, mach, hdg, 0.0, 0.0,
                       DEFAULT_REFLECTION_FACTOR, model, 0.95, samples=1000)
    t = truth(atm, model, alt, mach, hdg)
    cover = {
        "cutoff": np.mean((t[:, 0] >= c_lo) & (t[:, 0] <= c_hi)),
        "left": np.mean((t[:, 1] >= sp.half_width_left_m[0])
                        & (t[:, 1] <= sp.half_width_left_m[1])),
        "right": np.mean((t[:, 2] >= sp.half_width_right_m[0])
                         & (t[:, 2] <= sp.half_width_right_m[1])),
    }
    print(name, {k: round(float(v), 3) for k, v in cover.items()},
          f"cutoff {cut0:.4f} +- {1.96 * sigma:.4f}",
          f"truth sd {t[:, 0].std():.4f}",
          f"left {sp.half_width_left_m}, right {sp.half_width_right_m}")
    for k, v in cover.items():
        assert BAND[0] <= v <= BAND[1], (k, v)
