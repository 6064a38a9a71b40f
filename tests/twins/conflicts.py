"""Readable numpy twin of the conflict search (``advisory/pipeline/conflicts.py``)."""

from __future__ import annotations

import math

import numpy as np

from advisory.pipeline.conflicts import conflicts_from
from advisory.pipeline.footprint import CarpetPrediction
from advisory.pipeline.results import Conflict
from advisory.pipeline.zones import ProjectedZones, ZoneSet

_EXCLUDE = -1.0e12  # margin that takes a zone out of a contact search


def find_conflicts_twin(pred: CarpetPrediction, pz: ProjectedZones, zones: ZoneSet,
                         strip_nodes: np.ndarray, focus_threshold: float,
                         first_only: bool = False, loud_part: bool = False
                         ) -> list[Conflict]:
    """Zones the predicted carpet reaches, soonest first: readable twin of
    :func:`advisory.pipeline.conflicts.find_conflicts` (and its kernel).

    The carpet is cut into strips between the azimuth nodes ``strip_nodes``; each strip
    is a series of ground segments over emission time, tested against the zones (within
    each zone's margin, the band between successive emissions included). A zone with an
    overpressure limit is tested only against strip segments where the focus-amplified
    overpressure somewhere across the strip (end nodes and the nodes between) exceeds
    the limit (conservative). With ``loud_part``, a strip between two neighbouring nodes
    is cut to the part where the overpressure, linear between its two nodes, exceeds the
    limit (the resolutions' trials).
    """
    n_zones = len(pz)
    if n_zones == 0 or not pred.on_ground.any():
        return []
    dp = pred.effective_overpressure_pa
    limits = pz.limit_pa
    groups = sorted(set(float(v) for v in limits))
    best_t = np.full(n_zones, np.inf)
    best_dp = np.zeros(n_zones)
    best_focus = np.zeros(n_zones, dtype=bool)
    best_k = np.full(n_zones, -1, dtype=np.int64)
    for lim in groups:
        margin = np.where(limits == lim, pz.margin_m, _EXCLUDE)
        for j0, j1 in zip(strip_nodes[:-1], strip_nodes[1:]):
            seg_dp = dp[:, j0:j1 + 1].max(axis=1)  # the whole strip, nodes between too
            still_arriving = np.maximum(pred.arrival_s[:, j0], pred.arrival_s[:, j1]) >= 0.0
            valid = pred.on_ground & (seg_dp > lim) & still_arriving
            if not valid.any():
                continue
            for start, stop in _runs(valid):
                ax = pred.east_m[start:stop, j0]
                ay = pred.north_m[start:stop, j0]
                bx = pred.east_m[start:stop, j1]
                by = pred.north_m[start:stop, j1]
                if loud_part and j1 == j0 + 1:
                    ax, ay, bx, by = _loud_part(dp[start:stop, j0], dp[start:stop, j1], lim,
                                                ax, ay, bx, by)
                hits = pz.first_contact(ax, ay, bx, by, swept=True, margin_m=margin)
                for z in np.nonzero(hits >= 0)[0]:
                    k = start + int(hits[z])
                    ks = [k - 1, k] if k > start else [k]
                    t = max(_contact_time(pred, pz, int(z), k, start, j0, j1, margin[z],
                                          (ax, ay, bx, by)), 0.0)
                    if t < best_t[z]:
                        best_t[z] = t
                        best_dp[z] = float(np.max(dp[ks][:, j0:j1 + 1]))
                        best_focus[z] = bool(np.max(pred.focus_factor[ks][:, j0:j1 + 1])
                                             >= focus_threshold)
                        best_k[z] = k
                if first_only and np.isfinite(best_t).any():
                    break
            if first_only and np.isfinite(best_t).any():
                break
        if first_only and np.isfinite(best_t).any():
            break
    return conflicts_from(zones, best_t, best_dp, best_focus, best_k)


def _loud_part(d0: np.ndarray, d1: np.ndarray, lim: float, ax: np.ndarray, ay: np.ndarray,
               bx: np.ndarray, by: np.ndarray) -> tuple[np.ndarray, ...]:
    """The strip's ground segments (one per emission, from node 0 at ``a`` to node 1 at
    ``b``) cut to the part where the overpressure, linear from ``d0`` to ``d1`` (Pa),
    exceeds ``lim`` (one of the two does)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        u_start = np.where(d0 > lim, 0.0, (lim - d0) / (d1 - d0))
        u_end = np.where(d1 > lim, 1.0, (d0 - lim) / (d0 - d1))
    dx, dy = bx - ax, by - ay
    return ax + u_start * dx, ay + u_start * dy, ax + u_end * dx, ay + u_end * dy


def _contact_time(pred: CarpetPrediction, pz: ProjectedZones, z: int, k: int, start: int,
                  j0: int, j1: int, margin: float,
                  run: tuple[np.ndarray, ...]) -> float:
    """Arrival time of the carpet strip (j0, j1) at zone ``z``, first touched at ``k``
    (``run``: the strip's ground segments ``ax, ay, bx, by`` of the emissions from
    ``start``).

    Between the last clear segment ``k - 1`` and the touching one ``k`` the contact is
    placed by linear interpolation of the segments' distances to the zone (less its
    margin), and the strip's earliest arrival time is interpolated the same way.
    """
    t_k = float(np.nanmin(pred.arrival_s[k, [j0, j1]]))
    if k <= start:
        return t_k
    t_prev = float(np.nanmin(pred.arrival_s[k - 1, [j0, j1]]))
    ax, ay, bx, by = run
    h = k - start
    d_prev, _ = pz.segment_distance(z, ax[h - 1], ay[h - 1], bx[h - 1], by[h - 1])
    d_k, _ = pz.segment_distance(z, ax[h], ay[h], bx[h], by[h])
    d_prev -= margin
    d_k -= margin
    if not (math.isfinite(d_prev) and math.isfinite(d_k)) or d_prev <= 0.0:
        return min(t_prev, t_k)
    f = d_prev / (d_prev - d_k) if d_k <= 0.0 else d_prev / (d_prev + d_k)
    return t_prev + min(max(f, 0.0), 1.0) * (t_k - t_prev)


def _runs(mask: np.ndarray) -> list[tuple[int, int]]:
    """Half-open index ranges of consecutive True values."""
    idx = np.flatnonzero(np.diff(np.concatenate([[0], mask.astype(np.int8), [0]])))
    return list(zip(idx[::2].tolist(), idx[1::2].tolist()))
