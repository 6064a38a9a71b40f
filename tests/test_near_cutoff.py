"""Near cutoff: the default table against direct tracing (issue 14, item 4).

The issue's budget: for a Mach excess over cutoff of 0.005 or more the table's carpet
half-width within 3 % of direct tracing, and never "no boom" where the boom reaches.
Direct tracing: :func:`advisory.physics.carpet.compute_carpet` at the same flight
condition (the physics the table was built from, without the table's interpolation in
altitude, Mach excess and flight-path angle); the points are random (seeded) over the
default table's altitudes and flight-path angles. Measured this way on today's default
table (three seeds of 60 points, level flight): -1.1..0 % at an excess of 0.005-0.01,
-0.5..+0.6 % at 0.01-0.03, no "no boom" where the boom reaches, also below 0.005 (where
the half-width error reaches +38 %, outside the budget's band). The issue had measured
-16..+81 % below 0.01 on an earlier table; this test keeps the budget.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from advisory import units
from advisory.physics.atmosphere import standard_atmosphere
from advisory.physics.carpet import compute_carpet
from advisory.physics.rays import FlightCondition, RayTracer
from advisory.tables import lookup as lk
from advisory.tables.cache import default_table

HALF_WIDTH_BUDGET = 0.03  #: the issue's budget, relative


@pytest.mark.slow
def test_near_cutoff_the_default_table_keeps_the_budget():
    tab = default_table()
    tracer = RayTracer(standard_atmosphere())
    rng = np.random.default_rng(14)
    out = np.zeros((tab.eta.size, lk.N_QUANTITIES))
    worst, points = 0.0, 0
    for i in range(40):
        alt = units.ft_to_m(float(rng.uniform(8000.0, 62000.0)))
        fpa = math.radians(float(rng.choice([-5.0, 0.0, 0.0, 5.0])))
        cut = compute_carpet(tracer, FlightCondition(altitude_m=alt, mach=1.5,
                                                     heading_rad=0.0,
                                                     fpa_rad=fpa)).cutoff_mach
        excess = float(rng.uniform(0.005, 0.03)) if i < 30 else float(rng.uniform(0.0005,
                                                                                  0.005))
        mach = cut + excess
        direct = compute_carpet(tracer, FlightCondition(altitude_m=alt, mach=mach,
                                                        heading_rad=0.0, fpa_rad=fpa))
        code, _ = lk.lookup_kernel(alt, mach, fpa, 0.0, tab.ax_alt, tab.ax_mex, tab.ax_fpa,
                                   tab.ax_hdg, tab.cutoff, tab.cells, out)
        if direct.reaches_ground:
            assert code != lk.NO_BOOM, (alt, fpa, excess)
        if excess < 0.005:
            continue
        for side, j in ((direct.half_width_right_m, -1), (direct.half_width_left_m, 0)):
            err = abs(abs(out[j, lk.Q_RIGHT]) / side - 1.0)
            worst = max(worst, err)
            points += 1
            assert err < HALF_WIDTH_BUDGET, (alt, math.degrees(fpa), excess, err)
    assert points >= 50, points
