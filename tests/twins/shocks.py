"""Twins of the ageing and shock-fit kernels in :mod:`advisory.physics.shocks`: the age
integral vectorised with numpy, the equal-area shock fit as a plain-Python hull."""

from __future__ import annotations

import math

import numpy as np

from advisory.physics.atmosphere import GAMMA
from advisory.physics.shocks import INTERIOR_SHOCK_MIN_FRACTION


def age_integral_twin(t: np.ndarray, g: np.ndarray, rho: np.ndarray, c: np.ndarray,
                      m: int) -> tuple[float, int]:
    """Twin of ``age_integral_kernel`` (same scheme, vectorised over the levels)."""
    t = np.asarray(t[:m], dtype=float)
    g = np.asarray(g[:m], dtype=float)
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


def shock_fit_twin(y: np.ndarray, f: np.ndarray, area: np.ndarray, age: float,
                   out: np.ndarray) -> tuple[int, float, float]:
    """Plain-Python twin of ``shock_fit_kernel`` (same construction, readable).

    Fills ``out[:rows]`` with one row per shock (position, F ahead, F behind; front to
    back) and returns ``(rows, f_max, f_min)``.
    """
    shocks, f_max, f_min = _shock_fit(y, f, area, age)
    out[: shocks.shape[0]] = shocks
    return shocks.shape[0], f_max, f_min


def _shock_fit(y: np.ndarray, f: np.ndarray, area: np.ndarray,
               age: float) -> tuple[np.ndarray, float, float]:
    """The construction of :func:`shock_fit_twin`; returns (shocks, f_max, f_min).

    One function from tangents to hull to merge (a little over 80 lines), like the
    kernel, so that a reader follows the construction top to bottom.
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


def signature_twin(y, fv, av, fl, al, lift_area, t, g, rho, c, m, age_scale,
                   out) -> tuple[int, float, float, float, int]:
    """Twin of ``signature_kernel``: F of the ray, age integral, shock fit."""
    f = fv + lift_area * fl
    area = av + lift_area * al
    integral, last = age_integral_twin(t, g, rho, c, m)
    age = age_scale * integral
    rows, f_max, f_min = shock_fit_twin(y, f, area, age, out)
    return rows, f_max, f_min, age, last
