"""Whitham's F-function of an aircraft's equivalent area (volume plus lift).

The F-function of the equivalent area ``Ae = S + B`` (volume plus lift, see
:mod:`advisory.physics.aircraft`), Whitham [1]_ [2]_::

    F(y) = 1/(2 pi) int_0^y Ae''(xi) / sqrt(y - xi) dxi            (m^0.5)
    A(y) = int_0^y F = 1/(2 pi) int_0^y Ae'(xi) / sqrt(y - xi) dxi  (m^1.5)

``Ae'`` is sampled on a uniform grid along the body and taken piecewise linear, so both
Abel integrals are evaluated *exactly* for that ``Ae'`` (no quadrature error near the
square-root singularity). Behind the aircraft ``Ae`` stays at ``Ae(L)`` (the
lift-equivalent area persists in the wake), so ``F`` keeps a slowly decaying tail; it
is kept out to :data:`TAIL_EXTENT` body lengths. Volume and lift parts are stored
separately once per aircraft; per ray the lift part is scaled by
``beta cos(phi) n W cos(fpa) / (2 q)`` (Walkden [3]_, Carlson [4]_).

References
----------
.. [1] G. B. Whitham, "The flow pattern of a supersonic projectile", Comm. Pure Appl.
   Math. 5, 1952, pp. 301-348.
.. [2] G. B. Whitham, "On the propagation of weak shock waves", J. Fluid Mech. 1,
   1956, pp. 290-318.
.. [3] F. Walkden, "The shock pattern of a wing-body combination, far from the flight
   path", Aeronautical Quarterly 9, 1958, pp. 164-194.
.. [4] H. W. Carlson, "Simplified sonic-boom prediction", NASA TP-1122, 1978.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from advisory.physics.aircraft import Aircraft

#: Intervals of the uniform body grid for the F-function.
N_BODY = 240
#: Spacing ratio of the geometric grid behind the body.
TAIL_RATIO = 1.03
#: The F-function is kept out to this many body lengths behind the nose.
TAIL_EXTENT = 1000.0

_TWO_PI = 2.0 * math.pi


def _sqrt_diff(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """``sqrt(a) - sqrt(b)`` for ``a >= b >= 0`` without cancellation."""
    s = np.sqrt(a) + np.sqrt(b)
    return np.divide(a - b, s, out=np.zeros_like(s), where=s > 0.0)


def f_function_abel(x: np.ndarray, slope: np.ndarray,
                    y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Whitham's F-function and its integral for a piecewise-linear ``Ae'``.

    Parameters
    ----------
    x : ndarray
        Ascending nodes, m.
    slope : ndarray
        ``Ae'`` at the nodes, m; linear between nodes, zero outside ``[x[0], x[-1]]``
        (the jumps there are included exactly).
    y : ndarray
        Where to evaluate, m.

    Returns
    -------
    F : ndarray
        ``1/(2 pi) int Ae''(xi) / sqrt(y - xi) dxi``, m^0.5 (Whitham [1]_ eq. for F).
    A : ndarray
        ``int_0^y F = 1/(2 pi) int Ae'(xi) / sqrt(y - xi) dxi``, m^1.5.
    """
    x = np.asarray(x, dtype=float)
    d = np.asarray(slope, dtype=float)
    y = np.asarray(y, dtype=float)[:, None]
    c = np.diff(d) / np.diff(x)  # Ae'' on each interval
    ua = np.maximum(y - x[None, :-1], 0.0)
    ub = np.maximum(y - x[None, 1:], 0.0)
    sd = _sqrt_diff(ua, ub)  # sqrt(ua) - sqrt(ub)
    f = (c[None, :] * 2.0 * sd).sum(axis=1)
    for node, jump in ((x[0], d[0]), (x[-1], -d[-1])):
        if jump != 0.0:
            u = np.maximum(y[:, 0] - node, 0.0)
            f += np.divide(jump, np.sqrt(u), out=np.zeros_like(u), where=u > 0.0)
    # int over [x_j, min(x_j+1, y)] of (d_j + c_j (xi - x_j)) / sqrt(y - xi):
    # (d_j + c_j ua) 2 (sqrt ua - sqrt ub) - c_j 2/3 (ua^1.5 - ub^1.5)
    p32 = sd * (ua + np.sqrt(ua * ub) + ub)  # ua^1.5 - ub^1.5
    area = ((d[None, :-1] + c[None, :] * ua) * 2.0 * sd - c[None, :] * (2.0 / 3.0) * p32).sum(
        axis=1
    )
    return f / _TWO_PI, area / _TWO_PI


@dataclass(frozen=True, eq=False)
class FFunctionParts:
    """F-function pieces of one aircraft on its evaluation grid (per unit lift area).

    Attributes
    ----------
    y_m : ndarray
        Evaluation points, m from the nose: a uniform body grid then a geometric tail.
    f_volume, area_volume : ndarray
        F (m^0.5) and its integral (m^1.5) of the volume equivalent area.
    f_lift_unit, area_lift_unit : ndarray
        The same for a lift-equivalent area that reaches 1 m^2 behind the wing; the
        per-ray lift part is this times ``B(L)`` in m^2.
    """

    y_m: np.ndarray
    f_volume: np.ndarray
    area_volume: np.ndarray
    f_lift_unit: np.ndarray
    area_lift_unit: np.ndarray


def f_function_parts(aircraft: Aircraft) -> FFunctionParts:
    """Volume and unit-lift F-functions of ``aircraft`` (computed once, then cached)."""
    cached = aircraft._cache.get("f_parts")
    if cached is not None:
        return cached
    length = aircraft.length_m
    dx = length / N_BODY
    x = np.concatenate([np.linspace(0.0, length, N_BODY + 1), [length + dx]])
    _, ds = aircraft.volume_area(x)
    _, db = aircraft.lift_area_unit(x)
    ds[-1] = 0.0
    db[-1] = 0.0
    n_tail = int(math.ceil(math.log((TAIL_EXTENT - 1.0) * N_BODY) / math.log(TAIL_RATIO))) + 1
    tail = length + np.geomspace(dx, (TAIL_EXTENT - 1.0) * length, n_tail)
    y = np.concatenate([x[:-1], tail])
    fv, av = f_function_abel(x, ds, y)
    fl, al = f_function_abel(x, db, y)
    parts = FFunctionParts(y, fv, av, fl, al)
    aircraft._cache["f_parts"] = parts
    return parts


def f_function(aircraft: Aircraft, mach: float, pressure_pa: float, load_factor: float = 1.0,
               fpa_rad: float = 0.0, phi_rad: float = 0.0
               ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """F-function of the total equivalent area for one flight condition and azimuth.

    Returns
    -------
    y, F, A : ndarray
        Grid (m), F (m^0.5) and its running integral (m^1.5).
    """
    parts = f_function_parts(aircraft)
    b = aircraft.lift_area_total(mach, pressure_pa, load_factor, fpa_rad, phi_rad)
    f = parts.f_volume + b * parts.f_lift_unit
    return parts.y_m, f, parts.area_volume + b * parts.area_lift_unit
