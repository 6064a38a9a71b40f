"""Ground signature: Whitham F-function, nonlinear ageing along a ray, equal-area shocks.

Pipeline for one ray
--------------------
1. **F-function** of the equivalent area ``Ae = S + B`` (volume plus lift, see
   :mod:`advisory.physics.aircraft`), Whitham [1]_ [2]_::

       F(y) = 1/(2 pi) int_0^y Ae''(xi) / sqrt(y - xi) dxi            (m^0.5)
       A(y) = int_0^y F = 1/(2 pi) int_0^y Ae'(xi) / sqrt(y - xi) dxi  (m^1.5)

   ``Ae'`` is sampled on a uniform grid along the body and taken piecewise linear,
   so both Abel integrals are evaluated *exactly* for that ``Ae'`` (no quadrature
   error near the square-root singularity). Behind the aircraft ``Ae`` stays at
   ``Ae(L)`` (the lift-equivalent area persists in the wake), so ``F`` keeps a slowly
   decaying tail; it is kept out to :data:`TAIL_EXTENT` body lengths. Volume and lift
   parts are stored separately once per aircraft; per ray the lift part is scaled by
   ``beta cos(phi) n W cos(fpa) / (2 q)`` (Walkden [3]_, Carlson [4]_).

2. **Linear amplitude** along the ray is ``p = G F(y)`` with ``G`` from the ray tube
   (:class:`advisory.physics.rays.RayPath`), matched to Whitham's near field
   ``p = p0 gamma M^2 F / sqrt(2 beta r)``.

3. **Ageing** (nonlinear steepening). Along a ray a wavelet of overpressure ``p``
   arrives earlier by ``d tau = (gamma+1)/(2 rho c^2) p dt`` (``dt`` ray travel time;
   Hayes [5]_, Pierce [6]_ sec. 11-2, with the nonlinearity coefficient
   ``(gamma+1)/2`` of a perfect gas). At the ground the F-curve point ``y`` arrives
   ``y * s.e_a`` later than the nose wavelet, with ``s.e_a = Omega0 / (M c0)`` the
   slowness along the flight direction at the aircraft (``Omega0 = 1 - W0 . s`` is 1
   without wind): the pattern is steady in the aircraft frame, so a station ``y``
   behind the nose replays the nose's wave ``y`` along the axis later. Hence each
   point moves in ``y`` by::

       dy = - F(y) * a,    a = (M c0 / Omega0) int (gamma+1) G / (2 rho c^2) dt   (m^0.5)

   In a uniform atmosphere, ``G = p0 gamma M^2 / sqrt(2 beta r)`` and
   ``dt = M dr / (beta c)`` (the ray runs along the wave normal at speed ``c``; its
   distance from the flight axis grows at ``c beta / M``), so
   ``a = (gamma+1) M^4 sqrt(r) / sqrt(2 beta^3)``: Whitham's characteristic shift
   ``k F sqrt(r)`` with ``k = (gamma+1) M^4 / sqrt(2 beta^3)`` [1]_ [2]_.

4. **Shocks** by Whitham's equal-area rule [2]_ on the multivalued aged curve
   ``Y = y - a F(y)``. The rule is exactly the weak (entropy) solution of the
   equivalent Burgers problem, which the Lax-Oleinik formula gives without tracking
   the fold [7]_: ``F(Y) = (xi*(Y) - Y) / a`` with ``xi*`` the minimiser of
   ``H(xi) - Y xi / a``, ``H = -A(xi) + xi^2 / (2 a)``. So the aged signature is read
   off the lower convex hull of the samples of ``H``: hull vertices are unshocked
   points, each hull edge that skips samples is a shock, at
   ``Y = (y_i + y_j)/2 - a (A_j - A_i) / (y_j - y_i)`` (the chord's equal-area
   position). Ahead of the nose and behind the tail ``F = 0`` and ``H`` is a
   parabola; the bow and tail shocks are its tangents from the sample set, in closed
   form: ``Y_bow = min_i (y_i - sqrt(2 a A_i))`` and
   ``Y_tail = max_i (y_i + sqrt(2 a (A_i - A_end)))``. This handles any number of
   interior shocks and any fold, and costs one pass over the samples.

5. **Ground result**: peak overpressure ``R G_ground max F`` (for an N-wave the value
   just behind the bow shock), bow and tail shock jumps ``R G_ground dF``, duration
   ``(Y_tail - Y_bow) Omega0 / (M c0)`` (same ``y``-to-time conversion as in 3), with
   ``R`` the ground reflection factor (1.9 by default; common practice, no source).

Far field check (uniform atmosphere, Whitham [1]_ [2]_): the bow shock tends to
``dp / p0 = 2^(1/4) gamma (gamma+1)^(-1/2) beta^(1/4) r^(-3/4) sqrt(max A)``.

References
----------
.. [1] G. B. Whitham, "The flow pattern of a supersonic projectile", Comm. Pure Appl.
   Math. 5, 1952, pp. 301-348.
.. [2] G. B. Whitham, "On the propagation of weak shock waves", J. Fluid Mech. 1,
   1956, pp. 290-318.
.. [3] F. Walkden, "The shock pattern of a wing-body combination, far from the flight
   path", Aeronautical Quarterly 9, 1958, pp. 164-194.
.. [4] H. W. Carlson, "Simplified sonic-boom prediction", NASA TP-1122, 1978.
.. [5] W. D. Hayes, "Sonic boom", Annual Review of Fluid Mechanics 3, 1971,
   pp. 269-290.
.. [6] A. D. Pierce, *Acoustics: An Introduction to Its Physical Principles and
   Applications*, Acoustical Society of America, 1989, ch. 11.
.. [7] P. D. Lax, "Hyperbolic systems of conservation laws II", Comm. Pure Appl. Math.
   10, 1957, pp. 537-566 (the minimisation formula for the entropy solution).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from advisory.jit import njit
from advisory.physics.aircraft import Aircraft
from advisory.physics.atmosphere import GAMMA
from advisory.physics.rays import RayPath

#: Default ground reflection factor (common practice, no source).
DEFAULT_REFLECTION_FACTOR = 1.9
#: Accepted reflection factors: 1 (no reflection) to 2 (rigid flat ground).
REFLECTION_FACTOR_RANGE = (1.0, 2.0)
#: Cap of the focus-boom amplification factor. Focus booms ("superbooms") of 2-5
#: times the steady carpet level are commonly quoted; the cap takes the upper end so
#: that an advisory does not understate a focus (value from memory).
FOCUS_AMPLIFICATION_CAP = 5.0
#: A ray whose wave normal meets the ground at a grazing angle with sine below this
#: is flagged ``edge`` (near the lateral cutoff; common practice, no source).
EDGE_GRAZING_SINE = 0.1
#: Interior shocks weaker than this fraction of max |F| are not counted.
INTERIOR_SHOCK_MIN_FRACTION = 0.02

#: Intervals of the uniform body grid for the F-function.
N_BODY = 240
#: Spacing ratio of the geometric grid behind the body.
TAIL_RATIO = 1.03
#: The F-function is kept out to this many body lengths behind the nose.
TAIL_EXTENT = 1000.0

_TWO_PI = 2.0 * math.pi


# --------------------------------------------------------------------------------------
# F-function (numpy, once per aircraft)
# --------------------------------------------------------------------------------------


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


# --------------------------------------------------------------------------------------
# Kernels (numba) and their twins
# --------------------------------------------------------------------------------------


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


def age_integral_numpy(t: np.ndarray, g: np.ndarray, rho: np.ndarray,
                       c: np.ndarray) -> tuple[float, int]:
    """Numpy twin of :func:`age_integral_kernel` (same scheme, vectorised)."""
    t = np.asarray(t, dtype=float)
    g = np.asarray(g, dtype=float)
    ok = (g > 0.0) & np.isfinite(g) & (t > 0.0)
    ok[0] = True
    bad = np.nonzero(~ok)[0]
    stop = t.size if bad.size == 0 else int(bad[0])
    if stop < 2:
        return 0.0, 0
    tk = t[1:stop]
    w = (GAMMA + 1.0) * g[1:stop] / (2.0 * rho[1:stop] * c[1:stop] ** 2) * np.sqrt(tk)
    total = 2.0 * w[0] * math.sqrt(tk[0])
    if tk.size > 1:
        ta, tb, wa, wb = tk[:-1], tk[1:], w[:-1], w[1:]
        ra, rb = np.sqrt(ta), np.sqrt(tb)
        seg = (tb - ta) / (ra + rb) * (2.0 * wa + (2.0 / 3.0) * (wb - wa) * (1.0 + ra / (ra + rb)))
        total += float(np.sum(np.where(tb > ta, seg, 0.0)))
    return float(total), stop - 1


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


def shock_fit_python(y: np.ndarray, f: np.ndarray, area: np.ndarray,
                     age: float) -> tuple[np.ndarray, float, float]:
    """Plain-Python twin of :func:`shock_fit_kernel` (same construction, readable).

    Returns
    -------
    shocks : ndarray, shape (n, 3)
        Position, F ahead, F behind; front to back.
    f_max, f_min : float
    """
    y = np.asarray(y, dtype=float)
    f = np.asarray(f, dtype=float)
    area = np.asarray(area, dtype=float)
    n = y.size
    a = max(float(age), 0.0)
    a_end = area[-1]

    def chord(i: int, j: int) -> float:
        return 0.5 * (y[i] + y[j]) - a * (area[j] - area[i]) / (y[j] - y[i])

    def vertex(xs3, vs3, want_min: bool) -> tuple[float, float]:
        (x0, x1, x2), (v0, v1, v2) = xs3, vs3
        d01 = (v1 - v0) / (x1 - x0)
        d12 = (v2 - v1) / (x2 - x1)
        c2 = (d12 - d01) / (x2 - x0)
        if (want_min and c2 <= 0.0) or (not want_min and c2 >= 0.0):
            return x1, v1
        xs = min(max(0.5 * (x0 + x1) - d01 / (2.0 * c2), x0), x2)
        vs = v0 + d01 * (xs - x0) + c2 * (xs - x0) * (xs - x1)
        if (want_min and vs > v1) or (not want_min and vs < v1):
            return x1, v1
        return xs, vs

    # Leading and trailing parabola tangents.
    lead = y - np.sqrt(2.0 * a * np.maximum(area, 0.0))
    r = int(np.argmin(lead))
    xs_b, pos_b = y[r], lead[r]
    if 0 < r < n - 1 and area[r - 1] > 0.0 and area[r + 1] > 0.0:
        xs_b, pos_b = vertex(y[r - 1:r + 2], lead[r - 1:r + 2], True)
    if r > 0 and a > 0.0 and xs_b - pos_b > 0.0:
        f_bow = (xs_b - pos_b) / a  # tangency
    else:
        f_bow = float(np.interp(xs_b, y, f)) if r > 0 else f[0]
    trail = y + np.sqrt(2.0 * a * np.maximum(area - a_end, 0.0))
    t = n - 1 - int(np.argmax(trail[::-1]))
    xs_t, pos_t = y[t], trail[t]
    if 0 < t < n - 1 and area[t - 1] > a_end and area[t + 1] > a_end:
        xs_t, pos_t = vertex(y[t - 1:t + 2], trail[t - 1:t + 2], False)
    if t < n - 1 and a > 0.0 and pos_t - xs_t > 0.0:
        f_tail = (xs_t - pos_t) / a  # tangency
    else:
        f_tail = float(np.interp(xs_t, y, f)) if t < n - 1 else f[-1]
    # Lower convex hull of H = -A + y^2/(2a) between the two tangent points.
    hull: list[int] = []
    if r < t:
        for i in range(r, t + 1):
            while len(hull) >= 2 and chord(hull[-2], hull[-1]) >= chord(hull[-1], i):
                hull.pop()
            hull.append(i)
    edges = []  # refined shock edges: (position, F ahead, F behind)
    refined = set()
    for k, (i, j) in enumerate(zip(hull[:-1], hull[1:], strict=True)):
        if j == i + 1:
            continue
        f_behind = f[j]
        if j + 1 <= t:  # far end: minimise the chord position from i
            xs, _ = vertex(y[j - 1:j + 2], [chord(i, m) for m in (j - 1, j, j + 1)], True)
            f_behind = float(np.interp(xs, y, f))
        pos, f_ahead = chord(i, j), f[i]
        if i - 1 >= r and i + 1 < j:  # near end: maximise the chord position towards j
            xs, pos = vertex(y[i - 1:i + 2], [chord(m, j) for m in (i - 1, i, i + 1)], False)
            f_ahead = float(np.interp(xs, y, f))
        edges.append((pos, f_ahead, f_behind))
        refined.update((k, k + 1))
    values = [f_bow, f_tail] + [v for e in edges for v in e[1:]]
    values += [float(f[hull[k]]) for k in range(1, len(hull) - 1) if k not in refined]
    f_max, f_min = max(values), min(values)
    tol = INTERIOR_SHOCK_MIN_FRACTION * max(abs(f_max), abs(f_min))
    shocks = [(pos_b, 0.0, f_bow)]
    shocks += [e for e in edges if e[2] - e[1] > tol]
    if len(shocks) == 1 or -f_tail > tol:
        shocks.append((pos_t, f_tail, 0.0))
    # Shocks about to coalesce may come out of order after refinement: merge them.
    k = 1
    while k < len(shocks) and len(shocks) > 2:
        (p1, a1, b1), (p2, a2, b2) = shocks[k - 1], shocks[k]
        if p2 < p1:
            w1, w2 = abs(b1 - a1), abs(b2 - a2)
            pos = 0.5 * (p1 + p2) if w1 + w2 == 0.0 else (w1 * p1 + w2 * p2) / (w1 + w2)
            shocks[k - 1:k + 1] = [(pos, a1, b2)]
            k = max(k - 1, 1)
        else:
            k += 1
    return np.array(shocks, dtype=float), float(f_max), float(f_min)


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
                         area: np.ndarray | None = None, use_numba: bool = True) -> ShockFit:
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
        omitted (pass the exact one from :func:`f_function_abel` when available).
    use_numba : bool
        Use :func:`shock_fit_kernel` (default) or its Python twin.
    """
    y = np.ascontiguousarray(y, dtype=np.float64)
    f = np.ascontiguousarray(f, dtype=np.float64)
    if area is None:
        area = np.concatenate([[0.0], np.cumsum(0.5 * (f[1:] + f[:-1]) * np.diff(y))])
    area = np.ascontiguousarray(area, dtype=np.float64)
    if use_numba:
        out = np.empty((y.size + 2, 3))
        rows, f_max, f_min = shock_fit_kernel(y, f, area, float(age), out)
        shocks = out[:rows]
    else:
        shocks, f_max, f_min = shock_fit_python(y, f, area, age)
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


# --------------------------------------------------------------------------------------
# Ground signature
# --------------------------------------------------------------------------------------


class SignatureError(ValueError):
    """Bad input to the signature functions; the message names the field and value."""


@dataclass(frozen=True)
class Signature:
    """Boom at the ground end of one ray (SI; finite, never NaN).

    Attributes
    ----------
    overpressure_pa : float
        Peak overpressure including ground reflection, Pa (>= 0).
    bow_shock_pa, tail_shock_pa : float
        Pressure jumps across the bow and tail shocks, Pa (>= 0).
    duration_s : float
        Time between bow and tail shocks, s.
    arrival_s : float
        Bow-shock arrival after the nose passed the emission point, s.
    reaches_ground : bool
        False when the ray turns before the ground (all values zero).
    caustic : bool
        The ray tube collapsed at the ground (G not finite); values use the last
        level with a finite G.
    edge : bool
        Near the lateral cutoff: the ray grazes the ground (sine of the grazing angle
        below :data:`EDGE_GRAZING_SINE`) or does not reach it.
    interior_shocks : int
        Shocks between bow and tail.
    age_m05 : float
        Age ``a`` of the F-curve at the ground, m^0.5.
    """

    overpressure_pa: float
    bow_shock_pa: float
    tail_shock_pa: float
    duration_s: float
    arrival_s: float
    reaches_ground: bool
    caustic: bool
    edge: bool
    interior_shocks: int = 0
    age_m05: float = 0.0


def _no_boom(arrival: float = 0.0) -> Signature:
    return Signature(0.0, 0.0, 0.0, 0.0, arrival, False, False, True, 0, 0.0)


def _check(name: str, value: float, lo: float, hi: float) -> float:
    v = float(value)
    if not math.isfinite(v) or not (lo <= v <= hi):
        raise SignatureError(f"{name}: {value!r} is outside [{lo:g}, {hi:g}]")
    return v


def ground_signature(aircraft: Aircraft, ray: RayPath, mach: float, c0: float, p0: float,
                     load_factor: float = 1.0,
                     reflection_factor: float = DEFAULT_REFLECTION_FACTOR,
                     fpa_rad: float = 0.0, use_numba: bool = True) -> Signature:
    """Ground boom of ``aircraft`` at the end of ``ray`` (see the module notes).

    Parameters
    ----------
    aircraft : Aircraft
        Size, weight and area distribution.
    ray : RayPath
        From :meth:`advisory.physics.rays.RayTracer.trace`; its azimuth sets the lift
        factor ``cos(phi)``.
    mach : float
        Mach number at the aircraft (> 1).
    c0, p0 : float
        Sound speed (m/s) and pressure (Pa) at the aircraft.
    load_factor : float
        Lift relative to steady flight (1 in steady flight; 2 in a 60-degree turn).
    reflection_factor : float
        Ground reflection factor, 1-2 (default 1.9; common practice, no source).
    fpa_rad : float
        Flight-path angle, rad (lift ``n W cos(fpa)``).
    use_numba : bool
        Fused numba kernel (default) or the numpy/Python twins.

    Returns
    -------
    Signature
        Zero and ``edge`` when the ray does not reach the ground; flagged finite values
        at a caustic; never NaN.

    Raises
    ------
    SignatureError
        For a Mach number, sound speed, pressure, load factor or reflection factor out
        of range.
    """
    _check("mach", mach, 1.0, 5.0)
    _check("c0", c0, 150.0, 450.0)
    _check("p0", p0, 1.0, 2.0e5)
    _check("load_factor", load_factor, 0.0, 9.0)
    _check("reflection_factor", reflection_factor, *REFLECTION_FACTOR_RANGE)
    if mach <= 1.0 or not ray.reaches_ground or ray.t_s.size < 2:
        return _no_boom()
    parts = f_function_parts(aircraft)
    lift_area = aircraft.lift_area_total(mach, p0, load_factor, fpa_rad, ray.phi_rad)
    omega0 = float(ray.omega[0]) if ray.omega.size else 1.0
    age_scale = mach * c0 / omega0
    g = ray.amplitude_factor
    m = g.size
    if use_numba:
        out = np.empty((parts.y_m.size + 2, 3))
        rows, f_max, f_min, age, last = signature_kernel(
            parts.y_m, parts.f_volume, parts.area_volume, parts.f_lift_unit,
            parts.area_lift_unit, lift_area, ray.t_s, g, ray.density_kgm3,
            ray.sound_speed_mps, m, age_scale, out,
        )
        shocks = out[:rows]
    else:
        integral, last = age_integral_numpy(ray.t_s, g, ray.density_kgm3, ray.sound_speed_mps)
        age = age_scale * integral
        shocks, f_max, f_min = shock_fit_python(
            parts.y_m, parts.f_volume + lift_area * parts.f_lift_unit,
            parts.area_volume + lift_area * parts.area_lift_unit, age,
        )
    if last < 1:
        return _no_boom()
    caustic = last < m - 1
    g_ground = float(g[last])
    gq = float(ray.q[-1] * ray.sound_speed_mps[-1] / ray.omega[-1]) if ray.q.size else 0.0
    edge = caustic or not (gq >= EDGE_GRAZING_SINE)
    k = reflection_factor * g_ground
    to_time = omega0 / (mach * c0)
    bow_y, tail_y = float(shocks[0, 0]), float(shocks[-1, 0])
    values = (
        k * max(float(f_max), 0.0),
        k * max(float(shocks[0, 2] - shocks[0, 1]), 0.0),
        k * max(float(shocks[-1, 2] - shocks[-1, 1]), 0.0),
        max(tail_y - bow_y, 0.0) * to_time,
        float(ray.t_s[last]) + bow_y * to_time,
    )
    if not all(math.isfinite(v) for v in values):
        return Signature(0.0, 0.0, 0.0, 0.0, float(ray.t_s[last]), True, caustic, True, 0,
                         float(age) if math.isfinite(age) else 0.0)
    return Signature(*values, reaches_ground=True, caustic=caustic, edge=edge,
                     interior_shocks=int(shocks.shape[0] - 2), age_m05=float(age))


def focus_amplification(area_steady: float, area_actual: float,
                        cap: float = FOCUS_AMPLIFICATION_CAP) -> float:
    """Bounded focus-boom amplification ``sqrt(area_steady / area_actual)``.

    Linear acoustics scales the amplitude as the inverse square root of the ray-tube
    area (Pierce [6]_ ch. 8), which diverges where the tube collapses (a focus). The
    factor is capped at ``cap`` (default :data:`FOCUS_AMPLIFICATION_CAP` = 5.0, the upper
    end of the 2-5x focus-boom levels commonly quoted; value from memory).

    Parameters
    ----------
    area_steady : float
        Ray-tube area of the steady (unfocused) reference, any unit.
    area_actual : float
        Ray-tube area where the boom is wanted, same unit.
    cap : float
        Upper bound, >= 1.

    Returns
    -------
    float
        In ``[0, cap]``; ``cap`` for a collapsed (<= 0), infinite-ratio or NaN actual
        area, 1.0 when the steady area is unusable; never NaN.
    """
    cap = float(cap) if math.isfinite(cap) and cap >= 1.0 else FOCUS_AMPLIFICATION_CAP
    a_s = float(area_steady)
    a_a = abs(float(area_actual))
    if not math.isfinite(a_s) or a_s <= 0.0:
        return 1.0
    if not math.isfinite(a_a):
        return 0.0 if a_a == math.inf else cap
    if a_a <= 0.0:
        return cap
    ratio = a_s / a_a
    if not math.isfinite(ratio):
        return cap
    return min(math.sqrt(ratio), cap)
