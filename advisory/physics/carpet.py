"""Boom carpet geometry: cutoff Mach, lateral cutoff and carpet half-widths.

Cutoff Mach
    The lowest Mach number whose boom reaches the ground. A ray reaches the ground when
    its vertical slowness stays real all the way down (``q^2 > 0``, see
    :mod:`advisory.physics.rays`). In a windless atmosphere in level flight the
    straight-down ray (phi = 0) has horizontal slowness ``1 / (M c0)``, and Snell's law
    ``cos(theta) / c = const`` says it turns where ``c(z) = M c0``; so the boom reaches
    the ground exactly when ``M c0`` exceeds the largest sound speed between aircraft
    and ground: ``M_cutoff = max c(z) / c0`` (Pierce 1989, sec. 8-4; Hayes 1971). With
    wind, climb or descent the condition is evaluated numerically, searching over ray
    azimuths, by bisection in Mach.
Lateral cutoff
    For a Mach above cutoff, the largest azimuth on each side whose ray still reaches
    the ground; the ground point of that ray is the carpet edge.

References
----------
.. [1] A. D. Pierce, *Acoustics*, ASA, 1989, ch. 8.
.. [2] W. D. Hayes, "Sonic boom", Annu. Rev. Fluid Mech. 3, 1971, pp. 269-290.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

from advisory.physics.rays import MACH_LIMIT, FlightCondition, RayTracer

#: Largest ray azimuth searched on each side, rad (a ray beyond 90 deg points upward
#: in level flight).
PHI_LIMIT_RAD = math.radians(90.0)
#: Bisection tolerance for the lateral cutoff azimuth, rad. The ground point of a ray
#: near the lateral cutoff moves as the square root of the azimuth's distance from it
#: (the grazing ray): at 1e-7 rad the carpet edge stood up to 23 m inside the edge a
#: quadrature of Snell's law gives (Mach 2.4, 65,000 ft; issue 14 measured up to 97 m);
#: at 1e-12 rad within 0.3 m (``tests/test_carpet_edge.py``), for some 17 more
#: reach tests per side.
PHI_TOL_RAD = 1e-12
#: Bisection tolerance for cutoff Mach.
MACH_TOL = 1e-6
#: Highest Mach searched for cutoff: the highest the ray tracer accepts.
MACH_SEARCH_MAX = MACH_LIMIT
#: Azimuth samples used to find the ray most likely to reach the ground, rad.
PHI_SCAN_RAD = tuple(math.radians(d) for d in range(-60, 61, 3))


@dataclass(frozen=True)
class Carpet:
    """Carpet geometry for one flight condition.

    Distances are on the ground relative to the point below the emission point:
    along-track positive ahead, cross-track positive to the right of the ground track.

    Attributes
    ----------
    reaches_ground : bool
        True when some ray of the boom reaches the ground.
    cutoff_mach : float
        Lowest Mach whose boom reaches the ground at this altitude, heading, climb and
        atmosphere (``inf`` when none up to Mach 5 does).
    lateral_cutoff_left_rad, lateral_cutoff_right_rad : float
        Ray azimuths of the carpet edges (left negative), rad; NaN when no boom.
    half_width_left_m, half_width_right_m : float
        Cross-track distance from the ground track to each carpet edge, m (0 when no
        boom).
    centerline_along_m, centerline_cross_m : float
        Ground offset of the phi = 0 ray, m (NaN when it does not reach).
    centerline_travel_time_s : float
        Travel time of the phi = 0 ray, s (NaN when it does not reach).
    """

    reaches_ground: bool
    cutoff_mach: float
    lateral_cutoff_left_rad: float
    lateral_cutoff_right_rad: float
    half_width_left_m: float
    half_width_right_m: float
    centerline_along_m: float
    centerline_cross_m: float
    centerline_travel_time_s: float

    @property
    def width_m(self) -> float:
        """Full carpet width, m."""
        return self.half_width_left_m + self.half_width_right_m


def best_reaching_azimuth(tracer: RayTracer, fc: FlightCondition) -> tuple[float, float]:
    """Azimuth whose ray clears the ground by the widest margin, and that margin.

    Returns
    -------
    (phi, margin) : (float, float)
        ``margin`` is the smallest ``q^2`` along the ray (s^2/m^2); positive when the ray
        reaches the ground. The centre ray (phi = 0) is preferred when it reaches.
    """
    m0 = tracer.min_q2(fc, 0.0)
    if m0 > 0.0:
        return 0.0, m0
    best_phi, best = 0.0, m0
    for phi in PHI_SCAN_RAD:
        m = tracer.min_q2(fc, phi)
        if m > best:
            best_phi, best = phi, m
    return best_phi, best


def cutoff_mach(tracer: RayTracer, fc: FlightCondition) -> float:
    """Lowest Mach whose boom reaches the ground for ``fc``'s altitude, heading and climb.

    Returns ``inf`` when no Mach up to :data:`MACH_SEARCH_MAX` reaches the ground.
    """
    def reaches(mach: float) -> bool:
        return best_reaching_azimuth(tracer, replace(fc, mach=mach))[1] > 0.0

    lo, hi = 1.0, MACH_SEARCH_MAX
    if not reaches(hi):
        return math.inf
    if reaches(lo + 1e-9):
        return lo
    while hi - lo > MACH_TOL:
        mid = 0.5 * (lo + hi)
        if reaches(mid):
            hi = mid
        else:
            lo = mid
    return hi


def lateral_cutoff(tracer: RayTracer, fc: FlightCondition, phi_in: float, side: int) -> float:
    """Largest azimuth (``side`` = +1 right, -1 left) from ``phi_in`` that still reaches.

    ``phi_in`` must reach the ground. Bisection on the reach condition.
    """
    lo = phi_in
    hi = side * PHI_LIMIT_RAD
    if tracer.min_q2(fc, hi) > 0.0:
        return hi
    while abs(hi - lo) > PHI_TOL_RAD:
        mid = 0.5 * (lo + hi)
        if tracer.min_q2(fc, mid) > 0.0:
            lo = mid
        else:
            hi = mid
    return lo


def compute_carpet(tracer: RayTracer, fc: FlightCondition) -> Carpet:
    """Cutoff Mach, lateral cutoffs, half-widths and centerline ray for ``fc``.

    Below cutoff Mach or subsonic the result has ``reaches_ground`` False and zero
    widths; this is not an error.
    """
    fc.validate(tracer.atmosphere)
    m_cut = cutoff_mach(tracer, fc)
    nan = math.nan
    phi_in, margin = best_reaching_azimuth(tracer, fc) if fc.mach > 1.0 else (0.0, -1.0)
    if margin <= 0.0:
        return Carpet(False, m_cut, nan, nan, 0.0, 0.0, nan, nan, nan)
    left = lateral_cutoff(tracer, fc, phi_in, -1)
    right = lateral_cutoff(tracer, fc, phi_in, +1)
    vg = tracer.ground_velocity(fc)
    speed = math.hypot(vg[0], vg[1])
    tx, ty = vg[0] / speed, vg[1] / speed

    def cross_of(phi: float) -> float:
        ok, x, y, _ = tracer.ground_point(fc, phi)
        return x * ty - y * tx if ok else 0.0

    ok, x0, y0, t0 = tracer.ground_point(fc, 0.0)
    along = x0 * tx + y0 * ty if ok else nan
    cross = x0 * ty - y0 * tx if ok else nan
    return Carpet(
        reaches_ground=True,
        cutoff_mach=m_cut,
        lateral_cutoff_left_rad=left,
        lateral_cutoff_right_rad=right,
        half_width_left_m=max(-cross_of(left), 0.0),
        half_width_right_m=max(cross_of(right), 0.0),
        centerline_along_m=along,
        centerline_cross_m=cross,
        centerline_travel_time_s=t0 if ok else nan,
    )
