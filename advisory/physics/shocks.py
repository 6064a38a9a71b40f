"""Nonlinear ageing of an F-curve along a ray and its shocks by the equal-area rule.

Ageing (nonlinear steepening)
-----------------------------
Along a ray a wavelet of overpressure ``p`` arrives earlier by
``d tau = (gamma+1)/(2 rho c^2) p dt`` (``dt`` ray travel time; Hayes [3]_, Pierce [4]_
sec. 11-2, with the nonlinearity coefficient ``(gamma+1)/2`` of a perfect gas). With
the linear amplitude ``p = G F(y)`` along the ray (:class:`advisory.physics.rays.RayPath`)
and, at the ground, the F-curve point ``y`` arriving ``y * s.e_a`` later than the nose
wavelet (``s.e_a = Omega0 / (M c0)`` the slowness along the flight direction at the
aircraft; ``Omega0 = 1 - W0 . s`` is 1 without wind: the pattern is steady in the
aircraft frame, so a station ``y`` behind the nose replays the nose's wave ``y`` along
the axis later), each point moves in ``y`` by::

    dy = - F(y) * a,    a = (M c0 / Omega0) int (gamma+1) G / (2 rho c^2) dt   (m^0.5)

In a uniform atmosphere, ``G = p0 gamma M^2 / sqrt(2 beta r)`` and
``dt = M dr / (beta c)`` (the ray runs along the wave normal at speed ``c``; its
distance from the flight axis grows at ``c beta / M``), so
``a = (gamma+1) M^4 sqrt(r) / sqrt(2 beta^3)``: Whitham's characteristic shift
``k F sqrt(r)`` with ``k = (gamma+1) M^4 / sqrt(2 beta^3)`` [1]_ [2]_.

Shocks
------
Whitham's equal-area rule [2]_ on the multivalued aged curve ``Y = y - a F(y)``. The
rule is exactly the weak (entropy) solution of the equivalent Burgers problem, which
the Lax-Oleinik formula gives without tracking the fold [5]_: ``F(Y) = (xi*(Y) - Y) / a``
with ``xi*`` the minimiser of ``H(xi) - Y xi / a``, ``H = -A(xi) + xi^2 / (2 a)``. So the
aged signature is read off the lower convex hull of the samples of ``H``: hull vertices
are unshocked points, each hull edge that skips samples is a shock, at
``Y = (y_i + y_j)/2 - a (A_j - A_i) / (y_j - y_i)`` (the chord's equal-area position).
Ahead of the nose and behind the tail ``F = 0`` and ``H`` is a parabola; the bow and
tail shocks are its tangents from the sample set, in closed form:
``Y_bow = min_i (y_i - sqrt(2 a A_i))`` and ``Y_tail = max_i (y_i + sqrt(2 a (A_i - A_end)))``.
This handles any number of interior shocks and any fold, and costs one pass over the
samples.

References
----------
.. [1] G. B. Whitham, "The flow pattern of a supersonic projectile", Comm. Pure Appl.
   Math. 5, 1952, pp. 301-348.
.. [2] G. B. Whitham, "On the propagation of weak shock waves", J. Fluid Mech. 1,
   1956, pp. 290-318.
.. [3] W. D. Hayes, "Sonic boom", Annual Review of Fluid Mechanics 3, 1971,
   pp. 269-290.
.. [4] A. D. Pierce, *Acoustics: An Introduction to Its Physical Principles and
   Applications*, Acoustical Society of America, 1989, ch. 11.
.. [5] P. D. Lax, "Hyperbolic systems of conservation laws II", Comm. Pure Appl. Math.
   10, 1957, pp. 537-566 (the minimisation formula for the entropy solution).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from advisory.jit import njit
from advisory.physics.atmosphere import GAMMA

#: Interior shocks weaker than this fraction of max |F| are not counted.
INTERIOR_SHOCK_MIN_FRACTION = 0.02


@njit(cache=True)
def _segment_integral(ta, tb, wa, wb):
    """int_ta^tb w(t)/sqrt(t) dt with w linear between (ta, wa) and (tb, wb); exact."""
    d = tb - ta
    if d <= 0.0:
        return 0.0
    ra = math.sqrt(ta)
    rb = math.sqrt(tb)
    return d / (ra + rb) * (2.0 * wa + (2.0 / 3.0) * (wb - wa) * (1.0 + ra / (ra + rb)))


@njit(cache=True)
def age_integral_kernel(t, g, rho, c, m):
    """Ageing integral ``int (gamma+1) G / (2 rho c^2) dt`` along one ray, s/m^0.5.

    Parameters
    ----------
    t, g, rho, c : ndarray
        Per level: travel time (s, 0 at the aircraft), amplitude factor G (Pa/m^0.5,
        infinite at index 0), density (kg/m^3), sound speed (m/s).
    m : int
        Number of levels to use.

    Returns
    -------
    integral : float
        The integral up to the last level with a finite, positive G.
    last : int
        Index of that level (0 when none).

    Notes
    -----
    Near the aircraft ``G ~ t^(-1/2)``; the integrand is written ``w(t) / sqrt(t)`` with
    ``w`` piecewise linear in ``t`` (constant on the first segment), which integrates
    that singularity exactly (:func:`_segment_integral`).
    """
    total = 0.0
    last = 0
    w_prev = 0.0
    for k in range(1, m):
        gk = g[k]
        if not (gk > 0.0 and gk < 1e300) or not (t[k] > 0.0):
            break
        wk = (GAMMA + 1.0) * gk / (2.0 * rho[k] * c[k] * c[k]) * math.sqrt(t[k])
        if k == 1:
            total += 2.0 * wk * math.sqrt(t[1])
        else:
            total += _segment_integral(t[k - 1], t[k], w_prev, wk)
        w_prev = wk
        last = k
    return total, last


@njit(cache=True)
def _chord_position(y, area, age, i, j):
    """Equal-area shock position of the chord between samples i < j, m."""
    return 0.5 * (y[i] + y[j]) - age * (area[j] - area[i]) / (y[j] - y[i])


@njit(cache=True)
def _lin(y, f, xs, i):
    """Linear interpolation of f at xs, which lies in [y[i-1], y[i+1]]."""
    n = y.size
    if xs <= y[i]:
        if i == 0:
            return f[0]
        w = (xs - y[i - 1]) / (y[i] - y[i - 1])
        return f[i - 1] * (1.0 - w) + f[i] * w
    if i >= n - 1:
        return f[n - 1]
    w = (xs - y[i]) / (y[i + 1] - y[i])
    return f[i] * (1.0 - w) + f[i + 1] * w


@njit(cache=True)
def _vertex(x0, x1, x2, v0, v1, v2, want_min):
    """Extremum of the parabola through three points; falls back to the middle one."""
    d01 = (v1 - v0) / (x1 - x0)
    d12 = (v2 - v1) / (x2 - x1)
    c2 = (d12 - d01) / (x2 - x0)
    if (want_min and c2 <= 0.0) or (not want_min and c2 >= 0.0):
        return x1, v1
    xs = 0.5 * (x0 + x1) - d01 / (2.0 * c2)
    if xs < x0:
        xs = x0
    elif xs > x2:
        xs = x2
    vs = v0 + d01 * (xs - x0) + c2 * (xs - x0) * (xs - x1)
    if (want_min and vs > v1) or (not want_min and vs < v1):
        return x1, v1
    return xs, vs


@njit(cache=True)
def _bow_and_trailing(y, f, area, a):
    """Tangents from the leading and trailing parabolas (closed form, refined).

    Returns ``(r, pos_b, f_bow, t, pos_t, f_tail)``: hull vertex indices where the bow
    and trailing tangents touch the samples, their shock positions and F there.
    """
    n = y.size
    a_end = area[n - 1]
    r = 0
    best = y[0]
    for i in range(n):
        v = y[i] - math.sqrt(2.0 * a * max(area[i], 0.0))
        if v < best:
            best = v
            r = i
    xs_b, pos_b = y[r], best
    if 0 < r < n - 1 and area[r - 1] > 0.0 and area[r + 1] > 0.0:
        v0 = y[r - 1] - math.sqrt(2.0 * a * area[r - 1])
        v2 = y[r + 1] - math.sqrt(2.0 * a * area[r + 1])
        xs_b, pos_b = _vertex(y[r - 1], y[r], y[r + 1], v0, best, v2, True)
    # F behind the bow from the tangency F = (xi* - Y) / a (second-order accurate);
    # linear interpolation of F at xi* would be first order where F is curved.
    if r > 0 and a > 0.0 and xs_b - pos_b > 0.0:
        f_bow = (xs_b - pos_b) / a
    else:
        f_bow = _lin(y, f, xs_b, r) if r > 0 else f[0]
    t = n - 1
    best = y[n - 1]
    for i in range(n - 1, -1, -1):
        v = y[i] + math.sqrt(2.0 * a * max(area[i] - a_end, 0.0))
        if v > best:
            best = v
            t = i
    xs_t, pos_t = y[t], best
    if 0 < t < n - 1 and area[t - 1] > a_end and area[t + 1] > a_end:
        v0 = y[t - 1] + math.sqrt(2.0 * a * (area[t - 1] - a_end))
        v2 = y[t + 1] + math.sqrt(2.0 * a * (area[t + 1] - a_end))
        xs_t, pos_t = _vertex(y[t - 1], y[t], y[t + 1], v0, best, v2, False)
    if t < n - 1 and a > 0.0 and pos_t - xs_t > 0.0:
        f_tail = (xs_t - pos_t) / a
    else:
        f_tail = _lin(y, f, xs_t, t) if t < n - 1 else f[n - 1]
    return r, pos_b, f_bow, t, pos_t, f_tail


@njit(cache=True)
def _refined_edge(y, f, area, a, i, j, lo, hi):
    """Shock of hull edge (i, j), both ends refined; returns (Y, F ahead, F behind).

    The far end ``j`` minimises the chord position from ``i``, the near end ``i``
    maximises the chord position towards ``j`` (both are tangent points of the
    supporting line); each is refined by a parabola through the neighbouring samples.
    """
    xs_j = y[j]
    f_behind = f[j]
    if j + 1 <= hi:
        v0 = _chord_position(y, area, a, i, j - 1)
        v1 = _chord_position(y, area, a, i, j)
        v2 = _chord_position(y, area, a, i, j + 1)
        xs_j, _ = _vertex(y[j - 1], y[j], y[j + 1], v0, v1, v2, True)
        f_behind = _lin(y, f, xs_j, j)
    pos = _chord_position(y, area, a, i, j)
    f_ahead = f[i]
    if i - 1 >= lo and i + 1 < j:
        v0 = _chord_position(y, area, a, i - 1, j)
        v2 = _chord_position(y, area, a, i + 1, j)
        xs_i, pos = _vertex(y[i - 1], y[i], y[i + 1], v0, pos, v2, False)
        f_ahead = _lin(y, f, xs_i, i)
    return pos, f_ahead, f_behind


@njit(cache=True)
def _merge_unordered(out, rows):
    """Merge neighbouring shocks whose refined positions came out of order.

    They are shocks about to coalesce; the merged one takes F ahead of the first, F
    behind of the second and the jump-weighted mean position. At least two rows (bow
    and tail) are kept. Returns the new count.
    """
    k = 1
    while k < rows and rows > 2:
        if out[k, 0] < out[k - 1, 0]:
            w1 = abs(out[k - 1, 2] - out[k - 1, 1])
            w2 = abs(out[k, 2] - out[k, 1])
            w = w1 + w2
            pos = 0.5 * (out[k - 1, 0] + out[k, 0]) if w == 0.0 else \
                (w1 * out[k - 1, 0] + w2 * out[k, 0]) / w
            out[k - 1, 0] = pos
            out[k - 1, 2] = out[k, 2]
            for m in range(k, rows - 1):
                out[m, 0] = out[m + 1, 0]
                out[m, 1] = out[m + 1, 1]
                out[m, 2] = out[m + 1, 2]
            rows -= 1
            if k > 1:
                k -= 1
        else:
            k += 1
    return rows


@njit(cache=True)
def shock_fit_kernel(y, f, area, age, out):
    """Equal-area shocks of an aged F-curve (see the module notes, step 4).

    Parameters
    ----------
    y : ndarray
        Ascending sample positions, m; ``y[0]`` is the nose (``F = A = 0`` ahead).
    f, area : ndarray
        F (m^0.5) and its running integral (m^1.5) at the samples.
    age : float
        Age ``a`` (m^0.5), >= 0: each point moves to ``Y = y - a F``.
    out : ndarray, shape (>= y.size + 2, 3)
        Filled with one row per shock, front to back: position ``Y`` (m), F just
        ahead and F just behind. Row 0 is the bow shock, the last row the tail shock
        (the last shock stronger than :data:`INTERIOR_SHOCK_MIN_FRACTION` of the
        signature's largest |F|; the trailing tangent when there is none).

    Returns
    -------
    n_shocks, f_max, f_min : (int, float, float)
        Rows written (>= 2) and the extreme F values of the aged signature.

    Notes
    -----
    Both ends of each shock edge ``(i, j)`` of the hull are refined by parabolas
    through the neighbouring samples (:func:`_refined_edge`), so a shock that lands
    where the samples are sparse (the geometric tail grid) is still placed to second
    order; the bow and trailing tangents take F from the tangency ``F = (xi* - Y)/a``.
    Neighbours that come out of order after refinement (shocks about to coalesce) are
    merged (:func:`_merge_unordered`).
    """
    a = max(age, 0.0)
    r, pos_b, f_bow, t, pos_t, f_tail = _bow_and_trailing(y, f, area, a)
    stack = np.empty(max(t - r + 1, 1), dtype=np.int64)
    top = 0
    if r < t:
        # Lower convex hull of H over samples r..t (monotone chain on chord positions).
        for i in range(r, t + 1):
            while top >= 2 and _chord_position(y, area, a, stack[top - 2], stack[top - 1]) >= \
                    _chord_position(y, area, a, stack[top - 1], i):
                top -= 1
            stack[top] = i
            top += 1
    # Refine every edge that skips samples (a shock); its end samples are replaced by
    # the refined values at the tangent points when taking the extremes.
    n_edges = max(top - 1, 0)
    e_pos = np.empty(n_edges)
    e_ahead = np.empty(n_edges)
    e_behind = np.empty(n_edges)
    refined = np.zeros(max(top, 1), dtype=np.bool_)
    f_max = max(f_bow, f_tail)
    f_min = min(f_bow, f_tail)
    for k in range(n_edges):
        i = stack[k]
        j = stack[k + 1]
        if j > i + 1:
            e_pos[k], e_ahead[k], e_behind[k] = _refined_edge(y, f, area, a, i, j, r, t)
            refined[k] = True
            refined[k + 1] = True
            f_max = max(f_max, e_ahead[k], e_behind[k])
            f_min = min(f_min, e_ahead[k], e_behind[k])
        else:
            e_pos[k] = math.nan
    for k in range(1, top - 1):
        if not refined[k]:
            f_max = max(f_max, f[stack[k]])
            f_min = min(f_min, f[stack[k]])
    tol = INTERIOR_SHOCK_MIN_FRACTION * max(abs(f_max), abs(f_min))
    out[0, 0] = pos_b
    out[0, 1] = 0.0
    out[0, 2] = f_bow
    rows = 1
    for k in range(n_edges):
        if e_pos[k] == e_pos[k] and e_behind[k] - e_ahead[k] > tol:
            out[rows, 0] = e_pos[k]
            out[rows, 1] = e_ahead[k]
            out[rows, 2] = e_behind[k]
            rows += 1
    if rows == 1 or -f_tail > tol:
        out[rows, 0] = pos_t
        out[rows, 1] = f_tail
        out[rows, 2] = 0.0
        rows += 1
    rows = _merge_unordered(out, rows)
    return rows, f_max, f_min


@dataclass(frozen=True)
class ShockFit:
    """Shocks of an aged F-curve (positions in the aged coordinate ``Y``, m).

    Attributes
    ----------
    positions_m : ndarray
        Shock positions, front to back; first the bow, last the tail shock.
    f_ahead, f_behind : ndarray
        F just ahead of and just behind each shock, m^0.5.
    f_max, f_min : float
        Extreme F values of the aged signature, m^0.5.
    """

    positions_m: np.ndarray
    f_ahead: np.ndarray
    f_behind: np.ndarray
    f_max: float
    f_min: float

    @property
    def bow_position_m(self) -> float:
        return float(self.positions_m[0])

    @property
    def tail_position_m(self) -> float:
        return float(self.positions_m[-1])

    @property
    def bow_jump(self) -> float:
        """F jump across the bow shock, m^0.5."""
        return float(self.f_behind[0] - self.f_ahead[0])

    @property
    def tail_jump(self) -> float:
        """F jump across the tail shock, m^0.5 (positive: compression back to ambient)."""
        return float(self.f_behind[-1] - self.f_ahead[-1])

    @property
    def interior_count(self) -> int:
        return int(self.positions_m.size - 2)


def propagate_f_function(y: np.ndarray, f: np.ndarray, age: float,
                         area: np.ndarray | None = None) -> ShockFit:
    """Age an F-curve by ``a`` and fit its shocks by Whitham's equal-area rule.

    Parameters
    ----------
    y : ndarray
        Ascending positions from the nose, m (``F = 0`` ahead of ``y[0]``).
    f : ndarray
        F-function, m^0.5.
    age : float
        Age ``a``, m^0.5: the point ``y`` moves to ``y - a F(y)``.
    area : ndarray, optional
        Running integral of ``F`` (m^1.5); computed by the trapezoid rule when
        omitted (pass the exact one from
        :func:`advisory.physics.ffunction.f_function_abel` when available).
    """
    y = np.ascontiguousarray(y, dtype=np.float64)
    f = np.ascontiguousarray(f, dtype=np.float64)
    if area is None:
        area = np.concatenate([[0.0], np.cumsum(0.5 * (f[1:] + f[:-1]) * np.diff(y))])
    area = np.ascontiguousarray(area, dtype=np.float64)
    out = np.empty((y.size + 2, 3))
    rows, f_max, f_min = shock_fit_kernel(y, f, area, float(age), out)
    shocks = out[:rows]
    return ShockFit(shocks[:, 0].copy(), shocks[:, 1].copy(), shocks[:, 2].copy(),
                    float(f_max), float(f_min))


@njit(cache=True)
def signature_kernel(y, fv, av, fl, al, lift_area, t, g, rho, c, m, age_scale, out):
    """Fused per-ray kernel: F of the ray, age integral, shock fit.

    Returns ``(rows, f_max, f_min, age, last)``; see :func:`age_integral_kernel` and
    :func:`shock_fit_kernel` (``out`` as there). ``age = age_scale * integral``.
    """
    n = y.size
    f = np.empty(n)
    area = np.empty(n)
    for i in range(n):
        f[i] = fv[i] + lift_area * fl[i]
        area[i] = av[i] + lift_area * al[i]
    integral, last = age_integral_kernel(t, g, rho, c, m)
    age = age_scale * integral
    rows, f_max, f_min = shock_fit_kernel(y, f, area, age, out)
    return rows, f_max, f_min, age, last
