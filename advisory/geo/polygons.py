"""Planar polygon kernels for no-boom zones: containment, intersection, distance.

All coordinates are metres in a :class:`advisory.geo.frame.LocalFrame` plane. Zones come
as flat arrays (built by :meth:`advisory.pipeline.zones.ZoneSet.project`):

``x, y`` : float64 (V,)
    Vertex coordinates, m. Every ring is stored closed (its last vertex repeats the
    first), so ring ``r`` has the edges ``(j, j + 1)`` for
    ``ring_start[r] <= j < ring_start[r + 1] - 1``.
``ring_start`` : int64 (R + 1,)
    Offsets of the rings into the vertex arrays.
``part_start`` : int64 (P + 1,)
    Offsets of the polygons (parts) into the rings; a part's first ring is its
    exterior, the others are holes.
``zone_start`` : int64 (Z + 1,)
    Offsets of the zones into the parts (a MultiPolygon zone has several parts).
``zone_bbox`` : float64 (Z, 4)
    ``xmin, ymin, xmax, ymax`` of each zone, m.

Inside means inside under the even-odd rule (crossing number) applied per part, so
holes are outside; a zone is the union of its parts. Points on a boundary may go
either way; the distance kernels treat the boundary as distance 0.

Every public ``njit(cache=True)`` kernel has a numpy twin ``<name>_twin`` in
``tests/twins/polygons.py``, written independently (vectorised over edges rather than
looping), compared in ``tests/test_zones.py``; both are checked against shapely there.
The contact search over a series of carpet segments is in :mod:`advisory.geo.contact`.

References
----------
Orientation predicate, segment intersection and the crossing-number point-in-polygon
test: *Computational Geometry in C*, 2nd ed., Cambridge University Press, 1998,
ch. 1 and 7. Point-to-segment distance by clamped projection: common practice, no
source.
"""

from __future__ import annotations

import math

import numpy as np

from advisory.jit import njit

__all__ = [
    "segments_intersect",
    "point_in_zone",
    "points_in_zone",
    "segment_zone_distance",
    "segment_near_zone",
    "edge_run_near",
]


# --------------------------------------------------------------------------------------
# Scalar primitives
# --------------------------------------------------------------------------------------


@njit(cache=True)
def _orient(ax: float, ay: float, bx: float, by: float, cx: float, cy: float) -> float:
    """Twice the signed area of triangle abc (> 0 when c is left of a->b)."""
    return (bx - ax) * (cy - ay) - (by - ay) * (cx - ax)


@njit(cache=True)
def _on_box(ax: float, ay: float, bx: float, by: float, px: float, py: float) -> bool:
    """Whether p lies in the bounding box of segment ab (used for collinear cases)."""
    return min(ax, bx) <= px <= max(ax, bx) and min(ay, by) <= py <= max(ay, by)


@njit(cache=True)
def segments_intersect(ax: float, ay: float, bx: float, by: float,
                       cx: float, cy: float, dx: float, dy: float) -> bool:
    """Whether closed segments ab and cd share a point (touching and overlap count).

    Parameters
    ----------
    ax, ay, bx, by : float
        Ends of the first segment, m.
    cx, cy, dx, dy : float
        Ends of the second segment, m.

    Returns
    -------
    bool
    """
    d1 = _orient(cx, cy, dx, dy, ax, ay)
    d2 = _orient(cx, cy, dx, dy, bx, by)
    d3 = _orient(ax, ay, bx, by, cx, cy)
    d4 = _orient(ax, ay, bx, by, dx, dy)
    if ((d1 > 0.0 and d2 < 0.0) or (d1 < 0.0 and d2 > 0.0)) and (
        (d3 > 0.0 and d4 < 0.0) or (d3 < 0.0 and d4 > 0.0)
    ):
        return True
    if d1 == 0.0 and _on_box(cx, cy, dx, dy, ax, ay):
        return True
    if d2 == 0.0 and _on_box(cx, cy, dx, dy, bx, by):
        return True
    if d3 == 0.0 and _on_box(ax, ay, bx, by, cx, cy):
        return True
    return d4 == 0.0 and _on_box(ax, ay, bx, by, dx, dy)


@njit(cache=True)
def _point_segment_dist2(px: float, py: float, ax: float, ay: float, bx: float, by: float
                         ) -> tuple[float, float]:
    """Squared distance from p to segment ab, and the parameter (0..1) of the foot."""
    ux = bx - ax
    uy = by - ay
    L2 = ux * ux + uy * uy
    t = 0.0
    if L2 > 0.0:
        t = ((px - ax) * ux + (py - ay) * uy) / L2
        t = min(1.0, max(0.0, t))
    qx = ax + t * ux - px
    qy = ay + t * uy - py
    return qx * qx + qy * qy, t


@njit(cache=True)
def _segment_segment_dist2(ax: float, ay: float, bx: float, by: float,
                           cx: float, cy: float, dx: float, dy: float) -> tuple[float, float]:
    """Squared distance between segments ab and cd, and the parameter on ab of the
    closest point (for crossing segments, of the crossing)."""
    if segments_intersect(ax, ay, bx, by, cx, cy, dx, dy):
        ex = bx - ax
        ey = by - ay
        fx = dx - cx
        fy = dy - cy
        den = ex * fy - ey * fx
        u = 0.0
        if den != 0.0:
            u = ((cx - ax) * fy - (cy - ay) * fx) / den
            u = min(1.0, max(0.0, u))
        else:  # collinear overlap: the first shared point along ab
            L2 = ex * ex + ey * ey
            if L2 > 0.0:
                u0 = ((cx - ax) * ex + (cy - ay) * ey) / L2
                u1 = ((dx - ax) * ex + (dy - ay) * ey) / L2
                u = min(1.0, max(0.0, min(u0, u1)))
        return 0.0, u
    best, u = _point_segment_dist2(ax, ay, cx, cy, dx, dy)
    u = 0.0
    d2, _ = _point_segment_dist2(bx, by, cx, cy, dx, dy)
    if d2 < best:
        best = d2
        u = 1.0
    d2, t = _point_segment_dist2(cx, cy, ax, ay, bx, by)
    if d2 < best:
        best = d2
        u = t
    d2, t = _point_segment_dist2(dx, dy, ax, ay, bx, by)
    if d2 < best:
        best = d2
        u = t
    return best, u


# --------------------------------------------------------------------------------------
# Point in polygon
# --------------------------------------------------------------------------------------


@njit(cache=True)
def _point_in_part(px: float, py: float, x: np.ndarray, y: np.ndarray,
                   ring_start: np.ndarray, r0: int, r1: int) -> bool:
    """Even-odd crossing test of p against rings r0..r1-1 (one polygon with holes)."""
    inside = False
    for r in range(r0, r1):
        for j in range(ring_start[r], ring_start[r + 1] - 1):
            yi = y[j]
            yj = y[j + 1]
            if (yi > py) != (yj > py):
                xc = x[j] + (x[j + 1] - x[j]) * (py - yi) / (yj - yi)
                if px < xc:
                    inside = not inside
    return inside


@njit(cache=True)
def point_in_zone(px: float, py: float, x: np.ndarray, y: np.ndarray, ring_start: np.ndarray,
                  part_start: np.ndarray, zone_start: np.ndarray, k: int) -> bool:
    """Whether point p is inside zone k (inside any part, outside its holes).

    Parameters
    ----------
    px, py : float
        The point, m.
    x, y, ring_start, part_start, zone_start : ndarray
        Zone arrays (see the module notes).
    k : int
        Zone index.

    Returns
    -------
    bool
    """
    for p in range(zone_start[k], zone_start[k + 1]):
        if _point_in_part(px, py, x, y, ring_start, part_start[p], part_start[p + 1]):
            return True
    return False


@njit(cache=True)
def points_in_zone(px: np.ndarray, py: np.ndarray, x: np.ndarray, y: np.ndarray,
                   ring_start: np.ndarray, part_start: np.ndarray, zone_start: np.ndarray,
                   k: int) -> np.ndarray:
    """:func:`point_in_zone` over arrays of points; returns a bool array."""
    n = px.shape[0]
    out = np.zeros(n, dtype=np.bool_)
    for i in range(n):
        out[i] = point_in_zone(px[i], py[i], x, y, ring_start, part_start, zone_start, k)
    return out


# --------------------------------------------------------------------------------------
# Segment against zone
# --------------------------------------------------------------------------------------


@njit(cache=True)
def segment_zone_distance(ax: float, ay: float, bx: float, by: float, x: np.ndarray,
                          y: np.ndarray, ring_start: np.ndarray, part_start: np.ndarray,
                          zone_start: np.ndarray, k: int) -> tuple[float, float]:
    """Distance from segment ab to zone k (0 when crossing or inside).

    Parameters
    ----------
    ax, ay, bx, by : float
        Ends of the segment, m.
    x, y, ring_start, part_start, zone_start : ndarray
        Zone arrays (see the module notes).
    k : int
        Zone index.

    Returns
    -------
    distance_m : float
        Shortest distance between the segment and the zone's area, m.
    u : float
        Where along ab (0 at a, 1 at b) the closest point lies; for a segment that
        crosses the boundary, the crossing nearest a; 0 when a lies inside.
    """
    best = math.inf
    best_u = 0.0
    for p in range(zone_start[k], zone_start[k + 1]):
        r0 = part_start[p]
        r1 = part_start[p + 1]
        if _point_in_part(ax, ay, x, y, ring_start, r0, r1):
            return 0.0, 0.0
        for r in range(r0, r1):
            for j in range(ring_start[r], ring_start[r + 1] - 1):
                d2, u = _segment_segment_dist2(ax, ay, bx, by, x[j], y[j], x[j + 1], y[j + 1])
                if d2 < best or (d2 == 0.0 and u < best_u):
                    best = d2
                    best_u = u
    return math.sqrt(best), best_u


@njit(cache=True)
def edge_run_near(ax: float, ay: float, bx: float, by: float, m2: float, lo_x: float,
                  hi_x: float, lo_y: float, hi_y: float, x: np.ndarray, y: np.ndarray,
                  j0: int, j1: int, ray: bool, near: bool, inside: bool) -> tuple[bool, bool]:
    """Edges ``j0 .. j1 - 1`` (edge ``j`` joins vertices ``j`` and ``j + 1``) against
    segment ab: the one edge loop of the margin tests.

    Parameters
    ----------
    ax, ay, bx, by : float
        Ends of the segment, m.
    m2 : float
        Squared contact distance, m^2.
    lo_x, hi_x, lo_y, hi_y : float
        The segment's bounding box grown by the contact distance, m (edges wholly
        outside it are skipped).
    x, y : ndarray
        Vertex coordinates, m.
    j0, j1 : int
        The edge range.
    ray : bool
        Count the crossings of the ray from ``a`` toward +x (even-odd rule).
    near : bool
        Test the edges' distance to the segment.
    inside : bool
        The crossing parity so far.

    Returns
    -------
    hit : bool
        An edge comes within the contact distance (the loop stops there).
    inside : bool
        The crossing parity after these edges.
    """
    for j in range(j0, j1):
        x0 = x[j]
        y0 = y[j]
        x1 = x[j + 1]
        y1 = y[j + 1]
        if ray and ((y0 > ay) != (y1 > ay)):
            if ax < x0 + (x1 - x0) * (ay - y0) / (y1 - y0):
                inside = not inside
        if not near:
            continue
        if (x0 < lo_x and x1 < lo_x) or (x0 > hi_x and x1 > hi_x):
            continue
        if (y0 < lo_y and y1 < lo_y) or (y0 > hi_y and y1 > hi_y):
            continue
        d2, _ = _segment_segment_dist2(ax, ay, bx, by, x0, y0, x1, y1)
        if d2 <= m2:
            return True, inside
    return False, inside


@njit(cache=True)
def segment_near_zone(ax: float, ay: float, bx: float, by: float, margin: float,
                      x: np.ndarray, y: np.ndarray, ring_start: np.ndarray,
                      part_start: np.ndarray, zone_start: np.ndarray, k: int,
                      zone_bbox: np.ndarray) -> bool:
    """Whether segment ab comes within ``margin`` of zone k (crossing or inside counts).

    Faster than :func:`segment_zone_distance` compared with the margin: edges whose
    bounding box is farther than the margin from the segment's are skipped, the loop
    stops at the first edge within the margin, and the inside test of ``a`` runs only
    when ``a`` is within the zone's bounding box.

    Parameters
    ----------
    ax, ay, bx, by : float
        Ends of the segment, m.
    margin : float
        Distance that counts as contact, m (>= 0).
    x, y, ring_start, part_start, zone_start, zone_bbox : ndarray
        Zone arrays (see the module notes).
    k : int
        Zone index.

    Returns
    -------
    bool
    """
    m2 = margin * margin
    lo_x = min(ax, bx) - margin
    hi_x = max(ax, bx) + margin
    lo_y = min(ay, by) - margin
    hi_y = max(ay, by) + margin
    a_in_box = (zone_bbox[k, 0] <= ax <= zone_bbox[k, 2]) and (
        zone_bbox[k, 1] <= ay <= zone_bbox[k, 3])
    for p in range(zone_start[k], zone_start[k + 1]):
        inside = False
        for r in range(part_start[p], part_start[p + 1]):
            hit, inside = edge_run_near(ax, ay, bx, by, m2, lo_x, hi_x, lo_y, hi_y, x, y,
                                        ring_start[r], ring_start[r + 1] - 1, a_in_box, True,
                                        inside)
            if hit:
                return True
        if inside:
            return True
    return False
