"""Conflict search: the first contact of the predicted boom carpet with each zone.

The carpet is cut into strips between the azimuth nodes ``strip_nodes``; each strip is a
series of ground segments over emission time, tested against the zones (within each
zone's margin, the band between successive emissions included; see
:func:`advisory.geo.contact.first_contact`). A zone with an overpressure limit is tested
only against strip segments where the focus-amplified overpressure somewhere across the
strip (its two end nodes and every azimuth node between them) exceeds the limit
(conservative); zones sharing a limit are searched together. Emissions whose booms have
all arrived (arrival time before now) are left out.

Before, only the two end nodes were read: in a turn the carpet's loudest ray lies off
the track, between two strip nodes, and a zone whose limit lay between the nodes' 1.37
psf and that ray's 1.38 psf (the truth's direct tracing: 1.380) was not found until a
boom was on its way (campaign --known, seed 1, encounter 513: the first alert 2.2 s
after the first boom into the zone was emitted, where the truth's act-by asked for one
by 50.0 s).

A resolution's trial asks a finer question: whether its booms stay under the limit
where the carpet meets the zone. It searches the stretches between neighbouring nodes of
its carpet (kept at some azimuth nodes only, :func:`advisory.pipeline.trial.trial_nodes`)
with ``loud_part``: each segment is cut to the part where the overpressure, taken as
linear between the segment's two nodes, exceeds the limit, so a zone touched only by the
strip's quieter end is clear. Before, a trial read a zone near the carpet's edge at the
strip's louder node: campaign --known, seed 1, encounter 8 (limit 0.77 psf, held to 90 %:
0.693) read 0.82 psf between nodes of 0.44 and 0.81 psf, no trial cleared and nothing was
offered, where the truth's slow-down with a right turn keeps 0.66 psf in the zone. The
warning itself keeps the whole strip (conservative). Linear between two nodes: common
practice, no source; whether it under-reads is measured by the campaign's "offered
resolutions that held".

The numba kernel :func:`conflict_kernel` has a readable numpy twin
(``find_conflicts_twin`` in ``tests/twins/conflicts.py``) compared in
``tests/test_advisor.py``. Interpolating the contact between two emissions: common
practice, no source.
"""

from __future__ import annotations

import math

import numpy as np

from advisory.geo import contact
from advisory.geo.polygons import segment_zone_distance
from advisory.jit import njit
from advisory.pipeline.footprint import CarpetPrediction
from advisory.pipeline.results import Conflict
from advisory.pipeline.zones import ProjectedZones, ZoneSet

__all__ = ["find_conflicts", "conflicts_from", "conflict_kernel", "split_conflicts",
           "soonest_per_zone", "prediction_part"]


def find_conflicts(pred: CarpetPrediction, pz: ProjectedZones, zones: ZoneSet,
                   strip_nodes: np.ndarray, focus_threshold: float,
                   first_only: bool = False) -> list[Conflict]:
    """Zones the predicted carpet reaches, soonest first (numba kernel; see the twin)."""
    on_ground = pred.on_ground
    return _find(pred, on_ground, _effective(pred, on_ground), 0, on_ground.size, pz, zones,
                 np.ascontiguousarray(strip_nodes, dtype=np.int64), focus_threshold,
                 first_only)


def _effective(pred: CarpetPrediction, on_ground: np.ndarray) -> np.ndarray:
    """:attr:`CarpetPrediction.effective_overpressure_pa`, with ``on_ground`` given."""
    return np.where(on_ground[:, None], pred.overpressure_pa * pred.focus_factor, 0.0)


def _find(pred: CarpetPrediction, on_ground: np.ndarray, eff: np.ndarray, start: int,
          stop: int, pz: ProjectedZones, zones: ZoneSet, nodes: np.ndarray,
          focus_threshold: float, first_only: bool = False) -> list[Conflict]:
    """:func:`find_conflicts` of the emissions ``start:stop`` (row views: the kernel sees
    the same arrays as on :func:`prediction_part`), with the prediction's ``on_ground``,
    effective overpressure ``eff`` and int64 strip ``nodes`` computed once by the
    caller."""
    n_zones = len(pz)
    ground = on_ground[start:stop]
    if n_zones == 0 or not ground.any():
        return []
    best_t = np.full(n_zones, np.inf)
    best_dp = np.zeros(n_zones)
    best_focus = np.zeros(n_zones, dtype=np.bool_)
    best_k = np.full(n_zones, -1, dtype=np.int64)
    conflict_kernel(
        pred.east_m[start:stop], pred.north_m[start:stop], pred.arrival_s[start:stop],
        eff[start:stop], pred.focus_factor[start:stop], ground, nodes,
        pz.x, pz.y, pz.ring_start, pz.part_start, pz.zone_start, pz.zone_bbox, pz.ring_chunk,
        pz.chunk_edges, pz.chunk_bbox, pz.margin_m, pz.limit_pa, float(focus_threshold),
        bool(first_only), False, best_t, best_dp, best_focus, best_k,
    )
    return conflicts_from(zones, best_t, best_dp, best_focus, best_k + start)


def prediction_part(pred: CarpetPrediction, start: int, stop: int) -> CarpetPrediction:
    """The emissions ``start:stop`` of a prediction (views)."""
    sl = slice(start, stop)
    return CarpetPrediction(
        t_emit_s=pred.t_emit_s[sl], codes=pred.codes[sl], cutoff_mach=pred.cutoff_mach[sl],
        east_m=pred.east_m[sl], north_m=pred.north_m[sl], arrival_s=pred.arrival_s[sl],
        overpressure_pa=pred.overpressure_pa[sl], duration_s=pred.duration_s[sl],
        focus_factor=pred.focus_factor[sl], edge_flag=pred.edge_flag[sl],
    )


def split_conflicts(pred: CarpetPrediction, pz: ProjectedZones, zones: ZoneSet,
                    strip_nodes: np.ndarray, focus_threshold: float, fixed_s: float
                    ) -> tuple[list[Conflict], list[Conflict]]:
    """Conflicts of the booms emitted up to ``fixed_s`` (s after the state: the past and
    the reaction time, which no action changes) and of the later ones, each soonest first
    (:func:`soonest_per_zone` joins them).

    The two parts are searched apart, so the band between the last fixed and the first
    later emission (one emission step) is in neither: a zone narrower than the carpet
    moves in one step and lying exactly there is found one step later, when that
    emission has become a fixed one.
    """
    k = int(np.searchsorted(pred.t_emit_s, fixed_s, side="right"))
    n = pred.t_emit_s.size
    on_ground = pred.on_ground
    if len(pz) == 0 or not on_ground.any():
        return [], []
    eff = _effective(pred, on_ground)
    nodes = np.ascontiguousarray(strip_nodes, dtype=np.int64)
    fixed = _find(pred, on_ground, eff, 0, k, pz, zones, nodes,
                  focus_threshold) if k > 0 else []
    later = _find(pred, on_ground, eff, k, n, pz, zones, nodes,
                  focus_threshold) if k < n else []
    return fixed, later


def soonest_per_zone(fixed: list[Conflict], later: list[Conflict]) -> list[Conflict]:
    """The conflicts of both parts of :func:`split_conflicts`, each zone at its soonest,
    soonest first."""
    if not fixed or not later:
        return list(fixed or later)
    soonest: dict[int, Conflict] = {}
    for c in fixed + later:
        known = soonest.get(c.zone_index)
        if known is None or c.time_to_contact_s < known.time_to_contact_s:
            soonest[c.zone_index] = c
    return sorted(soonest.values(), key=lambda c: (c.time_to_contact_s, c.zone_index))


def conflicts_from(zones: ZoneSet, best_t: np.ndarray, best_dp: np.ndarray,
                   best_focus: np.ndarray, best_k: np.ndarray | None = None
                   ) -> list[Conflict]:
    """The zones with a finite first-contact time ``best_t`` (s), soonest first, with
    their overpressure ``best_dp`` (Pa), focus flag and the index of the emission whose
    boom touches first (``best_k``, -1 when not given)."""
    out: list[Conflict] = []
    if not np.isfinite(best_t).any():
        return out
    for z in np.argsort(best_t, kind="stable"):
        if not np.isfinite(best_t[z]):
            break
        zone = zones.zones[int(z)]
        out.append(Conflict(int(z), zone.id, zone.name or zone.id, float(best_t[z]),
                            float(best_dp[z]), bool(best_focus[z]),
                            -1 if best_k is None else int(best_k[z])))
    return out


@njit(cache=True)
def _strip_max(a, k, j0, j1):
    """Largest ``a[k, j]`` over the strip's azimuth nodes ``j0 <= j <= j1``."""
    big = a[k, j0]
    for j in range(j0 + 1, j1 + 1):
        big = max(big, a[k, j])
    return big


@njit(cache=True)
def _kernel_contact_time(arrival, k, start, j0, j1, margin, ax, ay, bx, by, x, y, ring_start,
                         part_start, zone_start, z):
    """Arrival time of carpet strip (j0, j1) at zone ``z``, first touched at emission
    ``k`` (the run of valid emissions starting at ``start``, whose ground segments are
    ``ax, ay, bx, by``, m, one per emission from ``start``).

    Between the last clear segment ``k - 1`` and the touching one ``k`` the contact is
    placed by linear interpolation of the segments' distances to the zone (less its
    margin), and the strip's earliest arrival time is interpolated the same way.
    """
    t_k = min(arrival[k, j0], arrival[k, j1])
    if k <= start:
        return t_k
    h = k - start
    t_prev = min(arrival[k - 1, j0], arrival[k - 1, j1])
    d_prev, _ = segment_zone_distance(ax[h - 1], ay[h - 1], bx[h - 1], by[h - 1], x, y,
                                      ring_start, part_start, zone_start, z)
    d_k, _ = segment_zone_distance(ax[h], ay[h], bx[h], by[h], x, y, ring_start, part_start,
                                   zone_start, z)
    d_prev -= margin
    d_k -= margin
    if not (math.isfinite(d_prev) and math.isfinite(d_k)) or d_prev <= 0.0:
        return min(t_prev, t_k)
    if d_k <= 0.0:
        f = d_prev / (d_prev - d_k)
    else:
        f = d_prev / (d_prev + d_k)
    f = min(max(f, 0.0), 1.0)
    return t_prev + f * (t_k - t_prev)


@njit(cache=True)
def _loud_part(dp, k, j0, j1, lim, ax, ay, bx, by, h):
    """Cut segment ``h`` (the strip's ground segment of emission ``k``, m) to the part where
    the overpressure, linear between the strip's end nodes ``j0`` and ``j1``, exceeds
    ``lim`` (Pa); the caller has checked that one end does."""
    d0 = dp[k, j0]
    d1 = dp[k, j1]
    if d0 > lim and d1 > lim:
        return
    if d0 <= lim:  # the loud part ends at j1
        u = (lim - d0) / (d1 - d0)
        ax[h] += u * (bx[h] - ax[h])
        ay[h] += u * (by[h] - ay[h])
    else:  # it starts at j0
        u = (d0 - lim) / (d0 - d1)
        bx[h] = ax[h] + u * (bx[h] - ax[h])
        by[h] = ay[h] + u * (by[h] - ay[h])


@njit(cache=True)
def conflict_kernel(e, n, arrival, dp, focus, on_ground, strip_nodes, x, y, ring_start,
                    part_start, zone_start, zone_bbox, ring_chunk, chunk_edges, chunk_bbox,
                    margins, limits, focus_threshold, first_only, loud_part, best_t, best_dp,
                    best_focus, best_k):
    """First contact of the carpet strips with each zone (see the module notes).

    With ``loud_part`` a strip between neighbouring nodes (``j1 == j0 + 1``) is searched
    only where its overpressure, linear between the two nodes, exceeds the zone's limit
    (:func:`_loud_part`; the resolutions' trials).

    Writes ``best_t`` (s, inf for none), ``best_dp`` (Pa), ``best_focus`` and ``best_k``
    per zone: the overpressure and focus flag are the largest across the touching strip
    (every azimuth node from ``j0`` to ``j1``) at the touching emission and the one before
    it; ``best_k`` is the touching emission's index.
    """
    nz = limits.size
    nk = e.shape[0]
    m = np.empty(nz)
    found = False
    for zl in range(nz):
        lim = limits[zl]
        seen = False
        for zp in range(zl):
            if limits[zp] == lim:
                seen = True
        if seen:
            continue
        for z in range(nz):
            m[z] = margins[z] if limits[z] == lim else -1.0e12
        for s in range(strip_nodes.size - 1):
            j0 = strip_nodes[s]
            j1 = strip_nodes[s + 1]
            k = 0
            while k < nk:
                if not (on_ground[k] and _strip_max(dp, k, j0, j1) > lim
                        and max(arrival[k, j0], arrival[k, j1]) >= 0.0):
                    k += 1
                    continue
                start = k
                while (k < nk and on_ground[k] and _strip_max(dp, k, j0, j1) > lim
                       and max(arrival[k, j0], arrival[k, j1]) >= 0.0):
                    k += 1
                stop = k
                ax = e[start:stop, j0].copy()
                ay = n[start:stop, j0].copy()
                bx = e[start:stop, j1].copy()
                by = n[start:stop, j1].copy()
                if loud_part and j1 == j0 + 1:
                    for h in range(stop - start):
                        _loud_part(dp, start + h, j0, j1, lim, ax, ay, bx, by, h)
                hits = contact.first_contact(ax, ay, bx, by, x, y, part_start, zone_start,
                                        zone_bbox, ring_chunk, chunk_edges, chunk_bbox, m, True)
                for z in range(nz):
                    if hits[z] < 0:
                        continue
                    kk = start + hits[z]
                    t = max(_kernel_contact_time(arrival, kk, start, j0, j1, m[z], ax, ay, bx,
                                                 by, x, y, ring_start, part_start, zone_start,
                                                 z), 0.0)
                    if t < best_t[z]:
                        k0 = kk - 1 if kk > start else kk
                        big = 0.0
                        foc = 1.0
                        for q in range(k0, kk + 1):
                            big = max(big, _strip_max(dp, q, j0, j1))
                            foc = max(foc, _strip_max(focus, q, j0, j1))
                        best_t[z] = t
                        best_dp[z] = big
                        best_focus[z] = foc >= focus_threshold
                        best_k[z] = kk
                        found = True
                if first_only and found:
                    return
