"""Scoring of a flight: the advisor's status segments against the ground truth.

The truth (:func:`advisory.bench.truth.trace_truth`) says which booms reached which zone,
when each was emitted and when it arrived; the advisor's status segments
(:func:`advisory.bench.expect.segments_of`) say what the crew was told. This module puts
the two side by side with the definitions of ``docs/scenarios.md`` ("What simulate
reports"):

* **exposure** (one per zone that some boom reached): first and last arrival, peak
  overpressure, whether it exceeds the zone's limit, ``unavoidable_from_s`` (the emission
  time of the earliest-emitted boom that reaches the zone: from then on a boom is on its
  way and no action can call it back), the first advisory, caution, warning and
  ``unavoidable`` naming the zone, ``lead_time_s`` (``unavoidable_from_s`` minus the
  first alert of any level; negative when the alert came after), ``missed`` spans and
  ``outcome``.
* **missed span**: a time where the status said ``clear`` or ``no_boom`` while a boom
  that reaches the zone was on its way into it (between its emission and its arrival).
* **outcome**: ``missed`` (no alert naming the zone before its first arrival), ``late``
  (alerted, but ``lead_time_s`` shorter than the crew's reaction time), ``alerted``.
* **nuisance alert**: an alert episode (consecutive alert segments naming one zone)
  naming a zone that no boom reached.
* **unavailable time**: the time the status said ``unavailable``.

All times are seconds after the start of the flight (the segments' clock); the truth's
clock is shifted by ``t0_s`` onto it. Plain interval arithmetic; common practice, no
source.

This module is the bench's; the core never imports it. ADVISORY AID ONLY: not certified
flight software.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from advisory.bench.expect import Segment
from advisory.bench.truth import Truth
from advisory.bench.truth_zones import TruthZone
from advisory.schema import CONFLICT_STATUSES

#: Statuses that tell the crew no boom threatens a zone (a boom on its way then is missed).
QUIET_STATUSES = ("clear", "no_boom")
#: Values of an exposure's ``outcome``.
OUTCOMES = ("missed", "late", "alerted")

Span = tuple[float, float]


@dataclass
class FlightScore:
    """The score of one flight (see the module notes for every definition).

    Attributes
    ----------
    exposures : list of dict
        One per zone some boom reached, with the fields of ``docs/scenarios.md``:
        ``zone_id``, ``first_arrival_s``, ``last_arrival_s``, ``peak_psf``,
        ``exceeds_limit``, ``unavoidable_from_s``, ``first_advisory_s``,
        ``first_caution_s``, ``first_warning_s``, ``first_unavoidable_s``,
        ``lead_time_s``, ``missed``
        (list of ``[t0_s, t1_s]``), ``outcome``; and two extra fields,
        ``first_arrival_inside_s`` and ``peak_psf_inside``, for the booms inside the zone
        itself rather than its margin; times in s after the flight's start, None where
        there is none.
    nuisance_alerts : list of dict
        One per alert episode naming a zone no boom reached: ``zone_id``, ``t0_s``,
        ``t1_s``, ``level`` (the highest status of the episode).
    unavailable_s : float
        Time the status said ``unavailable``, s.
    """

    exposures: list[dict[str, Any]] = field(default_factory=list)
    nuisance_alerts: list[dict[str, Any]] = field(default_factory=list)
    unavailable_s: float = 0.0

    def as_json(self) -> dict[str, Any]:
        """Plain JSON-ready fields."""
        return {"exposures": [dict(e) for e in self.exposures],
                "nuisance_alerts": [dict(n) for n in self.nuisance_alerts],
                "unavailable_s": self.unavailable_s}


def merge_spans(spans: Sequence[Span], gap_s: float = 0.0) -> list[Span]:
    """Union of closed intervals, sorted; intervals closer than ``gap_s`` are joined."""
    out: list[list[float]] = []
    for a, b in sorted((float(a), float(b)) for a, b in spans if b >= a):
        if out and a <= out[-1][1] + gap_s:
            out[-1][1] = max(out[-1][1], b)
        else:
            out.append([a, b])
    return [(a, b) for a, b in out]


def intersect_spans(a: Sequence[Span], b: Sequence[Span]) -> list[Span]:
    """Intersection of two sorted lists of disjoint intervals (empty overlaps dropped)."""
    out: list[Span] = []
    i = k = 0
    while i < len(a) and k < len(b):
        lo, hi = max(a[i][0], b[k][0]), min(a[i][1], b[k][1])
        if hi > lo:
            out.append((lo, hi))
        if a[i][1] < b[k][1]:
            i += 1
        else:
            k += 1
    return out


def quiet_spans(segments: Sequence[Segment]) -> list[Span]:
    """Spans where the status said ``clear`` or ``no_boom``, merged."""
    return merge_spans([(s.t_start_s, s.t_end_s) for s in segments
                        if s.status in QUIET_STATUSES])


def _first_alerts(segments: Sequence[Segment], zone_id: str) -> dict[str, float | None]:
    first: dict[str, float | None] = {st: None for st in CONFLICT_STATUSES}
    for s in segments:
        if s.zone_id == zone_id and s.status in first and first[s.status] is None:
            first[s.status] = s.t_start_s
    return first


def zone_hits(truth: Truth, zone: TruthZone
               ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Emission times, arrivals (s, truth clock), psf of the booms landing in ``zone`` or
    its margin, and which of them land inside the zone itself."""
    ev = truth.events.get(float(zone.ground_elevation_m))
    if ev is None or len(ev) == 0:
        return np.zeros(0), np.zeros(0), np.zeros(0), np.zeros(0, dtype=bool)
    hit = zone.covers(ev.east_m, ev.north_m)
    inside = replace(zone, margin_m=0.0).covers(ev.east_m[hit], ev.north_m[hit])
    return ev.emission_time_s[hit], ev.arrival_s[hit], ev.overpressure_psf[hit], inside


def score_exposure(zone: TruthZone, emission_s: np.ndarray, arrival_s: np.ndarray,
                   psf: np.ndarray, segments: Sequence[Segment], reaction_s: float,
                   quiet: Sequence[Span] | None = None,
                   inside: np.ndarray | None = None) -> dict[str, Any]:
    """The exposure dict of one zone from its booms (times already on the flight's clock).

    ``emission_s``, ``arrival_s`` (s) and ``psf`` are the booms landing in the zone or its
    margin (at least one); ``quiet`` the spans of :func:`quiet_spans` (computed when None);
    ``inside`` marks the booms inside the zone itself (not only its margin): their first
    arrival and peak are the extra fields ``first_arrival_inside_s`` and
    ``peak_psf_inside`` (None when none lands inside; both absent when ``inside`` is None).
    """
    if emission_s.size == 0:
        raise ValueError(f"zone {zone.zone_id!r}: no boom reaches it, nothing to score")
    quiet = quiet_spans(segments) if quiet is None else quiet
    first_arrival = float(np.min(arrival_s))
    unavoidable = float(np.min(emission_s))
    peak = float(np.max(psf))
    on_way = merge_spans(list(zip(emission_s.tolist(), arrival_s.tolist(), strict=True)))
    missed = intersect_spans(on_way, quiet)
    first = _first_alerts(segments, zone.zone_id)
    alerts = [t for t in first.values() if t is not None]
    first_alert = min(alerts) if alerts else None
    lead = None if first_alert is None else unavoidable - first_alert
    if first_alert is None or first_alert >= first_arrival:
        outcome = "missed"
    elif lead is not None and lead < reaction_s:
        outcome = "late"
    else:
        outcome = "alerted"
    extra: dict[str, Any] = {}
    if inside is not None:
        some = bool(np.any(inside))
        extra = {"first_arrival_inside_s": float(np.min(arrival_s[inside])) if some else None,
                 "peak_psf_inside": float(np.max(psf[inside])) if some else None}
    return {
        "zone_id": zone.zone_id,
        "first_arrival_s": first_arrival,
        "last_arrival_s": float(np.max(arrival_s)),
        "peak_psf": peak,
        "exceeds_limit": bool(peak > zone.limit_psf),
        "unavoidable_from_s": unavoidable,
        "first_advisory_s": first["advisory"],
        "first_caution_s": first["caution"],
        "first_warning_s": first["warning"],
        "first_unavoidable_s": first["unavoidable"],
        "lead_time_s": lead,
        "missed": [[a, b] for a, b in missed],
        "outcome": outcome,
        **extra,
    }


def alert_episodes(segments: Sequence[Segment]) -> list[dict[str, Any]]:
    """Runs of consecutive alert segments naming one zone: ``zone_id``, ``t0_s``, ``t1_s``,
    ``level`` (the highest status of the run)."""
    rank = {st: i for i, st in enumerate(CONFLICT_STATUSES)}
    out: list[dict[str, Any]] = []
    prev: Segment | None = None
    for s in segments:
        if s.status in rank:
            ep = out[-1] if out else None
            joined = (ep is not None and prev is not None and prev.status in rank
                      and prev.zone_id == s.zone_id)
            if ep is not None and joined:
                ep["t1_s"] = s.t_end_s
                if rank[s.status] > rank[ep["level"]]:
                    ep["level"] = s.status
            else:
                out.append({"zone_id": s.zone_id, "t0_s": s.t_start_s, "t1_s": s.t_end_s,
                            "level": s.status})
        prev = s
    return out


def score_flight(truth: Truth, segments: Sequence[Segment], reaction_s: float,
                 t0_s: float = 0.0, *, zones: Sequence[TruthZone]) -> FlightScore:
    """Score the advisor's status ``segments`` against ``truth`` (module notes).

    Parameters
    ----------
    truth : Truth
        The ground truth of the flight (:func:`advisory.bench.truth.trace_truth`).
    segments : list of Segment
        The advisory frames' status segments, s after the flight's start
        (:func:`advisory.bench.expect.segments_of`).
    reaction_s : float
        The crew's reaction time, s: an alert with a shorter lead time is ``late``.
    t0_s : float
        The truth's clock at the flight's start, s: truth times minus ``t0_s`` are on the
        segments' clock.
    zones : sequence of TruthZone
        The zones given to ``trace_truth`` (the truth keeps only their exposures; the
        missed spans need each boom's emission and arrival in the zone).

    Returns
    -------
    FlightScore
    """
    if not math.isfinite(reaction_s) or reaction_s < 0.0:
        raise ValueError(f"reaction_s: {reaction_s} must be a number >= 0")
    quiet = quiet_spans(segments)
    exposures = []
    reached: set[str] = set()
    for zone in zones:
        emitted, arrival, psf, inside = zone_hits(truth, zone)
        if emitted.size == 0:
            continue
        reached.add(zone.zone_id)
        exposures.append(score_exposure(zone, emitted - t0_s, arrival - t0_s, psf,
                                        segments, reaction_s, quiet, inside))
    nuisance = [ep for ep in alert_episodes(segments) if ep["zone_id"] not in reached]
    unavailable = sum(s.t_end_s - s.t_start_s for s in segments if s.status == "unavailable")
    return FlightScore(exposures, nuisance, float(unavailable))
