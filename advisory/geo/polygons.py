"""Planar polygon kernels for no-boom zones: containment, intersection, distance, contact.

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

Every ``njit(cache=True)`` kernel has a numpy twin named ``*_np`` written
independently (vectorised over edges rather than looping), compared in
``tests/test_zones.py``; both are checked against shapely there.

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
    "segments_intersect_np",
    "point_in_zone",
    "points_in_zone",
    "points_in_zone_np",
    "segment_zone_distance",
    "segment_zone_distance_np",
    "segment_near_zone",
    "segment_near_zone_np",
    "build_edge_chunks",
    "first_contact",
    "first_contact_np",
    "ring_self_intersection",
    "ring_self_intersection_np",
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
            for j in range(ring_start[r], ring_start[r + 1] - 1):
                x0 = x[j]
                y0 = y[j]
                x1 = x[j + 1]
                y1 = y[j + 1]
                if a_in_box and ((y0 > ay) != (y1 > ay)):
                    if ax < x0 + (x1 - x0) * (ay - y0) / (y1 - y0):
                        inside = not inside
                if (x0 < lo_x and x1 < lo_x) or (x0 > hi_x and x1 > hi_x):
                    continue
                if (y0 < lo_y and y1 < lo_y) or (y0 > hi_y and y1 > hi_y):
                    continue
                d2, _ = _segment_segment_dist2(ax, ay, bx, by, x0, y0, x1, y1)
                if d2 <= m2:
                    return True
        if inside:
            return True
    return False


@njit(cache=True)
def _circle_near_segment(bbox: np.ndarray, c: int, ax: float, ay: float, bx: float,
                         by: float, margin: float) -> bool:
    """Whether segment ab comes within ``margin`` of the circle around box ``c``."""
    hx = 0.5 * (bbox[c, 2] - bbox[c, 0])
    hy = 0.5 * (bbox[c, 3] - bbox[c, 1])
    d2, _ = _point_segment_dist2(bbox[c, 0] + hx, bbox[c, 1] + hy, ax, ay, bx, by)
    reach = margin + math.sqrt(hx * hx + hy * hy)
    return d2 <= reach * reach


@njit(cache=True)
def _boxes_overlap(x0: float, y0: float, x1: float, y1: float, bbox: np.ndarray, k: int,
                   margin: float) -> bool:
    return not (x1 + margin < bbox[k, 0] or x0 - margin > bbox[k, 2]
                or y1 + margin < bbox[k, 1] or y0 - margin > bbox[k, 3])


@njit(cache=True)
def _point_in_quad(px: float, py: float, qx: np.ndarray, qy: np.ndarray) -> bool:
    inside = False
    for j in range(4):
        i2 = (j + 1) % 4
        if (qy[j] > py) != (qy[i2] > py):
            if px < qx[j] + (qx[i2] - qx[j]) * (py - qy[j]) / (qy[i2] - qy[j]):
                inside = not inside
    return inside


def build_edge_chunks(x: np.ndarray, y: np.ndarray, ring_start: np.ndarray,
                      chunk_size: int = 8) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Group each ring's edges into runs of ``chunk_size`` with their bounding boxes.

    The chunks let :func:`first_contact` skip most edges of a nearby zone with one box
    test per run.

    Parameters
    ----------
    x, y : ndarray
        float64 (V,) vertices, m (rings closed).
    ring_start : ndarray
        int64 (R + 1,) ring offsets.
    chunk_size : int
        Edges per chunk (>= 1).

    Returns
    -------
    ring_chunk : ndarray
        int64 (R + 1,) offsets of each ring's chunks.
    chunk_edges : ndarray
        int64 (C, 2) first edge and one past the last edge of each chunk (edge ``j``
        joins vertices ``j`` and ``j + 1``).
    chunk_bbox : ndarray
        float64 (C, 4) ``xmin, ymin, xmax, ymax`` of each chunk, m.
    """
    starts = []
    ends = []
    ring_chunk = [0]
    for r in range(len(ring_start) - 1):
        e0 = int(ring_start[r])
        e1 = int(ring_start[r + 1]) - 1
        for c0 in range(e0, e1, chunk_size):
            starts.append(c0)
            ends.append(min(c0 + chunk_size, e1))
        ring_chunk.append(len(starts))
    chunk_edges = np.array([starts, ends], dtype=np.int64).T.reshape(-1, 2).copy()
    bbox = np.empty((len(starts), 4))
    for c, (c0, c1) in enumerate(zip(starts, ends, strict=True)):
        xs = x[c0:c1 + 1]
        ys = y[c0:c1 + 1]
        bbox[c] = (xs.min(), ys.min(), xs.max(), ys.max())
    return np.asarray(ring_chunk, dtype=np.int64), chunk_edges, bbox


@njit(cache=True)
def _near_zone_chunked(ax: float, ay: float, bx: float, by: float, margin: float,
                       x: np.ndarray, y: np.ndarray, part_start: np.ndarray,
                       zone_start: np.ndarray, zone_bbox: np.ndarray, ring_chunk: np.ndarray,
                       chunk_edges: np.ndarray, chunk_bbox: np.ndarray, k: int) -> bool:
    """:func:`segment_near_zone` screening edges by chunk bounding boxes first."""
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
            for c in range(ring_chunk[r], ring_chunk[r + 1]):
                near = not (chunk_bbox[c, 2] < lo_x or chunk_bbox[c, 0] > hi_x
                            or chunk_bbox[c, 3] < lo_y or chunk_bbox[c, 1] > hi_y)
                if near:  # boxes overlap; now the segment against the box's circle
                    near = _circle_near_segment(chunk_bbox, c, ax, ay, bx, by, margin)
                ray = a_in_box and (chunk_bbox[c, 1] <= ay <= chunk_bbox[c, 3]) and (
                    chunk_bbox[c, 2] >= ax)
                if not (near or ray):
                    continue
                for j in range(chunk_edges[c, 0], chunk_edges[c, 1]):
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
                        return True
        if inside:
            return True
    return False


@njit(cache=True)
def first_contact(ax: np.ndarray, ay: np.ndarray, bx: np.ndarray, by: np.ndarray,
                  x: np.ndarray, y: np.ndarray, part_start: np.ndarray, zone_start: np.ndarray,
                  zone_bbox: np.ndarray, ring_chunk: np.ndarray, chunk_edges: np.ndarray,
                  chunk_bbox: np.ndarray, margin: np.ndarray, swept: bool) -> np.ndarray:
    """For each zone, the first of a time-ordered series of ground segments to touch it.

    Segment ``i`` runs from ``(ax[i], ay[i])`` to ``(bx[i], by[i])`` (e.g. the carpet
    cross-section of emission point ``i``, left edge to right edge). A zone is touched
    when the segment comes within the zone's margin of it (crossing or inside counts).
    With ``swept`` the band between segments ``i - 1`` and ``i`` (the quadrilateral of
    their ends) also counts for ``i``, so a zone small enough to slip between two
    cross-sections is still caught: contact then happened no later than segment ``i``.
    (Where successive segments cross, as inside a tight turn, the band is a bow-tie and
    only approximately the swept ground.)

    Cost: a zone whose margin-expanded bounding box misses the box of all segments costs
    one comparison; otherwise each segment is screened by box, then runs of edges by
    :func:`build_edge_chunks` boxes, then single edges; each zone stops at its first
    contact.

    Parameters
    ----------
    ax, ay, bx, by : ndarray
        float64 (S,) segment ends, m, in time order.
    x, y, part_start, zone_start, zone_bbox : ndarray
        Zone arrays (see the module notes).
    ring_chunk, chunk_edges, chunk_bbox : ndarray
        Edge chunks from :func:`build_edge_chunks`.
    margin : ndarray
        float64 (Z,) contact distance per zone, m.
    swept : bool
        Also test the band between consecutive segments.

    Returns
    -------
    ndarray
        int64 (Z,) index of the first touching segment per zone, -1 for none.
    """
    n_zone = zone_start.shape[0] - 1
    n_seg = ax.shape[0]
    out = np.full(n_zone, -1, dtype=np.int64)
    if n_seg == 0:
        return out
    sx0 = np.empty(n_seg)
    sy0 = np.empty(n_seg)
    sx1 = np.empty(n_seg)
    sy1 = np.empty(n_seg)
    for i in range(n_seg):
        sx0[i] = min(ax[i], bx[i])
        sx1[i] = max(ax[i], bx[i])
        sy0[i] = min(ay[i], by[i])
        sy1[i] = max(ay[i], by[i])
    gx0 = sx0.min()
    gx1 = sx1.max()
    gy0 = sy0.min()
    gy1 = sy1.max()
    qx = np.empty(4)
    qy = np.empty(4)
    for k in range(n_zone):
        m = margin[k]
        if not _boxes_overlap(gx0, gy0, gx1, gy1, zone_bbox, k, m):
            continue
        # a vertex of the zone, for the "zone wholly inside a band" case
        v = chunk_edges[ring_chunk[part_start[zone_start[k]]], 0]
        vx = x[v]
        vy = y[v]
        for i in range(n_seg):
            hit = False
            if _boxes_overlap(sx0[i], sy0[i], sx1[i], sy1[i], zone_bbox, k, m) and (
                    _circle_near_segment(zone_bbox, k, ax[i], ay[i], bx[i], by[i], m)):
                hit = _near_zone_chunked(ax[i], ay[i], bx[i], by[i], m, x, y, part_start,
                                         zone_start, zone_bbox, ring_chunk, chunk_edges,
                                         chunk_bbox, k)
            if not hit and swept and i > 0 and _boxes_overlap(
                min(sx0[i], sx0[i - 1]), min(sy0[i], sy0[i - 1]),
                max(sx1[i], sx1[i - 1]), max(sy1[i], sy1[i - 1]), zone_bbox, k, m,
            ):
                if _circle_near_segment(zone_bbox, k, ax[i - 1], ay[i - 1], ax[i], ay[i], m):
                    hit = _near_zone_chunked(ax[i - 1], ay[i - 1], ax[i], ay[i], m, x, y,
                                             part_start, zone_start, zone_bbox, ring_chunk,
                                             chunk_edges, chunk_bbox, k)
                if not hit and _circle_near_segment(zone_bbox, k, bx[i - 1], by[i - 1], bx[i],
                                                    by[i], m):
                    hit = _near_zone_chunked(bx[i - 1], by[i - 1], bx[i], by[i], m, x, y,
                                             part_start, zone_start, zone_bbox, ring_chunk,
                                             chunk_edges, chunk_bbox, k)
                if not hit:
                    qx[0] = ax[i - 1]
                    qy[0] = ay[i - 1]
                    qx[1] = bx[i - 1]
                    qy[1] = by[i - 1]
                    qx[2] = bx[i]
                    qy[2] = by[i]
                    qx[3] = ax[i]
                    qy[3] = ay[i]
                    hit = _point_in_quad(vx, vy, qx, qy)
            if hit:
                out[k] = i
                break
    return out


# --------------------------------------------------------------------------------------
# Ring validity
# --------------------------------------------------------------------------------------


@njit(cache=True)
def ring_self_intersection(x: np.ndarray, y: np.ndarray) -> tuple[int, int]:
    """First pair of edges of a closed ring that meet where they should not.

    Non-adjacent edges must not share any point; adjacent edges must share only their
    common vertex (no fold-back). Consecutive duplicate vertices must have been removed.
    A sweep over edges sorted by their smallest x keeps this near O(n log n) for
    ordinary rings.

    Parameters
    ----------
    x, y : ndarray
        float64 (n,) closed ring (``x[-1] == x[0]``), any units.

    Returns
    -------
    (i, j) : tuple of int
        Indices of the offending edges (edge ``i`` joins vertices ``i`` and ``i + 1``),
        ``i < j``; ``(-1, -1)`` when the ring is simple.
    """
    ne = x.shape[0] - 1
    xmin = np.empty(ne)
    for e in range(ne):
        xmin[e] = min(x[e], x[e + 1])
    order = np.argsort(xmin)
    bi = -1
    bj = -1
    for oi in range(ne):
        i = order[oi]
        xmax_i = max(x[i], x[i + 1])
        ymin_i = min(y[i], y[i + 1])
        ymax_i = max(y[i], y[i + 1])
        for oj in range(oi + 1, ne):
            j = order[oj]
            if xmin[j] > xmax_i:
                break
            if min(y[j], y[j + 1]) > ymax_i or max(y[j], y[j + 1]) < ymin_i:
                continue
            a = min(i, j)
            b = max(i, j)
            if b == a + 1 or (a == 0 and b == ne - 1):
                # adjacent: shared vertex v; bad only if they fold back onto each other
                if b == a + 1:
                    vx, vy = x[b], y[b]
                    px, py = x[a], y[a]
                    qx, qy = x[b + 1], y[b + 1]
                else:
                    vx, vy = x[0], y[0]
                    px, py = x[1], y[1]
                    qx, qy = x[ne - 1], y[ne - 1]
                if ne == 2 or (_orient(px, py, vx, vy, qx, qy) == 0.0
                               and (px - vx) * (qx - vx) + (py - vy) * (qy - vy) > 0.0):
                    bad = True
                else:
                    bad = False
            else:
                bad = segments_intersect(x[a], y[a], x[a + 1], y[a + 1],
                                         x[b], y[b], x[b + 1], y[b + 1])
            if bad and (bi < 0 or a < bi or (a == bi and b < bj)):
                bi = a
                bj = b
    return bi, bj


# --------------------------------------------------------------------------------------
# numpy twins (independent, vectorised over edges)
# --------------------------------------------------------------------------------------


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


def segments_intersect_np(ax, ay, bx, by, cx, cy, dx, dy) -> np.ndarray:
    """numpy twin of :func:`segments_intersect` (broadcasting over arrays)."""
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


def points_in_zone_np(px, py, x, y, ring_start, part_start, zone_start, k) -> np.ndarray:
    """numpy twin of :func:`points_in_zone`: crossing counts per part, all edges at once."""
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


def _point_seg_dist2_np(px, py, ax, ay, bx, by):
    ux = bx - ax
    uy = by - ay
    L2 = ux * ux + uy * uy
    with np.errstate(divide="ignore", invalid="ignore"):
        t = np.where(L2 > 0, ((px - ax) * ux + (py - ay) * uy) / np.where(L2 > 0, L2, 1.0), 0.0)
    t = np.clip(t, 0.0, 1.0)
    return (ax + t * ux - px) ** 2 + (ay + t * uy - py) ** 2


def _seg_edges_dist_np(ax, ay, bx, by, x0, y0, x1, y1) -> np.ndarray:
    """Distances between segments (S, 1) and edges (1, E): (S, E), m."""
    d2 = np.minimum.reduce([
        _point_seg_dist2_np(ax, ay, x0, y0, x1, y1),
        _point_seg_dist2_np(bx, by, x0, y0, x1, y1),
        _point_seg_dist2_np(x0, y0, ax, ay, bx, by),
        _point_seg_dist2_np(x1, y1, ax, ay, bx, by),
    ])
    d2 = np.where(segments_intersect_np(ax, ay, bx, by, x0, y0, x1, y1), 0.0, d2)
    return np.sqrt(d2)


def segment_zone_distance_np(ax, ay, bx, by, x, y, ring_start, part_start, zone_start,
                             k) -> float:
    """numpy twin of :func:`segment_zone_distance` (distance only), m."""
    x0, y0, x1, y1, _ = _zone_edges(x, y, ring_start, part_start, zone_start, k)
    if points_in_zone_np([ax], [ay], x, y, ring_start, part_start, zone_start, k)[0]:
        return 0.0
    return float(_seg_edges_dist_np(ax, ay, bx, by, x0, y0, x1, y1).min())


def segment_near_zone_np(ax, ay, bx, by, margin, x, y, ring_start, part_start, zone_start,
                         k) -> bool:
    """numpy twin of :func:`segment_near_zone`."""
    return segment_zone_distance_np(ax, ay, bx, by, x, y, ring_start, part_start,
                                    zone_start, k) <= margin


def first_contact_np(ax, ay, bx, by, x, y, ring_start, part_start, zone_start, margin,
                     swept) -> np.ndarray:
    """numpy twin of :func:`first_contact`: every segment against every edge, no screening."""
    ax, ay, bx, by = (np.asarray(v, dtype=np.float64) for v in (ax, ay, bx, by))
    n_zone = len(zone_start) - 1
    out = np.full(n_zone, -1, dtype=np.int64)
    for k in range(n_zone):
        x0, y0, x1, y1, _ = _zone_edges(x, y, ring_start, part_start, zone_start, k)
        e = (x0[None, :], y0[None, :], x1[None, :], y1[None, :])
        d = _seg_edges_dist_np(ax[:, None], ay[:, None], bx[:, None], by[:, None], *e).min(1)
        a_in = points_in_zone_np(ax, ay, x, y, ring_start, part_start, zone_start, k)
        hit = (d <= margin[k]) | a_in
        if swept and ax.size > 1:
            dl = _seg_edges_dist_np(ax[:-1, None], ay[:-1, None], ax[1:, None], ay[1:, None],
                                    *e).min(1)
            dr = _seg_edges_dist_np(bx[:-1, None], by[:-1, None], bx[1:, None], by[1:, None],
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


def ring_self_intersection_np(x, y) -> tuple[int, int]:
    """numpy twin of :func:`ring_self_intersection`: all edge pairs at once."""
    x = np.asarray(x, dtype=np.float64)
    y = np.asarray(y, dtype=np.float64)
    ne = x.size - 1
    i, j = np.triu_indices(ne, k=1)
    adjacent = (j == i + 1) | ((i == 0) & (j == ne - 1))
    hit = segments_intersect_np(x[i], y[i], x[i + 1], y[i + 1], x[j], y[j], x[j + 1], y[j + 1])
    # adjacent edges: the shared vertex v with the far ends p, q; fold-back when collinear
    # and pointing the same way from v
    seq = j == i + 1
    v = np.where(seq, j, 0)
    p = np.where(seq, i, 1)
    q = np.where(seq, j + 1, ne - 1)
    cross = (x[v] - x[p]) * (y[q] - y[p]) - (y[v] - y[p]) * (x[q] - x[p])
    dot = (x[p] - x[v]) * (x[q] - x[v]) + (y[p] - y[v]) * (y[q] - y[v])
    fold = (cross == 0) & (dot > 0)
    if ne == 2:
        fold[:] = True
    bad = np.where(adjacent, fold, hit)
    k = np.flatnonzero(bad)
    if k.size == 0:
        return -1, -1
    return int(i[k[0]]), int(j[k[0]])
