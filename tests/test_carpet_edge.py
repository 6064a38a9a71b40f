"""The carpet's lateral edge converges to 10 m (issue 14, item 10).

Independent computation: in still air the ray leaving the Mach cone at azimuth ``phi``
has the horizontal slowness ``|s| = |n_h| / c_h`` (``n`` the unit wave normal,
``|n_h|^2 = 1/M^2 + (1 - 1/M^2) sin^2 phi`` in level flight), conserved along the ray
(Snell's law); it reaches the ground while ``|s| c(z) < 1`` below the aircraft. In the
U.S. Standard Atmosphere 1976 (sound speed from the reference library ``ambiance``) the
sound speed is largest at the ground, so the edge ray grazes the ground:
``sin^2 phi_c = ((c_h / c_g)^2 - 1/M^2) / (1 - 1/M^2)`` (closed form), and it lands
``D = int_0^h s c / sqrt(1 - s^2 c^2) dz`` away horizontally (Pierce, *Acoustics*, 1989,
ch. 8), which scipy's ``quad`` integrates (``z = u^2`` takes out the grazing ray's
square-root singularity at the ground); the cross-track half-width is ``D`` times the
cross-track share of ``n_h``. Before: the bisection stopped 1e-7 rad short of the
cutoff azimuth and the edge stood up to 23 m inside at these points.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from ambiance import Atmosphere as ReferenceAtmosphere
from scipy import integrate

from advisory.physics.aircraft import default_aircraft
from advisory.physics.atmosphere import standard_atmosphere
from advisory.physics.carpet import compute_carpet
from advisory.physics.column import trace_column
from advisory.physics.fastpath import R_REACHED, R_X
from advisory.physics.rays import FlightCondition, RayTracer

#: The issue's budget for the edge, m.
EDGE_TOLERANCE_M = 10.0
TROPOPAUSE_M = 11000.0


def _c(z: float) -> float:
    return float(ReferenceAtmosphere(z).speed_of_sound[0])


def reference_half_width(mach: float, h: float) -> float:
    """Cross-track distance (m) of the grazing edge ray from the ground track (module
    notes)."""
    c_h, c_g = _c(h), _c(0.0)
    cone2 = 1.0 - 1.0 / mach**2
    sin2 = ((c_h / c_g) ** 2 - 1.0 / mach**2) / cone2
    s = 1.0 / c_g

    def run(u: float) -> float:
        c = _c(u * u)
        return 2.0 * u * s * c / math.sqrt(max(1.0 - (s * c) ** 2, 1e-300))

    points = [math.sqrt(TROPOPAUSE_M)] if h > TROPOPAUSE_M else None
    d, _ = integrate.quad(run, 0.0, math.sqrt(h), limit=400, points=points)
    return d * math.sqrt(cone2 * sin2) * c_g / c_h


CASES = [(1.3, 10000.0), (1.4, 13716.0), (1.16, 15240.0), (2.0, 18000.0), (2.4, 19800.0)]


@pytest.mark.parametrize("mach, h", CASES)
def test_the_carpet_edge_is_where_the_grazing_ray_lands(mach, h):
    carpet = compute_carpet(RayTracer(standard_atmosphere()),
                            FlightCondition(altitude_m=h, mach=mach, heading_rad=0.0))
    want = reference_half_width(mach, h)
    assert carpet.half_width_right_m == pytest.approx(want, abs=EDGE_TOLERANCE_M)
    assert carpet.half_width_left_m == pytest.approx(want, abs=EDGE_TOLERANCE_M)


@pytest.mark.parametrize("mach, h", CASES[1:4])
def test_the_tables_edge_nodes_are_where_the_grazing_ray_lands(mach, h):
    # the table builder's compiled path (one column, northbound: east is to the right)
    atm = standard_atmosphere()
    tracer = RayTracer(atm)
    cut = compute_carpet(tracer, FlightCondition(altitude_m=h, mach=mach,
                                                 heading_rad=0.0)).cutoff_mach
    col = trace_column(tracer, default_aircraft(), h, 0.0, 0.0, 0.0,
                       np.array([mach - cut]), np.array([-1.0, 0.0, 1.0]), 1.9)
    assert col is not None
    want = reference_half_width(float(col.mach[0]), h)
    rays = col.rays[0]
    assert rays[0, R_REACHED] == 1.0 and rays[2, R_REACHED] == 1.0
    assert rays[2, R_X] == pytest.approx(want, abs=EDGE_TOLERANCE_M)
    assert -rays[0, R_X] == pytest.approx(want, abs=EDGE_TOLERANCE_M)
