"""Readable twin of :func:`advisory.pipeline.edge_spread.section_nearest_kernel`: the
cross-section as lists of segments, each segment's nearest point to the zone found by
comparing every candidate pair (segment ends against the zone's edges, the edges' ends
against the segment) and every crossing, vectorised over the zone's edges."""

from __future__ import annotations

import math

import numpy as np

from tests.twins.polygons import _zone_edges, points_in_zone_twin


def _along(px, py, ax, ay, bx, by):
    """Parameter (0..1, clamped) of the point of segment ab nearest each point p."""
    ux, uy = bx - ax, by - ay
    L2 = ux * ux + uy * uy
    safe = np.where(L2 > 0.0, L2, 1.0)
    return np.where(L2 > 0.0, np.clip(((px - ax) * ux + (py - ay) * uy) / safe, 0.0, 1.0),
                    0.0)


def _segment_nearest(ax, ay, bx, by, zone_arrays, k) -> tuple[float, float]:
    """(distance m, u along ab) of segment ab from zone k: 0 at a inside; for a segment
    crossing the boundary, the crossing nearest a."""
    if points_in_zone_twin([ax], [ay], *zone_arrays, k)[0]:
        return 0.0, 0.0
    x0, y0, x1, y1, _ = _zone_edges(*zone_arrays, k)
    ux, uy = bx - ax, by - ay
    ex, ey = x1 - x0, y1 - y0
    den = ux * ey - uy * ex
    with np.errstate(divide="ignore", invalid="ignore"):
        t = ((x0 - ax) * ey - (y0 - ay) * ex) / den
        s = ((x0 - ax) * uy - (y0 - ay) * ux) / den
    hit = (den != 0.0) & (t >= 0.0) & (t <= 1.0) & (s >= 0.0) & (s <= 1.0)
    if hit.any():
        return 0.0, float(t[hit].min())
    # the segment's ends against every edge (u = 0, 1), every edge end against the segment
    cand_u, cand_d = [], []
    for u, (px, py) in ((0.0, (ax, ay)), (1.0, (bx, by))):
        v = _along(np.array([px]), np.array([py]), x0, y0, x1, y1)  # per edge
        d = np.hypot(x0 + v * ex - px, y0 + v * ey - py)
        cand_u.append(np.full(d.size, u))
        cand_d.append(d)
    for qx, qy in ((x0, y0), (x1, y1)):
        u = _along(qx, qy, ax, ay, bx, by)
        cand_u.append(u)
        cand_d.append(np.hypot(ax + u * ux - qx, ay + u * uy - qy))
    d_all, u_all = np.concatenate(cand_d), np.concatenate(cand_u)
    i = int(np.argmin(d_all))
    return float(d_all[i]), float(u_all[i])


def section_nearest_twin(east, north, right, strips, x, y, ring_start, part_start,
                         zone_start, zone) -> tuple[float, float, int]:
    """(distance, offset across the heading, side) of the cross-section's point nearest
    the zone: the centre ray and the strip nodes out to each side, as lists of segments."""
    zone_arrays = (x, y, ring_start, part_start, zone_start)
    c = east.size // 2
    best = (math.inf, 0.0, 0)
    for side in (0, 1):
        nodes = [c] + ([int(j) for j in strips[::-1] if j < c] if side == 0
                       else [int(j) for j in strips if j > c])
        for a, b in zip(nodes[:-1], nodes[1:]):
            if not (math.isfinite(east[a]) and math.isfinite(east[b])):
                break
            d, u = _segment_nearest(east[a], north[a], east[b], north[b], zone_arrays, zone)
            if d < best[0]:
                best = (d, right[a] * (1.0 - u) + right[b] * u, side)
            if d <= 0.0:
                break
    return best
