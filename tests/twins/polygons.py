"""numpy twins of the polygon kernels (``advisory/geo/polygons.py``) and of the contact
search (``advisory/geo/contact.py``), written independently: vectorised over edges
rather than looping, with no bounding-box screening.
"""

from __future__ import annotations

import numpy as np


def _zone_edges(x, y, ring_start, part_start, zone_start, k):
    """Edges of zone k as arrays x0, y0, x1, y1 plus the part index of each edge."""
    idx = []
    part_of = []
    for p in range(zone_start[k], zone_start[k + 1]):
        for r in range(part_start[p], part_start[p + 1]):
            j = np.arange(ring_start[r], ring_start[r + 1] - 1)
            idx.append(j)
            part_of.append(np.full(j.size, p))
    j = np.concatenate(idx)
    return x[j], y[j], x[j + 1], y[j + 1], np.concatenate(part_of)


def segments_intersect_twin(ax, ay, bx, by, cx, cy, dx, dy) -> np.ndarray:
    """numpy twin of :func:`advisory.geo.polygons.segments_intersect` (broadcasting over arrays)."""
    ax, ay, bx, by, cx, cy, dx, dy = np.broadcast_arrays(
        *(np.asarray(v, dtype=np.float64) for v in (ax, ay, bx, by, cx, cy, dx, dy)))

    def orient(px, py, qx, qy, rx, ry):
        return (qx - px) * (ry - py) - (qy - py) * (rx - px)

    def within(px, py, qx, qy, rx, ry):
        return ((np.minimum(px, qx) <= rx) & (rx <= np.maximum(px, qx))
                & (np.minimum(py, qy) <= ry) & (ry <= np.maximum(py, qy)))

    d1 = orient(cx, cy, dx, dy, ax, ay)
    d2 = orient(cx, cy, dx, dy, bx, by)
    d3 = orient(ax, ay, bx, by, cx, cy)
    d4 = orient(ax, ay, bx, by, dx, dy)
    proper = (np.sign(d1) * np.sign(d2) < 0) & (np.sign(d3) * np.sign(d4) < 0)
    touch = (((d1 == 0) & within(cx, cy, dx, dy, ax, ay))
             | ((d2 == 0) & within(cx, cy, dx, dy, bx, by))
             | ((d3 == 0) & within(ax, ay, bx, by, cx, cy))
             | ((d4 == 0) & within(ax, ay, bx, by, dx, dy)))
    return proper | touch


def points_in_zone_twin(px, py, x, y, ring_start, part_start, zone_start, k) -> np.ndarray:
    """numpy twin of :func:`advisory.geo.polygons.points_in_zone`: crossing counts per
    part, all edges at once."""
    px = np.asarray(px, dtype=np.float64)[:, None]
    py = np.asarray(py, dtype=np.float64)[:, None]
    x0, y0, x1, y1, part = _zone_edges(x, y, ring_start, part_start, zone_start, k)
    straddle = (y0 > py) != (y1 > py)
    with np.errstate(divide="ignore", invalid="ignore"):
        xc = x0 + (x1 - x0) * (py - y0) / (y1 - y0)
    crosses = straddle & (px < xc)
    inside = np.zeros(px.shape[0], dtype=bool)
    for p in np.unique(part):
        inside |= (crosses[:, part == p].sum(axis=1) % 2) == 1
    return inside


def _point_seg_dist2(px, py, ax, ay, bx, by):
    ux = bx - ax
    uy = by - ay
    L2 = ux * ux + uy * uy
    with np.errstate(divide="ignore", invalid="ignore"):
        t = np.where(L2 > 0, ((px - ax) * ux + (py - ay) * uy) / np.where(L2 > 0, L2, 1.0), 0.0)
    t = np.clip(t, 0.0, 1.0)
    return (ax + t * ux - px) ** 2 + (ay + t * uy - py) ** 2


def _seg_edges_dist(ax, ay, bx, by, x0, y0, x1, y1) -> np.ndarray:
    """Distances between segments (S, 1) and edges (1, E): (S, E), m."""
    d2 = np.minimum.reduce([
        _point_seg_dist2(ax, ay, x0, y0, x1, y1),
        _point_seg_dist2(bx, by, x0, y0, x1, y1),
        _point_seg_dist2(x0, y0, ax, ay, bx, by),
        _point_seg_dist2(x1, y1, ax, ay, bx, by),
    ])
    d2 = np.where(segments_intersect_twin(ax, ay, bx, by, x0, y0, x1, y1), 0.0, d2)
    return np.sqrt(d2)


def segment_zone_distance_twin(ax, ay, bx, by, x, y, ring_start, part_start, zone_start,
                             k) -> float:
    """numpy twin of :func:`advisory.geo.polygons.segment_zone_distance` (distance only), m."""
    x0, y0, x1, y1, _ = _zone_edges(x, y, ring_start, part_start, zone_start, k)
    if points_in_zone_twin([ax], [ay], x, y, ring_start, part_start, zone_start, k)[0]:
        return 0.0
    return float(_seg_edges_dist(ax, ay, bx, by, x0, y0, x1, y1).min())


def segment_near_zone_twin(ax, ay, bx, by, margin, x, y, ring_start, part_start, zone_start,
                         k) -> bool:
    """numpy twin of :func:`advisory.geo.polygons.segment_near_zone`."""
    return segment_zone_distance_twin(ax, ay, bx, by, x, y, ring_start, part_start,
                                    zone_start, k) <= margin


def first_contact_twin(ax, ay, bx, by, x, y, ring_start, part_start, zone_start, margin,
                     swept) -> np.ndarray:
    """numpy twin of :func:`advisory.geo.contact.first_contact`: every segment against
    every edge, no screening."""
    ax, ay, bx, by = (np.asarray(v, dtype=np.float64) for v in (ax, ay, bx, by))
    n_zone = len(zone_start) - 1
    out = np.full(n_zone, -1, dtype=np.int64)
    for k in range(n_zone):
        x0, y0, x1, y1, _ = _zone_edges(x, y, ring_start, part_start, zone_start, k)
        e = (x0[None, :], y0[None, :], x1[None, :], y1[None, :])
        d = _seg_edges_dist(ax[:, None], ay[:, None], bx[:, None], by[:, None], *e).min(1)
        a_in = points_in_zone_twin(ax, ay, x, y, ring_start, part_start, zone_start, k)
        hit = (d <= margin[k]) | a_in
        if swept and ax.size > 1:
            dl = _seg_edges_dist(ax[:-1, None], ay[:-1, None], ax[1:, None], ay[1:, None],
                                    *e).min(1)
            dr = _seg_edges_dist(bx[:-1, None], by[:-1, None], bx[1:, None], by[1:, None],
                                    *e).min(1)
            vx = x[ring_start[part_start[zone_start[k]]]]
            vy = y[ring_start[part_start[zone_start[k]]]]
            qx = np.stack([ax[:-1], bx[:-1], bx[1:], ax[1:]], axis=1)  # (S-1, 4)
            qy = np.stack([ay[:-1], by[:-1], by[1:], ay[1:]], axis=1)
            qx2 = np.roll(qx, -1, axis=1)
            qy2 = np.roll(qy, -1, axis=1)
            with np.errstate(divide="ignore", invalid="ignore"):
                xc = qx + (qx2 - qx) * (vy - qy) / (qy2 - qy)
            crossing = ((qy > vy) != (qy2 > vy)) & (vx < xc)
            in_band = crossing.sum(axis=1) % 2 == 1
            hit[1:] |= (dl <= margin[k]) | (dr <= margin[k]) | in_band
        first = np.flatnonzero(hit)
        if first.size:
            out[k] = first[0]
    return out
