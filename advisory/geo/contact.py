"""First contact of a time-ordered series of ground segments with no-boom zones.

The search behind the conflict check: each carpet cross-section (and the band swept
between two of them) against every zone within its margin, screened by bounding boxes
of zones, segments and runs of edges (:func:`build_edge_chunks`) so that most edges are
never visited. Zones come as the flat arrays of :mod:`advisory.geo.polygons` (built by
:meth:`advisory.pipeline.zones.ZoneSet.project`); coordinates are metres in a
:class:`advisory.geo.frame.LocalFrame` plane.

The numba kernel :func:`first_contact` has an independent numpy twin
(``first_contact_twin`` in ``tests/twins/polygons.py``, every segment against every
edge with no screening), compared in ``tests/test_zones.py`` and checked against
shapely there. Geometry references: see :mod:`advisory.geo.polygons`; box and circle
screening: common practice, no source.
"""

from __future__ import annotations

import math

import numpy as np

from advisory.geo.polygons import _point_segment_dist2, edge_run_near
from advisory.jit import njit

__all__ = ["boxes_overlap", "build_edge_chunks", "first_contact"]


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
def boxes_overlap(x0: float, y0: float, x1: float, y1: float, bbox: np.ndarray, k: int,
                  margin: float) -> bool:
    """Whether the box ``x0..x1, y0..y1`` (m) comes within ``margin`` (m) of zone ``k``'s
    bounding box ``bbox[k]`` (x min, y min, x max, y max) on each axis: a screen that
    never rejects a pair nearer than ``margin`` (an infinite margin accepts every pair)."""
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
    if chunk_size < 1:
        raise ValueError(f"chunk_size: {chunk_size} must be >= 1")
    rs = np.ascontiguousarray(ring_start, dtype=np.int64)
    edges = np.maximum(rs[1:] - rs[:-1] - 1, 0)
    ring_chunk = np.zeros(rs.size, dtype=np.int64)
    np.cumsum((edges + chunk_size - 1) // chunk_size, out=ring_chunk[1:])
    chunk_edges = np.empty((int(ring_chunk[-1]), 2), dtype=np.int64)
    bbox = np.empty((int(ring_chunk[-1]), 4))
    edge_chunks_kernel(np.ascontiguousarray(x, dtype=np.float64),
                       np.ascontiguousarray(y, dtype=np.float64), rs, ring_chunk,
                       int(chunk_size), chunk_edges, bbox)
    return ring_chunk, chunk_edges, bbox


@njit(cache=True)
def edge_chunks_kernel(x, y, ring_start, ring_chunk, chunk_size, chunk_edges, bbox):
    """Fill the chunks of :func:`build_edge_chunks` (``ring_chunk`` already counted).

    Parameters
    ----------
    x, y : ndarray
        float64 (V,) vertices, m (rings closed).
    ring_start, ring_chunk : ndarray
        int64 (R + 1,) ring offsets and offsets of each ring's chunks.
    chunk_size : int
        Edges per chunk.
    chunk_edges : ndarray
        int64 (C, 2) output: first edge and one past the last edge of each chunk.
    bbox : ndarray
        float64 (C, 4) output: ``xmin, ymin, xmax, ymax`` of each chunk's vertices, m.
    """
    for r in range(ring_start.size - 1):
        e0 = ring_start[r]
        e1 = ring_start[r + 1] - 1
        c = ring_chunk[r]
        for c0 in range(e0, e1, chunk_size):
            c1 = min(c0 + chunk_size, e1)
            chunk_edges[c, 0] = c0
            chunk_edges[c, 1] = c1
            x_lo = x_hi = x[c0]
            y_lo = y_hi = y[c0]
            for v in range(c0 + 1, c1 + 1):
                x_lo = min(x_lo, x[v])
                x_hi = max(x_hi, x[v])
                y_lo = min(y_lo, y[v])
                y_hi = max(y_hi, y[v])
            bbox[c, 0] = x_lo
            bbox[c, 1] = y_lo
            bbox[c, 2] = x_hi
            bbox[c, 3] = y_hi
            c += 1


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
                hit, inside = edge_run_near(ax, ay, bx, by, m2, lo_x, hi_x, lo_y, hi_y, x, y,
                                            chunk_edges[c, 0], chunk_edges[c, 1], ray, near,
                                            inside)
                if hit:
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
        if not boxes_overlap(gx0, gy0, gx1, gy1, zone_bbox, k, m):
            continue
        # a vertex of the zone, for the "zone wholly inside a band" case
        v = chunk_edges[ring_chunk[part_start[zone_start[k]]], 0]
        vx = x[v]
        vy = y[v]
        for i in range(n_seg):
            hit = False
            if boxes_overlap(sx0[i], sy0[i], sx1[i], sy1[i], zone_bbox, k, m) and (
                    _circle_near_segment(zone_bbox, k, ax[i], ay[i], bx[i], by[i], m)):
                hit = _near_zone_chunked(ax[i], ay[i], bx[i], by[i], m, x, y, part_start,
                                         zone_start, zone_bbox, ring_chunk, chunk_edges,
                                         chunk_bbox, k)
            if not hit and swept and i > 0 and boxes_overlap(
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
